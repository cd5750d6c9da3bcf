//! Summary statistics of a sample of sequences under the infinite-sites model.
//!
//! Two inputs are accepted:
//!
//! * the derived-allele counts per segregating site, `&[u32]` with each count in `1..=n-1`,
//!   turned into an unfolded site frequency spectrum [`Sfs`] from which every SFS-based
//!   statistic is computed (π, θ_W, θ_H, θ_L, Tajima's D, Fay & Wu's H, normalised H);
//! * a [`Haplotypes`] matrix (n samples × S sites of 0/1, each sample labelled with its deme)
//!   for what needs haplotypes: the number of distinct haplotypes, per-deme π and Hudson's
//!   F_ST between demes. [`SampleStats::from_haplotypes`] gathers everything in one pass
//!   over the sites.
//!
//! Allele 1 is the derived allele. Samples taken at different times are treated as if they
//! were contemporaneous: the SFS counts derived alleles among all sampled sequences, with no
//! correction for the ages of the samples.
//!
//! Undefined values are `None`: Tajima's D and the normalised H when S = 0 (or when their
//! variance vanishes, as for n = 2), θ's when n < 2, per-deme π for a deme with fewer than
//! 2 samples, and F_ST for a pair involving such a deme or with no between-deme difference.
//! Sums are accumulated in f64 from integer counts, so the results do not depend on the
//! order of the sites beyond rounding.
//!
//! [`ld`]: linkage disequilibrium (r²) between pairs of sites, binned by distance.

pub mod ld;

use serde::Serialize;

/// Why a sample could not be summarised.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum StatsError {
    /// SFS-based statistics need at least two sequences.
    #[error("a sample of {n} sequence(s) has no site frequency spectrum; at least 2 are needed")]
    SampleTooSmall {
        /// The sample size given.
        n: u32,
    },
    /// A derived-allele count is not in 1..=n-1, so the site is not segregating.
    #[error("site {site}: derived count {count} is not in 1..={max}", max = n.saturating_sub(1))]
    CountOutOfRange {
        /// Index of the site.
        site: usize,
        /// The offending count.
        count: u32,
        /// The sample size.
        n: u32,
    },
    /// A spectrum does not have n - 1 entries.
    #[error("a spectrum for n = {n} needs {expected} entries, got {got}")]
    SpectrumLength {
        /// The sample size.
        n: u32,
        /// n - 1.
        expected: usize,
        /// Entries given.
        got: usize,
    },
    /// Haplotype rows of different lengths.
    #[error("sample {sample} has {got} sites, but sample 0 has {expected}")]
    RaggedRows {
        /// Index of the offending sample.
        sample: usize,
        /// Sites in sample 0.
        expected: usize,
        /// Sites in this sample.
        got: usize,
    },
    /// A haplotype entry other than 0 or 1.
    #[error("sample {sample}, site {site}: allele {value} is not 0 or 1")]
    NotBinary {
        /// Index of the sample.
        sample: usize,
        /// Index of the site.
        site: usize,
        /// The offending value.
        value: u8,
    },
    /// The number of deme labels differs from the number of samples.
    #[error("{labels} deme labels given for {samples} samples")]
    DemeLabels {
        /// Deme labels given.
        labels: usize,
        /// Samples in the matrix.
        samples: usize,
    },
    /// A site column of the wrong length, or a carrier index out of range.
    #[error("sample index {index} is out of range for {samples} samples")]
    SampleIndex {
        /// The offending index (or column length).
        index: usize,
        /// Number of samples.
        samples: usize,
    },
}

/// a_n = Σ_{i=1}^{n-1} 1/i (Watterson's harmonic number; Tajima's a1). 0 for n < 2.
///
/// ```text
/// a_n = 1 + 1/2 + ... + 1/(n-1)
/// ```
pub fn harmonic(n: u32) -> f64 {
    (1..n).map(|i| 1.0 / f64::from(i)).sum()
}

/// b_n = Σ_{i=1}^{n-1} 1/i² (Tajima's a2). 0 for n < 2.
///
/// ```text
/// b_n = 1 + 1/4 + ... + 1/(n-1)^2
/// ```
pub fn harmonic_squares(n: u32) -> f64 {
    (1..n).map(|i| 1.0 / (f64::from(i) * f64::from(i))).sum()
}

/// The constants of Tajima's D for a sample of n sequences (Tajima 1989, Genetics 123:585).
///
/// ```text
/// a1 = Σ_{i<n} 1/i            a2 = Σ_{i<n} 1/i²
/// b1 = (n+1) / (3(n-1))        b2 = 2(n²+n+3) / (9n(n-1))
/// c1 = b1 - 1/a1               c2 = b2 - (n+2)/(a1 n) + a2/a1²
/// e1 = c1/a1                   e2 = c2/(a1² + a2)
/// ```
/// Defined for n >= 2. Under the standard neutral model Var(π) = b1 θ + b2 θ² (Tajima 1983)
/// and Var(π - S/a1) = c1 θ + c2 θ², whence e1 S + e2 S(S-1) estimates the latter.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TajimaConstants {
    /// Σ_{i<n} 1/i.
    pub a1: f64,
    /// Σ_{i<n} 1/i².
    pub a2: f64,
    /// (n+1)/(3(n-1)).
    pub b1: f64,
    /// 2(n²+n+3)/(9n(n-1)).
    pub b2: f64,
    /// b1 - 1/a1.
    pub c1: f64,
    /// b2 - (n+2)/(a1 n) + a2/a1².
    pub c2: f64,
    /// c1/a1.
    pub e1: f64,
    /// c2/(a1² + a2).
    pub e2: f64,
}

