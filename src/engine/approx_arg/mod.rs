//! The approximate recombination engine: the continuous-time ancestral recombination graph
//! (Hudson 1983) under the limits of [`crate::engine::approx`], with crossovers only at reproduction,
//! and, at large rho, its sequentially Markov approximation SMC' ([`ArgModel`], [`arg_model`];
//! Hudson's process makes O(rho²) events). User-level account: docs/approx-arg.md.
//!
//! Where [`crate::engine::approx::choose`] finds a coalescent limit, the exact ARG engine
//! ([`crate::engine::arg`]) walks O(N × rho) generations per replicate; this engine simulates the
//! limit process event by event, at a cost that does not depend on N and grows roughly
//! linearly with rho. It keeps the exact engine's bookkeeping: every lineage carries a sorted
//! list of site intervals with the local-tree node it sits above, where the material of two
//! lineages overlaps a coalescence makes a new node, and an interval ancestral to all n samples
//! has found its most recent common ancestor and is dropped. Rates per generation, lineages of
//! deme d (see [`crate::engine::approx`] for coalescence and migration):
//!
//! ```text
//! Kingman deme (KKL), links at rate 1/E[R]:
//!   pair coalescence      1 / (N(t) E[R]² / d)
//!   reproduction with at least one crossover over the G gaps of the lineage's span
//!                         (1/E[R]) (1 - e^{-r G})
//! seed-bank deme (BGKW 2016), active lineages only:
//!   pair coalescence      1 / N(t)
//!   short reproduction with a crossover   (1 - σ) (1 - e^{-r G}),   σ = w (g - 1)/g
//!   long dormancy         σ; its reproduction (and crossovers) happen when it wakes (rate 1/g)
//! ```
//!
//! **Scaled rho (derived).** A lineage reproduces once per look-back, at rate 1/E\[R] per
//! generation (renewal theorem), and each reproduction puts Poisson(r) crossovers in every gap,
//! so per generation a lineage recombines at rate r/E\[R] per gap. Coalescence runs on the KKL
//! clock of N E\[R]²/d generations. On that clock the population-scaled recombination rate of
//! the L - 1 gaps is
//! ```text
//! rho = 2 (N E[R]²/d) (r/E[R]) (L - 1) = 2 N r (L - 1) E[R] / d
//! ```
//! (per lineage rho/2 per coalescent unit, as Hudson's 4 N_e r for diploids): dormancy slows
//! coalescence by E\[R]² but recombination only by E\[R], so a seed bank raises rho by E\[R]/d
//! over 2 N r (L - 1). In a seed-bank-coalescent deme active lineages link once per generation,
//! so rho = 2 N r (L - 1) per N generations of active time; dormant lineages do not recombine.
//!
//! **Crossovers at reproduction.** A reproduction draws its crossovers exactly as the exact
//! engine does: Poisson(r) per gap over the gaps of the lineage's span (and the gap right of
//! it, counted in [`ArgRecords::tree_crossovers`]), sites switching parent where a gap has an
//! odd number; several crossovers in one reproduction (r G of order 0.1 on a chromosome) keep
//! their flanks together, unlike Hudson's one breakpoint per event. Events are drawn at the
//! linear rate λ r G from a Fenwick tree of the integer G and thinned with probability
//! (λ_d/λ_max) (1 - e^{-rG})/(rG), which is exact (Lewis & Shedler 1979, thinning of a Poisson
//! process, from memory); the first crossover then has the exponential law truncated to G.
//! The second parent of a reproduction draws its own deme, as in the exact engine.
//!
//! **Output.** [`ArgRecords`]: nodes and the edges and roots of the local trees, each over the
//! sites where it holds, with node times and edge jumps rounded as [`crate::engine::approx`] rounds
//! them (every parent at least one generation above each child; jumps = round(expected
//! links) in \[1, length]). [`ArgRecords::into_arg`] cuts them into the exact engine's
//! [`crate::engine::arg::Arg`]; [`ArgRecords::for_each_tree`] streams the local trees one at a time
//! (memory O(records), not O(trees × n)), which the batch code uses.
//!
//! Sources: Hudson (1983) *Theor. Popul. Biol.* 23:183 (coalescent with recombination,
//! citation from memory); Kaj, Krone & Lascoux (2001) *J. Appl. Probab.* 38:285 (theory
//! reference §3); Blath et al. (2016) *Ann. Appl. Probab.* 26:857 (theory reference §5).
//!
//! ```
//! use seedline::engine::approx::ApproxModel;
//! use seedline::engine::arg::ArgConfig;
//! use seedline::engine::approx_arg::ApproxArgSimulator;
//! use seedline::{batch, scenario::Scenario};
//! let yaml = "demes: [{name: pond, size: 100000, dormancy: {law: geometric, mean: 3}}]\n\
//!             samples: [{deme: pond, count: 6}]\n";
//! let scenario = Scenario::from_yaml_str(yaml, "inline").unwrap();
//! let model = ApproxModel::new(&scenario).unwrap();
//! // rho = 2 N r (L - 1) E[R] = 2 * 1e5 * 1e-8 * 9999 * 3 ~ 60.
//! let config = ArgConfig::new(10_000, 1e-8).unwrap();
//! let mut rng = batch::replicate_rng(&batch::master_key(1), 0);
//! let records = ApproxArgSimulator::new().simulate(&model, &config, &mut rng);
//! let arg = records.into_arg();
//! assert!(arg.trees().len() > 1);
//! assert!(arg.trees().iter().all(|t| t.genealogy().is_tree()));
//! ```

