//! Recombination within a locus: the exact discrete ancestral recombination graph.
//!
//! The model is the engine's ([`crate::engine`]) with a sequence of L sites (0..L-1, L-1
//! gaps between them). A new individual of deme d at time t draws R from its deme's dormancy
//! law; its sequence is a mosaic of **two** parents drawn independently (each with its own
//! migration draw and its own uniform choice among the N_e(t + R) individuals of generation
//! t + R; the same R for both, since the seed was made in one generation). Crossovers fall as
//! a Poisson process along the sequence at rate r per gap; the segments alternate between
//! the two parents, starting from a random one. Dormant generations add no crossovers.
//!
//! ```text
//! gap g lies between sites g-1 and g (g = 1..L-1); crossovers in gap g ~ Poisson(r), independent
//! sites g-1 and g come from different parents  <=>  an odd number of crossovers in gap g
//! ```
//!
//! Backward, every lineage is one individual carrying ancestral material: a sorted list of
//! disjoint site intervals [left, right), each with the local-tree node it currently sits
//! above, the reproduction events (jumps) since that node, and the number of samples below
//! (the segment bookkeeping of ancestral recombination graph algorithms; Hudson 1983 for the
//! coalescent version). At each reproduction the material is split between the two parents;
//! lineages landing on one (deme, generation) are seated exactly as in the engine (each is the
//! same individual as each of the m occupied ones with probability 1/N, multiple mergers and
//! sampled ancestors included), and where the material of several lineages seated on one
//! individual overlaps, the overlap coalesces into a new local-tree node. An interval whose
//! node is ancestral to all n samples has found its most recent common ancestor and is
//! dropped. Lineages stop at founders and beyond the horizon (a forest, per local tree).
//!
//! Crossovers are drawn only over the gaps `left_min + 1 ..= min(right_max, L - 1)` of a
//! lineage's material: the parent of the first carried site is uniform between the two
//! whatever happened further left, and the two parents are exchangeable, so neither the
//! crossovers left of the material nor a coin for the starting parent change the law.
//! Crossovers right of the last carried site cannot split the material; the one gap just
//! right of it is drawn anyway so that [`Arg::tree_crossovers`] counts every crossover on the
//! marginal tree of the left site of a gap. With r = 0 no extra random number is drawn and the
//! engine consumes the stream exactly as [`crate::engine::Simulator`] does, so the single local
//! tree is the engine's genealogy, replicate by replicate.
//!
//! ```
//! use seedline::engine::arg::{ArgConfig, ArgSimulator};
//! use seedline::{batch, scenario::Scenario};
//! let yaml = "demes: [{name: pond, size: 200, dormancy: {law: geometric, mean: 2}}]\n\
//!             samples: [{deme: pond, count: 4}]\n";
//! let scenario = Scenario::from_yaml_str(yaml, "inline").unwrap();
//! // rho = 2 N r (L - 1) = 2 * 200 * 1e-4 * 99 ~ 4 (per unit of N generations, before dormancy).
//! let config = ArgConfig::new(100, 1e-4).unwrap();
//! let mut rng = batch::replicate_rng(&batch::master_key(scenario.seed()), 0);
//! let arg = ArgSimulator::new().simulate(&scenario, &config, &mut rng);
//! assert!(arg.breakpoints() < arg.trees().len());
//! assert!(arg.trees().iter().all(|t| t.genealogy().is_tree()));
//! ```

mod trees;

pub use crate::genealogy::LocalTree;

pub use crate::scenario::{ArgConfig, ArgError};

use super::queue::{Keyed, Queue};
use crate::dormancy::Dormancy;
use crate::genealogy::Node;
use crate::scenario::{SampleKind, Scenario};
use rand::{Rng, RngExt};
use rand_distr::Exp1;

/// The ancestry of a sample along a sequence: its local trees and recombination counts.
#[derive(Debug, Clone)]
pub struct Arg {
    sites: u64,
    n_samples: usize,
    trees: Vec<LocalTree>,
    recombination_events: u64,
    tree_crossovers: u64,
    breakpoints: usize,
    splits: Vec<(u64, u32)>,
    steps: u64,
    n_nodes: usize,
}

