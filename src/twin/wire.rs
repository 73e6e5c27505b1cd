//! Builds the plain-matrix [`TwinCase`] of a layout from the pipeline's types: the `Site`
//! (time step, kinds), the `Basis` and its `Projection` (truth coefficients and truncation
//! residuals), the layout's sensor `Block`s, and the truth readings of the **full** field taken
//! through each block's stencil, read once per layout from an `io::SnapshotSource` in time
//! chunks. Also resolves a layout file's (candidate id, kind name) rows against the site.
//! Reads snapshots only through `SnapshotSource`; opens no files itself.

use crate::basis::{Basis, Projection};
use crate::io::{LayoutRow, Site, SnapshotSource};
use crate::sensors::Block;

use super::montecarlo::{layout_id, prepare, run_monte_carlo, ScoreResult, TwinCase};
use super::schedule::SensorRows;
use super::{TwinError, TwinSettings};

/// Values read per chunk of the truth pass (32 MiB of f64).
const CHUNK_VALUES: usize = 4 << 20;

/// The blocks of the layout's kept rows, in file order. Unknown candidate ids or kind names,
/// and kinds not allowed (or unreadable) at a candidate, are errors naming the row.
pub fn layout_blocks(
    site: &Site,
    blocks: &[Block],
    rows: &[LayoutRow],
) -> Result<Vec<Block>, TwinError> {
    let mut out = Vec::new();
    for (row_idx, row) in rows.iter().enumerate().filter(|(_, r)| r.kept) {
        let row_no = row_idx + 1;
        let candidate_idx = site
            .candidates
            .iter()
            .position(|c| c.id == row.candidate)
            .ok_or_else(|| TwinError::BadLayout {
                row: row_no,
                message: format!(
                    "unknown candidate `{}`; the site has {}",
                    row.candidate,
                    list(site.candidates.iter().map(|c| c.id.as_str()))
                ),
            })?;
        let kind_idx = site
            .kinds
            .iter()
            .position(|k| k.name == row.kind)
            .ok_or_else(|| TwinError::BadLayout {
                row: row_no,
                message: format!(
                    "unknown sensor kind `{}`; the site has {}",
                    row.kind,
                    list(site.kinds.iter().map(|k| k.name.as_str()))
                ),
            })?;
        let block = blocks
            .iter()
            .find(|b| b.candidate_idx == candidate_idx && b.kind_idx == kind_idx)
            .ok_or_else(|| {
                let allowed = site.candidates[candidate_idx].kind_idx.contains(&kind_idx);
                TwinError::BadLayout {
                    row: row_no,
                    message: if allowed {
                        format!(
                            "kind `{}` at candidate `{}` reads nothing (see the sensors warnings)",
                            row.kind, row.candidate
                        )
                    } else {
                        format!(
                            "kind `{}` is not allowed at candidate `{}`; allowed: {}",
                            row.kind,
                            row.candidate,
                            list(
                                site.candidates[candidate_idx]
                                    .kind_idx
                                    .iter()
                                    .map(|&k| site.kinds[k].name.as_str())
                            )
                        )
                    },
                }
            })?;
        out.push(block.clone());
    }
    if out.is_empty() {
        return Err(TwinError::BadLayout {
            row: 0,
            message: "the layout has no kept sensor to score".into(),
        });
    }
    Ok(out)
}

/// The seed id of a layout's blocks on `site` ([`layout_id`] of their candidate and kind names).
pub fn layout_id_of(site: &Site, blocks: &[Block]) -> String {
    layout_id(blocks.iter().map(|b| {
        (
            site.candidates[b.candidate_idx].id.as_str(),
            site.kinds[b.kind_idx].name.as_str(),
        )
    }))
}

fn list<'a>(names: impl Iterator<Item = &'a str>) -> String {
    let v: Vec<&str> = names.collect();
    if v.is_empty() {
        "none".into()
    } else {
        v.join(", ")
    }
}

