//! The exact backward-in-time engine.
//!
//! Every lineage is an individual of some deme at some generation. It draws its parent:
//! a look-back R from its deme's dormancy law, the parent's deme from the backward
//! migration matrix, and a uniform individual among the N_e(t + R) of that generation.
//! Individuals are never labelled. Lineages wait in a priority queue keyed by (time, deme);
//! when every lineage that landed on one (deme, generation) has arrived (all arrivals come
//! from younger generations, since R >= 1), they are seated one after the other: a lineage
//! is the same individual as each of the m already occupied ones with probability 1/N each,
//! or a new one with probability 1 - m/N. This is exactly i.i.d. uniform parent choice, so
//! several lineages can merge at once (multiple mergers), and sampled individuals of that
//! generation are occupied seats from the start (sampled ancestors).
//!
//! Lineages that would jump beyond the horizon, or reach a founder, stop: the result is then
//! a forest, never an endless loop. When one lineage is left it is the root.

use crate::dormancy::Dormancy;
use crate::genealogy::{Genealogy, Node};
use crate::scenario::{SampleKind, Scenario};
use rand::{Rng, RngExt};
use std::cmp::Reverse;
use std::collections::BinaryHeap;

/// A lineage waiting at (time, deme), or a sampled individual not yet reached.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
struct Entry {
    /// time * n_demes + deme: one integer orders by time, then deme.
    key: u64,
    /// Genealogy node at the bottom of the lineage's current edge.
    node: u32,
    /// Jumps since `node`, the one that landed here included.
    jumps: u64,
    /// A sampled individual (an occupied seat of its generation).
    sample: bool,
}

/// Simulates genealogies; owns scratch buffers reused across replicates.
#[derive(Debug, Default)]
pub struct Simulator {
    heap: BinaryHeap<Reverse<Entry>>,
    group: Vec<Entry>,
    seat: Vec<u32>,
    order: Vec<u32>,
    next: Vec<(u32, u64)>,
    step_by_step: bool,
}

impl Simulator {
    /// A simulator with empty buffers.
    pub fn new() -> Self {
        Simulator::default()
    }

    /// A simulator that never skips ahead: without dormancy it draws every lineage's parent in
    /// every generation, as the recombination engine does. Same law, more random numbers;
    /// for comparisons draw by draw.
    pub fn step_by_step() -> Self {
        Simulator { step_by_step: true, ..Simulator::default() }
    }

    /// Simulates the genealogy of the scenario's sample, drawing only from `rng`.
    pub fn simulate<R: Rng + ?Sized>(&mut self, scenario: &Scenario, rng: &mut R) -> Genealogy {
        let model = Model::new(scenario);
        let samples = scenario.samples();
        let mut g = Genealogy::with_samples(samples.len());
        self.heap.clear();
        let mut steps = 0u64;
        for (i, s) in samples.iter().enumerate() {
            let node = g.add_node(Node { time: s.time, deme: s.deme, sample: Some(i as u32) });
            match s.kind {
                SampleKind::Population => {
                    self.heap.push(Reverse(Entry { key: model.key(s.time, s.deme), node, jumps: 0, sample: true }))
                }
                SampleKind::Seedbank => {
                    // The seed was made a + 1 generations before sampling by a parent of the
                    // deme drawn by migration, as for any child of this deme.
                    let age = scenario.seed_age(s.deme, s.time).map_or(0, |a| a.sample(rng));
                    let to = model.parent_deme(s.deme, s.time, rng);
                    let t = s.time.saturating_add(age + 1);
                    steps += 1;
                    if t > model.horizon {
                        g.add_root(node);
                    } else {
                        self.heap.push(Reverse(Entry { key: model.key(t, to), node, jumps: 1, sample: false }));
                    }
                }
            }
        }
        while let Some(&Reverse(top)) = self.heap.peek() {
            if self.heap.len() == 1 {
                self.heap.pop();
                g.add_root(top.node);
                break;
            }
            self.heap.pop();
            let (time, deme) = model.split(top.key);
            // Hot path: a lone arrival on its generation takes a new individual, no draw needed.
            if !top.sample && self.heap.peek().is_none_or(|Reverse(e)| e.key != top.key) {
                steps += self.step(&model, &mut g, top.node, top.jumps, time, deme, rng);
                continue;
            }
            pop_group(&mut self.heap, top, |e| e.key, &mut self.group);
            steps += self.seat_group(&model, &mut g, time, deme, rng);
        }
        g.sort_roots();
        g.set_steps(steps);
        g
    }

