//! Hypergeometric projection of site frequencies to a common sample size, and the SFS
//! statistics of a projected (fractional) spectrum.
//!
//! A site where `n` sequences are called and `j` of them carry the derived allele is
//! projected to a sample of `m <= n` sequences by drawing `m` of the `n` without
//! replacement: the probability that the subsample holds `k` derived alleles is
//!
//! ```text
//! P(k | n, j, m) = C(j, k) C(n - j, m - k) / C(n, m),    max(0, m - n + j) <= k <= min(j, m)
//! ```
//!
//! Source: Marth, Czabarka, Murvai & Sherry (2004), Genetics 166:351; Gutenkunst et al.
//! (2009), PLoS Genet 5:e1000695. Summing these over sites gives the expected spectrum of a
//! sample of `m` sequences; the entries are fractional, so the statistics below take real
//! ξ_k instead of the integer [`crate::stats::Sfs`]. With `m = n` the projection is the
//! identity and every statistic equals its integer counterpart.

use crate::stats::{TajimaConstants, harmonic, harmonic_squares, zeng_variance_coefficients};
use serde::Serialize;

/// Projects sites from any `n >= m` called sequences down to `m` sequences.
///
/// Keeps a table of ln k! so that each projection costs O(m) exponentials.
#[derive(Debug, Clone)]
pub struct Projector {
    m: u32,
    ln_fact: Vec<f64>,
}

impl Projector {
    /// A projector to `m` sequences.
    pub fn new(m: u32) -> Self {
        Projector { m, ln_fact: vec![0.0] }
    }

    /// The projected sample size.
    pub fn m(&self) -> u32 {
        self.m
    }

    fn ln_choose(&mut self, n: u32, k: u32) -> f64 {
        // Grow the table lazily: ln n! = Σ ln i, exact to rounding for any n we meet.
        while self.ln_fact.len() <= n as usize {
            let i = self.ln_fact.len();
            let prev = self.ln_fact[i - 1];
            self.ln_fact.push(prev + (i as f64).ln());
        }
        self.ln_fact[n as usize] - self.ln_fact[k as usize] - self.ln_fact[(n - k) as usize]
    }

    /// Adds P(k | n, j, m) to `classes[k]` for k = 0..=m (`classes.len()` must be m + 1).
    ///
    /// Returns `false` (and adds nothing) when n < m or j > n: such a site cannot be projected.
    pub fn add_site(&mut self, n: u32, j: u32, classes: &mut [f64]) -> bool {
        let m = self.m;
        debug_assert_eq!(classes.len(), m as usize + 1);
        if n < m || j > n {
            return false;
        }
        if n == m {
            // Identity: exact, no rounding from the logarithms.
            classes[j as usize] += 1.0;
            return true;
        }
        let denom = self.ln_choose(n, m);
        let lo = (m + j).saturating_sub(n);
        for k in lo..=j.min(m) {
            let ln_p = self.ln_choose(j, k) + self.ln_choose(n - j, m - k) - denom;
            classes[k as usize] += ln_p.exp();
        }
        true
    }
}

/// A site frequency spectrum with real entries ξ_1..ξ_{m-1}, as produced by projection.
///
/// All θ estimators are the usual linear functions of the spectrum; with fractional ξ they
/// estimate the same quantities for a sample of `m` sequences. S is the expected number of
/// segregating sites in a subsample of size m, Σ_k ξ_k, and is fractional too.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProjectedSfs {
    m: u32,
    xi: Vec<f64>,
}

impl ProjectedSfs {
    /// Wraps ξ_1..ξ_{m-1}; `None` unless m >= 2 and the length is m - 1.
    pub fn new(m: u32, xi: Vec<f64>) -> Option<Self> {
        (m >= 2 && xi.len() == m as usize - 1).then_some(ProjectedSfs { m, xi })
    }

    /// Builds the spectrum from classes 0..=m (as filled by [`Projector::add_site`]),
    /// dropping the monomorphic classes 0 and m.
    pub fn from_classes(classes: &[f64]) -> Option<Self> {
        let m = u32::try_from(classes.len().checked_sub(1)?).ok()?;
        if m < 2 {
            return None;
        }
        Self::new(m, classes[1..m as usize].to_vec())
    }

    /// The sample size m.
    pub fn m(&self) -> u32 {
        self.m
    }

    /// ξ_1..ξ_{m-1}.
    pub fn xi(&self) -> &[f64] {
        &self.xi
    }