mod fenwick;
mod records;
mod smc;

pub use records::{ArgRecords, visible_breakpoints};

use crate::engine::approx::{ApproxModel, DemeModel, MigEpoch, exp1};
use crate::engine::arg::{ArgConfig, EdgeRec, RootRec};
use crate::genealogy::Node;
use crate::scenario::SampleKind;
use fenwick::Fenwick;
use rand::{Rng, RngExt};

/// One interval of ancestral material carried by a lineage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Seg {
    pub(crate) left: u64,
    pub(crate) right: u64,
    /// Local-tree node at the bottom of the lineage's edge for these sites.
    pub(crate) node: u32,
    /// Samples below `node`.
    pub(crate) count: u32,
    /// Links since `node` = the lineage's clock minus `base`.
    pub(crate) base: f64,
}

impl crate::engine::arg::Piece for Seg {
    fn span(&self) -> (u64, u64) {
        (self.left, self.right)
    }
    fn cut(&self, left: u64, right: u64) -> Self {
        Seg { left, right, ..*self }
    }
}

/// A lineage that enters the process at `time` (a sample, or a lineage of the exact engine
/// handed over by the hybrid).
#[derive(Debug, Clone)]
pub(crate) struct Pending {
    pub(crate) time: f64,
    pub(crate) segs: Vec<Seg>,
    pub(crate) deme: usize,
    /// Deme of the individual whose reproduction is pending (the second parent's migration
    /// is drawn from its row).
    pub(crate) from: usize,
    pub(crate) dormant: bool,
    /// Links already made (the segments' `base` is relative to this clock).
    pub(crate) clock: f64,
    /// Draw one reproduction's crossovers on entry (a seed whose parent is entered).
    pub(crate) link: bool,
}

#[derive(Debug, Default)]
struct Lineage {
    segs: Vec<Seg>,
    deme: usize,
    from: usize,
    dormant: bool,
    clock: f64,
    since: f64,
    /// Position in `active[deme]` or `dormant[from]`.
    slot: u32,
}

/// Per-run constants of the limit process.
struct Consts {
    sites: u64,
    rate: f64,
    n: u32,
    horizon: f64,
    /// Reproductions with crossovers drawn per generation per active lineage, by deme.
    lambda: Vec<f64>,
    lambda_max: f64,
    /// Expected links per generation of an active lineage (its clock), by deme.
    link: Vec<f64>,
    sleep: Vec<f64>,
    wake: Vec<f64>,
    scale: Vec<f64>,
}

impl Consts {
    fn new(model: &ApproxModel, config: &ArgConfig, n: usize) -> Self {
        let d = model.demes();
        let lambda: Vec<f64> = d
            .iter()
            .map(|m| match *m {
                DemeModel::Kingman { mean, .. } => 1.0 / mean,
                DemeModel::SeedBank { sleep, .. } => 1.0 - sleep,
            })
            .collect();
        Consts {
            sites: config.sites(),
            rate: config.recombination_rate(),
            n: n as u32,
            horizon: model.horizon,
            lambda_max: lambda.iter().copied().fold(0.0, f64::max),
            lambda,
            link: d.iter().map(DemeModel::link_rate).collect(),
            sleep: d.iter().map(|m| if let DemeModel::SeedBank { sleep, .. } = *m { sleep } else { 0.0 }).collect(),
            wake: d.iter().map(|m| if let DemeModel::SeedBank { wake, .. } = *m { wake } else { 0.0 }).collect(),
            scale: d.iter().map(DemeModel::coal_scale).collect(),
        }
    }