    /// Seats every lineage of one (deme, generation) and continues the resulting individuals.
    fn seat_group<R: Rng + ?Sized>(
        &mut self,
        model: &Model,
        g: &mut Genealogy,
        time: u64,
        deme: usize,
        rng: &mut R,
    ) -> u64 {
        let n = model.size(deme, time);
        // Sampled individuals take the first seats.
        self.group.sort_unstable_by_key(|e| (!e.sample, e.node));
        seat_lineages(self.group.iter().map(|e| e.sample), n, &mut self.seat, &mut self.order, rng);
        self.merge_runs(g, time, deme);
        if model.lockstep[deme] && !self.step_by_step && self.heap.is_empty() {
            return self.lockstep(model, g, time, deme, rng);
        }
        let mut steps = 0;
        for k in 0..self.next.len() {
            let (node, jumps) = self.next[k];
            steps += self.step(model, g, node, jumps, time, deme, rng);
        }
        steps
    }

    /// Turns the seated group into genealogy nodes: one individual per seat, a merge node where
    /// several lineages share one, the sampled individual itself where it is an ancestor. The
    /// continuing lineages, (node, jumps), are left in `self.next`.
    fn merge_runs(&mut self, g: &mut Genealogy, time: u64, deme: usize) {
        self.next.clear();
        let mut i = 0;
        while i < self.order.len() {
            let first = self.order[i] as usize;
            let s = self.seat[first];
            let mut j = i + 1;
            while j < self.order.len() && self.seat[self.order[j] as usize] == s {
                j += 1;
            }
            let head = self.group[first];
            let continuing = if head.sample {
                for k in i + 1..j {
                    let child = self.group[self.order[k] as usize];
                    g.add_edge(head.node, child.node, child.jumps);
                }
                (head.node, 0)
            } else if j - i == 1 {
                (head.node, head.jumps)
            } else {
                let parent = g.add_node(Node { time, deme, sample: None });
                for k in i..j {
                    let child = self.group[self.order[k] as usize];
                    g.add_edge(parent, child.node, child.jumps);
                }
                (parent, 0)
            };
            self.next.push(continuing);
            i = j;
        }
    }