    /// Entry-wise sum with another spectrum of the same m.
    pub fn plus(&self, other: &ProjectedSfs) -> ProjectedSfs {
        assert_eq!(self.m, other.m, "spectra of different sample sizes");
        ProjectedSfs { m: self.m, xi: self.xi.iter().zip(&other.xi).map(|(a, b)| a + b).collect() }
    }

    /// Folded spectrum η_1..η_{floor(m/2)}: η_i = ξ_i + ξ_{m-i} (i < m/2), η_{m/2} = ξ_{m/2}.
    pub fn folded(&self) -> Vec<f64> {
        let m = self.m as usize;
        (1..=m / 2).map(|i| if 2 * i == m { self.xi[i - 1] } else { self.xi[i - 1] + self.xi[m - i - 1] }).collect()
    }

    fn weighted(&self, w: impl Fn(f64) -> f64) -> f64 {
        self.xi.iter().enumerate().map(|(k, &x)| w((k + 1) as f64) * x).sum()
    }

    /// S = Σ ξ_k, the (expected) number of segregating sites.
    pub fn segregating_sites(&self) -> f64 {
        self.xi.iter().sum()
    }

    /// θ_π = Σ 2 k (m-k) ξ_k / (m(m-1)) (Tajima 1983, Genetics 105:437).
    pub fn theta_pi(&self) -> f64 {
        let m = f64::from(self.m);
        self.weighted(|k| 2.0 * k * (m - k)) / (m * (m - 1.0))
    }

    /// θ_W = S / a_m (Watterson 1975, TPB 7:256).
    pub fn theta_w(&self) -> f64 {
        self.segregating_sites() / harmonic(self.m)
    }

    /// θ_H = Σ 2 k² ξ_k / (m(m-1)) (Fay & Wu 2000, Genetics 155:1405).
    pub fn theta_h(&self) -> f64 {
        let m = f64::from(self.m);
        self.weighted(|k| 2.0 * k * k) / (m * (m - 1.0))
    }

    /// θ_L = Σ k ξ_k / (m-1) (Zeng, Fu, Shi & Wu 2006, Genetics 174:1431).
    pub fn theta_l(&self) -> f64 {
        self.weighted(|k| k) / (f64::from(self.m) - 1.0)
    }

    /// Tajima's D with real S.
    ///
    /// ```text
    /// D = (π - S/a1) / sqrt(e1 S + e2 S(S-1))
    /// ```
    /// Source: Tajima (1989), Genetics 123:585. `None` when S = 0 or the variance is not
    /// positive (m = 2, or 0 < S < 1 where S(S-1) < 0 can make it vanish).
    pub fn tajima_d(&self) -> Option<f64> {
        let k = TajimaConstants::new(self.m).ok()?;
        let s = self.segregating_sites();
        if s <= 0.0 {
            return None;
        }
        let var = k.e1 * s + k.e2 * s * (s - 1.0);
        (var > 0.0).then(|| (self.theta_pi() - s / k.a1) / var.sqrt())
    }

    /// Fay & Wu's H = θ_π - θ_H, unnormalised (Fay & Wu 2000).
    pub fn fay_wu_h(&self) -> f64 {
        self.theta_pi() - self.theta_h()
    }

