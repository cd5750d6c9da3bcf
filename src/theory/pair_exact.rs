//! Exact law of the coalescence time of two sampled lineages in the discrete model, with
//! dormancy and migration counted per look-back: constant deme sizes, one migration matrix.
//!
//! Each look-back law is written as a discrete phase-type law (a countdown of the remaining
//! generations for a bounded law, one phase for a geometric law, the direct sum for a
//! mixture). A lineage between two parent picks is *in transit*: it knows the deme it will
//! land in (drawn from its child's row of M when it left) and the phase of its look-back. Each
//! generation it lands with the phase's exit probability, else moves to the next phase. On
//! landing in deme e at time t it is an individual of e; it leaves again at once with a new
//! phase (the start law of e's dormancy) and a new destination (row e of M). Two lineages
//! that land in the same deme in the same generation are the same individual with probability
//! 1/N_e. The pair of per-lineage states is a finite Markov chain; this module solves it:
//!
//! ```text
//! h(x) = 1 + Σ_y P(x → y, no coalescence) h(y)          (mean time, generations)
//! g(x) = ν(x) + Σ_y P(x → y, no coalescence) g(y)        (mean pairwise differences)
//! ```
//! with ν the expected mutations of both lineages in one generation (reproduction rate when
//! landing, dormant rate otherwise, per the mutation model). No approximation: the only
//! error is the floating-point solve. Samples: a population sample leaves its deme at its
//! time; a seed from the bank is in transit with the stationary residual phase (the renewal
//! age law P(A = a) = P(R > a)/E\[R], theory reference §3) and a destination drawn from M;
//! a younger lineage alone until an older sample's time may land on that sampled individual.

use super::error::TheoryError;
use super::linalg::solve;
use crate::dormancy::{Dormancy, LookBack};

/// Largest number of phases a law's representation may have.
pub const MAX_PHASES: usize = 40;

/// Largest number of reachable pair states solved for (a dense solve).
pub const MAX_PAIR_STATES: usize = 1200;

/// A discrete phase-type look-back law: start probabilities, exit probabilities, and moves
/// between phases (each row sums with its exit to 1).
#[derive(Debug, Clone)]
struct Phases {
    start: Vec<f64>,
    exit: Vec<f64>,
    stay: Vec<Vec<(usize, f64)>>,
}

impl Phases {
    fn len(&self) -> usize {
        self.exit.len()
    }

    /// Countdown: phase i means landing in i + 1 generations.
    fn countdown(pmf: &[f64]) -> Phases {
        let m = pmf.len();
        Phases {
            start: pmf.to_vec(),
            exit: (0..m).map(|i| f64::from(u8::from(i == 0))).collect(),
            stay: (0..m).map(|i| if i == 0 { Vec::new() } else { vec![(i - 1, 1.0)] }).collect(),
        }
    }

    /// The law's representation, or `None` when it has no small one (unbounded heavy tails,
    /// long bounded laws, time-dependent laws).
    fn of(law: &Dormancy) -> Option<Phases> {
        let out = match law {
            Dormancy::None => Phases::countdown(&[1.0]),
            Dormancy::Geometric(g) => Phases {
                start: vec![1.0],
                exit: vec![g.p()],
                stay: vec![if g.p() < 1.0 { vec![(0, 1.0 - g.p())] } else { vec![] }],
            },
            Dormancy::Mixture(m) => {
                let mut out = Phases { start: Vec::new(), exit: Vec::new(), stay: Vec::new() };
                for (w, part) in m.parts() {
                    if *w <= 0.0 {
                        continue;
                    }
                    let p = Phases::of(part)?;
                    let base = out.len();
                    out.start.extend(p.start.iter().map(|x| x * w));
                    out.exit.extend(p.exit);
                    out.stay.extend(p.stay.into_iter().map(|r| r.into_iter().map(|(j, q)| (j + base, q)).collect()));
                }
                out
            }
            Dormancy::SinceFounding(_) => return None,
            _ => {
                let max = law.max_lookback()? as usize;
                if max > MAX_PHASES {
                    return None;
                }
                Phases::countdown(&(1..=max as u64).map(|r| law.pmf(r)).collect::<Vec<_>>())
            }
        };
        (out.len() <= MAX_PHASES).then_some(out)
    }

