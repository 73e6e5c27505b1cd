//! [`PackedBlocks`]: every block of a site in a few flat arrays, for sites with a million
//! candidates where one small matrix per block would cost more memory than the rows themselves
//! (a 1-row faer matrix pads to 8 rows). Same rows, same numbers, bit for bit, as
//! [`super::build_blocks`]; [`PackedBlocks::block`] gives one as a [`Block`].
//!
//! Candidates are processed in fixed chunks in parallel (rayon) and the chunks joined in
//! candidate order, so the result does not depend on the thread count. No IO, no printing.

use rayon::prelude::*;

use super::beam::FieldGeometry;
use super::{
    apply_row, check_basis, check_kind, pair_rows, Block, BlockSet, ModeRows, RowBuffer,
    SensorError,
};
use crate::basis::Basis;
use crate::io::Site;

/// Candidates per parallel work item: large enough to amortise the buffers, small enough to
/// balance two to dozens of threads.
const CHUNK: usize = 2048;

/// All blocks of a site, flat. Block `b` owns rows `row_start[b]..row_start[b + 1]`; row `r`
/// reads `stencil[stencil_start[r]..stencil_start[r + 1]]`.
#[derive(Debug, Clone, Default)]
pub struct PackedBlocks {
    pub n_modes: usize,
    pub candidate_idx: Vec<usize>,
    pub kind_idx: Vec<usize>,
    /// Kind cost plus mounting cost, per block.
    pub cost: Vec<f64>,
    /// `n_blocks + 1` row offsets.
    pub row_start: Vec<usize>,
    /// Rows of `H`, row-major: `h[row * n_modes + mode]`.
    pub h: Vec<f64>,
    /// Mean-field reading per row.
    pub offset: Vec<f64>,
    /// Noise variance per row, > 0.
    pub noise_var: Vec<f64>,
    /// `n_rows + 1` stencil offsets.
    pub stencil_start: Vec<usize>,
    /// `(dof, weight)` of every row, concatenated.
    pub stencil: Vec<(usize, f64)>,
    /// Non-fatal findings, in candidate order.
    pub warnings: Vec<String>,
}

impl PackedBlocks {
    pub fn n_blocks(&self) -> usize {
        self.candidate_idx.len()
    }

    pub fn n_rows(&self) -> usize {
        self.offset.len()
    }

    /// Rows `H` of block `block_idx`, row-major (`n_rows × n_modes`).
    pub fn h_rows(&self, block_idx: usize) -> &[f64] {
        let rows = self.row_start[block_idx]..self.row_start[block_idx + 1];
        &self.h[rows.start * self.n_modes..rows.end * self.n_modes]
    }

    /// Stencil of row `row` (global row index).
    pub fn stencil_row(&self, row: usize) -> &[(usize, f64)] {
        &self.stencil[self.stencil_start[row]..self.stencil_start[row + 1]]
    }

    /// Block `block_idx` as a stand-alone [`Block`].
    pub fn block(&self, block_idx: usize) -> Block {
        let rows = self.row_start[block_idx]..self.row_start[block_idx + 1];
        let h_rows = self.h_rows(block_idx);
        let n_modes = self.n_modes;
        Block {
            candidate_idx: self.candidate_idx[block_idx],
            kind_idx: self.kind_idx[block_idx],
            h: faer::Mat::from_fn(rows.len(), n_modes, |row, mode| {
                h_rows[row * n_modes + mode]
            }),
            stencil: rows
                .clone()
                .map(|row| self.stencil_row(row).to_vec())
                .collect(),
            offset: self.offset[rows.clone()].to_vec(),
            noise_var: self.noise_var[rows].to_vec(),
            cost: self.cost[block_idx],
        }
    }

    /// Every block as a [`Block`], with the warnings.
    pub fn to_block_set(&self) -> BlockSet {
        BlockSet {
            blocks: (0..self.n_blocks()).map(|b| self.block(b)).collect(),
            warnings: self.warnings.clone(),
        }
    }

