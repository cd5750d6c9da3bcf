//! Deme sizes through time and the backward migration matrix.
//!
//! Both are piecewise in time (generations before the present). They are built from a
//! validated scenario and only answer questions: the number of individuals of deme e at
//! time s, and the deme of a parent drawn for a child of deme d at time t.

use rand::{Rng, RngExt};

/// One epoch of a deme's size: from `start` generations ago (inclusive) until the next
/// epoch, `N(t) = size * exp(-growth * (t - start))`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SizeEpoch {
    /// First generation (back in time) of the epoch.
    pub start: u64,
    /// Size at `start`.
    pub size: f64,
    /// Exponential growth rate forward in time (so the size shrinks going back when > 0).
    pub growth: f64,
}

/// The size history N_d(t) of one deme.
///
/// The real-valued size is rounded to the nearest integer and never below 1 individual, so
/// that a parent always exists.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeHistory {
    epochs: Vec<SizeEpoch>,
    constant: Option<u64>,
}

impl SizeHistory {
    /// A constant size.
    pub fn constant(size: u64) -> Self {
        let size = size.max(1);
        SizeHistory { epochs: vec![SizeEpoch { start: 0, size: size as f64, growth: 0.0 }], constant: Some(size) }
    }

    /// Epochs sorted by start, the first starting at 0 (checked by the scenario parser).
    pub(crate) fn from_epochs(epochs: Vec<SizeEpoch>) -> Self {
        debug_assert!(epochs.first().is_some_and(|e| e.start == 0));
        debug_assert!(epochs.windows(2).all(|w| w[0].start < w[1].start));
        let constant = if epochs.iter().all(|e| e.growth == 0.0 && e.size == epochs[0].size) {
            Some(round_size(epochs[0].size))
        } else {
            None
        };
        SizeHistory { epochs, constant }
    }

    /// The epochs.
    pub fn epochs(&self) -> &[SizeEpoch] {
        &self.epochs
    }

    /// `Some(N)` when the size never changes.
    pub fn as_constant(&self) -> Option<u64> {
        self.constant
    }

    /// Number of individuals at time `t`.
    #[inline]
    pub fn at(&self, t: u64) -> u64 {
        if let Some(n) = self.constant {
            return n;
        }
        let idx = self.epochs.partition_point(|e| e.start <= t) - 1;
        let e = &self.epochs[idx];
        if e.growth == 0.0 { round_size(e.size) } else { round_size(e.size * (-e.growth * (t - e.start) as f64).exp()) }
    }
}

fn round_size(x: f64) -> u64 {
    // Cap far below u64::MAX: the engine draws uniformly among N individuals.
    if x.is_nan() { 1 } else { x.round().clamp(1.0, 1.0e18) as u64 }
}

/// A backward migration process valid for child times in `[start, end)`, stored sparsely:
/// only the positive off-diagonal rates of each row.
#[derive(Debug, Clone)]
pub struct MigrationEpoch {
    start: u64,
    end: u64,
    /// rows[d] = (deme e, M[d][e]) for e != d with M[d][e] > 0, sorted by e.
    rates: Vec<Vec<(usize, f64)>>,
    /// rows[d] = cumulative probabilities of the same targets, with their demes.
    cumulative: Vec<Vec<(f64, usize)>>,
    /// The dense matrix, built on first use by [`MigrationEpoch::matrix`].
    dense: std::sync::OnceLock<Vec<Vec<f64>>>,
}

impl PartialEq for MigrationEpoch {
    fn eq(&self, other: &Self) -> bool {
        self.start == other.start && self.end == other.end && self.rates == other.rates
    }
}

/// Largest number of demes for which [`MigrationEpoch::matrix`] is cheap to build and print.
pub const SMALL_MATRIX: usize = 12;

impl MigrationEpoch {
    /// First child generation of the epoch.
    pub fn start(&self) -> u64 {
        self.start
    }
    /// End (exclusive) of the epoch; `u64::MAX` for the last one.
    pub fn end(&self) -> u64 {
        self.end
    }
    /// Number of demes.
    pub fn n_demes(&self) -> usize {
        self.rates.len()
    }
    /// The positive off-diagonal rates of row `from`: (deme e, M[from][e]), sorted by e.
    pub fn row(&self, from: usize) -> &[(usize, f64)] {
        &self.rates[from]
    }
    /// M[from][to]: the probability that the parent of a child of deme `from` lives in `to`.
    pub fn rate(&self, from: usize, to: usize) -> f64 {
        let row = &self.rates[from];
        if from == to {
            return (1.0 - row.iter().map(|&(_, p)| p).sum::<f64>()).max(0.0);
        }
        row.binary_search_by_key(&to, |&(e, _)| e).map_or(0.0, |i| row[i].1)
    }
    /// Number of positive off-diagonal rates.
    pub fn n_rates(&self) -> usize {
        self.rates.iter().map(Vec::len).sum()
    }
    /// The full matrix M[d][e] (rows sum to 1), built on first use: D² numbers, so prefer
    /// [`MigrationEpoch::row`] and [`MigrationEpoch::rate`] when there are many demes.
    pub fn matrix(&self) -> &[Vec<f64>] {
        self.dense.get_or_init(|| {
            let n = self.rates.len();
            (0..n).map(|d| (0..n).map(|e| self.rate(d, e)).collect()).collect()
        })
    }
}