    /// Expected visits to each phase per look-back, v = start (I - T)^{-1}; Σ v = E\[R].
    fn visits(&self) -> Option<Vec<f64>> {
        let p = self.len();
        // (I - T)^T v = start, row-major.
        let mut a = vec![0.0; p * p];
        for i in 0..p {
            a[i * p + i] += 1.0;
            for &(j, q) in &self.stay[i] {
                a[j * p + i] -= q;
            }
        }
        solve(a, p, self.start.clone(), 1)
    }
}

/// One generation of one lineage: the next per-lineage state, its probability, and the deme
/// it landed in (when it picked a parent in this generation).
#[derive(Debug, Clone, Copy)]
struct Move {
    to: usize,
    prob: f64,
    landed: Option<usize>,
}

/// Where a sampled lineage starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Entry {
    /// An individual of the population living at the sampling time.
    Population,
    /// A seed taken from the bank at the sampling time.
    Seedbank,
}

/// A sample class: deme, sampling time, and kind.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct SampleClass {
    /// Deme index.
    pub deme: usize,
    /// Generations before the present.
    pub time: u64,
    /// Population or seed bank.
    pub entry: Entry,
}

/// Expectations for a pair of sampled lineages.
#[derive(Debug, Clone, PartialEq)]
pub struct PairResult {
    /// E\[T] of the common ancestor, in generations before the present.
    pub mean_time: f64,
    /// E\[number of mutations separating the two sequences] (whole sequence), when a mutation
    /// model was given.
    pub mean_differences: Option<f64>,
}

/// The discrete two-lineage chain of a structured population with dormancy.
#[derive(Debug, Clone)]
pub struct DiscretePairChain {
    demes: usize,
    sizes: Vec<f64>,
    migration: Vec<Vec<f64>>,
    /// Phase offset of each deme's law in the union of phases, and its start/visit laws.
    law_of_deme: Vec<usize>,
    law_offset: Vec<usize>,
    law_start: Vec<Vec<f64>>,
    law_visits: Vec<Vec<f64>>,
    exit: Vec<f64>,
    moves: Vec<Vec<Move>>,
    /// Mutations (whole sequence) in a generation of reproduction and in a dormant one.
    mutation: Option<(f64, f64)>,
}

