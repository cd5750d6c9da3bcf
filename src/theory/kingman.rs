//! Kingman's coalescent for one deme of N haploids without dormancy, the infinite-sites
//! expectations built on it, and the exact discrete Wright–Fisher chain.
//!
//! Coalescent results are in generations: coalescent time units (N generations) are
//! multiplied by `pop_size`, variances by its square. θ = 2Nμ with μ per sequence and
//! generation.

use super::error::TheoryError;
use crate::stats::{harmonic, harmonic_squares};

/// E\[T_MRCA] = 2N(1 - 1/n) generations (Kingman 1982, SPA 13:235). 0 for n <= 1.
///
/// ```text
/// E[T_MRCA] = N Σ_{k=2}^{n} 2/(k(k-1)) = 2N (1 - 1/n)
/// ```
pub fn tmrca_mean(n: u32, pop_size: f64) -> f64 {
    if n < 2 { 0.0 } else { 2.0 * pop_size * (1.0 - 1.0 / f64::from(n)) }
}

/// Var\[T_MRCA] in generations² (Kingman 1982). 0 for n <= 1.
///
/// ```text
/// Var[T_MRCA] = N² Σ_{k=2}^{n} 4/(k²(k-1)²)
/// ```
pub fn tmrca_variance(n: u32, pop_size: f64) -> f64 {
    let s: f64 = (2..=n).map(f64::from).map(|k| 4.0 / (k * k * (k - 1.0) * (k - 1.0))).sum();
    pop_size * pop_size * s
}

/// E\[L] = 2N a_n, the expected total branch length in lineage-generations (Kingman 1982).
///
/// ```text
/// E[L] = 2N Σ_{i=1}^{n-1} 1/i
/// ```
pub fn total_length_mean(n: u32, pop_size: f64) -> f64 {
    2.0 * pop_size * harmonic(n)
}

/// Var\[L] = 4N² b_n (Kingman 1982; Watterson 1975).
///
/// ```text
/// Var[L] = 4N² Σ_{i=1}^{n-1} 1/i²
/// ```
pub fn total_length_variance(n: u32, pop_size: f64) -> f64 {
    4.0 * pop_size * pop_size * harmonic_squares(n)
}

/// Expected unfolded SFS E\[ξ_i] = θ/i for i = 1..n-1 (Fu 1995, TPB 48:172). Empty for n < 2.
///
/// ```text
/// E[ξ_i] = θ / i
/// ```
pub fn expected_sfs(n: u32, theta: f64) -> Vec<f64> {
    (1..n).map(|i| theta / f64::from(i)).collect()
}

/// Expected folded SFS E\[η_i], i = 1..floor(n/2) (follows from E\[ξ_i] = θ/i).
///
/// ```text
/// E[η_i] = θ n / (i (n-i) (1 + δ_{i, n-i}))
/// ```
pub fn expected_folded_sfs(n: u32, theta: f64) -> Vec<f64> {
    let nf = f64::from(n);
    (1..=n / 2)
        .map(|i| {
            let fi = f64::from(i);
            let delta = if 2 * i == n { 2.0 } else { 1.0 };
            theta * nf / (fi * (nf - fi) * delta)
        })
        .collect()
}

/// E\[S] = θ a_n (Watterson 1975, TPB 7:256).
pub fn segregating_sites_mean(n: u32, theta: f64) -> f64 {
    theta * harmonic(n)
}

/// Var\[S] = θ a_n + θ² b_n (Watterson 1975).
pub fn segregating_sites_variance(n: u32, theta: f64) -> f64 {
    theta * harmonic(n) + theta * theta * harmonic_squares(n)
}

/// Var\[π] = b1 θ + b2 θ² (Tajima 1983, Genetics 105:437); E\[π] = θ. `None` for n < 2.
///
/// ```text
/// b1 = (n+1)/(3(n-1)),   b2 = 2(n²+n+3)/(9n(n-1))
/// ```
pub fn pi_variance(n: u32, theta: f64) -> Option<f64> {
    let k = crate::stats::TajimaConstants::new(n).ok()?;
    Some(k.b1 * theta + k.b2 * theta * theta)
}

