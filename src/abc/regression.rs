//! Local-linear regression adjustment of accepted parameters (Beaumont, Zhang & Balding
//! 2002, Genetics 162:2025) and weighted posterior summaries.

use super::prior::Prior;

/// Solves A x = b by Gaussian elimination with partial pivoting; `None` when A is singular
/// (a pivot below 1e-13 times the largest absolute entry).
pub fn solve(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Option<Vec<f64>> {
    let n = b.len();
    let big = a.iter().flatten().fold(0.0f64, |m, x| m.max(x.abs()));
    if big == 0.0 || !big.is_finite() {
        return None;
    }
    for col in 0..n {
        let piv = (col..n).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[piv][col].abs() < 1e-13 * big {
            return None;
        }
        a.swap(col, piv);
        b.swap(col, piv);
        for r in col + 1..n {
            let f = a[r][col] / a[col][col];
            if f != 0.0 {
                let (upper, lower) = a.split_at_mut(r);
                for (x, p) in lower[0][col..].iter_mut().zip(&upper[col][col..]) {
                    *x -= f * p;
                }
                b[r] -= f * b[col];
            }
        }
    }
    let mut x = vec![0.0; n];
    for r in (0..n).rev() {
        let s: f64 = (r + 1..n).map(|c| a[r][c] * x[c]).sum();
        x[r] = (b[r] - s) / a[r][r];
    }
    Some(x)
}

/// A weighted least-squares fit y ≈ α + βᵀ x and the adjusted responses.
#[derive(Debug, Clone, PartialEq)]
pub struct LocalLinear {
    /// Intercept α: the fitted response at x = 0 (the observed statistics).
    pub intercept: f64,
    /// Slopes β, one per regressor.
    pub beta: Vec<f64>,
    /// Adjusted responses y*_i = y_i − x_iᵀ β.
    pub adjusted: Vec<f64>,
}

/// Local-linear regression adjustment (Beaumont, Zhang & Balding 2002, eq. 5):
///
/// ```text
/// (α, β) = argmin Σ_i w_i (y_i − α − x_iᵀ β)²,     x_i = s_i − s_obs (here MAD-scaled)
/// y*_i   = y_i − x_iᵀ β
/// ```
/// solved through the normal equations. A relative ridge of 1e-10 · trace/p on the slopes
/// keeps collinear statistics (e.g. S and θ_W) from making the system singular; its effect
/// on well-posed fits is below 1e-9 relative. With fewer than two positive weights, or if
/// the system is still singular, β = 0 (plain rejection).
pub fn local_linear(y: &[f64], x: &[Vec<f64>], w: &[f64]) -> LocalLinear {
    let p = x.first().map_or(0, Vec::len);
    let dim = p + 1;
    let feat = |i: usize, j: usize| if j == 0 { 1.0 } else { x[i][j - 1] };
    let mut a = vec![vec![0.0; dim]; dim];
    let mut b = vec![0.0; dim];
    for i in 0..y.len() {
        if w[i] <= 0.0 {
            continue;
        }
        for (r, row) in a.iter_mut().enumerate() {
            b[r] += w[i] * feat(i, r) * y[i];
            for (c, x) in row.iter_mut().enumerate() {
                *x += w[i] * feat(i, r) * feat(i, c);
            }
        }
    }
    let trace: f64 = (1..dim).map(|j| a[j][j]).sum::<f64>() / p.max(1) as f64;
    for (j, row) in a.iter_mut().enumerate().skip(1) {
        row[j] += 1e-10 * trace;
    }
    let wsum: f64 = w.iter().filter(|&&v| v > 0.0).sum();
    let mean = if wsum > 0.0 { b[0] / wsum } else { y.iter().sum::<f64>() / y.len().max(1) as f64 };
    let positive = w.iter().filter(|&&v| v > 0.0).count();
    let coef = if positive >= 2 { solve(a, b) } else { None };
    let (intercept, beta) = match coef {
        Some(c) if c.iter().all(|v| v.is_finite()) => (c[0], c[1..].to_vec()),
        _ => (mean, vec![0.0; p]),
    };
    let adjusted = (0..y.len()).map(|i| y[i] - (0..p).map(|j| x[i][j] * beta[j]).sum::<f64>()).collect();
    LocalLinear { intercept, beta, adjusted }
}

/// Weighted quantile: with values sorted and F_j = (Σ_{i<=j} w_i) / Σ w, the first value
/// with F_j >= q (a step function, no interpolation; q in [0, 1]). NaN when the weights
/// sum to 0.
pub fn weighted_quantile(values: &[f64], weights: &[f64], q: f64) -> f64 {
    let mut pairs: Vec<(f64, f64)> =
        values.iter().zip(weights).filter(|(_, w)| **w > 0.0).map(|(&v, &w)| (v, w)).collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = pairs.iter().map(|p| p.1).sum();
    if total <= 0.0 {
        return f64::NAN;
    }
    let mut cum = 0.0;
    for &(v, w) in &pairs {
        cum += w;
        // Relative slack so that q = 0.5 on two equal weights picks the first value.
        if cum >= q * total * (1.0 - 1e-12) {
            return v;
        }
    }
    pairs.last().map_or(f64::NAN, |p| p.0)
}

/// Posterior summary of one parameter.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ParameterPosterior {
    /// Key path of the prior.
    pub parameter: String,
    /// Weighted mean of the adjusted values.
    pub mean: f64,
    /// Weighted median.
    pub median: f64,
    /// Weighted 2.5% quantile.
    pub low_95: f64,
    /// Weighted 97.5% quantile.
    pub high_95: f64,
    /// Prior lower bound.
    pub prior_low: f64,
    /// Prior upper bound.
    pub prior_high: f64,
    /// Slopes of the regression (on the regression scale, per MAD-scaled statistic).
    pub beta: Vec<f64>,
    /// Adjusted values, on the parameter's own scale, aligned with the accepted draws.
    #[serde(skip)]
    pub adjusted: Vec<f64>,
    /// Weights of the accepted draws.
    #[serde(skip)]
    pub weights: Vec<f64>,
}

