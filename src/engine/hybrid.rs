//! The hybrid engine: the exact engine for the recent generations, the approximate engine
//! after a switch time.
//!
//! A coalescent limit can fail only near the present: a sample comparable to N (multiple
//! mergers and simultaneous mergers among many lineages), or a recent epoch of small size.
//! The hybrid runs the exact discrete ARG engine ([`crate::engine::arg`], with recombination; one site
//! without) from the present to the switch time T, then hands every lineage still carrying
//! material — with its site intervals, local-tree nodes and reproduction counts — to the
//! approximate engine ([`crate::engine::approx_arg`]), which enters it at the generation of
//! its next individual (the parents' generation of the reproduction that crossed T; its
//! crossovers are drawn by the exact part). Samples older than T enter the approximate part as
//! samples. The records of both parts join into one [`ArgRecords`].
//!
//! **Switch rule.** T = max(T_size, T_lineages), computed once per scenario:
//! ```text
//! T_size     = the first epoch start from which every deme satisfies auto's conditions of
//!              crate::engine::approx::choose on the rest of its history (N >= 200 at every epoch
//!              start and exponential end; E[R] and the look-back scale <= N/10);
//! T_lineages = per deme d with n_d samples: the time at which the expected number of
//!              lineages of one site, 1/(1/n_d + Λ_d(t)/2) (Kingman, Λ_d(t) = ∫_0^t du /
//!              (N_d(u) E[R]²/d)), falls to k* = max(2, ⌊2 sqrt(ε N_e)⌋), N_e = N_d(T_size)
//!              E[R]²/d, ε = MERGER_TOLERANCE = 1%.
//! ```
//! With k lineages per site, a merger event is a plain binary merger in a generation of its
//! own except with probability about C(k-2, 2)/(2 N_e) + (k - 2)/(3 N E\[R]) ≤ k²/(4 N_e)
//! (two pairs in one generation, or three lineages on one parent; derived here from the
//! per-generation collision probabilities, common practice for the Wright–Fisher
//! correction), so below k* the limit's error per event is below ε.
//!
//! `auto` picks the hybrid for recombining loci only (there the exact engine's cost grows
//! with N × rho): where [`crate::engine::approx::choose`] picks the approximate engine but n > k*
//! (T > 0), and where it picks the exact engine but T_size exists. Without recombination
//! auto keeps its rule; `--engine hybrid` runs the hybrid on any scenario in its domain.

use crate::engine::EngineKind;
use crate::engine::approx::{
    ApproxError, ApproxModel, DemeModel, MAX_LOOKBACK_FRACTION, MAX_SWITCH_RATE, MIN_DEME_SIZE, lookback_scale,
};
use crate::engine::approx_arg::{ApproxArgSimulator, ArgRecords, Pending, Seg, sample_entries};
use crate::engine::arg::{ArgConfig, ArgSimulator};
use crate::genealogy::Genealogy;
use crate::scenario::Scenario;
use crate::theory::limits::min_size;
use rand::Rng;

/// ε of the switch rule: the largest tolerated probability that a merger event of the
/// approximate part would not be a plain binary merger in the exact model.
pub const MERGER_TOLERANCE: f64 = 0.01;

/// When the hybrid switches, and why in words.
#[derive(Debug, Clone, PartialEq)]
pub struct SwitchPlan {
    /// T: the exact engine simulates generations up to T, the approximate engine the rest.
    pub switch: u64,
    /// T_size (recent epochs outside the limit).
    pub size_part: u64,
    /// T_lineages (many lineages per site).
    pub lineage_part: u64,
    /// The rule's terms, in words.
    pub reason: String,
}

/// The switch time of the hybrid for `scenario` (module docs), or why its distant past is
/// outside every limit too.
pub fn plan(scenario: &Scenario) -> Result<SwitchPlan, ApproxError> {
    let model = ApproxModel::new(scenario)?;
    let mut size_part = 0u64;
    let mut why = Vec::new();
    for (deme, m) in scenario.demes().iter().zip(model.demes()) {
        let err = |reason: String| ApproxError::OutOfDomain { deme: deme.name().to_string(), reason };
        let floor = match *m {
            DemeModel::Kingman { mean, .. } => {
                MIN_DEME_SIZE.max(mean.max(lookback_scale(deme.dormancy())) / MAX_LOOKBACK_FRACTION)
            }
            DemeModel::SeedBank { c, .. } if c > MAX_SWITCH_RATE => {
                return Err(err(format!("seed-bank switching rate c = {c:.3} > {MAX_SWITCH_RATE}")));
            }
            DemeModel::SeedBank { .. } => MIN_DEME_SIZE,
        };
        let epochs = deme.size().epochs();
        let Some(j) = (0..epochs.len()).find(|&j| min_size(&epochs[j..], m.coal_scale()) >= floor) else {
            return Err(err(format!(
                "N falls below {floor:.0} (200, and 10 x the look-back) in its oldest epoch: no limit holds in the distant past"
            )));
        };
        let start = epochs[j].start;
        if start > 0 {
            why.push(format!("`{}` below N = {floor:.0} until generation {start}", deme.name()));
        }
        size_part = size_part.max(start);
    }
    let mut lineage_time = 0.0f64;
    for (d, (deme, m)) in scenario.demes().iter().zip(model.demes()).enumerate() {
        let n_d = scenario.samples().iter().filter(|s| s.deme == d).count();
        let s = m.coal_scale();
        let n_e = s * size_at(deme.size().epochs(), size_part as f64);
        let k = (2.0 * (MERGER_TOLERANCE * n_e).sqrt()).floor().max(2.0);
        if (n_d as f64) <= k {
            continue;
        }
        let t = model.coal_time(d, 0.0, 1.0 / s, 2.0 * (1.0 / k - 1.0 / n_d as f64));
        if t > lineage_time {
            lineage_time = t;
        }
        why.push(format!("`{}`: {n_d} samples until about {k} lineages per site remain (N_e = {n_e:.0})", deme.name()));
    }
    let horizon = scenario.horizon();
    let lineage_part = if lineage_time.is_finite() { (lineage_time.ceil() as u64).min(horizon) } else { horizon };
    let switch = size_part.max(lineage_part);
    let reason = if why.is_empty() {
        "hybrid engine with switch at generation 0: the limit holds from the present (the approximate engine alone)"
            .to_string()
    } else {
        format!(
            "hybrid engine: exact up to generation {switch} ({}), then the approximate engine (multiple mergers below {:.0}% per event; Hudson's ARG with recombination)",
            why.join("; "),
            100.0 * MERGER_TOLERANCE
        )
    };
    Ok(SwitchPlan { switch, size_part, lineage_part, reason })
}

