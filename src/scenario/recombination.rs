//! Recombination within a locus: the sequence length and the crossover rate.
//!
//! A model parameter of the scenario, like [`crate::mutation::MutationModel`]; the engines
//! that read it live in [`crate::engine`].

/// Why an [`ArgConfig`] was refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ArgError {
    /// The sequence has no site.
    #[error("the sequence needs at least one site (sites = 0)")]
    NoSites,
    /// The sequence is longer than the engine can index.
    #[error("sites = {0} is more than the largest supported length 2^53")]
    TooManySites(u64),
    /// The recombination rate is negative, NaN or infinite.
    #[error("recombination rate r = {0} must be finite and >= 0 (crossovers per gap per reproduction)")]
    BadRate(f64),
}

/// Sequence length and recombination rate of the ARG engine.
///
/// `sites` = L, the number of sites (L - 1 gaps); `recombination_rate` = r, the mean number
/// of crossovers per gap per reproduction event (dormant generations count none). The
/// population-scaled rate over the whole sequence in one deme of N haploids is
/// ```text
/// rho = 2 N r (L - 1)     (coalescent unit N generations; per-lineage rate N r (L-1) = rho/2)
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ArgConfig {
    sites: u64,
    recombination_rate: f64,
}

impl ArgConfig {
    /// Checks and builds: `sites` in 1..=2^53, `recombination_rate` finite and >= 0.
    pub fn new(sites: u64, recombination_rate: f64) -> Result<Self, ArgError> {
        if sites == 0 {
            return Err(ArgError::NoSites);
        }
        if sites > 1 << 53 {
            return Err(ArgError::TooManySites(sites));
        }
        if !recombination_rate.is_finite() || recombination_rate < 0.0 {
            return Err(ArgError::BadRate(recombination_rate));
        }
        Ok(ArgConfig { sites, recombination_rate })
    }

    /// Number of sites L.
    pub fn sites(&self) -> u64 {
        self.sites
    }

    /// Crossovers per gap per reproduction event, r.
    pub fn recombination_rate(&self) -> f64 {
        self.recombination_rate
    }
}
