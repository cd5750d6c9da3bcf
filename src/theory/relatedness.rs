//! Relatedness of individuals in the forest regime (sum q_k^2 finite): the meeting sums S
//! and H_n, meeting probabilities for one deme of N, the depth of the common ancestor and
//! the variance of coloured-family sums.
//!
//! Two ancestral lines are independent renewal sets until they first meet; for N = 1 they
//! then coincide. The expected number of common ancestral generations, split at the first,
//! gives the first-meeting identity (theory reference §7.1):
//!
//! ```text
//! P(0 ~ n) S = H_n,   S = sum_{k>=0} q_k^2,   H_n = sum_{k>=0} q_k q_{k+n}
//! ```
//! Sources: Hammond & Sheffield (2013), *Probab. Theory Relat. Fields* 157:691-719;
//! Blath, González Casanova, Kurt & Spanò (2013), *J. Appl. Probab.* 50:741-759.

use super::renewal::{Asymptote, Convolver, Regime, RenewalError, classify, renewal_sequence, series_inverse};
use crate::dormancy::Dormancy;
use statrs::function::beta::beta_reg;
use statrs::function::gamma::ln_gamma;
use std::f64::consts::PI;

/// A sum computed from the renewal sequence plus an asymptotic tail beyond it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TailedSum {
    /// The whole sum, tail included.
    pub value: f64,
    /// The part contributed by the asymptotic tail (a measure of how much rests on it).
    pub tail: f64,
}

/// Meeting sums of a forest-regime law, from its renewal sequence q_0..q_{L-1} and the
/// asymptotic expansion of q beyond L.
#[derive(Debug, Clone)]
pub struct Relatedness {
    q: Vec<f64>,
    asymptote: Asymptote,
    s: TailedSum,
}

impl Relatedness {
    /// A renewal length (2^17) that gives S and H_n to better than 1e-9 relative for laws A
    /// and B (see tests).
    pub const DEFAULT_LEN: usize = 1 << 17;

    /// Computes q_0..q_{len-1} of `law` and S with its tail.
    ///
    /// Domain: forest-regime laws (untruncated pareto alpha < 1/2, or a mixture whose
    /// heaviest part is one); others give [`RenewalError::NotForest`]. For a mixture only the
    /// leading term of the tail is known, so the tail correction is accurate to a relative
    /// O(len^-min(alpha, 1-2 alpha)) only; see [`TailedSum::tail`] for its size.
    pub fn new(law: &Dormancy, len: usize) -> Result<Self, RenewalError> {
        let class = classify(law)?;
        if class.regime != Regime::Forest {
            return Err(RenewalError::NotForest(class.regime));
        }
        let asymptote = Asymptote::for_law(law).ok_or(RenewalError::NotForest(class.regime))?;
        Self::from_renewal(renewal_sequence(law, len)?, asymptote)
    }

    /// Builds from a given renewal sequence (q\[0\] = 1) and the expansion of its tail.
    ///
    /// Use this for laws not in [`Dormancy`] form, e.g. law A of the theory reference with
    /// [`Asymptote::law_a`]. Needs `asymptote.alpha() < 1/2` and at least 64 terms.
    pub fn from_renewal(q: Vec<f64>, asymptote: Asymptote) -> Result<Self, RenewalError> {
        if asymptote.alpha() >= 0.5 {
            let regime = if asymptote.alpha() == 0.5 { Regime::Critical } else { Regime::Tree };
            return Err(RenewalError::NotForest(regime));
        }
        if q.len() < 64 {
            return Err(RenewalError::TooShort { what: "the meeting sums", needed: 64, len: q.len() });
        }
        if q[0] != 1.0 || q.iter().any(|x| !x.is_finite() || *x < 0.0) {
            return Err(RenewalError::OutOfRange { param: "q", value: q[0], allowed: "q[0] = 1, q[k] in [0, 1]" });
        }
        let head: f64 = q.iter().map(|x| x * x).sum();
        let tail = asymptote.pair_tail(q.len(), 0).unwrap_or(0.0);
        Ok(Relatedness { q, asymptote, s: TailedSum { value: head + tail, tail } })
    }

