//! A fast approximate engine: continuous-time coalescent limits whose cost does not grow with N.
//!
//! Where a limit theorem holds, the genealogy of the exact discrete engine ([`crate::engine`])
//! is close to that of a continuous-time process whose event rates scale like 1/N, so one
//! replicate costs O(number of events) instead of O(generations walked). Each deme follows
//! one of two limits ([`DemeModel`]); lineages of all demes live in one process with
//! migration between demes:
//!
//! ```text
//! Kingman (KKL, finite-mean dormancy, look-back law fixed as N grows):
//!   pair coalescence   1 / (N(t) E[R]² / d)   per generation, per pair in the deme
//!   migration d → e    M[d][e] / E[R]          per generation, per lineage
//! seed-bank coalescent (BGKW 2016, rare long dormancy: R = 1, or 1 + G with E[G] of order N):
//!   pair coalescence   1 / N(t)                per generation, per pair of active lineages
//!   go dormant         σ = w (g - 1) / g       per generation, per active lineage (= c / N)
//!   wake               1 / g                   per generation, per dormant lineage (= cK / N)
//!   migration d → e    M[d][e]                 per generation, per active lineage
//! ```
//! Sources: Kingman (1982) *Stoch. Proc. Appl.* 13:235; Kaj, Krone & Lascoux (2001) *J. Appl.
//! Probab.* 38:285 (time change E\[R]²/d, d the gcd of the support; theory reference §3);
//! Blath, González Casanova, Kurt & Wilke-Berenguer (2016) *Ann. Appl. Probab.* 26:857
//! (theory reference §5; the look-back form and its (c, K) are §5.3 and
//! [`crate::theory::seedbank_coalescent::SeedBankCoalescent::from_lookback`]); the structured
//! coalescent with time in generations (Notohara 1990, *J. Math. Biol.* 29:59, citation from
//! memory; theory reference §6).
//!
//! **Migration scaling (derived).** The exact engine draws a parent deme once per
//! parent–offspring link, with probability M\[d]\[e]. A lineage in a deme of finite-mean law
//! makes links at the renewal rate 1/E\[R] per generation (renewal theorem), so it moves at
//! M\[d]\[e]/E\[R] per generation. An active lineage of a seed-bank-coalescent deme makes one
//! link per generation (rate M\[d]\[e]); a lineage going dormant draws its destination deme once,
//! with the full row of M, for the single long link it is about to make. Per-link probabilities
//! are used as per-link rates (first order in M: the relative error on between-deme times is of
//! order max M, exactly as in the continuous island formula DN + (D-1)/(2m) of §6).
//!
//! **Size changes** enter through the hazard ∫ C(k,2)/(s N(u)) du, integrated in closed form over
//! each epoch of [`crate::demography::SizeHistory`] (exponential epochs are inverted exactly;
//! the real-valued size is used, without the engine's rounding and floor of 1).
//!
//! **Output.** The same [`Genealogy`] as the exact engine: node times are the event times
//! rounded to the nearest generation, bumped when needed so that every parent is at least one
//! generation older than each child. Edge `jumps` are the expected number of reproduction
//! events, round(links) clamped to \[1, length], where links accrue at 1/E\[R] per generation
//! in a Kingman deme (round(length / E\[R]) for one deme), at 1 per active generation in a
//! seed-bank deme, plus 1 for each dormant period. `steps` counts the events simulated.
//! Multiple mergers and sampled ancestors (order 1/N effects) do not occur.
//!
//! **Samples.** Ancient samples enter as lineages at their sampling time. Seeds sampled from
//! the bank (`from: seedbank`): in a Kingman deme, the lineage enters as an active lineage at
//! the time of its parent, t + a + 1, with the age a drawn from the stationary seed-age law
//! exactly as in the exact engine (the first link's migration too); in a seed-bank deme, the
//! seed is in a long dormancy with probability w g / E\[R] (the renewal weight of that part)
//! and then starts dormant at t, otherwise it is a one-generation seed whose parent is active
//! at t + 1.

use super::EngineKind;
use crate::demography::SizeEpoch;
use crate::genealogy::{Genealogy, Node};
use crate::scenario::{SampleKind, Scenario};
use rand::{Rng, RngExt};
use rand_distr::{Distribution, Exp1};