impl DiscretePairChain {
    /// Builds the chain. `laws[d]` and `sizes[d]` per deme, `migration[d][e]` = P(parent in e |
    /// child in d) (rows sum to 1), `mutation` = (reproduction, dormant) expected mutations
    /// per generation of the whole sequence.
    ///
    /// Errors when a law has no small phase-type form ([`MAX_PHASES`]: bounded laws up to 40
    /// generations, geometric laws, mixtures of those), or the inputs are inconsistent.
    pub fn new(
        laws: &[&Dormancy],
        sizes: &[f64],
        migration: &[Vec<f64>],
        mutation: Option<(f64, f64)>,
    ) -> Result<Self, TheoryError> {
        let d = laws.len();
        if d == 0 || sizes.len() != d || migration.len() != d || migration.iter().any(|r| r.len() != d) {
            return Err(TheoryError::MigrationMatrix { reason: "not a D x D matrix for D demes" });
        }
        for row in migration {
            if row.iter().any(|p| !(0.0..=1.0).contains(p)) || (row.iter().sum::<f64>() - 1.0).abs() > 1e-9 {
                return Err(TheoryError::MigrationMatrix { reason: "rows must be probability vectors" });
            }
        }
        for &n in sizes {
            super::error::check("deme size", n, "[1, inf)", |x| x >= 1.0)?;
        }
        // One phase block per distinct law (laws with the same parameters share a block).
        let mut keys: Vec<String> = Vec::new();
        let mut law_of_deme = Vec::with_capacity(d);
        let mut blocks: Vec<Phases> = Vec::new();
        for law in laws {
            if law.is_time_dependent() {
                return Err(TheoryError::TimeDependent);
            }
            let key = format!("{law:?}");
            let idx = match keys.iter().position(|k| *k == key) {
                Some(i) => i,
                None => {
                    let ph = Phases::of(law)
                        .ok_or(TheoryError::LookBack { max: law.max_lookback(), limit: MAX_PHASES as u64 })?;
                    keys.push(key);
                    blocks.push(ph);
                    blocks.len() - 1
                }
            };
            law_of_deme.push(idx);
        }
        let mut law_offset = Vec::new();
        let mut exit = Vec::new();
        let mut stay: Vec<Vec<(usize, f64)>> = Vec::new();
        let mut law_start = Vec::new();
        let mut law_visits = Vec::new();
        for b in &blocks {
            let base = exit.len();
            law_offset.push(base);
            exit.extend(&b.exit);
            stay.extend(b.stay.iter().map(|r| r.iter().map(|&(j, q)| (j + base, q)).collect()));
            law_start.push(b.start.clone());
            let v = b.visits().ok_or(TheoryError::Singular)?;
            let total: f64 = v.iter().sum();
            law_visits.push(v.iter().map(|x| x / total).collect());
        }
        let phases = exit.len();
        if phases * d > 64 {
            return Err(TheoryError::LookBack { max: Some(phases as u64), limit: (64 / d) as u64 });
        }
        let mut chain = DiscretePairChain {
            demes: d,
            sizes: sizes.to_vec(),
            migration: migration.to_vec(),
            law_of_deme,
            law_offset,
            law_start,
            law_visits,
            exit,
            moves: Vec::new(),
            mutation,
        };
        // Per-lineage moves: state = phase * D + destination.
        let mut moves = vec![Vec::new(); phases * d];
        for ph in 0..phases {
            for e in 0..d {
                let out = &mut moves[ph * d + e];
                for &(j, q) in &stay[ph] {
                    out.push(Move { to: j * d + e, prob: q, landed: None });
                }
                let x = chain.exit[ph];
                if x > 0.0 {
                    for (to, p) in chain.departure(e, false) {
                        out.push(Move { to, prob: x * p, landed: Some(e) });
                    }
                }
            }
        }
        chain.moves = moves;
        Ok(chain)
    }

    fn n_states(&self) -> usize {
        self.exit.len() * self.demes
    }

    /// Distribution of the state of a lineage leaving deme `e` (a new look-back and a parent
    /// deme), or of a seed of deme `e` in the bank (`seed`: stationary residual phase).
    fn departure(&self, e: usize, seed: bool) -> Vec<(usize, f64)> {
        let law = self.law_of_deme[e];
        let phases = if seed { &self.law_visits[law] } else { &self.law_start[law] };
        let mut out = Vec::new();
        for (i, &a) in phases.iter().enumerate() {
            if a == 0.0 {
                continue;
            }
            for (to, &m) in self.migration[e].iter().enumerate() {
                if m > 0.0 {
                    out.push(((self.law_offset[law] + i) * self.demes + to, a * m));
                }
            }
        }
        out
    }

    /// Expected mutations of one lineage in one generation from a per-lineage state.
    fn reward(&self, s: usize) -> f64 {
        let (repro, dormant) = self.mutation.unwrap_or((0.0, 0.0));
        let x = self.exit[s / self.demes];
        x * repro + (1.0 - x) * dormant
    }

