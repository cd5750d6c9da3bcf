//! Expected pair coalescence times in a structured population: the exact discrete
//! two-lineage chain for D demes of sizes N_d with a backward migration matrix.
//!
//! Each generation both lineages independently pick the deme of their parent from their
//! row of M (M\[i]\[k] = P(parent in deme k | lineage in deme i)); if they land in the same
//! deme k they pick the same parent with probability 1/N_k. No dormancy: with dormancy a
//! lineage draws its parent's deme once per look-back, not once per generation, so scaling
//! these times by E\[R]²/d is wrong; [`super::pair_exact`] solves that model exactly.

use super::error::TheoryError;
use super::linalg::solve;

/// Expected coalescence times E\[T(i, j)] in generations for two lineages sampled in demes
/// i and j (distinct individuals when i = j).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PairTimes {
    demes: usize,
    /// Row-major symmetric D × D matrix.
    times: Vec<f64>,
}

impl PairTimes {
    /// Number of demes D.
    pub fn demes(&self) -> usize {
        self.demes
    }

    /// E\[T(i, j)]. Panics when a deme index is out of range.
    pub fn get(&self, i: usize, j: usize) -> f64 {
        assert!(i < self.demes && j < self.demes, "deme index out of range");
        self.times[i * self.demes + j]
    }

    /// Hudson's F_ST expected from pair times of demes i and j under infinite sites.
    ///
    /// ```text
    /// F_ST = 1 - H_w/H_b ≈ 1 - ((T(i,i) + T(j,j))/2) / T(i,j)
    /// ```
    /// (Hudson, Slatkin & Maddison 1992; ratio of expectations, theory reference §6.)
    pub fn fst(&self, i: usize, j: usize) -> f64 {
        1.0 - 0.5 * (self.get(i, i) + self.get(j, j)) / self.get(i, j)
    }
}

/// Index of the unordered pair (i <= j) among D(D+1)/2.
fn pair_index(i: usize, j: usize, d: usize) -> usize {
    let (i, j) = if i <= j { (i, j) } else { (j, i) };
    i * d - i * (i + 1) / 2 + j
}

/// Largest number of demes of [`pair_coalescence_times`]: D(D+1)/2 = 820 unknowns, a dense
/// system of 5 MB solved in about 10^9 operations.
pub const MAX_DEMES: usize = 40;

/// Exact E\[T(i, j)] for all pairs of demes, by solving the first-step equations.
///
/// ```text
/// T(i,j) = 1 + Σ_{k,l} M[i][k] M[j][l] · (k = l ? (1 - 1/N_k) T(k,k) : T(k,l))
/// ```
/// One dense solve of D(D+1)/2 unknowns: O(D⁶) time, fine for D up to a few tens.
/// Errors: no deme, a size < 1, M not D × D, an entry outside [0, 1], a row not summing to 1
/// (tolerance 1e-9), or a singular system (some pairs can never meet).
pub fn pair_coalescence_times(sizes: &[f64], migration: &[Vec<f64>]) -> Result<PairTimes, TheoryError> {
    let d = sizes.len();
    if d == 0 {
        return Err(TheoryError::MigrationMatrix { reason: "no deme" });
    }
    for &n in sizes {
        super::error::check("deme size", n, "[1, inf)", |x| x >= 1.0)?;
    }
    if d > MAX_DEMES {
        return Err(TheoryError::MigrationMatrix {
            reason: "more than MAX_DEMES demes: the dense pair-time system would not fit in memory",
        });
    }
    if migration.len() != d || migration.iter().any(|r| r.len() != d) {
        return Err(TheoryError::MigrationMatrix { reason: "not a D x D matrix for D deme sizes" });
    }
    for row in migration {
        if row.iter().any(|&p| !(0.0..=1.0).contains(&p)) {
            return Err(TheoryError::MigrationMatrix { reason: "entries must lie in [0, 1]" });
        }
        if (row.iter().sum::<f64>() - 1.0).abs() > 1e-9 {
            return Err(TheoryError::MigrationMatrix { reason: "rows must sum to 1" });
        }
    }
    let p = d * (d + 1) / 2;
    let mut a = vec![0.0; p * p];
    let mut rhs = vec![1.0; p];
    for i in 0..d {
        for j in i..d {
            let row = pair_index(i, j, d);
            a[row * p + row] += 1.0;
            for k in 0..d {
                let mik = migration[i][k];
                if mik == 0.0 {
                    continue;
                }
                for l in 0..d {
                    let w = mik * migration[j][l];
                    if w == 0.0 {
                        continue;
                    }
                    let stay = if k == l { 1.0 - 1.0 / sizes[k] } else { 1.0 };
                    a[row * p + pair_index(k, l, d)] -= w * stay;
                }
            }
        }
    }
    let x = solve(a, p, std::mem::take(&mut rhs), 1).ok_or(TheoryError::Singular)?;
    let mut times = vec![0.0; d * d];
    for i in 0..d {
        for j in 0..d {
            times[i * d + j] = x[pair_index(i, j, d)];
        }
    }
    Ok(PairTimes { demes: d, times })
}

