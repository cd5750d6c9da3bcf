//! Small dense linear solver: Gaussian elimination with partial pivoting.

/// Solves A X = B for X, with A an n × n row-major matrix and B an n × m row-major block of
/// right-hand sides. Returns `None` when a pivot is negligible relative to the largest entry
/// of A (singular or numerically singular system).
pub(crate) fn solve(mut a: Vec<f64>, n: usize, mut b: Vec<f64>, m: usize) -> Option<Vec<f64>> {
    debug_assert_eq!(a.len(), n * n);
    debug_assert_eq!(b.len(), n * m);
    let scale = a.iter().fold(0.0f64, |s, x| s.max(x.abs()));
    if !scale.is_finite() || scale == 0.0 {
        return None;
    }
    let tiny = scale * f64::EPSILON * n as f64;
    for col in 0..n {
        // Partial pivoting keeps the multipliers <= 1 in magnitude.
        let piv = (col..n).max_by(|&i, &j| a[i * n + col].abs().total_cmp(&a[j * n + col].abs()))?;
        if a[piv * n + col].abs() <= tiny {
            return None;
        }
        if piv != col {
            for k in 0..n {
                a.swap(col * n + k, piv * n + k);
            }
            for k in 0..m {
                b.swap(col * m + k, piv * m + k);
            }
        }
        let p = a[col * n + col];
        for row in col + 1..n {
            let f = a[row * n + col] / p;
            if f == 0.0 {
                continue;
            }
            for k in col..n {
                a[row * n + k] -= f * a[col * n + k];
            }
            for k in 0..m {
                b[row * m + k] -= f * b[col * m + k];
            }
        }
    }
    for col in (0..n).rev() {
        for k in 0..m {
            let s: f64 = (col + 1..n).map(|j| a[col * n + j] * b[j * m + k]).sum();
            b[col * m + k] = (b[col * m + k] - s) / a[col * n + col];
        }
    }
    Some(b)
}

/// Solves a tridiagonal system by the Thomas algorithm: `sub[i] x[i-1] + diag[i] x[i] +
/// sup[i] x[i+1] = rhs[i]` (sub[0] and sup[n-1] are ignored). Stable without pivoting for
/// diagonally dominant matrices, which is what the callers build. `None` on a zero pivot.
pub(crate) fn solve_tridiagonal(sub: &[f64], diag: &[f64], sup: &[f64], rhs: &[f64]) -> Option<Vec<f64>> {
    let n = diag.len();
    let mut c = vec![0.0; n];
    let mut d = vec![0.0; n];
    let mut prev_c = 0.0;
    let mut prev_d = 0.0;
    for i in 0..n {
        let lower = if i == 0 { 0.0 } else { sub[i] };
        let denom = diag[i] - lower * prev_c;
        if denom == 0.0 || !denom.is_finite() {
            return None;
        }
        c[i] = if i + 1 < n { sup[i] / denom } else { 0.0 };
        d[i] = (rhs[i] - lower * prev_d) / denom;
        prev_c = c[i];
        prev_d = d[i];
    }
    for i in (0..n.saturating_sub(1)).rev() {
        d[i] -= c[i] * d[i + 1];
    }
    Some(d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_small_system_needing_pivoting() {
        // Exact solution checked by substitution: x = (1, 2, 3).
        // [0 1 1; 2 1 0; 1 0 4] x = (5, 4, 13). The zero in a[0][0] forces a row swap.
        let a = vec![0.0, 1.0, 1.0, 2.0, 1.0, 0.0, 1.0, 0.0, 4.0];
        let x = solve(a, 3, vec![5.0, 4.0, 13.0], 1).unwrap();
        for (g, w) in x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((g - w).abs() < 1e-12);
        }
        assert!(solve(vec![1.0, 2.0, 2.0, 4.0], 2, vec![1.0, 1.0], 1).is_none());
    }

    #[test]
    fn tridiagonal_matches_dense() {
        // [2 -1 0; -1 2 -1; 0 -1 2] x = (1, 0, 1) has x = (1, 1, 1).
        let x = solve_tridiagonal(&[0.0, -1.0, -1.0], &[2.0, 2.0, 2.0], &[-1.0, -1.0, 0.0], &[1.0, 0.0, 1.0]).unwrap();
        for g in x {
            assert!((g - 1.0).abs() < 1e-12);
        }
    }
}