/// P(S = k) for k = 0..=kmax under Kingman's coalescent with infinite sites.
///
/// ```text
/// P(S = k) = ((n-1)/θ) Σ_{i=1}^{n-1} (-1)^{i-1} C(n-2, i-1) (θ/(i+θ))^{k+1}
/// ```
/// (Tavaré 1984, TPB 26:119; Watterson 1975). That alternating sum cancels catastrophically
/// for large n, so it is evaluated as the equivalent convolution: while j lineages remain,
/// the number of mutations before the next coalescence is geometric on {0, 1, ...} with
/// success probability (j-1)/(θ+j-1), independently over j = 2..n. Cost O(n kmax).
/// For n < 2, P(S = 0) = 1. θ must be finite and > 0.
pub fn segregating_sites_pmf(n: u32, theta: f64, kmax: usize) -> Result<Vec<f64>, TheoryError> {
    super::error::check("theta", theta, "(0, inf)", |t| t > 0.0)?;
    let mut pmf = vec![0.0; kmax + 1];
    pmf[0] = 1.0;
    for j in 2..=n {
        let p = f64::from(j - 1) / (theta + f64::from(j - 1));
        let q = 1.0 - p;
        // Convolution with a geometric law p q^x: new[k] = p old[k] + q new[k-1].
        let mut prev = 0.0;
        for x in pmf.iter_mut() {
            prev = p * *x + q * prev;
            *x = prev;
        }
    }
    Ok(pmf)
}

/// E\[K_n], the expected number of distinct alleles (Ewens 1972, TPB 3:87).
///
/// ```text
/// E[K_n] = Σ_{i=0}^{n-1} θ/(θ+i)
/// ```
/// Under infinite sites without recombination this is also the expected number of distinct
/// haplotypes.
pub fn ewens_alleles_mean(n: u32, theta: f64) -> f64 {
    (0..n).map(|i| theta / (theta + f64::from(i))).sum()
}

/// Var\[K_n] (Ewens 1972): K_n is a sum of independent Bernoulli(θ/(θ+i)), i = 0..n-1.
///
/// ```text
/// Var[K_n] = Σ_{i=1}^{n-1} θ i/(θ+i)²
/// ```
pub fn ewens_alleles_variance(n: u32, theta: f64) -> f64 {
    (1..n).map(f64::from).map(|i| theta * i / ((theta + i) * (theta + i))).sum()
}

/// Fu's (1995) matrix σ with Cov(ξ_i, ξ_j) = σ_ij θ² (i ≠ j) and Var(ξ_i) = θ/i + σ_ii θ².
///
/// Returned as (n-1) rows of n-1 entries, `sigma[i-1][j-1]` = σ_ij. With a_i = Σ_{k<i} 1/k:
/// ```text
/// β_n(i) = 2n/((n-i+1)(n-i)) (a_{n+1} - a_i) - 2/(n-i)
/// σ_ii = β_n(i+1)                          i < n/2
///      = 2(a_n - a_i)/(n-i) - 1/i²         i = n/2
///      = β_n(i) - 1/i²                     i > n/2
/// σ_ij (i > j) = [β_n(i+1) - β_n(i)]/2                                      i + j < n
///              = (a_n-a_i)/(n-i) + (a_n-a_j)/(n-j) - [β_n(i)+β_n(j+1)]/2 - 1/(ij)   i + j = n
///              = [β_n(j) - β_n(j+1)]/2 - 1/(ij)                             i + j > n
/// ```
/// Source: Fu (1995), TPB 48:172 (formulas as in theory reference §2.4). Empty for n < 2.
pub fn fu_covariances(n: u32) -> Vec<Vec<f64>> {
    let nf = f64::from(n);
    let a = |i: u32| harmonic(i);
    let beta = |i: u32| {
        let fi = f64::from(i);
        2.0 * nf / ((nf - fi + 1.0) * (nf - fi)) * (a(n + 1) - a(i)) - 2.0 / (nf - fi)
    };
    let sigma = |i: u32, j: u32| -> f64 {
        let (fi, fj) = (f64::from(i), f64::from(j));
        if i == j {
            if 2 * i < n {
                beta(i + 1)
            } else if 2 * i == n {
                2.0 * (a(n) - a(i)) / (nf - fi) - 1.0 / (fi * fi)
            } else {
                beta(i) - 1.0 / (fi * fi)
            }
        } else {
            // Formulas are stated for i > j; σ is symmetric.
            let (i, j, fi, fj) = if i > j { (i, j, fi, fj) } else { (j, i, fj, fi) };
            if i + j < n {
                (beta(i + 1) - beta(i)) / 2.0
            } else if i + j == n {
                (a(n) - a(i)) / (nf - fi) + (a(n) - a(j)) / (nf - fj) - (beta(i) + beta(j + 1)) / 2.0 - 1.0 / (fi * fj)
            } else {
                (beta(j) - beta(j + 1)) / 2.0 - 1.0 / (fi * fj)
            }
        }
    };
    (1..n).map(|i| (1..n).map(|j| sigma(i, j)).collect()).collect()
}