    /// Normalised H of Zeng et al. (2006) with real S.
    ///
    /// ```text
    /// H_norm = (θ_π - θ_L) / sqrt(lin θ̂ + quad θ̂²),   θ̂ = S/a1,   θ̂² = S(S-1)/(a1² + a2)
    /// ```
    /// `None` when S = 0 or the variance estimate is not positive (always for m = 2).
    pub fn normalized_fay_wu_h(&self) -> Option<f64> {
        let (lin, quad) = zeng_variance_coefficients(self.m)?;
        let s = self.segregating_sites();
        if s <= 0.0 {
            return None;
        }
        let (a1, a2) = (harmonic(self.m), harmonic_squares(self.m));
        let var = lin * s / a1 + quad * s * (s - 1.0) / (a1 * a1 + a2);
        (var > 0.0).then(|| (self.theta_pi() - self.theta_l()) / var.sqrt())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::Sfs;
    use statrs::function::factorial::binomial;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn one_site_with_missing_data_by_hand() {
        // A site with n = 6 called sequences, j = 2 derived, projected to m = 4.
        // Hypergeometric (Marth et al. 2004): C(6,4) = 15 and
        //   k=0: C(2,0) C(4,4) / 15 = 1/15
        //   k=1: C(2,1) C(4,3) / 15 = 8/15
        //   k=2: C(2,2) C(4,2) / 15 = 6/15
        // P(segregating in the subsample) = 1 - P(k=0) - P(k=4) = 1 - 1/15 - 0 = 14/15.
        let mut p = Projector::new(4);
        let mut classes = vec![0.0; 5];
        assert!(p.add_site(6, 2, &mut classes));
        let want = [1.0 / 15.0, 8.0 / 15.0, 6.0 / 15.0, 0.0, 0.0];
        for (k, (&g, &w)) in classes.iter().zip(&want).enumerate() {
            assert!(close(g, w, 1e-14), "k = {k}: {g} vs {w}");
            // Independent check with statrs' binomial coefficients.
            let kk = k as u64;
            let indep = if kk <= 2 { binomial(2, kk) * binomial(4, 4 - kk) / binomial(6, 4) } else { 0.0 };
            assert!(close(g, indep, 1e-12), "k = {k}: {g} vs statrs {indep}");
        }
        let sfs = ProjectedSfs::from_classes(&classes).unwrap();
        assert_eq!(sfs.xi().len(), 3);
        assert!(close(sfs.segregating_sites(), 14.0 / 15.0, 1e-14));
        // A site with fewer called sequences than m is refused.
        assert!(!p.add_site(3, 1, &mut classes));
    }

    #[test]
    fn projection_of_a_larger_site_matches_statrs() {
        // n = 40, j = 13, m = 10: every class against C(j,k) C(n-j,m-k)/C(n,m) from statrs,
        // and the probabilities sum to 1 (Vandermonde's identity).
        let mut p = Projector::new(10);
        let mut classes = vec![0.0; 11];
        p.add_site(40, 13, &mut classes);
        for (k, &g) in classes.iter().enumerate() {
            let k = k as u64;
            let w = binomial(13, k) * binomial(27, 10 - k) / binomial(40, 10);
            assert!(close(g, w, 1e-12 * w.max(1e-3)), "k = {k}: {g} vs {w}");
        }
        assert!(close(classes.iter().sum::<f64>(), 1.0, 1e-12));
    }

    #[test]
    fn identity_projection_equals_integer_statistics() {
        // m = n: each site lands in its own class, so the fractional statistics must equal
        // those of stats::Sfs on the same counts (exact computation both ways).
        let counts = [2u32, 1, 1, 3, 3, 1, 4];
        let mut p = Projector::new(5);
        let mut classes = vec![0.0; 6];
        for &c in &counts {
            p.add_site(5, c, &mut classes);
        }
        let f = ProjectedSfs::from_classes(&classes).unwrap();
        let s = Sfs::from_counts(5, &counts).unwrap();
        assert_eq!(f.segregating_sites(), s.segregating_sites() as f64);
        assert!(close(f.theta_pi(), s.theta_pi(), 1e-12));
        assert!(close(f.theta_w(), s.theta_w(), 1e-12));
        assert!(close(f.theta_h(), s.theta_h(), 1e-12));
        assert!(close(f.tajima_d().unwrap(), s.tajima_d().unwrap(), 1e-12));
        assert!(close(f.normalized_fay_wu_h().unwrap(), s.normalized_fay_wu_h().unwrap(), 1e-12));
        let folded: Vec<f64> = s.folded().iter().map(|&x| x as f64).collect();
        assert_eq!(f.folded(), folded);
    }

    #[test]
    fn projection_preserves_expected_pi() {
        // π of a site is its probability that two random sequences differ, 2j(n-j)/(n(n-1)),
        // and a subsample keeps that expectation: j = 3 of n = 7, m = 4.
        // 2·3·4/(7·6) = 24/42 = 4/7 (hand computation).
        let mut p = Projector::new(4);
        let mut classes = vec![0.0; 5];
        p.add_site(7, 3, &mut classes);
        let f = ProjectedSfs::from_classes(&classes).unwrap();
        assert!(close(f.theta_pi(), 4.0 / 7.0, 1e-13));
        // Tajima's D is undefined without segregating mass, and for m = 2.
        assert_eq!(ProjectedSfs::new(4, vec![0.0; 3]).unwrap().tajima_d(), None);
        assert_eq!(ProjectedSfs::new(2, vec![3.0]).unwrap().tajima_d(), None);
        assert!(ProjectedSfs::new(3, vec![1.0]).is_none());
    }
}
