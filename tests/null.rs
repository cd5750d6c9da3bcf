//! Null distributions: shards, resume, interruption, and calibration of the test.

use seedline::batch::BatchConfig;
use seedline::engine::EngineChoice;
use seedline::mutation::Count;
use seedline::null::{self, NullConfig};
use seedline::scenario::Scenario;
use statrs::distribution::{ContinuousCDF, Normal};
use std::path::PathBuf;
use std::process::Command;

const YAML: &str = "seed: 3\ndemes: [{name: pond, size: 100, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: pond, count: 8}]\nmutation: {rate: 1.0e-6, sites: 20000}\n";

fn tempdir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("seedline-null-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn cfg(replicates: u64, shard: (u64, u64), max: Option<u64>) -> NullConfig {
    NullConfig { replicates, shard, chunk: 25, count: Count::Poisson, max_new_chunks: max, engine: EngineChoice::Exact }
}

#[test]
fn shards_merged_equal_the_unsharded_run_and_resume_equals_uninterrupted() {
    let s = Scenario::from_yaml_str(YAML, "t").unwrap();
    let d = tempdir("shards");
    let quiet = |_| {};
    null::run(&s, cfg(150, (0, 1), None), None, BatchConfig::default(), &d.join("full"), &quiet).unwrap();
    for k in 0..3 {
        null::run(
            &s,
            cfg(150, (k, 3), None),
            None,
            BatchConfig { threads: 1, chunk: 7 },
            &d.join(format!("s{k}")),
            &quiet,
        )
        .unwrap();
    }
    null::merge(&[d.join("full")], &d.join("m_full")).unwrap();
    null::merge(&[d.join("s2"), d.join("s0"), d.join("s1")], &d.join("m_shards")).unwrap();
    let a = std::fs::read(d.join("m_full/null.tsv")).unwrap();
    assert_eq!(a, std::fs::read(d.join("m_shards/null.tsv")).unwrap());
    // Interrupted after two chunks, then resumed: same bytes.
    let r = null::run(&s, cfg(150, (0, 1), Some(2)), None, BatchConfig::default(), &d.join("part"), &quiet).unwrap();
    assert_eq!((r.written_chunks, r.total_chunks), (2, 6));
    let r = null::run(&s, cfg(150, (0, 1), None), None, BatchConfig::default(), &d.join("part"), &quiet).unwrap();
    assert_eq!((r.resumed_chunks, r.written_chunks), (2, 4));
    null::merge(&[d.join("part")], &d.join("m_part")).unwrap();
    assert_eq!(a, std::fs::read(d.join("m_part/null.tsv")).unwrap());
    // A test against one shard says so, and names the null it used; against the merged
    // shards it holds every replicate and no such note.
    let obs = seedline::abc::parse_observed(r#"{"statistics": {"pi": 2.0}}"#, "obs").unwrap();
    let shard = null::test(&obs, &null::load(&d.join("s1")).unwrap()).unwrap();
    assert_eq!(
        (shard.replicates, shard.null.shard, shard.null.replicates, shard.null.seed),
        (50, (1, 3), 150, s.seed())
    );
    assert!(shard.notes.iter().any(|n| n.contains("shard 1/3 alone: 50 of its 150")), "{:?}", shard.notes);
    let whole = null::test(&obs, &null::load(&d.join("m_shards")).unwrap()).unwrap();
    assert_eq!((whole.replicates, whole.null.shard), (150, (0, 1)));
    assert!(!whole.notes.iter().any(|n| n.contains("alone")), "{:?}", whole.notes);
    // An incomplete set of shards, and a mix of settings, are refused.
    assert!(null::merge(&[d.join("s0"), d.join("s1")], &d.join("bad")).is_err());
    assert!(null::run(&s, cfg(151, (0, 1), None), None, BatchConfig::default(), &d.join("part"), &quiet).is_err());
}

#[test]
fn the_engine_is_part_of_a_null_run_settings() {
    // N = 2e4 with geometric dormancy of mean 2: auto runs the approximate engine.
    let large_yaml = YAML.replace("size: 100,", "size: 20000,").replace("1.0e-6", "1.0e-8");
    let large = Scenario::from_yaml_str(&large_yaml, "t").unwrap();
    let d = tempdir("engine");
    let quiet = |_| {};
    let with = |engine| NullConfig { engine, ..cfg(50, (0, 1), Some(1)) };
    let r = null::run(&large, with(EngineChoice::Exact), None, BatchConfig::default(), &d.join("x"), &quiet).unwrap();
    assert_eq!(r.engine.kind, seedline::engine::EngineKind::Exact);
    // Resuming with auto (which resolves to approx here) is refused and says why.
    let e =
        null::run(&large, with(EngineChoice::Auto), None, BatchConfig::default(), &d.join("x"), &quiet).unwrap_err();
    let m = e.downcast_ref::<null::EngineMismatch>().expect("an engine mismatch");
    assert_eq!((m.was, m.now), (seedline::engine::EngineKind::Exact, seedline::engine::EngineKind::Approx));
    assert!(e.to_string().contains("--engine exact"), "{e}");
    // The same engine reached another way (auto resolving to exact at N = 100) resumes.
    let small = Scenario::from_yaml_str(YAML, "t").unwrap();
    null::run(&small, with(EngineChoice::Exact), None, BatchConfig::default(), &d.join("y"), &quiet).unwrap();
    let r = null::run(&small, with(EngineChoice::Auto), None, BatchConfig::default(), &d.join("y"), &quiet).unwrap();
    assert_eq!((r.resumed_chunks, r.engine.kind), (1, seedline::engine::EngineKind::Exact));
    // The manifest names the engine of the rows.
    null::run(&large, with(EngineChoice::Auto), None, BatchConfig::default(), &d.join("z"), &quiet).unwrap();
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("z/null.json")).unwrap()).unwrap();
    assert_eq!(json["engine"], "approx");
    // Through the binary: the refusal exits 2.
    std::fs::write(d.join("large.yaml"), &large_yaml).unwrap();
    let run = |engine: &str| {
        Command::new(env!("CARGO_BIN_EXE_seedline"))
            .args(["null", "large.yaml", "--replicates", "20", "--chunk", "10", "--out", "cli", "--engine", engine])
            .current_dir(&d)
            .output()
            .unwrap()
    };
    let o = run("approx");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stdout).contains("engine: approximate engine"));
    let o = run("exact");
    assert_eq!(o.status.code(), Some(2), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stderr).contains("approx engine"), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn a_killed_run_leaves_only_complete_chunks_and_resumes() {
    let d = tempdir("kill");
    std::fs::write(d.join("s.yaml"), YAML.replace("size: 100", "size: 3000")).unwrap();
    // The exact engine: slow enough at N = 3000 to be killed half-way.
    let args = [
        "null",
        "s.yaml",
        "--replicates",
        "400",
        "--chunk",
        "20",
        "--out",
        "run",
        "--threads",
        "1",
        "--engine",
        "exact",
    ];
    let mut child = Command::new(env!("CARGO_BIN_EXE_seedline")).args(args).current_dir(&d).spawn().unwrap();
    // Wait for the first complete chunk, then kill the process without warning.
    let first = d.join("run/chunk_000000.tsv");
    let t0 = std::time::Instant::now();
    while !first.exists() && t0.elapsed().as_secs() < 60 {
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    child.kill().unwrap();
    let _ = child.wait();
    for e in std::fs::read_dir(d.join("run")).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        if let Some(stem) = name.strip_prefix("chunk_") {
            // Every chunk under its final name is complete: header + 20 rows.
            let text = std::fs::read_to_string(d.join("run").join(&name)).unwrap();
            assert_eq!(text.lines().count(), 21, "{stem} is incomplete");
        }
    }
    let o = Command::new(env!("CARGO_BIN_EXE_seedline")).args(args).current_dir(&d).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let o = Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args(["merge", "run", "--out", "merged"])
        .current_dir(&d)
        .output()
        .unwrap();
    assert!(o.status.success());
    let o = Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args(["null", "s.yaml", "--replicates", "400", "--chunk", "20", "--out", "clean", "--engine", "exact"])
        .current_dir(&d)
        .output()
        .unwrap();
    assert!(o.status.success());
    let o = Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args(["merge", "clean", "--out", "merged_clean"])
        .current_dir(&d)
        .output()
        .unwrap();
    assert!(o.status.success());
    assert_eq!(
        std::fs::read(d.join("merged/null.tsv")).unwrap(),
        std::fs::read(d.join("merged_clean/null.tsv")).unwrap()
    );
}

