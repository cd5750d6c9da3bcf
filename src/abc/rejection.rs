//! Rejection ABC (Pritchard, Seielstad, Perez-Lezaun & Feldman 1999): scale, measure the
//! distance to the observed statistics, keep the closest simulations; model choice by the
//! share of each hypothesis among the accepted, optionally adjusted by multinomial logistic
//! regression (Beaumont 2008).

use super::regression::solve;

/// Factor making the MAD a consistent estimate of the standard deviation of a normal law:
///
/// ```text
/// 1 / Φ⁻¹(3/4) = 1 / 0.6744897501960817 = 1.482602218505602
/// ```
pub const MAD_CONSTANT: f64 = 1.482602218505602;

/// Median of a slice (the mean of the two middle values for an even length); NaN when empty.
pub fn median(xs: &[f64]) -> f64 {
    if xs.is_empty() {
        return f64::NAN;
    }
    let mut v = xs.to_vec();
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    if v.len() % 2 == 1 { v[m] } else { (v[m - 1] + v[m]) / 2.0 }
}

/// Median absolute deviation, scaled to the normal standard deviation:
///
/// ```text
/// MAD(x) = 1.4826 · median_i |x_i − median(x)|
/// ```
/// NaN for an empty slice.
pub fn mad(xs: &[f64]) -> f64 {
    let m = median(xs);
    let dev: Vec<f64> = xs.iter().map(|x| (x - m).abs()).collect();
    MAD_CONSTANT * median(&dev)
}

/// The scale of one statistic over all simulations: its MAD; when the MAD is 0 (more than
/// half of the simulations share one value, common for counts such as haplotypes) the
/// sample standard deviation; 0 when the statistic is constant, in which case it is left
/// out of the distance.
pub fn scale(xs: &[f64]) -> f64 {
    let m = mad(xs);
    if m > 0.0 {
        return m;
    }
    if xs.len() < 2 {
        return 0.0;
    }
    let mean = xs.iter().sum::<f64>() / xs.len() as f64;
    (xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (xs.len() - 1) as f64).sqrt()
}

/// Scale of every statistic (column) over the rows where it is defined.
pub fn scales(rows: &[&[Option<f64>]], columns: usize) -> Vec<f64> {
    (0..columns)
        .map(|j| {
            let xs: Vec<f64> = rows.iter().filter_map(|r| r[j]).collect();
            scale(&xs)
        })
        .collect()
}

/// Scaled Euclidean distance:
///
/// ```text
/// d(s, s_obs) = sqrt( Σ_j ((s_j − s_obs,j) / scale_j)² )     over j with scale_j > 0
/// ```
/// `None` when a used statistic is undefined in `s` (such a simulation is never accepted).
pub fn distance(s: &[Option<f64>], observed: &[f64], scales: &[f64]) -> Option<f64> {
    let mut d2 = 0.0;
    for ((x, o), sc) in s.iter().zip(observed).zip(scales) {
        if *sc > 0.0 {
            d2 += ((x.as_ref()? - o) / sc).powi(2);
        }
    }
    Some(d2.sqrt())
}

/// The differences (s − s_obs)/scale of one simulation, the regressors of the adjustments
/// (statistics with scale 0 are dropped).
pub fn scaled_differences(s: &[Option<f64>], observed: &[f64], scales: &[f64]) -> Vec<f64> {
    s.iter()
        .zip(observed)
        .zip(scales)
        .filter(|(_, sc)| **sc > 0.0)
        .map(|((x, o), sc)| (x.unwrap_or(f64::NAN) - o) / sc)
        .collect()
}

/// Number of simulations accepted out of `total` at tolerance ε: round(ε · total), at least 1.
pub fn accepted_count(total: usize, tolerance: f64) -> usize {
    ((tolerance * total as f64).round() as usize).max(1)
}

/// Indices of the `count` smallest defined distances, closest first; ties are broken by
/// index so that the result is deterministic.
pub fn closest(distances: &[Option<f64>], count: usize) -> Vec<usize> {
    let mut idx: Vec<usize> = (0..distances.len()).filter(|&i| distances[i].is_some()).collect();
    idx.sort_by(|&a, &b| distances[a].unwrap().total_cmp(&distances[b].unwrap()).then(a.cmp(&b)));
    idx.truncate(count);
    idx
}