    /// Gaps over which a reproduction of this material draws crossovers: from the first
    /// carried site to one past the last (the exact engine's count).
    fn gaps(&self, segs: &[Seg]) -> u64 {
        match (segs.first(), segs.last()) {
            (Some(a), Some(b)) => b.right.min(self.sites - 1).saturating_sub(a.left),
            _ => 0,
        }
    }
}

/// A piece of a coalescence: the sites [x, y) and the segments of the two lineages over it.
#[derive(Debug, Clone, Copy)]
struct Piece {
    x: u64,
    y: u64,
    a: Option<u32>,
    b: Option<u32>,
}

/// The limit process of the approximate recombination engine.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ArgModel {
    /// Hudson's ancestral recombination graph, the limit itself; O(rho²) events.
    Hudson,
    /// SMC' along the sequence ([`smc`](self) module docs): O(rho) events, distant sites
    /// approximated.
    SmcPrime,
}

/// Scaled rho above which [`arg_model`] picks SMC': there Hudson's O(rho²) events cost more
/// than about 0.05 s of CPU per replicate at n = 20 (`cargo bench --bench approx_arg -- rho`).
pub const SMC_RHO: f64 = 1000.0;

/// The population-scaled recombination rate of the locus on the limit's clock, the largest
/// over demes (present sizes):
/// ```text
/// rho = 2 N (E[R]²/d) (λ r) (L - 1),   λ = 1/E[R] (Kingman deme), 1 - σ (seed-bank deme)
/// ```
/// which is 2 N r (L - 1) E\[R]/d in a Kingman deme (module docs).
pub fn scaled_rho(model: &ApproxModel, config: &ArgConfig) -> f64 {
    let c = Consts::new(model, config, 0);
    let gaps = config.sites().saturating_sub(1) as f64;
    model
        .scenario
        .demes()
        .iter()
        .enumerate()
        .map(|(d, deme)| 2.0 * deme.size().epochs()[0].size * c.scale[d] * c.lambda[d] * c.rate * gaps)
        .fold(0.0, f64::max)
}

/// Hudson's ARG up to [`SMC_RHO`], SMC' above.
pub fn arg_model(model: &ApproxModel, config: &ArgConfig) -> ArgModel {
    if scaled_rho(model, config) > SMC_RHO { ArgModel::SmcPrime } else { ArgModel::Hudson }
}

/// The process [`arg_model`] picks for a recombining scenario, in words for the engine
/// decision (appended to its reason); empty without recombination or outside the domain.
pub fn describe(scenario: &crate::scenario::Scenario) -> String {
    let (Some(config), Ok(model)) = (scenario.recombination(), ApproxModel::new(scenario)) else {
        return String::new();
    };
    let rho = scaled_rho(&model, config);
    match arg_model(&model, config) {
        ArgModel::Hudson => format!(" (Hudson's ARG: scaled rho = {rho:.4} <= {SMC_RHO})"),
        ArgModel::SmcPrime => format!(" (SMC' along the sequence: scaled rho = {rho:.4} > {SMC_RHO})"),
    }
}

/// Simulates approximate ARGs; owns scratch buffers reused across replicates.
#[derive(Debug, Default)]
pub struct ApproxArgSimulator {
    smc: smc::SmcSimulator,
    lins: Vec<Lineage>,
    free: Vec<u32>,
    active: Vec<Vec<u32>>,
    /// Dormant lineages by the deme they went dormant in (which sets their wake rate).
    dormant: Vec<Vec<u32>>,
    fenwick: Fenwick,
    pieces: Vec<Piece>,
    out: Vec<Seg>,
    cross: Vec<u64>,
    switches: Vec<u64>,
    nodes: Vec<Node>,
    edges: Vec<EdgeRec>,
    roots: Vec<RootRec>,
    split_gaps: Vec<u64>,
    recombination_events: u64,
    tree_crossovers: u64,
    steps: u64,
}

impl ApproxArgSimulator {
    /// A simulator with empty buffers.
    pub fn new() -> Self {
        ApproxArgSimulator::default()
    }

