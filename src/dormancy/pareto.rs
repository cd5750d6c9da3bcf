//! Power-law (discrete Pareto) look-back.

use super::{Error, LookBack, check, open_unit};
use rand::Rng;

/// Discrete power law with `P(R >= k) = k^-alpha` exactly for integers k >= 1.
///
/// Sampled as `R = floor(U^(-1/alpha))` with U uniform on (0, 1], so
/// `P(R = 1) = 1 - 2^-alpha` and `P(R = k) = k^-alpha - (k+1)^-alpha`. With `max` given the
/// law is conditioned on `R <= max` (U is drawn on ((max+1)^-alpha, 1]):
///
/// ```text
/// P(R > k) = ((k+1)^-alpha - (max+1)^-alpha) / (1 - (max+1)^-alpha)   for k < max
/// ```
/// E[R] = zeta(alpha) when untruncated and alpha > 1, infinite for alpha <= 1.
/// Regimes (Hammond & Sheffield 2013; Blath, González Casanova, Kurt & Spanò 2013): alpha > 1
/// finite mean; 1/2 < alpha < 1 lineages meet almost surely but slowly; alpha < 1/2 they may
/// never meet. This is "law B" of the project's theory reference.
#[derive(Debug, Clone, Copy)]
pub struct Pareto {
    alpha: f64,
    neg_inv_alpha: f64,
    max: Option<u64>,
    /// (max+1)^-alpha, or 0 untruncated.
    low: f64,
}

impl Pareto {
    /// Builds the law; `alpha > 0`, and `max >= 1` when given.
    pub fn new(alpha: f64, max: Option<u64>) -> Result<Self, Error> {
        let alpha = check("pareto", "alpha", alpha, "(0, inf)", |a| a > 0.0)?;
        if max == Some(0) {
            return Err(Error::OutOfRange { law: "pareto", param: "max", value: 0.0, allowed: "integers >= 1" });
        }
        let low = max.map_or(0.0, |m| ((m as f64) + 1.0).powf(-alpha));
        Ok(Pareto { alpha, neg_inv_alpha: -1.0 / alpha, max, low })
    }

    /// The tail exponent.
    pub fn alpha(&self) -> f64 {
        self.alpha
    }

    /// The truncation point, if any.
    pub fn max(&self) -> Option<u64> {
        self.max
    }

    /// P(R >= k) of the untruncated law, k >= 1.
    fn untruncated_at_least(&self, k: u64) -> f64 {
        (k as f64).powf(-self.alpha)
    }
}

impl LookBack for Pareto {
    #[inline]
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        let u = open_unit(rng);
        let u = if self.max.is_some() { self.low + (1.0 - self.low) * u } else { u };
        let x = u.powf(self.neg_inv_alpha);
        // Far beyond any horizon: saturate instead of overflowing.
        let r = if x >= 9.0e18 { 9_000_000_000_000_000_000 } else { x as u64 };
        match self.max {
            Some(m) => r.clamp(1, m),
            None => r.max(1),
        }
    }
    fn pmf(&self, k: u64) -> f64 {
        if k == 0 || self.max.is_some_and(|m| k > m) {
            return 0.0;
        }
        // k^-a - (k+1)^-a = k^-a (1 - (1 + 1/k)^-a), written to keep precision for large k.
        let kf = k as f64;
        let p = kf.powf(-self.alpha) * -(-self.alpha * (1.0 / kf).ln_1p()).exp_m1();
        p / (1.0 - self.low)
    }
    fn tail(&self, k: u64) -> f64 {
        match self.max {
            Some(m) if k >= m => 0.0,
            _ => (self.untruncated_at_least(k + 1) - self.low) / (1.0 - self.low),
        }
    }
    fn mean(&self) -> Option<f64> {
        match self.max {
            // E[R] = sum_{k=1}^{max} P(R >= k) = (sum_{k=1}^{max} k^-a - max*low) / (1 - low).
            Some(m) => Some((power_sum(self.alpha, m) - m as f64 * self.low) / (1.0 - self.low)),
            None if self.alpha > 1.0 => Some(zeta(self.alpha)),
            None => None,
        }
    }
    fn max_lookback(&self) -> Option<u64> {
        self.max
    }
}

