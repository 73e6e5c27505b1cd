//! [`CandidateRows`]: the whitened, prior-scaled measurement rows of every candidate block,
//! stacked into one contiguous row-major matrix with block offsets.
//!
//! One allocation for all rows keeps a million single-row point candidates at O(n·r) memory
//! and lets every kernel stream rows without pointer chasing; a block is the row range
//! `block_start[b]..block_start[b + 1]`. Row `i` of block `b` is `R^{-1/2} h_i ⊙ Λ^{1/2}`, so the
//! scaled information matrix is `I + Σ_b B_bᵀ B_b` (see `problem.rs`). It owns no criteria.

/// Relative size of the flat prior: `Λ⁻¹ = ε I` with
/// `ε = FLAT_PRIOR_EPSILON · mean_b ‖R_b^{-1/2} H_b‖²_F / n_modes`, i.e. one millionth of the
/// information per mode an average candidate brings. Small enough that rankings equal the
/// classical (prior-free) D-, A- and E-optimal designs wherever those are defined, large enough
/// that `J` stays invertible when fewer rows than modes are chosen.
pub const FLAT_PRIOR_EPSILON: f64 = 1e-6;

/// Stacked whitened rows of all candidate blocks.
#[derive(Debug, Clone)]
pub struct CandidateRows {
    n_modes: usize,
    /// `n_rows × n_modes`, row-major.
    data: Vec<f64>,
    /// `n_blocks + 1` offsets into the rows; strictly increasing.
    block_start: Vec<usize>,
}

impl CandidateRows {
    /// Single-row blocks from a row-major `n_rows × n_modes` matrix (the fast path for point
    /// candidates reading one value).
    #[track_caller]
    pub fn from_single_rows(n_modes: usize, data: Vec<f64>) -> Self {
        assert!(n_modes > 0, "CandidateRows needs at least one mode");
        assert!(
            data.len().is_multiple_of(n_modes),
            "row data is not a multiple of n_modes"
        );
        let n_rows = data.len() / n_modes;
        CandidateRows {
            n_modes,
            data,
            block_start: (0..=n_rows).collect(),
        }
    }

    /// Blocks of several rows: `data` row-major, `rows_per_block[b] ≥ 1` rows for block `b`.
    #[track_caller]
    pub fn from_blocks(n_modes: usize, data: Vec<f64>, rows_per_block: &[usize]) -> Self {
        assert!(n_modes > 0, "CandidateRows needs at least one mode");
        let mut block_start = Vec::with_capacity(rows_per_block.len() + 1);
        block_start.push(0);
        for &n in rows_per_block {
            assert!(n > 0, "a block has at least one row");
            block_start.push(block_start.last().copied().unwrap_or(0) + n);
        }
        assert_eq!(
            block_start.last().copied().unwrap_or(0) * n_modes,
            data.len(),
            "row data does not match the block sizes"
        );
        CandidateRows {
            n_modes,
            data,
            block_start,
        }
    }

    pub fn n_modes(&self) -> usize {
        self.n_modes
    }

    pub fn n_blocks(&self) -> usize {
        self.block_start.len() - 1
    }

    pub fn n_rows(&self) -> usize {
        self.data.len() / self.n_modes
    }

    /// Number of rows of block `block_idx`.
    pub fn block_len(&self, block_idx: usize) -> usize {
        self.block_start[block_idx + 1] - self.block_start[block_idx]
    }

    /// Row range of block `block_idx`.
    pub fn block_range(&self, block_idx: usize) -> std::ops::Range<usize> {
        self.block_start[block_idx]..self.block_start[block_idx + 1]
    }

    /// The rows of block `block_idx`, row-major (`block_len × n_modes`).
    pub fn block(&self, block_idx: usize) -> &[f64] {
        let r = self.block_range(block_idx);
        &self.data[r.start * self.n_modes..r.end * self.n_modes]
    }

    /// Rows `first..first + n_rows`, row-major.
    pub fn rows_slice(&self, first: usize, n_rows: usize) -> &[f64] {
        &self.data[first * self.n_modes..(first + n_rows) * self.n_modes]
    }

    pub fn row(&self, row_idx: usize) -> &[f64] {
        &self.data[row_idx * self.n_modes..(row_idx + 1) * self.n_modes]
    }

    /// Whether every block has exactly one row.
    pub fn all_single(&self) -> bool {
        self.n_rows() == self.n_blocks()
    }

    /// Squared Frobenius norm of block `block_idx`.
    pub fn block_norm_sq(&self, block_idx: usize) -> f64 {
        self.block(block_idx).iter().map(|v| v * v).sum()
    }

    /// Multiplies column `mode` of every row by `factor[mode]`.
    pub(crate) fn scale_columns(&mut self, factor: &[f64]) {
        assert_eq!(factor.len(), self.n_modes);
        for row in self.data.chunks_exact_mut(self.n_modes) {
            for (v, f) in row.iter_mut().zip(factor) {
                *v *= f;
            }
        }
    }
}

/// Dot product with four independent accumulators, so the compiler can vectorise it while the
/// summation order stays fixed (bit-identical results on every machine and thread count).
#[inline]
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    debug_assert_eq!(a.len(), b.len());
    let mut acc = [0.0f64; 4];
    let chunks_a = a.chunks_exact(4);
    let chunks_b = b.chunks_exact(4);
    let tail: f64 = chunks_a
        .remainder()
        .iter()
        .zip(chunks_b.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (ca, cb) in chunks_a.zip(chunks_b) {
        for l in 0..4 {
            acc[l] += ca[l] * cb[l];
        }
    }
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn block_ranges_follow_sizes() {
        let rows = CandidateRows::from_blocks(2, (0..12).map(f64::from).collect(), &[1, 3, 2]);
        assert_eq!(rows.n_blocks(), 3);
        assert_eq!(rows.n_rows(), 6);
        assert_eq!(rows.block_range(1), 1..4);
        assert_eq!(rows.block(2), &[8.0, 9.0, 10.0, 11.0]);
        assert!(!rows.all_single());
        assert!((rows.block_norm_sq(0) - 1.0).abs() < 1e-15);
    }

    #[test]
    fn dot_matches_naive_for_edge_lengths() {
        for n in [1usize, 2, 3, 4, 5, 7, 8, 127, 128, 257] {
            let a: Vec<f64> = (0..n).map(|i| (i as f64 * 0.37).sin()).collect();
            let b: Vec<f64> = (0..n).map(|i| (i as f64 * 0.11).cos()).collect();
            let naive: f64 = a.iter().zip(&b).map(|(x, y)| x * y).sum();
            assert!((dot(&a, &b) - naive).abs() <= 1e-12 * (1.0 + naive.abs()));
        }
    }
}