    /// The renewal sequence q_0..q_{L-1}.
    pub fn renewal(&self) -> &[f64] {
        &self.q
    }

    /// The tail expansion in use.
    pub fn asymptote(&self) -> &Asymptote {
        &self.asymptote
    }

    /// S = sum_{k>=0} q_k^2, the expected number of generations shared by two lineages that
    /// start together (counting the start).
    pub fn s(&self) -> TailedSum {
        self.s
    }

    fn check_lag(&self, lag: usize, what: &'static str) -> Result<(), RenewalError> {
        // The tail expansion in lag/k needs k >= 2 lag beyond the computed range.
        let needed = 3 * lag + 64;
        if needed > self.q.len() { Err(RenewalError::TooShort { what, needed, len: self.q.len() }) } else { Ok(()) }
    }

    /// H_n = sum_{k>=0} q_k q_{k+n}, direct sum over k < L - n plus the asymptotic tail.
    ///
    /// Needs L >= 3n + 64.
    pub fn h(&self, lag: usize) -> Result<TailedSum, RenewalError> {
        self.check_lag(lag, "H_n")?;
        let from = self.q.len() - lag;
        let head: f64 = self.q[..from].iter().zip(&self.q[lag..]).map(|(a, b)| a * b).sum();
        let tail = self.asymptote.pair_tail(from, lag).unwrap_or(0.0);
        Ok(TailedSum { value: head + tail, tail })
    }

    /// H_0..H_{max_lag} at once: the finite parts by one FFT autocorrelation, plus tails.
    pub fn h_range(&self, max_lag: usize) -> Result<Vec<TailedSum>, RenewalError> {
        self.check_lag(max_lag, "H_n")?;
        let len = self.q.len();
        let rev: Vec<f64> = self.q.iter().rev().copied().collect();
        let corr = Convolver::default().cyclic(&self.q, &rev, (2 * len - 1).next_power_of_two());
        Ok((0..=max_lag)
            .map(|n| {
                let tail = self.asymptote.pair_tail(len - n, n).unwrap_or(0.0);
                TailedSum { value: corr[len - 1 + n] + tail, tail }
            })
            .collect())
    }

    /// P(0 ~ n) for N = 1: the probability that individuals n generations apart are related.
    ///
    /// ```text
    /// P(0 ~ n) = H_n / S        (first-meeting identity, theory reference §7.1)
    /// ```
    /// P(0 ~ 0) = 1.
    pub fn related(&self, lag: usize) -> Result<f64, RenewalError> {
        Ok(self.h(lag)?.value / self.s.value)
    }

    /// P(two lineages of one generation ever meet) in one deme of N.
    ///
    /// ```text
    /// P = (S - 1) / (N + S - 1)
    /// ```
    /// The lineages share generations as a renewal process with mass q_k^2 (mean count S - 1
    /// after the start) and pick the same parent with probability 1/N at each. Source: theory
    /// reference §4 (Blath, González Casanova, Kurt & Spanò 2013 regime). `deme_size` >= 1.
    pub fn meet_same_generation(&self, deme_size: u64) -> f64 {
        let s = self.s.value;
        (s - 1.0) / (deme_size.max(1) as f64 + s - 1.0)
    }

    /// P(lineages sampled n >= 1 generations apart ever meet) in one deme of N.
    ///
    /// ```text
    /// P = H_n / (N + S - 1)
    /// ```
    /// Source: theory reference §4. For n = 0 use [`Relatedness::meet_same_generation`].
    pub fn meet_apart(&self, lag: usize, deme_size: u64) -> Result<f64, RenewalError> {
        if lag == 0 {
            return Ok(self.meet_same_generation(deme_size));
        }
        Ok(self.h(lag)?.value / (deme_size.max(1) as f64 + self.s.value - 1.0))
    }

