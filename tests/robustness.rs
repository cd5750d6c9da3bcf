//! Regression tests of issue 12 (no panic, no hang, no silent mix of runs, a word while it
//! works) and issue 11 item 6 (`test` holds data only against a null made for it), each
//! named after its case. Runs that used to hang run under a generous time limit: the test
//! asserts that the run finished (and how), not how fast.

mod common;
use common::{Bounded, files_below, seedline_bounded, tempdir, write};
use std::path::Path;

/// A bound far above any of these runs' expected time, even on a loaded machine.
const LIMIT: u64 = 300;

fn run(dir: &Path, args: &[&str]) -> Bounded {
    let r = seedline_bounded(dir, args, &[], LIMIT);
    assert!(!r.timed_out, "`seedline {}` did not finish within {LIMIT} s", args.join(" "));
    assert!(!r.stderr.contains("panicked"), "`seedline {}` panicked:\n{}", args.join(" "), r.stderr);
    r
}

fn ok(dir: &Path, args: &[&str]) -> Bounded {
    let r = run(dir, args);
    assert_eq!(r.code, Some(0), "`seedline {}` failed:\n{}", args.join(" "), r.stderr);
    r
}

fn bad(dir: &Path, args: &[&str], words: &[&str]) -> Bounded {
    let r = run(dir, args);
    assert_eq!(r.code, Some(2), "`seedline {}` should exit 2:\n{}{}", args.join(" "), r.stdout, r.stderr);
    for w in words {
        assert!(r.stderr.contains(w), "`seedline {}`: `{w}` missing from:\n{}", args.join(" "), r.stderr);
    }
    r
}

fn no_mutations(yaml: &str) -> String {
    yaml.lines().filter(|l| !l.starts_with("mutation:")).map(|l| format!("{l}\n")).collect()
}

const POND: &str = "seed: 3\ndemes: [{name: pond, size: 100, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: pond, count: 6}]\nmutation: {rate: 1.0e-5, sites: 10000}\n";

/// A complete null run `nul` of 60 replicates in chunks of 20, and its merge `merged`.
fn null_run(d: &Path) {
    write(d, "pond.yaml", POND);
    ok(d, &["null", "pond.yaml", "--replicates", "60", "--chunk", "20", "--out", "nul", "-q"]);
    ok(d, &["merge", "nul", "--out", "merged", "-q"]);
}