// The rule of `auto` lives in `theory::limits`, shared with `predict`; re-exported here.
pub use crate::theory::limits::{
    DemeLimit as DemeModel, LOOKBACK_TAIL, MAX_LOOKBACK_FRACTION, MAX_SWITCH_RATE, MIN_DEME_SIZE, lookback_scale,
};

/// Why the approximate engine cannot run a scenario.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum ApproxError {
    /// A deme is outside the domain of every limit the engine knows.
    #[error("deme `{deme}`: {reason}")]
    OutOfDomain {
        /// Deme name.
        deme: String,
        /// What is wrong.
        reason: String,
    },
}

/// The limit model of every deme, or why one deme has none ([`crate::theory::limits::deme_limits`]).
fn deme_models(scenario: &Scenario) -> Result<Vec<DemeModel>, ApproxError> {
    crate::theory::limits::deme_limits(scenario)
        .map_err(|e| ApproxError::OutOfDomain { deme: e.deme, reason: e.reason })
}

/// Picks the engine for `auto`, with the reason in words: the rule
/// [`crate::theory::limits::check`] that `predict` also uses to label its limits.
pub fn choose(scenario: &Scenario) -> (EngineKind, String) {
    let c = crate::theory::limits::check(scenario);
    (if c.holds { EngineKind::Approx } else { EngineKind::Exact }, c.reason)
}

/// Simulates one genealogy with the approximate engine (builds the model each call).
///
/// Errors when a deme is outside the engine's domain (see [`DemeModel::of`]).
pub fn simulate_approx<R: Rng + ?Sized>(scenario: &Scenario, rng: &mut R) -> Result<Genealogy, ApproxError> {
    Ok(ApproxModel::new(scenario)?.simulate(rng))
}

/// An Exp(1) draw.
#[inline(always)]
pub(crate) fn exp1<R: Rng + ?Sized>(rng: &mut R) -> f64 {
    Distribution::<f64>::sample(&Exp1, rng)
}

/// A migration epoch as per-generation rates of active lineages.
#[derive(Debug, Clone)]
pub(crate) struct MigEpoch {
    pub(crate) end: f64,
    /// out[d] = total rate (per generation) of leaving deme d for an active lineage.
    pub(crate) out: Vec<f64>,
    /// rows[d] = cumulative off-diagonal rates with their target demes.
    pub(crate) rows: Vec<Vec<(f64, usize)>>,
}

/// The approximate engine for one scenario, built once and reused across replicates.
#[derive(Debug, Clone)]
pub struct ApproxModel<'a> {
    pub(crate) scenario: &'a Scenario,
    demes: Vec<DemeModel>,
    sizes: Vec<&'a [SizeEpoch]>,
    /// Constant size per deme when it never changes (fast path).
    constant: Vec<Option<f64>>,
    pub(crate) mig: Vec<MigEpoch>,
    pub(crate) migrates: bool,
    pub(crate) horizon: f64,
    /// The plain Kingman fast path, when it applies.
    plain: Option<Plain>,
    /// The hybrid's switch time ([`ApproxModel::with_switch`]).
    switch: Option<u64>,
}

/// Constants of the plain Kingman fast path (one constant-size Kingman deme, every sample
/// from the population at one time).
#[derive(Debug, Clone)]
struct Plain {
    /// 1 / E\[R] (links per generation).
    link_rate: f64,
    /// wait\[k] = scale N / C(k, 2): the mean waiting time with k lineages (k = 2..=n).
    wait: Vec<f64>,
}

/// One live lineage.
#[derive(Debug, Clone, Copy)]
struct Lin {
    node: u32,
    node_time: u64,
    /// Deme (for a dormant lineage: the deme it wakes in).
    deme: usize,
    dormant: bool,
    wake: f64,
    /// Expected links since `node`, accrued up to `since`.
    links: f64,
    since: f64,
    /// Position in its list (active[deme] or dormant).
    slot: usize,
}

/// Live lineages: per-deme active lists and one dormant list, O(1) pick and removal.
struct State {
    lins: Vec<Lin>,
    active: Vec<Vec<usize>>,
    dormant: Vec<usize>,
    wake_total: f64,
}