impl TajimaConstants {
    /// The constants for n sequences; an error when n < 2.
    pub fn new(n: u32) -> Result<Self, StatsError> {
        if n < 2 {
            return Err(StatsError::SampleTooSmall { n });
        }
        let nf = f64::from(n);
        let a1 = harmonic(n);
        let a2 = harmonic_squares(n);
        let b1 = (nf + 1.0) / (3.0 * (nf - 1.0));
        let b2 = 2.0 * (nf * nf + nf + 3.0) / (9.0 * nf * (nf - 1.0));
        let c1 = b1 - 1.0 / a1;
        let c2 = b2 - (nf + 2.0) / (a1 * nf) + a2 / (a1 * a1);
        Ok(TajimaConstants { a1, a2, b1, b2, c1, c2, e1: c1 / a1, e2: c2 / (a1 * a1 + a2) })
    }
}

/// Tajima's D from n, the number of segregating sites S and the mean pairwise difference π.
///
/// ```text
/// D = (π - S/a1) / sqrt(e1 S + e2 S(S-1))
/// ```
/// Source: Tajima (1989), Genetics 123:585. `None` when n < 2, when S = 0, or when the
/// variance estimate is not positive (n = 2, where e1 = e2 = 0).
pub fn tajima_d(n: u32, s: u64, pi: f64) -> Option<f64> {
    let k = TajimaConstants::new(n).ok()?;
    if s == 0 {
        return None;
    }
    let sf = s as f64;
    let var = k.e1 * sf + k.e2 * sf * (sf - 1.0);
    (var > 0.0).then(|| (pi - sf / k.a1) / var.sqrt())
}

/// Coefficients (lin, quad) of Var(θ_π - θ_L) = lin θ + quad θ² under the standard neutral model.
///
/// ```text
/// lin  = (n-2) / (6(n-1))
/// quad = [18 n² (3n+2) B - (88n³ + 9n² - 13n + 6)] / (9 n (n-1)²),   B = Σ_{i=1}^{n} 1/i²
/// ```
/// Source: Zeng, Fu, Shi & Wu (2006), Genetics 174:1431 (formula as given in theory reference
/// §2.3). Var(H) for Fay & Wu's H = 2(θ_π - θ_L) is four times this. `None` for n < 2.
pub fn zeng_variance_coefficients(n: u32) -> Option<(f64, f64)> {
    if n < 2 {
        return None;
    }
    let nf = f64::from(n);
    let b = harmonic_squares(n + 1);
    let lin = (nf - 2.0) / (6.0 * (nf - 1.0));
    let quad = (18.0 * nf * nf * (3.0 * nf + 2.0) * b - (88.0 * nf.powi(3) + 9.0 * nf * nf - 13.0 * nf + 6.0))
        / (9.0 * nf * (nf - 1.0).powi(2));
    Some((lin, quad))
}

/// Normalised Fay & Wu's H of Zeng, Fu, Shi & Wu (2006), from n, S, θ_π and θ_L.
///
/// ```text
/// H_norm = (θ_π - θ_L) / sqrt(lin θ̂ + quad θ̂²),   θ̂ = S/a1,   θ̂² = S(S-1)/(a1² + a2)
/// ```
/// with (lin, quad) from [`zeng_variance_coefficients`]. `None` when n < 2, S = 0 or the
/// variance estimate is not positive (always the case for n = 2).
pub fn normalized_fay_wu_h(n: u32, s: u64, theta_pi: f64, theta_l: f64) -> Option<f64> {
    let (lin, quad) = zeng_variance_coefficients(n)?;
    if s == 0 {
        return None;
    }
    let (a1, a2) = (harmonic(n), harmonic_squares(n));
    let sf = s as f64;
    let var = lin * sf / a1 + quad * sf * (sf - 1.0) / (a1 * a1 + a2);
    (var > 0.0).then(|| (theta_pi - theta_l) / var.sqrt())
}

/// Coefficients (lin, quad) of Var(θ_W) = lin θ + quad θ² under the standard neutral model.
///
/// ```text
/// Var(S/a_n) = θ/a_n + θ² b_n/a_n²
/// ```
/// Source: Watterson (1975), TPB 7:256 (Var S = θ a_n + θ² b_n). `None` for n < 2.
pub fn watterson_variance_coefficients(n: u32) -> Option<(f64, f64)> {
    if n < 2 {
        return None;
    }
    let (a, b) = (harmonic(n), harmonic_squares(n));
    Some((1.0 / a, b / (a * a)))
}

/// Unfolded site frequency spectrum of a sample of n sequences.
///
/// `xi()[i-1]` = ξ_i, the number of segregating sites whose derived allele is carried by
/// exactly i of the n sequences, i = 1..n-1. Needs n >= 2.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Sfs {
    n: u32,
    xi: Vec<u64>,
}

impl Sfs {
    /// Builds the spectrum from derived-allele counts, one per segregating site (each in 1..=n-1).
    pub fn from_counts(n: u32, counts: &[u32]) -> Result<Self, StatsError> {
        if n < 2 {
            return Err(StatsError::SampleTooSmall { n });
        }
        let mut xi = vec![0u64; n as usize - 1];
        for (site, &count) in counts.iter().enumerate() {
            if count == 0 || count >= n {
                return Err(StatsError::CountOutOfRange { site, count, n });
            }
            xi[count as usize - 1] += 1;
        }
        Ok(Sfs { n, xi })
    }

    /// Wraps a spectrum given as ξ_1..ξ_{n-1}.
    pub fn from_spectrum(n: u32, xi: Vec<u64>) -> Result<Self, StatsError> {
        if n < 2 {
            return Err(StatsError::SampleTooSmall { n });
        }
        if xi.len() != n as usize - 1 {
            return Err(StatsError::SpectrumLength { n, expected: n as usize - 1, got: xi.len() });
        }
        Ok(Sfs { n, xi })
    }

    /// The sample size n.
    pub fn n(&self) -> u32 {
        self.n
    }

    /// ξ_1..ξ_{n-1} (index 0 holds ξ_1).
    pub fn xi(&self) -> &[u64] {
        &self.xi
    }

