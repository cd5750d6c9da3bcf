//! The seed-bank coalescent of Blath, González Casanova, Kurt & Wilke-Berenguer (2016,
//! Ann. Appl. Probab. 26:857): the strong seed bank, where dormancy lasts of order N
//! generations.
//!
//! Block-counting chain on (a, d) = (active, dormant) lineages, time in units of N
//! generations (theory reference §5; the (c, cK) rate convention is as recalled there):
//! ```text
//! (a, d) → (a-1, d)     rate C(a, 2)   coalescence of two active lineages
//! (a, d) → (a-1, d+1)   rate c a       an active lineage goes dormant
//! (a, d) → (a+1, d-1)   rate c K d     a dormant lineage wakes
//! ```
//! The total a + d only decreases by coalescence, so expectations are solved level by level:
//! within a level the states form a birth–death chain and each level is one tridiagonal
//! system whose right-hand side uses the level below.

use super::error::TheoryError;
use super::error::check;
use super::linalg::{solve, solve_tridiagonal};
use crate::dormancy::{Dormancy, LookBack};
use std::collections::HashMap;

/// Largest sample size accepted by [`SeedBankCoalescent::branch_lengths_by_class`].
pub const SFS_MAX_SAMPLE: u32 = 12;

/// Flag state (active blocks per size) → expected lengths by class (active, then dormant).
type FlagTable = HashMap<Vec<usize>, Vec<f64>>;
/// Block-size multiset → its flag table.
type PartitionMemo = HashMap<Vec<usize>, FlagTable>;

/// Parameters (c, K) of the seed-bank coalescent.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SeedBankCoalescent {
    c: f64,
    k: f64,
}

/// Expectations from a given starting configuration, in coalescent time units.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SeedBankExpectations {
    /// E\[T_MRCA].
    pub tmrca: f64,
    /// E\[total length of active branches].
    pub active_length: f64,
    /// E\[total length of dormant branches].
    pub dormant_length: f64,
}

impl SeedBankCoalescent {
    /// Builds the model; c > 0 (switching rate) and K > 0 (ratio of active to dormant sizes).
    pub fn new(c: f64, k: f64) -> Result<Self, TheoryError> {
        check("c", c, "(0, inf)", |x| x > 0.0)?;
        check("K", k, "(0, inf)", |x| x > 0.0)?;
        Ok(SeedBankCoalescent { c, k })
    }

    /// The switching rate c.
    pub fn c(&self) -> f64 {
        self.c
    }

    /// The size ratio K.
    pub fn k(&self) -> f64 {
        self.k
    }

    /// Expectations for every state of every level up to `total` lineages.
    ///
    /// Returns, for the top level only, vectors indexed by the number of active lineages
    /// a = 0..=total. Cost O(total²).
    fn level_table(&self, total: u32) -> Result<[Vec<f64>; 3], TheoryError> {
        let (c, ck) = (self.c, self.c * self.k);
        // Level 1: the MRCA is reached, nothing left to accumulate.
        let mut prev: [Vec<f64>; 3] = [vec![0.0; 2], vec![0.0; 2], vec![0.0; 2]];
        for level in 2..=total as usize {
            let states = level + 1;
            let (mut sub, mut diag, mut sup) = (vec![0.0; states], vec![0.0; states], vec![0.0; states]);
            for a in 0..states {
                let (af, df) = (a as f64, (level - a) as f64);
                let coal = af * (af - 1.0) / 2.0;
                diag[a] = coal + c * af + ck * df;
                sub[a] = -c * af;
                sup[a] = -ck * df;
            }
            let mut next: [Vec<f64>; 3] = [vec![], vec![], vec![]];
            for (q, out) in next.iter_mut().enumerate() {
                let rhs: Vec<f64> = (0..states)
                    .map(|a| {
                        let (af, df) = (a as f64, (level - a) as f64);
                        let reward = [1.0, af, df][q];
                        let coal = af * (af - 1.0) / 2.0;
                        // Coalescence moves to level-1 with a-1 active lineages.
                        reward + if a >= 2 { coal * prev[q][a - 1] } else { 0.0 }
                    })
                    .collect();
                // Diagonally dominant (strictly for a >= 2), so Thomas is stable; with c K
                // underflowing against c (dormancy far longer than N generations) a pivot can
                // still vanish in floating point, and the expectations are then out of reach.
                *out = solve_tridiagonal(&sub, &diag, &sup, &rhs)
                    .filter(|x| x.iter().all(|v| v.is_finite()))
                    .ok_or(TheoryError::Singular)?;
            }
            prev = next;
        }
        Ok(prev)
    }

