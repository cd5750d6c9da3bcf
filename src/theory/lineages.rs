//! Expectations of the coalescent limits for any sample, numerically exact for the limiting
//! process: a continuous-time Markov chain on the configuration of the sample's lineages.
//!
//! A lineage has a *colour*: active in deme d, or (seed-bank-coalescent demes) dormant, having
//! left deme d for deme e. The chain's state is the multiset of (colour, number of sampled
//! descendants) over the lineages, so that branch lengths subtending i samples, and hence the
//! expected SFS, are occupation times (Griffiths & Tavaré 1998 use the same bookkeeping for
//! one deme; here it is written out state by state). Rates per generation are those of
//! [`super::limits`] (KKL time change E\[R]²/d per deme, migration M\[d]\[e]/E\[R] per look-back,
//! the seed-bank coalescent's sleep and wake rates, pair coalescence 1/(s N_d(t))). Samples
//! enter at their times (ancient samples; seeds from the bank at the time of their parent);
//! deme sizes are piecewise constant or exponential, migration piecewise constant.
//!
//! Method: between breakpoints (size epochs, migration epochs, sample times) the state law
//! moves by uniformisation (Jensen 1953; all terms positive, no cancellation); exponential
//! epochs are cut into steps over which each coalescence rate changes by at most 0.5% and is
//! replaced by its exact average (a second-order scheme, relative error about 1e-6); a size
//! below one individual counts as one, as in the exact model; after the last breakpoint the expected occupation times solve one linear system per number of
//! lineages (coalescence only lowers it). The pair-time distribution comes from the same
//! propagation, with quantiles found by bisection.

use super::MigrationPiece;
use super::limits::DemeLimit;
use super::linalg::solve;
use super::pair_exact::{Entry, SampleClass};
use crate::demography::SizeEpoch;
use std::collections::HashMap;

/// Largest number of chain states built by default.
pub const MAX_STATES: usize = 6000;

/// Mass not yet at the MRCA below which propagation stops.
const LEFT_MASS: f64 = 1e-14;

/// Largest relative change of a coalescence rate over one step of an exponential epoch.
const RATE_STEP: f64 = 0.005;

/// The limit processes of a scenario's demes, with everything the chains need.
#[derive(Debug, Clone)]
pub struct LimitSetting {
    demes: Vec<DemeLimit>,
    sizes: Vec<Vec<SizeEpoch>>,
    migration: Vec<MigrationPiece>,
    /// Expected mutations (whole sequence) per generation of reproduction and of dormancy.
    mutation: (f64, f64),
    /// Per deme: generations from sampling a seed of the bank to its parent, 1 + E\[A] with
    /// the stationary age A (P(A = a) = P(R > a)/E\[R]); `None` when E\[A] is infinite.
    seed_delay: Vec<Option<f64>>,
}

impl LimitSetting {
    /// A setting from its parts (see the fields); `seed_delay` as 1 + E\[A] per deme.
    pub fn new(
        demes: Vec<DemeLimit>,
        sizes: Vec<Vec<SizeEpoch>>,
        migration: Vec<MigrationPiece>,
        mutation: (f64, f64),
        seed_delay: Vec<Option<f64>>,
    ) -> Self {
        LimitSetting { demes, sizes, migration, mutation, seed_delay }
    }

    fn d(&self) -> usize {
        self.demes.len()
    }

    fn n_colours(&self) -> usize {
        self.d() + self.d() * self.d()
    }

    fn dormant(&self, from: usize, to: usize) -> usize {
        self.d() + from * self.d() + to
    }

    /// Deme a colour coalesces in (active colours only).
    fn active_deme(&self, c: usize) -> Option<usize> {
        (c < self.d()).then_some(c)
    }

    /// Expected mutations per generation of a lineage of colour c.
    fn nu(&self, c: usize) -> f64 {
        let (repro, dormant) = self.mutation;
        match self.active_deme(c) {
            Some(d) => match self.demes[d] {
                DemeLimit::Kingman { mean, .. } => (repro + dormant * (mean - 1.0)) / mean,
                DemeLimit::SeedBank { .. } => repro,
            },
            None => dormant,
        }
    }

