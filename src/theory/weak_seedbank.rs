//! Weak seed bank (Kaj, Krone & Lascoux 2001, J. Appl. Probab. 38:285): a look-back law R
//! fixed as N grows turns the genealogy into Kingman's coalescent slowed down by E\[R]²/d.
//!
//! Here d is the gcd of the support of R. For two lineages sampled in the same generation
//! E\[T_2] = N E\[R]²/d holds exactly for every N (theory reference §3.2, checked against the
//! exact chain in [`super::two_lineage`]); for larger samples the time change is the
//! large-N limit.

use super::error::TheoryError;
use super::error::check;
use crate::dormancy::{Dormancy, LookBack};

/// Mutation rates on a lineage: per reproduction event and per extra (dormant) generation.
///
/// A parent–offspring link spanning r generations carries on average
/// ```text
/// ν_r = per_reproduction + per_dormant_generation (r - 1)
/// ```
/// mutations (theory reference §3.3). Mutating at rate μ in every generation, dormant ones
/// included, is `per_generation(μ)`; mutating only at reproduction is `reproduction_only(μ)`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MutationRates {
    /// Expected mutations per reproduction event (the first generation of each link).
    pub per_reproduction: f64,
    /// Expected mutations per additional generation spent dormant.
    pub per_dormant_generation: f64,
}

impl MutationRates {
    /// Validated rates (finite, >= 0).
    pub fn new(per_reproduction: f64, per_dormant_generation: f64) -> Result<Self, TheoryError> {
        check("per_reproduction", per_reproduction, "[0, inf)", |x| x >= 0.0)?;
        check("per_dormant_generation", per_dormant_generation, "[0, inf)", |x| x >= 0.0)?;
        Ok(MutationRates { per_reproduction, per_dormant_generation })
    }

    /// Rate μ in every generation, dormant or not: ν_r = μ r.
    pub fn per_generation(mu: f64) -> Result<Self, TheoryError> {
        Self::new(mu, mu)
    }

    /// Mutations only at reproduction: ν_r = μ.
    pub fn reproduction_only(mu: f64) -> Result<Self, TheoryError> {
        Self::new(mu, 0.0)
    }

    /// ν_r, expected mutations on a link spanning r >= 1 generations.
    pub fn per_link(&self, r: u64) -> f64 {
        self.per_reproduction + self.per_dormant_generation * r.saturating_sub(1) as f64
    }

    /// E\[ν_R] = per_reproduction + per_dormant_generation (E\[R] - 1).
    pub fn mean_per_link(&self, mean_lookback: f64) -> f64 {
        self.per_reproduction + self.per_dormant_generation * (mean_lookback - 1.0)
    }
}

/// (E\[R], d) of a stationary law with finite mean.
fn mean_and_gcd(dormancy: &Dormancy) -> Result<(f64, f64), TheoryError> {
    if dormancy.is_time_dependent() {
        return Err(TheoryError::TimeDependent);
    }
    let mean = dormancy.mean().ok_or(TheoryError::InfiniteMean)?;
    Ok((mean, dormancy.support_gcd() as f64))
}

/// The KKL time-scale factor E\[R]²/d (d = `support_gcd()`).
///
/// ```text
/// factor = E[R]² / d
/// ```
/// Coalescence times are those of Kingman's coalescent multiplied by this factor.
/// Errors: infinite mean, or a time-dependent law.
pub fn time_scale(dormancy: &Dormancy) -> Result<f64, TheoryError> {
    let (mean, d) = mean_and_gcd(dormancy)?;
    Ok(mean * mean / d)
}

/// E\[T_2] = N E\[R]²/d generations, exact for two lineages sampled in the same generation.
pub fn pair_time_mean(dormancy: &Dormancy, pop_size: f64) -> Result<f64, TheoryError> {
    check("pop_size", pop_size, "(0, inf)", |x| x > 0.0)?;
    Ok(pop_size * time_scale(dormancy)?)
}

/// Expected number of parent–offspring links on one lineage up to the MRCA of a pair.
///
/// ```text
/// E[links] = N E[R] / d          (renewal–reward, theory reference §3.3)
/// ```
pub fn links_per_lineage_mean(dormancy: &Dormancy, pop_size: f64) -> Result<f64, TheoryError> {
    check("pop_size", pop_size, "(0, inf)", |x| x > 0.0)?;
    let (mean, d) = mean_and_gcd(dormancy)?;
    Ok(pop_size * mean / d)
}

/// θ_eff = E\[π], the expected pairwise difference under the weak seed bank.
///
/// ```text
/// E[π] = 2N E[R] E[ν_R] / d,     E[ν_R] = μ_r + μ_d (E[R] - 1)
/// ```
/// With μ per generation (μ_r = μ_d = μ) this is θ E\[R]²/d with θ = 2Nμ; with mutation
/// only at reproduction it is θ E\[R]/d (theory reference §3.3).
pub fn theta_eff(dormancy: &Dormancy, pop_size: f64, rates: &MutationRates) -> Result<f64, TheoryError> {
    check("pop_size", pop_size, "(0, inf)", |x| x > 0.0)?;
    let (mean, d) = mean_and_gcd(dormancy)?;
    Ok(2.0 * pop_size * mean * rates.mean_per_link(mean) / d)
}