/// Exact expectations of the discrete haploid Wright–Fisher genealogy.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct WrightFisherExact {
    /// E\[T_MRCA] in generations.
    pub tmrca_mean: f64,
    /// E\[L] in lineage-generations (each lineage alive in a generation counts 1).
    pub total_length_mean: f64,
}

/// Exact E\[T_MRCA] and E\[L] of n lineages in a Wright–Fisher deme of N haploids.
///
/// Each generation, k lineages pick parents uniformly with replacement, leaving j distinct:
/// ```text
/// P(k → j) = S2(k, j) N! / ((N-j)! N^k)          (S2: Stirling numbers of the second kind)
/// E_k = 1 + Σ_j P(k→j) E_j,    L_k = k + Σ_j P(k→j) L_j,    E_1 = L_1 = 0
/// ```
/// Evaluated in log space (ln S2 by its recurrence, ln of the falling factorial), and
/// 1 - P(k→k) as Σ_{j<k} P(k→j) to avoid cancellation for large N. Cost O(n²).
/// Requires n >= 1 and N >= 1; the exact chain is derived in theory reference §1.
pub fn wright_fisher_exact(n: u32, pop_size: u32) -> Result<WrightFisherExact, TheoryError> {
    if n == 0 {
        return Err(TheoryError::SampleSize { n, allowed: ">= 1" });
    }
    if pop_size == 0 {
        return Err(TheoryError::Parameter { name: "pop_size", value: 0.0, allowed: ">= 1" });
    }
    let n = n as usize;
    let big_n = f64::from(pop_size);
    let ln_n = big_n.ln();
    // ln of the falling factorial N (N-1) ... (N-j+1), -inf once j > N.
    let mut ln_fall = vec![0.0f64; n + 1];
    for j in 1..=n {
        let f = big_n - (j - 1) as f64;
        ln_fall[j] = if f > 0.0 { ln_fall[j - 1] + f.ln() } else { f64::NEG_INFINITY };
    }
    // ln S2(k, j) for the current k, rolled forward row by row.
    let mut ln_s2 = vec![f64::NEG_INFINITY; n + 1];
    ln_s2[0] = 0.0; // S2(0, 0) = 1
    let mut e = vec![0.0f64; n + 1];
    let mut l = vec![0.0f64; n + 1];
    for k in 1..=n {
        for j in (1..=k).rev() {
            // S2(k, j) = j S2(k-1, j) + S2(k-1, j-1).
            ln_s2[j] = log_add((j as f64).ln() + ln_s2[j], ln_s2[j - 1]);
        }
        ln_s2[0] = f64::NEG_INFINITY;
        if k == 1 {
            continue;
        }
        let p = |j: usize| (ln_s2[j] + ln_fall[j] - k as f64 * ln_n).exp();
        let (mut leave, mut se, mut sl) = (0.0, 0.0, 0.0);
        for j in 1..k {
            let pj = p(j);
            leave += pj;
            se += pj * e[j];
            sl += pj * l[j];
        }
        e[k] = (1.0 + se) / leave;
        l[k] = (k as f64 + sl) / leave;
    }
    Ok(WrightFisherExact { tmrca_mean: e[n], total_length_mean: l[n] })
}

