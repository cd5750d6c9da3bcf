//! Look-back given by an explicit table of weights.

use super::{Error, LookBack};
use rand::Rng;
use rand_distr::Distribution;
use rand_distr::weighted::WeightedAliasIndex;

/// `P(R = k)` proportional to `weights[k-1]`, for k = 1..=weights.len().
///
/// Sampling uses Walker's alias method (rand_distr's `WeightedAliasIndex`), O(1) per draw.
/// The tail is a suffix sum precomputed from the far end, so `P(R > k)` keeps full relative
/// precision even where it is tiny.
#[derive(Debug, Clone)]
pub struct Table {
    pmf: Vec<f64>,
    /// tail[k] = P(R > k) for k = 0..=len.
    tail: Vec<f64>,
    mean: f64,
    alias: WeightedAliasIndex<f64>,
}

impl Table {
    /// Builds the law from non-negative finite weights with a positive sum.
    pub fn new(weights: &[f64]) -> Result<Self, Error> {
        let total: f64 = weights.iter().sum();
        if weights.is_empty()
            || weights.iter().any(|w| !w.is_finite() || *w < 0.0)
            || total.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)
            || !total.is_finite()
        {
            return Err(Error::BadWeights { law: "table" });
        }
        // Drop trailing zeros so that max_lookback is the true maximum.
        let last = weights.iter().rposition(|w| *w > 0.0).unwrap_or(0);
        let pmf: Vec<f64> = weights[..=last].iter().map(|w| w / total).collect();
        let mut tail = vec![0.0; pmf.len() + 1];
        for k in (0..pmf.len()).rev() {
            tail[k] = tail[k + 1] + pmf[k];
        }
        let mean = pmf.iter().enumerate().map(|(i, p)| (i + 1) as f64 * p).sum();
        let alias = WeightedAliasIndex::new(pmf.clone()).map_err(|_| Error::BadWeights { law: "table" })?;
        Ok(Table { pmf, tail, mean, alias })
    }

    /// The normalised probabilities P(R = 1), P(R = 2), ...
    pub fn probabilities(&self) -> &[f64] {
        &self.pmf
    }

    /// Greatest common divisor of the support.
    pub fn support_gcd(&self) -> u64 {
        self.pmf.iter().enumerate().filter(|(_, p)| **p > 0.0).fold(0, |g, (i, _)| gcd(g, i as u64 + 1))
    }
}

pub(crate) fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 { a } else { gcd(b, a % b) }
}

impl LookBack for Table {
    #[inline]
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        self.alias.sample(rng) as u64 + 1
    }
    fn pmf(&self, k: u64) -> f64 {
        if k == 0 { 0.0 } else { self.pmf.get(k as usize - 1).copied().unwrap_or(0.0) }
    }
    fn tail(&self, k: u64) -> f64 {
        self.tail.get(k as usize).copied().unwrap_or(0.0)
    }
    fn mean(&self) -> Option<f64> {
        Some(self.mean)
    }
    fn max_lookback(&self) -> Option<u64> {
        Some(self.pmf.len() as u64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_bad_weights() {
        for w in [vec![], vec![0.0, 0.0], vec![1.0, -1.0], vec![f64::NAN], vec![f64::INFINITY]] {
            assert_eq!(Table::new(&w).unwrap_err(), Error::BadWeights { law: "table" }, "{w:?}");
        }
    }

    #[test]
    fn normalises_and_trims() {
        let t = Table::new(&[0.0, 2.0, 0.0, 2.0, 0.0]).unwrap();
        assert_eq!(t.max_lookback(), Some(4));
        assert_eq!(t.pmf(2), 0.5);
        assert_eq!(t.tail(2), 0.5);
        assert_eq!(t.mean(), Some(3.0));
        assert_eq!(t.support_gcd(), 2);
        super::super::test_util::check_consistency(&t, 10, 1e-15);
    }
}