/// N(t) of a size history (real-valued, as the approximate engine uses it).
fn size_at(epochs: &[crate::demography::SizeEpoch], t: f64) -> f64 {
    let i = epochs.partition_point(|e| e.start as f64 <= t).max(1) - 1;
    let e = &epochs[i];
    e.size * (-e.growth * (t - e.start as f64)).exp()
}

/// Auto's decision for a recombining locus, given [`crate::engine::choose`]'s: the hybrid
/// where the limit fails only in the recent past or the sample is large (module docs), with
/// the reason and the switch time.
pub fn auto_with_recombination(
    scenario: &Scenario,
    kind: EngineKind,
    reason: String,
) -> (EngineKind, String, Option<u64>) {
    match plan(scenario) {
        Ok(p) if p.switch > 0 && p.switch < scenario.horizon() => (EngineKind::Hybrid, p.reason, Some(p.switch)),
        _ if kind == EngineKind::Approx => {
            (kind, format!("{reason}{}", crate::engine::approx_arg::describe(scenario)), None)
        }
        _ => (kind, reason, None),
    }
}

/// Simulates hybrid ancestries; owns both engines' scratch buffers.
#[derive(Debug, Default)]
pub struct HybridSimulator {
    exact: ArgSimulator,
    approx: ApproxArgSimulator,
}

impl HybridSimulator {
    /// A simulator with empty buffers.
    pub fn new() -> Self {
        HybridSimulator::default()
    }

    /// The ancestry of the model's sample along `config.sites()` sites: exact up to
    /// generation `switch`, approximate after.
    pub fn simulate<R: Rng + ?Sized>(
        &mut self,
        model: &ApproxModel,
        config: &ArgConfig,
        switch: u64,
        rng: &mut R,
    ) -> ArgRecords {
        let scenario = model.scenario;
        let n = scenario.samples().len();
        let h = self.exact.simulate_until(scenario, config, switch, rng);
        let mut pending: Vec<Pending> = h
            .lineages
            .into_iter()
            .map(|(time, deme, segs)| Pending {
                time: time as f64,
                segs: segs
                    .iter()
                    .map(|s| Seg {
                        left: s.left,
                        right: s.right,
                        node: s.node,
                        count: s.count,
                        base: -(s.jumps as f64),
                    })
                    .collect(),
                deme,
                from: deme,
                dormant: false,
                clock: 0.0,
                link: false,
            })
            .collect();
        if n > 1 {
            pending.extend(sample_entries(model, config.sites(), Some(switch), rng));
        }
        let mut start = ArgRecords::empty(n, config.sites(), h.nodes);
        (start.edges, start.roots, start.split_gaps) = (h.edges, h.roots, h.split_gaps);
        (start.recombination_events, start.tree_crossovers, start.steps) =
            (h.recombination_events, h.tree_crossovers, h.steps);
        self.approx.run(model, config, start, pending, rng)
    }

    /// The genealogy of a locus without recombination (one site), hybrid as above.
    pub fn genealogy<R: Rng + ?Sized>(&mut self, model: &ApproxModel, switch: u64, rng: &mut R) -> Genealogy {
        let config = ArgConfig::new(1, 0.0).expect("one site, no recombination");
        let records = self.simulate(model, &config, switch, rng);
        let mut out = None;
        records.for_each_tree(|t, _| out = Some(t.genealogy().clone()));
        let mut g = out.expect("one site has one tree");
        g.set_steps(records.steps());
        g
    }
}

/// The ancestry of one recombining locus with the approximate engine, or with the hybrid when
/// the model carries a switch time ([`ApproxModel::with_switch`]).
pub fn simulate_locus<R: Rng + ?Sized>(model: &ApproxModel, config: &ArgConfig, rng: &mut R) -> ArgRecords {
    match model.switch_time() {
        Some(t) => HybridSimulator::new().simulate(model, config, t, rng),
        None => ApproxArgSimulator::new().simulate(model, config, rng),
    }
}

#[cfg(test)]
mod tests;