    /// Folded spectrum η_1..η_{floor(n/2)}.
    ///
    /// ```text
    /// η_i = ξ_i + ξ_{n-i}   for i < n/2,      η_{n/2} = ξ_{n/2}   (n even)
    /// ```
    /// The minor-allele count spectrum, usable when the ancestral state is unknown.
    pub fn folded(&self) -> Vec<u64> {
        let n = self.n as usize;
        (1..=n / 2).map(|i| if 2 * i == n { self.xi[i - 1] } else { self.xi[i - 1] + self.xi[n - i - 1] }).collect()
    }

    /// Number of segregating sites S = Σ ξ_i.
    pub fn segregating_sites(&self) -> u64 {
        self.xi.iter().sum()
    }

    /// Weighted sum Σ w(i) ξ_i.
    fn weighted(&self, w: impl Fn(f64) -> f64) -> f64 {
        self.xi.iter().enumerate().map(|(k, &x)| w((k + 1) as f64) * x as f64).sum()
    }

    /// θ_π, the mean number of pairwise differences.
    ///
    /// ```text
    /// θ_π = Σ_i 2 i (n-i) ξ_i / (n(n-1))
    /// ```
    /// Source: Tajima (1983), Genetics 105:437; unbiased for θ under neutrality.
    pub fn theta_pi(&self) -> f64 {
        let n = f64::from(self.n);
        self.weighted(|i| 2.0 * i * (n - i)) / (n * (n - 1.0))
    }

    /// Watterson's θ_W = S / a_n (Watterson 1975, TPB 7:256).
    pub fn theta_w(&self) -> f64 {
        self.segregating_sites() as f64 / harmonic(self.n)
    }

    /// Fay & Wu's θ_H, weighting high-frequency derived variants.
    ///
    /// ```text
    /// θ_H = Σ_i 2 i² ξ_i / (n(n-1))
    /// ```
    /// Source: Fay & Wu (2000), Genetics 155:1405.
    pub fn theta_h(&self) -> f64 {
        let n = f64::from(self.n);
        self.weighted(|i| 2.0 * i * i) / (n * (n - 1.0))
    }

    /// θ_L = Σ_i i ξ_i / (n-1) (Zeng, Fu, Shi & Wu 2006). θ_H = 2 θ_L - θ_π.
    pub fn theta_l(&self) -> f64 {
        self.weighted(|i| i) / (f64::from(self.n) - 1.0)
    }

    /// Tajima's D of this spectrum; see [`tajima_d`]. `None` when S = 0 or n = 2.
    pub fn tajima_d(&self) -> Option<f64> {
        tajima_d(self.n, self.segregating_sites(), self.theta_pi())
    }

    /// Fay & Wu's H = θ_π - θ_H (Fay & Wu 2000), unnormalised.
    pub fn fay_wu_h(&self) -> f64 {
        self.theta_pi() - self.theta_h()
    }

    /// Normalised H of Zeng et al. (2006); see [`normalized_fay_wu_h`]. `None` when S = 0 or n = 2.
    pub fn normalized_fay_wu_h(&self) -> Option<f64> {
        normalized_fay_wu_h(self.n, self.segregating_sites(), self.theta_pi(), self.theta_l())
    }
}

/// A 0/1 haplotype matrix: n samples × S sites, each sample labelled with its deme.
///
/// Storage is column-major bitsets: site j occupies `words = ceil(n/64)` consecutive u64
/// words, bit s of the site's bitset set when sample s carries the derived allele. Columns
/// are what the statistics consume (per-site counts), so this keeps them contiguous.
/// Demes are labelled 0..D-1 with D = 1 + the largest label; a label with no sample is an
/// empty deme.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Haplotypes {
    n: usize,
    words: usize,
    sites: usize,
    bits: Vec<u64>,
    demes: Vec<u32>,
}

impl Haplotypes {
    /// An empty matrix (no sites) for samples with the given deme labels.
    pub fn new(demes: Vec<u32>) -> Self {
        let n = demes.len();
        Haplotypes { n, words: n.div_ceil(64), sites: 0, bits: Vec::new(), demes }
    }

    /// Builds the matrix from rows (one per sample) of 0/1 alleles.
    pub fn from_rows<R: AsRef<[u8]>>(rows: &[R], demes: Vec<u32>) -> Result<Self, StatsError> {
        if rows.len() != demes.len() {
            return Err(StatsError::DemeLabels { labels: demes.len(), samples: rows.len() });
        }
        let mut h = Haplotypes::new(demes);
        let sites = rows.first().map_or(0, |r| r.as_ref().len());
        for (sample, row) in rows.iter().enumerate() {
            if row.as_ref().len() != sites {
                return Err(StatsError::RaggedRows { sample, expected: sites, got: row.as_ref().len() });
            }
        }
        h.bits = vec![0; sites * h.words];
        h.sites = sites;
        for (sample, row) in rows.iter().enumerate() {
            for (site, &value) in row.as_ref().iter().enumerate() {
                match value {
                    0 => {}
                    1 => h.bits[site * h.words + sample / 64] |= 1 << (sample % 64),
                    _ => return Err(StatsError::NotBinary { sample, site, value }),
                }
            }
        }
        Ok(h)
    }

    /// Appends a site given by the indices of the samples carrying the derived allele.
    pub fn push_site_carriers(&mut self, carriers: &[usize]) -> Result<(), StatsError> {
        let mut column = vec![0u64; self.words];
        for &s in carriers {
            if s >= self.n {
                return Err(StatsError::SampleIndex { index: s, samples: self.n });
            }
            column[s / 64] |= 1 << (s % 64);
        }
        self.bits.extend_from_slice(&column);
        self.sites += 1;
        Ok(())
    }

    /// Number of samples n.
    pub fn samples(&self) -> usize {
        self.n
    }

    /// Number of sites (columns), segregating or not.
    pub fn sites(&self) -> usize {
        self.sites
    }

    /// Deme label of each sample.
    pub fn demes(&self) -> &[u32] {
        &self.demes
    }