/// Large-N expected unfolded SFS of n sequences: E\[ξ_i] = θ_eff / i, i = 1..n-1.
///
/// The weak seed bank only changes the time scale, so the Kingman shape is kept
/// (theory reference §3.3).
pub fn expected_sfs(
    dormancy: &Dormancy,
    pop_size: f64,
    rates: &MutationRates,
    n: u32,
) -> Result<Vec<f64>, TheoryError> {
    Ok(super::kingman::expected_sfs(n, theta_eff(dormancy, pop_size, rates)?))
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::dormancy::{Pareto, SinceFounding, Table, Uniform};

    /// The five bounded laws of theory reference §3.2 with E\[R] and exact E\[T_2]/N.
    pub(crate) fn reference_laws() -> Vec<(Dormancy, f64, f64)> {
        vec![
            (Dormancy::Table(Table::new(&[1.0, 1.0]).unwrap()), 1.5, 2.25),
            (Dormancy::Uniform(Uniform::new(4).unwrap()), 2.5, 6.25),
            (Dormancy::Table(Table::new(&[0.9, 0., 0., 0., 0., 0., 0., 0., 0., 0.1]).unwrap()), 1.9, 3.61),
            (Dormancy::Table(Table::new(&[0.5, 0.3, 0.2]).unwrap()), 1.7, 2.89),
            (Dormancy::Table(Table::new(&[0.0, 1.0, 0.0, 1.0]).unwrap()), 3.0, 4.5),
        ]
    }

    #[test]
    fn time_scale_reference_table() {
        // Source: Kaj, Krone & Lascoux (2001); exact values from theory reference §3.2 table.
        for (law, mean, scale) in reference_laws() {
            assert!((law.mean().unwrap() - mean).abs() < 1e-12);
            assert!((time_scale(&law).unwrap() - scale).abs() < 1e-12, "{law:?}");
            assert!((pair_time_mean(&law, 100.0).unwrap() - 100.0 * scale).abs() < 1e-9);
        }
        // Law B (our Pareto), α = 1.5 and 2: E[T_2]/N = 6.824505 and 2.705808 (§3.2 table).
        let b15 = Dormancy::Pareto(Pareto::new(1.5, None).unwrap());
        assert!((time_scale(&b15).unwrap() - 6.824505).abs() < 1e-6);
        let b2 = Dormancy::Pareto(Pareto::new(2.0, None).unwrap());
        assert!((time_scale(&b2).unwrap() - 2.705808).abs() < 1e-6);
        assert_eq!(time_scale(&Dormancy::None).unwrap(), 1.0);
        let heavy = Dormancy::Pareto(Pareto::new(0.8, None).unwrap());
        assert_eq!(time_scale(&heavy), Err(TheoryError::InfiniteMean));
        let f = Dormancy::SinceFounding(SinceFounding::new(10).unwrap());
        assert_eq!(time_scale(&f), Err(TheoryError::TimeDependent));
    }

    #[test]
    fn mutation_bookkeeping() {
        // Source: theory reference §3.3: links/N = E[R]/d (table column), θ_eff = θ E[R]²/d
        // per generation, θ E[R]/d at reproduction only.
        let (n, mu) = (50.0, 1e-3);
        let theta = 2.0 * n * mu;
        for (law, mean, scale) in reference_laws() {
            let d = law.support_gcd() as f64;
            assert!((links_per_lineage_mean(&law, n).unwrap() / n - mean / d).abs() < 1e-12);
            let per_gen = theta_eff(&law, n, &MutationRates::per_generation(mu).unwrap()).unwrap();
            assert!((per_gen - theta * scale).abs() < 1e-12);
            let repro = theta_eff(&law, n, &MutationRates::reproduction_only(mu).unwrap()).unwrap();
            assert!((repro - theta * mean / d).abs() < 1e-12);
        }
        // {2,4} equally likely: links per lineage / N = 1.5 (§3.2 table).
        let law = &reference_laws()[4].0;
        assert!((links_per_lineage_mean(law, 1.0).unwrap() - 1.5).abs() < 1e-12);
        let rates = MutationRates::new(0.2, 0.05).unwrap();
        assert!((rates.per_link(5) - 0.4).abs() < 1e-15);
        let sfs = expected_sfs(law, 10.0, &rates, 4).unwrap();
        let te = theta_eff(law, 10.0, &rates).unwrap();
        assert!((sfs[2] - te / 3.0).abs() < 1e-15);
        assert!(MutationRates::new(-1.0, 0.0).is_err());
    }
}
