//! Linkage disequilibrium between pairs of sites, binned by distance.
//!
//! ```text
//! D  = p_AB - p_A p_B
//! r² = D² / (p_A (1 - p_A) p_B (1 - p_B))        (Hill & Robertson 1968)
//! ```
//! with A and B the allele 1 at the two sites and frequencies taken in the sample.

/// Mean r² of the pairs of sites whose distance falls in one bin.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LdBin {
    /// Smallest distance of the bin (inclusive).
    pub lo: u64,
    /// Largest distance of the bin (exclusive).
    pub hi: u64,
    /// Mean r² over the pairs of the bin; NaN when the bin has no pair.
    pub mean_r2: f64,
    /// Number of pairs of polymorphic sites in the bin.
    pub pairs: u64,
}

/// r² between two sites given their alleles (0/1) in the same haplotypes.
///
/// `None` when either site is monomorphic in the sample (r² is 0/0) or the columns are empty.
/// Any non-zero value counts as allele 1. Panics when the lengths differ.
pub fn r_squared(a: &[u8], b: &[u8]) -> Option<f64> {
    assert_eq!(a.len(), b.len(), "the two sites must be typed in the same haplotypes");
    let n = a.len();
    let (mut na, mut nb, mut nab) = (0usize, 0usize, 0usize);
    for (&x, &y) in a.iter().zip(b) {
        na += usize::from(x != 0);
        nb += usize::from(y != 0);
        nab += usize::from(x != 0 && y != 0);
    }
    r2_from_counts(n, na, nb, nab)
}

/// r² from counts, computed with integers: D n² = n n_AB - n_A n_B exactly.
fn r2_from_counts(n: usize, na: usize, nb: usize, nab: usize) -> Option<f64> {
    if na == 0 || na == n || nb == 0 || nb == n {
        return None;
    }
    let d = (n * nab) as f64 - (na * nb) as f64;
    let den = (na * (n - na)) as f64 * (nb * (n - nb)) as f64;
    Some(d * d / den)
}

/// Mean r² of all pairs of polymorphic sites, binned by distance |x_j - x_i|.
///
/// `positions[s]` is the position of site s; `haplotypes[h][s]` is the allele of haplotype h
/// at site s (0 or 1; any non-zero value counts as 1). `bins` are increasing bin edges: bin
/// k holds distances in `[bins[k], bins[k+1])`; pairs outside every bin, and pairs with a
/// monomorphic site, are skipped. One entry per bin, in order; empty bins have
/// `mean_r2 = NaN` and `pairs = 0`. Cost O(S² n / 64) for S sites and n haplotypes (sites
/// are packed into bit sets).
///
/// Panics when a haplotype's length differs from `positions.len()` or the edges are not
/// increasing.
pub fn ld_decay(positions: &[u64], haplotypes: &[Vec<u8>], bins: &[u64]) -> Vec<LdBin> {
    assert!(bins.windows(2).all(|w| w[0] < w[1]), "bin edges must increase");
    let s = positions.len();
    let n = haplotypes.len();
    assert!(haplotypes.iter().all(|h| h.len() == s), "every haplotype needs one allele per position");
    let words = n.div_ceil(64);
    let mut bits = vec![0u64; s * words];
    for (h, row) in haplotypes.iter().enumerate() {
        for (site, &x) in row.iter().enumerate() {
            if x != 0 {
                bits[site * words + h / 64] |= 1 << (h % 64);
            }
        }
    }
    let ones: Vec<usize> =
        (0..s).map(|i| bits[i * words..(i + 1) * words].iter().map(|w| w.count_ones() as usize).sum()).collect();
    let nb = bins.len().saturating_sub(1);
    let mut sum = vec![0.0f64; nb];
    let mut pairs = vec![0u64; nb];
    for i in 0..s {
        if ones[i] == 0 || ones[i] == n {
            continue;
        }
        for j in i + 1..s {
            let dist = positions[i].abs_diff(positions[j]);
            let k = bins.partition_point(|&e| e <= dist);
            if k == 0 || k > nb {
                continue;
            }
            let (a, b) = (&bits[i * words..(i + 1) * words], &bits[j * words..(j + 1) * words]);
            let nab: usize = a.iter().zip(b).map(|(x, y)| (x & y).count_ones() as usize).sum();
            if let Some(r2) = r2_from_counts(n, ones[i], ones[j], nab) {
                sum[k - 1] += r2;
                pairs[k - 1] += 1;
            }
        }
    }
    (0..nb)
        .map(|k| LdBin {
            lo: bins[k],
            hi: bins[k + 1],
            mean_r2: if pairs[k] == 0 { f64::NAN } else { sum[k] / pairs[k] as f64 },
            pairs: pairs[k],
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn r_squared_by_hand() {
        // a = 1110, b = 1100: p_A = 3/4, p_B = 1/2, p_AB = 1/2, D = 1/2 - 3/8 = 1/8,
        // r² = (1/64) / (3/4 · 1/4 · 1/2 · 1/2) = (1/64) / (3/64) = 1/3.
        let r2 = r_squared(&[1, 1, 1, 0], &[1, 1, 0, 0]).unwrap();
        assert!((r2 - 1.0 / 3.0).abs() < 1e-15, "{r2}");
        assert_eq!(r_squared(&[1, 1, 0, 0], &[1, 1, 0, 0]), Some(1.0));
        assert_eq!(r_squared(&[1, 1, 0, 0], &[0, 0, 1, 1]), Some(1.0));
        assert_eq!(r_squared(&[1, 0, 1, 0], &[1, 1, 0, 0]), Some(0.0));
        assert_eq!(r_squared(&[1, 1, 1, 1], &[1, 1, 0, 0]), None);
    }

    #[test]
    fn ld_decay_by_hand() {
        // Sites at 0, 10, 25 (columns) in 4 haplotypes (rows):
        //   s0 = 1100, s1 = 1100, s2 = 1010, s3 = 1111 (monomorphic, skipped).
        // Pairs: (s0,s1) at 10: r² = 1; (s0,s2) at 25 and (s1,s2) at 15: D = 1/4 - 1/4 = 0.
        let pos = [0, 10, 25, 12];
        let h = vec![vec![1, 1, 1, 1], vec![1, 1, 0, 1], vec![0, 0, 1, 1], vec![0, 0, 0, 1]];
        let bins = ld_decay(&pos, &h, &[0, 11, 30, 100]);
        assert_eq!(bins.len(), 3);
        assert_eq!((bins[0].lo, bins[0].hi, bins[0].mean_r2, bins[0].pairs), (0, 11, 1.0, 1));
        assert_eq!((bins[1].mean_r2, bins[1].pairs), (0.0, 2));
        assert!(bins[2].mean_r2.is_nan() && bins[2].pairs == 0);
        // More than 64 haplotypes: the bit sets span several words. 70 copies of each row scale
        // no frequency, so r² is unchanged.
        let big: Vec<Vec<u8>> = h.iter().flat_map(|r| std::iter::repeat_n(r.clone(), 70)).collect();
        let b = ld_decay(&pos, &big, &[0, 11, 30, 100]);
        assert_eq!((b[0].mean_r2, b[0].pairs, b[1].mean_r2, b[1].pairs, b[2].pairs), (1.0, 1, 0.0, 2, 0));
    }
}
