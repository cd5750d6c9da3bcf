//! The engines that build the ancestry of a sample, behind one choice.
//!
//! - [`exact`]: the exact discrete backward engine ([`Simulator`]), the model itself.
//! - [`arg`]: the exact engine with recombination within a locus ([`arg::ArgSimulator`]).
//! - [`approx`]: continuous-time limits whose cost does not grow with N
//!   ([`approx::ApproxModel`]): Kingman with the Kaj–Krone–Lascoux time change, the
//!   seed-bank coalescent, the structured coalescent.
//!
//! Every command goes through [`Engine`]: the user's [`EngineChoice`] (`--engine
//! exact|approx|auto`) and the scenario give an [`EngineDecision`] (which engine, and why in
//! words, written into each command's JSON); [`Engine::simulate`] then draws one locus'
//! [`Ancestry`] from a random stream, with per-worker buffers in a [`Scratch`].
//!
//! ```
//! use seedline::engine::{Engine, EngineChoice, EngineKind, Scratch};
//! use seedline::{batch, scenario::Scenario};
//! let yaml = "demes: [{name: pond, size: 20000, dormancy: {law: geometric, mean: 2}}]\n\
//!             samples: [{deme: pond, count: 5}]\n";
//! let scenario = Scenario::from_yaml_str(yaml, "inline").unwrap();
//! let engine = Engine::new(&scenario, EngineChoice::Auto).unwrap();
//! assert_eq!(engine.kind(), EngineKind::Approx); // N = 2e4 >> E[R]: the Kingman limit holds
//! let mut rng = batch::replicate_rng(&batch::master_key(scenario.seed()), 0);
//! let tree = engine.simulate_tree(&mut Scratch::default(), &mut rng);
//! assert!(tree.is_tree());
//! ```
//!
//! **Adding an engine.** A new engine is one more [`EngineKind`] variant, one more arm in the
//! private `Prepared` enum (the model built once per scenario), a rule in [`choose`] saying
//! where `auto` picks it, and an arm in [`Engine::simulate`]. With recombination the rule
//! today is "exact" (the only recombination engine); an approximate recombination engine or
//! an exact-then-approximate hybrid goes into the recombination branch of [`choose`].

pub mod approx;
pub mod arg;
pub mod exact;
mod queue;

pub use exact::{Simulator, simulate};

use crate::genealogy::Genealogy;
use crate::scenario::Scenario;
use approx::{ApproxError, ApproxModel};
use arg::{Arg, ArgSimulator};
use rand::Rng;
use std::fmt;
use std::str::FromStr;

/// Which engine the user asked for (`--engine`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EngineChoice {
    /// The exact discrete engine, always.
    Exact,
    /// The approximate engine; an error when the scenario is outside its domain.
    Approx,
    /// The approximate engine where a limit applies (see [`choose`]), else the exact one.
    #[default]
    Auto,
}

impl FromStr for EngineChoice {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "exact" => Ok(EngineChoice::Exact),
            "approx" => Ok(EngineChoice::Approx),
            "auto" => Ok(EngineChoice::Auto),
            other => Err(Error::UnknownEngine(other.to_string())),
        }
    }
}

impl fmt::Display for EngineChoice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            EngineChoice::Exact => "exact",
            EngineChoice::Approx => "approx",
            EngineChoice::Auto => "auto",
        })
    }
}

/// The engine that runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EngineKind {
    /// The exact discrete engine: [`Simulator`], or [`ArgSimulator`] with recombination.
    Exact,
    /// The continuous-time approximate engine, [`ApproxModel`] (no recombination).
    Approx,
}

impl fmt::Display for EngineKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            EngineKind::Exact => "exact",
            EngineKind::Approx => "approx",
        })
    }
}

/// The engine that runs, what was asked for, and why (written into each command's JSON).
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct EngineDecision {
    /// The engine.
    pub kind: EngineKind,
    /// What the user asked for.
    pub requested: EngineChoice,
    /// Why, in words.
    pub reason: String,
}

/// Why an engine cannot run.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// An engine name other than exact, approx or auto.
    #[error("unknown engine `{0}`: use exact, approx or auto")]
    UnknownEngine(String),
    /// The approximate engine was asked for outside its domain.
    #[error("--engine approx: {0}")]
    Approx(#[from] ApproxError),
    /// The approximate engine was asked for with recombination.
    #[error("--engine approx: the approximate engine has no recombination within a locus: use --engine exact or auto")]
    ApproxRecombination,
}

/// The rule of `auto`: the engine to run for a scenario, with the reason in words.
///
/// With recombination within a locus: the exact engine (the only one that models it).
/// Without: the approximate engine where every deme is inside a coalescent limit and the
/// limit is accurate, else the exact one ([`approx::choose`] states the conditions).
pub fn choose(scenario: &Scenario) -> (EngineKind, String) {
    if scenario.recombination().is_some() {
        // An approximate recombination engine and the hybrid add their rule here.
        return (EngineKind::Exact, "exact engine: only it models recombination within a locus".to_string());
    }
    approx::choose(scenario)
}

