//! Exact law of the coalescence time T_2 of two lineages in one deme of constant size N
//! with a bounded look-back law, from the Markov chain on the gap between the lineages.
//!
//! Both lineages are sampled in generation 0 (distinct individuals). Each ancestral line
//! jumps back by independent draws of R. The state is the gap g in 0..m-1 (m = max
//! look-back) between the older lineage's position and the younger one's; only the younger
//! lineage draws (both draw when g = 0). When the two land on the same generation they pick
//! the same parent with probability 1/N, otherwise they continue from that generation.
//! T_2 is the generation of the common parent. Pure linear algebra and forward recursion:
//! no sampling.

use super::error::TheoryError;
use super::linalg::solve;
use super::weak_seedbank::MutationRates;
use crate::dormancy::{Dormancy, LookBack};

/// Largest supported max look-back (the mean costs a dense m × m solve).
pub const MAX_LOOKBACK: u64 = 256;

/// One transition of the gap chain.
#[derive(Debug, Clone, Copy)]
struct Step {
    prob: f64,
    /// Increase of the older lineage's position (the clock of T_2).
    delta: u64,
    /// Next gap, `None` when the lineages coalesce.
    next: Option<usize>,
    /// Look-backs drawn in this step (0 = no draw).
    draws: [u64; 2],
}

/// First and second moments of T_2.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PairMoments {
    /// E\[T_2] in generations.
    pub mean: f64,
    /// Var\[T_2] in generations².
    pub variance: f64,
}

/// The gap chain of two lineages for a given bounded look-back law and deme size.
#[derive(Debug, Clone)]
pub struct PairChain {
    pop_size: u32,
    /// steps\[g]: transitions out of gap g.
    steps: Vec<Vec<Step>>,
}

impl PairChain {
    /// Builds the chain. The law must be stationary with max look-back <= [`MAX_LOOKBACK`];
    /// N >= 1.
    pub fn new(dormancy: &Dormancy, pop_size: u32) -> Result<Self, TheoryError> {
        if dormancy.is_time_dependent() {
            return Err(TheoryError::TimeDependent);
        }
        if pop_size == 0 {
            return Err(TheoryError::Parameter { name: "pop_size", value: 0.0, allowed: ">= 1" });
        }
        let m = match dormancy.max_lookback() {
            Some(m) if m <= MAX_LOOKBACK => m as usize,
            max => return Err(TheoryError::LookBack { max, limit: MAX_LOOKBACK }),
        };
        let b: Vec<f64> = (1..=m as u64).map(|r| dormancy.pmf(r)).collect();
        let same = 1.0 / f64::from(pop_size);
        let mut steps = vec![Vec::new(); m];
        // g = 0: both lineages draw.
        for r1 in 1..=m {
            for r2 in 1..=m {
                let p = b[r1 - 1] * b[r2 - 1];
                if p == 0.0 {
                    continue;
                }
                let delta = r1.max(r2) as u64;
                let draws = [r1 as u64, r2 as u64];
                if r1 == r2 {
                    steps[0].push(Step { prob: p * same, delta, next: None, draws });
                    if same < 1.0 {
                        steps[0].push(Step { prob: p * (1.0 - same), delta, next: Some(0), draws });
                    }
                } else {
                    steps[0].push(Step { prob: p, delta, next: Some(r1.abs_diff(r2)), draws });
                }
            }
        }
        // g > 0: the younger lineage draws; it overtakes the older one when r > g.
        for (g, out) in steps.iter_mut().enumerate().skip(1) {
            for r in 1..=m {
                let p = b[r - 1];
                if p == 0.0 {
                    continue;
                }
                let draws = [r as u64, 0];
                if r < g {
                    out.push(Step { prob: p, delta: 0, next: Some(g - r), draws });
                } else if r == g {
                    out.push(Step { prob: p * same, delta: 0, next: None, draws });
                    if same < 1.0 {
                        out.push(Step { prob: p * (1.0 - same), delta: 0, next: Some(0), draws });
                    }
                } else {
                    out.push(Step { prob: p, delta: (r - g) as u64, next: Some(r - g), draws });
                }
            }
        }
        Ok(PairChain { pop_size, steps })
    }

    /// The deme size N.
    pub fn pop_size(&self) -> u32 {
        self.pop_size
    }

