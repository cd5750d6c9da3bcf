//! Relatedness seen within a finite horizon (forest regime).
//!
//! The engine stops every lineage at the horizon T, so two individuals count as related only
//! when their first common ancestor is at most T generations ago. For the pair (0, l) with
//! the older individual at generation t, that is a depth D <= K = T - t below the older one.
//!
//! Two lineages of one deme of N share ancestral generations as a renewal process with mass
//! q_k^2 and pick the same parent with probability 1/N at each shared generation. Splitting
//! the expected number g_k = q_k q_{k+l} of shared generations at depth k at the first
//! meeting gives the law m_k = P(0 ~ l, D = k) of the depth of the common ancestor:
//!
//! ```text
//! G_l(z) = sum_k q_k q_{k+l} z^k,   Q2(z) = sum_k q_k^2 z^k,   M(z) = G_l(z) / (Q2(z) + N - 1)
//! P(0 ~ l, D <= K) = sum_{k<=K} q_k q_{k+l} C_{K-k},   C_j = sum_{i<=j} [z^i] 1/(Q2(z) + N - 1)
//! ```
//! (M(1) = H_l / (N + S - 1), theory reference §4; N = 1 is the first-meeting identity of
//! §7.1.) [`HorizonLaw::within_exact`] evaluates the finite sum.
//!
//! For large K the tail comes from the singularity of Q2 at z = 1. With q_k ~ c k^(alpha-1)
//! and beta = 1 - 2 alpha, Q2(z) = S - a (1-z)^beta + ..., a = c^2 Gamma(1-beta) / beta, and
//! G_l has the same singular term, so with S' = N + S - 1 and P_l = H_l / S'
//!
//! ```text
//! M(1) - M(z) = (1 - P_l) sum_{m>=1} (a (1-z)^beta / S')^m
//! P(0 ~ l) - P(0 ~ l, D <= K) = (1 - P_l) Phi(K),
//! Phi(K) = sum_{m>=1} (a / S')^m [z^K] (1-z)^(m beta - 1)
//!        = sum_{m>=1} (a / S')^m Gamma(K + 1 - m beta) / (Gamma(1 - m beta) Gamma(K + 1))
//! ```
//! (transfer of coefficients: Flajolet & Odlyzko 1990, SIAM J. Discrete Math. 3:216-240, from memory;
//! derived here). The neglected terms are smaller by a relative O(K^-(1-alpha)) (next term of
//! the expansion of q, theory reference §7.3) and O(l / K); for a mixture law only the
//! leading term of q is known and the error is larger. [`HorizonLaw::within`] uses the
//! exact sum up to [`HorizonLaw::exact_limit`] and this expansion beyond.
//!
//! The relative shortfall of simulated relatedness against the infinite-horizon prediction
//! is therefore (1 / P_l - 1) Phi(K): it grows with the lag through P_l only.

use super::relatedness::Relatedness;
use super::renewal::{Convolver, RenewalError, series_inverse};
use statrs::function::gamma::{gamma, ln_gamma};
use std::cell::RefCell;

/// Rooms (K) up to which [`HorizonLaw::within`] sums exactly by default.
///
/// At K = 2^14 the expansion is within 2e-4 (absolute, in P) of the exact sum for pareto
/// laws with alpha = 0.2..0.45 and lags up to 200 (see tests); the exact sum costs one FFT
/// of about 2 (K + lag) points per room.
pub const EXACT_ROOM: usize = 1 << 14;

/// Meeting probabilities within a finite horizon for one deme of N (forest regime).
pub struct HorizonLaw<'a> {
    rel: &'a Relatedness,
    max_lag: usize,
    /// S' = N + S - 1.
    denom: f64,
    /// H_0..H_max_lag (tail included).
    h: Vec<f64>,
    /// C_0..C_exact_limit, partial sums of 1/(Q2 + N - 1).
    partial: Vec<f64>,
    /// a / S' of the singular expansion.
    ratio: f64,
    beta: f64,
    /// FFT plans, reused from one room to the next.
    conv: RefCell<Convolver>,
}

impl std::fmt::Debug for HorizonLaw<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("HorizonLaw")
            .field("max_lag", &self.max_lag)
            .field("exact_limit", &self.exact_limit())
            .field("denom", &self.denom)
            .field("ratio", &self.ratio)
            .field("beta", &self.beta)
            .finish_non_exhaustive()
    }
}