    /// One generation of a lone lineage; returns the distribution and the mass that landed in
    /// each deme.
    fn step_one(&self, v: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let mut out = vec![0.0; v.len()];
        let mut landed = vec![0.0; self.demes];
        for (s, &x) in v.iter().enumerate() {
            if x == 0.0 {
                continue;
            }
            for m in &self.moves[s] {
                out[m.to] += x * m.prob;
                if let Some(e) = m.landed {
                    landed[e] += x * m.prob;
                }
            }
        }
        (out, landed)
    }

    /// The joint law of the two lineages when both exist (ordered pair index s1 * n + s2),
    /// the probability that they already met, and the mutations the first one carried alone,
    /// for classes `a` (older-or-equal time first after sorting) and `b`.
    fn start(&self, a: SampleClass, b: SampleClass, max_alone: u64) -> Option<(f64, Vec<f64>, f64, f64)> {
        let (a, b) = if a.time <= b.time { (a, b) } else { (b, a) };
        let n = self.n_states();
        let mut v = vec![0.0; n];
        for (s, p) in self.departure(a.deme, a.entry == Entry::Seedbank) {
            v[s] += p;
        }
        let gap = b.time - a.time;
        if gap > max_alone {
            return None;
        }
        let (mut met, mut alone) = (0.0, 0.0);
        for step in 0..gap {
            alone += v.iter().enumerate().map(|(s, x)| x * self.reward(s)).sum::<f64>();
            let (next, landed) = self.step_one(&v);
            v = next;
            if step + 1 == gap && b.entry == Entry::Population {
                // The lone lineage may land on the sampled individual itself (a sampled ancestor).
                let c = landed[b.deme] / self.sizes[b.deme];
                met = c;
                for (s, p) in self.departure(b.deme, false) {
                    v[s] -= c * p;
                }
            }
        }
        let mut x = vec![0.0; n * n];
        let second = self.departure(b.deme, b.entry == Entry::Seedbank);
        for (s1, &p1) in v.iter().enumerate() {
            if p1 <= 0.0 {
                continue;
            }
            for &(s2, p2) in &second {
                x[s1 * n + s2] += p1 * p2;
            }
        }
        Some((b.time as f64, x, met, alone))
    }

    /// Pair moves out of ordered pair state (s1, s2): (next pair, probability without
    /// coalescence, probability of coalescing).
    fn pair_moves(&self, s1: usize, s2: usize, mut f: impl FnMut(usize, f64, f64)) {
        let n = self.n_states();
        for m1 in &self.moves[s1] {
            for m2 in &self.moves[s2] {
                let p = m1.prob * m2.prob;
                let c = match (m1.landed, m2.landed) {
                    (Some(e1), Some(e2)) if e1 == e2 => p / self.sizes[e1],
                    _ => 0.0,
                };
                f(m1.to * n + m2.to, p - c, c);
            }
        }
    }

