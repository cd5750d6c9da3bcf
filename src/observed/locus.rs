//! Running sums of one locus as its sites stream past, and the statistics they give.
//!
//! A locus is a contig, a window or a region ([`super::layout`]). Everything `observe`
//! reports is a sum over sites (the projected spectrum, per-deme differences) except the
//! number of distinct haplotypes, which is counted per locus and averaged over loci: the
//! same definition as `simulate`, whose loci are unlinked genealogies
//! ([`crate::stats::combined_column_values`]).
//!
//! **Haplotypes by hashing.** Each sequence carries a 128-bit fingerprint of the set of used
//! sites of the locus at which it carries the derived (or, unpolarised, the ALT) allele:
//! the XOR of a pseudo-random key per site. Two sequences get the same fingerprint exactly
//! when they carry the same set, except with probability 2^-128 per pair (the keys are the
//! output of the splitmix64 finaliser, Steele, Lea & Flood 2014). Memory is 16 bytes per
//! sequence, whatever the number of sites. Flipping the orientation of a site XORs the same
//! key into every sequence's complement, which changes no equality between sequences.

use super::projection::{ProjectedSfs, Projector};

/// Why a locus has no haplotype count.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoHaplotypes {
    /// The sample is projected (M < n).
    Projected,
    /// A used diploid genotype is unphased.
    Unphased,
    /// A used site has a missing call.
    Missing,
}

/// Which allele is derived at a site.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Polarity {
    /// AA = REF: ALT is derived.
    Alt,
    /// AA = ALT: REF is derived.
    Ref,
    /// No AA: orient by ALT, fold later.
    Unknown,
}

/// The sums of one locus (or of the whole genome, when loci are added up).
#[derive(Debug, Clone)]
pub struct LocusSums {
    /// Projected classes 0..=M of the polarised sites.
    pub polarised: Vec<f64>,
    /// Projected classes 0..=M of the unpolarised sites (ALT-oriented).
    pub unpolarised: Vec<f64>,
    /// Σ 2 c (m - c) / (m (m - 1)) per deme.
    pub within: Vec<f64>,
    /// Σ (c_a (m_b - c_b) + c_b (m_a - c_a)) / (m_a m_b) per pair, at `a * D + b`.
    pub between: Vec<f64>,
    /// (site, deme) pairs with fewer than 2 called sequences from missing calls.
    pub deme_gaps: u64,
    /// Used sites.
    pub used: u64,
    /// Used sites with an ancestral allele.
    pub polarised_sites: u64,
    /// Low and high 64 bits of each sequence's fingerprint (two arrays, so that the update
    /// vectorises).
    fingerprints: [Vec<u64>; 2],
    no_haplotypes: Option<NoHaplotypes>,
    site_ordinal: u64,
}

/// Per-site values of one used site, handed to [`LocusSums::add_site`].
pub struct Site<'a> {
    /// Sequences called.
    pub n_called: u32,
    /// Derived alleles among them.
    pub derived: u32,
    /// Orientation.
    pub polarity: Polarity,
    /// Called sequences per deme.
    pub m: &'a [u32],
    /// Derived alleles per deme.
    pub c: &'a [u32],
}

impl LocusSums {
    /// Empty sums for a projected size `m`, `demes` demes and `n` sequences; `projected`
    /// when M < n (no haplotype count then).
    pub fn new(m: u32, demes: usize, n: usize) -> Self {
        LocusSums {
            polarised: vec![0.0; m as usize + 1],
            unpolarised: vec![0.0; m as usize + 1],
            within: vec![0.0; demes],
            between: vec![0.0; demes * demes],
            deme_gaps: 0,
            used: 0,
            polarised_sites: 0,
            fingerprints: [vec![0; n], vec![0; n]],
            no_haplotypes: (m as usize != n).then_some(NoHaplotypes::Projected),
            site_ordinal: 0,
        }
    }

    /// Adds one used site: its projection into the spectrum and the per-deme sums.
    /// `deme_sizes[a]` is the number of sequences of deme a in the sample.
    pub fn add_site(&mut self, projector: &mut Projector, site: &Site, deme_sizes: &[u32]) {
        let classes = if site.polarity == Polarity::Unknown { &mut self.unpolarised } else { &mut self.polarised };
        projector.add_site(site.n_called, site.derived, classes);
        self.used += 1;
        self.polarised_sites += u64::from(site.polarity != Polarity::Unknown);
        let d = site.m.len();
        #[allow(clippy::needless_range_loop)] // a indexes four parallel slices
        for a in 0..d {
            let (ma, ca) = (f64::from(site.m[a]), f64::from(site.c[a]));
            if site.m[a] >= 2 {
                self.within[a] += 2.0 * ca * (ma - ca) / (ma * (ma - 1.0));
            } else if deme_sizes[a] >= 2 {
                // Only a gap when missing calls, not the deme's size, left fewer than 2.
                self.deme_gaps += 1;
            }
            for b in a + 1..d {
                let (mb, cb) = (f64::from(site.m[b]), f64::from(site.c[b]));
                if site.m[a] > 0 && site.m[b] > 0 {
                    self.between[a * d + b] += (ca * (mb - cb) + cb * (ma - ca)) / (ma * mb);
                }
            }
        }
    }

    /// Marks the haplotype count of this locus undefined (the first reason is kept).
    pub fn spoil_haplotypes(&mut self, why: NoHaplotypes) {
        self.no_haplotypes.get_or_insert(why);
    }