impl Arg {
    /// Number of sites L.
    pub fn sites(&self) -> u64 {
        self.sites
    }

    /// Number of sampled individuals (every local tree has them all, nodes `0..n`).
    pub fn n_samples(&self) -> usize {
        self.n_samples
    }

    /// The local trees, left to right; they tile `[0, L)`. Adjacent trees always differ
    /// (in topology, node times or jumps on some edge): equal neighbours are one interval.
    /// Only changes of topology or node times are [`Arg::breakpoints`].
    pub fn trees(&self) -> &[LocalTree] {
        &self.trees
    }

    /// The local tree of `site` (panics when `site >= L`).
    pub fn tree_at(&self, site: u64) -> &LocalTree {
        assert!(site < self.sites, "site {site} outside the sequence of {} sites", self.sites);
        let i = self.trees.partition_point(|t| t.right() <= site);
        &self.trees[i]
    }

    /// Recombination breakpoints: the positions where the genealogy a user can see (topology
    /// or node times) changes between adjacent sites. Adjacent local trees that differ only
    /// in the jumps of some edge (the same genealogy through other dormant periods) are not
    /// a breakpoint, nor are crossovers whose two sides end up in equal trees; so
    /// `breakpoints() <= trees().len() - 1`, equal without dormancy.
    ///
    /// In the coalescent limit without dormancy, with rho = 2 N r (L - 1), every crossover on
    /// the marginal trees (about rho a_n, [`Arg::tree_crossovers`]) changes the tree unless its
    /// detached lineage re-joins the branch it left (the SMC' picture of Marjoram & Wall 2006):
    /// ```text
    /// E[breakpoints] = rho (a_n - 2 (n - 1) / (3 n))       (n = 2: 2 rho / 3)
    /// ```
    /// With dormancy of finite mean the limit is the same with rho_eff = rho E[R] / d (d the
    /// gcd of the support of R): crossovers happen only at reproduction events, which a
    /// lineage makes at rate 1/E[R] per generation, while time runs E[R]² / d slower (KKL).
    pub fn breakpoints(&self) -> usize {
        self.breakpoints
    }

    /// Crossover events in the ancestry: reproduction events whose ancestral material was
    /// split between the two parents (recombination nodes of the graph).
    pub fn recombination_events(&self) -> u64 {
        self.recombination_events
    }

    /// Crossovers on the marginal trees: crossovers in gap g at an individual carrying site
    /// g - 1 before its most recent common ancestor, summed over gaps (any parity).
    ///
    /// ```text
    /// E[tree_crossovers] = r * sum_g E[J(g-1)] = r (L - 1) E[J]
    /// ```
    /// where J is the number of reproduction events (jumps) on the genealogy of one site, whose
    /// law is the engine's. This is the quantity of Hudson & Kaplan (1985): rho a_n in the
    /// coalescent limit without dormancy. Reproductions whose parents would lie beyond the
    /// horizon are not drawn (the lineage stops there), so with a finite horizon J counts the
    /// jumps that stay inside it.
    pub fn tree_crossovers(&self) -> u64 {
        self.tree_crossovers
    }

    /// Gaps where adjacent sites were separated: (gap g, number of reproduction events at
    /// individuals carrying both sites g - 1 and g whose two sites went to different
    /// parents), sorted by gap. A local tree can only change at such a gap.
    pub fn splits(&self) -> &[(u64, u32)] {
        &self.splits
    }

    /// Lineage steps (reproduction events drawn) taken by the engine.
    pub fn steps(&self) -> u64 {
        self.steps
    }

    /// Nodes of the graph: samples plus every coalescence node made.
    pub fn n_nodes(&self) -> usize {
        self.n_nodes
    }

    /// Writes every local tree as Newick, as [`crate::genealogy::Genealogy::write_newick`]
    /// does, with the sites of the tree named in the leading comment:
    /// `[replicate 3 sites 0-41](...);`, and `[replicate 3 sites 0-41 tree 1 of 2]...` for a
    /// forest. Site ranges are inclusive.
    pub fn write_newick(&self, labels: &[String], replicate: u64, out: &mut String) {
        self.write_newick_tagged(labels, &format!("replicate {replicate}"), out);
    }

