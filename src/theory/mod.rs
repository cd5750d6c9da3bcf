//! Exact and limiting expectations of genealogies and diversity: Kingman's coalescent and the
//! discrete Wright–Fisher chain, the weak seed bank (time-changed Kingman), the seed-bank
//! coalescent, structured populations, the exact two-lineage chain under a bounded look-back
//! law, and the renewal theory of heavy-tailed dormancy (regimes, time scales, relatedness).
//! Every function is pure and deterministic; these are the reference values that simulations
//! are tested against, and never call the engine. Times are in generations, population sizes
//! count haploid individuals, and θ = 2Nμ unless a function says otherwise.

pub mod error;
mod linalg;

pub mod horizon;
pub mod kingman;
pub mod predict;
pub mod relatedness;
pub mod renewal;
pub mod seedbank_coalescent;
pub mod structured;
pub mod two_lineage;
pub mod weak_seedbank;
