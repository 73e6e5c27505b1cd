//! The three files of a POD basis: `modes.npy` (`(r, ny, nx, C)` on a grid, `(r, N, C)` on
//! points, float64), `mean.npy` (`(ny, nx, C)` / `(N, C)`) and `energies.csv` (columns
//! `mode,energy,fraction,cumulative_fraction`, one row per mode with non-zero energy, the
//! first `r` of them kept in `modes.npy`). Written by `crowsnest basis`, read back for sites
//! whose `[basis]` table brings modes computed elsewhere.
//!
//! Writing goes through the atomic writer, file by file (`energies.csv` last, so a complete
//! energies file means the set is complete). Reading validates shapes against the domain, that
//! every value is finite (a NaN names the mode, point and channel), that energies are
//! non-negative and descending, and warns when the modes are more than 1e-6 away from
//! orthonormal in the weighted inner product. Plain data in and out: this file knows nothing of
//! `basis::Basis`.

use std::path::{Path, PathBuf};

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatRef, Par};

use super::atomic::write_atomic;
use super::npy::{
    check_shape, header_bytes, read_npy_f64, read_npy_header, write_npy_f64, NpyDtype,
};
use super::table::{read_csv_table, write_csv_table};
use super::{BasisFiles, Domain, IoError};

/// Largest `max |ΦᵀWΦ − I|` of an imported basis accepted without a warning.
pub const ORTHONORMALITY_WARNING: f64 = 1e-6;

/// The paths of the three files of a basis.
#[derive(Debug, Clone)]
pub struct BasisPaths {
    pub modes: PathBuf,
    pub mean: PathBuf,
    pub energies: PathBuf,
}

impl BasisPaths {
    /// The files named by a site's `[basis]` table.
    pub fn of_site(files: &BasisFiles) -> Self {
        Self {
            modes: files.modes.clone(),
            mean: files.mean.clone(),
            energies: files.energies.clone(),
        }
    }
}

/// A basis read from files, validated against the site's domain.
#[derive(Debug, Clone)]
pub struct LoadedBasis {
    /// Length `n_points * n_channels`, field layout of `io`.
    pub mean: Vec<f64>,
    /// `n_dof × r`, one mode per column.
    pub modes: Mat<f64>,
    /// At least `r` energies, descending, ≥ 0.
    pub energies: Vec<f64>,
    /// Non-fatal findings (orthonormality), for the caller to show.
    pub warnings: Vec<String>,
}

/// Spatial axes of a field on `domain` and their names: `[ny, nx]` or `[N]`.
fn spatial_axes(domain: &Domain) -> (Vec<usize>, Vec<&'static str>) {
    match domain {
        Domain::Grid(grid) => (vec![grid.ny, grid.nx], vec!["ny", "nx"]),
        Domain::Points(points) => (vec![points.points.len()], vec!["N"]),
    }
}

/// Names the point of a dof for messages: `point 17 (i 5, j 1)` on a grid.
fn point_label(domain: &Domain, point_idx: usize) -> String {
    match domain {
        Domain::Grid(grid) => format!(
            "point {point_idx} (i {}, j {})",
            point_idx % grid.nx,
            point_idx / grid.nx
        ),
        Domain::Points(_) => format!("point {point_idx}"),
    }
}