impl State {
    fn add(&mut self, mut l: Lin) -> usize {
        let id = self.lins.len();
        let list = if l.dormant { &mut self.dormant } else { &mut self.active[l.deme] };
        l.slot = list.len();
        list.push(id);
        if l.dormant {
            self.wake_total += l.wake;
        }
        self.lins.push(l);
        id
    }

    fn remove(&mut self, id: usize) {
        let l = self.lins[id];
        let list = if l.dormant { &mut self.dormant } else { &mut self.active[l.deme] };
        list.swap_remove(l.slot);
        if let Some(&moved) = list.get(l.slot) {
            self.lins[moved].slot = l.slot;
        }
        if l.dormant {
            self.wake_total = if self.dormant.is_empty() { 0.0 } else { self.wake_total - l.wake };
        }
    }

    fn live(&self) -> usize {
        self.active.iter().map(Vec::len).sum::<usize>() + self.dormant.len()
    }
}

impl<'a> ApproxModel<'a> {
    /// Builds the model; errors when a deme is outside the domain (see [`DemeModel::of`]).
    pub fn new(scenario: &'a Scenario) -> Result<Self, ApproxError> {
        let demes = deme_models(scenario)?;
        let sizes: Vec<&[SizeEpoch]> = scenario.demes().iter().map(|d| d.size().epochs()).collect();
        let constant: Vec<Option<f64>> =
            sizes.iter().map(|e| (e.len() == 1 && e[0].growth == 0.0).then_some(e[0].size)).collect();
        let mig = scenario
            .migration()
            .epochs()
            .iter()
            .map(|ep| {
                let n = ep.n_demes();
                let mut out = Vec::with_capacity(n);
                let mut rows = Vec::with_capacity(n);
                for (d, model) in demes.iter().enumerate().take(n) {
                    let lr = model.link_rate();
                    let mut acc = 0.0;
                    let cum: Vec<(f64, usize)> = ep
                        .row(d)
                        .iter()
                        .map(|&(e, p)| {
                            acc += p * lr;
                            (acc, e)
                        })
                        .collect();
                    out.push(acc);
                    rows.push(cum);
                }
                MigEpoch { end: if ep.end() == u64::MAX { f64::INFINITY } else { ep.end() as f64 }, out, rows }
            })
            .collect();
        let samples = scenario.samples();
        let plain = match (demes.as_slice(), constant.as_slice()) {
            ([DemeModel::Kingman { mean, scale, .. }], [Some(size)])
                if samples.iter().all(|x| x.kind == SampleKind::Population && x.time == samples[0].time) =>
            {
                let sn = scale * size;
                let wait = (0..=samples.len()).map(|k| sn / (k * k.saturating_sub(1) / 2).max(1) as f64).collect();
                Some(Plain { link_rate: 1.0 / mean, wait })
            }
            _ => None,
        };
        Ok(ApproxModel {
            scenario,
            plain,
            demes,
            sizes,
            constant,
            mig,
            migrates: scenario.migration().is_active(),
            horizon: scenario.horizon() as f64,
            switch: None,
        })
    }

    /// The model run as the hybrid engine ([`crate::engine::hybrid`]): exact up to generation
    /// `switch`, this model after.
    pub fn with_switch(mut self, switch: u64) -> Self {
        self.switch = Some(switch);
        self
    }

    /// The hybrid's switch time, when the model runs as the hybrid engine.
    pub fn switch_time(&self) -> Option<u64> {
        self.switch
    }

    /// The limit model of each deme.
    pub fn demes(&self) -> &[DemeModel] {
        &self.demes
    }

