//! Finite mixtures of look-back laws.

use super::{Dormancy, Error, LookBack};
use rand::Rng;
use rand_distr::Distribution;
use rand_distr::weighted::WeightedAliasIndex;

/// With probability proportional to `weight_i`, R is drawn from part i.
///
/// ```text
/// P(R = k) = sum_i w_i P_i(R = k),  P(R > k) = sum_i w_i P_i(R > k),  E[R] = sum_i w_i E_i[R]
/// ```
/// A typical use is "most seeds germinate at once, a few wait long":
/// `0.95 none + 0.05 geometric(mean 200)`. Parts must not depend on time.
#[derive(Debug, Clone)]
pub struct Mixture {
    parts: Vec<(f64, Dormancy)>,
    pick: WeightedAliasIndex<f64>,
}

impl Mixture {
    /// Builds the mixture from (weight, law) pairs; weights are normalised.
    pub fn new(parts: Vec<(f64, Dormancy)>) -> Result<Self, Error> {
        let total: f64 = parts.iter().map(|(w, _)| *w).sum();
        if parts.is_empty()
            || parts.iter().any(|(w, _)| !w.is_finite() || *w < 0.0)
            || total.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)
        {
            return Err(Error::BadWeights { law: "mixture" });
        }
        if parts.iter().any(|(_, d)| d.is_time_dependent()) {
            return Err(Error::TimeDependentPart);
        }
        let parts: Vec<(f64, Dormancy)> = parts.into_iter().map(|(w, d)| (w / total, d)).collect();
        let pick = WeightedAliasIndex::new(parts.iter().map(|(w, _)| *w).collect())
            .map_err(|_| Error::BadWeights { law: "mixture" })?;
        Ok(Mixture { parts, pick })
    }

    /// The (normalised weight, law) pairs.
    pub fn parts(&self) -> &[(f64, Dormancy)] {
        &self.parts
    }

    /// Greatest common divisor of the union of the parts' supports.
    pub fn support_gcd(&self) -> u64 {
        self.parts.iter().filter(|(w, _)| *w > 0.0).fold(0, |g, (_, d)| super::table::gcd(g, d.support_gcd()))
    }
}

impl LookBack for Mixture {
    #[inline]
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        self.parts[self.pick.sample(rng)].1.sample(rng)
    }
    fn pmf(&self, k: u64) -> f64 {
        self.parts.iter().map(|(w, d)| w * d.pmf(k)).sum()
    }
    fn tail(&self, k: u64) -> f64 {
        self.parts.iter().map(|(w, d)| w * d.tail(k)).sum()
    }
    fn mean(&self) -> Option<f64> {
        self.parts.iter().try_fold(0.0, |acc, (w, d)| if *w == 0.0 { Some(acc) } else { d.mean().map(|m| acc + w * m) })
    }
    fn max_lookback(&self) -> Option<u64> {
        self.parts.iter().filter(|(w, _)| *w > 0.0).try_fold(0, |acc, (_, d)| d.max_lookback().map(|m| acc.max(m)))
    }
}

#[cfg(test)]
mod tests {
    use super::super::{Geometric, Pareto, Uniform};
    use super::*;

    #[test]
    fn mean_and_tail_are_weighted() {
        let m = Mixture::new(vec![(3.0, Dormancy::None), (1.0, Dormancy::Geometric(Geometric::new(9.0).unwrap()))])
            .unwrap();
        assert!((m.mean().unwrap() - (0.75 + 0.25 * 9.0)).abs() < 1e-12);
        super::super::test_util::check_consistency(&m, 300, 1e-12);
        let heavy = Mixture::new(vec![(1.0, Dormancy::None), (1.0, Dormancy::Pareto(Pareto::new(0.5, None).unwrap()))])
            .unwrap();
        assert!(heavy.mean().is_none());
        assert_eq!(heavy.max_lookback(), None);
    }

    #[test]
    fn rejects_time_dependent_parts_and_bad_weights() {
        let f = Dormancy::SinceFounding(super::super::SinceFounding::new(10).unwrap());
        assert_eq!(Mixture::new(vec![(1.0, f)]).unwrap_err(), Error::TimeDependentPart);
        let u = Dormancy::Uniform(Uniform::new(2).unwrap());
        assert_eq!(Mixture::new(vec![(0.0, u)]).unwrap_err(), Error::BadWeights { law: "mixture" });
    }
}