    /// Number of demes D = 1 + the largest label (0 with no samples).
    pub fn deme_count(&self) -> usize {
        self.demes.iter().max().map_or(0, |&d| d as usize + 1)
    }

    /// Whether sample `sample` carries the derived allele at `site`. Panics when out of range.
    pub fn get(&self, sample: usize, site: usize) -> bool {
        assert!(sample < self.n && site < self.sites, "index out of range");
        self.column(site)[sample / 64] >> (sample % 64) & 1 == 1
    }

    fn column(&self, site: usize) -> &[u64] {
        &self.bits[site * self.words..(site + 1) * self.words]
    }

    /// Number of samples carrying the derived allele at `site`. Panics when out of range.
    pub fn derived_count(&self, site: usize) -> u32 {
        self.column(site).iter().map(|w| w.count_ones()).sum()
    }

    /// Number of distinct haplotypes among the n samples (monomorphic sites included, which
    /// cannot change the count).
    pub fn distinct_haplotypes(&self) -> usize {
        // Refine a partition of the samples site by site: two samples stay in one class while
        // their alleles agree at every site so far. O(n) per site, no sort; stops early once
        // every sample is alone.
        let n = self.n;
        if n == 0 {
            return 0;
        }
        let mut class = vec![0u32; n];
        let mut classes = 1usize;
        let mut table: Vec<u32> = Vec::new();
        for site in 0..self.sites {
            if classes == n {
                break;
            }
            let col = self.column(site);
            table.clear();
            table.resize(2 * classes, u32::MAX);
            let mut next = 0u32;
            for (s, c) in class.iter_mut().enumerate() {
                let slot = 2 * *c as usize + (col[s / 64] >> (s % 64) & 1) as usize;
                if table[slot] == u32::MAX {
                    table[slot] = next;
                    next += 1;
                }
                *c = table[slot];
            }
            classes = next as usize;
        }
        classes
    }

    /// All summary statistics; see [`SampleStats::from_haplotypes`].
    pub fn stats(&self) -> SampleStats {
        SampleStats::from_haplotypes(self)
    }
}

/// Hudson's F_ST between two demes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FstPair {
    /// First deme (smaller label).
    pub deme_a: u32,
    /// Second deme.
    pub deme_b: u32,
    /// H_b, mean number of differences between a sequence of deme a and one of deme b;
    /// `None` when either deme is empty.
    pub between: Option<f64>,
    /// 1 - H_w/H_b; `None` when a deme has fewer than 2 samples or H_b = 0.
    pub fst: Option<f64>,
}

/// Summary statistics of a sample (see the module documentation for conventions).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SampleStats {
    /// Sample size n.
    pub n: u32,
    /// Number of segregating sites S (sites with derived count in 1..n-1).
    pub segregating_sites: u64,
    /// Unfolded SFS ξ_1..ξ_{n-1} (empty when n < 2).
    pub sfs: Vec<u64>,
    /// Folded SFS η_1..η_{floor(n/2)}.
    pub folded_sfs: Vec<u64>,
    /// θ_π (mean pairwise differences); `None` when n < 2.
    pub theta_pi: Option<f64>,
    /// Watterson's θ_W; `None` when n < 2.
    pub theta_w: Option<f64>,
    /// Fay & Wu's θ_H; `None` when n < 2.
    pub theta_h: Option<f64>,
    /// θ_L of Zeng et al. (2006); `None` when n < 2.
    pub theta_l: Option<f64>,
    /// Tajima's D; `None` when S = 0 or n <= 2.
    pub tajima_d: Option<f64>,
    /// Fay & Wu's H = θ_π - θ_H; `None` when n < 2.
    pub fay_wu_h: Option<f64>,
    /// Normalised H of Zeng et al. (2006); `None` when S = 0 or n <= 2.
    pub normalized_h: Option<f64>,
    /// Number of distinct haplotypes.
    pub distinct_haplotypes: usize,
    /// Number of samples in each deme 0..D-1.
    pub deme_sizes: Vec<u32>,
    /// Mean pairwise differences within each deme; `None` for a deme with < 2 samples.
    pub deme_pi: Vec<Option<f64>>,
    /// Hudson's F_ST for every pair of demes a < b, in lexicographic order.
    pub fst: Vec<FstPair>,
}