    /// Simulates the ancestry of the model's sample along `config.sites()` sites with the
    /// process [`arg_model`] picks, drawing only from `rng`.
    pub fn simulate<R: Rng + ?Sized>(&mut self, model: &ApproxModel, config: &ArgConfig, rng: &mut R) -> ArgRecords {
        self.simulate_with(model, config, arg_model(model, config), rng)
    }

    /// Simulates with the given limit process.
    pub fn simulate_with<R: Rng + ?Sized>(
        &mut self,
        model: &ApproxModel,
        config: &ArgConfig,
        process: ArgModel,
        rng: &mut R,
    ) -> ArgRecords {
        if process == ArgModel::SmcPrime {
            let pending = sample_entries(model, config.sites(), None, rng);
            return self.smc.simulate(model, config, pending, rng);
        }
        let samples = model.scenario.samples();
        let nodes =
            samples.iter().enumerate().map(|(i, s)| Node { time: s.time, deme: s.deme, sample: Some(i as u32) });
        let start = ArgRecords::empty(samples.len(), config.sites(), nodes.collect());
        let pending = sample_entries(model, config.sites(), None, rng);
        self.run(model, config, start, pending, rng)
    }

    /// Continues the records `start` (nodes, edges, roots and counts made so far) with the
    /// lineages `pending`, until every site has found its MRCA or the horizon is reached.
    pub(crate) fn run<R: Rng + ?Sized>(
        &mut self,
        model: &ApproxModel,
        config: &ArgConfig,
        mut start: ArgRecords,
        mut pending: Vec<Pending>,
        rng: &mut R,
    ) -> ArgRecords {
        let c = Consts::new(model, config, start.n);
        let n_demes = c.lambda.len();
        self.reset(n_demes);
        self.nodes = std::mem::take(&mut start.nodes);
        self.edges = std::mem::take(&mut start.edges);
        self.roots = std::mem::take(&mut start.roots);
        self.split_gaps = std::mem::take(&mut start.split_gaps);
        if !pending.is_sorted_by(|a, b| a.time <= b.time) {
            pending.sort_by(|a, b| a.time.total_cmp(&b.time));
        }
        let mut next = 0;
        let mut t = pending.first().map_or(0.0, |p| p.time);
        loop {
            while next < pending.len() && pending[next].time <= t {
                if pending[next].time > c.horizon {
                    self.stop_segs(&pending[next].segs);
                } else {
                    self.admit(&c, model, &pending[next], rng);
                }
                next += 1;
            }
            let live: usize = self.active.iter().chain(&self.dormant).map(Vec::len).sum();
            if next == pending.len() && live <= 1 {
                break;
            }
            let mig = &model.mig[model.mig_index(t)];
            let mut bp = pending.get(next).map_or(f64::INFINITY, |p| p.time);
            if model.migrates {
                bp = bp.min(mig.end);
            }
            let (mut tc, mut cd) = (f64::INFINITY, 0);
            for d in 0..n_demes {
                let k = self.active[d].len();
                if k >= 2 {
                    let rate = (k * (k - 1) / 2) as f64 / c.scale[d];
                    let x = model.coal_time(d, t, rate, exp1(rng));
                    if x < tc {
                        (tc, cd) = (x, d);
                    }
                }
            }
            let rec = c.lambda_max * c.rate * self.fenwick.total() as f64;
            let mut other = rec;
            for d in 0..n_demes {
                other +=
                    self.active[d].len() as f64 * (mig.out[d] + c.sleep[d]) + self.dormant[d].len() as f64 * c.wake[d];
            }
            let to = if other > 0.0 { t + exp1(rng) / other } else { f64::INFINITY };
            let tn = tc.min(to);
            if tn >= bp {
                if bp > c.horizon {
                    break;
                }
                t = bp;
                continue;
            }
            if tn > c.horizon {
                break;
            }
            t = tn;
            self.steps += 1;
            if tc <= to {
                self.coalesce(&c, cd, t, rng);
            } else {
                let u = other * rng.random::<f64>();
                if u < rec {
                    self.try_recombine(&c, model, t, rng);
                } else {
                    self.switch(&c, model, mig, u - rec, t, rng);
                }
            }
        }
        // Whatever is left stops here: the horizon, or material that can meet nothing more.
        for list in 0..n_demes {
            for k in 0..self.active[list].len() {
                let id = self.active[list][k] as usize;
                let segs = std::mem::take(&mut self.lins[id].segs);
                self.stop_segs(&segs);
                self.lins[id].segs = segs;
            }
            for k in 0..self.dormant[list].len() {
                let id = self.dormant[list][k] as usize;
                let segs = std::mem::take(&mut self.lins[id].segs);
                self.stop_segs(&segs);
                self.lins[id].segs = segs;
            }
        }
        for p in &pending[next..] {
            self.stop_segs(&p.segs);
        }
        ArgRecords {
            n: start.n,
            sites: start.sites,
            nodes: std::mem::take(&mut self.nodes),
            edges: std::mem::take(&mut self.edges),
            roots: std::mem::take(&mut self.roots),
            split_gaps: std::mem::take(&mut self.split_gaps),
            recombination_events: start.recombination_events + self.recombination_events,
            tree_crossovers: start.tree_crossovers + self.tree_crossovers,
            steps: start.steps + self.steps,
        }
    }