    /// As [`Arg::write_newick`], with `tag` (e.g. `replicate 3 locus 2`) before the sites.
    pub fn write_newick_tagged(&self, labels: &[String], tag: &str, out: &mut String) {
        for t in &self.trees {
            let tree_tag = format!("{tag} sites {}-{}", t.left(), t.right() - 1);
            t.genealogy().write_newick_tagged(labels, &tree_tag, out);
        }
    }
}

impl Arg {
    /// An ARG from the records of another engine (nodes, edge and root pieces over the sites
    /// where they hold, gaps where adjacent sites were separated), cut into local trees by the
    /// same sweep as this engine's.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn from_records(
        n_samples: usize,
        sites: u64,
        nodes: &[Node],
        mut edges: Vec<EdgeRec>,
        mut roots: Vec<RootRec>,
        mut split_gaps: Vec<u64>,
        (recombination_events, tree_crossovers, steps): (u64, u64, u64),
    ) -> Arg {
        split_gaps.sort_unstable();
        let mut splits: Vec<(u64, u32)> = Vec::new();
        for &g in &split_gaps {
            match splits.last_mut() {
                Some((h, c)) if *h == g => *c += 1,
                _ => splits.push((g, 1)),
            }
        }
        let (trees, breakpoints) = trees::build(n_samples, sites, nodes, &mut edges, &mut roots);
        Arg {
            sites,
            n_samples,
            trees,
            recombination_events,
            tree_crossovers,
            breakpoints,
            splits,
            steps,
            n_nodes: nodes.len(),
        }
    }
}

/// One interval of ancestral material carried by a lineage.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Seg {
    pub(crate) left: u64,
    pub(crate) right: u64,
    /// Local-tree node at the bottom of the lineage's edge for these sites.
    pub(crate) node: u32,
    /// Jumps since `node`, the one that landed here included.
    pub(crate) jumps: u64,
    /// Samples below `node`.
    pub(crate) count: u32,
}

/// The ancestry made by the exact engine up to a switch time (the hybrid engine's recent
/// part): records so far, and the lineages whose next generation lies beyond the switch.
#[derive(Debug)]
pub(crate) struct Handover {
    pub(crate) nodes: Vec<Node>,
    pub(crate) edges: Vec<EdgeRec>,
    pub(crate) roots: Vec<RootRec>,
    pub(crate) split_gaps: Vec<u64>,
    pub(crate) recombination_events: u64,
    pub(crate) tree_crossovers: u64,
    pub(crate) steps: u64,
    /// (generation, deme, material) of every lineage handed over, in the order handed.
    pub(crate) lineages: Vec<(u64, usize, Vec<Seg>)>,
}

/// A lineage waiting at (time, deme).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Entry {
    /// time * n_demes + deme.
    key: u64,
    /// Node of the first segment (the engine's tie-break at r = 0).
    node: u32,
    /// Slab index of the lineage's material.
    id: u32,
    /// A sampled individual (an occupied seat of its generation).
    sample: bool,
}

impl Keyed for Entry {
    #[inline(always)]
    fn key(&self) -> u64 {
        self.key
    }
}

/// A piece of a local tree: an edge over the sites [left, right).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct EdgeRec {
    pub left: u64,
    pub right: u64,
    pub parent: u32,
    pub child: u32,
    pub jumps: u64,
}

/// A root of the local trees over [left, right): an MRCA or a lineage that stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct RootRec {
    pub left: u64,
    pub right: u64,
    pub node: u32,
}

/// Simulates ancestral recombination graphs; owns scratch buffers reused across replicates.
#[derive(Debug, Default)]
pub struct ArgSimulator {
    queue: Queue<Entry>,
    slab: Vec<Vec<Seg>>,
    free: Vec<u32>,
    group: Vec<Entry>,
    seat: Vec<u32>,
    order: Vec<u32>,
    nodes: Vec<Node>,
    edges: Vec<EdgeRec>,
    roots: Vec<RootRec>,
    split_gaps: Vec<u64>,
    cross: Vec<u64>,
    switches: Vec<u64>,
    pool: Vec<(Seg, bool)>,
    events: Vec<(u64, bool, u32)>,
    active: Vec<u32>,
    made: Vec<(Vec<u32>, u32)>,
    recombination_events: u64,
    tree_crossovers: u64,
    steps: u64,
    /// Lineages handed over at the switch: (slab id, generation, deme).
    handed: Vec<(u32, u64, usize)>,
}