    /// First time in [t, ∞) at which a deme with pair rate `rate` (pairs / s) coalesces, given
    /// an Exp(1) variable `e`: inverts the integrated hazard ∫ rate / N(u) du epoch by epoch.
    ///
    /// ```text
    /// constant N:      Δ = e N / rate
    /// N(u) = N(t) e^{-g (u - t)}:   H(Δ) = rate (e^{g Δ} - 1) / (g N(t)),   Δ = ln(1 + e g N(t) / rate) / g
    /// ```
    /// (g < 0 can leave the hazard bounded: then the next epoch, or never.)
    pub(crate) fn coal_time(&self, deme: usize, t: f64, rate: f64, mut e: f64) -> f64 {
        if let Some(n) = self.constant[deme] {
            return t + e * n / rate;
        }
        let epochs = self.sizes[deme];
        let mut idx = epochs.partition_point(|ep| ep.start as f64 <= t).max(1) - 1;
        let mut t = t;
        loop {
            let ep = &epochs[idx];
            let end = epochs.get(idx + 1).map_or(f64::INFINITY, |x| x.start as f64);
            let g = ep.growth;
            let n_t = ep.size * (-g * (t - ep.start as f64)).exp();
            if g == 0.0 {
                let dt = e * n_t / rate;
                if t + dt < end {
                    return t + dt;
                }
                e -= (end - t) * rate / n_t;
            } else {
                let x = e * g * n_t / rate;
                if x > -1.0 {
                    let dt = x.ln_1p() / g;
                    if t + dt < end {
                        return t + dt;
                    }
                }
                if end.is_infinite() {
                    return f64::INFINITY;
                }
                e -= rate * (g * (end - t)).exp_m1() / (g * n_t);
            }
            e = e.max(0.0);
            t = end;
            idx += 1;
        }
    }

    /// Brings a lineage's expected link count up to time t.
    #[inline]
    fn accrue(&self, l: &mut Lin, t: f64) {
        if !l.dormant {
            l.links += (t - l.since) * self.demes[l.deme].link_rate();
        }
        l.since = t;
    }

    pub(crate) fn mig_index(&self, t: f64) -> usize {
        if self.mig.len() == 1 { 0 } else { self.mig.partition_point(|e| e.end <= t).min(self.mig.len() - 1) }
    }

    /// The deme a lineage of deme `d` lands in for one link at time t (full row of M).
    pub(crate) fn link_deme<R: Rng + ?Sized>(&self, d: usize, t: f64, rng: &mut R) -> usize {
        if self.migrates { self.scenario.migration().parent_deme(d, t as u64, rng) } else { d }
    }

    /// Entry (time, lineage) of each sample, drawing seed ages where needed.
    fn entries<R: Rng + ?Sized>(&self, g: &mut Genealogy, rng: &mut R) -> Vec<(f64, Lin)> {
        let mut out = Vec::with_capacity(self.scenario.samples().len());
        for (i, s) in self.scenario.samples().iter().enumerate() {
            let node = g.add_node(Node { time: s.time, deme: s.deme, sample: Some(i as u32) });
            let t = s.time as f64;
            let base =
                Lin { node, node_time: s.time, deme: s.deme, dormant: false, wake: 0.0, links: 0.0, since: t, slot: 0 };
            let entry = match (s.kind, self.demes[s.deme]) {
                (SampleKind::Population, _) => (t, base),
                (SampleKind::Seedbank, DemeModel::Kingman { .. }) => {
                    let age = self.scenario.seed_age(s.deme, s.time).map_or(0, |a| a.sample(rng));
                    let to = self.link_deme(s.deme, t, rng);
                    let at = t + age as f64 + 1.0;
                    (at, Lin { deme: to, links: 1.0, since: at, ..base })
                }
                (SampleKind::Seedbank, DemeModel::SeedBank { wake, dormant_seed, .. }) => {
                    let to = self.link_deme(s.deme, t, rng);
                    if rng.random::<f64>() < dormant_seed {
                        (t, Lin { deme: to, dormant: true, wake, links: 1.0, ..base })
                    } else {
                        (t + 1.0, Lin { deme: to, links: 1.0, since: t + 1.0, ..base })
                    }
                }
            };
            out.push(entry);
        }
        // Stable: equal times keep sample order. Usually already sorted (all at time 0).
        if !out.is_sorted_by(|a, b| a.0 <= b.0) {
            out.sort_by(|a, b| a.0.total_cmp(&b.0));
        }
        out
    }

