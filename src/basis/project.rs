//! Projection of fields onto a basis: modal coefficients `a = Φᵀ W (x − x̄)` (the orthogonal
//! projection in the weighted inner product, since `ΦᵀWΦ = I`) and the weighted squared norm of
//! what the basis misses, `‖x − x̄ − Φ a‖²_W`: the truncation error the twin experiments add to
//! the modal error.
//!
//! [`project`] streams a whole snapshot source block by block over degrees of freedom, like
//! the Gram pass: memory `O(T · r + T · block_size)`. The residual uses
//! `‖d‖² − 2 aᵀ(ΦᵀWd) + aᵀ(ΦᵀWΦ)a` with `ΦᵀWΦ` accumulated in the same pass, so it is the true
//! residual even for an imported basis that is only nearly orthonormal; it is clamped at 0
//! against round-off.

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, Par};

use super::blocks::{block_size_for, dof_blocks, SnapshotBlock};
use super::weights::dof_weights;
use super::{Basis, BasisError};
use crate::io::SnapshotSource;

/// Modal coefficients and truncation residual of every snapshot of a source.
#[derive(Debug, Clone)]
pub struct Projection {
    /// `n_snapshots × n_modes`: row `t` holds `a_t = Φᵀ W (x_t − x̄)`, in field units · weight^½.
    pub coeffs: Mat<f64>,
    /// Per snapshot, `‖x_t − x̄ − Φ a_t‖²_W` (field units² · weight), ≥ 0.
    pub residual_sq: Vec<f64>,
}

/// Projects every snapshot of `source` onto `basis`; `progress(done, total)` counts blocks.
pub fn project(
    basis: &Basis,
    source: &mut dyn SnapshotSource,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Projection, BasisError> {
    let n_dof = basis.n_dof();
    if source.n_dof() != n_dof {
        return Err(BasisError::DofMismatch {
            found: source.n_dof(),
            expected: n_dof,
            n_points: basis.n_points,
            n_channels: basis.n_channels,
        });
    }
    let n_snapshots = source.n_snapshots();
    let n_modes = basis.n_modes();
    let weights = dof_weights(&basis.weights, basis.n_channels);
    let weighted_modes = Mat::from_fn(n_dof, n_modes, |dof_idx, mode_idx| {
        weights[dof_idx] * basis.modes[(dof_idx, mode_idx)]
    });
    let block_size = block_size_for(n_snapshots, n_dof, None);
    let n_blocks = dof_blocks(n_dof, block_size).count();
    progress(0, n_blocks);

    let par = Par::Seq;
    let mut coeffs = Mat::<f64>::zeros(n_snapshots, n_modes);
    let mut norm_sq = vec![0.0; n_snapshots];
    let mut block = SnapshotBlock::new(n_snapshots, block_size);
    for (block_idx, dofs) in dof_blocks(n_dof, block_size).enumerate() {
        block.read(source, dofs.clone())?;
        block.centre(&basis.mean[dofs.clone()]);
        let deviation = block.as_mat();
        matmul(
            coeffs.as_mut(),
            Accum::Add,
            deviation.transpose(),
            weighted_modes.as_ref().subrows(dofs.start, dofs.len()),
            1.0,
            par,
        );
        for (time_idx, acc) in norm_sq.iter_mut().enumerate() {
            let column = deviation.col(time_idx);
            let mut sum = 0.0;
            for (row, dof_idx) in dofs.clone().enumerate() {
                sum += weights[dof_idx] * column[row] * column[row];
            }
            *acc += sum;
        }
        progress(block_idx + 1, n_blocks);
    }

    let mut mode_gram = Mat::<f64>::zeros(n_modes, n_modes);
    matmul(
        mode_gram.as_mut(),
        Accum::Replace,
        basis.modes.transpose(),
        weighted_modes.as_ref(),
        1.0,
        par,
    );
    let residual_sq = (0..n_snapshots)
        .map(|time_idx| {
            let a = coeffs.row(time_idx);
            let mut captured = 0.0;
            for i in 0..n_modes {
                let mut row_sum = 0.0;
                for j in 0..n_modes {
                    row_sum += mode_gram[(i, j)] * a[j];
                }
                captured += a[i] * (row_sum - 2.0 * a[i]);
            }
            (norm_sq[time_idx] + captured).max(0.0)
        })
        .collect();
    Ok(Projection {
        coeffs,
        residual_sq,
    })
}

/// Modal coefficients `Φᵀ W (field − x̄)` of one field in the `io` layout.
#[track_caller]
pub fn project_field(basis: &Basis, field: &[f64]) -> Vec<f64> {
    assert_eq!(field.len(), basis.n_dof(), "field length vs basis");
    let n_channels = basis.n_channels;
    let weighted_deviation: Vec<f64> = field
        .iter()
        .zip(&basis.mean)
        .enumerate()
        .map(|(dof_idx, (x, m))| basis.weights[dof_idx / n_channels] * (x - m))
        .collect();
    (0..basis.n_modes())
        .map(|mode_idx| {
            basis
                .modes
                .col(mode_idx)
                .iter()
                .zip(&weighted_deviation)
                .map(|(phi, d)| phi * d)
                .sum()
        })
        .collect()
}
