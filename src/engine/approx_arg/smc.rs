//! The sequentially Markov coalescent SMC' along the sequence (McVean & Cardin 2005,
//! *Phil. Trans. R. Soc. B* 360:1387; Marjoram & Wall 2006, *BMC Genet.* 7:16; citations from
//! memory), under the same limit processes as the Hudson engine of this module.
//!
//! Hudson's process makes O(rho²) events at large rho: almost all of them coalescences of
//! lineages whose material does not overlap and recombinations in the non-ancestral gaps
//! this creates (measured: 98.6% of coalescences at rho = 10^4, n = 20). SMC' drops exactly
//! those: walking along the sequence it keeps one local tree, and at each crossover the
//! lineage above the crossover point floats up and coalesces again with the tree as it was
//! (its own old branch included, which leaves the tree unchanged), so the cost is O(rho × n).
//! The marginal tree of every site has the limit law exactly; the joint law of distant sites
//! is approximated (two-site statistics agree closely with Hudson's, Marjoram & Wall 2006).
//!
//! Each branch keeps its path through demes and dormancy (pieces of constant state), since the
//! floating lineage meets a branch only where both are active in one deme. The first tree is
//! built by adding the samples one at a time, each floating up and coalescing with the tree of
//! the ones before: the limit processes are consistent under sampling (a sub-sample follows
//! the same process), so this is the law of the whole sample's tree. Root lineages continue
//! above their roots, their paths drawn only as far as needed.
//!
//! Along the sequence: on the tree of site g - 1 a reproduction puts Poisson(r) crossovers in
//! gap g, so with total crossover mass Λ (reproductions on the tree) the next gap holding
//! crossovers is Geometric(1 - e^{-rΛ}) away and holds Poisson(rΛ) >= 1 of them, each at a point
//! uniform in that mass, applied one after the other. Node times are continuous until the
//! end, then rounded as the Hudson engine rounds them (every parent at least one generation
//! above each of its children in every tree).

use super::{ArgRecords, Consts, Pending};
use crate::engine::approx::{ApproxModel, MigEpoch, exp1};
use crate::engine::arg::{ArgConfig, EdgeRec, RootRec};
use crate::genealogy::Node;
use rand::{Rng, RngExt};

const NONE: u32 = u32::MAX;

/// A stretch of a lineage's path: from `time` on, in `deme`, active or dormant (a dormant
/// lineage went dormant in deme `from`, which sets its wake rate).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Piece {
    time: f64,
    deme: u32,
    from: u32,
    dormant: bool,
}

#[derive(Debug, Clone)]
struct SNode {
    time: f64,
    deme: u32,
    sample: Option<u32>,
    parent: u32,
    kids: [u32; 2],
    /// The path of the node's lineage from `time` up (to the parent, or on for a root).
    path: Vec<Piece>,
    /// A root lineage's path is drawn up to here; its next change happens here.
    until: f64,
    /// Whether the change at `until` is a real event (else only a migration epoch ends).
    until_event: bool,
    /// Where the node's current edge (or root) record began.
    left: u64,
    /// Expected links (reproductions) on the branch above the node, and its crossover mass.
    links: f64,
    mass: f64,
    /// Position in `live`, or NONE once the node has left the tree.
    slot: u32,
}

/// Simulates SMC' ancestries; owns scratch buffers reused across replicates.
#[derive(Debug, Default)]
pub(crate) struct SmcSimulator {
    nodes: Vec<SNode>,
    live: Vec<u32>,
    /// Edge records whose `jumps` field holds the bits of the unrounded links until
    /// [`SmcSimulator::finish`] rounds node times (converted in place: the records are the
    /// largest part of the memory).
    edges: Vec<EdgeRec>,
    roots: Vec<RootRec>,
    split_gaps: Vec<u64>,
    /// The floating lineage's path.
    fpath: Vec<Piece>,
    /// Timeline of the present branches above the floating start: (time, deme, +1/-1).
    events: Vec<(f64, u32, i32)>,
    counts: Vec<i64>,
    pick: Vec<u32>,
    roots_now: Vec<u32>,
    /// One Kingman deme: lineages never change state, so the number of branches present at
    /// time t is (leaves active by t) - (inner nodes older than... below t), from two sorted
    /// lists of times.
    simple: bool,
    leaf_on: Vec<f64>,
    inner_times: Vec<f64>,
    tree_crossovers: u64,
    recombination_events: u64,
    steps: u64,
}

