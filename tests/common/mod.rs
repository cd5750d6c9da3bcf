//! Helpers shared by the integration tests: Monte-Carlo means and their checks.
#![allow(dead_code)]

/// Mean and standard error of the mean (sample variance with n - 1).
pub fn mean_se(xs: &[f64]) -> (f64, f64) {
    let n = xs.len() as f64;
    let m = xs.iter().sum::<f64>() / n;
    let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, (v / n).sqrt())
}

/// Asserts that the mean of `xs` lies within `k_se` standard errors of `expected`.
pub fn assert_close(what: &str, xs: &[f64], expected: f64, k_se: f64) {
    let (m, se) = mean_se(xs);
    assert!(
        (m - expected).abs() <= k_se * se,
        "{what}: simulated mean {m} ± {se} (se), expected {expected} (within {k_se} se)"
    );
}

/// Runs the `seedline` binary with `args`.
pub fn seedline(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_seedline")).args(args).output().expect("the binary runs")
}

/// A fresh temporary directory for one test (removed first if it exists).
pub fn tempdir(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("seedline-test-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Writes `text` into `dir/name` and returns the path as text.
pub fn write(dir: &std::path::Path, name: &str, text: &str) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.display().to_string()
}