#[test]
fn inf_nan_and_words_in_a_null_are_refused_naming_file_line_and_column() {
    let d = tempdir("rob-inf");
    null_run(&d);
    write(&d, "obs.json", r#"{"statistics": {"pi": 3.5, "segregating_sites": 12}}"#);
    for (i, cell) in ["inf", "-inf", "NaN", "abc"].into_iter().enumerate() {
        let merged = std::fs::read_to_string(d.join("merged/null.tsv")).unwrap();
        let mut lines: Vec<String> = merged.lines().map(String::from).collect();
        let mut fields: Vec<String> = lines[3].split('\t').map(String::from).collect();
        let j = lines[0].split('\t').position(|c| c == "pi").unwrap();
        fields[j] = cell.to_string();
        lines[3] = fields.join("\t");
        let dir = format!("bad{i}");
        std::fs::create_dir_all(d.join(&dir)).unwrap();
        std::fs::copy(d.join("merged/null.json"), d.join(&dir).join("null.json")).unwrap();
        std::fs::write(d.join(&dir).join("null.tsv"), lines.join("\n") + "\n").unwrap();
        let out = format!("t{i}");
        bad(&d, &["test", "obs.json", "--null", &dir, "--out", &out], &["null.tsv", "line 4", "column pi", cell]);
        assert!(!d.join(&out).exists(), "nothing written for a refused null");
    }
    // The same in a chunk of an unmerged run.
    let chunk = d.join("nul/chunk_000001.tsv");
    let text = std::fs::read_to_string(&chunk).unwrap().replacen("\t1\t", "\tNaN\t", 1);
    std::fs::write(&chunk, text).unwrap();
    bad(&d, &["test", "obs.json", "--null", "nul", "--out", "t9"], &["chunk_000001.tsv", "line", "column", "NaN"]);
    // And a non-number in the observed file.
    write(&d, "obs_bad.json", r#"{"statistics": {"pi": "abc"}}"#);
    bad(&d, &["test", "obs_bad.json", "--null", "merged", "--out", "t10"], &["obs_bad.json", "statistics.pi"]);
}

#[test]
fn a_mixture_part_with_mean_1e19_gives_no_panic() {
    let d = tempdir("rob-mix");
    write(
        &d,
        "mix.yaml",
        "replicates: 3\ndemes: [{name: pond, size: 100, dormancy: {law: mixture, parts: [{law: geometric, mean: 1.0e19, weight: 0.5}, {law: none, weight: 0.5}]}}]\nsamples: [{deme: pond, count: 4}]\n",
    );
    ok(&d, &["predict", "mix.yaml"]);
    ok(&d, &["predict", "mix.yaml", "--json"]);
    ok(&d, &["simulate", "mix.yaml", "--out", "run", "-q"]);
}

#[test]
fn a_trillion_sites_is_refused_with_the_memory_it_needs() {
    // E[L] = 2 N a_8 = 5186 generations at N = 1000: 5.2e9 mutations of 88 bytes, 456 GB.
    let d = tempdir("rob-sites");
    write(
        &d,
        "s.yaml",
        "replicates: 2\ndemes: [{name: pond, size: 1000}]\nsamples: [{deme: pond, count: 8}]\nmutation: {rate: 1.0e-6, sites: 999999999999}\n",
    );
    bad(&d, &["simulate", "s.yaml", "--threads", "1", "--out", "run"], &["s.yaml", "mutation.sites", "GB", "memory"]);
    assert!(!d.join("run").exists());
}

#[test]
fn demes_without_a_migration_path_are_a_forest_at_once() {
    let d = tempdir("rob-islands");
    let yaml = "replicates: 5\nhorizon: 1.0e15\ndemes: [{name: a, size: 100, dormancy: {law: geometric, mean: 2}}, {name: b, size: 100}]\nsamples: [{deme: a, count: 3}, {deme: b, count: 2}]\n";
    write(&d, "islands.yaml", yaml);
    let r = ok(&d, &["simulate", "islands.yaml", "--engine", "exact", "--out", "run"]);
    assert!(r.stderr.contains("never meet") && r.stderr.contains("{a}, {b}"), "{}", r.stderr);
    let table = std::fs::read_to_string(d.join("run/replicates.tsv")).unwrap();
    for line in table.lines().skip(1) {
        let f: Vec<&str> = line.split('\t').collect();
        assert_eq!((f[1], f[2]), ("", "2"), "a forest of two roots, no tmrca: {line}");
    }
    // With recombination (the ARG engine) too.
    write(
        &d,
        "islands-r.yaml",
        &format!("{yaml}mutation: {{rate: 1.0e-7, sites: 200}}\nrecombination: {{rate: 1.0e-3}}\n"),
    );
    ok(&d, &["simulate", "islands-r.yaml", "--out", "run-r", "-q"]);
}

#[test]
fn a_forest_of_unreachable_demes_does_not_depend_on_the_horizon() {
    // Exact property: above the last merge a lone lineage adds no node or edge, so stopping
    // it at once changes nothing but the step count. Same seed, horizons 1e5 and 1e15: the
    // same trees, byte for byte.
    let d = tempdir("rob-horizon");
    let body = "seed: 11\nreplicates: 20\ndemes: [{name: a, size: 60, dormancy: {law: uniform, max: 3}}, {name: b, size: 40}, {name: c, size: 50}]\nmigration: [{from: a, to: c, rate: 0.05}, {from: c, to: a, rate: 0.02}]\nsamples: [{deme: a, count: 3}, {deme: b, count: 3}, {deme: c, count: 2}]\n";
    write(&d, "h5.yaml", &format!("horizon: 1.0e5\n{body}"));
    write(&d, "h15.yaml", &format!("horizon: 1.0e15\n{body}"));
    ok(&d, &["simulate", "h5.yaml", "--engine", "exact", "--out", "h5", "-q"]);
    ok(&d, &["simulate", "h15.yaml", "--engine", "exact", "--out", "h15", "-q"]);
    assert_eq!(std::fs::read(d.join("h5/trees.nwk")).unwrap(), std::fs::read(d.join("h15/trees.nwk")).unwrap());
}

#[test]
fn astronomical_exact_runs_are_refused_before_they_start() {
    let d = tempdir("rob-astro");
    // N(t) = 1000 e^t going back: a pair almost never meets; 4 lineages walk to 1e15.
    write(
        &d,
        "shrink.yaml",
        "horizon: 1.0e15\ndemes: [{name: a, size: [{generations_ago: 0, size: 1000, growth: -1}]}]\nsamples: [{deme: a, count: 4}]\n",
    );
    bad(
        &d,
        &["simulate", "shrink.yaml", "--engine", "exact", "--out", "run"],
        &["shrink.yaml", "lineage steps", "horizon"],
    );
    write(
        &d,
        "huge.yaml",
        "horizon: 1.0e15\ndemes: [{name: a, size: 1.0e18, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 4}]\n",
    );
    bad(&d, &["simulate", "huge.yaml", "--engine", "exact", "--out", "run"], &["huge.yaml", "--engine approx"]);
    write(
        &d,
        "huge-m.yaml",
        "horizon: 1.0e15\ndemes: [{name: a, size: 1.0e18, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 4}]\nmutation: {rate: 1.0e-20, sites: 100}\n",
    );
    bad(
        &d,
        &["null", "huge-m.yaml", "--replicates", "10", "--engine", "exact", "--out", "nul"],
        &["huge-m.yaml", "lineage steps"],
    );
    // With `auto` (the default) the null runs on the approximate engine instead.
    ok(&d, &["null", "huge-m.yaml", "--replicates", "10", "--out", "nul-auto", "-q"]);
    assert!(!d.join("run").exists() && !d.join("nul").exists());
    // Without dormancy the engine skips ahead: N = 1e18 is cheap.
    write(
        &d,
        "wf.yaml",
        "horizon: 1.0e15\nreplicates: 5\ndemes: [{name: a, size: 1.0e18}]\nsamples: [{deme: a, count: 4}]\n",
    );
    ok(&d, &["simulate", "wf.yaml", "--engine", "exact", "--out", "wf", "-q"]);
}

fn ring(demes: usize) -> String {
    let mut s = String::from("replicates: 2\ndemes:\n");
    for i in 0..demes {
        s.push_str(&format!("  - {{name: d{i}, size: 50}}\n"));
    }
    s.push_str("migration:\n");
    for i in 0..demes {
        s.push_str(&format!("  - {{from: d{i}, to: d{}, rate: 0.01}}\n", (i + 1) % demes));
        s.push_str(&format!("  - {{from: d{i}, to: d{}, rate: 0.01}}\n", (i + demes - 1) % demes));
    }
    s.push_str("samples:\n");
    for i in (0..demes).step_by(100) {
        s.push_str(&format!("  - {{deme: d{i}, count: 2}}\n"));
    }
    s
}

#[test]
fn a_thousand_demes_validate_briefly_and_simulate() {
    let d = tempdir("rob-demes");
    write(&d, "ring.yaml", &ring(1000));
    let r = ok(&d, &["validate", "ring.yaml"]);
    // Before: 10 MB of matrix. Now one line per deme and a summary of the 2000 rates.
    assert!(r.stdout.len() < 200_000, "{} bytes", r.stdout.len());
    assert!(r.stdout.contains("2000 rates between 1000 demes"), "{}", &r.stdout[r.stdout.len() - 300..]);
    ok(&d, &["simulate", "ring.yaml", "--out", "run", "-q"]);
    ok(&d, &["predict", "ring.yaml"]);
}

#[test]
fn a_null_of_1e18_replicates_plans_its_chunks_lazily() {
    let d = tempdir("rob-lazy");
    write(&d, "pond.yaml", POND);
    let r = ok(&d, &["null", "pond.yaml", "--replicates", "1000000000000000000", "--max-chunks", "1", "--out", "a"]);
    assert!(r.stdout.contains("1 of 1000000000000000 chunks"), "{}", r.stdout);
    ok(&d, &["null", "pond.yaml", "--replicates", "100000000", "--chunk", "5", "--max-chunks", "1", "--out", "b"]);
    assert_eq!(std::fs::read_to_string(d.join("b/chunk_000000.tsv")).unwrap().lines().count(), 6);
}

#[test]
fn a_closed_pipe_ends_quietly_with_exit_0() {
    use std::process::{Command, Stdio};
    let d = tempdir("rob-pipe");
    write(&d, "ring.yaml", &ring(1000));
    write(&d, "pond.yaml", POND);
    let cases: [&[&str]; 3] =
        [&["validate", "ring.yaml"], &["predict", "ring.yaml"], &["simulate", "pond.yaml", "--out", "run", "-q"]];
    for args in cases {
        for _ in 0..5 {
            let mut child = Command::new(env!("CARGO_BIN_EXE_seedline"))
                .args(args)
                .current_dir(&d)
                .stdout(Stdio::piped())
                .stderr(Stdio::piped())
                .spawn()
                .unwrap();
            // The reader goes away at once, as `| head -0` would.
            drop(child.stdout.take());
            let o = child.wait_with_output().unwrap();
            let err = String::from_utf8_lossy(&o.stderr);
            assert_eq!(o.status.code(), Some(0), "`seedline {}`: {err}", args.join(" "));
            assert!(!err.contains("panicked"), "{err}");
        }
    }
}

#[test]
fn resume_redoes_a_truncated_chunk_and_says_so() {
    let d = tempdir("rob-resume");
    null_run(&d);
    let chunk = d.join("nul/chunk_000001.tsv");
    let good = std::fs::read(&chunk).unwrap();
    std::fs::write(&chunk, &good[..good.len() / 2]).unwrap();
    let r = ok(&d, &["null", "pond.yaml", "--replicates", "60", "--chunk", "20", "--out", "nul"]);
    assert!(r.stdout.contains("1 redone") && r.stderr.contains("chunk_000001.tsv"), "{}{}", r.stdout, r.stderr);
    assert_eq!(std::fs::read(&chunk).unwrap(), good, "the redone chunk is the one the seed gives");
    // A chunk missing from the chunk manifest (killed between its rename and the manifest
    // line) is redone too; the run then merges to the same bytes.
    let ledger = d.join("nul/chunks.tsv");
    let text = std::fs::read_to_string(&ledger).unwrap();
    std::fs::write(
        &ledger,
        text.lines().filter(|l| !l.starts_with("chunk_000002")).collect::<Vec<_>>().join("\n") + "\n",
    )
    .unwrap();
    let r = ok(&d, &["null", "pond.yaml", "--replicates", "60", "--chunk", "20", "--out", "nul"]);
    assert!(r.stdout.contains("1 redone"), "{}", r.stdout);
    ok(&d, &["merge", "nul", "--out", "merged2", "-q"]);
    assert_eq!(std::fs::read(d.join("merged/null.tsv")).unwrap(), std::fs::read(d.join("merged2/null.tsv")).unwrap());
}

#[test]
fn a_rerun_replaces_the_whole_output_set_and_never_mixes_two_runs() {
    let d = tempdir("rob-rerun");
    write(&d, "pond.yaml", POND);
    ok(&d, &["simulate", "pond.yaml", "--replicates", "6", "--vcf", "--out", "run", "-q"]);
    // Six VCFs and their sample map.
    assert_eq!(files_below(&d.join("run/vcf")).len(), 7);
    ok(&d, &["simulate", "pond.yaml", "--replicates", "2", "--out", "run", "-q"]);
    assert!(!d.join("run/vcf").exists(), "the earlier run's VCFs are gone");
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("run/seedline-manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["command"], "simulate");
    let listed: Vec<&str> = manifest["files"].as_array().unwrap().iter().map(|f| f["name"].as_str().unwrap()).collect();
    let mut on_disk = files_below(&d.join("run"));
    on_disk.retain(|f| f != "seedline-manifest.json");
    assert_eq!(listed, on_disk);
    // Another command's output, and files seedline did not write, are refused unless --force.
    write(&d, "obs.json", r#"{"statistics": {"pi": 3.5, "segregating_sites": 12, "tajima_d": 0.1}}"#);
    bad(
        &d,
        &["compare", "obs.json", "--hypotheses", "pond.yaml", "--simulations", "10", "--out", "run"],
        &["simulate"],
    );
    std::fs::write(d.join("run/notes.txt"), "mine").unwrap();
    bad(&d, &["simulate", "pond.yaml", "--replicates", "2", "--out", "run"], &["notes.txt", "--force"]);
    ok(&d, &["simulate", "pond.yaml", "--replicates", "2", "--out", "run", "--force", "-q"]);
    assert_eq!(std::fs::read_to_string(d.join("run/notes.txt")).unwrap(), "mine", "never deleted");
}

#[test]
fn a_killed_simulate_leaves_the_previous_run_and_the_rerun_cleans_up() {
    let d = tempdir("rob-kill");
    write(&d, "slow.yaml", &no_mutations(POND).replace("size: 100", "size: 20000").replace("count: 6", "count: 30"));
    ok(&d, &["simulate", "slow.yaml", "--replicates", "2", "--out", "run", "-q"]);
    let before = files_below(&d.join("run"));
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args([
            "simulate",
            "slow.yaml",
            "--replicates",
            "100000",
            "--threads",
            "1",
            "--engine",
            "exact",
            "--out",
            "run",
            "-q",
        ])
        .current_dir(&d)
        .spawn()
        .unwrap();
    // Kill once the run is writing into its staging directory.
    let t0 = std::time::Instant::now();
    while !files_below(&d.join("run")).iter().any(|f| f.starts_with(".seedline-staging")) && t0.elapsed().as_secs() < 60
    {
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    std::thread::sleep(std::time::Duration::from_millis(300));
    child.kill().unwrap();
    let _ = child.wait();
    let after: Vec<String> =
        files_below(&d.join("run")).into_iter().filter(|f| !f.starts_with(".seedline-staging")).collect();
    assert_eq!(after, before, "the finished run is untouched by the killed one");
    ok(&d, &["simulate", "slow.yaml", "--replicates", "3", "--out", "run", "-q"]);
    let files = files_below(&d.join("run"));
    assert!(files.iter().all(|f| !f.starts_with('.') && !f.ends_with(".tmp")), "{files:?}");
}

#[test]
fn an_unwritable_out_is_refused_before_computing() {
    let d = tempdir("rob-unwritable");
    write(&d, "pond.yaml", POND);
    write(&d, "file", "not a directory");
    write(&d, "obs.json", r#"{"statistics": {"pi": 3.5, "segregating_sites": 12}}"#);
    // A million simulations would take far longer than the bound: the refusal comes first.
    bad(
        &d,
        &["compare", "obs.json", "--hypotheses", "pond.yaml", "--simulations", "1000000", "--out", "file/sub"],
        &["--out file/sub", "cannot"],
    );
    bad(&d, &["simulate", "pond.yaml", "--replicates", "1000000", "--out", "file"], &["--out file"]);
    bad(&d, &["null", "pond.yaml", "--replicates", "1000000", "--out", "file"], &["file"]);
}

#[test]
fn progress_lines_go_to_stderr_when_it_is_not_a_terminal_and_quiet_silences_them() {
    let d = tempdir("rob-progress");
    write(&d, "slow.yaml", &no_mutations(POND).replace("size: 100", "size: 3000").replace("count: 6", "count: 20"));
    let args = ["simulate", "slow.yaml", "--replicates", "400", "--threads", "1", "--engine", "exact", "--out", "run"];
    let r = seedline_bounded(&d, &args, &[("SEEDLINE_PROGRESS_SECONDS", "0.05")], LIMIT);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let lines: Vec<&str> = r.stderr.lines().filter(|l| l.starts_with("simulate: ")).collect();
    assert!(!lines.is_empty(), "{}", r.stderr);
    assert!(lines.last().unwrap().contains("400/400 replicates (100.0 %)"), "{lines:?}");
    assert!(lines.iter().any(|l| l.contains("per s") || l.contains("none finished yet")), "{lines:?}");
    let mut quiet = args.to_vec();
    quiet.extend(["--quiet", "--force"]);
    let r = seedline_bounded(&d, &quiet, &[("SEEDLINE_PROGRESS_SECONDS", "0.05")], LIMIT);
    assert_eq!(r.code, Some(0));
    assert_eq!(r.stderr, "", "nothing on stderr with --quiet");
}

#[test]
fn validate_and_predict_accept_hypotheses_and_validate_checks_designs() {
    let d = tempdir("rob-validate");
    write(
        &d,
        "h.yaml",
        "demes:\n  - name: pond\n    size: {prior: uniform, low: 200, high: 2000}\n    dormancy: {law: geometric, mean: {prior: log_uniform, low: 1, high: 9}}\nsamples: [{deme: pond, count: 6}]\nmutation: {rate: 1.0e-6, sites: 10000}\n",
    );
    write(
        &d,
        "designs.yaml",
        "designs:\n  - {name: small, samples: [{deme: pond, count: 4}]}\n  - {name: deep, samples: [{deme: pond, count: 8}], sites: 50000}\n",
    );
    let r = ok(&d, &["validate", "h.yaml", "designs.yaml"]);
    assert!(r.stdout.contains("valid hypothesis with 2 prior(s)") && r.stdout.contains("2 design(s)"), "{}", r.stdout);
    // Source: the median of a log-uniform prior on [1, 9] is sqrt(1 * 9) = 3, of a uniform
    // on [200, 2000] the midpoint 1100; E[T_2] = N E[R]^2 = 1100 * 9 = 9900 (KKL 2001).
    let r = ok(&d, &["predict", "h.yaml", "--json"]);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    assert!((v["pair_time_mean"].as_f64().unwrap() - 9900.0).abs() < 1e-6, "{}", v["pair_time_mean"]);
    write(&d, "bad-designs.yaml", "designs:\n  - {name: x, samples: [{deme: lake, count: 4}]}\n");
    bad(&d, &["validate", "h.yaml", "bad-designs.yaml"], &["bad-designs.yaml", "samples[0].deme", "lake"]);
    write(
        &d,
        "bad-h.yaml",
        "demes: [{name: pond, size: {prior: uniform, low: 0, high: 10}}]\nsamples: [{deme: pond, count: 2}]\n",
    );
    bad(&d, &["validate", "bad-h.yaml"], &["bad-h.yaml", "demes[0].size"]);
}

/// An observed dataset `obs/observed.json` of 8 sequences of deme `pond` and three loci,
/// from a replicate of `loci.yaml` written as VCF and read back by `observe`.
fn observed_data(d: &Path) {
    write(
        d,
        "loci.yaml",
        "seed: 5\nreplicates: 1\ndemes: [{name: pond, size: 200, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: pond, count: 8}]\nmutation: {rate: 1.0e-6, sites: 20000}\nloci: 3\n",
    );
    ok(d, &["simulate", "loci.yaml", "--vcf", "--out", "sim", "-q"]);
    let mut map = String::from("sample\tdeme\n");
    for i in 0..8 {
        map.push_str(&format!("pond_{i}_t0\tpond\n"));
    }
    write(d, "map.tsv", &map);
    ok(d, &["observe", "sim/vcf/replicate_0.vcf", "--samples", "map.tsv", "--out", "obs", "-q"]);
}

#[test]
fn test_refuses_a_null_made_for_other_data_and_says_which_setting_differs() {
    let d = tempdir("rob-made-for");
    observed_data(&d);
    let base = std::fs::read_to_string(d.join("loci.yaml")).unwrap();
    write(&d, "n10.yaml", &base.replace("count: 8", "count: 10"));
    write(&d, "lake.yaml", &base.replace("name: pond", "name: lake").replace("deme: pond", "deme: lake"));
    write(
        &d,
        "old.yaml",
        &base.replace("samples: [{deme: pond, count: 8}]", "samples: [{deme: pond, count: 8, generations_ago: 30}]"),
    );
    for (file, words) in [
        ("n10.yaml", ["sampling design", "8 of pond at 0", "10 of pond at 0"]),
        ("lake.yaml", ["sampling design", "8 of pond at 0", "8 of lake at 0"]),
        ("old.yaml", ["sampling design", "8 of pond at 0", "8 of pond at 30"]),
    ] {
        let out = format!("null-{file}");
        ok(&d, &["null", file, "--replicates", "40", "--chunk", "20", "--out", &out, "-q"]);
        let mut w = vec!["obs/observed.json", out.as_str()];
        w.extend(words);
        bad(&d, &["test", "obs/observed.json", "--null", &out, "--out", "t"], &w);
        assert!(!d.join("t").exists());
    }
    // A null made for these data, then broken: a chunk missing, a chunk duplicated.
    ok(
        &d,
        &[
            "null",
            "loci.yaml",
            "--like",
            "obs/observed.json",
            "--replicates",
            "60",
            "--chunk",
            "20",
            "--out",
            "good",
            "-q",
        ],
    );
    ok(&d, &["test", "obs/observed.json", "--null", "good", "--out", "t-good", "-q"]);
    std::fs::rename(d.join("good/chunk_000001.tsv"), d.join("chunk_000001.tsv")).unwrap();
    bad(&d, &["test", "obs/observed.json", "--null", "good", "--out", "t"], &["2 of 3 chunks", "chunk_000001.tsv"]);
    std::fs::rename(d.join("chunk_000001.tsv"), d.join("good/chunk_000001.tsv")).unwrap();
    std::fs::copy(d.join("good/chunk_000001.tsv"), d.join("good/chunk_000001.tsv.bak")).unwrap();
    bad(&d, &["test", "obs/observed.json", "--null", "good", "--out", "t"], &["chunk_000001.tsv.bak", "not a chunk"]);
    std::fs::remove_file(d.join("good/chunk_000001.tsv.bak")).unwrap();
    // Shards merged twice over: a replicate appears twice.
    ok(
        &d,
        &[
            "null",
            "loci.yaml",
            "--like",
            "obs/observed.json",
            "--replicates",
            "60",
            "--chunk",
            "20",
            "--shard",
            "0/2",
            "--out",
            "s0",
            "-q",
        ],
    );
    bad(&d, &["merge", "s0", "s0", "--out", "m"], &["appears twice"]);
    // Statistics of other demes.
    let obs = std::fs::read_to_string(d.join("obs/observed.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&obs).unwrap();
    let mut v2 = v.clone();
    v2["statistics"]["pi_lake"] = serde_json::json!(3.0);
    write(&d, "obs2.json", &v2.to_string());
    bad(&d, &["test", "obs2.json", "--null", "good", "--out", "t"], &["set of statistics", "pi_lake"]);
}

#[test]
fn condition_on_s_with_several_loci_writes_every_column_and_tests() {
    let d = tempdir("rob-fixed-s");
    observed_data(&d);
    let args =
        ["null", "loci.yaml", "--like", "obs/observed.json", "--condition-on-s", "--replicates", "50", "--chunk", "25"];
    let mut a = args.to_vec();
    a.extend(["--out", "fixed", "-q"]);
    ok(&d, &a);
    let obs: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("obs/observed.json")).unwrap()).unwrap();
    let s_obs = obs["statistics"]["segregating_sites"].as_f64().unwrap();
    let text = std::fs::read_to_string(d.join("fixed/chunk_000000.tsv")).unwrap();
    let header: Vec<&str> = text.lines().next().unwrap().split('\t').collect();
    // Three loci: the locus mean and variance columns are there, and every row fills them.
    assert!(header.contains(&"pi_locus_mean") && header.contains(&"segregating_sites_locus_var"));
    let s_col = header.iter().position(|c| *c == "segregating_sites").unwrap();
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split('\t').collect();
        assert_eq!(f.len(), header.len(), "{line}");
        // Exact property: every replicate has exactly the observed S over its loci.
        assert_eq!(f[s_col].parse::<f64>().unwrap(), s_obs);
    }
    let r = ok(&d, &["test", "obs/observed.json", "--null", "fixed", "--out", "t", "-q"]);
    // Source: Davison & Hinkley (1997) §4.2: with every null value equal to the observed,
    // both one-sided counts are B and p = min(1, 2 (B + 1)/(B + 1)) = 1.
    let row = r.stdout.lines().find(|l| l.starts_with("segregating_sites ")).unwrap();
    assert!(row.trim_end().ends_with(" 1"), "{row}");
    // Another S than the null was conditioned on is refused.
    let mut other = obs.clone();
    other["statistics"]["segregating_sites"] = serde_json::json!(s_obs + 1.0);
    write(&d, "other.json", &other.to_string());
    bad(&d, &["test", "other.json", "--null", "fixed", "--out", "t2"], &["segregating sites", "conditioned"]);
}
