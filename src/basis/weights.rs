//! The weighted inner product `⟨f, g⟩_W = Σ_p w_p Σ_c f_pc g_pc` on fields in the `io` layout
//! (index `point_idx * n_channels + channel_idx`): one cell weight per point (area or volume,
//! 0 on solid cells) applied to every channel of that point. This is the discrete form of the
//! L² inner product that POD maximises energy in (Holmes, Lumley & Berkooz, *Turbulence,
//! Coherent Structures, Dynamical Systems and Symmetry*, 1996, ch. 3).
//!
//! Also the small helpers every POD route shares: the sign convention of a mode, the
//! orthonormality defect of a mode matrix, and the threshold below which an energy counts as
//! zero. No IO, no threads of its own.

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatRef, Par};

/// Cell weight of every degree of freedom: the point's weight repeated for each channel.
pub fn dof_weights(point_weights: &[f64], n_channels: usize) -> Vec<f64> {
    point_weights
        .iter()
        .flat_map(|&w| std::iter::repeat_n(w, n_channels))
        .collect()
}

/// `⟨f, g⟩_W` for two fields of `point_weights.len() * n_channels` values.
#[track_caller]
pub fn weighted_dot(point_weights: &[f64], n_channels: usize, f: &[f64], g: &[f64]) -> f64 {
    assert_eq!(f.len(), point_weights.len() * n_channels, "field length");
    assert_eq!(g.len(), f.len(), "field length");
    let mut sum = 0.0;
    for (point_idx, &w) in point_weights.iter().enumerate() {
        let range = point_idx * n_channels..(point_idx + 1) * n_channels;
        let local: f64 = f[range.clone()]
            .iter()
            .zip(&g[range])
            .map(|(a, b)| a * b)
            .sum();
        sum += w * local;
    }
    sum
}

/// `max |Φᵀ W Φ − I|` over all entries: how far the columns of `modes` are from orthonormal
/// in the weighted inner product (`dof_weights` per row).
#[track_caller]
pub fn orthonormality_defect(modes: MatRef<'_, f64>, dof_weights: &[f64]) -> f64 {
    assert_eq!(modes.nrows(), dof_weights.len(), "mode rows vs weights");
    let weighted = Mat::from_fn(modes.nrows(), modes.ncols(), |row, col| {
        modes[(row, col)] * dof_weights[row]
    });
    let mut gram = Mat::<f64>::zeros(modes.ncols(), modes.ncols());
    matmul(
        gram.as_mut(),
        Accum::Replace,
        modes.transpose(),
        weighted.as_ref(),
        1.0,
        Par::Seq,
    );
    let mut defect: f64 = 0.0;
    for col in 0..gram.ncols() {
        for row in 0..gram.nrows() {
            let identity = if row == col { 1.0 } else { 0.0 };
            defect = defect.max((gram[(row, col)] - identity).abs());
        }
    }
    defect
}

/// Flips the sign of every column of `modes` so that its entry of largest magnitude (the first
/// such, scanning down) is positive. POD fixes modes only up to sign; this convention makes the
/// two routes and repeated runs agree.
pub fn fix_signs(modes: &mut Mat<f64>) {
    for col in 0..modes.ncols() {
        let mut best = 0.0_f64;
        let mut sign = 1.0;
        for row in 0..modes.nrows() {
            let value = modes[(row, col)];
            if value.abs() > best {
                best = value.abs();
                sign = value.signum();
            }
        }
        if sign < 0.0 {
            for row in 0..modes.nrows() {
                modes[(row, col)] = -modes[(row, col)];
            }
        }
    }
}

/// Energies at or below this are round-off of a decomposition of a `n_snapshots`-wide problem
/// whose largest energy is `largest`: backward-stable symmetric eigen- and singular value
/// solvers perturb eigenvalues by a small multiple of `ε‖G‖` (Golub & Van Loan, *Matrix
/// Computations*, 4th ed., §8.1 and §8.6).
pub fn zero_energy_threshold(largest: f64, n_snapshots: usize) -> f64 {
    largest * f64::EPSILON * 16.0 * (n_snapshots.max(1) as f64)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weight_applies_to_every_channel_of_a_point() {
        let weights = [2.0, 0.0, 0.5];
        assert_eq!(dof_weights(&weights, 2), vec![2.0, 2.0, 0.0, 0.0, 0.5, 0.5]);
        let f = [1.0, 2.0, 10.0, 10.0, 4.0, 0.0];
        let g = [1.0, 1.0, 7.0, -3.0, 1.0, 9.0];
        // 2·(1 + 2) + 0·(…) + 0.5·(4 + 0) = 8.
        assert!((weighted_dot(&weights, 2, &f, &g) - 8.0).abs() < 1e-15);
    }

    #[test]
    fn defect_of_scaled_identity_columns() {
        let weights = [4.0, 1.0];
        let modes = faer::mat![[0.5, 0.0], [0.0, 1.0]];
        assert!(orthonormality_defect(modes.as_ref(), &weights) < 1e-15);
        let skewed = faer::mat![[0.5, 0.1], [0.0, 1.0]];
        assert!((orthonormality_defect(skewed.as_ref(), &weights) - 0.2).abs() < 1e-12);
    }

    #[test]
    fn signs_make_the_largest_entry_positive() {
        let mut modes = faer::mat![[0.1, 0.9], [-0.8, 0.2]];
        fix_signs(&mut modes);
        assert!(modes[(1, 0)] > 0.0 && modes[(0, 0)] < 0.0);
        assert!(modes[(0, 1)] > 0.0);
    }
}