    /// Exact P(D <= x n | 0 ~ n) for N = 1, for each x in `xs` (x >= 0).
    ///
    /// D is the depth of the first common ancestor below the older individual:
    ///
    /// ```text
    /// g_k = q_k q_{k+n} = sum_{j<=k} h_j q_{k-j}^2   =>   h = g / Q2,  Q2(z) = sum q_k^2 z^k
    /// P(D <= x n | 0 ~ n) = (sum_{j <= floor(x n)} h_j) / P(0 ~ n)
    /// ```
    /// (theory reference §7.1, §7.4). Needs L > max floor(x n) + n and L >= 3n + 64.
    pub fn mrca_depth_cdf(&self, lag: usize, xs: &[f64]) -> Result<Vec<f64>, RenewalError> {
        let mut depths = Vec::with_capacity(xs.len());
        for &x in xs {
            if !(x.is_finite() && x >= 0.0) {
                return Err(RenewalError::OutOfRange { param: "x", value: x, allowed: "[0, inf)" });
            }
            // Guard against x n landing a rounding step below an integer.
            depths.push((x * lag as f64 + 1e-9).floor() as usize);
        }
        let top = depths.iter().copied().max().unwrap_or(0);
        if top + lag + 1 > self.q.len() {
            return Err(RenewalError::TooShort {
                what: "the MRCA depth law",
                needed: top + lag + 1,
                len: self.q.len(),
            });
        }
        let related = self.related(lag)?;
        let g: Vec<f64> = (0..=top).map(|k| self.q[k] * self.q[k + lag]).collect();
        let q2: Vec<f64> = self.q[..=top].iter().map(|x| x * x).collect();
        let inv = series_inverse(&q2, top + 1)?;
        let h = Convolver::default().linear(&g, &inv, top + 1);
        let mut cum = Vec::with_capacity(h.len());
        let mut acc = 0.0;
        for x in h {
            acc += x;
            cum.push(acc);
        }
        Ok(depths.iter().map(|&d| cum[d] / related).collect())
    }

    /// Exact variance of the ±1-coloured family sum S_n = X_1 + ... + X_n for N = 1.
    ///
    /// Each family (connected component) gets colour +1 or -1 with probability 1/2, so
    /// Cov(X_i, X_j) = P(i ~ j):
    ///
    /// ```text
    /// Var(S_n) = n + 2 sum_{d=1}^{n-1} (n - d) P(0 ~ d)
    /// ```
    /// Source: Hammond & Sheffield (2013); theory reference §7.1. For colour probability p
    /// multiply by 4p(1-p). Needs n >= 1 and L >= 3n + 64.
    pub fn coloured_variance(&self, n: usize) -> Result<f64, RenewalError> {
        if n == 0 {
            return Err(RenewalError::OutOfRange { param: "n", value: 0.0, allowed: "integers >= 1" });
        }
        let h = self.h_range(n - 1)?;
        let s = self.s.value;
        let cross: f64 = (1..n).map(|d| (n - d) as f64 * h[d].value / s).sum();
        Ok(n as f64 + 2.0 * cross)
    }
}

fn check_forest_alpha(alpha: f64) -> Result<f64, RenewalError> {
    if alpha.is_finite() && alpha > 0.0 && alpha < 0.5 {
        Ok(alpha)
    } else {
        Err(RenewalError::OutOfRange { param: "alpha", value: alpha, allowed: "(0, 1/2)" })
    }
}

/// Beta function B(a, b) = Gamma(a) Gamma(b) / Gamma(a + b), a, b > 0.
fn beta_fn(a: f64, b: f64) -> f64 {
    (ln_gamma(a) + ln_gamma(b) - ln_gamma(a + b)).exp()
}