#[test]
fn empirical_p_value_by_hand() {
    // Source: Davison & Hinkley (1997), §4.2: one-sided (r+1)/(B+1). Null 1..=9 (B = 9),
    // observed 2: r_low = 2, r_high = 8, p = 2 · 3/10 = 0.6; observed 10: r_high = 0,
    // p = 2 · 1/10 = 0.2.
    let null: Vec<f64> = (1..=9).map(f64::from).collect();
    assert!((null::empirical_p(2.0, &null) - 0.6).abs() < 1e-12);
    assert!((null::empirical_p(10.0, &null) - 0.2).abs() < 1e-12);
    assert_eq!(null::empirical_p(5.0, &null), 1.0);
}

#[test]
fn p_values_are_uniform_when_the_data_come_from_the_null() {
    // Calibration: 200 pseudo-observed datasets simulated under the null itself (another
    // seed) tested against a null of B = 399. pi takes many values at theta ~ 8, so ties
    // are rare; the two-sided p-values should be uniform on (0, 1] up to the 1/(B+1) grid.
    // Kolmogorov-Smirnov against U(0,1) (Kolmogorov 1933; asymptotic critical value
    // 1.63/sqrt(n) at level 0.01, Smirnov's table, common practice).
    let s = Scenario::from_yaml_str(&YAML.replace("rate: 1.0e-6", "rate: 2.0e-6"), "t").unwrap();
    let d = tempdir("calib");
    null::run(&s, cfg(399, (0, 1), None), None, BatchConfig::default(), &d.join("null"), &|_| {}).unwrap();
    let table = null::load(&d.join("null")).unwrap();
    let obs_s =
        Scenario::from_yaml_str(&YAML.replace("rate: 1.0e-6", "rate: 2.0e-6").replace("seed: 3", "seed: 99"), "o")
            .unwrap();
    null::run(&obs_s, cfg(200, (0, 1), None), None, BatchConfig::default(), &d.join("obs"), &|_| {}).unwrap();
    let obs = null::load(&d.join("obs")).unwrap();
    let null_pi: Vec<f64> = table.column("pi").unwrap().into_iter().flatten().collect();
    let mut ps: Vec<f64> =
        obs.column("pi").unwrap().into_iter().flatten().map(|o| null::empirical_p(o, &null_pi)).collect();
    ps.sort_by(f64::total_cmp);
    let n = ps.len() as f64;
    // Two-sided p from a discrete grid is slightly conservative; compare with U(0,1).
    let ks = ps
        .iter()
        .enumerate()
        .map(|(i, p)| ((i + 1) as f64 / n - p).abs().max((p - i as f64 / n).abs()))
        .fold(0.0, f64::max);
    assert!(ks < 1.63 / n.sqrt(), "KS distance {ks} over {n} p-values");
    // And the mean of the p-values is near 1/2 (sd of the mean of U(0,1): 1/sqrt(12 n)).
    let mean = ps.iter().sum::<f64>() / n;
    let z = (mean - 0.5) / (1.0 / (12.0 * n).sqrt());
    assert!(Normal::standard().cdf(-z.abs()) > 0.0005, "mean p {mean}");
}
