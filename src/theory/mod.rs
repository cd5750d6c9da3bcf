//! Exact and limiting expectations of genealogies and diversity: Kingman's coalescent and the
//! discrete Wright–Fisher chain, the weak seed bank (time-changed Kingman), the seed-bank
//! coalescent, structured populations, the exact two-lineage chains (one deme by the gap
//! between the lineages; several demes with migration per look-back by phases), the limits
//! for any sample as a chain on its lineages, Polanski–Kimmel spectra under size changes, the
//! renewal theory of heavy-tailed dormancy, and the rule that says when a limit holds.
//! Every function is pure and deterministic; these are the reference values that simulations
//! are tested against, and never call the engine. Times are in generations, population sizes
//! count haploid individuals, and θ = 2Nμ unless a function says otherwise.

pub mod error;
mod linalg;

pub mod horizon;
pub mod kingman;
pub mod limits;
pub mod lineages;
pub mod pair_exact;
pub mod polanski_kimmel;
pub mod predict;
pub mod relatedness;
pub mod renewal;
pub mod seedbank_coalescent;
pub mod structured;
pub mod two_lineage;
pub mod weak_seedbank;

/// One backward migration matrix, M\[d]\[e] = P(parent in e | child in d), for child times in
/// \[start, end) (`end` = `u64::MAX` for the last piece).
#[derive(Debug, Clone, PartialEq)]
pub struct MigrationPiece {
    /// First child generation.
    pub start: u64,
    /// End (exclusive).
    pub end: u64,
    /// Dense D × D matrix, rows summing to 1.
    pub matrix: Vec<Vec<f64>>,
}

/// The scenario's migration as dense pieces: the one place where `theory` reads migration
/// rates from a scenario (their storage may change).
fn migration_pieces(scenario: &crate::scenario::Scenario) -> Vec<MigrationPiece> {
    scenario
        .migration()
        .epochs()
        .iter()
        .map(|e| MigrationPiece { start: e.start(), end: e.end(), matrix: e.matrix().to_vec() })
        .collect()
}