/// sum_{k=1}^{m} k^-a, by direct summation of the first terms and Euler–Maclaurin for the rest.
pub(crate) fn power_sum(a: f64, m: u64) -> f64 {
    const DIRECT: u64 = 64;
    let direct: f64 = (1..=m.min(DIRECT)).map(|k| (k as f64).powf(-a)).sum();
    if m <= DIRECT {
        return direct;
    }
    // sum_{k=A+1}^{m} f(k) = int_A^m f + (f(m) - f(A))/2 + sum_j B_2j/(2j)! (f^(2j-1)(m) - f^(2j-1)(A)).
    let lo = DIRECT as f64;
    let hi = m as f64;
    let f = |x: f64| x.powf(-a);
    let integral =
        if (a - 1.0).abs() < 1e-12 { hi.ln() - lo.ln() } else { (hi.powf(1.0 - a) - lo.powf(1.0 - a)) / (1.0 - a) };
    // Derivatives of x^-a: f' = -a x^(-a-1), f''' = -a(a+1)(a+2) x^(-a-3), f^(5) = -a..(a+4) x^(-a-5).
    let d1 = |x: f64| -a * x.powf(-a - 1.0);
    let d3 = |x: f64| -a * (a + 1.0) * (a + 2.0) * x.powf(-a - 3.0);
    let d5 = |x: f64| -a * (a + 1.0) * (a + 2.0) * (a + 3.0) * (a + 4.0) * x.powf(-a - 5.0);
    let em = (f(hi) - f(lo)) / 2.0 + (d1(hi) - d1(lo)) / 12.0 - (d3(hi) - d3(lo)) / 720.0 + (d5(hi) - d5(lo)) / 30240.0;
    direct + integral + em
}

/// Riemann zeta(a) for a > 1 (Euler–Maclaurin tail beyond 64 terms).
pub(crate) fn zeta(a: f64) -> f64 {
    let lo: f64 = 64.0;
    let direct: f64 = (1..=64u64).map(|k| (k as f64).powf(-a)).sum();
    // sum_{k>64} k^-a = int_64^inf - f(64)/2 - f'(64)/12 + f'''(64)/720 - ...
    let f = lo.powf(-a);
    let d1 = -a * lo.powf(-a - 1.0);
    let d3 = -a * (a + 1.0) * (a + 2.0) * lo.powf(-a - 3.0);
    direct + lo.powf(1.0 - a) / (a - 1.0) - f / 2.0 - d1 / 12.0 + d3 / 720.0
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn rejects_bad_parameters() {
        for a in [0.0, -0.5, f64::NAN, f64::INFINITY] {
            assert!(matches!(Pareto::new(a, None), Err(Error::OutOfRange { param: "alpha", .. })), "{a}");
        }
        assert!(matches!(Pareto::new(0.5, Some(0)), Err(Error::OutOfRange { param: "max", .. })));
    }

    #[test]
    fn tail_is_exact_power() {
        // Definition of the law (our `pareto` = law B of the theory reference, section 7.2):
        // P(R >= k) = k^-alpha, so P(R = 1) = 1 - 2^-alpha.
        let p = Pareto::new(0.3, None).unwrap();
        assert!((p.pmf(1) - (1.0 - 2f64.powf(-0.3))).abs() < 1e-15);
        assert!((p.tail(9) - 10f64.powf(-0.3)).abs() < 1e-15);
        super::super::test_util::check_consistency(&p, 500, 1e-12);
        super::super::test_util::check_consistency(&Pareto::new(1.5, Some(300)).unwrap(), 300, 1e-12);
    }

    #[test]
    fn zeta_values() {
        // Source: zeta(2) = pi^2/6 (Euler); zeta(1.5) = 2.612375348685... (theory reference table, law B mean).
        assert!((zeta(2.0) - std::f64::consts::PI.powi(2) / 6.0).abs() < 1e-12);
        assert!((zeta(1.5) - 2.612375348685488).abs() < 1e-10);
        assert!((Pareto::new(1.5, None).unwrap().mean().unwrap() - 2.612375348685488).abs() < 1e-10);
        assert!(Pareto::new(0.8, None).unwrap().mean().is_none());
    }

    #[test]
    fn power_sum_matches_direct() {
        for a in [0.2, 0.5, 1.0, 1.7] {
            let direct: f64 = (1..=5000u64).map(|k| (k as f64).powf(-a)).sum();
            assert!((power_sum(a, 5000) - direct).abs() < 1e-9 * direct, "a = {a}");
        }
    }

    #[test]
    fn sampler_frequencies() {
        let p = Pareto::new(0.4, Some(50)).unwrap();
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(11);
        let n = 400_000;
        let mut counts = [0u64; 4];
        for _ in 0..n {
            let r = p.sample(&mut rng);
            assert!((1..=50).contains(&r));
            if r <= 3 {
                counts[r as usize] += 1;
            }
        }
        for k in 1..=3u64 {
            let expect = p.pmf(k) * n as f64;
            let sd = expect.sqrt();
            assert!((counts[k as usize] as f64 - expect).abs() < 5.0 * sd, "k={k}");
        }
    }
}