impl SampleStats {
    /// Computes every statistic in one pass over the sites, from per-site (per-deme) counts.
    ///
    /// ```text
    /// π_a  = Σ_sites 2 c_a (n_a - c_a) / (n_a (n_a - 1))
    /// H_b  = Σ_sites (c_a (n_b - c_b) + c_b (n_a - c_a)) / (n_a n_b)
    /// F_ST = 1 - H_w/H_b,   H_w = (π_a + π_b)/2
    /// ```
    /// F_ST after Hudson, Slatkin & Maddison (1992), Genetics 132:583. Sites with derived
    /// count 0 or n are not segregating and are skipped. Cost O(n S / 64 + S D²) plus the
    /// carriers of each site.
    pub fn from_haplotypes(h: &Haplotypes) -> Self {
        let n = h.n;
        let demes = h.deme_count();
        let mut deme_sizes = vec![0u32; demes];
        for &d in &h.demes {
            deme_sizes[d as usize] += 1;
        }
        let mut xi = vec![0u64; n.saturating_sub(1)];
        // Per-deme within sums and per-pair between sums, as counts of differing pairs.
        let mut within = vec![0u64; demes];
        let mut between = vec![0u64; demes * demes];
        let mut c = vec![0u64; demes];
        for site in 0..h.sites {
            let col = h.column(site);
            let count: u32 = col.iter().map(|w| w.count_ones()).sum();
            if count == 0 || count as usize >= n {
                continue;
            }
            xi[count as usize - 1] += 1;
            c.iter_mut().for_each(|x| *x = 0);
            for (w, &word) in col.iter().enumerate() {
                let mut word = word;
                while word != 0 {
                    c[h.demes[w * 64 + word.trailing_zeros() as usize] as usize] += 1;
                    word &= word - 1;
                }
            }
            for a in 0..demes {
                let na = u64::from(deme_sizes[a]);
                within[a] += c[a] * (na - c[a]);
                for b in a + 1..demes {
                    let nb = u64::from(deme_sizes[b]);
                    between[a * demes + b] += c[a] * (nb - c[b]) + c[b] * (na - c[a]);
                }
            }
        }
        let deme_pi: Vec<Option<f64>> = (0..demes)
            .map(|a| {
                let na = f64::from(deme_sizes[a]);
                // 2 c (n-c) / (n(n-1)) summed over sites.
                (deme_sizes[a] >= 2).then(|| 2.0 * within[a] as f64 / (na * (na - 1.0)))
            })
            .collect();
        let mut fst = Vec::new();
        for a in 0..demes {
            for b in a + 1..demes {
                let (na, nb) = (f64::from(deme_sizes[a]), f64::from(deme_sizes[b]));
                let hb = (na > 0.0 && nb > 0.0).then(|| between[a * demes + b] as f64 / (na * nb));
                let f = match (deme_pi[a], deme_pi[b], hb) {
                    (Some(pa), Some(pb), Some(hb)) if hb > 0.0 => Some(1.0 - 0.5 * (pa + pb) / hb),
                    _ => None,
                };
                fst.push(FstPair { deme_a: a as u32, deme_b: b as u32, between: hb, fst: f });
            }
        }
        let n32 = n as u32;
        let sfs = Sfs::from_spectrum(n32, xi.clone()).ok();
        SampleStats {
            n: n32,
            segregating_sites: xi.iter().sum(),
            folded_sfs: sfs.as_ref().map_or_else(Vec::new, Sfs::folded),
            theta_pi: sfs.as_ref().map(Sfs::theta_pi),
            theta_w: sfs.as_ref().map(Sfs::theta_w),
            theta_h: sfs.as_ref().map(Sfs::theta_h),
            theta_l: sfs.as_ref().map(Sfs::theta_l),
            tajima_d: sfs.as_ref().and_then(Sfs::tajima_d),
            fay_wu_h: sfs.as_ref().map(Sfs::fay_wu_h),
            normalized_h: sfs.as_ref().and_then(Sfs::normalized_fay_wu_h),
            sfs: xi,
            distinct_haplotypes: h.distinct_haplotypes(),
            deme_sizes,
            deme_pi,
            fst,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn tajima_constants_match_reference_table() {
        // Source: Tajima (1989), Genetics 123:585; constants from theory reference §2.2 table.
        let table = [
            (
                10,
                [
                    2.828968254,
                    1.539767731,
                    0.4074074074,
                    0.2790123457,
                    0.05392164503,
                    0.047226772,
                    0.0190605338,
                    0.00494892777,
                ],
            ),
            (
                50,
                [
                    4.479205338,
                    1.624732734,
                    0.3469387755,
                    0.2315646259,
                    0.1236848891,
                    0.08036099672,
                    0.02761313218,
                    0.003705318509,
                ],
            ),
        ];
        for (n, want) in table {
            let k = TajimaConstants::new(n).unwrap();
            let got = [k.a1, k.a2, k.b1, k.b2, k.c1, k.c2, k.e1, k.e2];
            for (g, w) in got.iter().zip(want) {
                assert!(close(*g, w, 1e-9), "n = {n}: {g} vs {w}");
            }
        }
        assert_eq!(TajimaConstants::new(1), Err(StatsError::SampleTooSmall { n: 1 }));
    }

    #[test]
    fn tajima_d_worked_examples() {
        // Source: theory reference §2.2 worked examples (Tajima 1989 formula).
        assert!(close(tajima_d(10, 16, 3.888889).unwrap(), -1.446172, 1e-6));
        assert!(close(tajima_d(50, 30, 5.0).unwrap(), -0.843342, 1e-6));
        // D undefined without segregating sites, and for n = 2 (e1 = e2 = 0).
        assert_eq!(tajima_d(10, 0, 0.0), None);
        assert_eq!(tajima_d(2, 3, 3.0), None);
    }

    /// 4 sequences x 5 sites, demes {0,1} and {2,3}.
    fn toy() -> Haplotypes {
        let rows: [[u8; 5]; 4] = [[1, 0, 0, 1, 1], [1, 1, 0, 0, 1], [0, 0, 0, 1, 1], [0, 0, 1, 1, 0]];
        Haplotypes::from_rows(&rows, vec![0, 0, 1, 1]).unwrap()
    }

    #[test]
    fn hand_made_alignment() {
        // Computed by hand (exact rationals):
        // derived counts per site 2,1,1,3,3 -> ξ = (2, 1, 2), S = 5, folded η = (4, 1).
        // Pairwise differences d01=2 d02=1 d03=3 d12=3 d13=5 d23=2 -> π = 16/6 = 8/3,
        // and from the SFS (2·1·3·2 + 2·2·2·1 + 2·3·1·2)/12 = 32/12 (Tajima 1983).
        // θ_W = 5/(11/6) = 30/11. θ_H = (2·1·2 + 2·4·1 + 2·9·2)/12 = 4 (Fay & Wu 2000), H = -4/3.
        // θ_L = (2 + 2 + 6)/3 = 10/3.
        // Tajima 1989 for n=4: a1 = 11/6, a2 = 49/36, c1 = 1/99, c2 = 83/6534, e1 = 2/363,
        // e2 = 249/92565, so D = (8/3 - 30/11)/sqrt(5 e1 + 20 e2) = (-2/33)/sqrt(10/363 + 4980/92565).
        let h = toy();
        let st = h.stats();
        assert_eq!(st.n, 4);
        assert_eq!(st.segregating_sites, 5);
        assert_eq!(st.sfs, vec![2, 1, 2]);
        assert_eq!(st.folded_sfs, vec![4, 1]);
        assert!(close(st.theta_pi.unwrap(), 8.0 / 3.0, 1e-12));
        assert!(close(st.theta_w.unwrap(), 30.0 / 11.0, 1e-12));
        assert!(close(st.theta_h.unwrap(), 4.0, 1e-12));
        assert!(close(st.theta_l.unwrap(), 10.0 / 3.0, 1e-12));
        assert!(close(st.fay_wu_h.unwrap(), -4.0 / 3.0, 1e-12));
        let d = (-2.0 / 33.0) / (10.0 / 363.0 + 4980.0 / 92565.0f64).sqrt();
        assert!(close(st.tajima_d.unwrap(), d, 1e-12));
        let k = TajimaConstants::new(4).unwrap();
        assert!(close(k.c1, 1.0 / 99.0, 1e-15) && close(k.c2, 83.0 / 6534.0, 1e-15));
        assert!(close(k.e2, 249.0 / 92565.0, 1e-15));
        assert_eq!(st.distinct_haplotypes, 4);
        // Same numbers through the count API.
        let sfs = Sfs::from_counts(4, &[2, 1, 1, 3, 3]).unwrap();
        assert_eq!(sfs.xi(), &[2, 1, 2]);
        assert_eq!(sfs.tajima_d(), st.tajima_d);
    }

    #[test]
    fn hudson_fst_toy_two_demes() {
        // By hand from the toy alignment: within deme 0 d01 = 2, within deme 1 d23 = 2, so
        // H_w = 2; between d02 + d03 + d12 + d13 = 1 + 3 + 3 + 5 = 12 over 4 pairs, H_b = 3.
        // F_ST = 1 - 2/3 = 1/3 (Hudson, Slatkin & Maddison 1992 definition).
        let st = toy().stats();
        assert_eq!(st.deme_sizes, vec![2, 2]);
        assert!(close(st.deme_pi[0].unwrap(), 2.0, 1e-12));
        assert!(close(st.deme_pi[1].unwrap(), 2.0, 1e-12));
        assert_eq!(st.fst.len(), 1);
        assert!(close(st.fst[0].between.unwrap(), 3.0, 1e-12));
        assert!(close(st.fst[0].fst.unwrap(), 1.0 / 3.0, 1e-12));
    }

    #[test]
    fn singleton_deme_and_duplicates() {
        // Deme 1 holds one sample: its π and every F_ST involving it are undefined.
        let rows: [&[u8]; 4] = [&[1, 0], &[1, 0], &[0, 1], &[1, 1]];
        let h = Haplotypes::from_rows(&rows, vec![0, 0, 0, 1]).unwrap();
        let st = h.stats();
        assert_eq!(st.deme_pi[1], None);
        assert_eq!(st.fst[0].fst, None);
        // Rows 10, 10, 01, 11: three distinct.
        assert_eq!(st.distinct_haplotypes, 3);
        // A monomorphic column is skipped; one sample gives no θ.
        let mut m = Haplotypes::new(vec![0]);
        m.push_site_carriers(&[0]).unwrap();
        let st = m.stats();
        assert_eq!((st.segregating_sites, st.theta_pi, st.tajima_d), (0, None, None));
        assert_eq!(m.push_site_carriers(&[1]), Err(StatsError::SampleIndex { index: 1, samples: 1 }));
    }

    #[test]
    fn bitsets_across_word_boundary() {
        // 130 samples: sample 129 lives in the third word. Site 0 carried by samples 0 and
        // 129 (count 2), site 1 by 64..=129 (count 66). π = Σ 2c(n-c)/(n(n-1)) (Tajima 1983).
        let mut h = Haplotypes::new(vec![0; 130]);
        h.push_site_carriers(&[0, 129]).unwrap();
        h.push_site_carriers(&(64..130).collect::<Vec<_>>()).unwrap();
        assert!(h.get(129, 0) && !h.get(128, 0) && h.get(64, 1));
        assert_eq!((h.derived_count(0), h.derived_count(1)), (2, 66));
        let st = h.stats();
        let want = (2.0 * 2.0 * 128.0 + 2.0 * 66.0 * 64.0) / (130.0 * 129.0);
        assert!(close(st.theta_pi.unwrap(), want, 1e-12));
        // Haplotypes: {0}: 10, 1..63: 00, 64..128: 01, 129: 11.
        assert_eq!(st.distinct_haplotypes, 4);
    }

    #[test]
    fn distinct_haplotypes_equal_distinct_rows() {
        // Reference: the rows themselves, sorted and deduplicated. Random 0/1 matrices with
        // few distinct rows (rows copied from a small pool, then mutated), across word
        // boundaries in both samples (n up to 150) and sites (up to 140).
        use rand::{RngExt, SeedableRng};
        let mut rng = rand::rngs::ChaCha8Rng::seed_from_u64(9);
        for _ in 0..200 {
            let n = rng.random_range(1..150usize);
            let sites = rng.random_range(0..140usize);
            let pool: Vec<Vec<u8>> =
                (0..rng.random_range(1..8)).map(|_| (0..sites).map(|_| rng.random_range(0..2u8)).collect()).collect();
            let rows: Vec<Vec<u8>> = (0..n)
                .map(|_| {
                    let mut r = pool[rng.random_range(0..pool.len())].clone();
                    if sites > 0 && rng.random_bool(0.2) {
                        let j = rng.random_range(0..sites);
                        r[j] ^= 1;
                    }
                    r
                })
                .collect();
            let h = Haplotypes::from_rows(&rows, vec![0; n]).unwrap();
            let mut reference = rows.clone();
            reference.sort();
            reference.dedup();
            assert_eq!(h.distinct_haplotypes(), reference.len(), "n = {n}, sites = {sites}");
        }
        assert_eq!(Haplotypes::new(Vec::new()).distinct_haplotypes(), 0);
    }

    #[test]
    fn folded_spectrum_odd_and_even() {
        // η_i = ξ_i + ξ_{n-i}, η_{n/2} = ξ_{n/2} (theory reference §2.5).
        let s = Sfs::from_spectrum(5, vec![1, 2, 3, 4]).unwrap();
        assert_eq!(s.folded(), vec![5, 5]);
        let s = Sfs::from_spectrum(6, vec![1, 2, 3, 4, 5]).unwrap();
        assert_eq!(s.folded(), vec![6, 6, 3]);
    }

    #[test]
    fn bad_inputs_are_errors() {
        assert_eq!(Sfs::from_counts(5, &[1, 5]), Err(StatsError::CountOutOfRange { site: 1, count: 5, n: 5 }));
        assert_eq!(Sfs::from_counts(5, &[0]), Err(StatsError::CountOutOfRange { site: 0, count: 0, n: 5 }));
        assert_eq!(Sfs::from_counts(1, &[]), Err(StatsError::SampleTooSmall { n: 1 }));
        let rows: [&[u8]; 2] = [&[0, 1], &[1]];
        assert!(matches!(Haplotypes::from_rows(&rows, vec![0, 0]), Err(StatsError::RaggedRows { sample: 1, .. })));
        let rows: [&[u8]; 2] = [&[0, 2], &[1, 0]];
        assert!(matches!(Haplotypes::from_rows(&rows, vec![0, 0]), Err(StatsError::NotBinary { value: 2, .. })));
        assert!(matches!(Haplotypes::from_rows(&rows, vec![0]), Err(StatsError::DemeLabels { .. })));
    }

    #[test]
    fn zeng_variance_matches_reference_table() {
        // Source: Zeng, Fu, Shi & Wu (2006); theory reference §2.3 table (Var(H) = 4 Var(θ_π - θ_L)).
        for (n, x, y, lin, quad) in [
            (5, 0.5, 0.17013889, 0.125, 0.04253472),
            (10, 0.59259259, 0.26920237, 0.14814815, 0.06730059),
            (50, 0.65306122, 0.34819528, 0.16326531, 0.08704882),
        ] {
            let (l, q) = zeng_variance_coefficients(n).unwrap();
            assert!(close(l, lin, 1e-8) && close(q, quad, 1e-8), "n = {n}: {l} {q}");
            assert!(close(4.0 * l, x, 1e-8) && close(4.0 * q, y, 1e-8), "n = {n}");
        }
    }

    #[test]
    fn normalized_h_by_hand() {
        // Toy alignment, n = 4, S = 5: θ_π - θ_L = 8/3 - 10/3 = -2/3.
        // Zeng et al. 2006 coefficients for n = 4: lin = 2/18 = 1/9, B = 1 + 1/4 + 1/9 + 1/16 = 205/144,
        // quad = (18·16·14·205/144 - (88·64 + 144 - 52 + 6)) / (9·4·9) = (5740 - 5730)/324 = 10/324.
        // θ̂ = 30/11, θ̂² = 20/(121/36 + 49/36) = 720/170.
        let (l, q) = zeng_variance_coefficients(4).unwrap();
        assert!(close(l, 1.0 / 9.0, 1e-14) && close(q, 10.0 / 324.0, 1e-14));
        let var = 30.0 / 11.0 / 9.0 + 10.0 / 324.0 * 720.0 / 170.0;
        let h = toy().stats().normalized_h.unwrap();
        assert!(close(h, (-2.0 / 3.0) / f64::sqrt(var), 1e-12));
        assert_eq!(normalized_fay_wu_h(4, 0, 0.0, 0.0), None);
    }

    #[test]
    fn watterson_variance_coefficients_reference() {
        // Source: theory reference §8 (Watterson 1975): n=10 0.3534857624, 0.1923973412; n=50 0.2232538865, 0.0809804128.
        let (a, b) = watterson_variance_coefficients(10).unwrap();
        assert!(close(a, 0.3534857624, 1e-10) && close(b, 0.1923973412, 1e-10));
        let (a, b) = watterson_variance_coefficients(50).unwrap();
        assert!(close(a, 0.2232538865, 1e-10) && close(b, 0.0809804128, 1e-10));
    }

    #[test]
    fn theta_h_identity() {
        // θ_H = 2 θ_L - θ_π for any spectrum (theory reference §2.3, exact algebra).
        let s = Sfs::from_spectrum(7, vec![5, 0, 3, 1, 2, 7]).unwrap();
        assert!(close(s.theta_h(), 2.0 * s.theta_l() - s.theta_pi(), 1e-12));
        assert!(close(s.fay_wu_h(), 2.0 * (s.theta_pi() - s.theta_l()), 1e-12));
    }
}

/// Names of the per-replicate statistic columns, shared by `simulate`, `null` and `observe`:
///
/// ```text
/// segregating_sites pi theta_w tajima_d fay_wu_h fay_wu_h_norm haplotypes
/// pi_<deme> ... (one per deme)   fst_<a>_<b> ... (one per pair a < b, in deme order)
/// ```
pub fn stat_columns(deme_names: &[&str]) -> Vec<String> {
    let mut cols: Vec<String> =
        ["segregating_sites", "pi", "theta_w", "tajima_d", "fay_wu_h", "fay_wu_h_norm", "haplotypes"]
            .iter()
            .map(|s| s.to_string())
            .collect();
    cols.extend(deme_names.iter().map(|d| format!("pi_{d}")));
    for (a, da) in deme_names.iter().enumerate() {
        for db in &deme_names[a + 1..] {
            cols.push(format!("fst_{da}_{db}"));
        }
    }
    cols
}

impl SampleStats {
    /// The values of [`stat_columns`] in the same order (`None` where undefined).
    ///
    /// `n_demes` must be the number of demes the column names were made for; demes absent
    /// from the sample give `None`.
    pub fn column_values(&self, n_demes: usize) -> Vec<Option<f64>> {
        let mut v = vec![
            Some(self.segregating_sites as f64),
            self.theta_pi,
            self.theta_w,
            self.tajima_d,
            self.fay_wu_h,
            self.normalized_h,
            Some(self.distinct_haplotypes as f64),
        ];
        v.extend((0..n_demes).map(|d| self.deme_pi.get(d).copied().flatten()));
        for a in 0..n_demes as u32 {
            for b in a + 1..n_demes as u32 {
                v.push(self.fst.iter().find(|p| p.deme_a == a && p.deme_b == b).and_then(|p| p.fst));
            }
        }
        v
    }
}

#[cfg(test)]
mod column_tests {
    use super::*;

    #[test]
    fn columns_and_values_line_up() {
        // Two demes, one site carried by samples 0 and 2 (deme 0 = {0,1}, deme 1 = {2,3}):
        // π = 2 c (n - c)/(n (n - 1)) = 2·2·2/(4·3) = 2/3 (hand computation).
        let h = Haplotypes::from_rows(&[[1u8], [0], [1], [0]], vec![0, 0, 1, 1]).unwrap();
        let s = SampleStats::from_haplotypes(&h);
        let cols = stat_columns(&["a", "b"]);
        let vals = s.column_values(2);
        assert_eq!(cols.len(), vals.len());
        assert_eq!(cols[1], "pi");
        assert!((vals[1].unwrap() - 2.0 / 3.0).abs() < 1e-12);
        assert_eq!(cols.last().unwrap(), "fst_a_b");
    }
}

impl Haplotypes {
    /// Appends a site given as a bitset over samples (`ceil(n/64)` words, bit s = sample s).
    pub fn push_site_bits(&mut self, column: &[u64]) {
        debug_assert_eq!(column.len(), self.words);
        self.bits.extend_from_slice(column);
        self.sites += 1;
    }

    /// The bitset of one site (bit s set when sample s carries the derived allele).
    pub fn site_bits(&self, site: usize) -> &[u64] {
        self.column(site)
    }
}

/// The statistics whose mean and variance across loci are reported with several loci
/// (`<name>_locus_mean`, `<name>_locus_var`), by `simulate`, `null` and `observe` alike.
pub const LOCUS_SPREAD: [&str; 5] = ["pi", "segregating_sites", "tajima_d", "theta_w", "fay_wu_h"];

/// The column names `<name>_locus_mean`, `<name>_locus_var` for [`LOCUS_SPREAD`], in order.
pub fn locus_spread_columns() -> Vec<String> {
    LOCUS_SPREAD.iter().flat_map(|c| [format!("{c}_locus_mean"), format!("{c}_locus_var")]).collect()
}

/// Mean and sample variance (divisor n - 1) of `xs`: `(None, None)` when empty, no variance
/// for a single value.
pub fn mean_var(xs: &[f64]) -> (Option<f64>, Option<f64>) {
    if xs.is_empty() {
        return (None, None);
    }
    let n = xs.len() as f64;
    let m = xs.iter().sum::<f64>() / n;
    let v = (xs.len() > 1).then(|| xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0));
    (Some(m), v)
}

/// The per-locus values of [`LOCUS_SPREAD`] of one locus's statistics.
pub fn locus_spread_values(s: &SampleStats) -> [Option<f64>; 5] {
    [s.theta_pi, Some(s.segregating_sites as f64), s.tajima_d, s.theta_w, s.fay_wu_h]
}

/// Statistic column values of several unlinked loci taken together, aligned with
/// [`stat_columns`].
///
/// SFS-based statistics come from the summed SFS (S, π, θ_H, θ_L and the per-deme π add up
/// over loci; θ_W, Tajima's D and normalised H are computed from the sums), F_ST is the
/// ratio of sums 1 - Σ H_w / Σ H_b (Hudson, Slatkin & Maddison 1992, applied genome-wide),
/// and `haplotypes` is the mean number of distinct haplotypes per locus.
pub fn combined_column_values(loci: &[SampleStats], n_demes: usize) -> Vec<Option<f64>> {
    let Some(first) = loci.first() else { return Vec::new() };
    if loci.len() == 1 {
        return first.column_values(n_demes);
    }
    let n = first.n;
    let s: u64 = loci.iter().map(|l| l.segregating_sites).sum();
    let sum_opt = |f: &dyn Fn(&SampleStats) -> Option<f64>| -> Option<f64> { loci.iter().map(f).sum() };
    let pi = sum_opt(&|l| l.theta_pi);
    let theta_h = sum_opt(&|l| l.theta_h);
    let theta_l = sum_opt(&|l| l.theta_l);
    let a_n = harmonic(n);
    let mut v = vec![
        Some(s as f64),
        pi,
        (n >= 2).then(|| s as f64 / a_n),
        pi.and_then(|p| tajima_d(n, s, p)),
        pi.zip(theta_h).map(|(p, h)| p - h),
        pi.zip(theta_l).and_then(|(p, l)| normalized_fay_wu_h(n, s, p, l)),
        Some(loci.iter().map(|l| l.distinct_haplotypes as f64).sum::<f64>() / loci.len() as f64),
    ];
    let deme_pi: Vec<Option<f64>> =
        (0..n_demes).map(|d| loci.iter().map(|l| l.deme_pi.get(d).copied().flatten()).sum()).collect();
    v.extend(deme_pi.iter().copied());
    for a in 0..n_demes {
        for b in a + 1..n_demes {
            let between: Option<f64> = loci
                .iter()
                .map(|l| {
                    l.fst.iter().find(|p| p.deme_a as usize == a && p.deme_b as usize == b).and_then(|p| p.between)
                })
                .sum();
            let within = deme_pi[a].zip(deme_pi[b]).map(|(x, y)| (x + y) / 2.0);
            v.push(within.zip(between).and_then(|(w, hb)| (hb > 0.0).then(|| 1.0 - w / hb)));
        }
    }
    v
}