    /// Colour-change rates (per generation) under migration piece `p`: `out[c]` = (c', rate).
    fn colour_rates(&self, p: usize) -> Vec<Vec<(usize, f64)>> {
        let d = self.d();
        let m = &self.migration[p].matrix;
        let mut out = vec![Vec::new(); self.n_colours()];
        for from in 0..d {
            let link = self.demes[from].link_rate();
            for (to, &rate) in m[from].iter().enumerate() {
                if to != from && rate > 0.0 {
                    out[from].push((to, rate * link));
                }
            }
            if let DemeLimit::SeedBank { sleep, wake, .. } = self.demes[from] {
                for to in 0..d {
                    if m[from][to] > 0.0 {
                        out[from].push((self.dormant(from, to), sleep * m[from][to]));
                        out[self.dormant(from, to)].push((to, wake));
                    }
                }
            }
        }
        out
    }

    /// Index of the migration piece in force at time t.
    fn piece_at(&self, t: f64) -> usize {
        self.migration.iter().position(|p| t < p.end as f64 || p.end == u64::MAX).unwrap_or(self.migration.len() - 1)
    }

    /// The size epoch of deme d in force at time t.
    fn epoch_at(&self, d: usize, t: f64) -> &SizeEpoch {
        let e = &self.sizes[d];
        let i = e.partition_point(|x| x.start as f64 <= t).max(1) - 1;
        &e[i]
    }

    /// Time at which an exponential epoch shrinking back in time (growth > 0) reaches one
    /// individual; sizes below one count as one, as in the exact model.
    fn floor_time(e: &SizeEpoch) -> f64 {
        if e.growth > 0.0 && e.size > 1.0 { e.start as f64 + e.size.ln() / e.growth } else { f64::INFINITY }
    }

    /// Growth rate of deme d at time t that changes its rate (0 once the size is floored at 1).
    fn effective_growth(&self, d: usize, t: f64) -> f64 {
        let e = self.epoch_at(d, t);
        if t >= Self::floor_time(e) || (e.growth > 0.0 && e.size <= 1.0) { 0.0 } else { e.growth }
    }

    /// Average pair coalescence rate 1/(s N_d(u)) over [t0, t1] (within one size epoch and on
    /// one side of the floor time).
    fn kappa(&self, d: usize, t0: f64, t1: f64) -> f64 {
        let e = self.epoch_at(d, t0);
        let s = self.demes[d].coal_scale();
        let g = self.effective_growth(d, t0);
        let at = |t: f64| ((e.growth * (t - e.start as f64)).exp() / e.size).min(1.0) / s;
        let h = t1 - t0;
        if g == 0.0 || h <= 0.0 {
            return at(t0);
        }
        at(t0) * (g * h).exp_m1() / (g * h)
    }

    /// Entry time and colour law of a sampled lineage.
    pub fn entry(&self, class: &SampleClass) -> Result<(f64, Vec<(usize, f64)>), String> {
        let t = class.time as f64;
        let d = class.deme;
        if class.entry == Entry::Population {
            return Ok((t, vec![(d, 1.0)]));
        }
        let row = &self.migration[self.piece_at(t)].matrix[d];
        match self.demes[d] {
            DemeLimit::Kingman { .. } => {
                let delay = self.seed_delay[d].ok_or_else(|| {
                    "the age of a seed in the bank has an infinite mean (E[R^2] infinite)".to_string()
                })?;
                Ok((t + delay, row.iter().enumerate().filter(|(_, p)| **p > 0.0).map(|(e, p)| (e, *p)).collect()))
            }
            DemeLimit::SeedBank { dormant_seed, .. } => {
                // The short part's one generation to the parent is negligible in the limit.
                let mut out = Vec::new();
                for (e, &p) in row.iter().enumerate().filter(|(_, p)| **p > 0.0) {
                    out.push((self.dormant(d, e), dormant_seed * p));
                    out.push((e, (1.0 - dormant_seed) * p));
                }
                Ok((t, out))
            }
        }
    }
}