impl ParameterPosterior {
    /// A weighted quantile of the adjusted values.
    pub fn quantile(&self, q: f64) -> f64 {
        weighted_quantile(&self.adjusted, &self.weights, q)
    }
}

/// Adjusts the accepted draws `theta` of one parameter and summarises them. For a
/// log-uniform prior the regression is on log θ and adjusted values are exp(log θ*), so
/// they stay positive; for a uniform prior on θ itself, and adjusted values may fall outside
/// the prior range (they are not clipped: the regression extrapolates there). The mean is
/// Σ w θ* / Σ w on the parameter's own scale.
pub fn estimate(prior: &Prior, theta: &[f64], x: &[Vec<f64>], w: &[f64]) -> ParameterPosterior {
    let y: Vec<f64> = theta.iter().map(|&t| prior.to_regression_scale(t)).collect();
    let fit = local_linear(&y, x, w);
    let adjusted: Vec<f64> = fit.adjusted.iter().map(|&v| prior.from_regression_scale(v)).collect();
    let wsum: f64 = w.iter().filter(|&&v| v > 0.0).sum();
    let mean = if wsum > 0.0 {
        adjusted.iter().zip(w).filter(|(_, w)| **w > 0.0).map(|(a, w)| a * w).sum::<f64>() / wsum
    } else {
        f64::NAN
    };
    ParameterPosterior {
        parameter: prior.path.clone(),
        mean,
        median: weighted_quantile(&adjusted, w, 0.5),
        low_95: weighted_quantile(&adjusted, w, 0.025),
        high_95: weighted_quantile(&adjusted, w, 0.975),
        prior_low: prior.low,
        prior_high: prior.high,
        beta: fit.beta,
        adjusted,
        weights: w.to_vec(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::abc::rejection::epanechnikov_weights;

    #[test]
    fn local_linear_against_a_hand_computed_example() {
        // Five accepted draws, one statistic, x = s − s_obs = [−2, −1, 0, 1, 2].
        // Distances |x| = [2, 1, 0, 1, 2], δ = 2, Epanechnikov w = 1 − (d/2)²
        //   = [0, 0.75, 1, 0.75, 0].
        // θ = [1, 2, 3, 5, 9].
        // Σw = 2.5, Σwx = −0.75 + 0.75 = 0, so x̄_w = 0 and
        //   β = Σ w x θ / Σ w x² = (0.75·(−1)·2 + 0.75·1·5) / (0.75 + 0.75) = 2.25 / 1.5 = 1.5,
        //   α = Σ w θ / Σ w = (0.75·2 + 3 + 0.75·5) / 2.5 = 8.25 / 2.5 = 3.3.
        // Adjusted θ* = θ − x β = [1+3, 2+1.5, 3, 5−1.5, 9−3] = [4, 3.5, 3, 3.5, 6].
        let x: Vec<Vec<f64>> = [-2.0, -1.0, 0.0, 1.0, 2.0].iter().map(|&v| vec![v]).collect();
        let w = epanechnikov_weights(&[2.0, 1.0, 0.0, 1.0, 2.0]);
        assert_eq!(w, [0.0, 0.75, 1.0, 0.75, 0.0]);
        let fit = local_linear(&[1.0, 2.0, 3.0, 5.0, 9.0], &x, &w);
        assert!((fit.beta[0] - 1.5).abs() < 1e-8, "{fit:?}");
        assert!((fit.intercept - 3.3).abs() < 1e-8);
        for (a, e) in fit.adjusted.iter().zip([4.0, 3.5, 3.0, 3.5, 6.0]) {
            assert!((a - e).abs() < 1e-8, "{fit:?}");
        }
        // Weighted summaries of θ* with w: mean (0.75·3.5 + 3 + 0.75·3.5)/2.5 = 3.3;
        // sorted positive-weight values 3 (w 1), 3.5 (w 1.5): F = 0.4, 1.0, so the median
        // (q = 0.5) is 3.5 and the 2.5% quantile 3.
        let prior = Prior {
            path: "p".into(),
            steps: vec![],
            kind: crate::abc::PriorKind::Uniform,
            low: 0.0,
            high: 10.0,
            integer: false,
        };
        let post = estimate(&prior, &[1.0, 2.0, 3.0, 5.0, 9.0], &x, &w);
        assert!((post.mean - 3.3).abs() < 1e-8);
        assert!((post.median - 3.5).abs() < 1e-8);
        assert!((post.low_95 - 3.0).abs() < 1e-8);
        assert!((post.high_95 - 3.5).abs() < 1e-8);
    }

    #[test]
    fn log_uniform_parameters_are_adjusted_on_the_log_scale() {
        // log θ = [0, 1, 2] exactly linear in x = [−1, 0, 1] (slope 1) with equal weights:
        // β = 1, adjusted log θ* = [1, 1, 1], θ* = e for all.
        let prior = Prior {
            path: "m".into(),
            steps: vec![],
            kind: crate::abc::PriorKind::LogUniform,
            low: 0.5,
            high: 20.0,
            integer: false,
        };
        let theta: Vec<f64> = [0.0f64, 1.0, 2.0].iter().map(|v| v.exp()).collect();
        let x: Vec<Vec<f64>> = [-1.0, 0.0, 1.0].iter().map(|&v| vec![v]).collect();
        let post = estimate(&prior, &theta, &x, &[1.0, 1.0, 1.0]);
        for a in &post.adjusted {
            assert!((a - std::f64::consts::E).abs() < 1e-7, "{post:?}");
        }
    }

    #[test]
    fn solve_small_system() {
        // 2x + y = 5, x + 3y = 10 → x = 1, y = 3.
        let x = solve(vec![vec![2.0, 1.0], vec![1.0, 3.0]], vec![5.0, 10.0]).unwrap();
        assert!((x[0] - 1.0).abs() < 1e-12 && (x[1] - 3.0).abs() < 1e-12);
        assert!(solve(vec![vec![1.0, 2.0], vec![2.0, 4.0]], vec![1.0, 2.0]).is_none());
    }
}
