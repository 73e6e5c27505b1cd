//! Snapshot access by block, so the basis stage can stream files larger than memory.

use std::ops::Range;

use super::IoError;

/// A time series of field snapshots, `n_snapshots × n_dof`, read block by block.
///
/// Implementations read from `.npy`, CSV, or memory. Values are converted to `f64`.
pub trait SnapshotSource: Send {
    fn n_snapshots(&self) -> usize;
    fn n_dof(&self) -> usize;
    /// Fills `out`, row-major with `times.len()` rows of `dofs.len()` values, with
    /// snapshots `times` at degrees of freedom `dofs`.
    fn read_block(
        &mut self,
        times: Range<usize>,
        dofs: Range<usize>,
        out: &mut [f64],
    ) -> Result<(), IoError>;
}

/// Snapshots held in memory, row-major `n_snapshots × n_dof`; for tests and small sites.
#[derive(Debug, Clone)]
pub struct InMemorySnapshots {
    pub n_snapshots: usize,
    pub n_dof: usize,
    pub data: Vec<f64>,
}

impl InMemorySnapshots {
    #[track_caller]
    pub fn new(n_snapshots: usize, n_dof: usize, data: Vec<f64>) -> Self {
        assert_eq!(data.len(), n_snapshots * n_dof, "snapshot data length");
        Self {
            n_snapshots,
            n_dof,
            data,
        }
    }
}

impl SnapshotSource for InMemorySnapshots {
    fn n_snapshots(&self) -> usize {
        self.n_snapshots
    }

    fn n_dof(&self) -> usize {
        self.n_dof
    }

    fn read_block(
        &mut self,
        times: Range<usize>,
        dofs: Range<usize>,
        out: &mut [f64],
    ) -> Result<(), IoError> {
        assert!(times.end <= self.n_snapshots && dofs.end <= self.n_dof);
        assert_eq!(out.len(), times.len() * dofs.len());
        let width = dofs.len();
        for (row, t) in times.enumerate() {
            let start = t * self.n_dof + dofs.start;
            out[row * width..(row + 1) * width].copy_from_slice(&self.data[start..start + width]);
        }
        Ok(())
    }
}