/// How a state can change: a lineage changes colour, or two active lineages of a deme merge.
#[derive(Debug, Clone, Copy)]
enum Kind {
    Colour { from: u16, to: u16, mult: f32 },
    Coal { deme: u16, count: f32 },
}

#[derive(Debug, Clone, Copy)]
struct Move {
    to: u32,
    kind: Kind,
}

/// Expected values of the limiting genealogy of a sample.
#[derive(Debug, Clone, PartialEq)]
pub struct ChainExpectations {
    /// E\[time of the MRCA] in generations before the present.
    pub tmrca: f64,
    /// E\[total branch length] in generations.
    pub total_length: f64,
    /// E\[ξ_i], i = 1..n-1: expected mutations carried by i samples (whole sequence).
    pub sfs: Vec<f64>,
}

/// How a group of samples entering at one time maps states: (from, to, probability).
type Injection = Vec<(u32, u32, f64)>;

/// Colour laws of the samples entering at one time.
type Group = (f64, Vec<Vec<(usize, f64)>>);

/// The lineage-configuration chain of one sample.
#[derive(Debug, Clone)]
pub struct LineageChain<'a> {
    setting: &'a LimitSetting,
    n: usize,
    keys: Vec<Vec<u32>>,
    moves: Vec<Vec<Move>>,
    /// (time, injection map as (from, to, probability)) for every sample group after the first.
    groups: Vec<(f64, Injection)>,
    start: Vec<(u32, f64)>,
    t0: f64,
    /// Work left (state-vector operations) before a propagation is refused as too stiff.
    budget: std::cell::Cell<f64>,
}

/// Work budget of one chain's propagations (moves visited).
const WORK_BUDGET: f64 = 4e9;

const DONE: u32 = 0;

fn lineage(colour: usize, size: usize) -> u32 {
    (colour as u32) << 16 | size as u32
}

fn colour_of(l: u32) -> usize {
    (l >> 16) as usize
}

fn size_of(l: u32) -> usize {
    (l & 0xffff) as usize
}

/// Every multiset of colours for the lineages of one group, with its probability.
fn combos(laws: &[Vec<(usize, f64)>]) -> Vec<(Vec<u32>, f64)> {
    let mut out: Vec<(Vec<u32>, f64)> = vec![(Vec::new(), 1.0)];
    for law in laws {
        let mut next: HashMap<Vec<u32>, f64> = HashMap::new();
        for (key, p) in &out {
            for &(c, q) in law {
                if q <= 0.0 {
                    continue;
                }
                let mut k = key.clone();
                k.push(lineage(c, 1));
                k.sort_unstable();
                *next.entry(k).or_insert(0.0) += p * q;
            }
        }
        out = next.into_iter().collect();
        out.sort_by(|a, b| a.0.cmp(&b.0));
    }
    out
}

impl<'a> LineageChain<'a> {
    /// Builds the chain of a sample (at least two lineages). Errors when a seed's entry has no
    /// finite mean or the chain would exceed `max_states` states.
    pub fn new(setting: &'a LimitSetting, samples: &[SampleClass], max_states: usize) -> Result<Self, String> {
        let n = samples.len();
        if n < 2 {
            return Err("a sample of at least two lineages is needed".to_string());
        }
        let mut entries = Vec::with_capacity(n);
        for s in samples {
            entries.push(setting.entry(s)?);
        }
        entries.sort_by(|a, b| a.0.total_cmp(&b.0));
        let mut grouped: Vec<Group> = Vec::new();
        for (t, law) in entries {
            match grouped.last_mut() {
                Some((gt, laws)) if *gt == t => laws.push(law),
                _ => grouped.push((t, vec![law])),
            }
        }
        let mut chain = LineageChain {
            setting,
            n,
            keys: vec![Vec::new()],
            moves: vec![Vec::new()],
            groups: Vec::new(),
            start: Vec::new(),
            t0: grouped[0].0,
            budget: std::cell::Cell::new(WORK_BUDGET),
        };
        let mut index: HashMap<Vec<u32>, u32> = HashMap::new();
        index.insert(Vec::new(), DONE);
        let targets = chain.colour_targets();
        let mut frontier = Vec::new();
        for (k, p) in combos(&grouped[0].1) {
            let s = chain.intern(&mut index, k, &mut frontier);
            chain.start.push((s, p));
        }
        let mut phase = chain.close(&mut index, frontier, &targets, max_states)?;
        for (t, laws) in grouped.iter().skip(1) {
            let add = combos(laws);
            let mut map = Vec::new();
            let mut frontier = Vec::new();
            for &s in &phase {
                for (k, p) in &add {
                    let mut key = chain.keys[s as usize].clone();
                    key.extend(k);
                    key.sort_unstable();
                    let to = chain.intern(&mut index, key, &mut frontier);
                    map.push((s, to, *p));
                }
            }
            chain.groups.push((*t, map));
            phase = chain.close(&mut index, frontier, &targets, max_states)?;
        }
        Ok(chain)
    }