    /// Simulates one genealogy, drawing only from `rng`.
    pub fn simulate<R: Rng + ?Sized>(&self, rng: &mut R) -> Genealogy {
        if let Some(plain) = &self.plain {
            return self.simulate_plain(plain, rng);
        }
        let n_demes = self.demes.len();
        let mut g = Genealogy::with_samples(self.scenario.samples().len());
        let entries = self.entries(&mut g, rng);
        let n = entries.len();
        let mut st = State {
            lins: Vec::with_capacity(2 * n),
            active: (0..n_demes).map(|_| Vec::with_capacity(if n_demes == 1 { n } else { 0 })).collect(),
            dormant: Vec::new(),
            wake_total: 0.0,
        };
        let mut next = 0;
        let mut steps = 0u64;
        let mut t = entries.first().map_or(0.0, |e| e.0);
        loop {
            while next < entries.len() && entries[next].0 <= t {
                st.add(entries[next].1);
                next += 1;
            }
            if next == entries.len() && st.live() <= 1 {
                break;
            }
            let mi = self.mig_index(t);
            let mig = &self.mig[mi];
            let mut bp = entries.get(next).map_or(f64::INFINITY, |e| e.0);
            if self.migrates {
                bp = bp.min(mig.end);
            }
            // Coalescence: the earliest of the demes' candidate times.
            let (mut tc, mut cd) = (f64::INFINITY, 0);
            for d in 0..n_demes {
                let k = st.active[d].len();
                if k >= 2 {
                    let rate = (k * (k - 1) / 2) as f64 / self.demes[d].coal_scale();
                    let c = self.coal_time(d, t, rate, exp1(rng));
                    if c < tc {
                        (tc, cd) = (c, d);
                    }
                }
            }
            // Migration, sleeping and waking: constant rates until the next breakpoint.
            let mut other = st.wake_total.max(0.0);
            for d in 0..n_demes {
                let k = st.active[d].len() as f64;
                let sleep = if let DemeModel::SeedBank { sleep, .. } = self.demes[d] { sleep } else { 0.0 };
                other += k * (mig.out[d] + sleep);
            }
            let to = if other > 0.0 { t + exp1(rng) / other } else { f64::INFINITY };
            let tn = tc.min(to);
            if tn >= bp {
                if bp > self.horizon {
                    break;
                }
                t = bp;
                continue;
            }
            if tn > self.horizon {
                break;
            }
            t = tn;
            steps += 1;
            if tc <= to {
                self.coalesce(&mut st, &mut g, cd, t, rng);
            } else {
                self.switch(&mut st, mig, other * rng.random::<f64>(), t, rng);
            }
        }
        for d in 0..n_demes {
            for &id in &st.active[d] {
                g.add_root(st.lins[id].node);
            }
        }
        for &id in &st.dormant {
            g.add_root(st.lins[id].node);
        }
        for e in &entries[next..] {
            g.add_root(e.1.node);
        }
        g.sort_roots();
        g.set_steps(steps);
        g
    }

    /// Fast path for one deme of constant size under Kingman with every sample taken from the
    /// population at one time: the plain Kingman loop (the general loop gives the same law).
    fn simulate_plain<R: Rng + ?Sized>(&self, plain: &Plain, rng: &mut R) -> Genealogy {
        let samples = self.scenario.samples();
        let n = samples.len();
        let mut g = Genealogy::with_capacity(n, (2 * n).saturating_sub(1), (2 * n).saturating_sub(2));
        let t0 = samples[0].time;
        // Live lineages as (node, node time); the leaves are nodes 0..n.
        g.add_leaves(t0, 0, n as u32);
        let mut live: Vec<(u32, u64)> = (0..n as u32).map(|i| (i, t0)).collect();
        // round(len / E[R]) clamped to [1, len]; without dormancy (E[R] = 1) that is len.
        let unit = plain.link_rate == 1.0;
        let jumps = |len: u64| if unit { len } else { ((len as f64 * plain.link_rate + 0.5) as u64).clamp(1, len) };
        let mut t = t0 as f64;
        let mut steps = 0;
        while live.len() > 1 {
            let k = live.len();
            t += exp1(rng) * plain.wait[k];
            if t > self.horizon {
                break;
            }
            steps += 1;
            // u32 ranges: the same draws as usize ranges (rand samples those below 2^32 as u32).
            let i = rng.random_range(0..k as u32) as usize;
            let (na, ta) = live.swap_remove(i);
            let j = rng.random_range(0..(k - 1) as u32) as usize;
            let (nb, tb) = live[j];
            // t >= 0, so adding 1/2 and truncating rounds to the nearest generation.
            let time = ((t + 0.5) as u64).max(ta.max(tb) + 1);
            let (la, lb) = (time - ta, time - tb);
            let node = g.add_merge(Node { time, deme: 0, sample: None }, [(na, la, jumps(la)), (nb, lb, jumps(lb))]);
            live[j] = (node, time);
        }
        // Roots in node order; a tree has one root, so only a forest (horizon reached) sorts.
        if live.len() > 1 {
            live.sort_unstable();
        }
        for &(node, _) in &live {
            g.add_root(node);
        }
        g.set_steps(steps);
        g
    }

