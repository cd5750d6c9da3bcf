//! Dormancy laws: the distribution of the look-back R >= 1.
//!
//! An individual of deme d at time t grew from a seed made R generations earlier, so its
//! parent lived at time t + R. R = 1 is plain Wright–Fisher (no dormancy). Each law is its
//! own module with a validating `new`, and all of them implement [`LookBack`], modelled on
//! rand's `Distribution`: `&self` methods, a sampler generic over the RNG, the pmf, and the
//! tail `P(R > k)` written out per law (never `1 - cdf`, which loses all resolution far out
//! in a heavy tail). [`Dormancy`] holds the configured law and forwards to it by static
//! dispatch: the set of laws is closed and the sampler sits in the engine's hot loop.

mod geometric;
mod mixture;
mod pareto;
mod since_founding;
mod table;
mod uniform;

pub use geometric::Geometric;
pub use mixture::Mixture;
pub use pareto::Pareto;
pub use since_founding::SinceFounding;
pub use table::Table;
pub use uniform::Uniform;

use rand::Rng;
use rand::RngExt;
use rand_distr::Distribution;
use rand_distr::weighted::WeightedAliasIndex;

/// A law of the look-back R on {1, 2, ...}.
pub trait LookBack {
    /// Draws one look-back R >= 1.
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64;
    /// P(R = k).
    fn pmf(&self, k: u64) -> f64;
    /// P(R > k), written out for each law.
    fn tail(&self, k: u64) -> f64;
    /// E[R], or `None` when it is infinite.
    fn mean(&self) -> Option<f64>;
    /// The largest possible value of R, or `None` for unbounded support.
    fn max_lookback(&self) -> Option<u64>;
}

/// Why a dormancy law could not be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A parameter is NaN, infinite, or outside its allowed range.
    #[error("{param} = {value} is outside the allowed range {allowed} in the {law} law")]
    OutOfRange {
        /// Name of the law.
        law: &'static str,
        /// Name of the parameter.
        param: &'static str,
        /// The offending value.
        value: f64,
        /// The allowed range, in words.
        allowed: &'static str,
    },
    /// A table or mixture has no positive weight.
    #[error("the {law} law needs at least one positive weight, and every weight must be finite and >= 0")]
    BadWeights {
        /// Name of the law.
        law: &'static str,
    },
    /// A law that depends on time was put where a stationary law is needed.
    #[error("the since_founding law depends on time and cannot be a part of a mixture")]
    TimeDependentPart,
    /// Sampling seeds from the bank needs a stationary age distribution.
    #[error(
        "seeds cannot be sampled from the seed bank under a law of infinite mean (no stationary age distribution exists)"
    )]
    InfiniteMeanSeedBank,
}

/// Alias used by callers that hold several modules' errors.
pub use Error as DormancyError;

/// The configured dormancy law of a deme.
#[derive(Debug, Clone)]
pub enum Dormancy {
    /// No dormancy: R = 1 always (plain Wright–Fisher).
    None,
    /// R uniform on 1..=max.
    Uniform(Uniform),
    /// R geometric on {1, 2, ...} with a given mean.
    Geometric(Geometric),
    /// Power law with P(R >= k) = k^-alpha, optionally truncated.
    Pareto(Pareto),
    /// An explicit table of weights.
    Table(Table),
    /// A finite mixture of stationary laws.
    Mixture(Mixture),
    /// R uniform over every generation back to a founding time (depends on t).
    SinceFounding(SinceFounding),
}

impl Dormancy {
    /// Draws the look-back of an individual living at time `t`, or `None` when the
    /// individual has no parent (it belongs to the founding generation).
    #[inline]
    pub fn sample_at<R: Rng + ?Sized>(&self, t: u64, rng: &mut R) -> Option<u64> {
        Some(match self {
            Dormancy::None => 1,
            Dormancy::Uniform(d) => d.sample(rng),
            Dormancy::Geometric(d) => d.sample(rng),
            Dormancy::Pareto(d) => d.sample(rng),
            Dormancy::Table(d) => d.sample(rng),
            Dormancy::Mixture(d) => d.sample(rng),
            Dormancy::SinceFounding(d) => return d.sample_at(t, rng),
        })
    }

    /// Whether the law depends on the time of the individual.
    pub fn is_time_dependent(&self) -> bool {
        matches!(self, Dormancy::SinceFounding(_))
    }

    /// Whether the law is R = 1 with certainty.
    pub fn is_none(&self) -> bool {
        matches!(self, Dormancy::None)
    }