    /// Number of states (the absorbing one included).
    pub fn n_states(&self) -> usize {
        self.keys.len()
    }

    fn colour_targets(&self) -> Vec<Vec<usize>> {
        let mut out = vec![Vec::new(); self.setting.n_colours()];
        for p in 0..self.setting.migration.len() {
            for (c, row) in self.setting.colour_rates(p).into_iter().enumerate() {
                for (to, _) in row {
                    if !out[c].contains(&to) {
                        out[c].push(to);
                    }
                }
            }
        }
        out
    }

    fn intern(&mut self, index: &mut HashMap<Vec<u32>, u32>, key: Vec<u32>, frontier: &mut Vec<u32>) -> u32 {
        // One lineage carrying every sample: the MRCA is reached.
        let key = if key.len() == 1 && size_of(key[0]) == self.n { Vec::new() } else { key };
        if let Some(&s) = index.get(&key) {
            return s;
        }
        let s = self.keys.len() as u32;
        index.insert(key.clone(), s);
        self.keys.push(key);
        self.moves.push(Vec::new());
        frontier.push(s);
        s
    }

    /// Every state reachable from `frontier` without a new sample; returns them all.
    fn close(
        &mut self,
        index: &mut HashMap<Vec<u32>, u32>,
        mut frontier: Vec<u32>,
        targets: &[Vec<usize>],
        max_states: usize,
    ) -> Result<Vec<u32>, String> {
        let mut all = Vec::new();
        while let Some(s) = frontier.pop() {
            all.push(s);
            if s == DONE {
                continue;
            }
            let key = self.keys[s as usize].clone();
            let mut moves = Vec::new();
            // Distinct lineages with their multiplicities.
            let mut runs: Vec<(u32, usize)> = Vec::new();
            for &l in &key {
                match runs.last_mut() {
                    Some((x, m)) if *x == l => *m += 1,
                    _ => runs.push((l, 1)),
                }
            }
            for (i, &(l, m)) in runs.iter().enumerate() {
                let (c, size) = (colour_of(l), size_of(l));
                for &c2 in &targets[c] {
                    let mut k = key.clone();
                    let pos = k.iter().position(|&x| x == l).expect("the lineage is in the key");
                    k[pos] = lineage(c2, size);
                    k.sort_unstable();
                    let to = self.intern(index, k, &mut frontier);
                    moves.push(Move { to, kind: Kind::Colour { from: c as u16, to: c2 as u16, mult: m as f32 } });
                }
                let Some(deme) = self.setting.active_deme(c) else { continue };
                for &(l2, m2) in &runs[i..] {
                    if colour_of(l2) != c {
                        continue;
                    }
                    let count = if l2 == l { m * (m - 1) / 2 } else { m * m2 };
                    if count == 0 {
                        continue;
                    }
                    let mut k = key.clone();
                    let p1 = k.iter().position(|&x| x == l).expect("present");
                    k.remove(p1);
                    let p2 = k.iter().position(|&x| x == l2).expect("present");
                    k.remove(p2);
                    k.push(lineage(c, size + size_of(l2)));
                    k.sort_unstable();
                    let to = self.intern(index, k, &mut frontier);
                    moves.push(Move { to, kind: Kind::Coal { deme: deme as u16, count: count as f32 } });
                }
            }
            self.moves[s as usize] = moves;
            if self.keys.len() > max_states {
                return Err(format!("the lineage chain of this sample needs more than {max_states} states: refused"));
            }
        }
        Ok(all)
    }