/// Backward migration matrix of the symmetric island model: stay with probability 1 - m,
/// move to each other deme with probability m/(D-1). Needs D >= 1 and m in [0, 1]
/// (m must be 0 when D = 1).
pub fn island_migration_matrix(demes: usize, m: f64) -> Result<Vec<Vec<f64>>, TheoryError> {
    super::error::check("m", m, "[0, 1]", |x| (0.0..=1.0).contains(&x))?;
    if demes == 0 || (demes == 1 && m > 0.0) {
        return Err(TheoryError::MigrationMatrix { reason: "the island model needs D >= 2 demes when m > 0" });
    }
    let off = if demes > 1 { m / (demes - 1) as f64 } else { 0.0 };
    Ok((0..demes).map(|i| (0..demes).map(|k| if i == k { 1.0 - m } else { off }).collect()).collect())
}

/// Continuous-time approximation of the island model's between-deme pair time.
///
/// ```text
/// E[T_between] ≈ D N + (D - 1)/(2m)   generations;   E[T_within] = D N (exact)
/// ```
/// (Strobeck 1987; Slatkin 1991; theory reference §6.)
pub fn island_between_continuous(demes: usize, pop_size: f64, m: f64) -> f64 {
    let d = demes as f64;
    d * pop_size + (d - 1.0) / (2.0 * m)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pair_index_is_a_bijection() {
        for d in 1..6 {
            let mut seen = vec![false; d * (d + 1) / 2];
            for i in 0..d {
                for j in i..d {
                    let k = pair_index(i, j, d);
                    assert!(!seen[k]);
                    seen[k] = true;
                    assert_eq!(k, pair_index(j, i, d));
                }
            }
            assert!(seen.iter().all(|&s| s));
        }
    }

    #[test]
    fn island_model_table() {
        // Source: theory reference §6 exact discrete chain table (T_within, T_between, F_ST),
        // and §9 item 6 closed form T_between = ND - D + 1/a_X.
        for (d, n, m, tw, tb, tc, fst) in [
            (3usize, 50.0, 0.01, 150.0, 247.755668, 250.0, 0.394565),
            (2, 100.0, 0.01, 200.0, 248.505051, 250.0, 0.195187),
            (5, 20.0, 0.05, 100.0, 136.290323, 140.0, 0.266272),
            (3, 50.0, 0.1, 150.0, 157.810811, 160.0, 0.049495),
            (10, 100.0, 0.001, 1000.0, 5492.501390, 5500.0, 0.817934),
        ] {
            let t = pair_coalescence_times(&vec![n; d], &island_migration_matrix(d, m).unwrap()).unwrap();
            assert!((t.get(0, 0) - tw).abs() < 1e-7 * tw, "D={d}: {}", t.get(0, 0));
            assert!((t.get(0, 1) - tb).abs() < 1e-6, "D={d}: {}", t.get(0, 1));
            assert!((t.fst(0, 1) - fst).abs() < 1e-6, "D={d}");
            let df = d as f64;
            let ax = 2.0 * m * (1.0 - m) / (df - 1.0) + m * m * (df - 2.0) / ((df - 1.0) * (df - 1.0));
            assert!((t.get(0, 1) - (n * df - df + 1.0 / ax)).abs() < 1e-7 * tb);
            // Continuous approximation column of the §6 table.
            assert!((island_between_continuous(d, n, m) - tc).abs() < 1e-9 * tc);
        }
        // The headline case as a rational: 98359/397.
        let t = pair_coalescence_times(&[50.0; 3], &island_migration_matrix(3, 0.01).unwrap()).unwrap();
        assert!((t.get(2, 1) - 98359.0 / 397.0).abs() < 1e-8);
        assert_eq!(island_between_continuous(3, 50.0, 0.01), 250.0);
    }

    #[test]
    fn asymmetric_case_by_hand() {
        // Every parent comes from deme 0 (sizes 7 and 3): after one generation both lineages
        // are in deme 0, so T(i,j) = 1 + (1 - 1/7) T(0,0) with T(0,0) = 7 for every pair;
        // hence all times are 7. One deme: T = N (exact WF, theory reference §1).
        let m = vec![vec![1.0, 0.0], vec![1.0, 0.0]];
        let t = pair_coalescence_times(&[7.0, 3.0], &m).unwrap();
        for (i, j) in [(0, 0), (0, 1), (1, 1)] {
            assert!((t.get(i, j) - 7.0).abs() < 1e-12);
        }
        let t = pair_coalescence_times(&[12.0], &[vec![1.0]]).unwrap();
        assert!((t.get(0, 0) - 12.0).abs() < 1e-12);
    }

    #[test]
    fn bad_inputs() {
        // Isolated demes never meet: singular.
        let id = vec![vec![1.0, 0.0], vec![0.0, 1.0]];
        assert_eq!(pair_coalescence_times(&[10.0, 10.0], &id), Err(TheoryError::Singular));
        let bad = vec![vec![0.5, 0.4], vec![0.0, 1.0]];
        assert!(matches!(pair_coalescence_times(&[10.0, 10.0], &bad), Err(TheoryError::MigrationMatrix { .. })));
        assert!(pair_coalescence_times(&[0.5], &[vec![1.0]]).is_err());
        assert!(island_migration_matrix(1, 0.1).is_err());
    }
}