/// The backward migration process: piecewise-constant matrices M[d][e] = P(parent in e |
/// child in d), per generation of the child, stored as sparse rows.
#[derive(Debug, Clone, PartialEq)]
pub struct Migration {
    epochs: Vec<MigrationEpoch>,
    any: bool,
    reach: Option<Reach>,
}

/// A sparse migration row: (target deme, rate) pairs of one source deme.
pub type SparseRow = Vec<(usize, f64)>;

impl Migration {
    /// No migration among `n_demes` demes.
    pub fn none(n_demes: usize) -> Self {
        Migration::from_sparse(vec![(0, u64::MAX, vec![Vec::new(); n_demes])])
    }

    /// Builds from (start, end, matrix) pieces covering [0, inf) in order; each matrix's
    /// rows must sum to 1 (checked by the scenario parser).
    #[cfg(test)]
    pub(crate) fn from_matrices(pieces: Vec<(u64, u64, Vec<Vec<f64>>)>) -> Self {
        let sparse = pieces
            .into_iter()
            .map(|(start, end, m)| {
                let rows = m
                    .iter()
                    .enumerate()
                    .map(|(d, row)| {
                        row.iter().enumerate().filter(|&(e, &p)| e != d && p > 0.0).map(|(e, &p)| (e, p)).collect()
                    })
                    .collect();
                (start, end, rows)
            })
            .collect();
        Migration::from_sparse(sparse)
    }

    /// Builds from (start, end, rows) pieces covering [0, inf) in order, where rows[d] lists
    /// the off-diagonal (deme, rate) pairs of deme d; staying put takes the rest of the row.
    pub(crate) fn from_sparse(pieces: Vec<(u64, u64, Vec<SparseRow>)>) -> Self {
        let mut any = false;
        let epochs: Vec<MigrationEpoch> = pieces
            .into_iter()
            .map(|(start, end, mut rates)| {
                for (d, row) in rates.iter_mut().enumerate() {
                    row.retain(|&(e, p)| e != d && p > 0.0);
                    row.sort_unstable_by_key(|&(e, _)| e);
                }
                let cumulative = rates
                    .iter()
                    .map(|row| {
                        let mut acc = 0.0;
                        row.iter()
                            .map(|&(e, p)| {
                                acc += p;
                                (acc, e)
                            })
                            .collect::<Vec<_>>()
                    })
                    .collect::<Vec<_>>();
                any |= cumulative.iter().any(|r| !r.is_empty());
                MigrationEpoch { start, end, rates, cumulative, dense: std::sync::OnceLock::new() }
            })
            .collect();
        let reach = Reach::new(&epochs);
        Migration { epochs, any, reach }
    }

    /// Whether any lineage can ever change deme.
    pub fn is_active(&self) -> bool {
        self.any
    }

    /// The epochs in time order.
    pub fn epochs(&self) -> &[MigrationEpoch] {
        &self.epochs
    }

    /// The epoch in force for a child living at time `t`.
    pub fn epoch_at(&self, t: u64) -> &MigrationEpoch {
        &self.epochs[self.epoch_index(t)]
    }

    /// The matrix in force for a child living at time `t` (dense; see
    /// [`MigrationEpoch::matrix`]).
    pub fn matrix_at(&self, t: u64) -> &[Vec<f64>] {
        self.epochs[self.epoch_index(t)].matrix()
    }

    /// M[from][to] for a child living at time `t`.
    pub fn rate(&self, from: usize, to: usize, t: u64) -> f64 {
        self.epochs[self.epoch_index(t)].rate(from, to)
    }

    fn epoch_index(&self, t: u64) -> usize {
        if self.epochs.len() == 1 { 0 } else { self.epochs.partition_point(|e| e.end <= t).min(self.epochs.len() - 1) }
    }

    /// Draws the deme of the parent of a child of deme `d` living at time `t`.
    #[inline]
    pub fn parent_deme<R: Rng + ?Sized>(&self, d: usize, t: u64, rng: &mut R) -> usize {
        let row = &self.epochs[self.epoch_index(t)].cumulative[d];
        if row.is_empty() {
            return d;
        }
        let u: f64 = rng.random();
        if row.len() > 16 {
            // Long rows (many demes): binary search over the cumulative probabilities.
            let i = row.partition_point(|&(cum, _)| cum <= u);
            return row.get(i).map_or(d, |&(_, e)| e);
        }
        for &(cum, e) in row {
            if u < cum {
                return e;
            }
        }
        d
    }