/// Resolves a user's choice: `exact` always runs; `approx` runs when every deme has a limit
/// model (an error otherwise; the reason notes when `auto` would pick exact); `auto` is
/// [`choose`].
pub fn resolve(choice: EngineChoice, scenario: &Scenario) -> Result<EngineDecision, Error> {
    let decision = |kind, reason| EngineDecision { kind, requested: choice, reason };
    Ok(match choice {
        EngineChoice::Exact => decision(EngineKind::Exact, "exact engine (requested)".to_string()),
        EngineChoice::Approx => {
            if scenario.recombination().is_some() {
                return Err(Error::ApproxRecombination);
            }
            ApproxModel::new(scenario)?;
            let reason = match choose(scenario) {
                (EngineKind::Approx, why) => format!("{why} (requested)"),
                (EngineKind::Exact, why) => {
                    format!("approximate engine (requested) outside its accuracy range; auto would pick {why}")
                }
            };
            decision(EngineKind::Approx, reason)
        }
        EngineChoice::Auto => {
            let (kind, reason) = choose(scenario);
            decision(kind, reason)
        }
    })
}

/// The ancestry of one locus.
#[derive(Debug, Clone)]
pub enum Ancestry {
    /// One genealogy for the whole locus (no recombination).
    Tree(Genealogy),
    /// Local trees along the locus (recombination within it).
    Sequence(Arg),
}

/// Scratch buffers of the engines, reused across replicates by one worker.
#[derive(Debug, Default)]
pub struct Scratch {
    exact: Simulator,
    arg: ArgSimulator,
}

/// The model an engine builds once per scenario.
#[derive(Debug)]
enum Prepared<'a> {
    Exact,
    Approx(ApproxModel<'a>),
}

/// A scenario prepared for the engine that runs it; shared by all workers of a batch.
#[derive(Debug)]
pub struct Engine<'a> {
    scenario: &'a Scenario,
    decision: EngineDecision,
    prepared: Prepared<'a>,
}

impl<'a> Engine<'a> {
    /// Resolves `choice` for the scenario ([`resolve`]) and builds the engine's model.
    pub fn new(scenario: &'a Scenario, choice: EngineChoice) -> Result<Self, Error> {
        let decision = resolve(choice, scenario)?;
        let prepared = match decision.kind {
            EngineKind::Exact => Prepared::Exact,
            EngineKind::Approx => Prepared::Approx(ApproxModel::new(scenario)?),
        };
        Ok(Engine { scenario, decision, prepared })
    }

    /// The exact engine for the scenario (never fails).
    pub fn exact(scenario: &'a Scenario) -> Self {
        let decision = EngineDecision {
            kind: EngineKind::Exact,
            requested: EngineChoice::Exact,
            reason: "exact engine (requested)".to_string(),
        };
        Engine { scenario, decision, prepared: Prepared::Exact }
    }

    /// The scenario.
    pub fn scenario(&self) -> &'a Scenario {
        self.scenario
    }

    /// Which engine runs and why.
    pub fn decision(&self) -> &EngineDecision {
        &self.decision
    }

    /// Which engine runs.
    pub fn kind(&self) -> EngineKind {
        self.decision.kind
    }

    /// Simulates the ancestry of one locus, drawing only from `rng`: local trees when the
    /// scenario has recombination, else one genealogy.
    pub fn simulate<R: Rng + ?Sized>(&self, scratch: &mut Scratch, locus: u64, rng: &mut R) -> Ancestry {
        // Each locus has its own length (and so recombination along it) when the scenario lists them.
        match (&self.prepared, self.scenario.locus_recombination(locus)) {
            (Prepared::Exact, Some(config)) => Ancestry::Sequence(scratch.arg.simulate(self.scenario, &config, rng)),
            (Prepared::Exact, None) => Ancestry::Tree(scratch.exact.simulate(self.scenario, rng)),
            (Prepared::Approx(model), _) => Ancestry::Tree(model.simulate(rng)),
        }
    }

    /// Simulates the genealogy of one site, drawing only from `rng`. Recombination is
    /// ignored: the genealogy of a single site has the law of the engine without it (for
    /// analyses of one site, such as `families`).
    pub fn simulate_tree<R: Rng + ?Sized>(&self, scratch: &mut Scratch, rng: &mut R) -> Genealogy {
        match &self.prepared {
            Prepared::Exact => scratch.exact.simulate(self.scenario, rng),
            Prepared::Approx(model) => model.simulate(rng),
        }
    }
}

/// How often each engine ran over many scenarios (the draws of ABC priors), with one reason
/// per engine (the first seen), for the JSON of `compare` and `design`.
#[derive(Debug, Clone, Default, PartialEq, Eq, serde::Serialize)]
pub struct EngineTally {
    /// What the user asked for.
    pub requested: EngineChoice,
    /// Runs per engine.
    pub runs: std::collections::BTreeMap<EngineKind, u64>,
    /// A reason for each engine that ran (the first scenario's).
    pub reasons: std::collections::BTreeMap<EngineKind, String>,
}

impl EngineTally {
    /// An empty tally.
    pub fn new(requested: EngineChoice) -> Self {
        EngineTally { requested, ..EngineTally::default() }
    }

    /// Counts one run.
    pub fn add(&mut self, d: &EngineDecision) {
        *self.runs.entry(d.kind).or_default() += 1;
        self.reasons.entry(d.kind).or_insert_with(|| d.reason.clone());
    }

    /// One line: `--engine auto: approx for 950 of 1000 runs, exact for 50`.
    pub fn summary(&self) -> String {
        let total: u64 = self.runs.values().sum();
        let parts: Vec<String> = self.runs.iter().map(|(k, c)| format!("{k} for {c}")).collect();
        format!("--engine {}: {} of {total} runs", self.requested, parts.join(", "))
    }
}

#[cfg(test)]
mod tests;