/// Where the floating lineage ended: coalesced with the branch above `target` at `time`, or
/// reached the horizon (target NONE).
#[derive(Debug, Clone, Copy)]
struct Landing {
    time: f64,
    target: u32,
}

impl SmcSimulator {
    pub(crate) fn simulate<R: Rng + ?Sized>(
        &mut self,
        model: &ApproxModel,
        config: &ArgConfig,
        pending: Vec<Pending>,
        rng: &mut R,
    ) -> ArgRecords {
        let samples = model.scenario.samples();
        let n = samples.len();
        let c = Consts::new(model, config, n);
        self.reset(c.lambda.len());
        self.simple = matches!(model.demes(), [crate::engine::approx::DemeModel::Kingman { .. }]);
        for (i, s) in samples.iter().enumerate() {
            self.nodes.push(SNode {
                time: s.time as f64,
                deme: s.deme as u32,
                sample: Some(i as u32),
                parent: NONE,
                kids: [NONE; 2],
                path: Vec::new(),
                until: f64::INFINITY,
                until_event: false,
                left: 0,
                links: 0.0,
                mass: 0.0,
                slot: NONE,
            });
        }
        // The first tree: samples added one at a time.
        for (k, p) in pending.iter().enumerate() {
            let leaf = p.segs[0].node;
            let t0 = samples[leaf as usize].time as f64;
            // A seed waits dormant from its sampling time until its parent's generation.
            let mut path = Vec::new();
            if !p.dormant && p.time > t0 {
                path.push(Piece { time: t0, deme: p.deme as u32, from: p.from as u32, dormant: true });
            }
            let start = Piece { time: p.time, deme: p.deme as u32, from: p.from as u32, dormant: p.dormant };
            if k == 0 {
                path.push(start);
                self.nodes[leaf as usize].path = path;
                self.add_live(leaf);
                self.add_leaf_time(p.time);
                self.draw_until(&c, model, leaf, p.time, rng);
                continue;
            }
            let landing = self.float(&c, model, start, rng);
            path.extend_from_slice(&self.fpath);
            self.nodes[leaf as usize].path = path;
            self.add_live(leaf);
            self.add_leaf_time(p.time);
            match landing.target {
                NONE => self.draw_until(&c, model, leaf, landing.time, rng),
                target => self.insert(&c, leaf, target, landing.time, 0),
            }
        }
        for k in 0..self.live.len() {
            let v = self.live[k];
            self.update_weights(&c, v);
            self.nodes[v as usize].left = 0;
        }
        // Along the sequence.
        let mut x = 0u64;
        if c.rate > 0.0 && c.sites > 1 {
            loop {
                let total: f64 = self.live.iter().map(|&v| self.nodes[v as usize].mass).sum();
                let rl = c.rate * total;
                if rl <= 0.0 {
                    break;
                }
                let jump = exp1(rng) / rl;
                if jump >= (c.sites - 1 - x) as f64 {
                    break;
                }
                let gap = x + 1 + jump as u64;
                // Crossovers in this gap: one, plus the arrivals of the rest of a unit interval
                // after the first (conditioned on at least one).
                let p = -(-rl).exp_m1();
                let mut at = -(-rng.random::<f64>() * p).ln_1p() / rl;
                let mut m = 1;
                loop {
                    at += exp1(rng) / rl;
                    if at >= 1.0 {
                        break;
                    }
                    m += 1;
                }
                for i in 0..m {
                    let total =
                        if i == 0 { total } else { self.live.iter().map(|&v| self.nodes[v as usize].mass).sum() };
                    self.recombine(&c, model, gap, total, rng);
                }
                self.tree_crossovers += m;
                x = gap;
            }
        }
        for k in 0..self.live.len() {
            let v = self.live[k];
            self.close(v, c.sites);
        }
        self.finish(n, c.sites)
    }