    /// Whether lineages in deme `d1` at time `t1` and deme `d2` at time `t2` can ever be in
    /// the same deme at the same time, going back. `true` when it cannot be ruled out (also
    /// when the scenario is too large for the reachability table).
    pub fn may_meet(&self, d1: usize, t1: u64, d2: usize, t2: u64) -> bool {
        match &self.reach {
            None => true,
            Some(r) => r.intersect(self.epoch_index(t1), d1, self.epoch_index(t2), d2),
        }
    }

    /// Whether [`Migration::may_meet`] can ever answer `false`.
    pub fn has_reachability(&self) -> bool {
        self.reach.is_some()
    }

    /// The first epoch start after `t` (`u64::MAX` when none), when reachability may shrink.
    pub fn next_epoch_start(&self, t: u64) -> u64 {
        let i = self.epoch_index(t);
        self.epochs.get(i + 1).map_or(u64::MAX, |e| e.start)
    }

    /// Groups of the demes in `demes` whose lineages (all at time 0) may meet: the connected
    /// components of [`Migration::may_meet`], each a sorted list of positions in `demes`.
    pub fn meeting_groups(&self, demes: &[(usize, u64)]) -> Vec<Vec<usize>> {
        let n = demes.len();
        let mut group: Vec<usize> = (0..n).collect();
        fn find(g: &mut [usize], mut i: usize) -> usize {
            while g[i] != i {
                g[i] = g[g[i]];
                i = g[i];
            }
            i
        }
        for a in 0..n {
            for b in a + 1..n {
                let (ra, rb) = (find(&mut group, a), find(&mut group, b));
                if ra != rb && self.may_meet(demes[a].0, demes[a].1, demes[b].0, demes[b].1) {
                    group[ra.max(rb)] = ra.min(rb);
                }
            }
        }
        let mut out: Vec<Vec<usize>> = Vec::new();
        let mut root_of: Vec<usize> = Vec::new();
        for i in 0..n {
            let r = find(&mut group, i);
            match root_of.iter().position(|&x| x == r) {
                Some(k) => out[k].push(i),
                None => {
                    root_of.push(r);
                    out.push(vec![i]);
                }
            }
        }
        out
    }
}

/// For every epoch k and deme d, the demes a lineage in d during epoch k can ever reach
/// (itself included), as bitsets. An over-approximation: each epoch is assumed long enough
/// for any path through its migration graph, and dormancy may skip epochs (which only
/// shrinks the true set), so two lineages whose sets are disjoint can never meet.
#[derive(Debug, Clone, PartialEq)]
struct Reach {
    words: usize,
    n_demes: usize,
    /// bits[(k * n_demes + d) * words ..][..words].
    bits: Vec<u64>,
}

/// Largest reachability table built (in 64-bit words, 32 MB).
const MAX_REACH_WORDS: usize = 1 << 22;

impl Reach {
    fn new(epochs: &[MigrationEpoch]) -> Option<Reach> {
        let n = epochs.first()?.rates.len();
        let words = n.div_ceil(64).max(1);
        if epochs.len().checked_mul(n)?.checked_mul(words)? > MAX_REACH_WORDS {
            return None;
        }
        let mut bits = vec![0u64; epochs.len() * n * words];
        let mut stack = Vec::new();
        let mut seen = vec![false; n];
        for k in (0..epochs.len()).rev() {
            for d in 0..n {
                // Demes reachable from d inside epoch k (depth-first over the sparse rows).
                seen.iter_mut().for_each(|s| *s = false);
                stack.clear();
                stack.push(d);
                seen[d] = true;
                let mut closure = Vec::new();
                while let Some(x) = stack.pop() {
                    closure.push(x);
                    for &(e, _) in &epochs[k].rates[x] {
                        if !seen[e] {
                            seen[e] = true;
                            stack.push(e);
                        }
                    }
                }
                let at = (k * n + d) * words;
                for &x in &closure {
                    bits[at + x / 64] |= 1 << (x % 64);
                    if k + 1 < epochs.len() {
                        let from = ((k + 1) * n + x) * words;
                        for w in 0..words {
                            bits[at + w] |= bits[from + w];
                        }
                    }
                }
            }
        }
        Some(Reach { words, n_demes: n, bits })
    }

