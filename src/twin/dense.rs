//! Small dense kernels for the twin's hot loops (one model step, one analysis per reading
//! step) on plain column-major slices, plus thin wrappers over faer for the factorisations
//! (Cholesky, eigenvalues). Kernels allocate nothing; they assert shapes (broken contracts).

use faer::linalg::solvers::Solve;
use faer::{Mat, MatRef, Side};

/// `y += M x` with `M` column-major, `y.len()` rows and `x.len()` columns.
#[inline]
#[track_caller]
pub(crate) fn gemv_add(m: &[f64], x: &[f64], y: &mut [f64]) {
    let n_rows = y.len();
    assert_eq!(m.len(), n_rows * x.len(), "gemv_add shape");
    for (col, &xj) in m.chunks_exact(n_rows).zip(x) {
        for (yi, &mij) in y.iter_mut().zip(col) {
            *yi += mij * xj;
        }
    }
}

/// Dot product of two equal-length slices.
#[inline]
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Column-major copy of a faer matrix.
pub(crate) fn col_major(m: MatRef<'_, f64>) -> Vec<f64> {
    let mut out = Vec::with_capacity(m.nrows() * m.ncols());
    for j in 0..m.ncols() {
        for i in 0..m.nrows() {
            out.push(m[(i, j)]);
        }
    }
    out
}

/// Row-major copy of a faer matrix (rows contiguous, for row dot products).
pub(crate) fn row_major(m: MatRef<'_, f64>) -> Vec<f64> {
    let mut out = Vec::with_capacity(m.nrows() * m.ncols());
    for i in 0..m.nrows() {
        for j in 0..m.ncols() {
            out.push(m[(i, j)]);
        }
    }
    out
}

/// Symmetric part `(M + Mᵀ)/2`, to keep covariances symmetric against rounding.
pub(crate) fn symmetrize(m: &mut Mat<f64>) {
    let n = m.nrows();
    for i in 0..n {
        for j in 0..i {
            let s = 0.5 * (m[(i, j)] + m[(j, i)]);
            m[(i, j)] = s;
            m[(j, i)] = s;
        }
    }
}

/// Lower Cholesky factor of a symmetric positive definite matrix, `None` when it is not.
pub(crate) fn cholesky_lower(m: MatRef<'_, f64>) -> Option<Mat<f64>> {
    let llt = m.llt(Side::Lower).ok()?;
    let l = llt.L().to_owned();
    if l.col_iter().all(|c| c.iter().all(|v| v.is_finite())) {
        Some(l)
    } else {
        None
    }
}

/// Gain `K = P Hᵀ S⁻¹` with `S = H P Hᵀ + R` (symmetric positive definite); `None` when `S`
/// is not positive definite. `P` is `r × r`, `H` is `p × r`, `R` is the diagonal `p`-vector.
pub(crate) fn kalman_gain(
    p: MatRef<'_, f64>,
    h: MatRef<'_, f64>,
    r_diag: &[f64],
) -> Option<Mat<f64>> {
    let hp = h * p; // p × r
    let mut s = &hp * h.transpose();
    for (i, &r) in r_diag.iter().enumerate() {
        s[(i, i)] += r;
    }
    let llt = s.llt(Side::Lower).ok()?;
    // S Kᵀ = H P (S, P symmetric) gives Kᵀ.
    let kt = llt.solve(&hp);
    let k = kt.transpose().to_owned();
    if k.col_iter().all(|c| c.iter().all(|v| v.is_finite())) {
        Some(k)
    } else {
        None
    }
}

/// Largest eigenvalue modulus of a square matrix (faer's general eigenvalue solver).
pub(crate) fn spectral_radius(m: MatRef<'_, f64>) -> Option<f64> {
    let eig = m.to_owned().eigenvalues().ok()?;
    let rho = eig.iter().map(|z| z.norm()).fold(0.0_f64, f64::max);
    rho.is_finite().then_some(rho)
}

/// Posterior covariance in Joseph form `(I − K H) P (I − K H)ᵀ + K R Kᵀ`, valid for any gain
/// and symmetric positive semi-definite by construction (Bucy & Joseph 1968).
pub(crate) fn joseph_update(
    p: MatRef<'_, f64>,
    k: MatRef<'_, f64>,
    h: MatRef<'_, f64>,
    r_diag: &[f64],
) -> Mat<f64> {
    let n = p.nrows();
    let i_kh = Mat::<f64>::identity(n, n) - k * h;
    let mut kr = k.to_owned();
    for (j, &r) in r_diag.iter().enumerate() {
        for i in 0..n {
            kr[(i, j)] *= r;
        }
    }
    let mut out = &i_kh * p * i_kh.transpose() + kr * k.transpose();
    symmetrize(&mut out);
    out
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn gemv_matches_faer() {
        let m = Mat::from_fn(3, 2, |i, j| (i * 2 + j) as f64 + 0.5);
        let x = [1.5, -2.0];
        let mut y = vec![1.0; 3];
        gemv_add(&col_major(m.as_ref()), &x, &mut y);
        for i in 0..3 {
            let expect = 1.0 + m[(i, 0)] * x[0] + m[(i, 1)] * x[1];
            assert!((y[i] - expect).abs() < 1e-14);
        }
    }

    #[test]
    fn spectral_radius_of_rotation_scaled() {
        // A rotation by 0.3 rad scaled by 0.9 has eigenvalues 0.9·e^{±0.3i}: radius 0.9.
        let (c, s) = (0.9 * 0.3f64.cos(), 0.9 * 0.3f64.sin());
        let m = faer::mat![[c, -s], [s, c]];
        let rho = spectral_radius(m.as_ref()).unwrap();
        assert!((rho - 0.9).abs() < 1e-12);
    }

    #[test]
    fn gain_refuses_indefinite_innovation() {
        let p = faer::mat![[-1.0]];
        let h = faer::mat![[1.0]];
        assert!(kalman_gain(p.as_ref(), h.as_ref(), &[0.5]).is_none());
    }
}
