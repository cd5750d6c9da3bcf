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
