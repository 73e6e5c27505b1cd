//! `io` owns every file crowsnest reads: `site.toml` and the files it names (snapshots as
//! `.npy` or CSV, `points.csv`, `candidates.csv`, zone polygons inline or as GeoJSON, a
//! precomputed basis, layouts). It turns them into a validated [`Site`], and it owns the
//! atomic writers for data files ([`atomic`]). Every failure is an [`IoError`] that names
//! the file, the row or key, what was found and what was expected.
//!
//! It does no numerics beyond validation, prints nothing and starts no threads.
//!
//! Field layout, used by every later stage: a snapshot is a flat vector of
//! `n_points × n_channels` values, index `point_idx * n_channels + channel_idx`; on a grid
//! `point_idx = j * nx + i` (row `j` along the second plane axis). This is the C-order
//! flattening of a `(T, ny, nx, C)` `.npy` file.

pub mod atomic;
pub mod basis_files;
pub mod csv_in;
pub mod digest;
pub mod error;
pub mod geometry;
pub mod keys;
pub mod layout_file;
pub mod npy;
pub mod site;
mod site_flow;
mod site_load;
mod site_mounts;
pub mod snapshots;
pub mod table;
pub mod zones;

pub use error::IoError;
pub use layout_file::{
    parse_layout_csv, read_layout_csv, write_layout_csv, LayoutRow, LAYOUT_COLUMNS,
};
pub use npy::{
    check_shape, parse_npy_f64, parse_npy_header, read_npy_f64, read_npy_header, write_npy_f32,
    write_npy_f64, NpyDtype, NpyHeader, NpySnapshots,
};
pub use site::*;
pub use site_flow::{open_snapshots, read_snapshot_csv};
pub use site_load::{load_site, load_site_for_synth, load_site_from_str, parse_candidates_csv};
pub use snapshots::{InMemorySnapshots, SnapshotSource};