    fn reset(&mut self, n_demes: usize) {
        self.nodes.clear();
        self.live.clear();
        self.edges.clear();
        self.roots.clear();
        self.split_gaps.clear();
        self.counts.clear();
        self.counts.resize(n_demes, 0);
        self.leaf_on.clear();
        self.inner_times.clear();
        self.tree_crossovers = 0;
        self.recombination_events = 0;
        self.steps = 0;
    }

    fn add_leaf_time(&mut self, t: f64) {
        let i = self.leaf_on.partition_point(|&x| x <= t);
        self.leaf_on.insert(i, t);
    }

    fn add_inner_time(&mut self, t: f64) {
        let i = self.inner_times.partition_point(|&x| x < t);
        self.inner_times.insert(i, t);
    }

    fn remove_inner_time(&mut self, t: f64) {
        let i = self.inner_times.partition_point(|&x| x < t);
        debug_assert_eq!(self.inner_times[i], t);
        self.inner_times.remove(i);
    }

    fn add_live(&mut self, v: u32) {
        self.nodes[v as usize].slot = self.live.len() as u32;
        self.live.push(v);
    }

    fn remove_live(&mut self, v: u32) {
        let slot = self.nodes[v as usize].slot as usize;
        self.live.swap_remove(slot);
        if let Some(&moved) = self.live.get(slot) {
            self.nodes[moved as usize].slot = slot as u32;
        }
        self.nodes[v as usize].slot = NONE;
    }

    /// Draws when the root lineage of `v`, in the state of its last piece at time t, changes.
    fn draw_until<R: Rng + ?Sized>(&mut self, c: &Consts, model: &ApproxModel, v: u32, t: f64, rng: &mut R) {
        let last = *self.nodes[v as usize].path.last().expect("a root lineage has a path");
        let mig = &model.mig[model.mig_index(t)];
        let rate = own_rate(c, mig, last);
        let mut until = if rate > 0.0 { t + exp1(rng) / rate } else { f64::INFINITY };
        let mut event = true;
        if model.migrates && mig.end < until {
            (until, event) = (mig.end, false);
        }
        if until >= c.horizon {
            (until, event) = (f64::INFINITY, false);
        }
        let node = &mut self.nodes[v as usize];
        (node.until, node.until_event) = (until, event);
    }

    /// The change of a root lineage at its `until`: its own event, then the next one drawn.
    fn extend_root<R: Rng + ?Sized>(&mut self, c: &Consts, model: &ApproxModel, v: u32, rng: &mut R) {
        let node = &self.nodes[v as usize];
        let (t, event, last) = (node.until, node.until_event, *node.path.last().expect("a path"));
        if event {
            let mig = &model.mig[model.mig_index(t)];
            let next = own_event(c, model, mig, last, t, rng);
            self.nodes[v as usize].path.push(next);
        }
        self.draw_until(c, model, v, t, rng);
    }

    /// Links and crossover mass of the branch above `v` (0 for a root).
    fn update_weights(&mut self, c: &Consts, v: u32) {
        let node = &self.nodes[v as usize];
        if node.parent == NONE {
            let node = &mut self.nodes[v as usize];
            (node.links, node.mass) = (0.0, 0.0);
            return;
        }
        let end = self.nodes[node.parent as usize].time;
        let (mut links, mut mass) = (0.0, 0.0);
        let path = &node.path;
        for (i, p) in path.iter().enumerate() {
            let b = path.get(i + 1).map_or(end, |q| q.time.min(end));
            if p.time >= end {
                break;
            }
            if !p.dormant {
                let d = p.deme as usize;
                links += (b - p.time) * c.link[d];
                mass += (b - p.time) * c.lambda[d];
                if i > 0 && path[i - 1].dormant {
                    // The reproduction that ends a dormancy.
                    links += 1.0;
                    mass += 1.0;
                }
            }
        }
        let node = &mut self.nodes[v as usize];
        (node.links, node.mass) = (links, mass);
    }

    fn close(&mut self, v: u32, x: u64) {
        let node = &self.nodes[v as usize];
        if x > node.left {
            if node.parent == NONE {
                push_root(&mut self.roots, node.left, x, v);
            } else {
                let jumps = node.links.to_bits();
                self.edges.push(EdgeRec { left: node.left, right: x, parent: node.parent, child: v, jumps });
            }
        }
        self.nodes[v as usize].left = x;
    }