    /// Expected accumulated reward until coalescence, from every gap, for per-step rewards.
    ///
    /// ```text
    /// h(g) = Σ_steps p (reward + h(next)),   h(absorbed) = 0
    /// ```
    fn expected_reward(&self, reward: impl Fn(&Step) -> f64) -> Result<Vec<f64>, TheoryError> {
        // Only gaps reachable from 0 enter the system: under a periodic law (d > 1) the other
        // gaps never lead to a meeting and would make it singular.
        let mut index = vec![usize::MAX; self.steps.len()];
        let mut order = vec![0usize];
        index[0] = 0;
        let mut next = 0;
        while next < order.len() {
            for s in &self.steps[order[next]] {
                if let Some(nx) = s.next.filter(|&nx| index[nx] == usize::MAX) {
                    index[nx] = order.len();
                    order.push(nx);
                }
            }
            next += 1;
        }
        let m = order.len();
        let mut a = vec![0.0; m * m];
        let mut rhs = vec![0.0; m];
        for (row, &g) in order.iter().enumerate() {
            a[row * m + row] += 1.0;
            for s in &self.steps[g] {
                rhs[row] += s.prob * reward(s);
                if let Some(nx) = s.next {
                    a[row * m + index[nx]] -= s.prob;
                }
            }
        }
        let x = solve(a, m, rhs, 1).ok_or(TheoryError::Singular)?;
        // Unreachable gaps get NaN: they are never used.
        Ok(index.iter().map(|&i| if i == usize::MAX { f64::NAN } else { x[i] }).collect())
    }

    /// E\[T_2] and Var\[T_2], by solving the first-step equations for the first two moments.
    ///
    /// ```text
    /// h1(g) = Σ p (δ + h1(g')),   h2(g) = Σ p (δ² + 2 δ h1(g') + h2(g'))
    /// ```
    /// The mean equals N E\[R]²/d exactly (theory reference §3.2), which the tests check.
    pub fn moments(&self) -> Result<PairMoments, TheoryError> {
        let h1 = self.expected_reward(|s| s.delta as f64)?;
        let after = |s: &Step| s.next.map_or(0.0, |g| h1[g]);
        let h2 = self.expected_reward(|s| {
            let d = s.delta as f64;
            d * d + 2.0 * d * after(s)
        })?;
        Ok(PairMoments { mean: h1[0], variance: h2[0] - h1[0] * h1[0] })
    }

    /// Expected number of parent–offspring links on both lineages together, up to the MRCA.
    ///
    /// Equals 2 N E\[R]/d (theory reference §3.3).
    pub fn expected_links(&self) -> Result<f64, TheoryError> {
        Ok(self.expected_reward(|s| s.draws.iter().filter(|&&r| r > 0).count() as f64)?[0])
    }

    /// Expected number of mutations separating the two sampled sequences, E\[π], when a link
    /// spanning r generations carries ν_r = `rates.per_link(r)` mutations on average.
    ///
    /// Equals 2 N E\[R] E\[ν_R]/d (theory reference §3.3).
    pub fn expected_pairwise_mutations(&self, rates: &MutationRates) -> Result<f64, TheoryError> {
        let nu = |r: u64| if r == 0 { 0.0 } else { rates.per_link(r) };
        Ok(self.expected_reward(|s| nu(s.draws[0]) + nu(s.draws[1]))?[0])
    }

    /// P(T_2 = t) for t = 0..=cutoff (entry 0 is always 0), by forward recursion over time.
    ///
    /// The mass beyond the cutoff is 1 minus the sum. Within one generation the gap can only
    /// decrease without the clock moving, so gaps are processed from m-1 down to 0.
    /// Cost O(cutoff · m²). For R ≡ 1 this is (1/N)(1 - 1/N)^{t-1}.
    pub fn pmf(&self, cutoff: u64) -> Vec<f64> {
        let m = self.steps.len();
        let cutoff = cutoff as usize;
        let mut pmf = vec![0.0; cutoff + 1];
        // ring[t % (m+1)][g]: mass at clock t in gap g, not yet processed.
        let rows = m + 1;
        let mut ring = vec![vec![0.0; m]; rows];
        ring[0][0] = 1.0;
        for t in 0..=cutoff {
            let cur = t % rows;
            for g in (0..m).rev() {
                let mass = std::mem::take(&mut ring[cur][g]);
                if mass == 0.0 {
                    continue;
                }
                for s in &self.steps[g] {
                    let when = t + s.delta as usize;
                    let p = mass * s.prob;
                    match s.next {
                        None => {
                            if when <= cutoff {
                                pmf[when] += p;
                            }
                        }
                        Some(nx) => ring[when % rows][nx] += p,
                    }
                }
            }
        }
        pmf
    }
}

#[cfg(test)]
mod tests {
    use super::super::weak_seedbank::tests::reference_laws;
    use super::super::weak_seedbank::time_scale;
    use super::*;
    use crate::dormancy::{Geometric, Table};

