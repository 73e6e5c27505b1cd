//! POD by the method of snapshots (L. Sirovich, "Turbulence and the dynamics of coherent
//! structures, part I", *Q. Appl. Math.* 45, 1987): the eigenvectors of the `T × T` temporal
//! Gram matrix of the fluctuations give the temporal coefficients, and one product lifts them
//! to spatial modes.
//!
//! With `X` the `n_dof × T` snapshot matrix, `x̄` its temporal mean, `W` the cell weights and
//! `Y = W^{1/2} (X − x̄ 1ᵀ)`:
//!
//! * pass 1, block by block over degrees of freedom: `G = Σ_blocks Y_bᵀ Y_b`. A block holds
//!   every snapshot of its dofs, so its mean is exact and each block is centred before the
//!   product; this gives the centred Gram `C G₀ C` (`C = I − 11ᵀ/T`) in one pass without the
//!   cancellation of centring `G₀` afterwards. Only the lower triangle is formed (faer's
//!   triangular matmul), half the flops of a full product.
//! * `G = V Σ² Vᵀ` (faer's symmetric eigendecomposition); energy `λ_i = σ_i² / T`, the
//!   variance over the snapshots of the modal coefficient `a_i(t) = ⟨φ_i, x_t − x̄⟩_W`.
//! * pass 2: `Φ = (X − x̄ 1ᵀ) V_r Σ_r⁻¹`, again block by block; `ΦᵀWΦ = I` by construction.
//!
//! Memory: `O(T² + T · block_size + n_dof · r)`; the snapshot matrix is never held whole.
//! Under a memory limit the block size comes from [`super::memory`].
//! Accuracy: a mode's orthonormality error grows like `ε λ_1 / λ_i` (the Gram squares the
//! condition number); modes carrying less than ~1e-8 of the leading energy are better taken
//! from the thin SVD route. Deterministic for any thread count: blocks are reduced in order
//! and each faer kernel splits only output tiles.

use faer::linalg::matmul::matmul;
use faer::linalg::matmul::triangular::{self, BlockStructure};
use faer::{Accum, Mat, Par};

use super::blocks::{block_size_for, dof_blocks, SnapshotBlock};
use super::memory::block_size_within;
use super::weights::{fix_signs, zero_energy_threshold};
use super::{BasisError, Decomposition, Rank};
use crate::io::SnapshotSource;

/// Mean, centred weighted Gram matrix (lower triangle filled) of `source`.
pub struct CentredGram {
    pub mean: Vec<f64>,
    /// `T × T`; only the lower triangle is meaningful.
    pub gram: Mat<f64>,
}

/// Pass 1: the temporal mean and the lower triangle of `Yᵀ Y`.
pub fn accumulate_gram(
    source: &mut dyn SnapshotSource,
    dof_weights: &[f64],
    block_size: usize,
    par: Par,
    progress: &mut dyn FnMut(usize),
) -> Result<CentredGram, BasisError> {
    let n_snapshots = source.n_snapshots();
    let n_dof = source.n_dof();
    assert_eq!(dof_weights.len(), n_dof, "weights per dof");
    let mut mean = vec![0.0; n_dof];
    let mut gram = Mat::<f64>::zeros(n_snapshots, n_snapshots);
    let mut block = SnapshotBlock::new(n_snapshots, block_size);
    let sqrt_weights: Vec<f64> = dof_weights.iter().map(|w| w.sqrt()).collect();
    for (block_idx, dofs) in dof_blocks(n_dof, block_size).enumerate() {
        block.read(source, dofs.clone())?;
        block.row_means(&mut mean[dofs.clone()]);
        block.centre_and_scale(&mean[dofs.clone()], &sqrt_weights[dofs]);
        let y = block.as_mat();
        triangular::matmul(
            gram.as_mut(),
            BlockStructure::TriangularLower,
            Accum::Add,
            y.transpose(),
            BlockStructure::Rectangular,
            y,
            BlockStructure::Rectangular,
            1.0,
            par,
        );
        progress(block_idx + 1);
    }
    Ok(CentredGram { mean, gram })
}

