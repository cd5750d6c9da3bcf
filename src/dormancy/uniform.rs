//! Uniform look-back on 1..=max.

use super::{Error, LookBack};
use rand::{Rng, RngExt};

/// R uniform on {1, ..., max}.
///
/// ```text
/// P(R = k) = 1/max for 1 <= k <= max,   P(R > k) = (max - k)/max,   E[R] = (max + 1)/2
/// ```
/// `max = 1` is no dormancy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Uniform {
    max: u64,
}

impl Uniform {
    /// Builds the law; `max` must be at least 1.
    pub fn new(max: u64) -> Result<Self, Error> {
        if max == 0 {
            return Err(Error::OutOfRange { law: "uniform", param: "max", value: 0.0, allowed: "integers >= 1" });
        }
        Ok(Uniform { max })
    }

    /// The largest look-back.
    pub fn max(&self) -> u64 {
        self.max
    }
}

impl LookBack for Uniform {
    #[inline]
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        rng.random_range(1..=self.max)
    }
    fn pmf(&self, k: u64) -> f64 {
        if (1..=self.max).contains(&k) { 1.0 / self.max as f64 } else { 0.0 }
    }
    fn tail(&self, k: u64) -> f64 {
        if k >= self.max { 0.0 } else { (self.max - k) as f64 / self.max as f64 }
    }
    fn mean(&self) -> Option<f64> {
        Some((self.max as f64 + 1.0) / 2.0)
    }
    fn max_lookback(&self) -> Option<u64> {
        Some(self.max)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_zero() {
        assert!(matches!(Uniform::new(0), Err(Error::OutOfRange { param: "max", .. })));
    }

    #[test]
    fn consistent() {
        super::super::test_util::check_consistency(&Uniform::new(7).unwrap(), 20, 1e-12);
    }
}