    /// Without dormancy, in one deme of constant size with no migration and nothing else
    /// queued, all m lineages move in lockstep, one generation per step. Instead of drawing
    /// every parent of every generation, draw the number G of generations until the first one
    /// in which two lineages pick the same parent,
    ///
    /// ```text
    /// P(all m distinct in a generation) = p0 = prod_{i<m} (1 - i/N),   G ~ Geometric(1 - p0)
    /// ```
    /// then seat that generation conditioned on at least one merge: the first lineage that
    /// joins an occupied seat is the j-th with probability prod_{i<j} (1 - i/N) (j/N) / (1 - p0),
    /// it joins one of the j seats uniformly, and later lineages are seated as usual. This is
    /// the law of the generation-by-generation process exactly (the discrete Wright–Fisher
    /// chain of the theory reference §1), with one geometric draw per merge event instead of
    /// m draws per generation. Returns the lineage steps accounted (m per generation).
    fn lockstep<R: Rng + ?Sized>(
        &mut self,
        model: &Model,
        g: &mut Genealogy,
        mut time: u64,
        deme: usize,
        rng: &mut R,
    ) -> u64 {
        let n = model.size(deme, time);
        let mut steps = 0u64;
        loop {
            let m = self.next.len();
            if m <= 1 {
                for k in 0..m {
                    let (node, jumps) = self.next[k];
                    steps += self.step(model, g, node, jumps, time, deme, rng);
                }
                return steps;
            }
            // ln p0 in log space: p0 underflows for large m.
            let ln_p0: f64 =
                if m as u64 > n { f64::NEG_INFINITY } else { (1..m).map(|i| (-(i as f64) / n as f64).ln_1p()).sum() };
            let q = -ln_p0.exp_m1();
            let gens = if q >= 1.0 {
                1
            } else {
                rand_distr::Geometric::new(q)
                    .map_or(u64::MAX, |d| rand_distr::Distribution::sample(&d, rng))
                    .saturating_add(1)
            };
            if time.saturating_add(gens) > model.horizon {
                // No two lineages meet before the horizon: each stops, as the step-by-step
                // engine would after its last step beyond the horizon.
                steps += m as u64 * (model.horizon - time + 1);
                for &(node, _) in &self.next {
                    g.add_root(node);
                }
                self.next.clear();
                return steps;
            }
            steps += m as u64 * gens;
            time += gens;
            self.group.clear();
            for &(node, jumps) in &self.next {
                self.group.push(Entry { key: model.key(time, deme), node, jumps: jumps + gens, sample: false });
            }
            seat_conditioned(m, n, q, &mut self.seat, &mut self.order, rng);
            self.merge_runs(g, time, deme);
        }
    }

    /// Draws the parent of the individual at (deme, time) and queues its lineage; returns the
    /// number of steps taken (0 when the lineage stops at a founder or beyond the horizon).
    #[inline]
    #[allow(clippy::too_many_arguments)]
    fn step<R: Rng + ?Sized>(
        &mut self,
        model: &Model,
        g: &mut Genealogy,
        node: u32,
        jumps: u64,
        time: u64,
        deme: usize,
        rng: &mut R,
    ) -> u64 {
        let Some(r) = model.dormancy[deme].sample_at(time, rng) else {
            g.add_root(node);
            return 0;
        };
        let to = model.parent_deme(deme, time, rng);
        let t = time.saturating_add(r);
        if t > model.horizon {
            g.add_root(node);
            return 1;
        }
        self.heap.push(Reverse(Entry { key: model.key(t, to), node, jumps: jumps + 1, sample: false }));
        1
    }
}

/// Collects `top` (already popped) and every queued entry with the same key into `group`:
/// all lineages that landed on one (deme, generation). Shared with the recombination engine.
pub(crate) fn pop_group<E: Ord + Copy>(
    heap: &mut BinaryHeap<Reverse<E>>,
    top: E,
    key: impl Fn(&E) -> u64,
    group: &mut Vec<E>,
) {
    group.clear();
    group.push(top);
    while let Some(&Reverse(e)) = heap.peek() {
        if key(&e) != key(&top) {
            break;
        }
        group.push(e);
        heap.pop();
    }
}

/// Seats the lineages of one (deme, generation) on individuals among `size`.
///
/// `is_sample` lists the group in order, sampled individuals first (each is an occupied
/// seat of its own). Every other lineage is the same individual as each of the `m` seats
/// occupied so far with probability 1/size, or takes a new seat with probability
/// 1 - m/size: i.i.d. uniform parent choice with individuals left unlabelled. On return
/// `seat[i]` is the seat of lineage i and `order` lists the lineages sorted by seat. The
/// recombination engine seats its lineages with the same function.
pub(crate) fn seat_lineages<R: Rng + ?Sized>(
    is_sample: impl Iterator<Item = bool>,
    size: u64,
    seat: &mut Vec<u32>,
    order: &mut Vec<u32>,
    rng: &mut R,
) {
    seat.clear();
    let mut occupied = 0u64;
    for sample in is_sample {
        let s = if sample || occupied == 0 {
            occupied += 1;
            occupied - 1
        } else if size == 1 {
            0
        } else {
            let u = rng.random_range(0..size);
            if u < occupied {
                u
            } else {
                occupied += 1;
                occupied - 1
            }
        };
        seat.push(s as u32);
    }
    order.clear();
    order.extend(0..seat.len() as u32);
    order.sort_unstable_by_key(|&i| (seat[i as usize], i));
}