impl ArgSimulator {
    /// A simulator with empty buffers.
    pub fn new() -> Self {
        ArgSimulator::default()
    }

    /// Simulates the ancestry of the scenario's sample along `config.sites()` sites, drawing
    /// only from `rng`.
    pub fn simulate<R: Rng + ?Sized>(&mut self, scenario: &Scenario, config: &ArgConfig, rng: &mut R) -> Arg {
        let model = Model::new(scenario, config, None);
        let n = scenario.samples().len();
        self.run(&model, rng);
        self.split_gaps.sort_unstable();
        let mut splits: Vec<(u64, u32)> = Vec::new();
        for &g in &self.split_gaps {
            match splits.last_mut() {
                Some((h, c)) if *h == g => *c += 1,
                _ => splits.push((g, 1)),
            }
        }
        let (trees, breakpoints) = trees::build(n, model.sites, &self.nodes, &mut self.edges, &mut self.roots);
        Arg {
            sites: model.sites,
            n_samples: n,
            trees,
            recombination_events: self.recombination_events,
            tree_crossovers: self.tree_crossovers,
            breakpoints,
            splits,
            steps: self.steps,
            n_nodes: self.nodes.len(),
        }
    }

    /// Runs the exact engine up to generation `switch` (below the horizon): samples older
    /// than it, and lineages whose parents lie beyond it, are handed over instead of being
    /// simulated. A lineage left alone is handed over at once: nothing in the exact part can
    /// meet it. The crossovers of the reproduction that crosses the switch are drawn here.
    pub(crate) fn simulate_until<R: Rng + ?Sized>(
        &mut self,
        scenario: &Scenario,
        config: &ArgConfig,
        switch: u64,
        rng: &mut R,
    ) -> Handover {
        let model = Model::new(scenario, config, Some(switch));
        self.run(&model, rng);
        let lineages = std::mem::take(&mut self.handed)
            .into_iter()
            .map(|(id, time, deme)| {
                let segs = std::mem::take(&mut self.slab[id as usize]);
                self.free.push(id);
                (time, deme, segs)
            })
            .collect();
        Handover {
            nodes: std::mem::take(&mut self.nodes),
            edges: std::mem::take(&mut self.edges),
            roots: std::mem::take(&mut self.roots),
            split_gaps: std::mem::take(&mut self.split_gaps),
            recombination_events: self.recombination_events,
            tree_crossovers: self.tree_crossovers,
            steps: self.steps,
            lineages,
        }
    }