/// Noise-free readings of every snapshot of `source` through the stencils of `blocks`,
/// row-major `n_snapshots × n_rows` (rows stacked in block order).
pub fn truth_readings(
    source: &mut dyn SnapshotSource,
    blocks: &[Block],
) -> Result<Vec<f64>, TwinError> {
    let stencils: Vec<&Vec<(usize, f64)>> = blocks.iter().flat_map(|b| b.stencil.iter()).collect();
    let n_rows = stencils.len();
    let n_snapshots = source.n_snapshots();
    let dofs = stencils.iter().flat_map(|s| s.iter().map(|&(d, _)| d));
    let (lo, hi) = dofs.fold((usize::MAX, 0), |(lo, hi), d| (lo.min(d), hi.max(d + 1)));
    let mut out = vec![0.0; n_snapshots * n_rows];
    if lo >= hi {
        return Ok(out);
    }
    let width = hi - lo;
    let chunk = (CHUNK_VALUES / width).max(1);
    let mut buf = Vec::new();
    let mut start = 0;
    while start < n_snapshots {
        let end = (start + chunk).min(n_snapshots);
        buf.resize((end - start) * width, 0.0);
        source.read_block(start..end, lo..hi, &mut buf)?;
        for t in start..end {
            let field = &buf[(t - start) * width..(t - start + 1) * width];
            for (row, stencil) in stencils.iter().enumerate() {
                out[t * n_rows + row] = stencil.iter().map(|&(d, w)| w * field[d - lo]).sum();
            }
        }
        start = end;
    }
    Ok(out)
}

/// The twin case of a layout: `projection` must come from `basis` on the same `source`.
pub fn case_from_site(
    site: &Site,
    basis: &Basis,
    projection: &Projection,
    source: &mut dyn SnapshotSource,
    blocks: &[Block],
) -> Result<TwinCase, TwinError> {
    let dt_s = match &site.flow {
        crate::io::FlowSource::Snapshots(files) => files.dt,
        crate::io::FlowSource::Basis(_) => return Err(TwinError::NoSnapshots),
    };
    assert_eq!(
        projection.coeffs.nrows(),
        source.n_snapshots(),
        "projection and snapshot source differ"
    );
    assert_eq!(
        projection.coeffs.ncols(),
        basis.n_modes(),
        "projection and basis differ"
    );
    let n_modes = basis.n_modes();
    let n_rows: usize = blocks.iter().map(Block::n_rows).sum();
    let mut h = faer::Mat::<f64>::zeros(n_rows, n_modes);
    let (mut offset, mut noise_sd, mut interval_s, mut kind_name) =
        (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    let mut row = 0;
    for block in blocks {
        let kind = &site.kinds[block.kind_idx];
        for r in 0..block.n_rows() {
            for j in 0..n_modes {
                h[(row, j)] = block.h[(r, j)];
            }
            offset.push(block.offset[r]);
            noise_sd.push(block.noise_var[r].sqrt());
            interval_s.push(kind.interval);
            kind_name.push(kind.name.clone());
            row += 1;
        }
    }
    let truth = truth_readings(source, blocks)?;
    Ok(TwinCase {
        coeffs: projection.coeffs.clone(),
        residual_sq: projection.residual_sq.clone(),
        truth_readings: truth,
        rows: SensorRows::new(h, offset, noise_sd, interval_s, kind_name),
        energies: basis.energies[..n_modes].to_vec(),
        field_norm: basis.weights.iter().sum::<f64>() * basis.n_channels as f64,
        dt_s,
    })
}

/// Scores one layout: builds its case, fits the model and runs the Monte Carlo.
#[allow(clippy::too_many_arguments)]
pub fn score_layout(
    site: &Site,
    basis: &Basis,
    projection: &Projection,
    source: &mut dyn SnapshotSource,
    blocks: &[Block],
    layout_id: &str,
    settings: &TwinSettings,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<ScoreResult, TwinError> {
    let case = case_from_site(site, basis, projection, source, blocks)?;
    let prepared = prepare(case, layout_id, &settings.model)?;
    run_monte_carlo(&prepared, &settings.run, progress)
}
