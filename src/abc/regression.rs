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
    /// Slopes of the regression (on the regression scale, per MAD-scaled statistic); all 0
    /// when the adjustment was not made.
    pub beta: Vec<f64>,
    /// Whether the local-linear adjustment was made (false: too few accepted simulations
    /// for the number of statistics, see [`MIN_RESIDUAL_DF`]; the summaries are then those
    /// of plain rejection).
    pub regression: bool,
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

/// Residual degrees of freedom the local-linear adjustment needs: with fewer accepted
/// simulations of positive weight than (statistics + 1) + this, the regression would nearly
/// interpolate the accepted draws and shrink the posterior to a point, so it is skipped
/// (a rule of thumb, common practice).
pub const MIN_RESIDUAL_DF: usize = 10;

/// Adjusts the accepted draws `theta` of one parameter and summarises them.
///
/// The regression works on [`Prior::to_regression_scale`] (logit of the position inside
/// the prior bounds, after a log for log-uniform priors; Hamilton, Stoneking & Excoffier
/// 2005) and adjusted values are mapped back, so every adjusted value, and so the mean and
/// every quantile, lies inside [low, high]. With fewer than p + 1 + [`MIN_RESIDUAL_DF`]
/// positive weights (p statistics) the draws are left unadjusted (`regression` false).
/// The mean is Σ w θ* / Σ w on the parameter's own scale.
pub fn estimate(prior: &Prior, theta: &[f64], x: &[Vec<f64>], w: &[f64]) -> ParameterPosterior {
    let y: Vec<f64> = theta.iter().map(|&t| prior.to_regression_scale(t)).collect();
    let p = x.first().map_or(0, Vec::len);
    let positive = w.iter().filter(|&&v| v > 0.0).count();
    let regression = positive >= p + 1 + MIN_RESIDUAL_DF;
    let (beta, adjusted_y) = if regression {
        let fit = local_linear(&y, x, w);
        (fit.beta, fit.adjusted)
    } else {
        (vec![0.0; p], y)
    };
    let adjusted: Vec<f64> = adjusted_y.iter().map(|&v| prior.from_regression_scale(v)).collect();
    let wsum: f64 = w.iter().filter(|&&v| v > 0.0).sum();
    let mean = if wsum > 0.0 {
        // A mean of values inside the prior is inside it; rounding may leave it by an ulp.
        let m = adjusted.iter().zip(w).filter(|(_, w)| **w > 0.0).map(|(a, w)| a * w).sum::<f64>() / wsum;
        m.clamp(prior.low, prior.high)
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
        beta,
        regression,
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
        // Weighted summaries of θ* with w: sorted positive-weight values 3 (w 1), 3.5 (w 1.5):
        // F = 0.4, 1.0, so the median (q = 0.5) is 3.5 and the 2.5% quantile 3.
        assert!((weighted_quantile(&fit.adjusted, &w, 0.5) - 3.5).abs() < 1e-8);
        assert!((weighted_quantile(&fit.adjusted, &w, 0.025) - 3.0).abs() < 1e-8);
    }

    fn prior(kind: crate::abc::PriorKind, low: f64, high: f64, integer: bool) -> Prior {
        Prior { path: "p".into(), steps: vec![], kind, low, high, integer }
    }

    /// 13 draws whose regression-scale values are exactly 0.5 + x (x = -1.2, -1.0, ..., 1.2),
    /// equal weights: enough for one statistic (1 + 1 + MIN_RESIDUAL_DF = 12).
    fn exact_line(p: &Prior) -> (Vec<f64>, Vec<Vec<f64>>) {
        let xs: Vec<f64> = (0..13).map(|i| -1.2 + 0.2 * i as f64).collect();
        let theta = xs.iter().map(|&x| p.from_regression_scale(0.5 + x)).collect();
        (theta, xs.iter().map(|&x| vec![x]).collect())
    }

    #[test]
    fn adjustment_on_the_logit_scale_by_hand() {
        // Source: hand computation. The regression-scale values lie exactly on 0.5 + x, so
        // β = 1 and every adjusted value is the back-transform of 0.5:
        // uniform [0, 10]: 10 / (1 + e^-0.5) = 6.224593312018546;
        // log-uniform [0.5, 20]: exp(ln 0.5 + ln 40 / (1 + e^-0.5)) = 0.5 · 40^0.6224593312018546
        //   = 4.968064150712252 (e^(-0.693147 + 3.688879 · 0.622459)).
        let cases = [
            (prior(crate::abc::PriorKind::Uniform, 0.0, 10.0, false), 6.224593312018546),
            (prior(crate::abc::PriorKind::LogUniform, 0.5, 20.0, false), 0.5 * 40f64.powf(0.6224593312018546)),
        ];
        for (p, want) in cases {
            let (theta, x) = exact_line(&p);
            let post = estimate(&p, &theta, &x, &[1.0; 13]);
            assert!(post.regression);
            assert!((post.beta[0] - 1.0).abs() < 1e-9, "{post:?}");
            for a in &post.adjusted {
                assert!((a - want).abs() < 1e-9 * want, "{a} vs {want}");
            }
            assert!((post.mean - want).abs() < 1e-9 * want && (post.median - want).abs() < 1e-9 * want);
        }
        assert!((0.5 * 40f64.powf(0.6224593312018546) - 4.968064150712252).abs() < 1e-12);
    }

    #[test]
    fn transforms_round_trip_and_stay_inside() {
        // Source: the definition (logit and its inverse); whole-number priors use the bounds
        // widened by half a unit, so their end values are finite on the regression scale.
        use crate::abc::PriorKind::{LogUniform, Uniform};
        for p in [
            prior(Uniform, 100.0, 3000.0, false),
            prior(LogUniform, 0.5, 1.5, false),
            prior(Uniform, 3.0, 8.0, true),
            prior(LogUniform, 1.0, 1000.0, true),
        ] {
            for x in [p.low, p.low + 0.3 * (p.high - p.low), p.high] {
                let y = p.to_regression_scale(x);
                assert!(y.is_finite(), "{p:?} {x}");
                let back = p.from_regression_scale(y);
                assert!((back - x).abs() <= 1e-9 * x.abs().max(1.0), "{p:?}: {x} -> {y} -> {back}");
            }
            for y in [-1e300, -800.0, -30.0, 0.0, 30.0, 800.0, 1e300] {
                let x = p.from_regression_scale(y);
                assert!((p.low..=p.high).contains(&x), "{p:?}: {y} -> {x}");
            }
        }
        // The centre of the widened bounds of [3, 8] (whole numbers) is 5.5: logit 0.
        assert!(prior(Uniform, 3.0, 8.0, true).to_regression_scale(5.5).abs() < 1e-15);
    }

    #[test]
    fn a_steep_trend_at_the_edge_stays_inside_the_prior() {
        // Source: the case that motivated the transform (a posterior of N = 9543 for a prior
        // [100, 3000]). Draws near the top of the prior rise with x and the observation lies
        // beyond them (x = 0 while the draws have x < 0): on the natural scale the adjustment
        // extrapolates past 3000; on the logit scale it cannot.
        let p = prior(crate::abc::PriorKind::Uniform, 100.0, 3000.0, false);
        let xs: Vec<f64> = (0..20).map(|i| -3.0 + 0.1 * i as f64).collect();
        // θ = 3100 + 100 x: 2800..2990 for the draws, 3100 at the observation.
        let theta: Vec<f64> = xs.iter().map(|x| 3100.0 + 100.0 * x).collect();
        let x: Vec<Vec<f64>> = xs.iter().map(|&v| vec![v]).collect();
        let w = vec![1.0; 20];
        let natural = local_linear(&theta, &x, &w);
        assert!(natural.adjusted.iter().all(|&a| a > 3000.0), "{natural:?}");
        let post = estimate(&p, &theta, &x, &w);
        assert!(post.regression);
        assert!(post.adjusted.iter().all(|a| (100.0..=3000.0).contains(a)), "{post:?}");
        assert!(post.median > 2950.0 && post.high_95 <= 3000.0, "{post:?}");
    }

    #[test]
    fn too_few_accepted_for_the_statistics_leaves_draws_unadjusted() {
        // Source: the rule of MIN_RESIDUAL_DF (8 statistics need 8 + 1 + 10 = 19 positive
        // weights). With 12 the draws are returned as drawn (up to the round trip).
        let p = prior(crate::abc::PriorKind::Uniform, 0.5, 1.5, false);
        let theta: Vec<f64> = (0..12).map(|i| 0.6 + 0.07 * i as f64).collect();
        let x: Vec<Vec<f64>> = (0..12).map(|i| (0..8).map(|j| ((i * 7 + j * 3) % 5) as f64 - 2.0).collect()).collect();
        let post = estimate(&p, &theta, &x, &[1.0; 12]);
        assert!(!post.regression);
        assert!(post.beta.iter().all(|&b| b == 0.0));
        for (a, t) in post.adjusted.iter().zip(&theta) {
            assert!((a - t).abs() < 1e-12, "{a} {t}");
        }
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(300))]

        /// Source: the property promised by the transform: whatever the draws, statistics and
        /// weights, every adjusted value and every summary lies inside [low, high].
        #[test]
        fn adjusted_values_and_quantiles_stay_inside_the_prior(
            log in proptest::bool::ANY,
            integer in proptest::bool::ANY,
            low in -1000.0f64..1000.0,
            width in 1e-3f64..1e5,
            ratio in 1.01f64..1e4,
            draws in proptest::collection::vec((0.0f64..=1.0, proptest::bool::ANY, proptest::bool::ANY), 1..60),
            p in 1usize..4,
            xs in proptest::collection::vec(-50.0f64..50.0, 240),
            weights in proptest::collection::vec(0.0f64..1.0, 60),
        ) {
            let (kind, mut lo, mut hi) = if log {
                let lo = low.abs().max(1e-3);
                (crate::abc::PriorKind::LogUniform, lo, lo * ratio)
            } else {
                (crate::abc::PriorKind::Uniform, low, low + width)
            };
            if integer {
                lo = lo.round().max(if log { 1.0 } else { f64::MIN });
                hi = hi.round().max(lo + 1.0);
            }
            let pr = prior(kind, lo, hi, integer);
            // Draws at both ends too (u = 0 or 1 when flagged), rounded when whole.
            let theta: Vec<f64> = draws
                .iter()
                .map(|&(u, at_end, top)| {
                    let u = if at_end { f64::from(u8::from(top)) } else { u };
                    let t = if log { lo * (hi / lo).powf(u) } else { lo + u * (hi - lo) };
                    let t = if integer { t.round() } else { t };
                    t.clamp(lo, hi)
                })
                .collect();
            let n = theta.len();
            let x: Vec<Vec<f64>> = (0..n).map(|i| xs[i * p..(i + 1) * p].to_vec()).collect();
            let post = estimate(&pr, &theta, &x, &weights[..n]);
            for a in &post.adjusted {
                proptest::prop_assert!((lo..=hi).contains(a), "{a} outside [{lo}, {hi}]");
            }
            for q in [post.mean, post.median, post.low_95, post.high_95, post.quantile(0.05), post.quantile(0.95)] {
                let no_weight = weights[..n].iter().all(|&w| w <= 0.0);
                proptest::prop_assert!((lo..=hi).contains(&q) || (no_weight && q.is_nan()), "{q} outside [{lo}, {hi}]");
            }
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