/// Writes `modes.npy`, `mean.npy` and `energies.csv` into `dir` (created if missing) and
/// returns their paths. `modes` is `n_dof × r`; `energies` lists every mode (at least `r`).
#[track_caller]
pub fn write_basis_files(
    dir: &Path,
    domain: &Domain,
    n_channels: usize,
    mean: &[f64],
    modes: MatRef<'_, f64>,
    energies: &[f64],
) -> Result<BasisPaths, IoError> {
    let n_dof = domain.n_points() * n_channels;
    assert_eq!(mean.len(), n_dof, "mean length");
    assert_eq!(modes.nrows(), n_dof, "mode length");
    assert!(energies.len() >= modes.ncols(), "an energy per mode");
    let (axes, _) = spatial_axes(domain);
    let files = BasisPaths {
        modes: dir.join("modes.npy"),
        mean: dir.join("mean.npy"),
        energies: dir.join("energies.csv"),
    };

    let mut shape = vec![modes.ncols()];
    shape.extend(&axes);
    shape.push(n_channels);
    write_modes_npy(&files.modes, &shape, modes)?;

    let mut mean_shape = axes;
    mean_shape.push(n_channels);
    write_npy_f64(&files.mean, &mean_shape, mean)?;

    let total: f64 = energies.iter().sum();
    let mut cumulative = 0.0;
    let rows: Vec<Vec<String>> = energies
        .iter()
        .enumerate()
        .map(|(mode_idx, &energy)| {
            cumulative += energy;
            let (fraction, cumulative_fraction) = if total > 0.0 {
                (energy / total, cumulative / total)
            } else {
                (0.0, 0.0)
            };
            vec![
                (mode_idx + 1).to_string(),
                format!("{energy:e}"),
                format!("{fraction:e}"),
                format!("{cumulative_fraction:e}"),
            ]
        })
        .collect();
    write_csv_table(
        &files.energies,
        &["mode", "energy", "fraction", "cumulative_fraction"],
        &rows,
    )?;
    Ok(files)
}

/// Writes the modes (`n_dof × r`, one mode per column) as the C-order `(r, …)` float64 array
/// of `modes.npy`: mode after mode, each streamed through a small buffer, so no second copy of
/// the modes is ever held.
fn write_modes_npy(path: &Path, shape: &[usize], modes: MatRef<'_, f64>) -> Result<(), IoError> {
    let header = header_bytes(NpyDtype::F8, shape);
    write_atomic(path, |w| {
        w.write_all(&header)?;
        let mut bytes = Vec::with_capacity(8 * 8192);
        for column in modes.col_iter() {
            for value in column.iter() {
                bytes.extend_from_slice(&value.to_le_bytes());
                if bytes.len() == bytes.capacity() {
                    w.write_all(&bytes)?;
                    bytes.clear();
                }
            }
        }
        w.write_all(&bytes)
    })
}

/// Reads and validates a basis for a domain with `n_channels` channels per point; `files` is
/// the site's `[basis]` table or what [`write_basis_files`] returned.
pub fn read_basis_files(
    files: &BasisPaths,
    domain: &Domain,
    n_channels: usize,
) -> Result<LoadedBasis, IoError> {
    let n_points = domain.n_points();
    let n_dof = n_points * n_channels;
    let (axes, axis_names) = spatial_axes(domain);

    // Shapes first, from the headers, before reading any bulk data.
    let header = read_npy_header(&files.modes)?;
    let mut expected: Vec<Option<usize>> = vec![None];
    expected.extend(axes.iter().map(|&n| Some(n)));
    expected.push(Some(n_channels));
    let mut names = vec!["r"];
    names.extend(&axis_names);
    names.push("C");
    check_shape(&files.modes, &header.shape, &expected, &names)?;
    let n_modes = header.shape[0];
    if n_modes == 0 {
        return Err(IoError::invalid(
            &files.modes,
            "shape",
            "holds 0 modes, expected at least 1",
        ));
    }
    let mean_header = read_npy_header(&files.mean)?;
    check_shape(&files.mean, &mean_header.shape, &expected[1..], &names[1..])?;
    let energies = read_energies(&files.energies, n_modes)?;

    let (_, mode_values) = read_npy_f64(&files.modes)?;
    if let Some(bad) = mode_values.iter().position(|v| !v.is_finite()) {
        let (mode_idx, dof_idx) = (bad / n_dof, bad % n_dof);
        return Err(IoError::invalid(
            &files.modes,
            format!(
                "mode {mode_idx}, {}, channel {}",
                point_label(domain, dof_idx / n_channels),
                dof_idx % n_channels
            ),
            format!("found {}, expected a finite number", mode_values[bad]),
        ));
    }
    let modes = Mat::from_fn(n_dof, n_modes, |dof_idx, mode_idx| {
        mode_values[mode_idx * n_dof + dof_idx]
    });
    drop(mode_values);
    let (_, mean) = read_npy_f64(&files.mean)?;
    if let Some(bad) = mean.iter().position(|v| !v.is_finite()) {
        return Err(IoError::invalid(
            &files.mean,
            format!(
                "{}, channel {}",
                point_label(domain, bad / n_channels),
                bad % n_channels
            ),
            format!("found {}, expected a finite number", mean[bad]),
        ));
    }

    let mut warnings = Vec::new();
    let defect = orthonormality_defect(modes.as_ref(), domain.weights(), n_channels);
    if defect > ORTHONORMALITY_WARNING {
        warnings.push(format!(
            "{}: modes are not orthonormal in the weighted inner product \
             (max |ΦᵀWΦ − I| = {defect:.3e}, expected at most {ORTHONORMALITY_WARNING:e}); \
             coefficients assume orthonormal modes, so check the cell weights the modes were \
             made with",
            files.modes.display()
        ));
    }
    Ok(LoadedBasis {
        mean,
        modes,
        energies,
        warnings,
    })
}

