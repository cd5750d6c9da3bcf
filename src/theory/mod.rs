//! Exact theory of lineages under dormancy: renewal sequences, regimes, coalescence time
//! scales and relatedness, used as ground truth for the simulator and for sampling design.
//!
//! Everything here is a pure, deterministic function of the look-back law.

pub mod relatedness;
pub mod renewal;