    /// Folds the sequences whose allele (one per sequence, in order) equals `derived` into
    /// the fingerprints, as one more used site of the locus.
    pub fn add_carriers(&mut self, alleles: &[u8], derived: u8) {
        if self.no_haplotypes.is_some() {
            return;
        }
        let key = site_key(self.site_ordinal);
        self.site_ordinal += 1;
        // Branch-free so that the loops vectorise.
        for (half, k) in self.fingerprints.iter_mut().zip([key as u64, (key >> 64) as u64]) {
            for (f, &a) in half.iter_mut().zip(alleles) {
                *f ^= k & 0u64.wrapping_sub(u64::from(a == derived));
            }
        }
    }

    /// Number of distinct haplotypes, or why there is none.
    pub fn haplotypes(&self) -> Result<usize, NoHaplotypes> {
        if let Some(why) = self.no_haplotypes {
            return Err(why);
        }
        let [lo, hi] = &self.fingerprints;
        let mut f: Vec<u128> = lo.iter().zip(hi).map(|(&l, &h)| u128::from(h) << 64 | u128::from(l)).collect();
        f.sort_unstable();
        f.dedup();
        Ok(f.len())
    }

    /// Adds another locus's spectrum and per-deme sums (not its haplotypes).
    pub fn absorb(&mut self, other: &LocusSums) {
        let add = |a: &mut [f64], b: &[f64]| a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
        add(&mut self.polarised, &other.polarised);
        add(&mut self.unpolarised, &other.unpolarised);
        add(&mut self.within, &other.within);
        add(&mut self.between, &other.between);
        self.deme_gaps += other.deme_gaps;
        self.used += other.used;
        self.polarised_sites += other.polarised_sites;
    }

    /// The statistics of these sums, in the order of [`crate::stats::stat_columns`];
    /// `haplotypes` is given by the caller (per locus, or the mean over loci).
    /// `polarisable`: whether the data carry ancestral alleles at all (else H is undefined).
    pub fn values(&self, deme_size: &[u32], polarisable: bool, haplotypes: Option<f64>) -> Vec<Option<f64>> {
        let pol = ProjectedSfs::from_classes(&self.polarised).expect("m >= 2 checked");
        let unpol = ProjectedSfs::from_classes(&self.unpolarised).expect("m >= 2 checked");
        let all = pol.plus(&unpol);
        let demes = deme_size.len();
        let deme_pi: Vec<Option<f64>> = (0..demes).map(|a| (deme_size[a] >= 2).then_some(self.within[a])).collect();
        let mut values = vec![
            Some(all.segregating_sites()),
            Some(all.theta_pi()),
            Some(all.theta_w()),
            all.tajima_d(),
            polarisable.then(|| pol.fay_wu_h()),
            if polarisable { pol.normalized_fay_wu_h() } else { None },
            haplotypes,
        ];
        values.extend(&deme_pi);
        for a in 0..demes {
            for b in a + 1..demes {
                let hb = self.between[a * demes + b];
                values.push(match (deme_pi[a], deme_pi[b]) {
                    (Some(pa), Some(pb)) if hb > 0.0 => Some(1.0 - 0.5 * (pa + pb) / hb),
                    _ => None,
                });
            }
        }
        values
    }

    /// Unfolded spectrum of the polarised sites.
    pub fn polarised_sfs(&self) -> ProjectedSfs {
        ProjectedSfs::from_classes(&self.polarised).expect("m >= 2 checked")
    }

    /// Spectrum of all used sites (unpolarised ones ALT-oriented; fold before use).
    pub fn all_sfs(&self) -> ProjectedSfs {
        self.polarised_sfs().plus(&ProjectedSfs::from_classes(&self.unpolarised).expect("m >= 2 checked"))
    }
}

/// The key of the `i`-th used site of a locus: two splitmix64 outputs (Steele, Lea & Flood
/// 2014, "Fast splittable pseudorandom number generators", OOPSLA).
fn site_key(i: u64) -> u128 {
    fn mix(mut z: u64) -> u64 {
        z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    let a = mix(i.wrapping_mul(2));
    let b = mix(i.wrapping_mul(2).wrapping_add(1));
    (u128::from(a) << 64) | u128::from(b)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fingerprints_count_distinct_carrier_sets() {
        // Sequences 0..5 over three sites: carriers {0,1}, {1}, {0,1}.
        // Rows: 0 = {s0, s2}, 1 = {s0, s1, s2}, 2..4 = {}: three distinct haplotypes (by hand).
        let mut l = LocusSums::new(5, 1, 5);
        for alleles in [[1, 1, 0, 0, 0], [0, 1, 0, 0, 0], [1, 1, 0, 0, 0]] {
            l.add_carriers(&alleles, 1);
        }
        assert_eq!(l.haplotypes(), Ok(3));
        // Orienting the middle site the other way (carriers {0, 2, 3, 4}) changes nothing.
        let mut f = LocusSums::new(5, 1, 5);
        for (alleles, derived) in [([1, 1, 0, 0, 0], 1), ([1, 0, 1, 1, 1], 1), ([0, 0, 1, 1, 1], 0)] {
            f.add_carriers(&alleles, derived);
        }
        assert_eq!(f.haplotypes(), Ok(3));
        // No site at all: one haplotype.
        assert_eq!(LocusSums::new(5, 1, 5).haplotypes(), Ok(1));
        // A projected sample has none.
        assert_eq!(LocusSums::new(4, 1, 5).haplotypes(), Err(NoHaplotypes::Projected));
    }
}