    fn reset(&mut self, n_demes: usize) {
        for l in &mut self.lins {
            l.segs.clear();
        }
        self.free.clear();
        self.free.extend((0..self.lins.len() as u32).rev());
        self.active.resize_with(n_demes, Vec::new);
        self.dormant.resize_with(n_demes, Vec::new);
        self.active.iter_mut().chain(&mut self.dormant).for_each(Vec::clear);
        self.fenwick.clear();
        self.recombination_events = 0;
        self.tree_crossovers = 0;
        self.steps = 0;
    }

    fn alloc(&mut self) -> u32 {
        if let Some(id) = self.free.pop() {
            id
        } else {
            self.lins.push(Lineage::default());
            self.fenwick.reserve(self.lins.len());
            (self.lins.len() - 1) as u32
        }
    }

    fn release(&mut self, id: u32) {
        self.lins[id as usize].segs.clear();
        self.free.push(id);
    }

    /// Files an active lineage under its deme, with its crossover weight.
    fn activate(&mut self, c: &Consts, id: u32) {
        let l = &mut self.lins[id as usize];
        l.dormant = false;
        let list = &mut self.active[l.deme];
        l.slot = list.len() as u32;
        list.push(id);
        if c.rate > 0.0 {
            self.fenwick.set(id as usize, c.gaps(&l.segs));
        }
    }

    fn deactivate(&mut self, id: u32) {
        let l = &self.lins[id as usize];
        let (slot, list) = (l.slot as usize, &mut self.active[l.deme]);
        list.swap_remove(slot);
        if let Some(&moved) = list.get(slot) {
            self.lins[moved as usize].slot = slot as u32;
        }
        self.fenwick.set(id as usize, 0);
    }

    fn undormant(&mut self, id: u32) {
        let l = &self.lins[id as usize];
        let (slot, list) = (l.slot as usize, &mut self.dormant[l.from]);
        list.swap_remove(slot);
        if let Some(&moved) = list.get(slot) {
            self.lins[moved as usize].slot = slot as u32;
        }
    }

    /// Brings a lineage's link clock up to time t.
    fn accrue(&mut self, c: &Consts, id: u32, t: f64) {
        let l = &mut self.lins[id as usize];
        if !l.dormant {
            l.clock += (t - l.since) * c.link[l.deme];
        }
        l.since = t;
    }

    /// Each segment becomes a root of its sites (the lineage stops).
    fn stop_segs(&mut self, segs: &[Seg]) {
        for s in segs {
            push_root(&mut self.roots, s.left, s.right, s.node);
        }
    }

    fn admit<R: Rng + ?Sized>(&mut self, c: &Consts, model: &ApproxModel, p: &Pending, rng: &mut R) {
        let id = self.alloc();
        let l = &mut self.lins[id as usize];
        l.segs.extend_from_slice(&p.segs);
        (l.deme, l.from, l.dormant, l.clock, l.since) = (p.deme, p.from, p.dormant, p.clock, p.time);
        if p.dormant {
            let list = &mut self.dormant[p.from];
            l.slot = list.len() as u32;
            list.push(id);
        } else {
            self.activate(c, id);
            if p.link && c.rate > 0.0 {
                self.crossovers(c, model, id, false, p.from, p.time, rng);
            }
        }
    }