    /// Rates of every move over [t0, t1] (one epoch of everything), and the exit rates.
    fn rates(&self, t0: f64, t1: f64) -> (Vec<Vec<f64>>, Vec<f64>) {
        let st = self.setting;
        let piece = st.piece_at(t0);
        let colour = st.colour_rates(piece);
        let kappa: Vec<f64> = (0..st.d()).map(|d| st.kappa(d, t0, t1)).collect();
        let mut rates = Vec::with_capacity(self.moves.len());
        let mut exit = Vec::with_capacity(self.moves.len());
        for moves in &self.moves {
            let r: Vec<f64> = moves
                .iter()
                .map(|m| match m.kind {
                    Kind::Colour { from, to, mult } => {
                        let c = &colour[from as usize];
                        f64::from(mult) * c.iter().find(|(x, _)| *x == to as usize).map_or(0.0, |(_, r)| *r)
                    }
                    Kind::Coal { deme, count } => f64::from(count) * kappa[deme as usize],
                })
                .collect();
            exit.push(r.iter().sum());
            rates.push(r);
        }
        (rates, exit)
    }

    /// Moves the state law `p` from t0 to t1 with constant rates, adding ∫ p dt to `occ`.
    fn uniformise(
        &self,
        p: &mut [f64],
        occ: &mut [f64],
        rates: &[Vec<f64>],
        exit: &[f64],
        length: f64,
    ) -> Result<(), String> {
        let lambda = exit.iter().fold(0.0f64, |a, &b| a.max(b));
        if lambda <= 0.0 {
            for (o, x) in occ.iter_mut().zip(p.iter()) {
                *o += x * length;
            }
            return Ok(());
        }
        // Chunks with Λ δ <= 20 keep e^{-Λδ} far from underflow.
        let chunks = (lambda * length / 20.0).ceil().max(1.0);
        let moves: usize = self.moves.iter().map(Vec::len).sum::<usize>() + p.len();
        let work = (lambda * length + 10.0 * chunks) * moves as f64;
        if work > self.budget.get() {
            return Err(format!(
                "the lineage chain is too stiff to propagate (rate {lambda:.3e} per generation over {length:.3e} generations): refused"
            ));
        }
        self.budget.set(self.budget.get() - work);
        let delta = length / chunks;
        let x = lambda * delta;
        let mut term = vec![0.0; p.len()];
        let mut next = vec![0.0; p.len()];
        for _ in 0..chunks as u64 {
            term.copy_from_slice(p);
            let mut w = (-x).exp();
            let mut cum = w;
            for (o, (q, t)) in p.iter_mut().zip(&term).enumerate() {
                *q = w * t;
                occ[o] += (1.0 - cum) * t / lambda;
            }
            let mut k = 0.0;
            while 1.0 - cum > 1e-15 || k < x {
                k += 1.0;
                // term ← term P with P = I + Q/Λ.
                next.iter_mut().zip(&term).zip(exit).for_each(|((n, t), e)| *n = t * (1.0 - e / lambda));
                for (s, moves) in self.moves.iter().enumerate() {
                    let t = term[s];
                    if t == 0.0 {
                        continue;
                    }
                    for (m, r) in moves.iter().zip(&rates[s]) {
                        next[m.to as usize] += t * r / lambda;
                    }
                }
                std::mem::swap(&mut term, &mut next);
                w *= x / k;
                cum += w;
                let tail = (1.0 - cum).max(0.0);
                for (s, t) in term.iter().enumerate() {
                    p[s] += w * t;
                    occ[s] += tail * t / lambda;
                }
                if k > x + 50.0 + 10.0 * x.sqrt() {
                    break;
                }
            }
        }
        Ok(())
    }

