//! The engines that build the ancestry of a sample, behind one choice.
//!
//! - [`exact`]: the exact discrete backward engine ([`Simulator`]), the model itself.
//! - [`arg`]: the exact engine with recombination within a locus ([`arg::ArgSimulator`]).
//! - [`approx`]: continuous-time limits whose cost does not grow with N
//!   ([`approx::ApproxModel`]): Kingman with the Kaj–Krone–Lascoux time change, the
//!   seed-bank coalescent, the structured coalescent; with recombination the continuous-time
//!   ARG under the same limits ([`approx_arg`]).
//! - [`hybrid`]: the exact engine for the recent generations, then the approximate one.
//!
//! Every command goes through [`Engine`]: the user's [`EngineChoice`] (`--engine
//! exact|approx|hybrid|auto`) and the scenario give an [`EngineDecision`] (which engine, and why in
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
//! where `auto` picks it, and an arm in [`Engine::simulate`]. With recombination `auto` takes
//! the approximate ARG where the limit holds, the hybrid where only the recent past (or a
//! large sample) is outside it ([`hybrid::auto_with_recombination`]), else the exact ARG.

pub mod approx;
pub mod approx_arg;
pub mod arg;
pub mod exact;
pub mod hybrid;
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
    /// Exact for the recent generations, approximate after a switch time ([`hybrid`]);
    /// an error when the distant past is outside the limit.
    Hybrid,
}

impl FromStr for EngineChoice {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "exact" => Ok(EngineChoice::Exact),
            "approx" => Ok(EngineChoice::Approx),
            "auto" => Ok(EngineChoice::Auto),
            "hybrid" => Ok(EngineChoice::Hybrid),
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
            EngineChoice::Hybrid => "hybrid",
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
    /// [`hybrid`]: exact up to the switch time, then [`ApproxModel`].
    Hybrid,
}

impl fmt::Display for EngineKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            EngineKind::Exact => "exact",
            EngineKind::Approx => "approx",
            EngineKind::Hybrid => "hybrid",
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
    /// The hybrid's switch time in generations ([`hybrid::plan`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub switch: Option<u64>,
}

/// Why an engine cannot run.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// An engine name other than exact, approx, hybrid or auto.
    #[error("unknown engine `{0}`: use exact, approx, auto or hybrid")]
    UnknownEngine(String),
    /// The approximate engine (or the hybrid) was asked for outside its domain.
    #[error("--engine {choice}: {error}")]
    Approx {
        /// approx or hybrid.
        choice: EngineChoice,
        /// Why.
        error: ApproxError,
    },
}

/// Picks the engine for `auto` without recombination, with the reason in words: the
/// approximate engine where a coalescent limit is accurate ([`approx::choose`]), else the
/// exact engine. With recombination [`resolve`] also weighs the hybrid.
pub fn choose(scenario: &Scenario) -> (EngineKind, String) {
    approx::choose(scenario)
}

/// Resolves a user's choice: `exact` always runs; `approx` runs when every deme has a limit
/// model (an error otherwise; the reason notes when `auto` would pick exact); `hybrid` runs
/// when the limit holds after some switch time ([`hybrid::plan`]); `auto` is [`choose`], and
/// for a recombining locus the hybrid where the recent past is outside the limit or the
/// sample is large ([`hybrid::auto_with_recombination`]).
pub fn resolve(choice: EngineChoice, scenario: &Scenario) -> Result<EngineDecision, Error> {
    let err = |error| Error::Approx { choice, error };
    let decision = |kind, reason, switch| EngineDecision { kind, requested: choice, reason, switch };
    Ok(match choice {
        EngineChoice::Exact => decision(EngineKind::Exact, "exact engine (requested)".to_string(), None),
        EngineChoice::Hybrid => {
            let plan = hybrid::plan(scenario).map_err(err)?;
            decision(EngineKind::Hybrid, format!("{} (requested)", plan.reason), Some(plan.switch))
        }
        EngineChoice::Approx => {
            ApproxModel::new(scenario).map_err(err)?;
            let reason = match choose(scenario) {
                (EngineKind::Approx, why) => format!("{why} (requested)"),
                (_, why) => format!("approximate engine (requested) outside its accuracy range; auto would pick {why}"),
            };
            decision(EngineKind::Approx, format!("{reason}{}", approx_arg::describe(scenario)), None)
        }
        EngineChoice::Auto => {
            let (kind, reason) = choose(scenario);
            if scenario.recombination().is_some() {
                let (kind, reason, switch) = hybrid::auto_with_recombination(scenario, kind, reason);
                decision(kind, reason, switch)
            } else {
                decision(kind, reason, None)
            }
        }
    })
}