    /// E\[T] (generations before the present) and, with a mutation model, E\[π] for a pair of
    /// lineages from classes `a` and `b` (two distinct individuals when the classes are equal).
    ///
    /// Errors when the pair chain is too large ([`MAX_PAIR_STATES`]), a lineage waits alone
    /// more than `max_alone` generations, or the lineages can never meet (singular system).
    pub fn expectations(&self, a: SampleClass, b: SampleClass, max_alone: u64) -> Result<PairResult, TheoryError> {
        let (t0, x, met, alone) = self.start(a, b, max_alone).ok_or(TheoryError::Parameter {
            name: "gap between sampling times",
            value: a.time.abs_diff(b.time) as f64,
            allowed: "at most the lone-lineage limit",
        })?;
        let n = self.n_states();
        // Reachable pair states from the start.
        let mut index = vec![usize::MAX; n * n];
        let mut order: Vec<usize> = Vec::new();
        for (u, &p) in x.iter().enumerate() {
            if p > 0.0 {
                index[u] = order.len();
                order.push(u);
            }
        }
        let mut k = 0;
        while k < order.len() {
            let u = order[k];
            let mut found = Vec::new();
            self.pair_moves(u / n, u % n, |v, p, _| {
                if p > 0.0 && index[v] == usize::MAX {
                    found.push(v);
                }
            });
            for v in found {
                if index[v] == usize::MAX {
                    index[v] = order.len();
                    order.push(v);
                }
            }
            if order.len() > MAX_PAIR_STATES {
                return Err(TheoryError::LookBack { max: Some(order.len() as u64), limit: MAX_PAIR_STATES as u64 });
            }
            k += 1;
        }
        let m = order.len();
        let mut mat = vec![0.0; m * m];
        let mut rhs = vec![0.0; 2 * m];
        for (row, &u) in order.iter().enumerate() {
            let (s1, s2) = (u / n, u % n);
            mat[row * m + row] += 1.0;
            rhs[2 * row] = 1.0;
            rhs[2 * row + 1] = self.reward(s1) + self.reward(s2);
            self.pair_moves(s1, s2, |v, p, _| {
                if p > 0.0 {
                    mat[row * m + index[v]] -= p;
                }
            });
        }
        let h = if m == 0 { Vec::new() } else { solve(mat, m, rhs, 2).ok_or(TheoryError::Singular)? };
        let (mut time, mut diff) = (met * t0, alone);
        for (row, &u) in order.iter().enumerate() {
            let p = x[u];
            time += p * (t0 + h[2 * row]);
            diff += p * h[2 * row + 1];
        }
        Ok(PairResult { mean_time: time, mean_differences: self.mutation.map(|_| diff) })
    }

    /// Work (pair transitions) of one generation of the forward recursion of [`Self::quantiles`].
    pub fn step_work(&self) -> f64 {
        let counts: Vec<f64> = self.moves.iter().map(|m| m.len() as f64).collect();
        let total: f64 = counts.iter().sum();
        total * total
    }

    /// Quantiles of T (generations before the present) at the probabilities `qs` (increasing,
    /// in (0, 1)), by forward recursion generation by generation: the smallest t with
    /// P(T <= t) >= q. `None` when the work (generations × transitions) would exceed `budget`.
    pub fn quantiles(&self, a: SampleClass, b: SampleClass, qs: &[f64], budget: f64) -> Option<Vec<f64>> {
        let (t0, mut x, met, _) = self.start(a, b, u64::MAX / 4)?;
        let n = self.n_states();
        let mut out = Vec::with_capacity(qs.len());
        let mut cdf = met;
        let mut t = t0;
        let mut qi = 0;
        while qi < qs.len() && cdf >= qs[qi] {
            out.push(t);
            qi += 1;
        }
        let per_step = self.step_work();
        let mut work = 0.0;
        while qi < qs.len() {
            work += per_step;
            if work > budget {
                return None;
            }
            let mut next = vec![0.0; n * n];
            let mut absorbed = 0.0;
            for (u, &p) in x.iter().enumerate() {
                if p == 0.0 {
                    continue;
                }
                self.pair_moves(u / n, u % n, |v, q, c| {
                    next[v] += p * q;
                    absorbed += p * c;
                });
            }
            x = next;
            t += 1.0;
            cdf += absorbed;
            while qi < qs.len() && cdf >= qs[qi] {
                out.push(t);
                qi += 1;
            }
        }
        Some(out)
    }
}

#[cfg(test)]
mod tests {
    use super::super::structured;
    use super::*;
    use crate::dormancy::{Geometric, Table, Uniform};

    fn pop(deme: usize) -> SampleClass {
        SampleClass { deme, time: 0, entry: Entry::Population }
    }

