//! Small dense kernels on row-major `n × n` matrices held in `Vec<f64>`: Cholesky factor,
//! log-determinant, SPD inverse, LU determinant and the smallest eigenvalue (through faer).
//!
//! The matrices here are at most `n_modes × n_modes` or block-sized (`p × p`), so plain loops
//! in a fixed order beat the call overhead of a general library and keep results
//! bit-reproducible. Nothing here allocates per element or touches candidate rows.

/// In-place Cholesky `A = L Lᵀ` of a symmetric row-major matrix (lower triangle read and
/// written, upper triangle zeroed). Returns `None` when `A` is not positive definite.
pub(crate) fn cholesky_in_place(a: &mut [f64], n: usize) -> Option<()> {
    debug_assert_eq!(a.len(), n * n);
    for j in 0..n {
        let mut d = a[j * n + j];
        for k in 0..j {
            d -= a[j * n + k] * a[j * n + k];
        }
        if d.is_nan() || d <= 0.0 {
            return None;
        }
        let d = d.sqrt();
        a[j * n + j] = d;
        for i in j + 1..n {
            let mut s = a[i * n + j];
            for k in 0..j {
                s -= a[i * n + k] * a[j * n + k];
            }
            a[i * n + j] = s / d;
        }
        for k in j + 1..n {
            a[j * n + k] = 0.0;
        }
    }
    Some(())
}

/// log det of a symmetric positive definite row-major matrix; `None` if not SPD.
pub(crate) fn spd_log_det(a: &[f64], n: usize) -> Option<f64> {
    if n == 1 {
        return (a[0] > 0.0).then(|| a[0].ln());
    }
    let mut l = a.to_vec();
    cholesky_in_place(&mut l, n)?;
    Some((0..n).map(|i| 2.0 * l[i * n + i].ln()).sum())
}

/// Solves `L x = b` in place for a lower-triangular row-major `L`.
pub(crate) fn forward_solve(l: &[f64], n: usize, b: &mut [f64]) {
    for i in 0..n {
        let mut s = b[i];
        for k in 0..i {
            s -= l[i * n + k] * b[k];
        }
        b[i] = s / l[i * n + i];
    }
}

/// Inverse of a symmetric positive definite row-major matrix; `None` if not SPD.
pub(crate) fn spd_inverse(a: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut l = a.to_vec();
    cholesky_in_place(&mut l, n)?;
    // L⁻¹ column by column, then A⁻¹ = L⁻ᵀ L⁻¹.
    let mut linv = vec![0.0; n * n];
    let mut e = vec![0.0; n];
    for j in 0..n {
        e.iter_mut().for_each(|v| *v = 0.0);
        e[j] = 1.0;
        forward_solve(&l, n, &mut e);
        for i in 0..n {
            linv[i * n + j] = e[i];
        }
    }
    let mut inv = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..=i {
            let mut s = 0.0;
            for k in i.max(j)..n {
                s += linv[k * n + i] * linv[k * n + j];
            }
            inv[i * n + j] = s;
            inv[j * n + i] = s;
        }
    }
    Some(inv)
}

/// Determinant of a general row-major matrix by LU with partial pivoting.
pub(crate) fn determinant(a: &[f64], n: usize) -> f64 {
    let mut m = a.to_vec();
    let mut det = 1.0;
    for j in 0..n {
        let mut p = j;
        for i in j + 1..n {
            if m[i * n + j].abs() > m[p * n + j].abs() {
                p = i;
            }
        }
        if m[p * n + j] == 0.0 {
            return 0.0;
        }
        if p != j {
            for k in 0..n {
                m.swap(j * n + k, p * n + k);
            }
            det = -det;
        }
        let pivot = m[j * n + j];
        det *= pivot;
        for i in j + 1..n {
            let f = m[i * n + j] / pivot;
            for k in j..n {
                m[i * n + k] -= f * m[j * n + k];
            }
        }
    }
    det
}