    /// Expectations of T_MRCA and active/dormant branch lengths from `active` active and
    /// `dormant` dormant lineages (coalescent units: multiply by N for generations).
    ///
    /// ```text
    /// q(a) τ(a) = r(a) + C(a,2) τ_{level-1}(a-1) + c a τ(a-1) + cK d τ(a+1)
    /// q(a) = C(a,2) + c a + cK d,   r = 1 (time), a (active length) or d (dormant length)
    /// ```
    /// Needs at least one lineage; one lineage gives zeros.
    pub fn expectations(&self, active: u32, dormant: u32) -> Result<SeedBankExpectations, TheoryError> {
        let total = active
            .checked_add(dormant)
            .filter(|&t| t >= 1)
            .ok_or(TheoryError::SampleSize { n: active.saturating_add(dormant), allowed: "1..=u32::MAX lineages" })?;
        let [t, la, ld] = self.level_table(total)?;
        let a = active as usize;
        Ok(SeedBankExpectations { tmrca: t[a], active_length: la[a], dormant_length: ld[a] })
    }

    /// Two-lineage expected MRCA times (t_AA, t_AD, t_DD) (theory reference §5.1).
    ///
    /// ```text
    /// t_AA = (1 + 1/K)²,   t_AD = t_AA + 1/(cK) + 1/(2cK²),   t_DD = t_AD + 1/(2cK)
    /// ```
    /// Computed from the chain, not from the closed form.
    /// Errors with [`TheoryError::Singular`] when the chain cannot be solved in floating point.
    pub fn two_lineage_times(&self) -> Result<(f64, f64, f64), TheoryError> {
        let [t, _, _] = self.level_table(2)?;
        Ok((t[2], t[1], t[0]))
    }

    /// Expected lengths of active and dormant branches subtending i = 1..n-1 of n sampled
    /// leaves (all active at the start), in coalescent units: `(active, dormant)`.
    ///
    /// First-step analysis on the block process with block sizes tracked: for each multiset
    /// of block sizes, the flag states (how many blocks of each size are active) are linked
    /// by switching only, and one dense solve per multiset uses the values of the multisets
    /// with one block fewer. The expected SFS with infinite sites is
    /// ```text
    /// E[ξ_i] = (θ/2) (E[L_i^act] + ρ E[L_i^dor])
    /// ```
    /// with ρ the relative mutation rate while dormant (see [`Self::expected_sfs`]). The state
    /// space grows like the partitions of n, so n is limited to 2..=[`SFS_MAX_SAMPLE`].
    pub fn branch_lengths_by_class(&self, n: u32) -> Result<(Vec<f64>, Vec<f64>), TheoryError> {
        if !(2..=SFS_MAX_SAMPLE).contains(&n) {
            return Err(TheoryError::SampleSize { n, allowed: "2..=SFS_MAX_SAMPLE" });
        }
        let n = n as usize;
        let mut mult = vec![0usize; n + 1];
        mult[1] = n;
        let mut memo = HashMap::new();
        let table = self.solve_partition(&mult, &mut memo)?;
        let mut act = vec![0usize; n + 1];
        act[1] = n;
        let v = &table[&act];
        Ok((v[..n - 1].to_vec(), v[n - 1..].to_vec()))
    }

