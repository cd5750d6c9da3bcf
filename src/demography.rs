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

/// A backward migration matrix valid for child times in `[start, end)`.
#[derive(Debug, Clone, PartialEq)]
pub struct MigrationEpoch {
    start: u64,
    end: u64,
    /// rows[d] = cumulative probabilities of the off-diagonal targets, with their demes.
    rows: Vec<Vec<(f64, usize)>>,
    matrix: Vec<Vec<f64>>,
}

impl MigrationEpoch {
    /// First child generation of the epoch.
    pub fn start(&self) -> u64 {
        self.start
    }
    /// End (exclusive) of the epoch; `u64::MAX` for the last one.
    pub fn end(&self) -> u64 {
        self.end
    }
    /// The full matrix M[d][e] (rows sum to 1).
    pub fn matrix(&self) -> &[Vec<f64>] {
        &self.matrix
    }
}

/// The backward migration process: piecewise-constant matrices M[d][e] = P(parent in e |
/// child in d), per generation of the child.
#[derive(Debug, Clone, PartialEq)]
pub struct Migration {
    epochs: Vec<MigrationEpoch>,
    any: bool,
}

impl Migration {
    /// No migration among `n_demes` demes.
    pub fn none(n_demes: usize) -> Self {
        Migration::from_matrices(vec![(0, u64::MAX, identity(n_demes))])
    }

    /// Builds from (start, end, matrix) pieces covering [0, inf) in order; each matrix's
    /// rows must sum to 1 (checked by the scenario parser).
    pub(crate) fn from_matrices(pieces: Vec<(u64, u64, Vec<Vec<f64>>)>) -> Self {
        let mut any = false;
        let epochs = pieces
            .into_iter()
            .map(|(start, end, matrix)| {
                let rows = matrix
                    .iter()
                    .enumerate()
                    .map(|(d, row)| {
                        let mut acc = 0.0;
                        row.iter()
                            .enumerate()
                            .filter(|&(e, &p)| e != d && p > 0.0)
                            .map(|(e, &p)| {
                                acc += p;
                                (acc, e)
                            })
                            .collect::<Vec<_>>()
                    })
                    .collect::<Vec<_>>();
                any |= rows.iter().any(|r| !r.is_empty());
                MigrationEpoch { start, end, rows, matrix }
            })
            .collect();
        Migration { epochs, any }
    }

    /// Whether any lineage can ever change deme.
    pub fn is_active(&self) -> bool {
        self.any
    }

    /// The epochs in time order.
    pub fn epochs(&self) -> &[MigrationEpoch] {
        &self.epochs
    }

    /// The matrix in force for a child living at time `t`.
    pub fn matrix_at(&self, t: u64) -> &[Vec<f64>] {
        &self.epochs[self.epoch_index(t)].matrix
    }

    fn epoch_index(&self, t: u64) -> usize {
        if self.epochs.len() == 1 { 0 } else { self.epochs.partition_point(|e| e.end <= t).min(self.epochs.len() - 1) }
    }

    /// Draws the deme of the parent of a child of deme `d` living at time `t`.
    #[inline]
    pub fn parent_deme<R: Rng + ?Sized>(&self, d: usize, t: u64, rng: &mut R) -> usize {
        let row = &self.epochs[self.epoch_index(t)].rows[d];
        if row.is_empty() {
            return d;
        }
        let u: f64 = rng.random();
        for &(cum, e) in row {
            if u < cum {
                return e;
            }
        }
        d
    }
}

fn identity(n: usize) -> Vec<Vec<f64>> {
    (0..n).map(|d| (0..n).map(|e| f64::from(u8::from(d == e))).collect()).collect()
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