/// Constant C of P(0 ~ n) ~ C n^(2 alpha - 1), 0 < alpha < 1/2, for `P(R > n) ~ n^-alpha`.
///
/// ```text
/// C = (sin(pi alpha) / pi)^2 B(alpha, 1 - 2 alpha) / S
/// ```
/// Source: theory reference §7.1 (derived from the first-meeting identity and the strong
/// renewal theorem, with sum_k k^(a-1) (k+n)^(a-1) ~ n^(2a-1) B(a, 1-2a)).
pub fn related_constant(alpha: f64, s: f64) -> Result<f64, RenewalError> {
    let a = check_forest_alpha(alpha)?;
    let c = (PI * a).sin() / PI;
    Ok(c * c * beta_fn(a, 1.0 - 2.0 * a) / s)
}

/// Asymptote of P(0 ~ n) for N = 1: C n^(2 alpha - 1), with C from [`related_constant`].
pub fn related_asymptote(alpha: f64, s: f64, n: f64) -> Result<f64, RenewalError> {
    Ok(related_constant(alpha, s)? * n.powf(2.0 * alpha - 1.0))
}

/// Asymptote of Var(S_n) for ±1 colours, 0 < alpha < 1/2.
///
/// ```text
/// Var(S_n) ~ C n^(2H) / (H (2H - 1)),   H = alpha + 1/2   (Hurst exponent)
/// ```
/// Source: Hammond & Sheffield (2013) (H = alpha + 1/2); constant: theory reference §7.1.
pub fn coloured_variance_asymptote(alpha: f64, s: f64, n: f64) -> Result<f64, RenewalError> {
    let c = related_constant(alpha, s)?;
    let h = alpha + 0.5;
    Ok(c * n.powf(2.0 * h) / (h * (2.0 * h - 1.0)))
}

/// CDF of the limit law BetaPrime(alpha, 1 - 2 alpha) of D/n given 0 ~ n, 0 < alpha < 1/2.
///
/// ```text
/// F(x) = I_{x/(1+x)}(alpha, 1 - 2 alpha),   density x^(a-1) (1+x)^(a-1) / B(a, 1-2a)
/// ```
/// The mean is infinite. Source: theory reference §7.1 (derived there); I via statrs `beta_reg`.
pub fn beta_prime_cdf(alpha: f64, x: f64) -> Result<f64, RenewalError> {
    let a = check_forest_alpha(alpha)?;
    if x.is_nan() {
        return Err(RenewalError::OutOfRange { param: "x", value: x, allowed: "not NaN" });
    }
    if x <= 0.0 {
        return Ok(0.0);
    }
    if x == f64::INFINITY {
        return Ok(1.0);
    }
    Ok(beta_reg(a, 1.0 - 2.0 * a, x / (1.0 + x)))
}

/// Median of BetaPrime(alpha, 1 - 2 alpha), by bisection of I_u(alpha, 1 - 2 alpha) = 1/2 in u.
pub fn beta_prime_median(alpha: f64) -> Result<f64, RenewalError> {
    let a = check_forest_alpha(alpha)?;
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if beta_reg(a, 1.0 - 2.0 * a, mid) < 0.5 {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo < 1e-16 {
            break;
        }
    }
    let u = 0.5 * (lo + hi);
    Ok(u / (1.0 - u))
}

/// P(two lineages sampled `gap` generations apart ever meet) in one deme of N.
///
/// 1 in the tree and critical regimes (sum q_k^2 diverges); in the forest regime
/// (S-1)/(N+S-1) for gap 0 and H_gap/(N+S-1) otherwise, from a renewal sequence of length
/// `len` (e.g. [`Relatedness::DEFAULT_LEN`]). Source: theory reference §4.
pub fn meeting_probability(law: &Dormancy, deme_size: u64, gap: usize, len: usize) -> Result<f64, RenewalError> {
    match classify(law)?.regime {
        Regime::Tree | Regime::Critical => Ok(1.0),
        Regime::Forest => Relatedness::new(law, len)?.meet_apart(gap, deme_size),
    }
}