    /// One crossover at `gap` on the current tree: the SMC' update.
    fn recombine<R: Rng + ?Sized>(&mut self, c: &Consts, model: &ApproxModel, gap: u64, total: f64, rng: &mut R) {
        let mut u = rng.random::<f64>() * total;
        let mut v = NONE;
        for &w in &self.live {
            let m = self.nodes[w as usize].mass;
            if m > 0.0 {
                v = w;
                if u < m {
                    break;
                }
                u -= m;
            }
        }
        let (tau, from) = self.point_on(c, v, u);
        let deme = model.link_deme(from as usize, tau, rng) as u32;
        let start = Piece { time: tau, deme, from: deme, dormant: false };
        self.steps += 1;
        let landing = self.float(c, model, start, rng);
        self.split_gaps.push(gap);
        self.recombination_events += 1;
        let x = gap;
        let p = self.nodes[v as usize].parent;
        if landing.target == v {
            // Back onto its own branch above the crossover: the tree stays; the path between
            // the crossover and the landing is the floating lineage's.
            let path = &mut self.nodes[v as usize].path;
            let (cut, tail) = (before_time(path, tau), path.partition_point(|p| p.time <= landing.time));
            path.splice(cut..tail, self.fpath.iter().copied());
            let before = self.nodes[v as usize].links;
            self.update_weights(c, v);
            if self.nodes[v as usize].links != before {
                let links = self.nodes[v as usize].links;
                self.nodes[v as usize].links = before;
                self.close(v, x);
                self.nodes[v as usize].links = links;
            }
            return;
        }
        // Remove the old parent p of v: v's sibling s takes p's place.
        let s = self.sibling(v);
        let q = self.nodes[p as usize].parent;
        for w in [v, s, p] {
            self.close(w, x);
        }
        let p_path = std::mem::take(&mut self.nodes[p as usize].path);
        let p_time = self.nodes[p as usize].time;
        let s_path = &mut self.nodes[s as usize].path;
        s_path.truncate(before_time(s_path, p_time));
        s_path.extend_from_slice(&p_path);
        self.nodes[s as usize].parent = q;
        if q == NONE {
            let (until, event) = (self.nodes[p as usize].until, self.nodes[p as usize].until_event);
            let node = &mut self.nodes[s as usize];
            (node.until, node.until_event) = (until, event);
        } else {
            self.replace_kid(q, p, s);
        }
        self.remove_live(p);
        self.remove_inner_time(p_time);
        self.nodes[p as usize].kids = [NONE; 2];
        self.nodes[p as usize].parent = NONE;
        self.update_weights(c, s);
        // Re-attach v above the landing point.
        let path = &mut self.nodes[v as usize].path;
        path.truncate(before_time(path, tau));
        path.extend_from_slice(&self.fpath);
        self.nodes[v as usize].parent = NONE;
        match landing.target {
            NONE => {
                // The horizon: v is a root of a forest from here on.
                let node = &mut self.nodes[v as usize];
                (node.until, node.until_event) = (f64::INFINITY, false);
                self.update_weights(c, v);
            }
            target => {
                let target = if target == p { s } else { target };
                self.insert(c, v, target, landing.time, x);
            }
        }
    }

    /// Where the crossover falls on the branch above `v`, `u` in [0, mass): its time and the
    /// deme of the reproducing individual (whose row the second parent's deme is drawn from).
    fn point_on(&self, c: &Consts, v: u32, mut u: f64) -> (f64, u32) {
        let node = &self.nodes[v as usize];
        let end = self.nodes[node.parent as usize].time;
        let path = &node.path;
        let mut last = (node.time, node.deme);
        for (i, p) in path.iter().enumerate() {
            if p.time >= end {
                break;
            }
            if p.dormant {
                continue;
            }
            if i > 0 && path[i - 1].dormant {
                if u < 1.0 {
                    return (p.time, path[i - 1].from);
                }
                u -= 1.0;
            }
            let b = path.get(i + 1).map_or(end, |q| q.time.min(end));
            let lam = c.lambda[p.deme as usize];
            let m = (b - p.time) * lam;
            if u < m {
                return ((p.time + u / lam).min(b), p.deme);
            }
            u -= m;
            last = (b, p.deme);
        }
        last
    }

