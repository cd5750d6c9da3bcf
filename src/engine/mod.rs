//! The engines that build the genealogy of a sample.
//!
//! - [`exact`]: the exact discrete backward engine ([`Simulator`]).
//! - [`approx`]: continuous-time limits whose cost does not grow with N.
//! - [`arg`]: the exact engine with recombination within a locus.

pub mod approx;
pub mod arg;
pub mod exact;

pub use exact::{Simulator, simulate};