    /// Expected unfolded SFS E\[ξ_1..ξ_{n-1}] for θ (per N generations, active) and relative
    /// dormant mutation rate ρ >= 0; see [`Self::branch_lengths_by_class`].
    pub fn expected_sfs(&self, n: u32, theta: f64, rho: f64) -> Result<Vec<f64>, TheoryError> {
        check("theta", theta, "[0, inf)", |x| x >= 0.0)?;
        check("rho", rho, "[0, inf)", |x| x >= 0.0)?;
        let (la, ld) = self.branch_lengths_by_class(n)?;
        Ok(la.iter().zip(&ld).map(|(a, d)| theta / 2.0 * (a + rho * d)).collect())
    }

    /// Values of every flag state of the block-size multiset `mult` (mult\[s] = blocks of size s).
    fn solve_partition(&self, mult: &[usize], memo: &mut PartitionMemo) -> Result<FlagTable, TheoryError> {
        let n = mult.len() - 1;
        let width = 2 * (n - 1);
        // Enumerate flag states act[s] in 0..=mult[s] with an odometer.
        let sizes: Vec<usize> = (1..=n).filter(|&s| mult[s] > 0).collect();
        let mut states = Vec::new();
        let mut act = vec![0usize; n + 1];
        loop {
            states.push(act.clone());
            let mut k = 0;
            while k < sizes.len() && act[sizes[k]] == mult[sizes[k]] {
                act[sizes[k]] = 0;
                k += 1;
            }
            if k == sizes.len() {
                break;
            }
            act[sizes[k]] += 1;
        }
        let index: HashMap<Vec<usize>, usize> = states.iter().cloned().enumerate().map(|(i, a)| (a, i)).collect();
        let m = states.len();
        let mut a = vec![0.0; m * m];
        let mut rhs = vec![0.0; m * width];
        let (c, ck) = (self.c, self.c * self.k);
        for (row, st) in states.iter().enumerate() {
            let mut q = 0.0;
            for s in 1..n {
                rhs[row * width + s - 1] = st[s] as f64;
                rhs[row * width + n - 1 + s - 1] = (mult[s] - st[s]) as f64;
            }
            for (x, &s) in sizes.iter().enumerate() {
                let (act_s, dor_s) = (st[s] as f64, (mult[s] - st[s]) as f64);
                if act_s > 0.0 {
                    q += c * act_s;
                    let mut to = st.clone();
                    to[s] -= 1;
                    a[row * m + index[&to]] -= c * act_s;
                }
                if dor_s > 0.0 {
                    q += ck * dor_s;
                    let mut to = st.clone();
                    to[s] += 1;
                    a[row * m + index[&to]] -= ck * dor_s;
                }
                for &t in &sizes[x..] {
                    let pairs = if s == t { act_s * (act_s - 1.0) / 2.0 } else { act_s * st[t] as f64 };
                    if pairs <= 0.0 {
                        continue;
                    }
                    q += pairs;
                    if s + t == n {
                        continue; // the MRCA: nothing left to accumulate
                    }
                    let mut child = mult.to_vec();
                    child[s] -= 1;
                    child[t] -= 1;
                    child[s + t] += 1;
                    let mut child_act = st.clone();
                    child_act[s] -= 1;
                    child_act[t] -= 1;
                    child_act[s + t] += 1;
                    if !memo.contains_key(&child) {
                        let solved = self.solve_partition(&child, memo)?;
                        memo.insert(child.clone(), solved);
                    }
                    let v = &memo[&child][&child_act];
                    for k in 0..width {
                        rhs[row * width + k] += pairs * v[k];
                    }
                }
            }
            a[row * m + row] += q;
        }
        let x = solve(a, m, rhs, width).ok_or(TheoryError::Singular)?;
        Ok(states.into_iter().enumerate().map(|(i, st)| (st, x[i * width..(i + 1) * width].to_vec())).collect())
    }