fn log_add(a: f64, b: f64) -> f64 {
    if a == f64::NEG_INFINITY {
        return b;
    }
    if b == f64::NEG_INFINITY {
        return a;
    }
    let m = a.max(b);
    m + ((a - m).exp() + (b - m).exp()).ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn coalescent_moments_table() {
        // Source: Kingman (1982); theory reference §1 table (coalescent units, N = 1).
        for (n, t, vt, len, vl) in [
            (2, 1.0, 1.0, 2.0, 4.0),
            (5, 1.6, 1.1488888889, 4.1666666667, 5.6944444444),
            (10, 1.8, 1.1581418493, 5.6579365079, 6.1590709247),
            (50, 1.96, 1.1594618690, 8.9584106767, 6.4989309345),
        ] {
            assert!(close(tmrca_mean(n, 1.0), t, 1e-9), "n = {n}");
            assert!(close(tmrca_variance(n, 1.0), vt, 1e-9), "n = {n}");
            assert!(close(total_length_mean(n, 1.0), len, 1e-9), "n = {n}");
            assert!(close(total_length_variance(n, 1.0), vl, 1e-9), "n = {n}");
        }
        // E[T_2] = N generations.
        assert_eq!(tmrca_mean(2, 37.0), 37.0);
        // Closed form of Var[T_MRCA] (reference §1): 8 Σ_{j=2}^n 1/j² - 4(1-1/n)².
        let n = 17u32;
        let alt = 8.0 * (harmonic_squares(n + 1) - 1.0) - 4.0 * (1.0 - 1.0 / 17.0f64).powi(2);
        assert!(close(tmrca_variance(n, 1.0), alt, 1e-12));
    }

    #[test]
    fn exact_wright_fisher_table() {
        // Source: theory reference §1, exact discrete WF table (rational arithmetic there).
        for (big_n, n, t, len) in [
            (10, 5, 15.726071, 41.834677),
            (10, 10, 17.495620, 57.532765),
            (50, 10, 89.518471, 283.658649),
            (100, 5, 159.737661, 416.808135),
            (100, 10, 179.521098, 566.535976),
            (1000, 10, 1799.523421, 5658.662013),
        ] {
            let w = wright_fisher_exact(n, big_n).unwrap();
            assert!(close(w.tmrca_mean, t, 1e-6), "N={big_n} n={n}: {}", w.tmrca_mean);
            assert!(close(w.total_length_mean, len, 1e-6), "N={big_n} n={n}: {}", w.total_length_mean);
        }
        // Two lineages: T_2 ~ Geometric(1/N), mean N, length 2N (exact, §1).
        let w = wright_fisher_exact(2, 7).unwrap();
        assert!(close(w.tmrca_mean, 7.0, 1e-12) && close(w.total_length_mean, 14.0, 1e-12));
        // N = 1: everything coalesces in one generation.
        assert!(close(wright_fisher_exact(5, 1).unwrap().tmrca_mean, 1.0, 1e-12));
        // N = 2, n = 3 by hand: P(3→1) = S2(3,1)·2/8 = 1/4, P(3→2) = S2(3,2)·2·1/8 = 3/4, so
        // E_3 = 1 + (3/4)·2 = 5/2 and L_3 = 3 + (3/4)·4 = 6.
        let w = wright_fisher_exact(3, 2).unwrap();
        assert!(close(w.tmrca_mean, 2.5, 1e-12) && close(w.total_length_mean, 6.0, 1e-12));
        assert!(wright_fisher_exact(0, 10).is_err() && wright_fisher_exact(3, 0).is_err());
    }

    #[test]
    fn sfs_and_watterson() {
        // Source: Fu (1995) E[ξ_i] = θ/i; folded values from theory reference §2.5.
        let f5 = expected_folded_sfs(5, 1.0);
        assert!(close(f5[0], 1.25, 1e-12) && close(f5[1], 0.833333, 1e-6));
        let f10 = expected_folded_sfs(10, 1.0);
        for (g, w) in f10.iter().zip([1.111111, 0.625, 0.476190, 0.416667, 0.2]) {
            assert!(close(*g, w, 1e-6), "{g} {w}");
        }
        let sfs = expected_sfs(10, 2.0);
        assert!(close(sfs.iter().sum::<f64>(), segregating_sites_mean(10, 2.0), 1e-12));
        assert!(close(sfs[3], 0.5, 1e-15));
    }

    #[test]
    fn fu_sigma_n5_exact() {
        // Source: Fu (1995); exact rationals for n = 5 from theory reference §2.4.
        let want = [
            [29.0 / 72.0, -7.0 / 144.0, -1.0 / 36.0, 7.0 / 36.0],
            [-7.0 / 144.0, 11.0 / 36.0, 13.0 / 72.0, -11.0 / 144.0],
            [-1.0 / 36.0, 13.0 / 72.0, 7.0 / 36.0, -1.0 / 18.0],
            [7.0 / 36.0, -11.0 / 144.0, -1.0 / 18.0, 3.0 / 16.0],
        ];
        let s = fu_covariances(5);
        for i in 0..4 {
            for j in 0..4 {
                assert!(close(s[i][j], want[i][j], 1e-12), "σ_{}{}", i + 1, j + 1);
            }
        }
    }

    #[test]
    fn fu_sigma_reproduces_watterson_and_tajima_variances() {
        // Σ_ij σ_ij = b_n gives Var S = θ a_n + θ² b_n (Watterson 1975), and
        // π = Σ w_i ξ_i with w_i = 2i(n-i)/(n(n-1)) gives Var π = b1 θ + b2 θ² (Tajima 1983);
        // both identities are stated as exact in theory reference §2.1/§2.4.
        for n in [2u32, 3, 4, 7, 10, 25, 50] {
            let s = fu_covariances(n);
            let total: f64 = s.iter().flatten().sum();
            assert!(close(total, harmonic_squares(n), 1e-10), "n = {n}");
            let nf = f64::from(n);
            let w: Vec<f64> = (1..n).map(|i| 2.0 * f64::from(i) * (nf - f64::from(i)) / (nf * (nf - 1.0))).collect();
            let lin: f64 = w.iter().enumerate().map(|(i, wi)| wi * wi / (i + 1) as f64).sum();
            let quad: f64 =
                (0..w.len()).flat_map(|i| (0..w.len()).map(move |j| (i, j))).map(|(i, j)| w[i] * w[j] * s[i][j]).sum();
            let theta = 1.7;
            assert!(close(lin * theta + quad * theta * theta, pi_variance(n, theta).unwrap(), 1e-10), "n = {n}");
        }
        assert!(close(segregating_sites_variance(10, 2.0), 2.0 * harmonic(10) + 4.0 * harmonic_squares(10), 1e-14));
    }

    #[test]
    fn segregating_sites_distribution() {
        // Source: Tavaré (1984); values from theory reference §2.6.
        let p = segregating_sites_pmf(5, 1.0, 4).unwrap();
        for (g, w) in p.iter().zip([0.2, 0.25666667, 0.21105556, 0.14232685, 0.08605603]) {
            assert!(close(*g, w, 1e-8), "{g} {w}");
        }
        let p = segregating_sites_pmf(10, 2.0, 4).unwrap();
        for (g, w) in p.iter().zip([0.01818182, 0.05526827, 0.09520216, 0.12271607, 0.13210831]) {
            assert!(close(*g, w, 1e-8), "{g} {w}");
        }
        // Tavaré's alternating-sum formula itself, for small n where it is well conditioned.
        let (n, theta) = (6u32, 0.8f64);
        let p = segregating_sites_pmf(n, theta, 12).unwrap();
        for (k, pk) in p.iter().enumerate() {
            let mut s = 0.0;
            let mut binom = 1.0; // C(n-2, i-1)
            for i in 1..n {
                let sign = if i % 2 == 1 { 1.0 } else { -1.0 };
                s += sign * binom * (theta / (f64::from(i) + theta)).powi(k as i32 + 1);
                binom = binom * f64::from(n - 1 - i) / f64::from(i);
            }
            assert!(close(*pk, f64::from(n - 1) / theta * s, 1e-13), "k = {k}");
        }
        // Mean of the (nearly complete) distribution equals θ a_n.
        let p = segregating_sites_pmf(10, 1.0, 400).unwrap();
        let mean: f64 = p.iter().enumerate().map(|(k, x)| k as f64 * x).sum();
        assert!(close(mean, segregating_sites_mean(10, 1.0), 1e-9));
        assert!(segregating_sites_pmf(5, 0.0, 3).is_err());
    }

    #[test]
    fn ewens_moments() {
        // Source: Ewens (1972); values from theory reference §8.
        for (n, m, v) in [(2, 1.5, 0.25), (5, 2.283333, 0.819722), (10, 2.928968, 1.379201), (50, 4.499205, 2.874073)] {
            assert!(close(ewens_alleles_mean(n, 1.0), m, 1e-6), "n = {n}");
            assert!(close(ewens_alleles_variance(n, 1.0), v, 1e-6), "n = {n}");
        }
        assert!(close(ewens_alleles_mean(10, 2.0), 4.0397546898, 1e-9));
        assert!(close(ewens_alleles_variance(10, 2.0), 1.8076259138, 1e-9));
        assert!(close(ewens_alleles_mean(50, 5.0), 12.4604853021, 1e-9));
    }
}
