//! The scenario file as written: serde mirrors of the YAML, with no checks beyond types.
//!
//! Everything here is turned into validated types by [`super::Scenario::from_raw`]; nothing
//! else in the crate reads these structs.

use serde::{Deserialize, Serialize};
use serde_saphyr::Spanned;

/// Top level of a scenario file.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawScenario {
    /// Free text.
    #[serde(default)]
    pub name: Option<String>,
    /// Master seed.
    #[serde(default)]
    pub seed: Option<u64>,
    /// Number of replicates.
    #[serde(default)]
    pub replicates: Option<u64>,
    /// Generations back before giving up.
    #[serde(default)]
    pub horizon: Option<Spanned<f64>>,
    /// The demes.
    #[serde(default)]
    pub demes: Vec<Spanned<RawDeme>>,
    /// Backward migration entries.
    #[serde(default)]
    pub migration: Vec<Spanned<RawMigration>>,
    /// Sample groups.
    #[serde(default)]
    pub samples: Vec<Spanned<RawSample>>,
    /// Infinite-sites mutation; no mutations when absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mutation: Option<Spanned<RawMutation>>,
    /// Independent (unlinked) loci per replicate (default 1), or the list of their lengths.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub loci: Option<Spanned<RawLoci>>,
    /// Recombination within each locus; none when absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub recombination: Option<Spanned<RawRecombination>>,
}

/// `loci:` as written: a number of loci of `mutation.sites` sites each, or one site count
/// per locus.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(untagged)]
pub enum RawLoci {
    /// Number of loci.
    Count(f64),
    /// Sites of each locus.
    Lengths(Vec<f64>),
}

/// Recombination within a locus (the sequence length is `mutation.sites`).
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawRecombination {
    /// Crossovers per adjacent pair of sites per generation of reproduction.
    pub rate: f64,
}

/// Mutation rates per site per generation, and the sequence length.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawMutation {
    /// Rate in every generation, dormant ones included.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rate: Option<f64>,
    /// Sites per locus (absent when `loci` lists the sites of each locus).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sites: Option<f64>,
    /// Rate in the generation of reproduction (overrides `rate`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reproduction_rate: Option<f64>,
    /// Rate in each dormant generation (overrides `rate`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dormant_rate: Option<f64>,
}

/// One deme.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawDeme {
    /// Identifier used by migration and samples.
    pub name: String,
    /// Constant size or epochs.
    pub size: RawSize,
    /// Dormancy law; `none` when absent.
    #[serde(default)]
    pub dormancy: Option<Spanned<RawDormancy>>,
}

/// A constant size or a list of epochs going back in time.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(untagged)]
pub enum RawSize {
    /// Individuals per generation.
    Constant(f64),
    /// Piecewise epochs.
    Epochs(Vec<RawEpoch>),
}

/// One size epoch.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawEpoch {
    /// Start of the epoch.
    pub generations_ago: f64,
    /// Size at the start.
    pub size: f64,
    /// Growth rate forward in time: N(t) = size exp(-growth (t - start)).
    #[serde(default)]
    pub growth: Option<f64>,
}

/// A dormancy law, flat so that each law's keys can be checked with a clear message.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawDormancy {
    /// Law name.
    pub law: String,
    /// Mean (geometric).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mean: Option<f64>,
    /// Tail exponent (pareto).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub alpha: Option<f64>,
    /// Largest look-back (uniform, pareto).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max: Option<f64>,
    /// Weights (table).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub weights: Option<Vec<f64>>,
    /// Parts (mixture).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub parts: Option<Vec<Spanned<RawDormancy>>>,
    /// Weight of a mixture part.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub weight: Option<f64>,
    /// Founding time (since_founding).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub founded: Option<f64>,
}

/// One backward migration rate.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawMigration {
    /// Child's deme.
    pub from: String,
    /// Parent's deme.
    pub to: String,
    /// P(parent in `to` | child in `from`) per generation.
    pub rate: f64,
    /// Optional window [start, end) of child times.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub generations_ago: Option<Vec<f64>>,
}

/// One sample group.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawSample {
    /// Deme sampled.
    pub deme: String,
    /// Number of individuals (not with `block`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub count: Option<u64>,
    /// Sampling time (not with `block`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub generations_ago: Option<f64>,
    /// One individual in each generation of a range.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub block: Option<RawBlock>,
    /// `population` (default) or `seedbank`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub from: Option<String>,
}

/// An inclusive range of generations.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawBlock {
    /// First generation.
    pub from: f64,
    /// Last generation (inclusive).
    pub to: f64,
}