    /// Merges two random active lineages of deme d at time t.
    fn coalesce<R: Rng + ?Sized>(&mut self, c: &Consts, d: usize, t: f64, rng: &mut R) {
        let k = self.active[d].len();
        let i = rng.random_range(0..k);
        let mut j = rng.random_range(0..k - 1);
        if j >= i {
            j += 1;
        }
        let (a, b) = (self.active[d][i], self.active[d][j]);
        self.accrue(c, a, t);
        self.accrue(c, b, t);
        self.deactivate(a);
        self.deactivate(b);
        if self.merge(c, a, b, t, d) {
            self.activate(c, a);
        } else {
            self.release(a);
        }
        self.release(b);
    }

    /// Merges the material of lineages a and b into a (clock restarted at 0); where it
    /// overlaps, a new node at time t (rounded, above its children) joins the two. Returns
    /// whether a still carries material.
    fn merge(&mut self, c: &Consts, a: u32, b: u32, t: f64, d: usize) -> bool {
        let sa = std::mem::take(&mut self.lins[a as usize].segs);
        let sb = std::mem::take(&mut self.lins[b as usize].segs);
        let (clock_a, clock_b) = (self.lins[a as usize].clock, self.lins[b as usize].clock);
        self.pieces.clear();
        let (mut i, mut j) = (0usize, 0usize);
        let mut pos = sa[0].left.min(sb[0].left);
        let mut oldest: Option<u64> = None;
        while i < sa.len() || j < sb.len() {
            let a_in = i < sa.len() && sa[i].left <= pos;
            let b_in = j < sb.len() && sb[j].left <= pos;
            if !a_in && !b_in {
                pos = sa.get(i).map_or(u64::MAX, |s| s.left).min(sb.get(j).map_or(u64::MAX, |s| s.left));
                continue;
            }
            let a_end = if a_in { sa[i].right } else { sa.get(i).map_or(u64::MAX, |s| s.left) };
            let b_end = if b_in { sb[j].right } else { sb.get(j).map_or(u64::MAX, |s| s.left) };
            let y = a_end.min(b_end);
            self.pieces.push(Piece { x: pos, y, a: a_in.then_some(i as u32), b: b_in.then_some(j as u32) });
            if a_in && b_in {
                let older = self.nodes[sa[i].node as usize].time.max(self.nodes[sb[j].node as usize].time);
                oldest = Some(oldest.map_or(older, |o| o.max(older)));
            }
            if a_in && y == sa[i].right {
                i += 1;
            }
            if b_in && y == sb[j].right {
                j += 1;
            }
            pos = y;
        }
        let parent = oldest.map(|o| {
            let time = (t.round().max(0.0) as u64).max(o + 1);
            self.nodes.push(Node { time, deme: d, sample: None });
            (self.nodes.len() as u32 - 1, time)
        });
        let mut out = std::mem::take(&mut self.out);
        out.clear();
        for k in 0..self.pieces.len() {
            let p = self.pieces[k];
            match (p.a, p.b) {
                (Some(i), None) => {
                    let s = sa[i as usize];
                    push_seg(&mut out, Seg { left: p.x, right: p.y, base: s.base - clock_a, ..s });
                }
                (None, Some(j)) => {
                    let s = sb[j as usize];
                    push_seg(&mut out, Seg { left: p.x, right: p.y, base: s.base - clock_b, ..s });
                }
                (Some(i), Some(j)) => {
                    let (u, time) = parent.expect("an overlap makes a node");
                    let (s, r) = (sa[i as usize], sb[j as usize]);
                    for (seg, clock) in [(s, clock_a), (r, clock_b)] {
                        let len = time - self.nodes[seg.node as usize].time;
                        let jumps = ((clock - seg.base).round().max(1.0) as u64).min(len);
                        push_edge(
                            &mut self.edges,
                            EdgeRec { left: p.x, right: p.y, parent: u, child: seg.node, jumps },
                        );
                    }
                    let count = s.count + r.count;
                    if count == c.n {
                        push_root(&mut self.roots, p.x, p.y, u);
                    } else {
                        push_seg(&mut out, Seg { left: p.x, right: p.y, node: u, count, base: 0.0 });
                    }
                }
                (None, None) => unreachable!("pieces cover material"),
            }
        }
        let mut sa = sa;
        sa.clear();
        std::mem::swap(&mut out, &mut sa);
        self.out = out;
        let mut sb = sb;
        sb.clear();
        self.lins[b as usize].segs = sb;
        let l = &mut self.lins[a as usize];
        (l.clock, l.since, l.deme, l.dormant) = (0.0, t, d, false);
        l.segs = sa;
        !l.segs.is_empty()
    }