/// Eigenpairs of the Gram matrix, descending: `(σ², V)` with `V` `T × T`.
pub fn gram_eigen(gram: &Mat<f64>, par: Par) -> Result<(Vec<f64>, Mat<f64>), BasisError> {
    use faer::dyn_stack::{MemBuffer, MemStack};
    use faer::linalg::evd;
    let n = gram.nrows();
    let mut eigenvalues = faer::diag::Diag::<f64>::zeros(n);
    let mut eigenvectors = Mat::<f64>::zeros(n, n);
    let scratch = evd::self_adjoint_evd_scratch::<f64>(
        n,
        evd::ComputeEigenvectors::Yes,
        par,
        Default::default(),
    );
    evd::self_adjoint_evd(
        gram.as_ref(),
        eigenvalues.as_mut(),
        Some(eigenvectors.as_mut()),
        par,
        MemStack::new(&mut MemBuffer::new(scratch)),
        Default::default(),
    )
    .map_err(|_| BasisError::NoConvergence {
        method: "symmetric eigendecomposition of the snapshot Gram matrix",
        size: n,
    })?;
    // faer returns ascending order; POD wants the most energetic first.
    let values: Vec<f64> = (0..n).rev().map(|i| eigenvalues[i]).collect();
    let vectors = Mat::from_fn(n, n, |row, col| eigenvectors[(row, n - 1 - col)]);
    Ok((values, vectors))
}

/// Energies `σ²/T` of the modes above round-off, descending.
pub fn nonzero_energies(sigma_sq: &[f64], n_snapshots: usize) -> Vec<f64> {
    let largest = sigma_sq.first().copied().unwrap_or(0.0).max(0.0);
    let threshold = zero_energy_threshold(largest, n_snapshots);
    sigma_sq
        .iter()
        .take_while(|&&s| s > threshold)
        .map(|&s| s / n_snapshots as f64)
        .collect()
}

/// Full method of snapshots: returns mean, modes and energies.
pub fn pod_by_snapshots(
    source: &mut dyn SnapshotSource,
    dof_weights: &[f64],
    rank: Rank,
    block_size: Option<usize>,
    memory_limit: Option<u64>,
    par: Par,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Decomposition, BasisError> {
    let n_snapshots = source.n_snapshots();
    let n_dof = source.n_dof();
    // Under a memory limit the first pass is budgeted for the fewest modes it may keep.
    let block_size = match memory_limit {
        Some(limit) => {
            let min_modes = match rank {
                Rank::Count(count) => count,
                Rank::EnergyFraction(_) => 1,
            };
            block_size_within(limit, n_snapshots, n_dof, min_modes)?
        }
        None => block_size_for(n_snapshots, n_dof, block_size),
    };
    let n_blocks = dof_blocks(n_dof, block_size).count();
    // Steps: one per block in each pass, one for the eigendecomposition.
    let n_steps = 2 * n_blocks + 1;
    progress(0, n_steps);
    let CentredGram { mean, gram } =
        accumulate_gram(source, dof_weights, block_size, par, &mut |done| {
            progress(done, n_steps)
        })?;
    let (sigma_sq, vectors) = gram_eigen(&gram, par)?;
    drop(gram);
    progress(n_blocks + 1, n_steps);
    let energies = nonzero_energies(&sigma_sq, n_snapshots);
    if energies.is_empty() {
        return Err(BasisError::NoFluctuation);
    }
    let n_modes = rank.select(&energies)?;
    // The kept modes are known now: budget the second pass for them.
    let block_size = match memory_limit {
        Some(limit) => block_size_within(limit, n_snapshots, n_dof, n_modes)?.min(block_size),
        None => block_size,
    };
    let n_blocks_lift = dof_blocks(n_dof, block_size).count();
    // V_r Σ_r⁻¹: the lift weights, T × r.
    let lift = Mat::from_fn(n_snapshots, n_modes, |time_idx, mode_idx| {
        vectors[(time_idx, mode_idx)] / sigma_sq[mode_idx].sqrt()
    });
    drop(vectors);

    let mut modes = Mat::<f64>::zeros(n_dof, n_modes);
    let mut block = SnapshotBlock::new(n_snapshots, block_size);
    for (block_idx, dofs) in dof_blocks(n_dof, block_size).enumerate() {
        block.read(source, dofs.clone())?;
        block.centre(&mean[dofs.clone()]);
        matmul(
            modes.as_mut().subrows_mut(dofs.start, dofs.len()),
            Accum::Replace,
            block.as_mat(),
            lift.as_ref(),
            1.0,
            par,
        );
        progress(
            (n_blocks + 2 + block_idx * n_blocks / n_blocks_lift).min(n_steps),
            n_steps,
        );
    }
    // Solid cells carry no weight; their values would be whatever the file holds there.
    for (dof_idx, &w) in dof_weights.iter().enumerate() {
        if w <= 0.0 {
            for mode_idx in 0..n_modes {
                modes[(dof_idx, mode_idx)] = 0.0;
            }
        }
    }
    fix_signs(&mut modes);
    Ok(Decomposition {
        mean,
        modes,
        energies,
    })
}