    /// Breakpoints after t: size epochs, migration epochs, sample groups.
    fn next_break(&self, t: f64) -> f64 {
        let st = self.setting;
        let mut b = f64::INFINITY;
        for e in st.sizes.iter().flatten() {
            let s = e.start as f64;
            if s > t {
                b = b.min(s);
            }
        }
        for p in &st.migration {
            if p.end != u64::MAX && p.end as f64 > t {
                b = b.min(p.end as f64);
            }
        }
        for (g, _) in &self.groups {
            if *g > t {
                b = b.min(*g);
            }
        }
        for e in st.sizes.iter().flatten() {
            let f = LimitSetting::floor_time(e);
            if f > t {
                b = b.min(f);
            }
        }
        b
    }

    /// Largest |growth| among the demes at time t (0 when all rates are constant there).
    fn growth_at(&self, t: f64) -> f64 {
        (0..self.setting.d()).map(|d| self.setting.effective_growth(d, t).abs()).fold(0.0, f64::max)
    }

    /// Moves `p` from t0 to t1 (no breakpoint strictly inside), adding occupation to `occ`.
    fn advance(&self, p: &mut [f64], occ: &mut [f64], t0: f64, t1: f64) -> Result<(), String> {
        let g = self.growth_at(t0);
        let steps = if g > 0.0 { ((t1 - t0) * g / RATE_STEP).ceil().max(1.0) } else { 1.0 };
        let h = (t1 - t0) / steps;
        for i in 0..steps as u64 {
            // Once (after the last sample entered) almost all mass has reached the MRCA, the
            // rest cannot change an expectation or a quantile.
            if p.iter().enumerate().filter(|(s, _)| *s != DONE as usize).map(|(_, x)| x).sum::<f64>() < LEFT_MASS {
                return Ok(());
            }
            let a = t0 + i as f64 * h;
            let (rates, exit) = self.rates(a, a + h);
            self.uniformise(p, occ, &rates, &exit, h)?;
        }
        Ok(())
    }

    fn inject(&self, p: &[f64], t: f64) -> Vec<f64> {
        let mut out = vec![0.0; p.len()];
        let mut applied = false;
        for (gt, map) in &self.groups {
            if *gt == t {
                for &(from, to, q) in map {
                    out[to as usize] += p[from as usize] * q;
                }
                applied = true;
            }
        }
        if applied { out } else { p.to_vec() }
    }

    fn initial(&self) -> Vec<f64> {
        let mut p = vec![0.0; self.n_states()];
        for &(s, q) in &self.start {
            p[s as usize] += q;
        }
        p
    }

    /// The state law and occupation at the last breakpoint.
    fn to_last_break(&self) -> Result<(f64, Vec<f64>, Vec<f64>), String> {
        let mut p = self.initial();
        let mut occ = vec![0.0; p.len()];
        let mut t = self.t0;
        loop {
            let b = self.next_break(t);
            if b.is_infinite() {
                return Ok((t, p, occ));
            }
            self.advance(&mut p, &mut occ, t, b)?;
            p = self.inject(&p, b);
            t = b;
        }
    }