    /// A candidate reproduction with crossovers at the linear rate, thinned to the exact one.
    fn try_recombine<R: Rng + ?Sized>(&mut self, c: &Consts, model: &ApproxModel, t: f64, rng: &mut R) {
        let id = self.fenwick.find(rng.random_range(0..self.fenwick.total())) as u32;
        let g = self.fenwick.get(id as usize) as f64;
        let x = c.rate * g;
        let deme = self.lins[id as usize].deme;
        let keep = c.lambda[deme] / c.lambda_max * (-(-x).exp_m1() / x);
        if rng.random::<f64>() >= keep {
            return;
        }
        self.accrue(c, id, t);
        self.crossovers(c, model, id, true, deme, t, rng);
    }

    /// One reproduction of lineage `id` at time t: crossovers over its span (at least one when
    /// `conditioned`), and the material split between two parents; the second parent's
    /// lineage draws its deme from `from`'s row.
    #[allow(clippy::too_many_arguments)]
    fn crossovers<R: Rng + ?Sized>(
        &mut self,
        c: &Consts,
        model: &ApproxModel,
        id: u32,
        conditioned: bool,
        from: usize,
        t: f64,
        rng: &mut R,
    ) {
        let segs = &self.lins[id as usize].segs;
        let gaps = c.gaps(segs);
        if gaps == 0 {
            return;
        }
        let (lo, hi) = (segs[0].left, segs[segs.len() - 1].right);
        self.cross.clear();
        // Poisson process of rate r on [0, gaps): gap lo + 1 + floor(x). Conditioned on a
        // point, the first has the exponential law truncated to [0, gaps).
        let mut x = if conditioned {
            let p = -(-c.rate * gaps as f64).exp_m1();
            (-(-rng.random::<f64>() * p).ln_1p() / c.rate).min(gaps as f64 * (1.0 - f64::EPSILON))
        } else {
            exp1(rng) / c.rate
        };
        while x < gaps as f64 {
            self.cross.push(lo + 1 + (x as u64).min(gaps - 1));
            x += exp1(rng) / c.rate;
        }
        if self.cross.is_empty() {
            return;
        }
        self.tree_crossovers +=
            crate::engine::arg::switches_of(segs, &self.cross, hi, &mut self.switches, &mut self.split_gaps);
        if self.switches.is_empty() {
            return;
        }
        let b = self.alloc();
        let segs = std::mem::take(&mut self.lins[id as usize].segs);
        let mut a_part = std::mem::take(&mut self.out);
        let mut b_part = std::mem::take(&mut self.lins[b as usize].segs);
        a_part.clear();
        crate::engine::arg::split_at_switches(&segs, &self.switches, &mut a_part, &mut b_part);
        let mut segs = segs;
        segs.clear();
        self.out = segs;
        if b_part.is_empty() {
            // The switches cancel in pairs inside holes of the material.
            self.lins[id as usize].segs = a_part;
            self.lins[b as usize].segs = b_part;
            self.free.push(b);
            return;
        }
        self.recombination_events += 1;
        self.lins[id as usize].segs = a_part;
        if c.rate > 0.0 && !self.lins[id as usize].dormant {
            self.fenwick.set(id as usize, c.gaps(&self.lins[id as usize].segs));
        }
        let (clock, deme) = (self.lins[id as usize].clock, model.link_deme(from, t, rng));
        let l = &mut self.lins[b as usize];
        l.segs = b_part;
        (l.deme, l.from, l.clock, l.since) = (deme, deme, clock, t);
        self.activate(c, b);
    }

