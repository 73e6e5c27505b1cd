//! POD by the thin singular value decomposition of the weighted, centred snapshot matrix
//! `Y = W^{1/2} (X − x̄ 1ᵀ) = U Σ Vᵀ` (faer's SVD): modes `φ_i = W^{-1/2} u_i` (0 on solid
//! cells, whose rows of `Y` are 0), energies `λ_i = σ_i² / T`. This is the textbook equivalence
//! of POD and the SVD (Holmes, Lumley & Berkooz 1996, §3.3; Golub & Van Loan, *Matrix
//! Computations*, §2.4).
//!
//! It holds `Y` (`n_dof × T`) and `U` in memory, so it suits small and medium sites and modes
//! of tiny energy, where the method of snapshots loses accuracy; it never squares the
//! condition number. Reads the source block by block only to fill `Y`.
//!
//! The decomposition itself runs sequentially: faer's parallel bidiagonalisation reduces in an
//! order that depends on the thread count, and results must be bit-identical for any thread
//! count (project rule). Filling `Y` uses no threads either, so `par` is accepted for symmetry
//! with the other route and ignored.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::svd::{self, ComputeSvdVectors};
use faer::{Mat, Par};

use super::blocks::{block_size_for, dof_blocks, SnapshotBlock};
use super::weights::{fix_signs, zero_energy_threshold};
use super::{BasisError, Decomposition, Rank};
use crate::io::SnapshotSource;

/// Thin-SVD POD: returns mean, modes and energies.
pub fn pod_by_svd(
    source: &mut dyn SnapshotSource,
    dof_weights: &[f64],
    rank: Rank,
    block_size: Option<usize>,
    _par: Par,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Decomposition, BasisError> {
    let par = Par::Seq;
    let n_snapshots = source.n_snapshots();
    let n_dof = source.n_dof();
    let block_size = block_size_for(n_snapshots, n_dof, block_size);
    let n_blocks = dof_blocks(n_dof, block_size).count();
    let n_steps = n_blocks + 2;
    progress(0, n_steps);

    let sqrt_weights: Vec<f64> = dof_weights.iter().map(|w| w.sqrt()).collect();
    let mut mean = vec![0.0; n_dof];
    let mut weighted = Mat::<f64>::zeros(n_dof, n_snapshots);
    let mut block = SnapshotBlock::new(n_snapshots, block_size);
    for (block_idx, dofs) in dof_blocks(n_dof, block_size).enumerate() {
        block.read(source, dofs.clone())?;
        block.row_means(&mut mean[dofs.clone()]);
        block.centre_and_scale(&mean[dofs.clone()], &sqrt_weights[dofs.clone()]);
        weighted
            .as_mut()
            .subrows_mut(dofs.start, dofs.len())
            .copy_from(block.as_mat());
        progress(block_idx + 1, n_steps);
    }
    drop(block);

    let size = n_dof.min(n_snapshots);
    let mut singular = faer::diag::Diag::<f64>::zeros(size);
    let mut left = Mat::<f64>::zeros(n_dof, size);
    let scratch = svd::svd_scratch::<f64>(
        n_dof,
        n_snapshots,
        ComputeSvdVectors::Thin,
        ComputeSvdVectors::No,
        par,
        Default::default(),
    );
    svd::svd(
        weighted.as_ref(),
        singular.as_mut(),
        Some(left.as_mut()),
        None,
        par,
        MemStack::new(&mut MemBuffer::new(scratch)),
        Default::default(),
    )
    .map_err(|_| BasisError::NoConvergence {
        method: "thin singular value decomposition of the snapshot matrix",
        size,
    })?;
    drop(weighted);
    progress(n_blocks + 1, n_steps);

    // faer sorts singular values in non-increasing order.
    let sigma_sq: Vec<f64> = (0..size).map(|i| singular[i] * singular[i]).collect();
    let largest = sigma_sq.first().copied().unwrap_or(0.0);
    let threshold = zero_energy_threshold(largest, n_snapshots);
    let energies: Vec<f64> = sigma_sq
        .iter()
        .take_while(|&&s| s > threshold)
        .map(|&s| s / n_snapshots as f64)
        .collect();
    if energies.is_empty() {
        return Err(BasisError::NoFluctuation);
    }
    let n_modes = rank.select(&energies)?;
    let mut modes = Mat::from_fn(n_dof, n_modes, |dof_idx, mode_idx| {
        let s = sqrt_weights[dof_idx];
        if s > 0.0 {
            left[(dof_idx, mode_idx)] / s
        } else {
            0.0
        }
    });
    fix_signs(&mut modes);
    progress(n_steps, n_steps);
    Ok(Decomposition {
        mean,
        modes,
        energies,
    })
}