impl<'a> HorizonLaw<'a> {
    /// Prepares lags 1..=`max_lag` for a deme of `deme_size` (>= 1) individuals.
    ///
    /// Exact sums are available up to a room of min([`EXACT_ROOM`], L - max_lag - 1), L the
    /// length of the renewal sequence of `rel`. Needs L >= 3 max_lag + 64 (as
    /// [`Relatedness::h_range`]).
    pub fn new(rel: &'a Relatedness, deme_size: u64, max_lag: usize) -> Result<Self, RenewalError> {
        Self::with_exact_room(rel, deme_size, max_lag, EXACT_ROOM)
    }

    /// As [`HorizonLaw::new`] with exact sums up to a room of `exact_room` (capped by L).
    pub fn with_exact_room(
        rel: &'a Relatedness,
        deme_size: u64,
        max_lag: usize,
        exact_room: usize,
    ) -> Result<Self, RenewalError> {
        if deme_size == 0 {
            return Err(RenewalError::OutOfRange { param: "deme size", value: 0.0, allowed: "integers >= 1" });
        }
        let h: Vec<f64> = rel.h_range(max_lag)?.iter().map(|t| t.value).collect();
        let q = rel.renewal();
        let limit = exact_room.min(q.len().saturating_sub(max_lag + 1));
        let extra = (deme_size - 1) as f64;
        let mut f: Vec<f64> = q[..=limit].iter().map(|x| x * x).collect();
        f[0] += extra;
        let mut partial = series_inverse(&f, limit + 1)?;
        let mut acc = 0.0;
        for x in &mut partial {
            acc += *x;
            *x = acc;
        }
        let asymptote = rel.asymptote();
        let alpha = asymptote.alpha();
        let c = asymptote.leading_constant();
        let beta = 1.0 - 2.0 * alpha;
        let a = c * c * gamma(1.0 - beta) / beta;
        let denom = rel.s().value + extra;
        Ok(HorizonLaw { rel, max_lag, denom, h, partial, ratio: a / denom, beta, conv: RefCell::default() })
    }

    /// The largest room summed exactly by [`HorizonLaw::within`].
    pub fn exact_limit(&self) -> usize {
        self.partial.len() - 1
    }

    /// The largest lag prepared.
    pub fn max_lag(&self) -> usize {
        self.max_lag
    }

    /// P(0 ~ l) without a horizon: H_l / (N + S - 1).
    pub fn related(&self, lag: usize) -> f64 {
        self.h[lag] / self.denom
    }

    /// P(0 ~ l, D <= room) for l = 1..=`max_lag` (index l - 1; `max_lag` at most the
    /// prepared one): the exact sum when room <= [`HorizonLaw::exact_limit`], the expansion
    /// beyond.
    pub fn within(&self, room: u64, max_lag: usize) -> Vec<f64> {
        match usize::try_from(room) {
            Ok(k) if k <= self.exact_limit() => self.within_exact(k, max_lag),
            _ => self.within_asymptotic(room, max_lag),
        }
    }

    /// Exact P(0 ~ l, D <= room) = sum_{k<=room} q_k q_{k+l} C_{room-k}, l = 1..=`max_lag`,
    /// by one FFT cross-correlation. Needs room <= [`HorizonLaw::exact_limit`].
    pub fn within_exact(&self, room: usize, max_lag: usize) -> Vec<f64> {
        assert!(room <= self.exact_limit() && max_lag <= self.max_lag, "room or lag beyond the prepared range");
        let q = self.rel.renewal();
        // v reversed: v_k = q_k C_{room-k}, so (rev v * q)_{room+l} = sum_k v_k q_{k+l}.
        let rev: Vec<f64> = (0..=room).rev().map(|k| q[k] * self.partial[room - k]).collect();
        let c = self.conv.borrow_mut().linear(&rev, &q[..=room + max_lag], room + max_lag + 1);
        c[room + 1..=room + max_lag].to_vec()
    }

    /// The expansion P(0 ~ l) - (1 - P(0 ~ l)) Phi(room), l = 1..=`max_lag` (see the
    /// module documentation).
    pub fn within_asymptotic(&self, room: u64, max_lag: usize) -> Vec<f64> {
        let phi = self.horizon_factor(room);
        (1..=max_lag.min(self.max_lag))
            .map(|l| {
                let p = self.related(l);
                p - (1.0 - p) * phi
            })
            .collect()
    }