/// Reads `energies.csv`: columns `mode` and `energy` required (others ignored), modes numbered
/// 1, 2, … in order, energies finite, ≥ 0, descending, at least `n_modes` rows.
fn read_energies(path: &Path, n_modes: usize) -> Result<Vec<f64>, IoError> {
    let (header, rows) = read_csv_table(path)?;
    let column = |name: &str| {
        header.iter().position(|h| h.trim() == name).ok_or_else(|| {
            IoError::invalid(
                path,
                "header",
                format!(
                    "missing column `{name}`; found columns {}, expected \
                     mode,energy,fraction,cumulative_fraction",
                    header.join(",")
                ),
            )
        })
    };
    let (mode_col, energy_col) = (column("mode")?, column("energy")?);
    let mut energies = Vec::with_capacity(rows.len());
    for (row_idx, row) in rows.iter().enumerate() {
        let place = format!("row {}", row_idx + 1);
        let mode: usize = row[mode_col].trim().parse().map_err(|_| {
            IoError::invalid(
                path,
                &place,
                format!("mode `{}` is not a whole number", row[mode_col]),
            )
        })?;
        if mode != row_idx + 1 {
            return Err(IoError::invalid(
                path,
                &place,
                format!(
                    "mode {mode}, expected {} (modes numbered 1, 2, … in order)",
                    row_idx + 1
                ),
            ));
        }
        let text = row[energy_col].trim();
        let energy: f64 = text.parse().map_err(|_| {
            IoError::invalid(path, &place, format!("energy `{text}` is not a number"))
        })?;
        if !energy.is_finite() || energy < 0.0 {
            return Err(IoError::invalid(
                path,
                &place,
                format!("energy {energy}, expected a finite number ≥ 0"),
            ));
        }
        if let Some(&previous) = energies.last() {
            if energy > previous {
                return Err(IoError::invalid(
                    path,
                    &place,
                    format!(
                        "energy {energy} is larger than the previous mode's {previous}; \
                         expected energies in descending order"
                    ),
                ));
            }
        }
        energies.push(energy);
    }
    if energies.len() < n_modes {
        return Err(IoError::invalid(
            path,
            "rows",
            format!(
                "lists {} energies, expected at least {n_modes} (one per mode in modes.npy)",
                energies.len()
            ),
        ));
    }
    Ok(energies)
}

