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

/// A fresh temporary directory for one test (removed first if it exists). Its name carries
/// the calling file: every file of tests/ runs in one process (tests/suite), where two files
/// may each use the same `name` at the same time.
#[track_caller]
pub fn tempdir(name: &str) -> std::path::PathBuf {
    let caller = std::path::Path::new(std::panic::Location::caller().file());
    let file = caller.file_stem().and_then(|s| s.to_str()).unwrap_or("test");
    let d = std::env::temp_dir().join(format!("seedline-test-{file}-{name}-{}", std::process::id()));
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

/// What a bounded run of the binary did.
pub struct Bounded {
    /// Exit code; `None` when the run was killed at the bound (a hang) or by a signal.
    pub code: Option<i32>,
    /// Whether the bound was reached.
    pub timed_out: bool,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

/// Runs the binary with `args` in `dir`, killing it after `limit_secs` seconds: a guard
/// against hangs, not a timing test (the bound is far above the expected time).
pub fn seedline_bounded(dir: &std::path::Path, args: &[&str], env: &[(&str, &str)], limit_secs: u64) -> Bounded {
    use std::io::Read;
    use std::process::{Command, Stdio};
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_seedline"));
    cmd.args(args).current_dir(dir).stdout(Stdio::piped()).stderr(Stdio::piped()).stdin(Stdio::null());
    for (k, v) in env {
        cmd.env(k, v);
    }
    let mut child = cmd.spawn().expect("the binary runs");
    let mut out = child.stdout.take().unwrap();
    let mut err = child.stderr.take().unwrap();
    let t_out = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = out.read_to_string(&mut s);
        s
    });
    let t_err = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = err.read_to_string(&mut s);
        s
    });
    let start = std::time::Instant::now();
    let (code, timed_out) = loop {
        if let Some(status) = child.try_wait().unwrap() {
            break (status.code(), false);
        }
        if start.elapsed().as_secs() >= limit_secs {
            let _ = child.kill();
            let _ = child.wait();
            break (None, true);
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    };
    Bounded { code, timed_out, stdout: t_out.join().unwrap(), stderr: t_err.join().unwrap() }
}

/// Every file below `dir`, as relative paths, sorted.
pub fn files_below(dir: &std::path::Path) -> Vec<String> {
    fn walk(d: &std::path::Path, prefix: &str, out: &mut Vec<String>) {
        let Ok(rd) = std::fs::read_dir(d) else { return };
        for e in rd.flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            let rel = if prefix.is_empty() { name } else { format!("{prefix}/{name}") };
            if e.file_type().is_ok_and(|t| t.is_dir()) {
                walk(&e.path(), &rel, out);
            } else {
                out.push(rel);
            }
        }
    }
    let mut v = Vec::new();
    walk(dir, "", &mut v);
    v.sort();
    v
}