/// Epanechnikov weights of accepted distances, with bandwidth δ = the largest of them:
///
/// ```text
/// w_i = 1 − (d_i / δ)²        (the farthest accepted simulation gets weight 0)
/// ```
/// All weights are 1 when δ = 0 (every accepted simulation equals the observed data).
pub fn epanechnikov_weights(d: &[f64]) -> Vec<f64> {
    let delta = d.iter().copied().fold(0.0, f64::max);
    if delta <= 0.0 {
        return vec![1.0; d.len()];
    }
    d.iter().map(|x| 1.0 - (x / delta).powi(2)).collect()
}

/// One hypothesis's share of the accepted simulations.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ModelShare {
    /// Accepted simulations of the hypothesis.
    pub accepted: usize,
    /// Posterior probability estimate p = accepted / total accepted.
    pub probability: f64,
    /// Monte-Carlo error, the binomial standard deviation sqrt(p (1 − p) / total accepted)
    /// (treats the accepted as independent draws; it ignores the error of the ABC
    /// approximation itself).
    pub mc_error: f64,
}

/// Rejection model choice: the share of each of `m` hypotheses among the accepted labels.
pub fn rejection_shares(labels: &[usize], m: usize) -> Vec<ModelShare> {
    let total = labels.len().max(1) as f64;
    (0..m)
        .map(|k| {
            let a = labels.iter().filter(|&&l| l == k).count();
            let p = a as f64 / total;
            ModelShare { accepted: a, probability: p, mc_error: (p * (1.0 - p) / total).sqrt() }
        })
        .collect()
}

/// Ridge penalty on the slopes of the logistic regression (on MAD-scaled statistics):
/// keeps the coefficients finite when the hypotheses are perfectly separated among the
/// accepted simulations.
pub const LOGISTIC_RIDGE: f64 = 0.01;