    fn run<R: Rng + ?Sized>(&mut self, model: &Model, rng: &mut R) {
        let scenario = model.scenario;
        let samples = scenario.samples();
        let n = samples.len();
        self.reset();
        let full = |i: usize| Seg { left: 0, right: model.sites, node: i as u32, jumps: 0, count: 1 };
        for (i, s) in samples.iter().enumerate() {
            self.nodes.push(Node { time: s.time, deme: s.deme, sample: Some(i as u32) });
        }
        for (i, s) in samples.iter().enumerate() {
            if n == 1 {
                self.roots.push(RootRec { left: 0, right: model.sites, node: 0 });
                break;
            }
            if model.handoff && s.time > model.horizon {
                continue;
            }
            let id = self.alloc();
            self.slab[id as usize].push(full(i));
            match s.kind {
                SampleKind::Population => {
                    self.queue.push(Entry { key: model.key(s.time, s.deme), node: i as u32, id, sample: true })
                }
                SampleKind::Seedbank => {
                    // The seed was made a + 1 generations before sampling, as in the engine.
                    let age = scenario.seed_age(s.deme, s.time).map_or(0, |a| a.sample(rng));
                    self.reproduce(model, id, s.time, s.deme, s.time.saturating_add(age + 1), rng);
                }
            }
        }
        // As in the engine: lineages that can never coalesce again (no migration path, or no
        // shared sites with any lineage they could meet) stop at once instead of walking to
        // the horizon; checked at the start, after groups and when a migration epoch ends.
        // The hybrid's exact part hands its lineages over instead (older samples may join).
        let mut check_at = if model.reach && !model.handoff { 0 } else { u64::MAX };
        while let Some(&top) = self.queue.peek() {
            let (time, deme) = model.split(top.key);
            if self.queue.len() == 1 {
                self.queue.pop();
                if model.handoff {
                    self.handed.push((top.id, time, deme));
                } else {
                    // Nothing left to meet: the material can never coalesce again.
                    self.stop(top.id);
                }
                break;
            }
            if time >= check_at {
                if self.all_apart(model) {
                    let ids: Vec<u32> = self.queue.drain().map(|e| e.id).collect();
                    for id in ids {
                        self.stop(id);
                    }
                    break;
                }
                check_at = scenario.migration().next_epoch_start(time);
            }
            if !top.sample && !self.queue.top_key_shared() {
                self.queue.pop();
                self.step(model, top.id, time, deme, rng);
                continue;
            }
            self.queue.pop_group(&mut self.group);
            self.seat_group(model, n as u32, time, deme, rng);
            if model.reach && !model.handoff {
                check_at = 0;
            }
        }
    }

    fn reset(&mut self) {
        self.queue.clear();
        for s in &mut self.slab {
            s.clear();
        }
        self.free.clear();
        self.free.extend((0..self.slab.len() as u32).rev());
        self.nodes.clear();
        self.edges.clear();
        self.roots.clear();
        self.split_gaps.clear();
        self.handed.clear();
        self.recombination_events = 0;
        self.tree_crossovers = 0;
        self.steps = 0;
    }

    fn alloc(&mut self) -> u32 {
        if let Some(id) = self.free.pop() {
            id
        } else {
            self.slab.push(Vec::new());
            (self.slab.len() - 1) as u32
        }
    }

    fn release(&mut self, id: u32) {
        self.slab[id as usize].clear();
        self.free.push(id);
    }

    /// Whether no two queued lineages that may meet share a site: then no site
    /// can coalesce again (a merged lineage's sites are the union of its parts', and it can
    /// only go where each part could). Only asked with few lineages left.
    fn all_apart(&self, model: &Model) -> bool {
        const MAX_CHECKED: usize = 64;
        if self.queue.len() > MAX_CHECKED {
            return false;
        }
        let migration = model.scenario.migration();
        let live: Vec<&Entry> = self.queue.iter().collect();
        let overlap = |a: u32, b: u32| {
            self.slab[a as usize]
                .iter()
                .any(|x| self.slab[b as usize].iter().any(|y| x.left < y.right && y.left < x.right))
        };
        for (i, a) in live.iter().enumerate() {
            let (ta, da) = model.split(a.key);
            for b in &live[i + 1..] {
                let (tb, db) = model.split(b.key);
                if migration.may_meet(da, ta, db, tb) && overlap(a.id, b.id) {
                    return false;
                }
            }
        }
        true
    }

    /// The lineage stops (founder, horizon, or alone): each segment is a root of its sites.
    fn stop(&mut self, id: u32) {
        for s in &self.slab[id as usize] {
            self.roots.push(RootRec { left: s.left, right: s.right, node: s.node });
        }
        self.release(id);
    }

    /// Seats every lineage of one (deme, generation), exactly as the engine, and merges the
    /// material of lineages seated on one individual.
    fn seat_group<R: Rng + ?Sized>(&mut self, model: &Model, n: u32, time: u64, deme: usize, rng: &mut R) {
        let size = model.size(deme, time);
        self.group.sort_unstable_by_key(|e| (!e.sample, e.node, e.id));
        super::exact::seat_lineages(self.group.iter().map(|e| e.sample), size, &mut self.seat, &mut self.order, rng);
        let mut i = 0;
        while i < self.order.len() {
            let s = self.seat[self.order[i] as usize];
            let mut j = i + 1;
            while j < self.order.len() && self.seat[self.order[j] as usize] == s {
                j += 1;
            }
            let head = self.group[self.order[i] as usize];
            let id = if j - i == 1 { Some(head.id) } else { self.merge(i, j, n, time, deme) };
            if let Some(id) = id {
                self.step(model, id, time, deme, rng);
            }
            i = j;
        }
    }

