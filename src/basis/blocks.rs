//! Reading snapshots one block of degrees of freedom at a time, all snapshots at once: the
//! unit of work of every streaming pass in `basis` (Gram accumulation, lifting modes,
//! projection). A block holds `n_snapshots × block_len` values, so memory stays
//! `O(n_snapshots · block_size)` however large the field.
//!
//! A block arrives from [`io::SnapshotSource::read_block`] row-major (`times × dofs`), which
//! is the column-major `dofs × times` matrix faer wants, so no transpose is ever copied.

use std::ops::Range;

use faer::MatRef;

use crate::io::{IoError, SnapshotSource};

/// Bytes of snapshot data one block aims for; big enough that each GEMM runs at full speed,
/// small enough to stay a fraction of any snapshot file worth streaming.
const BLOCK_BYTES: usize = 16 << 20;

/// Degrees of freedom per block for `n_snapshots` snapshots, unless the caller chose one.
pub fn block_size_for(n_snapshots: usize, n_dof: usize, chosen: Option<usize>) -> usize {
    let size = chosen.unwrap_or_else(|| BLOCK_BYTES / (8 * n_snapshots.max(1)));
    size.clamp(1, n_dof.max(1))
}

/// The dof ranges of the blocks, in order.
pub fn dof_blocks(n_dof: usize, block_size: usize) -> impl Iterator<Item = Range<usize>> {
    (0..n_dof)
        .step_by(block_size.max(1))
        .map(move |start| start..(start + block_size).min(n_dof))
}

/// One block of snapshots held as a `dofs × times` matrix.
pub struct SnapshotBlock {
    buffer: Vec<f64>,
    n_snapshots: usize,
    n_rows: usize,
}

impl SnapshotBlock {
    pub fn new(n_snapshots: usize, block_size: usize) -> Self {
        Self {
            buffer: vec![0.0; n_snapshots * block_size],
            n_snapshots,
            n_rows: 0,
        }
    }

    /// Reads snapshots `0..n_snapshots` at `dofs` from `source`.
    pub fn read(
        &mut self,
        source: &mut dyn SnapshotSource,
        dofs: Range<usize>,
    ) -> Result<(), IoError> {
        self.n_rows = dofs.len();
        let len = self.n_rows * self.n_snapshots;
        if self.buffer.len() < len {
            self.buffer.resize(len, 0.0);
        }
        source.read_block(0..self.n_snapshots, dofs, &mut self.buffer[..len])
    }

    /// Temporal mean of every dof of the block, summed in time order (deterministic).
    pub fn row_means(&self, out: &mut [f64]) {
        assert_eq!(out.len(), self.n_rows);
        out.fill(0.0);
        for time_idx in 0..self.n_snapshots {
            let row = &self.buffer[time_idx * self.n_rows..(time_idx + 1) * self.n_rows];
            for (acc, value) in out.iter_mut().zip(row) {
                *acc += value;
            }
        }
        let scale = 1.0 / self.n_snapshots as f64;
        out.iter_mut().for_each(|m| *m *= scale);
    }

    /// Replaces every value `x` of dof `d` by `(x − mean[d]) · scale[d]`.
    pub fn centre_and_scale(&mut self, mean: &[f64], scale: &[f64]) {
        assert_eq!(mean.len(), self.n_rows);
        assert_eq!(scale.len(), self.n_rows);
        let n_rows = self.n_rows;
        for time_idx in 0..self.n_snapshots {
            let row = &mut self.buffer[time_idx * n_rows..(time_idx + 1) * n_rows];
            for ((value, m), s) in row.iter_mut().zip(mean).zip(scale) {
                *value = (*value - m) * s;
            }
        }
    }

    /// Replaces every value `x` of dof `d` by `x − mean[d]`.
    pub fn centre(&mut self, mean: &[f64]) {
        assert_eq!(mean.len(), self.n_rows);
        let n_rows = self.n_rows;
        for time_idx in 0..self.n_snapshots {
            let row = &mut self.buffer[time_idx * n_rows..(time_idx + 1) * n_rows];
            for (value, m) in row.iter_mut().zip(mean) {
                *value -= m;
            }
        }
    }

    /// The block as a `dofs × times` matrix.
    pub fn as_mat(&self) -> MatRef<'_, f64> {
        MatRef::from_column_major_slice(
            &self.buffer[..self.n_rows * self.n_snapshots],
            self.n_rows,
            self.n_snapshots,
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::InMemorySnapshots;

    #[test]
    fn blocks_cover_every_dof_once() {
        let ranges: Vec<_> = dof_blocks(10, 4).collect();
        assert_eq!(ranges, vec![0..4, 4..8, 8..10]);
        assert_eq!(dof_blocks(0, 4).count(), 0);
        assert_eq!(block_size_for(1000, 10, None), 10);
        assert_eq!(block_size_for(1000, 1 << 30, None), (16 << 20) / 8000);
    }

    #[test]
    fn block_is_dofs_by_times_and_centres() {
        // 3 snapshots × 4 dofs, value = 10 t + d.
        let data: Vec<f64> = (0..3)
            .flat_map(|t| (0..4).map(move |d| (10 * t + d) as f64))
            .collect();
        let mut source = InMemorySnapshots::new(3, 4, data);
        let mut block = SnapshotBlock::new(3, 2);
        block.read(&mut source, 1..3).unwrap();
        let mat = block.as_mat();
        assert_eq!((mat.nrows(), mat.ncols()), (2, 3));
        assert!((mat[(1, 2)] - 22.0).abs() < 1e-15);
        let mut mean = vec![0.0; 2];
        block.row_means(&mut mean);
        assert!((mean[0] - 11.0).abs() < 1e-15 && (mean[1] - 12.0).abs() < 1e-15);
        block.centre_and_scale(&mean, &[1.0, 2.0]);
        assert!((block.as_mat()[(1, 0)] + 20.0).abs() < 1e-15);
    }
}