    /// Short name of the law, as written in scenario files.
    pub fn law_name(&self) -> &'static str {
        match self {
            Dormancy::None => "none",
            Dormancy::Uniform(_) => "uniform",
            Dormancy::Geometric(_) => "geometric",
            Dormancy::Pareto(_) => "pareto",
            Dormancy::Table(_) => "table",
            Dormancy::Mixture(_) => "mixture",
            Dormancy::SinceFounding(_) => "since_founding",
        }
    }

    /// The greatest common divisor of the support (1 for unbounded aperiodic laws).
    ///
    /// Exact for bounded laws; unbounded laws here all put mass on every k >= 1 (or, for
    /// mixtures, inherit from their parts).
    pub fn support_gcd(&self) -> u64 {
        match self {
            Dormancy::Table(t) => t.support_gcd(),
            Dormancy::Mixture(m) => m.support_gcd(),
            Dormancy::Uniform(u) if u.max() == 1 => 1,
            _ => 1,
        }
    }

    /// Sampler of the age of a dormant seed present in the bank at time `t`.
    ///
    /// A seed that has already waited a whole generations is still in the bank with
    /// probability P(R > a), so the stationary age has law P(A = a) = P(R > a) / E[R] for
    /// a >= 0 (renewal theory: the age of the current renewal interval). Its parent lived
    /// a + 1 generations before the sampling time.
    pub fn seed_age_sampler(&self, t: u64) -> Result<SeedAge, Error> {
        match self {
            Dormancy::None => Ok(SeedAge::Zero),
            Dormancy::Geometric(g) => Ok(SeedAge::Geometric(g.failures())),
            Dormancy::SinceFounding(f) => match f.at(t) {
                Some(u) => Dormancy::Uniform(u).seed_age_sampler(t),
                None => Err(Error::InfiniteMeanSeedBank),
            },
            Dormancy::Mixture(m) => {
                let mut weights = Vec::with_capacity(m.parts().len());
                let mut parts = Vec::with_capacity(m.parts().len());
                for (w, law) in m.parts() {
                    let mean = law.mean().ok_or(Error::InfiniteMeanSeedBank)?;
                    weights.push(w * mean);
                    parts.push(law.seed_age_sampler(t)?);
                }
                let pick = WeightedAliasIndex::new(weights).map_err(|_| Error::BadWeights { law: "mixture" })?;
                Ok(SeedAge::Mixture(pick, parts))
            }
            _ => {
                let max = self.max_lookback().ok_or(Error::InfiniteMeanSeedBank)?;
                let weights: Vec<f64> = (0..max).map(|a| self.tail(a)).collect();
                let alias = WeightedAliasIndex::new(weights).map_err(|_| Error::BadWeights { law: self.law_name() })?;
                Ok(SeedAge::Table(alias))
            }
        }
    }
}

impl LookBack for Dormancy {
    #[inline]
    fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        self.sample_at(0, rng).unwrap_or(1)
    }
    fn pmf(&self, k: u64) -> f64 {
        match self {
            Dormancy::None => f64::from(u8::from(k == 1)),
            Dormancy::Uniform(d) => d.pmf(k),
            Dormancy::Geometric(d) => d.pmf(k),
            Dormancy::Pareto(d) => d.pmf(k),
            Dormancy::Table(d) => d.pmf(k),
            Dormancy::Mixture(d) => d.pmf(k),
            Dormancy::SinceFounding(d) => d.pmf(k),
        }
    }
    fn tail(&self, k: u64) -> f64 {
        match self {
            Dormancy::None => f64::from(u8::from(k == 0)),
            Dormancy::Uniform(d) => d.tail(k),
            Dormancy::Geometric(d) => d.tail(k),
            Dormancy::Pareto(d) => d.tail(k),
            Dormancy::Table(d) => d.tail(k),
            Dormancy::Mixture(d) => d.tail(k),
            Dormancy::SinceFounding(d) => d.tail(k),
        }
    }
    fn mean(&self) -> Option<f64> {
        match self {
            Dormancy::None => Some(1.0),
            Dormancy::Uniform(d) => d.mean(),
            Dormancy::Geometric(d) => d.mean(),
            Dormancy::Pareto(d) => d.mean(),
            Dormancy::Table(d) => d.mean(),
            Dormancy::Mixture(d) => d.mean(),
            Dormancy::SinceFounding(d) => d.mean(),
        }
    }
    fn max_lookback(&self) -> Option<u64> {
        match self {
            Dormancy::None => Some(1),
            Dormancy::Uniform(d) => d.max_lookback(),
            Dormancy::Geometric(d) => d.max_lookback(),
            Dormancy::Pareto(d) => d.max_lookback(),
            Dormancy::Table(d) => d.max_lookback(),
            Dormancy::Mixture(d) => d.max_lookback(),
            Dormancy::SinceFounding(d) => d.max_lookback(),
        }
    }
}