    /// Phi(K) = sum_{m>=1} (a/S')^m [z^K] (1-z)^(m beta - 1), the horizon factor of the
    /// expansion; summed until the terms fall below 1e-16 of the total (at most 400 terms).
    pub fn horizon_factor(&self, room: u64) -> f64 {
        let k = room as f64;
        let mut total = 0.0;
        let mut power = 1.0;
        for m in 1..=400 {
            power *= self.ratio;
            let g = 1.0 - m as f64 * self.beta;
            // [z^K] (1-z)^(-g) = Gamma(K + g) / (Gamma(g) Gamma(K + 1)); 0 when g is a pole.
            let coef = if g <= 0.0 && g == g.round() {
                0.0
            } else if k + g <= 0.0 {
                break;
            } else {
                gamma_ratio(k, g) / gamma(g)
            };
            let term = power * coef;
            total += term;
            if term.abs() < 1e-16 * total.abs() && m as f64 * self.beta > 1.0 {
                break;
            }
        }
        total
    }

    /// Relative shortfall 1 - P(0 ~ l, D <= room) / P(0 ~ l), l = 1..=`max_lag`.
    pub fn shortfall(&self, room: u64, max_lag: usize) -> Vec<f64> {
        self.within(room, max_lag).iter().enumerate().map(|(i, w)| 1.0 - w / self.related(i + 1)).collect()
    }
}

/// Gamma(K + g) / Gamma(K + 1) for K + g > 0: by log-gamma up to K = 1000, beyond by the
/// asymptotic series of a difference of log-gammas, where subtracting two large log-gammas
/// would lose digits:
///
/// ```text
/// ln Gamma(K+g) - ln Gamma(K+1) = (g-1) ln K + B2'/(2K) - B3(g)/(6K^2) + B4'/(12K^3) + O(K^-4)
/// B2' = g^2 - g,  B3(g) = g^3 - 3g^2/2 + g/2,  B4' = g^4 - 2g^3 + g^2
/// ```
/// (Bernoulli polynomials B_n(g) - B_n(1); Abramowitz & Stegun 6.1.41 and 23.1.4, from memory).
fn gamma_ratio(k: f64, g: f64) -> f64 {
    if k <= 1000.0 {
        (ln_gamma(k + g) - ln_gamma(k + 1.0)).exp()
    } else {
        let b2 = g * g - g;
        let b3 = g * g * g - 1.5 * g * g + 0.5 * g;
        let b4 = b2 * b2;
        ((g - 1.0) * k.ln() + b2 / (2.0 * k) - b3 / (6.0 * k * k) + b4 / (12.0 * k * k * k)).exp()
    }
}

#[cfg(test)]
mod tests {
    use super::super::renewal::tests::law_a_table;
    use super::super::renewal::{Asymptote, renewal_sequence};
    use super::*;
    use crate::dormancy::{Dormancy, Pareto};

    fn pareto(alpha: f64, len: usize) -> Relatedness {
        Relatedness::new(&Dormancy::Pareto(Pareto::new(alpha, None).unwrap()), len).unwrap()
    }

    /// P(0 ~ l, D <= K) from the definition by the O(K^2) recursion of the first-meeting
    /// law: N m_k + sum_{j<k} m_j q_{k-j}^2 = q_k q_{k+l} (M (Q2 + N - 1) = G_l).
    fn brute(q: &[f64], n: u64, lag: usize, room: usize) -> f64 {
        let mut m = vec![0.0; room + 1];
        for k in 0..=room {
            let s: f64 = (0..k).map(|j| m[j] * q[k - j] * q[k - j]).sum();
            m[k] = (q[k] * q[k + lag] - s) / n as f64;
        }
        m.iter().sum()
    }

    #[test]
    fn exact_sum_matches_the_first_meeting_recursion() {
        // Source: exact computation (the recursion is the definition of the first-meeting
        // law; the FFT route must agree to rounding).
        for (alpha, n) in [(0.3, 1u64), (0.45, 1), (0.45, 4)] {
            let r = pareto(alpha, 1 << 12);
            let law = HorizonLaw::with_exact_room(&r, n, 20, 1000).unwrap();
            for room in [0usize, 1, 7, 300, 1000] {
                let got = law.within_exact(room, 20);
                for lag in [1usize, 5, 20] {
                    let want = brute(r.renewal(), n, lag, room);
                    assert!((got[lag - 1] - want).abs() < 1e-12, "alpha {alpha} N {n} K {room} l {lag}");
                }
            }
        }
    }

