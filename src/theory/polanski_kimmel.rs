//! Expected SFS, total length and T_MRCA of a sample of one deme taken at one time, under a
//! deme size that changes in time (piecewise constant or exponential), in the coalescent
//! limit with the Kaj–Krone–Lascoux time change.
//!
//! Polanski & Kimmel (2003, *Genetics* 165:427) write the expected SFS as a linear function of
//! the expected first-coalescence times of sub-samples,
//!
//! ```text
//! E[ξ_b] = ν Σ_{j=2}^{n} W_{b,j} I_j,      I_j = ∫_{t0}^∞ exp(-C(j,2) τ(t)) dt,
//! τ(t) = ∫_{t0}^t du / (s N(u))
//! W_{b,2} = 6/(n+1),   W_{b,3} = 30 (n - 2b)/((n+1)(n+2)),
//! W_{b,j+2} = -(1+j)(3+2j)(n-j)/(j(2j-1)(n+j+1)) W_{b,j} + (3+2j)(n-2b)/(j(n+j+1)) W_{b,j+1}
//! ```
//! with ν the expected mutations per generation of a lineage (whole sequence), s = E\[R]²/d the
//! KKL factor and I_j in generations (the recurrence is stable in floating point: |W| stays
//! O(10) for n in the hundreds). The total length is Σ_b Σ_j W_{b,j} I_j, and T_MRCA follows
//! from Tavaré (1984, *Theor. Popul. Biol.* 26:119; the law of the number of lineages,
//! citation from memory): E\[T_MRCA] - t0 = Σ_{j=2}^{n} (2j-1)(-1)^j n_{\[j]}/n^{(j)} I_j with
//! falling and rising factorials.
//!
//! A size below one individual counts as one, as in the exact model. I_j is closed-form over
//! constant epochs; over exponential epochs it is an exponential integral, computed by 8-point Gauss–Legendre quadrature on pieces over which the exponent
//! changes by at most 1/4 (relative error far below 1e-12).

use super::error::TheoryError;
use crate::demography::SizeEpoch;

/// W_{b,j} for b = 1..n-1 (rows) and j = 2..n (columns), by the recurrence of Polanski &
/// Kimmel (2003). Needs n >= 2.
pub fn w_matrix(n: usize) -> Vec<Vec<f64>> {
    let nf = n as f64;
    (1..n)
        .map(|b| {
            let bf = b as f64;
            let mut row = vec![0.0; n - 1];
            row[0] = 6.0 / (nf + 1.0);
            if n >= 3 {
                row[1] = 30.0 * (nf - 2.0 * bf) / ((nf + 1.0) * (nf + 2.0));
            }
            for j in 2..n.saturating_sub(1) {
                let jf = j as f64;
                row[j] = -(1.0 + jf) * (3.0 + 2.0 * jf) * (nf - jf) / (jf * (2.0 * jf - 1.0) * (nf + jf + 1.0))
                    * row[j - 2]
                    + (3.0 + 2.0 * jf) * (nf - 2.0 * bf) / (jf * (nf + jf + 1.0)) * row[j - 1];
            }
            row
        })
        .collect()
}

/// 8-point Gauss–Legendre nodes and weights on [-1, 1] (Abramowitz & Stegun, Table 25.4).
const GL_X: [f64; 4] = [0.1834346424956498, 0.525532409916329, 0.7966664774136267, 0.9602898564975363];
const GL_W: [f64; 4] = [0.362683783378362, 0.3137066458778873, 0.2223810344533745, 0.1012285362903763];

fn gauss_legendre(f: &impl Fn(f64) -> f64, a: f64, b: f64) -> f64 {
    let (mid, half) = (0.5 * (a + b), 0.5 * (b - a));
    let mut s = 0.0;
    for (x, w) in GL_X.iter().zip(GL_W) {
        s += w * (f(mid - half * x) + f(mid + half * x));
    }
    s * half
}

/// ∫_0^L exp(-λ κ (e^{g x} - 1)/g) dx for g != 0 (L may be infinite when g > 0).
fn exponential_epoch(lambda_kappa: f64, g: f64, length: f64) -> f64 {
    let phi = |x: f64| lambda_kappa * (g * x).exp_m1() / g;
    let f = |x: f64| (-phi(x)).exp();
    let mut total = 0.0;
    let mut a = 0.0;
    loop {
        if a >= length || phi(a) > 50.0 {
            return total;
        }
        // Step so that the exponent grows by <= 1/4 and e^{g x} by <= e^{1/4}.
        let rate = lambda_kappa * (g * a).exp();
        let step = (0.25 / rate).min(0.25 / g.abs());
        let b = (a + step).min(length);
        total += gauss_legendre(&f, a, b);
        a = b;
    }
}