    /// Merges the material of `group[order[i..j]]` (seated on one individual at `time`) into
    /// one lineage; overlaps coalesce. Returns the lineage, or `None` when all its material
    /// found its MRCA.
    fn merge(&mut self, i: usize, j: usize, n: u32, time: u64, deme: usize) -> Option<u32> {
        self.pool.clear();
        self.events.clear();
        for k in i..j {
            let e = self.group[self.order[k] as usize];
            for s in &self.slab[e.id as usize] {
                let p = self.pool.len() as u32;
                self.pool.push((*s, e.sample));
                // Ends sort before starts at one position (false < true).
                self.events.push((s.left, true, p));
                self.events.push((s.right, false, p));
            }
        }
        self.events.sort_unstable();
        let keep = self.group[self.order[i] as usize].id;
        for k in i..j {
            let id = self.group[self.order[k] as usize].id;
            if id != keep {
                self.release(id);
            }
        }
        self.slab[keep as usize].clear();
        let mut out = std::mem::take(&mut self.slab[keep as usize]);
        self.made.clear();
        self.active.clear();
        let mut prev = 0u64;
        let mut e = 0;
        while e < self.events.len() {
            let pos = self.events[e].0;
            if pos > prev && !self.active.is_empty() {
                self.coalesce(prev, pos, n, time, deme, &mut out);
            }
            while e < self.events.len() && self.events[e].0 == pos {
                let (_, start, p) = self.events[e];
                if start {
                    self.active.push(p);
                } else {
                    let at = self.active.iter().position(|&q| q == p).expect("segment ends after it starts");
                    self.active.swap_remove(at);
                }
                e += 1;
            }
            prev = pos;
        }
        compress(&mut out);
        let empty = out.is_empty();
        self.slab[keep as usize] = out;
        if empty {
            self.release(keep);
            None
        } else {
            Some(keep)
        }
    }

    /// The sites [x, y), covered by the segments in `active`, at one individual.
    fn coalesce(&mut self, x: u64, y: u64, n: u32, time: u64, deme: usize, out: &mut Vec<Seg>) {
        if self.active.len() == 1 {
            let (s, _) = self.pool[self.active[0] as usize];
            out.push(Seg { left: x, right: y, ..s });
            return;
        }
        let sample = self.active.iter().find(|&&p| self.pool[p as usize].1).map(|&p| self.pool[p as usize].0.node);
        let parent = match sample {
            Some(s) => s,
            None => {
                let mut kids: Vec<u32> = self.active.iter().map(|&p| self.pool[p as usize].0.node).collect();
                kids.sort_unstable();
                match self.made.iter().find(|(k, _)| *k == kids) {
                    Some(&(_, id)) => id,
                    None => {
                        let id = self.nodes.len() as u32;
                        self.nodes.push(Node { time, deme, sample: None });
                        self.made.push((kids, id));
                        id
                    }
                }
            }
        };
        let mut count = 0;
        for &p in &self.active {
            let (s, _) = self.pool[p as usize];
            count += s.count;
            if s.node != parent {
                self.edges.push(EdgeRec { left: x, right: y, parent, child: s.node, jumps: s.jumps });
            }
        }
        if count == n {
            self.roots.push(RootRec { left: x, right: y, node: parent });
        } else {
            out.push(Seg { left: x, right: y, node: parent, jumps: 0, count });
        }
    }

    /// The individual carrying lineage `id` at (deme, time) draws its look-back and parents.
    fn step<R: Rng + ?Sized>(&mut self, model: &Model, id: u32, time: u64, deme: usize, rng: &mut R) {
        let Some(r) = model.dormancy[deme].sample_at(time, rng) else {
            self.stop(id);
            return;
        };
        self.reproduce(model, id, time, deme, time.saturating_add(r), rng);
    }