    fn append(&mut self, mut part: PackedBlocks) {
        let row_base = self.n_rows();
        let stencil_base = self.stencil.len();
        self.candidate_idx.append(&mut part.candidate_idx);
        self.kind_idx.append(&mut part.kind_idx);
        self.cost.append(&mut part.cost);
        self.row_start
            .extend(part.row_start[1..].iter().map(|&r| r + row_base));
        self.offset.append(&mut part.offset);
        self.noise_var.append(&mut part.noise_var);
        self.stencil_start
            .extend(part.stencil_start[1..].iter().map(|&s| s + stencil_base));
        self.stencil.append(&mut part.stencil);
        self.warnings.append(&mut part.warnings);
    }

    fn empty(n_modes: usize) -> Self {
        PackedBlocks {
            n_modes,
            row_start: vec![0],
            stencil_start: vec![0],
            ..Default::default()
        }
    }
}

/// The blocks of [`super::build_blocks`], packed. Same errors and warnings.
pub fn build_packed(site: &Site, basis: &Basis) -> Result<PackedBlocks, SensorError> {
    check_basis(site, basis)?;
    for kind in &site.kinds {
        check_kind(site, kind)?;
    }
    let geometry = FieldGeometry::new(site);
    let n_modes = basis.n_modes();
    let mode_rows = ModeRows::new(basis);
    let parts: Vec<Result<PackedBlocks, SensorError>> = (0..site.candidates.len().div_ceil(CHUNK))
        .into_par_iter()
        .map(|chunk_idx| {
            let first = chunk_idx * CHUNK;
            let last = (first + CHUNK).min(site.candidates.len());
            pack_chunk(&geometry, basis, first..last)
        })
        .collect();
    let parts = parts.into_iter().collect::<Result<Vec<_>, _>>()?;
    let mut packed = PackedBlocks::empty(n_modes);
    let total = |len: fn(&PackedBlocks) -> usize| parts.iter().map(len).sum::<usize>();
    packed
        .candidate_idx
        .reserve(total(|p| p.candidate_idx.len()));
    packed.kind_idx.reserve(total(|p| p.kind_idx.len()));
    packed.cost.reserve(total(|p| p.cost.len()));
    packed.row_start.reserve(total(|p| p.row_start.len()));
    packed.offset.reserve(total(|p| p.offset.len()));
    packed.noise_var.reserve(total(|p| p.noise_var.len()));
    packed
        .stencil_start
        .reserve(total(|p| p.stencil_start.len()));
    packed.stencil.reserve(total(|p| p.stencil.len()));
    for part in parts {
        packed.append(part);
    }
    // Rows of H last, straight into their final place (memory touched once).
    const ROW_CHUNK: usize = 4096;
    let mut h = vec![0.0; packed.n_rows() * n_modes];
    if n_modes > 0 {
        h.par_chunks_mut(ROW_CHUNK * n_modes)
            .enumerate()
            .for_each(|(chunk_idx, out)| {
                for (k, h_row) in out.chunks_exact_mut(n_modes).enumerate() {
                    mode_rows.apply(packed.stencil_row(chunk_idx * ROW_CHUNK + k), h_row);
                }
            });
    }
    packed.h = h;
    Ok(packed)
}

fn pack_chunk(
    geometry: &FieldGeometry,
    basis: &Basis,
    candidates: std::ops::Range<usize>,
) -> Result<PackedBlocks, SensorError> {
    let mut part = PackedBlocks::empty(basis.n_modes());
    let mut rows = RowBuffer::default();
    for candidate_idx in candidates {
        for &kind_idx in &geometry.site.candidates[candidate_idx].kind_idx {
            rows.clear();
            let kind = pair_rows(
                geometry,
                candidate_idx,
                kind_idx,
                &mut rows,
                &mut part.warnings,
            )?;
            if rows.n_rows() == 0 {
                continue;
            }
            part.candidate_idx.push(candidate_idx);
            part.kind_idx.push(kind_idx);
            part.cost
                .push(kind.cost + geometry.site.candidates[candidate_idx].mount_cost);
            for row in 0..rows.n_rows() {
                let entries = rows.row(row);
                part.offset.push(apply_row(entries, &basis.mean));
                part.noise_var.push(kind.noise_sd * kind.noise_sd);
                part.stencil.extend_from_slice(entries);
                part.stencil_start.push(part.stencil.len());
            }
            part.row_start.push(part.offset.len());
        }
    }
    Ok(part)
}