/// `max |ΦᵀWΦ − I|` with one weight per point applied to each of its channels.
fn orthonormality_defect(modes: MatRef<'_, f64>, point_weights: &[f64], n_channels: usize) -> f64 {
    let weighted = Mat::from_fn(modes.nrows(), modes.ncols(), |dof_idx, mode_idx| {
        point_weights[dof_idx / n_channels] * modes[(dof_idx, mode_idx)]
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::{Grid, PointCloud};

    fn grid(nx: usize, ny: usize, weight: f64) -> Domain {
        Domain::Grid(Grid {
            origin: [0.0, 0.0],
            spacing: [1.0, 1.0],
            nx,
            ny,
            solid: vec![false; nx * ny],
            weight: vec![weight; nx * ny],
        })
    }

    /// Two orthonormal modes under weight 0.25 on a 3 × 2 grid with 2 channels.
    fn sample_modes() -> Mat<f64> {
        // Unit vectors scaled by 1/√w = 2.
        Mat::from_fn(12, 2, |dof_idx, mode_idx| {
            if dof_idx == 3 * mode_idx + 1 {
                2.0
            } else {
                0.0
            }
        })
    }

    #[test]
    fn round_trip_on_a_grid() {
        let dir = tempfile::tempdir().unwrap();
        let domain = grid(3, 2, 0.25);
        let mean: Vec<f64> = (0..12).map(|v| v as f64 * 0.5).collect();
        let modes = sample_modes();
        let energies = [4.0, 1.0, 0.5];
        let files =
            write_basis_files(dir.path(), &domain, 2, &mean, modes.as_ref(), &energies).unwrap();
        assert_eq!(
            read_npy_header(&files.modes).unwrap().shape,
            vec![2, 2, 3, 2]
        );
        assert_eq!(read_npy_header(&files.mean).unwrap().shape, vec![2, 3, 2]);
        let text = std::fs::read_to_string(&files.energies).unwrap();
        assert!(text.starts_with("mode,energy,fraction,cumulative_fraction\n1,4e0,"));
        let loaded = read_basis_files(&files, &domain, 2).unwrap();
        assert!(loaded.warnings.is_empty(), "{:?}", loaded.warnings);
        assert_eq!(loaded.energies, energies.to_vec());
        assert_eq!(loaded.mean, mean);
        assert!((loaded.modes[(4, 1)] - 2.0).abs() < 1e-15);
    }

    #[test]
    fn shape_nan_order_and_orthonormality_are_checked() {
        let dir = tempfile::tempdir().unwrap();
        let domain = grid(3, 2, 0.25);
        let mean = vec![0.0; 12];
        let mut modes = sample_modes();
        let files =
            write_basis_files(dir.path(), &domain, 2, &mean, modes.as_ref(), &[2.0, 1.0]).unwrap();
        // Wrong grid.
        let err = read_basis_files(&files, &grid(2, 3, 0.25), 2).unwrap_err();
        assert!(err.to_string().contains("axis 1 (ny)"), "{err}");
        // Wrong weights: not orthonormal, a warning only.
        let loaded = read_basis_files(&files, &grid(3, 2, 1.0), 2).unwrap();
        assert_eq!(loaded.warnings.len(), 1);
        // NaN names mode, point and channel.
        modes[(7, 1)] = f64::NAN;
        write_basis_files(dir.path(), &domain, 2, &mean, modes.as_ref(), &[2.0, 1.0]).unwrap();
        let err = read_basis_files(&files, &domain, 2)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("mode 1, point 3 (i 0, j 1), channel 1"),
            "{err}"
        );
        // Energies out of order.
        std::fs::write(&files.energies, "mode,energy\n1,1.0\n2,2.0\n").unwrap();
        let err = read_basis_files(&files, &domain, 2)
            .unwrap_err()
            .to_string();
        assert!(err.contains("row 2") && err.contains("descending"), "{err}");
        std::fs::write(&files.energies, "mode,energy\n1,-1.0\n2,-2.0\n").unwrap();
        let err = read_basis_files(&files, &domain, 2)
            .unwrap_err()
            .to_string();
        assert!(err.contains("row 1") && err.contains("≥ 0"), "{err}");
        std::fs::write(&files.energies, "mode,energy\n1,1.0\n").unwrap();
        let err = read_basis_files(&files, &domain, 2)
            .unwrap_err()
            .to_string();
        assert!(err.contains("at least 2"), "{err}");
    }

    #[test]
    fn points_use_n_by_c_shapes() {
        let dir = tempfile::tempdir().unwrap();
        let domain = Domain::Points(PointCloud {
            points: vec![[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]],
            weight: vec![1.0, 1.0, 1.0],
        });
        let modes = Mat::from_fn(3, 1, |dof_idx, _| if dof_idx == 0 { 1.0 } else { 0.0 });
        let files =
            write_basis_files(dir.path(), &domain, 1, &[0.0; 3], modes.as_ref(), &[1.0]).unwrap();
        assert_eq!(read_npy_header(&files.modes).unwrap().shape, vec![1, 3, 1]);
        assert_eq!(read_npy_header(&files.mean).unwrap().shape, vec![3, 1]);
        assert!(read_basis_files(&files, &domain, 1)
            .unwrap()
            .warnings
            .is_empty());
    }
}
