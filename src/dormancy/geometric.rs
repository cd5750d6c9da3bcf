//! Geometric look-back on {1, 2, ...}.

use super::{Error, LookBack, check};
use rand::Rng;
use rand_distr::Distribution;

/// R geometric on {1, 2, ...} with mean `mean` (success probability p = 1/mean).
///
/// ```text
/// P(R = k) = p (1-p)^(k-1),   P(R > k) = (1-p)^k,   E[R] = 1/p
/// ```
/// `mean` must be finite and >= 1; `mean = 1` is no dormancy. The law is memoryless, which
/// makes its renewal function constant (q_n = p for n >= 1). Sampling uses rand_distr's
/// exact geometric sampler (Bringmann & Friedrich 2013) plus one.
#[derive(Debug, Clone, Copy)]
pub struct Geometric {
    p: f64,
    ln_q: f64,
    inner: rand_distr::Geometric,
}

impl Geometric {
    /// Builds the law from its mean (>= 1).
    pub fn new(mean: f64) -> Result<Self, Error> {
        let mean = check("geometric", "mean", mean, "[1, inf)", |m| m >= 1.0)?;
        let p = 1.0 / mean;
        let inner = rand_distr::Geometric::new(p).map_err(|_| Error::OutOfRange {
            law: "geometric",
            param: "mean",
            value: mean,
            allowed: "[1, inf)",
        })?;
        Ok(Geometric { p, ln_q: (-p).ln_1p(), inner })
    }

    /// Success probability p = 1/mean.
    pub fn p(&self) -> f64 {
        self.p
    }

    /// The number of failures before the first success, i.e. the law of R - 1.
    pub(crate) fn failures(&self) -> rand_distr::Geometric {
        self.inner
    }
}

impl LookBack for Geometric {
    #[inline]
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        self.inner.sample(rng).saturating_add(1)
    }
    fn pmf(&self, k: u64) -> f64 {
        if k == 0 { 0.0 } else { self.p * (self.ln_q * (k - 1) as f64).exp() }
    }
    fn tail(&self, k: u64) -> f64 {
        (self.ln_q * k as f64).exp()
    }
    fn mean(&self) -> Option<f64> {
        Some(1.0 / self.p)
    }
    fn max_lookback(&self) -> Option<u64> {
        if self.p == 1.0 { Some(1) } else { None }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn rejects_bad_means() {
        for m in [0.5, 0.0, -1.0, f64::NAN, f64::INFINITY] {
            assert!(matches!(Geometric::new(m), Err(Error::OutOfRange { param: "mean", .. })), "{m}");
        }
        assert!(Geometric::new(1.0).is_ok());
    }

    #[test]
    fn consistent() {
        super::super::test_util::check_consistency(&Geometric::new(3.5).unwrap(), 200, 1e-12);
    }

    #[test]
    fn sample_mean_and_variance() {
        // Source: textbook geometric law on {1,2,..}: mean 1/p, variance (1-p)/p^2.
        let g = Geometric::new(4.0).unwrap();
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(3);
        let n = 200_000;
        let xs: Vec<f64> = (0..n).map(|_| g.sample(&mut rng) as f64).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        // sd of the mean = sqrt(12/n) ~ 0.0077; 5 sd.
        assert!((mean - 4.0).abs() < 0.04, "mean {mean}");
        assert!((var - 12.0).abs() < 0.6, "var {var}");
        assert!(xs.iter().all(|&x| x >= 1.0));
    }
}