/// One locus' ancestry, as an engine builds it.
#[derive(Debug)]
pub enum Ancestry {
    /// One genealogy (no recombination within the locus).
    Tree(Genealogy),
    /// Local trees along the locus (the exact engine with recombination).
    Sequence(Arg),
    /// The records of an approximate (or hybrid) ARG, whose local trees are streamed one at
    /// a time ([`approx_arg::ArgRecords::for_each_tree`]).
    Records(approx_arg::ArgRecords),
}

/// Per-worker buffers of the engines, reused across replicates.
#[derive(Debug, Default)]
pub struct Scratch {
    exact: Simulator,
    arg: ArgSimulator,
    approx_arg: approx_arg::ApproxArgSimulator,
    hybrid: hybrid::HybridSimulator,
}

/// The model an engine builds once per scenario.
#[derive(Debug)]
enum Prepared<'a> {
    Exact,
    /// The approximate engine; run as the hybrid when it carries a switch time.
    Approx(ApproxModel<'a>),
}

/// One engine resolved for one scenario: what every command calls to simulate.
#[derive(Debug)]
pub struct Engine<'a> {
    scenario: &'a Scenario,
    decision: EngineDecision,
    prepared: Prepared<'a>,
}

impl<'a> Engine<'a> {
    /// Resolves `choice` for `scenario` ([`resolve`]) and prepares the engine.
    pub fn new(scenario: &'a Scenario, choice: EngineChoice) -> Result<Self, Error> {
        let decision = resolve(choice, scenario)?;
        let err = |error| Error::Approx { choice, error };
        let prepared = match decision.kind {
            EngineKind::Exact => Prepared::Exact,
            EngineKind::Approx => Prepared::Approx(ApproxModel::new(scenario).map_err(err)?),
            EngineKind::Hybrid => {
                Prepared::Approx(ApproxModel::new(scenario).map_err(err)?.with_switch(decision.switch.unwrap_or(0)))
            }
        };
        Ok(Engine { scenario, decision, prepared })
    }

    /// The exact engine, without asking the user (tests and theory checks).
    pub fn exact(scenario: &'a Scenario) -> Self {
        let decision = EngineDecision {
            kind: EngineKind::Exact,
            requested: EngineChoice::Exact,
            reason: "exact engine (requested)".to_string(),
            switch: None,
        };
        Engine { scenario, decision, prepared: Prepared::Exact }
    }

    /// The scenario.
    pub fn scenario(&self) -> &'a Scenario {
        self.scenario
    }

    /// The engine that runs and why.
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
            (Prepared::Approx(model), Some(config)) => Ancestry::Records(match model.switch_time() {
                Some(t) => scratch.hybrid.simulate(model, &config, t, rng),
                None => scratch.approx_arg.simulate(model, &config, rng),
            }),
            (_, None) => Ancestry::Tree(self.simulate_tree(scratch, rng)),
        }
    }

    /// The genealogy of one locus without recombination (the scenario's recombination, if
    /// any, is ignored): for a fixed number of mutations and for tree-only commands.
    pub fn simulate_tree<R: Rng + ?Sized>(&self, scratch: &mut Scratch, rng: &mut R) -> Genealogy {
        match &self.prepared {
            Prepared::Exact => scratch.exact.simulate(self.scenario, rng),
            Prepared::Approx(model) => match model.switch_time() {
                Some(t) => scratch.hybrid.genealogy(model, t, rng),
                None => model.simulate(rng),
            },
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
