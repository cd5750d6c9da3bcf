//! Geometric look-back on {1, 2, ...}.

use super::{Error, LookBack, check};
use rand::Rng;
use rand_distr::{Distribution, Exp1};

/// R geometric on {1, 2, ...} with mean `mean` (success probability p = 1/mean).
///
/// ```text
/// P(R = k) = p (1-p)^(k-1),   P(R > k) = (1-p)^k,   E[R] = 1/p
/// ```
/// `mean` must be finite and >= 1; `mean = 1` is no dormancy. The law is memoryless, which
/// makes its renewal function constant (q_n = p for n >= 1).
///
/// **Sampling** floors an exponential variable (the discretised exponential is geometric):
/// ```text
/// R = 1 + floor(E / λ),   E ~ Exp(1),   λ = -ln(1 - p)
/// P(floor(E / λ) >= k) = P(E >= λ k) = e^{-λ k} = (1 - p)^k      (k = 0, 1, ...)
/// ```
/// so the law is exact (to floating-point resolution), for every p, with one draw of E by
/// rand_distr's ziggurat `Exp1` (Marsaglia & Tsang 2000, *J. Stat. Softw.* 5(8)): mostly one
/// u64, a table lookup and a multiply, no logarithm. The look-back is the engine's hot draw;
/// this is several times cheaper than rand_distr's `Geometric` (Bringmann & Friedrich 2013)
/// and about half a one-log inversion draw (`benches/engine.rs`).
#[derive(Debug, Clone, Copy)]
pub struct Geometric {
    p: f64,
    ln_q: f64,
    /// 1/λ = -1/ln(1 - p); 0 when p = 1 (R = 1 always).
    inv_lambda: f64,
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
        let ln_q = (-p).ln_1p();
        Ok(Geometric { p, ln_q, inv_lambda: -1.0 / ln_q, inner })
    }

    /// Success probability p = 1/mean.
    pub fn p(&self) -> f64 {
        self.p
    }

    /// The number of failures before the first success, i.e. the law of R - 1 (rand_distr's
    /// sampler: the stream of sampled seeds' ages is unchanged).
    pub(crate) fn failures(&self) -> rand_distr::Geometric {
        self.inner
    }
}

impl LookBack for Geometric {
    #[inline]
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        let e: f64 = Exp1.sample(rng);
        // `as` saturates: an astronomically long look-back stays u64::MAX, beyond any horizon.
        ((e * self.inv_lambda) as u64).saturating_add(1)
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
    fn draws_follow_the_pmf() {
        // Chi-square of 200 000 draws against P(R = k) = p (1-p)^(k-1) (the law itself), classes
        // k = 1..K-1 and a tail class R >= K with P(R >= K) = (1-p)^(K-1); K - 1 degrees of
        // freedom, K chosen so that every class expects >= 20 draws. 99.9% quantiles of
        // chi-square from statrs. Means from short to long dormancy, and mean 1 (R = 1 always).
        use statrs::distribution::{ChiSquared, ContinuousCDF};
        let n = 200_000u64;
        for (seed, mean) in [(1u64, 1.2), (2, 2.0), (3, 3.5), (4, 5.0), (5, 40.0)] {
            let g = Geometric::new(mean).unwrap();
            let mut k_max = 2u64;
            while g.tail(k_max) * n as f64 >= 20.0 {
                k_max += 1;
            }
            let mut counts = vec![0u64; k_max as usize + 1];
            let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(seed);
            for _ in 0..n {
                counts[g.sample(&mut rng).min(k_max) as usize] += 1;
            }
            assert_eq!(counts[0], 0, "R >= 1");
            let mut stat = 0.0;
            for k in 1..=k_max {
                let p = if k < k_max { g.pmf(k) } else { g.tail(k_max - 1) };
                let e = p * n as f64;
                stat += (counts[k as usize] as f64 - e).powi(2) / e;
            }
            let critical = ChiSquared::new((k_max - 1) as f64).unwrap().inverse_cdf(0.999);
            assert!(stat < critical, "mean {mean}: chi-square {stat} > {critical} on {} df", k_max - 1);
        }
        let one = Geometric::new(1.0).unwrap();
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(6);
        assert!((0..1000).all(|_| one.sample(&mut rng) == 1));
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