    #[test]
    fn no_dormancy_matches_the_island_table() {
        // Source: theory reference §6 exact discrete chain (R = 1): D = 3, N = 50, m = 0.01:
        // T_within = 150 (Strobeck 1987), T_between = 98359/397 = 247.755668.
        let m = structured::island_migration_matrix(3, 0.01).unwrap();
        let none = Dormancy::None;
        let c = DiscretePairChain::new(&[&none, &none, &none], &[50.0; 3], &m, None).unwrap();
        let w = c.expectations(pop(0), pop(0), 0).unwrap().mean_time;
        let b = c.expectations(pop(0), pop(2), 0).unwrap().mean_time;
        assert!((w - 150.0).abs() < 1e-8, "{w}");
        assert!((b - 98359.0 / 397.0).abs() < 1e-8, "{b}");
    }

    #[test]
    fn one_deme_is_kkl_exact() {
        // Source: theory reference §3.2–3.3: E[T_2] = N E[R]^2/d and E[π] = 2 N E[R] E[ν_R]/d
        // exactly, for every N; uniform {1..4}: E[R] = 2.5; geometric mean 3: E[R] = 3;
        // table {2,4} (d = 2): E[R] = 3, E[T_2] = 4.5 N.
        let mu = (0.3, 0.07);
        for (law, mean, d) in [
            (Dormancy::Uniform(Uniform::new(4).unwrap()), 2.5, 1.0),
            (Dormancy::Geometric(Geometric::new(3.0).unwrap()), 3.0, 1.0),
            (Dormancy::Table(Table::new(&[0.0, 1.0, 0.0, 1.0]).unwrap()), 3.0, 2.0),
        ] {
            let c = DiscretePairChain::new(&[&law], &[10.0], &[vec![1.0]], Some(mu)).unwrap();
            let r = c.expectations(pop(0), pop(0), 0).unwrap();
            let want = 10.0 * mean * mean / d;
            assert!((r.mean_time - want).abs() < 1e-8 * want, "{law:?}: {} vs {want}", r.mean_time);
            let nu = mu.0 + mu.1 * (mean - 1.0);
            let pi = 2.0 * 10.0 * mean * nu / d;
            assert!((r.mean_differences.unwrap() - pi).abs() < 1e-8 * pi, "{law:?}");
        }
    }

    #[test]
    fn quantiles_match_the_gap_chain() {
        // The gap chain of two_lineage.rs is an independent computation of the same law
        // (one deme, bounded law); its pmf summed gives the CDF.
        let law = Dormancy::Uniform(Uniform::new(3).unwrap());
        let c = DiscretePairChain::new(&[&law], &[6.0], &[vec![1.0]], None).unwrap();
        let pmf = super::super::two_lineage::PairChain::new(&law, 6).unwrap().pmf(400);
        let qs = [0.05, 0.25, 0.5, 0.75, 0.95];
        let got = c.quantiles(pop(0), pop(0), &qs, 1e9).unwrap();
        let mut cdf = 0.0;
        let mut want = Vec::new();
        for (t, p) in pmf.iter().enumerate() {
            cdf += p;
            while want.len() < qs.len() && cdf >= qs[want.len()] {
                want.push(t as f64);
            }
        }
        assert_eq!(got, want);
    }

    #[test]
    fn ancient_sample_and_seed_by_hand() {
        // N = 1, no dormancy, one deme: the lone lineage always lands on the single individual,
        // so an older sample is its ancestor: T = the older time exactly. A seed of a law R = 1
        // has its parent one generation later: with N = 1, T = 1 with two seeds.
        let none = Dormancy::None;
        let c = DiscretePairChain::new(&[&none], &[1.0], &[vec![1.0]], None).unwrap();
        let old = SampleClass { deme: 0, time: 5, entry: Entry::Population };
        assert!((c.expectations(pop(0), old, 100).unwrap().mean_time - 5.0).abs() < 1e-12);
        let seed = SampleClass { deme: 0, time: 0, entry: Entry::Seedbank };
        assert!((c.expectations(seed, seed, 0).unwrap().mean_time - 1.0).abs() < 1e-12);
    }
}