    fn sibling(&self, v: u32) -> u32 {
        let k = self.nodes[self.nodes[v as usize].parent as usize].kids;
        if k[0] == v { k[1] } else { k[0] }
    }

    fn replace_kid(&mut self, parent: u32, old: u32, new: u32) {
        let k = &mut self.nodes[parent as usize].kids;
        if k[0] == old {
            k[0] = new;
        } else {
            debug_assert_eq!(k[1], old);
            k[1] = new;
        }
    }

    /// Inserts a new node at `time` on the branch above `target` (or on its root lineage), with
    /// children `target` and `v`, from position x on; `v`'s path (up to `time`) is set by the
    /// caller and its record closed.
    fn insert(&mut self, c: &Consts, v: u32, target: u32, time: f64, x: u64) {
        let u = self.nodes.len() as u32;
        self.close(target, x);
        let up = self.nodes[target as usize].parent;
        let path = &mut self.nodes[target as usize].path;
        let above = suffix(path, time);
        path.truncate(before_time(path, time));
        let deme = above[0].deme;
        let (until, event) = (self.nodes[target as usize].until, self.nodes[target as usize].until_event);
        self.nodes.push(SNode {
            time,
            deme,
            sample: None,
            parent: up,
            kids: [target, v],
            path: above,
            until: if up == NONE { until } else { f64::INFINITY },
            until_event: up == NONE && event,
            left: x,
            links: 0.0,
            mass: 0.0,
            slot: NONE,
        });
        if up != NONE {
            self.replace_kid(up, target, u);
        }
        self.nodes[target as usize].parent = u;
        self.nodes[v as usize].parent = u;
        self.add_live(u);
        self.add_inner_time(time);
        for w in [target, v, u] {
            self.update_weights(c, w);
        }
    }

    /// The floating lineage from `start`: simulates it up until it coalesces with a branch of
    /// the current tree (or reaches the horizon). Its path is left in `fpath`.
    fn float<R: Rng + ?Sized>(&mut self, c: &Consts, model: &ApproxModel, start: Piece, rng: &mut R) -> Landing {
        let t0 = start.time;
        self.fpath.clear();
        self.fpath.push(start);
        if self.simple {
            return self.float_simple(c, model, t0, rng);
        }
        // Root lineages drawn at least up to the start.
        self.roots_now.clear();
        for k in 0..self.live.len() {
            let v = self.live[k];
            if self.nodes[v as usize].parent == NONE {
                self.roots_now.push(v);
                while self.nodes[v as usize].until <= t0 {
                    self.extend_root(c, model, v, rng);
                }
            }
        }
        self.build_timeline(t0);
        let mut cursor = 0;
        let mut state = start;
        let mut t = t0;
        loop {
            let mut bp = self.events.get(cursor).map_or(f64::INFINITY, |e| e.0);
            let mut root = NONE;
            for &v in &self.roots_now {
                let node = &self.nodes[v as usize];
                if node.until < bp {
                    (bp, root) = (node.until, v);
                }
            }
            let mig: &MigEpoch = &model.mig[model.mig_index(t)];
            if model.migrates {
                bp = bp.min(mig.end);
            }
            let k = if state.dormant { 0 } else { self.counts[state.deme as usize] };
            let d = state.deme as usize;
            let tc = if k > 0 { model.coal_time(d, t, k as f64 / c.scale[d], exp1(rng)) } else { f64::INFINITY };
            let own = own_rate(c, mig, state);
            let to = if own > 0.0 { t + exp1(rng) / own } else { f64::INFINITY };
            let tn = tc.min(to);
            if tn >= bp {
                if bp >= c.horizon || bp.is_infinite() {
                    return Landing { time: c.horizon, target: NONE };
                }
                t = bp;
                while cursor < self.events.len() && self.events[cursor].0 <= t {
                    let (_, deme, delta) = self.events[cursor];
                    self.counts[deme as usize] += delta as i64;
                    cursor += 1;
                }
                if root != NONE && self.nodes[root as usize].until <= t {
                    let before = *self.nodes[root as usize].path.last().expect("a path");
                    self.extend_root(c, model, root, rng);
                    let after = *self.nodes[root as usize].path.last().expect("a path");
                    if !before.dormant {
                        self.counts[before.deme as usize] -= 1;
                    }
                    if !after.dormant {
                        self.counts[after.deme as usize] += 1;
                    }
                }
                continue;
            }
            if tn >= c.horizon {
                return Landing { time: c.horizon, target: NONE };
            }
            t = tn;
            self.steps += 1;
            if tc <= to {
                return Landing { time: t, target: self.pick_target(state.deme, t, rng) };
            }
            state = own_event(c, model, mig, state, t, rng);
            self.fpath.push(state);
        }
    }

