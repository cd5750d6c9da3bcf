//! `seedline status`: which shards and chunks of a null run are done, missing or damaged, read
//! from the chunk manifest (rows and CRC-32 per chunk) and the shard layout; exit codes 0
//! (complete), 3 (not complete) and 2 (bad input).

use seedline::batch::BatchConfig;
use seedline::engine::EngineChoice;
use seedline::mutation::Count;
use seedline::null::{self, NullConfig};
use seedline::scenario::Scenario;
use std::path::{Path, PathBuf};
use std::process::Command;

const YAML: &str = "seed: 5\ndemes: [{name: fen, size: 80, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: fen, count: 6}]\nmutation: {rate: 1.0e-6, sites: 20000}\n";

fn tempdir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("seedline-status-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Shard `i` of 4 of 300 replicates in chunks of 25: 75 replicates, 3 chunks.
fn shard(s: &Scenario, dir: &Path, i: u64) {
    let cfg = NullConfig {
        replicates: 300,
        shard: (i, 4),
        chunk: 25,
        count: Count::Poisson,
        max_new_chunks: None,
        engine: EngineChoice::Exact,
    };
    null::run(s, cfg, None, BatchConfig::default(), &dir.join(format!("shard_{i}")), &|_| {}).unwrap();
}

/// `seedline status ARGS` in `dir`: exit code and stdout + stderr.
fn status(dir: &Path, args: &[&str]) -> (Option<i32>, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_seedline")).arg("status").args(args).current_dir(dir).output().unwrap();
    (o.status.code(), format!("{}{}", String::from_utf8_lossy(&o.stdout), String::from_utf8_lossy(&o.stderr)))
}

#[test]
fn status_reports_missing_damaged_and_absent_shards_and_clears_after_a_rerun() {
    let s = Scenario::from_yaml_str(YAML, "t").unwrap();
    let d = tempdir("shards");
    for i in 0..4 {
        shard(&s, &d.join("null"), i);
    }
    let (code, text) = status(&d, &["null"]);
    assert_eq!(code, Some(0), "{text}");
    assert!(text.contains("complete: ready to merge"), "{text}");
    assert_eq!(text.matches(" done ").count(), 4, "{text}");

    // Shard 1 loses its middle chunk; one byte of shard 2's first chunk changes (same length,
    // so only the CRC-32 in the chunk manifest can tell); shard 3 never ran.
    std::fs::remove_file(d.join("null/shard_1/chunk_000001.tsv")).unwrap();
    let p = d.join("null/shard_2/chunk_000000.tsv");
    let mut bytes = std::fs::read(&p).unwrap();
    let last_digit = bytes.iter().rposition(u8::is_ascii_digit).unwrap();
    bytes[last_digit] = if bytes[last_digit] == b'7' { b'8' } else { b'7' };
    std::fs::write(&p, bytes).unwrap();
    std::fs::remove_dir_all(d.join("null/shard_3")).unwrap();

    let st = null::status(&[d.join("null")]).unwrap();
    assert!(!st.is_complete());
    assert_eq!(st.shards, Some(4));
    assert_eq!(st.missing_shards, vec![3]);
    assert_eq!(st.runs[0].done_chunks, 3);
    assert!(st.runs[0].is_complete());
    assert_eq!((st.runs[1].done_chunks, st.runs[1].missing.clone()), (2, vec![(1, 2)]));
    assert_eq!((st.runs[2].done_chunks, st.runs[2].damaged.len()), (2, 1));
    assert!(st.runs[2].damaged[0].starts_with("chunk_000000.tsv"), "{:?}", st.runs[2].damaged);
    assert_eq!(st.to_rerun(), vec![1, 2, 3]);

    let (code, text) = status(&d, &["null/shard_0", "null/shard_1", "null/shard_2"]);
    assert_eq!(code, Some(i32::from(null::INCOMPLETE_EXIT)), "{text}");
    assert!(text.contains("missing: 1 chunk(s): chunk_000001.tsv"), "{text}");
    assert!(text.contains("damaged: chunk_000000.tsv"), "{text}");
    assert!(text.contains("shard 3/4    missing"), "{text}");
    assert!(text.contains("resubmit index 1-3)"), "{text}");
    // The same as JSON, for scripts; the same exit code.
    let (code, text) = status(&d, &["null/shard_0", "null/shard_1", "null/shard_2", "--json"]);
    assert_eq!(code, Some(i32::from(null::INCOMPLETE_EXIT)), "{text}");
    let j: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(j["complete"], false);
    assert_eq!(j["rerun"], serde_json::json!([1, 2, 3]));
    assert_eq!(j["rerun_array"], "1-3");
    let states: Vec<&str> = j["runs"].as_array().unwrap().iter().map(|r| r["state"].as_str().unwrap()).collect();
    assert_eq!(states, ["done", "partial", "damaged"]);
    assert_eq!(j["runs"][1]["missing"], serde_json::json!([[1, 2]]));
    assert_eq!(j["missing_shards"], serde_json::json!([3]));
    // Merging now is refused.
    let o = Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args(["merge", "null/shard_0", "null/shard_1", "null/shard_2", "--out", "all"])
        .current_dir(&d)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(!d.join("all/null.tsv").exists());

    // The same commands again: complete, and the merge equals an unsharded run's.
    for i in 1..4 {
        shard(&s, &d.join("null"), i);
    }
    assert_eq!(status(&d, &["null"]).0, Some(0));
    let one = NullConfig {
        replicates: 300,
        shard: (0, 1),
        chunk: 40,
        count: Count::Poisson,
        max_new_chunks: None,
        engine: EngineChoice::Exact,
    };
    null::run(&s, one, None, BatchConfig::default(), &d.join("one"), &|_| {}).unwrap();
    null::merge(&[d.join("one")], &d.join("one_merged")).unwrap();
    let shards: Vec<PathBuf> = (0..4).map(|i| d.join(format!("null/shard_{i}"))).collect();
    null::merge(&shards, &d.join("all")).unwrap();
    assert_eq!(std::fs::read(d.join("all/null.tsv")).unwrap(), std::fs::read(d.join("one_merged/null.tsv")).unwrap());
    // A merged directory is checked as a whole; beside its shards it is one more complete run.
    let (code, text) = status(&d, &["all"]);
    assert_eq!(code, Some(0), "{text}");
    assert!(text.contains("merged"), "{text}");
}

#[test]
fn status_reads_the_chunk_manifest_and_the_per_locus_files() {
    let s = Scenario::from_yaml_str(&format!("{YAML}loci: 2\n"), "t").unwrap();
    let d = tempdir("ledger");
    let cfg = NullConfig {
        replicates: 60,
        shard: (0, 1),
        chunk: 20,
        count: Count::Poisson,
        max_new_chunks: Some(2),
        engine: EngineChoice::Exact,
    };
    null::run(&s, cfg, None, BatchConfig::default(), &d.join("run"), &|_| {}).unwrap();
    // Stopped after 2 of 3 chunks (--max-chunks): the last is missing.
    let st = null::status(&[d.join("run")]).unwrap();
    assert_eq!((st.runs[0].done_chunks, st.runs[0].total_chunks, st.runs[0].missing.clone()), (2, 3, vec![(2, 3)]));
    // A chunk whose line in the chunk manifest is lost (the file is listed before its rename,
    // so only damage does this) is not trusted; neither is a chunk whose per-locus file is cut short.
    let ledger = std::fs::read_to_string(d.join("run/chunks.tsv")).unwrap();
    let kept: String =
        ledger.lines().filter(|l| !l.starts_with("chunk_000001.tsv")).map(|l| format!("{l}\n")).collect();
    std::fs::write(d.join("run/chunks.tsv"), kept).unwrap();
    let loci = std::fs::read_to_string(d.join("run/loci_000000.tsv")).unwrap();
    std::fs::write(d.join("run/loci_000000.tsv"), &loci[..loci.len() / 2]).unwrap();
    let st = null::status(&[d.join("run")]).unwrap();
    let damaged = &st.runs[0].damaged;
    assert_eq!(damaged.len(), 2, "{damaged:?}");
    assert!(damaged[0].starts_with("loci_000000.tsv holds"), "{damaged:?}");
    assert!(damaged[1].contains("chunk_000001.tsv is not in the chunk manifest"), "{damaged:?}");
    assert_eq!(st.runs[0].done_chunks, 0);
    let (code, text) = status(&d, &["run"]);
    assert_eq!(code, Some(3), "{text}");
    // The same command redoes both and finishes.
    let cfg = NullConfig { max_new_chunks: None, ..cfg };
    let r = null::run(&s, cfg, None, BatchConfig::default(), &d.join("run"), &|_| {}).unwrap();
    assert_eq!((r.resumed_chunks, r.written_chunks, r.redone.len()), (0, 3, 2));
    assert_eq!(status(&d, &["run"]).0, Some(0));
    // A kill between a file's line in the chunk manifest and its rename into place (the
    // order the run writes them in) leaves a listed chunk that is absent: it is missing, not
    // damaged, and a rerun writes it again, identical to the first time.
    let before = std::fs::read(d.join("run/chunk_000002.tsv")).unwrap();
    std::fs::remove_file(d.join("run/chunk_000002.tsv")).unwrap();
    let st = null::status(&[d.join("run")]).unwrap();
    assert!(st.runs[0].damaged.is_empty(), "{:?}", st.runs[0].damaged);
    assert_eq!(st.runs[0].missing, vec![(2, 3)]);
    let r = null::run(&s, cfg, None, BatchConfig::default(), &d.join("run"), &|_| {}).unwrap();
    assert_eq!((r.resumed_chunks, r.written_chunks), (2, 1));
    assert_eq!(std::fs::read(d.join("run/chunk_000002.tsv")).unwrap(), before);
    assert_eq!(status(&d, &["run"]).0, Some(0));
}

#[test]
fn status_refuses_what_is_not_one_null_run() {
    let s = Scenario::from_yaml_str(YAML, "t").unwrap();
    let d = tempdir("bad");
    shard(&s, &d, 0);
    let other = Scenario::from_yaml_str(&YAML.replace("seed: 5", "seed: 6"), "t").unwrap();
    let cfg = NullConfig {
        replicates: 300,
        shard: (1, 4),
        chunk: 25,
        count: Count::Poisson,
        max_new_chunks: None,
        engine: EngineChoice::Exact,
    };
    null::run(&other, cfg, None, BatchConfig::default(), &d.join("shard_1"), &|_| {}).unwrap();
    let (code, text) = status(&d, &["shard_0", "shard_1"]);
    assert_eq!(code, Some(2), "{text}");
    assert!(text.contains("shard_1") && text.contains("seed differ"), "{text}");
    std::fs::create_dir_all(d.join("empty")).unwrap();
    for dir in ["empty", "no_such_dir"] {
        let (code, text) = status(&d, &[dir]);
        assert_eq!(code, Some(2), "{text}");
        assert!(text.contains(dir) && text.contains("no null.json"), "{text}");
    }
    std::fs::write(d.join("shard_0/null.json"), "{not json").unwrap();
    let (code, text) = status(&d, &["shard_0"]);
    assert_eq!(code, Some(2), "{text}");
    assert!(text.contains("null.json was not written by seedline"), "{text}");
    // The same shard twice is not ready to merge.
    let (code, text) = status(&d, &["shard_1", "shard_1"]);
    assert_eq!(code, Some(3), "{text}");
    assert!(text.contains("held by more than one directory"), "{text}");
}