/// Multinomial logistic regression model choice (Beaumont 2008): fits
///
/// ```text
/// P(model = k | x) = exp(a_k + b_kᵀ x) / Σ_l exp(a_l + b_lᵀ x),   a_0 = b_0 = 0
/// ```
/// to the accepted simulations (label, x = scaled s − s_obs) by maximising the weighted
/// log-likelihood Σ w_i log P(y_i | x_i) − (λ/2) Σ |b_k|², λ = [`LOGISTIC_RIDGE`], with
/// Newton–Raphson (step halving when the objective does not increase), and returns the
/// fitted probabilities at x = 0, the observed data, with delta-method standard errors
/// from the inverse of the penalised weighted information (approximate: the weights are
/// treated as known frequencies). Hypotheses without accepted simulations get 0 (se 0);
/// reference class = the first hypothesis with accepted simulations.
pub fn logistic_probabilities(x: &[Vec<f64>], labels: &[usize], w: &[f64], m: usize) -> Vec<(f64, f64)> {
    let present: Vec<usize> = (0..m).filter(|k| labels.contains(k)).collect();
    let mut out = vec![(0.0, 0.0); m];
    if present.len() <= 1 {
        if let Some(&k) = present.first() {
            out[k] = (1.0, 0.0);
        }
        return out;
    }
    let c = present.len() - 1; // free classes
    let p = x.first().map_or(0, Vec::len) + 1; // intercept + slopes
    let dim = c * p;
    let class_of = |l: usize| present.iter().position(|&k| k == l).expect("label is present");
    let feats = |i: usize, j: usize| if j == 0 { 1.0 } else { x[i][j - 1] };
    let probs = |beta: &[f64], i: usize| -> Vec<f64> {
        let eta: Vec<f64> =
            std::iter::once(0.0).chain((0..c).map(|k| (0..p).map(|j| beta[k * p + j] * feats(i, j)).sum())).collect();
        let mx = eta.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let e: Vec<f64> = eta.iter().map(|v| (v - mx).exp()).collect();
        let s: f64 = e.iter().sum();
        e.into_iter().map(|v| v / s).collect()
    };
    let objective = |beta: &[f64]| -> f64 {
        let ll: f64 = (0..x.len()).map(|i| w[i] * probs(beta, i)[class_of(labels[i])].max(1e-300).ln()).sum();
        let pen: f64 = (0..c).flat_map(|k| (1..p).map(move |j| (k, j))).map(|(k, j)| beta[k * p + j].powi(2)).sum();
        ll - 0.5 * LOGISTIC_RIDGE * pen
    };
    let hessian_gradient = |beta: &[f64]| -> (Vec<Vec<f64>>, Vec<f64>) {
        let mut h = vec![vec![0.0; dim]; dim];
        let mut g = vec![0.0; dim];
        for i in 0..x.len() {
            let pr = probs(beta, i);
            let y = class_of(labels[i]);
            for k in 0..c {
                let r = f64::from(u8::from(y == k + 1)) - pr[k + 1];
                for a in 0..p {
                    g[k * p + a] += w[i] * r * feats(i, a);
                }
                for l in 0..c {
                    let cov = pr[k + 1] * (f64::from(u8::from(k == l)) - pr[l + 1]);
                    for a in 0..p {
                        for b in 0..p {
                            h[k * p + a][l * p + b] += w[i] * cov * feats(i, a) * feats(i, b);
                        }
                    }
                }
            }
        }
        for k in 0..c {
            for a in 1..p {
                g[k * p + a] -= LOGISTIC_RIDGE * beta[k * p + a];
                h[k * p + a][k * p + a] += LOGISTIC_RIDGE;
            }
        }
        (h, g)
    };
    // Start from the intercept-only solution: a_k = log(W_k / W_0).
    let wsum = |k: usize| -> f64 { (0..x.len()).filter(|&i| labels[i] == present[k]).map(|i| w[i]).sum::<f64>() };
    let w0 = wsum(0).max(1e-12);
    let mut beta = vec![0.0; dim];
    for k in 0..c {
        beta[k * p] = (wsum(k + 1).max(1e-12) / w0).ln();
    }
    let mut f = objective(&beta);
    for _ in 0..100 {
        let (h, g) = hessian_gradient(&beta);
        let Some(step) = solve(h, g) else { break };
        let mut t = 1.0;
        let mut improved = false;
        for _ in 0..30 {
            let cand: Vec<f64> = beta.iter().zip(&step).map(|(b, s)| b + t * s).collect();
            let fc = objective(&cand);
            if fc >= f - 1e-12 {
                let change = step.iter().map(|s| (t * s).abs()).fold(0.0, f64::max);
                beta = cand;
                f = fc;
                improved = change > 1e-9;
                break;
            }
            t /= 2.0;
        }
        if !improved {
            break;
        }
    }
    // Probabilities at x = 0 are the softmax of the intercepts.
    let eta: Vec<f64> = std::iter::once(0.0).chain((0..c).map(|k| beta[k * p])).collect();
    let mx = eta.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let e: Vec<f64> = eta.iter().map(|v| (v - mx).exp()).collect();
    let s: f64 = e.iter().sum();
    let pr: Vec<f64> = e.iter().map(|v| v / s).collect();
    let (h, _) = hessian_gradient(&beta);
    // Covariance of the intercepts: the corresponding entries of H⁻¹ (one solve per column).
    let mut cov = vec![vec![0.0; c]; c];
    for l in 0..c {
        let mut unit = vec![0.0; dim];
        unit[l * p] = 1.0;
        if let Some(col) = solve(h.clone(), unit) {
            for k in 0..c {
                cov[k][l] = col[k * p];
            }
        }
    }
    for (q, &k) in present.iter().enumerate() {
        // dp_q / da_l = p_q (δ_ql − p_l), l = 1..c over the free classes.
        let jac: Vec<f64> = (0..c).map(|l| pr[q] * (f64::from(u8::from(q == l + 1)) - pr[l + 1])).collect();
        let var: f64 = (0..c).map(|a| (0..c).map(|b| jac[a] * cov[a][b] * jac[b]).sum::<f64>()).sum();
        out[k] = (pr[q], var.max(0.0).sqrt());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mad_against_hand_computed_values() {
        // x = [1, 2, 3, 4, 100]: median 3, |x - 3| = [2, 1, 0, 1, 97], median 1,
        // MAD = 1.482602218505602 * 1.
        let x = [1.0, 2.0, 3.0, 4.0, 100.0];
        assert!((mad(&x) - 1.482602218505602).abs() < 1e-15);
        // x = [2, 4, 6, 10]: median (4+6)/2 = 5, |x - 5| = [3, 1, 1, 5], median (1+3)/2 = 2,
        // MAD = 2 * 1.482602218505602 = 2.965204437011204.
        assert!((mad(&[10.0, 2.0, 6.0, 4.0]) - 2.965204437011204).abs() < 1e-15);
        // The constant is 1/Φ⁻¹(0.75), Φ⁻¹(0.75) = 0.6744897501960817 (standard normal table).
        assert!((MAD_CONSTANT * 0.6744897501960817 - 1.0).abs() < 1e-15);
        // MAD 0 (three of four equal): falls back to the sd of [5, 5, 5, 9]: mean 6,
        // squares 1+1+1+9 = 12, /3 = 4, sd 2.
        assert_eq!(scale(&[5.0, 5.0, 5.0, 9.0]), 2.0);
        assert_eq!(scale(&[5.0, 5.0]), 0.0);
    }

    #[test]
    fn distance_acceptance_and_weights_by_hand() {
        // scales [2, 0.5] and a constant column (scale 0, ignored):
        // s = [3, 1, 7], obs = [1, 2, 0]: ((3-1)/2)² + ((1-2)/0.5)² = 1 + 4 = 5.
        let d = distance(&[Some(3.0), Some(1.0), Some(7.0)], &[1.0, 2.0, 0.0], &[2.0, 0.5, 0.0]).unwrap();
        assert!((d - 5f64.sqrt()).abs() < 1e-15);
        assert_eq!(distance(&[None, Some(1.0), Some(7.0)], &[1.0, 2.0, 0.0], &[2.0, 0.5, 0.0]), None);
        // 10% of 25 = 2.5 rounds to 3 (half away from zero); never fewer than 1.
        assert_eq!(accepted_count(25, 0.1), 3);
        assert_eq!(accepted_count(5, 0.01), 1);
        let ds = [Some(0.5), None, Some(0.2), Some(0.5), Some(0.1)];
        assert_eq!(closest(&ds, 3), [4, 2, 0]);
        // δ = 2: 1 − (1/2)² = 0.75, 1 − 0 = 1, 1 − 1 = 0.
        assert_eq!(epanechnikov_weights(&[1.0, 0.0, 2.0]), [0.75, 1.0, 0.0]);
    }

    #[test]
    fn rejection_shares_and_binomial_error() {
        // 3 of 4 accepted from hypothesis 0: p = 0.75, sd = sqrt(0.75·0.25/4) = 0.2165063509.
        let s = rejection_shares(&[0, 1, 0, 0], 3);
        assert_eq!(s[0].accepted, 3);
        assert!((s[0].probability - 0.75).abs() < 1e-15);
        assert!((s[0].mc_error - (0.1875f64 / 4.0).sqrt()).abs() < 1e-15);
        assert_eq!(s[2].accepted, 0);
        assert_eq!(s[2].mc_error, 0.0);
    }

    #[test]
    fn logistic_without_slopes_information_gives_weighted_shares() {
        // All x = 0: the slopes cannot help, the intercept-only fit maximises
        // Σ w log p, so p_k = W_k / W (weighted shares): W_0 = 1 + 0.5 = 1.5, W_1 = 0.5,
        // p = (0.75, 0.25).
        let x = vec![vec![0.0]; 3];
        let r = logistic_probabilities(&x, &[0, 0, 1], &[1.0, 0.5, 0.5], 2);
        assert!((r[0].0 - 0.75).abs() < 1e-9, "{r:?}");
        assert!((r[1].0 - 0.25).abs() < 1e-9);
        assert!(r[0].1 > 0.0);
    }

    #[test]
    fn logistic_follows_the_local_trend() {
        // Hypothesis 1 is frequent at x > 0, hypothesis 0 at x < 0; at x = 0 the symmetric
        // design gives p = 1/2 whatever the slope (by symmetry of the data about 0).
        let xs = [-2.0, -1.5, -1.0, -0.5, 0.5, 1.0, 1.5, 2.0];
        let labels = [0, 0, 0, 1, 0, 1, 1, 1];
        let x: Vec<Vec<f64>> = xs.iter().map(|&v| vec![v]).collect();
        let r = logistic_probabilities(&x, &labels, &[1.0; 8], 2);
        assert!((r[0].0 - 0.5).abs() < 1e-6, "{r:?}");
        // Observed at s = 1 instead (regressors s − 1): hypothesis 1 dominates there.
        let shifted: Vec<Vec<f64>> = xs.iter().map(|&v| vec![v - 1.0]).collect();
        let r = logistic_probabilities(&shifted, &labels, &[1.0; 8], 2);
        assert!(r[1].0 > 0.6 && (r[0].0 + r[1].0 - 1.0).abs() < 1e-12, "{r:?}");
    }
}