    #[test]
    fn mean_is_kkl_exact_for_reference_laws() {
        // Source: theory reference §3.2: E[T_2] = N E[R]²/d exactly for every N (table values
        // 2.25, 6.25, 3.61, 2.89, 4.5 times N), derived with Wald's identity and verified there
        // in rational arithmetic.
        for (law, _, scale) in reference_laws() {
            for n in [1u32, 10, 100] {
                let chain = PairChain::new(&law, n).unwrap();
                let mo = chain.moments().unwrap();
                let want = f64::from(n) * scale;
                assert!((mo.mean - want).abs() < 1e-9 * want, "{law:?} N={n}: {} vs {want}", mo.mean);
                assert!(mo.variance >= 0.0);
                // Links on both lineages: 2 N E[R]/d (§3.3).
                let mean_r = law.mean().unwrap();
                let d = law.support_gcd() as f64;
                let links = chain.expected_links().unwrap();
                assert!((links - 2.0 * f64::from(n) * mean_r / d).abs() < 1e-9 * links);
                // Mutations: 2 N E[R] E[ν_R]/d (§3.3).
                let rates = MutationRates::new(0.3, 0.07).unwrap();
                let pi = chain.expected_pairwise_mutations(&rates).unwrap();
                let want = 2.0 * f64::from(n) * mean_r * rates.mean_per_link(mean_r) / d;
                assert!((pi - want).abs() < 1e-9 * want, "{pi} vs {want}");
            }
            assert!((time_scale(&law).unwrap() - scale).abs() < 1e-12);
        }
    }

    #[test]
    fn no_dormancy_is_geometric() {
        // Exact discrete WF (theory reference §1): T_2 ~ Geometric(1/N), mean N, variance N(N-1).
        let n = 20u32;
        let chain = PairChain::new(&Dormancy::None, n).unwrap();
        let mo = chain.moments().unwrap();
        assert!((mo.mean - 20.0).abs() < 1e-10 && (mo.variance - 380.0).abs() < 1e-8);
        let pmf = chain.pmf(50);
        assert_eq!(pmf[0], 0.0);
        for (t, &p) in pmf.iter().enumerate().skip(1) {
            let want = (1.0 / 20.0) * (1.0 - 1.0 / 20.0f64).powi(t as i32 - 1);
            assert!((p - want).abs() < 1e-15, "t = {t}");
        }
    }

    #[test]
    fn pmf_small_case_by_hand() {
        // N = 1, R uniform on {1,2}, by hand: T_2 = 1 iff both draw 1 (1/4). T_2 = 2 if both
        // draw 2 (1/4), or they draw {1,2} in some order (1/2) and the younger then draws 1
        // (1/2): 1/4 + 1/4 = 1/2. Otherwise (draws {1,2} then 2) the gap is 1 at clock 3.
        let law = Dormancy::Table(Table::new(&[1.0, 1.0]).unwrap());
        let pmf = PairChain::new(&law, 1).unwrap().pmf(3);
        assert!((pmf[1] - 0.25).abs() < 1e-15 && (pmf[2] - 0.5).abs() < 1e-15);
        // From gap 1 at clock 3 (mass 1/4): younger draws 1 -> coalesce at 3 (1/8).
        assert!((pmf[3] - 0.125).abs() < 1e-15);
    }

    #[test]
    fn pmf_agrees_with_moments() {
        // The forward recursion and the linear solve are independent computations of one law.
        for (law, _, _) in reference_laws() {
            let chain = PairChain::new(&law, 10).unwrap();
            let mo = chain.moments().unwrap();
            let pmf = chain.pmf(6000);
            let total: f64 = pmf.iter().sum();
            let mean: f64 = pmf.iter().enumerate().map(|(t, p)| t as f64 * p).sum();
            let m2: f64 = pmf.iter().enumerate().map(|(t, p)| (t * t) as f64 * p).sum();
            assert!((total - 1.0).abs() < 1e-9, "{law:?}: mass {total}");
            assert!((mean - mo.mean).abs() < 1e-6 * mo.mean, "{law:?}");
            assert!((m2 - mean * mean - mo.variance).abs() < 1e-5 * mo.variance, "{law:?}");
        }
        // Period 2 law {2,4}: T_2 is always even.
        let law = &reference_laws()[4].0;
        let pmf = PairChain::new(law, 5).unwrap().pmf(40);
        assert!(pmf.iter().enumerate().all(|(t, &p)| t % 2 == 0 || p == 0.0));
    }

    #[test]
    fn rejects_unbounded_and_long_laws() {
        let g = Dormancy::Geometric(Geometric::new(3.0).unwrap());
        assert!(matches!(PairChain::new(&g, 10), Err(TheoryError::LookBack { max: None, .. })));
        let long = Dormancy::Table(Table::new(&vec![1.0; 300]).unwrap());
        assert!(matches!(PairChain::new(&long, 10), Err(TheoryError::LookBack { max: Some(300), .. })));
        assert!(PairChain::new(&Dormancy::None, 0).is_err());
    }
}