#[cfg(test)]
mod tests {
    use super::super::renewal::tests::law_a_table;
    use super::*;
    use crate::dormancy::Pareto;
    use std::sync::OnceLock;

    const LEN: usize = Relatedness::DEFAULT_LEN;
    const ALPHAS: [f64; 3] = [0.2, 0.3, 0.4];

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    /// Law A for alpha = 0.2, 0.3, 0.4, computed once for all tests.
    fn law_a() -> &'static [Relatedness] {
        static CELL: OnceLock<Vec<Relatedness>> = OnceLock::new();
        CELL.get_or_init(|| {
            ALPHAS
                .iter()
                .map(|&a| {
                    let q = renewal_sequence(&law_a_table(a, LEN + 1), LEN).unwrap();
                    Relatedness::from_renewal(q, Asymptote::law_a(a).unwrap()).unwrap()
                })
                .collect()
        })
    }

    #[test]
    fn law_a_s_and_relatedness() {
        // Source: theory reference §7.4, law A coalescence table (S, P(0~1), P(0~2), P(0~10),
        // P(0~100), P(0~1000)) and H_10. Tolerance 1e-9 relative.
        let want = [
            (1.048729920017, [0.036532649299, 0.157057553734, 0.0497171826934, 0.0123930352903, 0.00310759115177]),
            (1.140625203819, [0.103681878149, 0.264164971927, 0.118137737893, 0.0471134870019, 0.0187538254667]),
            (1.416960992221, [0.267334524015, 0.434642728868, 0.279334265486, 0.176164148562, 0.111109083249]),
        ];
        let h10 = [0.05213989702955, 0.1347508813625, 0.3958057579837];
        for (i, r) in law_a().iter().enumerate() {
            let (s, p) = want[i];
            assert!(rel(r.s().value, s) < 1e-9, "alpha {}: S = {} vs {s}", ALPHAS[i], r.s().value);
            assert!(r.s().tail > 0.0);
            for (lag, w) in [1usize, 2, 10, 100, 1000].iter().zip(p) {
                let got = r.related(*lag).unwrap();
                assert!(rel(got, w) < 1e-9, "alpha {}: P(0~{lag}) = {got} vs {w}", ALPHAS[i]);
            }
            assert!(rel(r.h(10).unwrap().value, h10[i]) < 1e-9);
        }
    }

    #[test]
    fn law_b_s_and_relatedness() {
        // Source: theory reference §7.4, "Law B, for comparison" (S, C, P(0~10), P(0~100),
        // P(0~1000)). Tolerance 1e-9 relative (S, P), 1e-9 (C).
        let want = [
            (0.2, 1.051687075733, 0.195459005301, [0.0474523108593, 0.0122622128268, 0.00309496511036]),
            (0.3, 1.151200874153, 0.294484899384, [0.116017790286, 0.0465764554892, 0.0185730293575]),
            (0.4, 1.445129644441, 0.433651264307, [0.278172556543, 0.173423836405, 0.109054941704]),
        ];
        for (a, s, c, p) in want {
            let r = Relatedness::new(&Dormancy::Pareto(Pareto::new(a, None).unwrap()), LEN).unwrap();
            assert!(rel(r.s().value, s) < 1e-9, "alpha {a}: S = {} vs {s}", r.s().value);
            assert!(rel(related_constant(a, r.s().value).unwrap(), c) < 1e-9);
            for (lag, w) in [10usize, 100, 1000].iter().zip(p) {
                let got = r.related(*lag).unwrap();
                assert!(rel(got, w) < 1e-9, "alpha {a}: P(0~{lag}) = {got} vs {w}");
            }
        }
    }

    #[test]
    fn mixture_uses_leading_tail() {
        // Source: theory reference §7.4 law B S = 1.151200874153 (alpha = 0.3). A one-part
        // mixture is law B, but only the leading tail term is used for it, so the tolerance
        // is 5e-7 relative: the dropped d-term is a relative ~2 (d/c) L^(alpha-1) ~ 5e-5 of a
        // ~2e-3 tail.
        let part = Dormancy::Pareto(Pareto::new(0.3, None).unwrap());
        let law = Dormancy::Mixture(crate::dormancy::Mixture::new(vec![(1.0, part)]).unwrap());
        let r = Relatedness::new(&law, LEN).unwrap();
        assert!(!r.asymptote().is_full());
        assert!(rel(r.s().value, 1.151200874153) < 5e-7, "S = {}", r.s().value);
        assert!(r.s().tail > 1e-4 && r.s().tail < 1e-2, "tail {}", r.s().tail);
    }

    #[test]
    fn forest_meeting_probabilities() {
        // Source: theory reference §4 table, law A: (S-1)/(N+S-1) for N = 10, 100, 1000 and
        // H_10/(N+S-1) for N = 100. Tolerance 1e-8 relative (S - 1 is small for alpha = 0.2).
        let want = [
            [0.004849361104, 4.870618553e-4, 4.872754553e-5, 5.211450167e-4],
            [0.01386750826, 1.40427727e-3, 1.406054312e-4, 1.345616538e-3],
            [0.04002712428, 4.152296466e-3, 4.167872082e-4, 3.941622551e-3],
        ];
        for (r, w) in law_a().iter().zip(want) {
            for (n, wn) in [10u64, 100, 1000].iter().zip(w) {
                assert!(rel(r.meet_same_generation(*n), wn) < 1e-8, "N = {n}");
            }
            assert!(rel(r.meet_apart(10, 100).unwrap(), w[3]) < 1e-8);
        }
        // Tree and critical regimes meet with certainty (Hammond & Sheffield 2013).
        for a in [0.5, 0.7, 1.5] {
            let law = Dormancy::Pareto(Pareto::new(a, None).unwrap());
            assert_eq!(meeting_probability(&law, 10, 3, 1000).unwrap(), 1.0);
            assert!(matches!(Relatedness::new(&law, 1000), Err(RenewalError::NotForest(_))));
        }
        assert_eq!(meeting_probability(&Dormancy::None, 10, 0, 1000).unwrap(), 1.0);
    }

    #[test]
    fn relatedness_asymptote_ratio() {
        // Source: theory reference §7.4, ratio P(0~n) / (C n^(2a-1)) at n = 1000 for law A:
        // 1.000335, 1.000043, 1.000138. Tolerance 1e-6 absolute (the table has 7 digits).
        for (r, want) in law_a().iter().zip([1.000335, 1.000043, 1.000138]) {
            let a = r.asymptote().alpha();
            let ratio = r.related(1000).unwrap() / related_asymptote(a, r.s().value, 1000.0).unwrap();
            assert!((ratio - want).abs() < 1e-6, "alpha {a}: {ratio}");
        }
    }

    #[test]
    fn h_range_matches_single_lags() {
        // Source: exact computation (FFT autocorrelation vs direct dot products).
        let r = &law_a()[1];
        let all = r.h_range(500).unwrap();
        for lag in [0usize, 1, 7, 100, 500] {
            let one = r.h(lag).unwrap();
            assert!(rel(all[lag].value, one.value) < 1e-12, "lag {lag}");
        }
        assert!(matches!(r.h(LEN / 2), Err(RenewalError::TooShort { .. })));
    }

    #[test]
    fn mrca_depth_finite_n() {
        // Source: theory reference §7.4, exact finite-n P(D <= x n | 0~n) for law A at
        // x = 0.1, 0.5, 1, 2, 5 (5 digits given: tolerance 6e-6 absolute).
        let xs = [0.1, 0.5, 1.0, 2.0, 5.0];
        let want = [
            [
                [0.59733, 0.72901, 0.79044, 0.84641, 0.90425],
                [0.54301, 0.70643, 0.77635, 0.83754, 0.89932],
                [0.53282, 0.70227, 0.77348, 0.83558, 0.89815],
            ],
            [
                [0.42397, 0.55601, 0.62602, 0.69646, 0.77917],
                [0.35109, 0.51460, 0.59521, 0.67324, 0.76290],
                [0.33145, 0.50212, 0.58488, 0.66479, 0.75658],
            ],
            [
                [0.26170, 0.36365, 0.42315, 0.48779, 0.57193],
                [0.19168, 0.31033, 0.37585, 0.44489, 0.53361],
                [0.16810, 0.28769, 0.35326, 0.42260, 0.51229],
            ],
        ];
        for (r, w) in law_a().iter().zip(want) {
            for (n, wn) in [10usize, 100, 1000].iter().zip(w) {
                let got = r.mrca_depth_cdf(*n, &xs).unwrap();
                for (g, e) in got.iter().zip(wn) {
                    assert!((g - e).abs() < 6e-6, "alpha {} n {n}: {got:?} vs {wn:?}", r.asymptote().alpha());
                }
            }
        }
    }

    #[test]
    fn beta_prime_limit() {
        // Source: theory reference §7.4 BetaPrime(alpha, 1-2alpha) table: median, CDF(1) =
        // I_{1/2}(alpha, 1-2alpha) (10 digits: tol 1e-9) and CDF at 0.1, 0.5, 2, 5 (5 digits: tol 6e-6).
        let table = [
            (0.2, 0.0732132375, 0.7726265389, [0.53040, 0.70108, 0.83498, 0.89779]),
            (0.3, 0.5224648792, 0.5784917890, [0.32176, 0.49473, 0.65941, 0.75248]),
            (0.4, 6.1986723381, 0.3214657554, [0.14316, 0.25760, 0.38989, 0.47981]),
        ];
        for (a, median, at_one, cdf) in table {
            assert!((beta_prime_cdf(a, 1.0).unwrap() - at_one).abs() < 1e-9);
            assert!((beta_prime_cdf(a, 1.0).unwrap() - beta_reg(a, 1.0 - 2.0 * a, 0.5)).abs() < 1e-15);
            assert!(rel(beta_prime_median(a).unwrap(), median) < 1e-8, "alpha {a}");
            for (x, w) in [0.1, 0.5, 2.0, 5.0].iter().zip(cdf) {
                assert!((beta_prime_cdf(a, *x).unwrap() - w).abs() < 6e-6, "alpha {a} x {x}");
            }
        }
        assert!(beta_prime_cdf(0.5, 1.0).is_err());
    }

    #[test]
    fn coloured_variance_law_a() {
        // Source: theory reference §7.4, Var of the ±1-coloured sum for law A: exact values
        // (7-8 digits: tolerance 1e-7 relative) and the asymptote C n^(2H)/(H(2H-1)) (6 digits).
        let want = [
            (440.0627, 441.693, 11086.711, 11094.8),
            (979.7104, 981.364, 39051.203, 39068.8),
            (2454.284, 2445.44, 154426.62, 154297.0),
        ];
        for (r, (v100, a100, v1000, a1000)) in law_a().iter().zip(want) {
            let a = r.asymptote().alpha();
            let s = r.s().value;
            assert!(rel(r.coloured_variance(100).unwrap(), v100) < 2e-7);
            assert!(rel(r.coloured_variance(1000).unwrap(), v1000) < 2e-7);
            assert!(rel(coloured_variance_asymptote(a, s, 100.0).unwrap(), a100) < 5e-6);
            assert!(rel(coloured_variance_asymptote(a, s, 1000.0).unwrap(), a1000) < 5e-6);
        }
        // One individual: Var = 1.
        assert_eq!(law_a()[0].coloured_variance(1).unwrap(), 1.0);
    }
}