/// I_j = ∫_{t0}^∞ exp(-C(j,2) τ(t)) dt for j = 2..=n (index j - 2), with τ(t) = ∫_{t0}^t
/// du / (s N(u)) for the size history `epochs` and KKL factor `scale`.
///
/// Errors when the last epoch grows without bound into the past (growth < 0: lineages may
/// never meet, I_j infinite) or an argument is out of range.
pub fn first_coalescence_integrals(
    n: usize,
    epochs: &[SizeEpoch],
    scale: f64,
    t0: f64,
) -> Result<Vec<f64>, TheoryError> {
    super::error::check("scale", scale, "(0, inf)", |x| x > 0.0)?;
    if n < 2 {
        return Err(TheoryError::SampleSize { n: n as u32, allowed: ">= 2" });
    }
    if epochs.last().is_some_and(|e| e.growth < 0.0) {
        return Err(TheoryError::Singular);
    }
    let first = epochs.partition_point(|e| e.start as f64 <= t0).max(1) - 1;
    // Pieces (start, end, rate at start, growth); a size below one individual counts as one
    // (as in the exact model), so a shrinking epoch ends in a constant piece.
    let mut pieces = Vec::new();
    for (i, e) in epochs.iter().enumerate().skip(first) {
        let a = (e.start as f64).max(t0);
        let b = epochs.get(i + 1).map_or(f64::INFINITY, |x| x.start as f64);
        let rate = |t: f64| ((e.growth * (t - e.start as f64)).exp() / e.size).min(1.0) / scale;
        let floor =
            if e.growth > 0.0 && e.size > 1.0 { e.start as f64 + e.size.ln() / e.growth } else { f64::INFINITY };
        if e.growth == 0.0 || a >= floor {
            pieces.push((a, b, rate(a), 0.0));
        } else if floor < b {
            pieces.push((a, floor, rate(a), e.growth));
            pieces.push((floor, b, 1.0 / scale, 0.0));
        } else {
            pieces.push((a, b, rate(a), e.growth));
        }
    }
    let mut out = vec![0.0; n - 1];
    let mut tau = 0.0;
    for (a, b, kappa, g) in pieces {
        let length = b - a;
        for (k, o) in out.iter_mut().enumerate() {
            let j = (k + 2) as f64;
            let lambda = j * (j - 1.0) / 2.0;
            let damp = (-lambda * tau).exp();
            if damp == 0.0 {
                continue;
            }
            let part = if g == 0.0 {
                if length.is_infinite() {
                    1.0 / (lambda * kappa)
                } else {
                    -(-lambda * kappa * length).exp_m1() / (lambda * kappa)
                }
            } else {
                exponential_epoch(lambda * kappa, g, length)
            };
            *o += damp * part;
        }
        if length.is_infinite() {
            break;
        }
        tau += if g == 0.0 { kappa * length } else { kappa * (g * length).exp_m1() / g };
    }
    Ok(out)
}

/// E\[ξ_b], b = 1..n-1, from the integrals I_j and ν mutations per generation of a lineage.
pub fn expected_sfs(integrals: &[f64], nu: f64) -> Vec<f64> {
    let n = integrals.len() + 1;
    w_matrix(n).iter().map(|row| nu * row.iter().zip(integrals).map(|(w, i)| w * i).sum::<f64>()).collect()
}

/// E\[total branch length] = Σ_b Σ_j W_{b,j} I_j (generations).
pub fn expected_total_length(integrals: &[f64]) -> f64 {
    expected_sfs(integrals, 1.0).iter().sum()
}

/// E\[T_MRCA] - t0 = Σ_{j=2}^n (2j-1)(-1)^j n_{\[j]}/n^{(j)} I_j (Tavaré 1984).
pub fn expected_tmrca(integrals: &[f64]) -> f64 {
    let n = (integrals.len() + 1) as f64;
    let mut ratio = 1.0;
    let mut total = 0.0;
    for (k, i) in integrals.iter().enumerate() {
        let j = (k + 2) as f64;
        if k == 0 {
            // n_[2]/n^(2) = n(n-1)/(n(n+1)).
            ratio = (n - 1.0) / (n + 1.0);
        } else {
            ratio *= (n - j + 1.0) / (n + j - 1.0);
        }
        let sign = if (k + 2) % 2 == 0 { 1.0 } else { -1.0 };
        total += sign * (2.0 * j - 1.0) * ratio * i;
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constant_size_gives_theta_over_i() {
        // Source: Fu (1995) / theory reference §2.1: E[ξ_i] = θ/i with θ = 2Nμ; Kingman (1982):
        // E[T_MRCA] = 2N(1 - 1/n), E[L] = 2N a_n. N = 500, KKL factor s = 4 (E[R] = 2), so the
        // effective size is 2000; ν = 1e-3 per generation gives θ = 4.
        for n in [2usize, 5, 10, 40, 120] {
            let e = [SizeEpoch { start: 0, size: 500.0, growth: 0.0 }];
            let i = first_coalescence_integrals(n, &e, 4.0, 0.0).unwrap();
            let sfs = expected_sfs(&i, 1e-3);
            for (b, x) in sfs.iter().enumerate() {
                let want = 4.0 / (b + 1) as f64;
                assert!((x - want).abs() < 1e-11 * want * n as f64, "n {n} b {}: {x} vs {want}", b + 1);
            }
            let a_n: f64 = (1..n).map(|k| 1.0 / k as f64).sum();
            assert!((expected_total_length(&i) - 4000.0 * a_n).abs() < 1e-9 * 4000.0 * a_n);
            let t = 4000.0 * (1.0 - 1.0 / n as f64);
            assert!((expected_tmrca(&i) - t).abs() < 1e-9 * t, "n {n}: {}", expected_tmrca(&i));
        }
    }

    #[test]
    fn exponential_pair_integral_by_substitution() {
        // I_2 = ∫ exp(-(e^{g t} - 1)/(g N0)) dt = e^{c} E1(c)/g with c = 1/(g N0); for
        // c = 0.5: E1(0.5) = 0.5597735947761608 (Abramowitz & Stegun, Table 5.1).
        let (n0, g) = (2000.0, 0.001);
        let e = [SizeEpoch { start: 0, size: n0, growth: g }];
        let i = first_coalescence_integrals(2, &e, 1.0, 0.0).unwrap();
        let want = 0.5f64.exp() * 0.5597735947761608 / g;
        assert!((i[0] - want).abs() < 1e-10 * want, "{} vs {want}", i[0]);
        // Growth < 0 in the last epoch: the pair may never meet.
        let e = [SizeEpoch { start: 0, size: n0, growth: -g }];
        assert!(first_coalescence_integrals(2, &e, 1.0, 0.0).is_err());
    }
}