    /// Carries out the waking, migration or sleeping event selected by `u` in [0, total).
    fn switch<R: Rng + ?Sized>(
        &mut self,
        c: &Consts,
        model: &ApproxModel,
        mig: &MigEpoch,
        mut u: f64,
        t: f64,
        rng: &mut R,
    ) {
        let n_demes = c.lambda.len();
        for d in 0..n_demes {
            let total = self.dormant[d].len() as f64 * c.wake[d];
            if u < total {
                let k = self.dormant[d].len();
                let id = self.dormant[d][((u / c.wake[d]) as usize).min(k - 1)];
                self.undormant(id);
                let l = &mut self.lins[id as usize];
                l.since = t;
                let from = l.from;
                self.activate(c, id);
                // The long look-back ends in a reproduction: its crossovers fall now.
                if c.rate > 0.0 {
                    self.crossovers(c, model, id, false, from, t, rng);
                }
                return;
            }
            u -= total;
        }
        for d in 0..n_demes {
            let k = self.active[d].len();
            if k == 0 {
                continue;
            }
            let per = mig.out[d] + c.sleep[d];
            let total = k as f64 * per;
            if per <= 0.0 {
                continue;
            }
            if u >= total && d + 1 < n_demes {
                u -= total;
                continue;
            }
            let which = ((u / per) as usize).min(k - 1);
            let r = u - which as f64 * per;
            let id = self.active[d][which];
            self.accrue(c, id, t);
            self.deactivate(id);
            if r < mig.out[d] {
                let row = &mig.rows[d];
                let to = row.iter().find(|&&(x, _)| r < x).or(row.last()).map_or(d, |&(_, e)| e);
                let l = &mut self.lins[id as usize];
                (l.deme, l.from) = (to, to);
                self.activate(c, id);
            } else {
                // One long link: its destination is drawn now, with the full row of M.
                let to = model.link_deme(d, t, rng);
                let l = &mut self.lins[id as usize];
                l.clock += 1.0;
                (l.deme, l.from, l.dormant) = (to, d, true);
                let list = &mut self.dormant[d];
                l.slot = list.len() as u32;
                list.push(id);
            }
            return;
        }
    }
}

/// Whether the sorted, disjoint segments carry `site`.
/// Appends a segment, joining it to the last one when it continues it with equal content.
fn push_seg(out: &mut Vec<Seg>, s: Seg) {
    if let Some(last) = out.last_mut()
        && last.right == s.left
        && last.node == s.node
        && last.count == s.count
        && (last.base - s.base).abs() <= 1e-9 * last.base.abs().max(1.0)
    {
        last.right = s.right;
        return;
    }
    out.push(s);
}

/// Appends an edge record, joining it to one of the last two when it continues it.
fn push_edge(edges: &mut Vec<EdgeRec>, e: EdgeRec) {
    for last in edges.iter_mut().rev().take(2) {
        if last.right == e.left && last.parent == e.parent && last.child == e.child && last.jumps == e.jumps {
            last.right = e.right;
            return;
        }
    }
    edges.push(e);
}

fn push_root(roots: &mut Vec<RootRec>, left: u64, right: u64, node: u32) {
    if let Some(last) = roots.last_mut()
        && last.right == left
        && last.node == node
    {
        last.right = right;
        return;
    }
    roots.push(RootRec { left, right, node });
}

/// Entry of each sample (or of the samples older than `older_than`), drawing seed ages where
/// needed, as [`crate::engine::approx`] enters them; segments carry all `sites` sites.
pub(crate) fn sample_entries<R: Rng + ?Sized>(
    model: &ApproxModel,
    sites: u64,
    older_than: Option<u64>,
    rng: &mut R,
) -> Vec<Pending> {
    let scenario = model.scenario;
    let mut out = Vec::with_capacity(scenario.samples().len());
    for (i, s) in scenario.samples().iter().enumerate() {
        if older_than.is_some_and(|t| s.time <= t) {
            continue;
        }
        let t = s.time as f64;
        let segs = vec![Seg { left: 0, right: sites, node: i as u32, count: 1, base: 0.0 }];
        let base = Pending { time: t, segs, deme: s.deme, from: s.deme, dormant: false, clock: 0.0, link: false };
        let entry = match (s.kind, model.demes()[s.deme]) {
            (SampleKind::Population, _) => base,
            (SampleKind::Seedbank, DemeModel::Kingman { .. }) => {
                let age = scenario.seed_age(s.deme, s.time).map_or(0, |a| a.sample(rng));
                let to = model.link_deme(s.deme, t, rng);
                Pending { time: t + age as f64 + 1.0, deme: to, clock: 1.0, link: true, ..base }
            }
            (SampleKind::Seedbank, DemeModel::SeedBank { dormant_seed, .. }) => {
                let to = model.link_deme(s.deme, t, rng);
                if rng.random::<f64>() < dormant_seed {
                    Pending { deme: to, dormant: true, clock: 1.0, ..base }
                } else {
                    Pending { time: t + 1.0, deme: to, clock: 1.0, link: true, ..base }
                }
            }
        };
        out.push(entry);
    }
    out
}

#[cfg(test)]
mod tests;