/// Sampler of the stationary age of a dormant seed (see [`Dormancy::seed_age_sampler`]).
#[derive(Debug, Clone)]
pub enum SeedAge {
    /// Age 0 with certainty (no dormancy).
    Zero,
    /// Geometric number of failures (memoryless law: the age has the law of R - 1).
    Geometric(rand_distr::Geometric),
    /// Alias table over ages 0..max.
    Table(WeightedAliasIndex<f64>),
    /// A part chosen with probability w_i E[R_i] / E[R], then its own age.
    Mixture(WeightedAliasIndex<f64>, Vec<SeedAge>),
}

impl SeedAge {
    /// Draws an age a >= 0.
    pub fn sample<R: Rng + ?Sized>(&self, rng: &mut R) -> u64 {
        match self {
            SeedAge::Zero => 0,
            SeedAge::Geometric(g) => g.sample(rng),
            SeedAge::Table(t) => t.sample(rng) as u64,
            SeedAge::Mixture(pick, parts) => parts[pick.sample(rng)].sample(rng),
        }
    }
}

/// Checks that `value` is finite and satisfies `ok`, or returns an `OutOfRange` error.
pub(crate) fn check(
    law: &'static str,
    param: &'static str,
    value: f64,
    allowed: &'static str,
    ok: impl Fn(f64) -> bool,
) -> Result<f64, Error> {
    if value.is_finite() && ok(value) { Ok(value) } else { Err(Error::OutOfRange { law, param, value, allowed }) }
}

/// A uniform draw in (0, 1], never 0, so that negative powers stay finite.
#[inline(always)]
pub(crate) fn open_unit<R: Rng + ?Sized>(rng: &mut R) -> f64 {
    1.0 - rng.random::<f64>()
}

#[cfg(test)]
pub(crate) mod test_util {
    use super::LookBack;

    /// Checks pmf, tail and mean against each other on 1..=kmax.
    pub fn check_consistency<L: LookBack>(law: &L, kmax: u64, tol: f64) {
        let mut cum = 0.0;
        let mut mean = 0.0;
        assert!((law.tail(0) - 1.0).abs() < tol, "tail(0) = {}", law.tail(0));
        for k in 1..=kmax {
            let p = law.pmf(k);
            assert!(p >= 0.0);
            cum += p;
            mean += law.tail(k - 1);
            let t = law.tail(k);
            assert!((t - (1.0 - cum)).abs() < tol, "k = {k}: tail {t} vs 1 - cdf {}", 1.0 - cum);
        }
        if let (Some(m), Some(max)) = (law.mean(), law.max_lookback())
            && max <= kmax
        {
            assert!((m - mean).abs() < tol * m, "mean {m} vs sum of tails {mean}");
        }
    }
}

#[cfg(test)]
mod seed_age_tests {
    use super::*;
    use rand::SeedableRng;

    /// Chi-square of `n` draws of the seed age against P(A = a) = P(R > a) / E[R].
    fn check(law: Dormancy, classes: u64) {
        // Source: renewal theory, the stationary age of the current renewal interval has
        // P(A = a) = P(R > a) / E[R] for a >= 0 (Feller 1971, vol. II, §XI.4; from memory).
        let sampler = law.seed_age_sampler(0).unwrap();
        let mean = law.mean().unwrap();
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(17);
        let n = 60_000;
        let mut counts = vec![0.0; classes as usize + 1];
        for _ in 0..n {
            counts[sampler.sample(&mut rng).min(classes) as usize] += 1.0;
        }
        let mut stat = 0.0;
        let mut covered = 0.0;
        for a in 0..classes {
            let p = law.tail(a) / mean;
            covered += p;
            stat += (counts[a as usize] - p * n as f64).powi(2) / (p * n as f64);
        }
        let rest = 1.0 - covered;
        if rest > 1e-9 {
            stat += (counts[classes as usize] - rest * n as f64).powi(2) / (rest * n as f64);
        } else {
            assert_eq!(counts[classes as usize], 0.0, "{}: an age beyond the support", law.law_name());
        }
        // 99.9% quantile of chi-square with at most 12 degrees of freedom is 32.9 (table value).
        assert!(stat < 32.9, "{}: chi-square {stat}", law.law_name());
    }

    #[test]
    fn stationary_seed_age_follows_the_tail_over_the_mean() {
        check(Dormancy::Uniform(Uniform::new(5).unwrap()), 5);
        check(Dormancy::Geometric(Geometric::new(4.0).unwrap()), 12);
        let mix =
            Mixture::new(vec![(1.0, Dormancy::None), (1.0, Dormancy::Uniform(Uniform::new(3).unwrap()))]).unwrap();
        check(Dormancy::Mixture(mix), 3);
        check(Dormancy::Table(Table::new(&[0.2, 0.0, 0.5, 0.3]).unwrap()), 4);
        assert!(matches!(
            Dormancy::Pareto(Pareto::new(0.7, None).unwrap()).seed_age_sampler(0),
            Err(Error::InfiniteMeanSeedBank)
        ));
    }
}