    fn intersect(&self, k1: usize, d1: usize, k2: usize, d2: usize) -> bool {
        let a = (k1 * self.n_demes + d1) * self.words;
        let b = (k2 * self.n_demes + d2) * self.words;
        (0..self.words).any(|w| self.bits[a + w] & self.bits[b + w] != 0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn piecewise_sizes() {
        let h = SizeHistory::from_epochs(vec![
            SizeEpoch { start: 0, size: 1500.0, growth: 0.0 },
            SizeEpoch { start: 500, size: 8000.0, growth: 0.001 },
        ]);
        assert_eq!(h.at(0), 1500);
        assert_eq!(h.at(499), 1500);
        assert_eq!(h.at(500), 8000);
        // N(t) = 8000 exp(-0.001 (t - 500)): at t = 1500, 8000/e = 2943.03.
        assert_eq!(h.at(1500), 2943);
        assert_eq!(h.at(u64::MAX / 2), 1);
        assert_eq!(h.as_constant(), None);
        assert_eq!(SizeHistory::constant(7).as_constant(), Some(7));
    }

    #[test]
    fn sparse_rows_answer_as_the_dense_matrix() {
        // Row a: 0.25 to b, 0.05 to c, stays with 1 - 0.3 = 0.7; row b: never leaves.
        let m = Migration::from_sparse(vec![(0, u64::MAX, vec![vec![(2, 0.05), (1, 0.25)], vec![], vec![(0, 0.5)]])]);
        assert!((m.rate(0, 0, 7) - 0.7).abs() < 1e-15);
        assert_eq!(m.rate(0, 1, 7), 0.25);
        assert_eq!(m.rate(1, 0, 7), 0.0);
        assert_eq!(m.rate(1, 1, 7), 1.0);
        let dense = m.matrix_at(0);
        assert_eq!(dense[2], vec![0.5, 0.0, 0.5]);
        assert!(dense.iter().all(|r| (r.iter().sum::<f64>() - 1.0).abs() < 1e-12));
        assert_eq!(m.epoch_at(0).row(0), [(1, 0.25), (2, 0.05)]);
        assert_eq!(m.epoch_at(0).n_rates(), 3);
        // A long row is searched by bisection: same frequencies as the linear scan.
        let row: Vec<(usize, f64)> = (1..40).map(|e| (e, 0.01)).collect();
        let mut rows = vec![Vec::new(); 40];
        rows[0] = row;
        let m = Migration::from_sparse(vec![(0, u64::MAX, rows)]);
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(2);
        let n = 200_000;
        let stay = (0..n).filter(|_| m.parent_deme(0, 0, &mut rng) == 0).count() as f64;
        // Binomial(n, 0.61): sd = 218; 5 sd.
        assert!((stay - 0.61 * n as f64).abs() < 1090.0, "{stay}");
    }

    #[test]
    fn reachability_follows_the_epochs() {
        // a -> b only for child times [0, 10); b -> c from 100 on; d never connected.
        let m = Migration::from_sparse(vec![
            (0, 10, vec![vec![(1, 0.1)], vec![], vec![], vec![]]),
            (10, 100, vec![vec![], vec![], vec![], vec![]]),
            (100, u64::MAX, vec![vec![], vec![(2, 0.1)], vec![], vec![]]),
        ]);
        assert!(m.may_meet(0, 0, 1, 0), "a reaches b before 10");
        assert!(m.may_meet(0, 0, 2, 0), "a -> b, later b -> c");
        assert!(!m.may_meet(0, 10, 1, 10), "after 10 a is stuck in a");
        assert!(m.may_meet(1, 50, 2, 50), "b reaches c from 100 on");
        assert!(!m.may_meet(3, 0, 0, 0) && !m.may_meet(3, 0, 2, 0));
        assert_eq!(m.next_epoch_start(5), 10);
        assert_eq!(m.next_epoch_start(100), u64::MAX);
        let groups = m.meeting_groups(&[(0, 0), (2, 0), (3, 0), (1, 20)]);
        assert_eq!(groups, vec![vec![0, 1, 3], vec![2]]);
    }

    #[test]
    fn migration_frequencies() {
        let m = Migration::from_matrices(vec![
            (0, 100, vec![vec![0.7, 0.3], vec![0.0, 1.0]]),
            (100, u64::MAX, vec![vec![1.0, 0.0], vec![0.0, 1.0]]),
        ]);
        assert!(m.is_active());
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(5);
        let n = 100_000;
        let moved = (0..n).filter(|_| m.parent_deme(0, 50, &mut rng) == 1).count() as f64;
        // Binomial(n, 0.3): sd = 145; 5 sd.
        assert!((moved - 30_000.0).abs() < 725.0, "{moved}");
        assert!((0..1000).all(|_| m.parent_deme(0, 100, &mut rng) == 0));
        assert!((0..1000).all(|_| m.parent_deme(1, 5, &mut rng) == 1));
        assert!(!Migration::none(3).is_active());
    }
}