    #[test]
    fn law_a_truncated_meeting_probability() {
        // Source: theory reference §7.4, "exact truncated first-meeting probabilities ...
        // alpha = 0.4, n = 10 gives MC 0.25573 ± 0.00080 against exact 0.25533" (law A,
        // depth <= 10^5; 5 digits). Both the exact sum and the expansion must give it.
        let len = 1 << 17;
        let q = renewal_sequence(&law_a_table(0.4, len + 1), len).unwrap();
        let r = Relatedness::from_renewal(q, Asymptote::law_a(0.4).unwrap()).unwrap();
        let law = HorizonLaw::with_exact_room(&r, 1, 10, 100_000).unwrap();
        let exact = law.within_exact(100_000, 10)[9];
        let asym = law.within_asymptotic(100_000, 10)[9];
        assert!((exact - 0.25533).abs() < 6e-6, "exact {exact}");
        assert!((asym - 0.25533).abs() < 6e-6, "expansion {asym}");
        // And the Monte Carlo value within 2 of its standard errors.
        assert!((exact - 0.25573).abs() < 2.0 * 0.0008);
        // Without a horizon: P(0~10) = 0.279334265486 (same table).
        assert!((law.related(10) - 0.279334265486).abs() < 1e-9);
    }

    #[test]
    fn expansion_agrees_with_the_exact_sum_at_large_rooms() {
        // Source: exact computation (finite sum) against the singular expansion; the
        // difference must shrink with K as K^-(1-alpha) and l/K (module documentation).
        for alpha in [0.2, 0.3, 0.45] {
            for n in [1u64, 10] {
                let r = pareto(alpha, 1 << 17);
                let law = HorizonLaw::with_exact_room(&r, n, 200, 1 << 16).unwrap();
                let mut last = f64::INFINITY;
                for room in [1usize << 10, 1 << 12, 1 << 14, 1 << 16] {
                    let e = law.within_exact(room, 200);
                    let a = law.within_asymptotic(room as u64, 200);
                    let err = e.iter().zip(&a).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max);
                    eprintln!("alpha {alpha} N {n} K {room}: max |exact - expansion| = {err:.3e}");
                    if room == EXACT_ROOM {
                        assert!(err < 2e-4, "alpha {alpha} N {n}: {err}");
                    }
                    assert!(err < last, "alpha {alpha} N {n} K {room}: {err} not below {last}");
                    last = err;
                }
            }
        }
    }

    #[test]
    fn shortfall_factorises_and_vanishes_without_a_horizon() {
        // Source: the expansion (module documentation): shortfall = (1/P_l - 1) Phi(K), and
        // Phi(K) -> 0 as K -> infinity.
        let r = pareto(0.45, 1 << 14);
        let law = HorizonLaw::new(&r, 1, 100).unwrap();
        let s = law.shortfall(100_000_000, 100);
        let phi = law.horizon_factor(100_000_000);
        for l in [1usize, 10, 100] {
            let want = (1.0 / law.related(l) - 1.0) * phi;
            assert!((s[l - 1] - want).abs() < 1e-12);
        }
        assert!(law.horizon_factor(u64::MAX) < 0.02);
        assert!(law.horizon_factor(1 << 40) < law.horizon_factor(1 << 30));
        assert!(law.within(0, 3).iter().all(|&p| p >= 0.0));
    }

    #[test]
    fn gamma_ratio_branches_agree() {
        // Source: statrs ln_gamma (a general-purpose library) at K = 1000 and 2000, where a
        // difference of log-gammas still has about 11 digits, against the asymptotic series.
        for k in [1000.0, 2000.0] {
            for g in [0.9, 0.55, 0.1, -0.8, -2.5] {
                let by_lgamma = (ln_gamma(k + g) - ln_gamma(k + 1.0)).exp();
                let b2 = g * g - g;
                let b3 = g * g * g - 1.5 * g * g + 0.5 * g;
                let by_series =
                    ((g - 1.0) * f64::ln(k) + b2 / (2.0 * k) - b3 / (6.0 * k * k) + b2 * b2 / (12.0 * k * k * k)).exp();
                assert!((by_lgamma / by_series - 1.0).abs() < 5e-11, "K {k} g {g}");
                assert!(
                    (gamma_ratio(k + 0.5, g) / (ln_gamma(k + 0.5 + g) - ln_gamma(k + 1.5)).exp() - 1.0).abs() < 5e-11
                );
            }
        }
    }
}