    /// Occupation from t to infinity after the last breakpoint.
    fn tail_occupation(&self, t: f64, mut p: Vec<f64>, occ: &mut [f64]) -> Result<(), String> {
        let st = self.setting;
        // After the last breakpoint (floor times included) rates are constant, unless a deme
        // grows into the past without bound.
        if (0..st.d()).any(|d| st.epoch_at(d, t).growth < 0.0) {
            return Err("a deme grows without bound into the past: lineages may never meet".to_string());
        }
        let (rates, exit) = self.rates(t, t);
        // Levels by number of lineages, highest first: coalescence goes one level down.
        // Only states holding every sample can carry mass after the last breakpoint.
        let mut levels: Vec<Vec<usize>> = vec![Vec::new(); self.n + 1];
        for (s, k) in self.keys.iter().enumerate() {
            if s != DONE as usize && k.iter().map(|&l| size_of(l)).sum::<usize>() == self.n {
                levels[k.len()].push(s);
            }
        }
        let mut local = vec![usize::MAX; self.n_states()];
        for level in (1..=self.n).rev() {
            let states = &levels[level];
            if states.is_empty() {
                continue;
            }
            for (i, &s) in states.iter().enumerate() {
                local[s] = i;
            }
            let m = states.len();
            // (−Q_ll)^T o = b.
            let mut a = vec![0.0; m * m];
            let mut b = vec![0.0; m];
            for (i, &s) in states.iter().enumerate() {
                a[i * m + i] += exit[s];
                b[i] = p[s];
                for (mv, r) in self.moves[s].iter().zip(&rates[s]) {
                    if mv.to != DONE && self.keys[mv.to as usize].len() == level {
                        a[local[mv.to as usize] * m + i] -= r;
                    }
                }
            }
            if b.iter().all(|x| *x == 0.0) {
                continue;
            }
            let o = solve(a, m, b, 1).ok_or_else(|| {
                "some lineages can never meet (no migration path between their demes): expected times are infinite"
                    .to_string()
            })?;
            for (i, &s) in states.iter().enumerate() {
                occ[s] += o[i];
                for (mv, r) in self.moves[s].iter().zip(&rates[s]) {
                    if self.keys[mv.to as usize].len() < level {
                        p[mv.to as usize] += o[i] * r;
                    }
                }
            }
        }
        Ok(())
    }

    /// E\[T_MRCA], E\[total length] and the expected SFS of the sample.
    pub fn expectations(&self) -> Result<ChainExpectations, String> {
        let (t, p, mut occ) = self.to_last_break()?;
        self.tail_occupation(t, p, &mut occ)?;
        let mut tmrca = self.t0;
        let mut total = 0.0;
        let mut sfs = vec![0.0; self.n - 1];
        for (s, key) in self.keys.iter().enumerate() {
            if s == DONE as usize {
                continue;
            }
            tmrca += occ[s];
            total += occ[s] * key.len() as f64;
            for &l in key {
                sfs[size_of(l) - 1] += occ[s] * self.setting.nu(colour_of(l));
            }
        }
        Ok(ChainExpectations { tmrca, total_length: total, sfs })
    }

