//! The memory budget of the streaming POD: what the method of snapshots holds at once, and the
//! block size that fits a user's limit (`crowsnest basis --memory-limit MIB`).
//!
//! With `T` snapshots, `n` degrees of freedom, `r` kept modes and blocks of `b` dofs, the
//! arrays alive at the worst moment are (all `f64`, 8 bytes):
//!
//! * the `T × T` Gram matrix, its eigenvectors, a reordered copy and the eigensolver's
//!   workspace: counted as `4 T²`;
//! * per-dof vectors (mean, dof weights, their square roots, point weights): `4 n`;
//! * the kept modes `n × r` and the lift weights `T × r`;
//! * one block of snapshots `T × b`.
//!
//! The budget is the limit minus everything but the block; the block gets what is left
//! (never more than the default ~16 MiB). A limit that leaves no room for a block of one
//! dof is refused before any work. With an energy fraction the number of modes is known only
//! after the eigendecomposition, so the first pass budgets for one mode and the second pass
//! is budgeted again with the modes actually kept (a smaller block, or a refusal).
//! The thin-SVD route holds every snapshot and is budgeted as `3 T n` values.
//!
//! The limit covers these data arrays; the program itself (code, thread stacks, allocator
//! slack) comes on top — docs/performance.md gives the measured figure.

use super::blocks::block_size_for;
use super::BasisError;

const F64: u64 = 8;
const MIB: u64 = 1 << 20;

/// Bytes held besides the snapshot block, for `n_modes` kept modes.
pub fn fixed_bytes(n_snapshots: usize, n_dof: usize, n_modes: usize) -> u64 {
    let (t, n, r) = (n_snapshots as u64, n_dof as u64, n_modes as u64);
    F64 * (4 * t * t + 4 * n + n * r + t * r)
}

/// Block size (dofs per block) that keeps the method of snapshots within `limit` bytes with
/// `n_modes` kept modes, or the refusal naming what is needed.
pub fn block_size_within(
    limit: u64,
    n_snapshots: usize,
    n_dof: usize,
    n_modes: usize,
) -> Result<usize, BasisError> {
    let fixed = fixed_bytes(n_snapshots, n_dof, n_modes);
    let one_block = F64 * n_snapshots as u64;
    if limit < fixed + one_block {
        return Err(BasisError::MemoryLimit {
            limit_mib: limit as f64 / MIB as f64,
            need_mib: (fixed + one_block) as f64 / MIB as f64,
            detail: format!(
                "the method of snapshots holds a {n_snapshots} × {n_snapshots} Gram matrix, \
                 {n_modes} mode(s) of {n_dof} values and at least one block: raise the limit \
                 or keep fewer modes (--modes)"
            ),
        });
    }
    let fits = ((limit - fixed) / one_block) as usize;
    Ok(fits.min(block_size_for(n_snapshots, n_dof, None)).max(1))
}

/// Refusal of the thin-SVD route when all snapshots would exceed `limit` bytes.
pub fn check_svd(limit: u64, n_snapshots: usize, n_dof: usize) -> Result<(), BasisError> {
    let need =
        F64 * 3 * n_snapshots as u64 * n_dof as u64 + fixed_bytes(n_snapshots, n_dof, n_snapshots);
    if need > limit {
        return Err(BasisError::MemoryLimit {
            limit_mib: limit as f64 / MIB as f64,
            need_mib: need as f64 / MIB as f64,
            detail: "the thin SVD holds every snapshot in memory: raise the limit or use \
                     --method snapshots, which streams them"
                .to_string(),
        });
    }
    Ok(())
}

#[cfg(test)]
#[allow(clippy::unwrap_used)]
mod tests {
    use super::*;

    #[test]
    fn block_fills_what_the_limit_leaves() {
        // T = 32, n = 262 144, r = 4: fixed = 8 (4·1024 + 4n + 4n + 128) bytes.
        let fixed = fixed_bytes(32, 262_144, 4);
        assert_eq!(fixed, 8 * (4096 + 8 * 262_144 + 128));
        let limit = fixed + 8 * 32 * 1000;
        assert_eq!(block_size_within(limit, 32, 262_144, 4).unwrap(), 1000);
        // A generous limit is capped at the default block.
        assert_eq!(
            block_size_within(1 << 40, 32, 262_144, 4).unwrap(),
            block_size_for(32, 262_144, None)
        );
    }

    #[test]
    fn too_small_a_limit_is_refused() {
        let fixed = fixed_bytes(32, 262_144, 4);
        let err = block_size_within(fixed, 32, 262_144, 4).unwrap_err();
        assert!(err.is_bad_input());
        assert!(err.to_string().contains("Gram"), "{err}");
        assert!(check_svd(1 << 20, 32, 262_144).is_err());
        assert!(check_svd(1 << 40, 32, 262_144).is_ok());
    }
}