    /// Merges two random active lineages of deme d at time t.
    fn coalesce<R: Rng + ?Sized>(&self, st: &mut State, g: &mut Genealogy, d: usize, t: f64, rng: &mut R) {
        let k = st.active[d].len();
        let i = rng.random_range(0..k);
        let mut j = rng.random_range(0..k - 1);
        if j >= i {
            j += 1;
        }
        let (a, b) = (st.active[d][i], st.active[d][j]);
        let (mut la, mut lb) = (st.lins[a], st.lins[b]);
        self.accrue(&mut la, t);
        self.accrue(&mut lb, t);
        let time = (t.round().max(0.0) as u64).max(la.node_time.max(lb.node_time) + 1);
        let node = g.add_node(Node { time, deme: d, sample: None });
        for l in [la, lb] {
            let len = time - l.node_time;
            g.add_edge(node, l.node, (l.links.round().max(1.0) as u64).min(len));
        }
        st.remove(a);
        st.remove(b);
        st.add(Lin { node, node_time: time, deme: d, dormant: false, wake: 0.0, links: 0.0, since: t, slot: 0 });
    }

    /// Carries out the constant-rate event selected by `u` in [0, total rate).
    fn switch<R: Rng + ?Sized>(&self, st: &mut State, mig: &MigEpoch, mut u: f64, t: f64, rng: &mut R) {
        // Waking.
        if u < st.wake_total {
            let mut pick = *st.dormant.last().expect("a positive wake rate needs a dormant lineage");
            for &id in &st.dormant {
                if u < st.lins[id].wake {
                    pick = id;
                    break;
                }
                u -= st.lins[id].wake;
            }
            st.remove(pick);
            let mut l = st.lins[pick];
            l.dormant = false;
            l.since = t;
            l.wake = 0.0;
            st.lins[pick] = l;
            let list = &mut st.active[l.deme];
            st.lins[pick].slot = list.len();
            list.push(pick);
            return;
        }
        u -= st.wake_total.max(0.0);
        for d in 0..self.demes.len() {
            let k = st.active[d].len();
            if k == 0 {
                continue;
            }
            let sleep = if let DemeModel::SeedBank { sleep, .. } = self.demes[d] { sleep } else { 0.0 };
            let per = mig.out[d] + sleep;
            let total = k as f64 * per;
            if u >= total && d + 1 < self.demes.len() {
                u -= total;
                continue;
            }
            let which = ((u / per) as usize).min(k - 1);
            let r = u - which as f64 * per;
            let id = st.active[d][which];
            st.remove(id);
            let mut l = st.lins[id];
            self.accrue(&mut l, t);
            if r < mig.out[d] {
                let row = &mig.rows[d];
                l.deme = row.iter().find(|&&(c, _)| r < c).or(row.last()).map_or(d, |&(_, e)| e);
            } else if let DemeModel::SeedBank { wake, .. } = self.demes[d] {
                // One long link: its destination is drawn now, with the full row of M.
                l.links += 1.0;
                l.deme = self.link_deme(d, t, rng);
                l.dormant = true;
                l.wake = wake;
            }
            // Re-file the lineage under its new state.
            let list = if l.dormant { &mut st.dormant } else { &mut st.active[l.deme] };
            l.slot = list.len();
            list.push(id);
            if l.dormant {
                st.wake_total += l.wake;
            }
            st.lins[id] = l;
            return;
        }
    }
}

#[cfg(test)]
mod tests;