    /// Quantiles of the time of the MRCA at probabilities `qs` (increasing, in (0, 1)):
    /// the propagation marches in steps of at most `step` generations and bisects inside the
    /// step where P(T <= t) crosses each level.
    pub fn quantiles(&self, qs: &[f64], step: f64) -> Result<Vec<f64>, String> {
        let st = self.setting;
        if (0..st.d()).any(|d| st.sizes[d].last().is_some_and(|e| e.growth < 0.0)) {
            return Err("a deme grows without bound into the past: lineages may never meet".to_string());
        }
        let mut p = self.initial();
        let mut scratch = vec![0.0; p.len()];
        let mut t = self.t0;
        let mut out = Vec::with_capacity(qs.len());
        let mut iterations = 0u64;
        while out.len() < qs.len() {
            iterations += 1;
            if iterations > 2_000_000 {
                return Err("the pair-time distribution did not reach its upper quantile".to_string());
            }
            let b = self.next_break(t).min(t + step);
            let before = p.clone();
            self.advance(&mut p, &mut scratch, t, b)?;
            while out.len() < qs.len() && p[DONE as usize] >= qs[out.len()] {
                let q = qs[out.len()];
                let (mut lo, mut hi) = (t, b);
                for _ in 0..50 {
                    let mid = 0.5 * (lo + hi);
                    let mut x = before.clone();
                    self.advance(&mut x, &mut scratch, t, mid)?;
                    if x[DONE as usize] >= q { hi = mid } else { lo = mid }
                }
                out.push(hi);
            }
            p = self.inject(&p, b);
            t = b;
        }
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn one_deme(size: f64, growth: f64) -> LimitSetting {
        LimitSetting::new(
            vec![DemeLimit::Kingman { mean: 1.0, gcd: 1, scale: 1.0 }],
            vec![vec![SizeEpoch { start: 0, size, growth }]],
            vec![MigrationPiece { start: 0, end: u64::MAX, matrix: vec![vec![1.0]] }],
            (1e-3, 1e-3),
            vec![Some(1.0)],
        )
    }

    fn present(deme: usize, count: usize) -> Vec<SampleClass> {
        vec![SampleClass { deme, time: 0, entry: Entry::Population }; count]
    }

    #[test]
    fn kingman_constant_size() {
        // Source: Kingman (1982), theory reference §1–2: E[T_MRCA] = 2N(1 - 1/n),
        // E[L] = 2N a_n, E[ξ_i] = θ/i with θ = 2Nμ (Fu 1995); N = 1000, μ = 1e-3, n = 6.
        let st = one_deme(1000.0, 0.0);
        let c = LineageChain::new(&st, &present(0, 6), MAX_STATES).unwrap();
        let e = c.expectations().unwrap();
        assert!((e.tmrca - 2000.0 * (1.0 - 1.0 / 6.0)).abs() < 1e-8);
        let a6: f64 = (1..6).map(|i| 1.0 / i as f64).sum();
        assert!((e.total_length - 2000.0 * a6).abs() < 1e-8);
        for (i, x) in e.sfs.iter().enumerate() {
            assert!((x - 2.0 / (i + 1) as f64).abs() < 1e-10, "xi_{}: {x}", i + 1);
        }
    }

    #[test]
    fn pair_distribution_is_exponential() {
        // Constant N: T_2 ~ Exp(1/N), quantile q at -N ln(1 - q) (Kingman 1982).
        let st = one_deme(500.0, 0.0);
        let c = LineageChain::new(&st, &present(0, 2), MAX_STATES).unwrap();
        let qs = [0.05, 0.25, 0.5, 0.75, 0.95];
        let got = c.quantiles(&qs, 25.0).unwrap();
        for (q, t) in qs.iter().zip(got) {
            let want = -500.0 * (1.0 - q).ln();
            assert!((t - want).abs() < 1e-6 * want, "q {q}: {t} vs {want}");
        }
    }

    #[test]
    fn island_model_limit() {
        // Source: theory reference §6 continuous approximation: E[T_within] = D N,
        // E[T_between] = D N + (D - 1)/(2m); D = 3, N = 50, m = 0.01 gives 150 and 250.
        let m = super::super::structured::island_migration_matrix(3, 0.01).unwrap();
        let st = LimitSetting::new(
            vec![DemeLimit::Kingman { mean: 1.0, gcd: 1, scale: 1.0 }; 3],
            vec![vec![SizeEpoch { start: 0, size: 50.0, growth: 0.0 }]; 3],
            vec![MigrationPiece { start: 0, end: u64::MAX, matrix: m }],
            (0.0, 0.0),
            vec![Some(1.0); 3],
        );
        let mut both = present(0, 1);
        both.extend(present(1, 1));
        let w = LineageChain::new(&st, &present(0, 2), MAX_STATES).unwrap().expectations().unwrap();
        let b = LineageChain::new(&st, &both, MAX_STATES).unwrap().expectations().unwrap();
        assert!((w.tmrca - 150.0).abs() < 1e-8, "{}", w.tmrca);
        assert!((b.tmrca - 250.0).abs() < 1e-8, "{}", b.tmrca);
    }

    #[test]
    fn exponential_pair_hazard() {
        // N(t) = N0 e^{-g t}: P(T_2 > t) = exp(-(e^{g t} - 1)/(g N0)) (integrated hazard),
        // so the median solves (e^{g t} - 1)/(g N0) = ln 2 (hand calculation).
        let (n0, g) = (2000.0, 0.001);
        let st = one_deme(n0, g);
        let c = LineageChain::new(&st, &present(0, 2), MAX_STATES).unwrap();
        let med = c.quantiles(&[0.5], 50.0).unwrap()[0];
        let want = (1.0 + std::f64::consts::LN_2 * g * n0).ln() / g;
        assert!((med - want).abs() < 1e-4 * want, "{med} vs {want}");
    }
}