    /// Recognises the look-back law of theory reference §5.3 and returns its (c, K) for N.
    ///
    /// Accepts a `Dormancy::Mixture` of `None` parts (total weight 1 - w) and exactly one
    /// `Geometric` part of weight w and mean g > 1. By memorylessness that geometric part is
    /// R = 1 with probability 1/g, else 1 + Geometric(mean g), so the law is
    /// ```text
    /// R_N = 1 w.p. 1 - c/N,   else 1 + G with E[G] = N/(cK)
    /// c = N w (g - 1)/g,      K = N / (c g)
    /// ```
    /// and E\[R_N] = 1 + 1/K. Anything else gives `None`, as does a non-finite or non-positive N.
    /// The (c, K) description is the N → ∞ limit, in units of N generations.
    pub fn from_lookback(dormancy: &Dormancy, pop_size: f64) -> Option<SeedBankCoalescent> {
        if !(pop_size.is_finite() && pop_size > 0.0) {
            return None;
        }
        let Dormancy::Mixture(mix) = dormancy else { return None };
        let mut long = None;
        for (w, part) in mix.parts() {
            match part {
                Dormancy::None => {}
                Dormancy::Geometric(g) if long.is_none() => long = Some((*w, g.mean()?)),
                _ => return None,
            }
        }
        let (w, g) = long?;
        if !(w > 0.0 && g > 1.0) {
            return None;
        }
        let c = pop_size * w * (g - 1.0) / g;
        SeedBankCoalescent::new(c, pop_size / (c * g)).ok()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dormancy::{Geometric, Mixture};

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn two_lineage_table() {
        // Source: theory reference §5.1 table (BGKW 2016 model, exact).
        for (c, k, aa, ad, dd) in [
            (1.0, 1.0, 4.0, 5.5, 6.0),
            (1.0, 2.0, 2.25, 23.0 / 8.0, 25.0 / 8.0),
            (2.0, 1.0, 4.0, 4.75, 5.0),
            (0.5, 0.5, 9.0, 17.0, 19.0),
        ] {
            let m = SeedBankCoalescent::new(c, k).unwrap();
            let (taa, tad, tdd) = m.two_lineage_times().unwrap();
            assert!(close(taa, aa, 1e-12) && close(tad, ad, 1e-12) && close(tdd, dd, 1e-12), "c={c} K={k}");
            // Closed forms of §5.1.
            assert!(close(taa, (1.0 + 1.0 / k).powi(2), 1e-12));
            assert!(close(tad, taa + 1.0 / (c * k) + 1.0 / (2.0 * c * k * k), 1e-12));
            assert!(close(tdd, tad + 1.0 / (2.0 * c * k), 1e-12));
        }
    }

    #[test]
    fn n_lineage_table_c1_k1() {
        // Source: theory reference §5.2 table, c = K = 1, all lineages active at start.
        let m = SeedBankCoalescent::new(1.0, 1.0).unwrap();
        for (n, t, la) in [
            (2, 4.0, 4.0),
            (3, 5.5, 6.0),
            (5, 755989.0 / 110400.0, 8.297101),
            (10, 8.070856, 11.146948),
            (50, 9.616924, 17.054774),
            (100, 10.018678, 19.399727),
            (1000, 10.894179, 26.657874),
        ] {
            let e = m.expectations(n, 0).unwrap();
            assert!(close(e.tmrca, t, 1e-6), "n = {n}: {}", e.tmrca);
            assert!(close(e.active_length, la, 1e-6), "n = {n}: {}", e.active_length);
            assert!(close(e.dormant_length, la, 1e-6), "n = {n}");
        }
        assert!(close(m.expectations(5, 0).unwrap().tmrca, 6.8477264493, 1e-10));
        assert_eq!(m.expectations(1, 0).unwrap().tmrca, 0.0);
        assert!(m.expectations(0, 0).is_err());
    }

    #[test]
    fn other_parameters() {
        // Source: theory reference §5.2, "Other parameters".
        for (c, k, vals) in [
            (1.0, 2.0, [2.25, 4.337638, 5.201443]),
            (2.0, 1.0, [4.0, 7.705733, 9.137358]),
            (0.5, 1.0, [4.0, 8.563767, 11.324689]),
        ] {
            let m = SeedBankCoalescent::new(c, k).unwrap();
            for (n, want) in [2, 10, 100].into_iter().zip(vals) {
                let e = m.expectations(n, 0).unwrap();
                assert!(close(e.tmrca, want, 1e-6), "c={c} K={k} n={n}: {}", e.tmrca);
                // Exact identity E[L_dormant] = E[L_active]/K (§5.2).
                assert!(close(e.dormant_length, e.active_length / k, 1e-9 * e.active_length));
            }
        }
        assert!(SeedBankCoalescent::new(0.0, 1.0).is_err());
    }

    #[test]
    fn lookback_mapping() {
        // Source: theory reference §5.3: R_N = 1 w.p. 1 - c/N, else 1 + Geometric(mean N/(cK)),
        // E[R_N] = 1 + 1/K. Built here as (1-w) none + w geometric(mean g) with g = N/(cK),
        // w = (c/N) g/(g-1), which is the same law by memorylessness.
        for (n, c, k) in [(100.0, 1.0, 1.0), (1000.0, 0.5, 2.0)] {
            let g: f64 = n / (c * k);
            let w = c / n * g / (g - 1.0);
            let law = Dormancy::Mixture(
                Mixture::new(vec![(1.0 - w, Dormancy::None), (w, Dormancy::Geometric(Geometric::new(g).unwrap()))])
                    .unwrap(),
            );
            assert!(close(law.mean().unwrap(), 1.0 + 1.0 / k, 1e-12));
            let m = SeedBankCoalescent::from_lookback(&law, n).unwrap();
            assert!(close(m.c(), c, 1e-12) && close(m.k(), k, 1e-12), "{m:?}");
            // P(R_N = 1) = 1 - c/N.
            assert!(close(law.pmf(1), 1.0 - c / n, 1e-12));
        }
        assert!(SeedBankCoalescent::from_lookback(&Dormancy::None, 100.0).is_none());
        let g = Dormancy::Geometric(Geometric::new(5.0).unwrap());
        assert!(SeedBankCoalescent::from_lookback(&g, 100.0).is_none());
    }
    #[test]
    fn sfs_n5_exact() {
        // Source: theory reference §5.2, exact E[L_i^act] = E[L_i^dor] for n = 5, c = K = 1:
        // 52537/14720, 43189/22080, 32011/22080, 19463/14720.
        let m = SeedBankCoalescent::new(1.0, 1.0).unwrap();
        let (la, ld) = m.branch_lengths_by_class(5).unwrap();
        let want = [52537.0 / 14720.0, 43189.0 / 22080.0, 32011.0 / 22080.0, 19463.0 / 14720.0];
        for i in 0..4 {
            assert!(close(la[i], want[i], 1e-10) && close(ld[i], want[i], 1e-10), "i = {}", i + 1);
        }
        let sfs = m.expected_sfs(5, 2.0, 0.5).unwrap();
        assert!(close(sfs[0], 1.5 * want[0], 1e-10));
        // Independent check against the level-by-level solver: Σ_i L_i = total lengths; and the
        // class-by-class identity L_i^dor = L_i^act / K (§5.2) for K = 2.
        for (c, k, n) in [(1.0, 2.0, 6u32), (0.5, 1.0, 7)] {
            let m = SeedBankCoalescent::new(c, k).unwrap();
            let (la, ld) = m.branch_lengths_by_class(n).unwrap();
            let e = m.expectations(n, 0).unwrap();
            assert!(close(la.iter().sum::<f64>(), e.active_length, 1e-9));
            assert!(close(ld.iter().sum::<f64>(), e.dormant_length, 1e-9));
            for i in 0..la.len() {
                assert!(close(ld[i], la[i] / k, 1e-9), "i = {}", i + 1);
            }
        }
        assert!(m.branch_lengths_by_class(1).is_err() && m.branch_lengths_by_class(13).is_err());
    }
}