    /// [`SmcSimulator::float`] in one Kingman deme: the floating lineage only coalesces; the
    /// branches present at t are the active leaves below t minus the inner nodes below t.
    fn float_simple<R: Rng + ?Sized>(&mut self, c: &Consts, model: &ApproxModel, t0: f64, rng: &mut R) -> Landing {
        let mut li = self.leaf_on.partition_point(|&x| x <= t0);
        let mut ii = self.inner_times.partition_point(|&x| x <= t0);
        let mut k = li as i64 - ii as i64;
        let mut t = t0;
        let scale = c.scale[0];
        loop {
            let next_leaf = self.leaf_on.get(li).copied().unwrap_or(f64::INFINITY);
            let next_inner = self.inner_times.get(ii).copied().unwrap_or(f64::INFINITY);
            let bp = next_leaf.min(next_inner);
            let tc = if k > 0 { model.coal_time(0, t, k as f64 / scale, exp1(rng)) } else { f64::INFINITY };
            if tc >= bp {
                if bp >= c.horizon || bp.is_infinite() {
                    return Landing { time: c.horizon, target: NONE };
                }
                t = bp;
                if next_leaf <= next_inner {
                    k += 1;
                    li += 1;
                } else {
                    k -= 1;
                    ii += 1;
                }
                continue;
            }
            if tc >= c.horizon {
                return Landing { time: c.horizon, target: NONE };
            }
            self.steps += 1;
            return Landing { time: tc, target: self.pick_target(0, tc, rng) };
        }
    }