/// Seats m lineages among `size` individuals conditioned on at least one merge (see
/// [`Simulator::lockstep`]); `q` = P(at least one merge) = 1 - prod_{i<m} (1 - i/size).
fn seat_conditioned<R: Rng + ?Sized>(
    m: usize,
    size: u64,
    q: f64,
    seat: &mut Vec<u32>,
    order: &mut Vec<u32>,
    rng: &mut R,
) {
    seat.clear();
    let nf = size as f64;
    // The first lineage that joins an occupied seat: j with P ∝ prod_{i<j}(1 - i/N) (j/N).
    let u: f64 = rng.random::<f64>() * q;
    let (mut acc, mut all_distinct, mut first) = (0.0, 1.0, m - 1);
    for j in 1..m {
        let p = all_distinct * (j as f64 / nf);
        acc += p;
        if u < acc {
            first = j;
            break;
        }
        all_distinct *= 1.0 - j as f64 / nf;
    }
    seat.extend(0..first as u32);
    seat.push(rng.random_range(0..first as u32));
    let mut occupied = first as u64;
    for _ in first + 1..m {
        let u = rng.random_range(0..size);
        let s = if u < occupied {
            u
        } else {
            occupied += 1;
            occupied - 1
        };
        seat.push(s as u32);
    }
    order.clear();
    order.extend(0..m as u32);
    order.sort_unstable_by_key(|&i| (seat[i as usize], i));
}

/// The parts of a scenario the hot loop reads, with fast paths chosen once.
struct Model<'a> {
    scenario: &'a Scenario,
    dormancy: Vec<&'a Dormancy>,
    constant_size: Vec<Option<u64>>,
    /// Demes where lineages move in lockstep (no dormancy, constant size, no migration).
    lockstep: Vec<bool>,
    n_demes: u64,
    horizon: u64,
    migrates: bool,
}

impl<'a> Model<'a> {
    fn new(scenario: &'a Scenario) -> Self {
        let demes = scenario.demes();
        Model {
            scenario,
            dormancy: demes.iter().map(|d| d.dormancy()).collect(),
            constant_size: demes.iter().map(|d| d.size().as_constant()).collect(),
            lockstep: demes
                .iter()
                .map(|d| {
                    d.dormancy().is_none() && d.size().as_constant().is_some() && !scenario.migration().is_active()
                })
                .collect(),
            n_demes: demes.len() as u64,
            horizon: scenario.horizon(),
            migrates: scenario.migration().is_active(),
        }
    }

    #[inline(always)]
    fn key(&self, time: u64, deme: usize) -> u64 {
        time * self.n_demes + deme as u64
    }

    #[inline(always)]
    fn split(&self, key: u64) -> (u64, usize) {
        (key / self.n_demes, (key % self.n_demes) as usize)
    }

    #[inline(always)]
    fn parent_deme<R: Rng + ?Sized>(&self, deme: usize, time: u64, rng: &mut R) -> usize {
        if self.migrates { self.scenario.migration().parent_deme(deme, time, rng) } else { deme }
    }

    #[inline(always)]
    fn size(&self, deme: usize, time: u64) -> u64 {
        self.constant_size[deme].unwrap_or_else(|| self.scenario.demes()[deme].size().at(time))
    }
}

/// Simulates one genealogy with a fresh simulator (convenience for tests and examples).
pub fn simulate<R: Rng + ?Sized>(scenario: &Scenario, rng: &mut R) -> Genealogy {
    Simulator::new().simulate(scenario, rng)
}

pub mod approx_arg;
pub mod hybrid;

#[cfg(test)]
mod tests;