    /// Reproduction of the individual (deme, time) from two parents at generation `to_time`:
    /// crossovers split the material, each part draws its parent's deme and is queued.
    fn reproduce<R: Rng + ?Sized>(
        &mut self,
        model: &Model,
        id: u32,
        time: u64,
        deme: usize,
        to_time: u64,
        rng: &mut R,
    ) {
        self.steps += 1;
        let mut other = None;
        if model.rate > 0.0 && (to_time <= model.horizon || model.handoff) {
            other = self.crossovers(model, id, rng);
        }
        for part in [Some(id), other].into_iter().flatten() {
            let to = model.parent_deme(deme, time, rng);
            if to_time > model.horizon && !model.handoff {
                self.stop(part);
                continue;
            }
            let segs = &mut self.slab[part as usize];
            for s in segs.iter_mut() {
                s.jumps += 1;
            }
            if to_time > model.horizon {
                self.handed.push((part, to_time, to));
                continue;
            }
            let node = segs[0].node;
            self.queue.push(Entry { key: model.key(to_time, to), node, id: part, sample: false });
        }
    }

    /// Draws the crossovers of one reproduction over the lineage's material and splits it;
    /// returns the lineage of the second parent when both parents received material.
    fn crossovers<R: Rng + ?Sized>(&mut self, model: &Model, id: u32, rng: &mut R) -> Option<u32> {
        let segs = &self.slab[id as usize];
        let lo = segs[0].left;
        let hi = segs[segs.len() - 1].right;
        let gaps = hi.min(model.sites - 1) - lo;
        if gaps == 0 {
            return None;
        }
        // Poisson process of rate r on [0, gaps): exponential spacings; gap lo + 1 + floor(x).
        self.cross.clear();
        let mut x = 0.0f64;
        loop {
            x += rng.sample::<f64, _>(Exp1) / model.rate;
            if x >= gaps as f64 {
                break;
            }
            self.cross.push(lo + 1 + (x as u64).min(gaps - 1));
        }
        if self.cross.is_empty() {
            return None;
        }
        self.tree_crossovers +=
            crate::engine::arg::switches_of(segs, &self.cross, hi, &mut self.switches, &mut self.split_gaps);
        if self.switches.is_empty() {
            return None;
        }
        let b = self.alloc();
        let mut a_part = Vec::new();
        let mut b_part = std::mem::take(&mut self.slab[b as usize]);
        let segs = std::mem::take(&mut self.slab[id as usize]);
        split_at_switches(&segs, &self.switches, &mut a_part, &mut b_part);
        // The first carried site goes to parent A; parent B may still get nothing when the
        // switches cancel in pairs inside holes of the material.
        let split = !b_part.is_empty();
        self.slab[id as usize] = a_part;
        self.slab[b as usize] = b_part;
        if split {
            self.recombination_events += 1;
            Some(b)
        } else {
            self.release(b);
            None
        }
    }
}

/// Whether the sorted, disjoint segments carry `site`.
fn carries<S: Piece>(segs: &[S], site: u64) -> bool {
    let i = segs.partition_point(|s| s.span().1 <= site);
    i < segs.len() && segs[i].span().0 <= site
}

/// The parent switches that the sorted crossover gaps `cross` make on the material `segs`
/// (gap g lies between sites g - 1 and g; material ends before `hi`): a gap crossed an odd
/// number of times switches parent (into `switches`), and one that also splits carried sites
/// on both sides is a visible split (into `split_gaps`). Returns the crossovers that fall to
/// the right of a carried site (they touch the genealogy of the sample). Shared by the exact
/// and the approximate recombination engines.
pub(crate) fn switches_of<S: Piece>(
    segs: &[S],
    cross: &[u64],
    hi: u64,
    switches: &mut Vec<u64>,
    split_gaps: &mut Vec<u64>,
) -> u64 {
    switches.clear();
    let mut on_tree = 0;
    for run in cross.chunk_by(|a, b| a == b) {
        let (g, m) = (run[0], run.len() as u64);
        let left_site = carries(segs, g - 1);
        if left_site {
            on_tree += m;
        }
        if m % 2 == 1 && g < hi {
            switches.push(g);
            if left_site && carries(segs, g) {
                split_gaps.push(g);
            }
        }
    }
    on_tree
}