    /// Counts of active branches per deme at t0, and their changes above it.
    fn build_timeline(&mut self, t0: f64) {
        self.events.clear();
        self.counts.iter_mut().for_each(|x| *x = 0);
        for &v in &self.live {
            let node = &self.nodes[v as usize];
            let end = if node.parent == NONE { f64::INFINITY } else { self.nodes[node.parent as usize].time };
            if end <= t0 {
                continue;
            }
            let path = &node.path;
            for (i, p) in path.iter().enumerate() {
                let b = path.get(i + 1).map_or(end, |q| q.time.min(end));
                if b <= t0 || p.dormant {
                    continue;
                }
                if p.time >= end {
                    break;
                }
                if p.time <= t0 {
                    self.counts[p.deme as usize] += 1;
                } else {
                    self.events.push((p.time, p.deme, 1));
                }
                if b.is_finite() && !(node.parent == NONE && i + 1 == path.len()) {
                    self.events.push((b, p.deme, -1));
                }
            }
        }
        self.events.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.2.cmp(&b.2)));
    }

    /// A uniform active branch (or root lineage) of `deme` present at time t.
    fn pick_target<R: Rng + ?Sized>(&mut self, deme: u32, t: f64, rng: &mut R) -> u32 {
        self.pick.clear();
        for &v in &self.live {
            let node = &self.nodes[v as usize];
            let end = if node.parent == NONE { f64::INFINITY } else { self.nodes[node.parent as usize].time };
            if node.time > t || end <= t {
                continue;
            }
            let i = node.path.partition_point(|p| p.time <= t);
            if i > 0 && !node.path[i - 1].dormant && node.path[i - 1].deme == deme {
                self.pick.push(v);
            }
        }
        debug_assert!(!self.pick.is_empty(), "a coalescence needs a branch to meet");
        self.pick[rng.random_range(0..self.pick.len())]
    }

    /// Rounds node times (every parent at least one generation above each of its children in
    /// every record) and edge links, and hands the records over.
    fn finish(&mut self, n: usize, sites: u64) -> ArgRecords {
        let nn = self.nodes.len();
        let mut order: Vec<u32> = (0..nn as u32).collect();
        order.sort_unstable_by(|&a, &b| self.nodes[a as usize].time.total_cmp(&self.nodes[b as usize].time));
        // Records by child, to push each node's time to its parents.
        let mut start = vec![0u32; nn + 1];
        for e in &self.edges {
            start[e.child as usize + 1] += 1;
        }
        for i in 0..nn {
            start[i + 1] += start[i];
        }
        let mut fill = start.clone();
        let mut by_child = vec![0u32; self.edges.len()];
        for (k, e) in self.edges.iter().enumerate() {
            by_child[fill[e.child as usize] as usize] = k as u32;
            fill[e.child as usize] += 1;
        }
        let mut need = vec![0u64; nn];
        let mut int = vec![0u64; nn];
        for &v in &order {
            let node = &self.nodes[v as usize];
            let t = if node.sample.is_some() {
                node.time as u64
            } else {
                (node.time.round().max(0.0) as u64).max(need[v as usize])
            };
            int[v as usize] = t;
            for &k in &by_child[start[v as usize] as usize..start[v as usize + 1] as usize] {
                let p = self.edges[k as usize].parent as usize;
                need[p] = need[p].max(t + 1);
            }
        }
        let nodes: Vec<Node> = self
            .nodes
            .iter()
            .zip(&int)
            .map(|(v, &t)| Node { time: t, deme: v.deme as usize, sample: v.sample })
            .collect();
        drop(by_child);
        let mut edges = std::mem::take(&mut self.edges);
        for e in &mut edges {
            let len = int[e.parent as usize] - int[e.child as usize];
            e.jumps = (f64::from_bits(e.jumps).round().max(1.0) as u64).min(len);
        }
        let mut records = ArgRecords::empty(n, sites, nodes);
        records.edges = edges;
        records.roots = std::mem::take(&mut self.roots);
        records.split_gaps = std::mem::take(&mut self.split_gaps);
        (records.recombination_events, records.tree_crossovers, records.steps) =
            (self.recombination_events, self.tree_crossovers, self.steps);
        records
    }
}

/// Rate of a single lineage's own events (migration, going dormant, waking) in `state`.
fn own_rate(c: &Consts, mig: &MigEpoch, state: Piece) -> f64 {
    if state.dormant {
        c.wake[state.from as usize]
    } else {
        mig.out[state.deme as usize] + c.sleep[state.deme as usize]
    }
}

/// A single lineage's own event at time t from `state` (whose rate is [`own_rate`]).
fn own_event<R: Rng + ?Sized>(
    c: &Consts,
    model: &ApproxModel,
    mig: &MigEpoch,
    state: Piece,
    t: f64,
    rng: &mut R,
) -> Piece {
    if state.dormant {
        return Piece { time: t, deme: state.deme, from: state.deme, dormant: false };
    }
    let d = state.deme as usize;
    let r = rng.random::<f64>() * (mig.out[d] + c.sleep[d]);
    if r < mig.out[d] {
        let row = &mig.rows[d];
        let to = row.iter().find(|&&(x, _)| r < x).or(row.last()).map_or(d, |&(_, e)| e) as u32;
        Piece { time: t, deme: to, from: to, dormant: false }
    } else {
        // One long look-back: its destination is drawn now, with the full row of M.
        let to = model.link_deme(d, t, rng) as u32;
        Piece { time: t, deme: to, from: d as u32, dormant: true }
    }
}

/// The number of pieces of a path that start strictly before time t.
fn before_time(path: &[Piece], t: f64) -> usize {
    path.partition_point(|p| p.time < t)
}

/// The path from time t on: the state at t (starting at t), then the later pieces.
fn suffix(path: &[Piece], t: f64) -> Vec<Piece> {
    let i = path.partition_point(|p| p.time <= t);
    let mut out = Vec::with_capacity(path.len() - i + 1);
    out.push(Piece { time: t, ..path[i.max(1) - 1] });
    out.extend_from_slice(&path[i..]);
    out
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
