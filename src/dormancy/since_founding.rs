//! Look-back uniform over every generation back to a founding: the uniform-memory urn.

use super::{Error, LookBack, Uniform};
use rand::{Rng, RngExt};

/// An individual living at time t < F draws its parent's generation uniformly among
/// t+1, ..., F, where F is the founding time: `R` uniform on 1..=F-t. Individuals of the
/// founding generation (t >= F) have no parent. With one individual per generation this is
/// the random recursive tree. The law depends on t; [`LookBack`] reports it at t = 0.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SinceFounding {
    founded: u64,
}

impl SinceFounding {
    /// Builds the law; the founding time must be at least 1 generation ago.
    pub fn new(founded: u64) -> Result<Self, Error> {
        if founded == 0 {
            return Err(Error::OutOfRange {
                law: "since_founding",
                param: "founded",
                value: 0.0,
                allowed: "integers >= 1",
            });
        }
        Ok(SinceFounding { founded })
    }

    /// The founding time F (generations ago).
    pub fn founded(&self) -> u64 {
        self.founded
    }

    /// The law of R for an individual living at time t, or `None` for a founder.
    pub fn at(&self, t: u64) -> Option<Uniform> {
        if t >= self.founded { None } else { Uniform::new(self.founded - t).ok() }
    }

    /// Draws R for an individual living at time t, or `None` for a founder.
    #[inline]
    pub fn sample_at<R: Rng + ?Sized>(&self, t: u64, rng: &mut R) -> Option<u64> {
        if t >= self.founded { None } else { Some(rng.random_range(1..=self.founded - t)) }
    }
}

impl LookBack for SinceFounding {
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        self.sample_at(0, rng).unwrap_or(1)
    }
    fn pmf(&self, k: u64) -> f64 {
        Uniform::new(self.founded).map_or(0.0, |u| u.pmf(k))
    }
    fn tail(&self, k: u64) -> f64 {
        Uniform::new(self.founded).map_or(0.0, |u| u.tail(k))
    }
    fn mean(&self) -> Option<f64> {
        Some((self.founded as f64 + 1.0) / 2.0)
    }
    fn max_lookback(&self) -> Option<u64> {
        Some(self.founded)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn founders_have_no_parent() {
        let f = SinceFounding::new(5).unwrap();
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(1);
        assert_eq!(f.sample_at(5, &mut rng), None);
        assert_eq!(f.sample_at(4, &mut rng), Some(1));
        for _ in 0..100 {
            let r = f.sample_at(2, &mut rng).unwrap();
            assert!((1..=3).contains(&r));
        }
        assert!(SinceFounding::new(0).is_err());
    }
}