/// Joins adjacent segments with equal node, jumps and count.
fn compress(segs: &mut Vec<Seg>) {
    segs.dedup_by(|b, a| {
        if a.right == b.left && a.node == b.node && a.jumps == b.jumps && a.count == b.count {
            a.right = b.right;
            true
        } else {
            false
        }
    });
}

/// The parts of a scenario the hot loop reads.
struct Model<'a> {
    scenario: &'a Scenario,
    dormancy: Vec<&'a Dormancy>,
    constant_size: Vec<Option<u64>>,
    n_demes: u64,
    horizon: u64,
    /// Lineages past `horizon` are handed over (the hybrid's switch) instead of stopping.
    handoff: bool,
    migrates: bool,
    sites: u64,
    rate: f64,
    /// Whether lineages may become unable to coalesce (several demes with a reachability table).
    reach: bool,
}

impl<'a> Model<'a> {
    fn new(scenario: &'a Scenario, config: &ArgConfig, switch: Option<u64>) -> Self {
        let demes = scenario.demes();
        let handoff = switch.is_some_and(|t| t < scenario.horizon());
        Model {
            handoff,
            scenario,
            dormancy: demes.iter().map(|d| d.dormancy()).collect(),
            constant_size: demes.iter().map(|d| d.size().as_constant()).collect(),
            n_demes: demes.len() as u64,
            horizon: if handoff { switch.unwrap_or(u64::MAX) } else { scenario.horizon() },
            migrates: scenario.migration().is_active(),
            sites: config.sites(),
            rate: config.recombination_rate(),
            reach: demes.len() > 1 && scenario.migration().has_reachability(),
        }
    }

    fn key(&self, time: u64, deme: usize) -> u64 {
        time * self.n_demes + deme as u64
    }

    fn split(&self, key: u64) -> (u64, usize) {
        (key / self.n_demes, (key % self.n_demes) as usize)
    }

    fn parent_deme<R: Rng + ?Sized>(&self, deme: usize, time: u64, rng: &mut R) -> usize {
        if self.migrates { self.scenario.migration().parent_deme(deme, time, rng) } else { deme }
    }

    fn size(&self, deme: usize, time: u64) -> u64 {
        self.constant_size[deme].unwrap_or_else(|| self.scenario.demes()[deme].size().at(time))
    }
}

/// Sites `[left, right)` of a lineage's material, cut where a crossover switches parents.
pub(crate) trait Piece: Copy {
    /// The interval.
    fn span(&self) -> (u64, u64);
    /// The same material over `[left, right)`.
    fn cut(&self, left: u64, right: u64) -> Self;
}

impl Piece for Seg {
    fn span(&self) -> (u64, u64) {
        (self.left, self.right)
    }
    fn cut(&self, left: u64, right: u64) -> Self {
        Seg { left, right, ..*self }
    }
}

/// Deals the material `segs` (sorted, disjoint) to two parents: sites before the first of
/// the sorted `switches` go to `a`, and every switch changes parent. Shared by the exact and
/// the approximate recombination engines.
#[inline]
pub(crate) fn split_at_switches<S: Piece>(segs: &[S], switches: &[u64], a: &mut Vec<S>, b: &mut Vec<S>) {
    let mut to_b = false;
    let mut w = 0;
    for s in segs {
        let (mut left, right) = s.span();
        while w < switches.len() && switches[w] <= left {
            to_b = !to_b;
            w += 1;
        }
        while w < switches.len() && switches[w] < right {
            let g = switches[w];
            if to_b {
                b.push(s.cut(left, g))
            } else {
                a.push(s.cut(left, g))
            }
            left = g;
            to_b = !to_b;
            w += 1;
        }
        if to_b { b.push(s.cut(left, right)) } else { a.push(s.cut(left, right)) }
    }
}

/// Simulates one ARG with a fresh simulator (convenience for tests and examples).
pub fn simulate<R: Rng + ?Sized>(scenario: &Scenario, config: &ArgConfig, rng: &mut R) -> Arg {
    ArgSimulator::new().simulate(scenario, config, rng)
}

#[cfg(test)]
mod tests;