/// Inverse of a general row-major matrix by Gauss–Jordan elimination with partial pivoting;
/// `None` when singular.
pub(crate) fn general_inverse(a: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut m = a.to_vec();
    let mut inv = vec![0.0; n * n];
    (0..n).for_each(|i| inv[i * n + i] = 1.0);
    for j in 0..n {
        let p = (j..n).max_by(|&x, &y| m[x * n + j].abs().total_cmp(&m[y * n + j].abs()))?;
        if m[p * n + j] == 0.0 || !m[p * n + j].is_finite() {
            return None;
        }
        for k in 0..n {
            m.swap(j * n + k, p * n + k);
            inv.swap(j * n + k, p * n + k);
        }
        let pivot = m[j * n + j];
        for k in 0..n {
            m[j * n + k] /= pivot;
            inv[j * n + k] /= pivot;
        }
        for i in 0..n {
            if i != j {
                let f = m[i * n + j];
                if f != 0.0 {
                    for k in 0..n {
                        m[i * n + k] -= f * m[j * n + k];
                        inv[i * n + k] -= f * inv[j * n + k];
                    }
                }
            }
        }
    }
    Some(inv)
}

/// Eigenvalues (ascending) and eigenvectors (columns of the returned row-major matrix) of a
/// symmetric row-major matrix. `None` if the eigensolver fails (non-finite input).
pub(crate) fn symmetric_eigen(a: &[f64], n: usize) -> Option<(Vec<f64>, Vec<f64>)> {
    let m = faer::Mat::<f64>::from_fn(n, n, |i, j| a[i * n + j]);
    let evd = m.self_adjoint_eigen(faer::Side::Lower).ok()?;
    let s = evd.S();
    let u = evd.U();
    let values: Vec<f64> = (0..n).map(|i| s[i]).collect();
    let mut vectors = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            vectors[i * n + j] = u[(i, j)];
        }
    }
    Some((values, vectors))
}

/// Smallest eigenvalue of a symmetric row-major matrix.
pub(crate) fn symmetric_min_eigenvalue(a: &[f64], n: usize) -> Option<f64> {
    if n == 1 {
        return Some(a[0]);
    }
    let m = faer::Mat::<f64>::from_fn(n, n, |i, j| a[i * n + j]);
    let values = m.self_adjoint_eigenvalues(faer::Side::Lower).ok()?;
    values.first().copied()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spd(n: usize) -> Vec<f64> {
        // Hilbert-like plus identity: SPD and not diagonal.
        let mut a = vec![0.0; n * n];
        for i in 0..n {
            for j in 0..n {
                a[i * n + j] = 1.0 / (i + j + 1) as f64 + if i == j { 1.0 } else { 0.0 };
            }
        }
        a
    }

    #[test]
    fn inverse_times_matrix_is_identity() {
        for n in [1usize, 2, 5, 17] {
            let a = spd(n);
            let inv = spd_inverse(&a, n).unwrap();
            for i in 0..n {
                for j in 0..n {
                    let s: f64 = (0..n).map(|k| a[i * n + k] * inv[k * n + j]).sum();
                    let want = if i == j { 1.0 } else { 0.0 };
                    assert!((s - want).abs() < 1e-12, "n={n} ({i},{j}) {s}");
                }
            }
        }
    }

    #[test]
    fn log_det_agrees_with_lu_and_eigenvalues() {
        let n = 6;
        let a = spd(n);
        let ld = spd_log_det(&a, n).unwrap();
        assert!((ld - determinant(&a, n).ln()).abs() < 1e-12);
        let (values, _) = symmetric_eigen(&a, n).unwrap();
        let sum_log: f64 = values.iter().map(|v| v.ln()).sum();
        assert!((ld - sum_log).abs() < 1e-10);
        let min = symmetric_min_eigenvalue(&a, n).unwrap();
        assert!((min - values[0]).abs() < 1e-12);
    }

    #[test]
    fn general_inverse_of_indefinite_matrix() {
        let a = vec![0.0, 2.0, 1.0, 1.0, -1.0, 0.0, 3.0, 0.0, 1.0];
        let inv = general_inverse(&a, 3).unwrap();
        for i in 0..3 {
            for j in 0..3 {
                let s: f64 = (0..3).map(|k| a[i * 3 + k] * inv[k * 3 + j]).sum();
                assert!((s - if i == j { 1.0 } else { 0.0 }).abs() < 1e-12);
            }
        }
        assert!(general_inverse(&[1.0, 2.0, 2.0, 4.0], 2).is_none());
    }

    #[test]
    fn indefinite_matrix_is_refused() {
        let a = vec![1.0, 2.0, 2.0, 1.0];
        assert!(spd_log_det(&a, 2).is_none());
        assert!((determinant(&a, 2) + 3.0).abs() < 1e-14);
    }
}
