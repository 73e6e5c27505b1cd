//! `sensors` owns the measurement operators: for every candidate mount × allowed sensor kind a
//! [`Block`] — the rows `H_c` that one reading returns in modal coordinates, the mean-field
//! offset, the noise variances `R_c` (diagonal), the cost, and the stencil that reads the same
//! rows from a full field.
//!
//! Entry points: [`build_blocks`] (all blocks of a site, in parallel over candidates, results
//! in candidate order whatever the thread count) and [`beam_traces`] (where each beam of a beam
//! kind goes, for the site map). Point kinds interpolate bilinearly on grids (renormalised over
//! fluid nodes) and by inverse distance on point clouds ([`interp`]); beam kinds read the
//! line-of-sight velocity at range gates with the range-weighting function of a pulsed
//! Doppler lidar ([`beam`], [`weighting`]; Frehlich 1997).
//!
//! It reads no files, prints nothing (findings go to [`BlockSet::warnings`]) and uses only
//! `io` and `basis` types.

pub mod beam;
mod error;
pub mod interp;
pub mod weighting;

use rayon::prelude::*;

pub use beam::{BeamStop, BeamTrace};
pub use error::SensorError;

use crate::basis::Basis;
use crate::io::{Measurement, SensorKind, Site};
use beam::FieldGeometry;
use interp::GridLookup;

/// What one sensor of one kind at one candidate mount reads, in modal coordinates:
/// `reading = offset + h · a + noise`, `a` the modal coefficients, noise ~ N(0, diag(noise_var)).
#[derive(Debug, Clone)]
pub struct Block {
    pub candidate_idx: usize,
    pub kind_idx: usize,
    /// `n_rows × n_modes`: `h[(row, mode)] = Σ_(dof, w) ∈ stencil[row] w · modes[(dof, mode)]`.
    pub h: faer::Mat<f64>,
    /// Per row, the field degrees of freedom it reads and their weights, so a reading can be
    /// taken from a full field (truth) and not only from its modal projection.
    pub stencil: Vec<Vec<(usize, f64)>>,
    /// Mean-field reading of each row.
    pub offset: Vec<f64>,
    /// Noise variance of each row, > 0.
    pub noise_var: Vec<f64>,
    /// Kind cost plus the candidate's mounting cost.
    pub cost: f64,
}

impl Block {
    pub fn n_rows(&self) -> usize {
        self.h.nrows()
    }

    /// The reading without noise that this block takes from a full field (length `n_dof`).
    pub fn read_field(&self, field: &[f64]) -> Vec<f64> {
        self.stencil
            .iter()
            .map(|row| row.iter().map(|&(dof, w)| w * field[dof]).sum())
            .collect()
    }
}

/// All blocks of a site, in candidate order (then in each candidate's kind order), and the
/// non-fatal findings (blocked beams, pairs skipped because they read nothing).
#[derive(Debug, Clone, Default)]
pub struct BlockSet {
    pub blocks: Vec<Block>,
    pub warnings: Vec<String>,
}

/// Margin (grid-node units) outside the outermost nodes within which a mount is clamped to
/// the edge: a cell-centred grid's cells reach half a spacing beyond its nodes.
const MOUNT_MARGIN: f64 = 0.5;

/// One block per candidate × allowed kind. Errors on a basis that does not fit the site, a
/// kind that cannot be read (bad channels, non-positive noise, impossible gates) or a point
/// mount with no fluid node to read; a beam blocked at its first gate is a warning, and a
/// pair with no readable row at all is skipped with a warning.
pub fn build_blocks(site: &Site, basis: &Basis) -> Result<BlockSet, SensorError> {
    check_basis(site, basis)?;
    for kind in &site.kinds {
        check_kind(site, kind)?;
    }
    let geometry = FieldGeometry::new(site);
    let mode_columns: Vec<&[f64]> = (0..basis.n_modes())
        .map(|m| basis.modes.col_as_slice(m))
        .collect();
    let outcomes: Vec<Result<PairOutcome, SensorError>> = site
        .candidates
        .par_iter()
        .enumerate()
        .flat_map_iter(|(candidate_idx, candidate)| {
            let geometry = &geometry;
            let mode_columns = &mode_columns;
            candidate.kind_idx.iter().map(move |&kind_idx| {
                build_pair(geometry, basis, mode_columns, candidate_idx, kind_idx)
            })
        })
        .collect();
    let mut set = BlockSet::default();
    set.blocks.reserve(outcomes.len());
    for outcome in outcomes {
        let outcome = outcome?;
        set.warnings.extend(outcome.warnings);
        set.blocks.extend(outcome.block);
    }
    Ok(set)
}

/// Where each beam of kind `kind_idx` mounted at candidate `candidate_idx` goes. Empty for a
/// kind that has no beams. Panics on an index outside the site (a broken caller contract).
#[track_caller]
pub fn beam_traces(site: &Site, candidate_idx: usize, kind_idx: usize) -> Vec<BeamTrace> {
    let candidate = &site.candidates[candidate_idx];
    let Measurement::Beam(pattern) = &site.kinds[kind_idx].measurement else {
        return Vec::new();
    };
    let geometry = FieldGeometry::new(site);
    (0..pattern.beams.len())
        .map(|beam_idx| beam::trace_beam(&geometry, candidate, pattern, beam_idx).1)
        .collect()
}

/// The block of one (candidate, kind) pair, or `None` with warnings when it reads nothing.
struct PairOutcome {
    block: Option<Block>,
    warnings: Vec<String>,
}

fn check_basis(site: &Site, basis: &Basis) -> Result<(), SensorError> {
    let checks = [
        ("basis point count", basis.n_points, site.n_points()),
        ("basis channel count", basis.n_channels, site.n_channels()),
        (
            "number of rows of the modes",
            basis.modes.nrows(),
            site.n_dof(),
        ),
        ("length of the mean field", basis.mean.len(), site.n_dof()),
    ];
    for (what, found, expected) in checks {
        if found != expected {
            return Err(SensorError::BasisMismatch {
                what,
                found,
                expected,
            });
        }
    }
    Ok(())
}

fn check_kind(site: &Site, kind: &SensorKind) -> Result<(), SensorError> {
    if !(kind.noise_sd.is_finite() && kind.noise_sd > 0.0) {
        return Err(SensorError::BadNoise {
            kind: kind.name.clone(),
            noise_sd: kind.noise_sd,
        });
    }
    let bad_channels = |message: String| SensorError::BadChannels {
        kind: kind.name.clone(),
        message,
    };
    let n_channels = site.n_channels();
    match &kind.measurement {
        Measurement::Point { channel_idx } => {
            if channel_idx.is_empty() {
                return Err(bad_channels(
                    "a point kind reads at least one channel, found none".into(),
                ));
            }
            if let Some(&c) = channel_idx.iter().find(|&&c| c >= n_channels) {
                return Err(bad_channels(format!(
                    "channel index {c}, the site has {n_channels} channels"
                )));
            }
        }
        Measurement::Scalar { channel_idx } => {
            if *channel_idx >= n_channels {
                return Err(bad_channels(format!(
                    "channel index {channel_idx}, the site has {n_channels} channels"
                )));
            }
        }
        Measurement::Beam(pattern) => {
            let [u, v, w] = beam::velocity_channels(site);
            let (needed, second) = match site.plane {
                crate::io::Plane::Xy => (v, "velocity-y"),
                crate::io::Plane::Xz => (w, "velocity-z"),
            };
            if u.is_none() || needed.is_none() {
                return Err(bad_channels(format!(
                    "a beam (line-of-sight) kind needs channels with roles velocity-x and {second} \
                     in this plane; the site has {}",
                    site.channels.iter().map(|c| c.name.as_str()).collect::<Vec<_>>().join(", ")
                )));
            }
            let bad_beam = |message: String| SensorError::BadBeam {
                kind: kind.name.clone(),
                message,
            };
            if pattern.beams.is_empty() {
                return Err(bad_beam("a beam kind needs at least one beam".into()));
            }
            if pattern.n_gates == 0 {
                return Err(bad_beam("n_gates is 0, expected at least 1".into()));
            }
            for (name, value) in [
                ("first_gate", pattern.first_gate),
                ("gate_spacing", pattern.gate_spacing),
                ("gate_length", pattern.gate_length),
                ("pulse_width", pattern.pulse_width),
            ] {
                if !(value.is_finite() && value >= 0.0) {
                    return Err(bad_beam(format!(
                        "{name} is {value}, expected a finite value >= 0 m"
                    )));
                }
            }
            if pattern.n_gates > 1 && pattern.gate_spacing <= 0.0 {
                return Err(bad_beam(format!(
                    "gate_spacing is {}, expected > 0 m with {} gates",
                    pattern.gate_spacing, pattern.n_gates
                )));
            }
            for (beam_idx, b) in pattern.beams.iter().enumerate() {
                if !(b.azimuth_deg.is_finite() && b.elevation_deg.is_finite()) {
                    return Err(bad_beam(format!("beam {beam_idx} has a non-finite angle")));
                }
            }
        }
    }
    Ok(())
}

fn build_pair(
    geometry: &FieldGeometry,
    basis: &Basis,
    mode_columns: &[&[f64]],
    candidate_idx: usize,
    kind_idx: usize,
) -> Result<PairOutcome, SensorError> {
    let site = geometry.site;
    let candidate = &site.candidates[candidate_idx];
    let Some(kind) = site.kinds.get(kind_idx) else {
        return Err(SensorError::BadKindIndex {
            candidate: candidate.id.clone(),
            kind_idx,
            n_kinds: site.kinds.len(),
        });
    };
    let n_channels = site.n_channels();
    let mut warnings = Vec::new();
    let stencil: Vec<Vec<(usize, f64)>> = match &kind.measurement {
        Measurement::Point { channel_idx } => {
            point_rows(geometry, candidate_idx, kind, channel_idx, n_channels)?
        }
        Measurement::Scalar { channel_idx } => point_rows(
            geometry,
            candidate_idx,
            kind,
            std::slice::from_ref(channel_idx),
            n_channels,
        )?,
        Measurement::Beam(pattern) => {
            let channels = beam::velocity_channels(site);
            let mut rows = Vec::new();
            for beam_idx in 0..pattern.beams.len() {
                let (ray, trace) = beam::trace_beam(geometry, candidate, pattern, beam_idx);
                if trace.gate_ranges.is_empty() {
                    warnings.push(format!(
                        "candidate '{}', kind '{}', beam {beam_idx} (azimuth {}°, elevation {}°): \
                         blocked before its first gate ({} at {:.1} m; the first gate window reaches \
                         {:.1} m); this beam gives no readings",
                        candidate.id,
                        kind.name,
                        trace.azimuth_deg,
                        trace.elevation_deg,
                        trace.stop,
                        trace.end_range,
                        beam::gate_range(pattern, 0)
                            + weighting::window_half_width(pattern.gate_length, pattern.pulse_width),
                    ));
                }
                for &centre in &trace.gate_ranges {
                    rows.push(beam::gate_stencil(
                        geometry, &ray, pattern, centre, channels,
                    ));
                }
            }
            rows
        }
    };
    if stencil.is_empty() {
        warnings.push(format!(
            "candidate '{}', kind '{}': no beam gives a reading here; the pair is left out of the \
             selection",
            candidate.id, kind.name
        ));
        return Ok(PairOutcome {
            block: None,
            warnings,
        });
    }
    let n_rows = stencil.len();
    let mut h = faer::Mat::<f64>::zeros(n_rows, mode_columns.len());
    for (mode_idx, column) in mode_columns.iter().enumerate() {
        let h_column = h.col_as_slice_mut(mode_idx);
        for (row, entries) in stencil.iter().enumerate() {
            h_column[row] = entries.iter().map(|&(dof, w)| w * column[dof]).sum();
        }
    }
    let offset = stencil
        .iter()
        .map(|entries| entries.iter().map(|&(dof, w)| w * basis.mean[dof]).sum())
        .collect();
    let block = Block {
        candidate_idx,
        kind_idx,
        h,
        stencil,
        offset,
        noise_var: vec![kind.noise_sd * kind.noise_sd; n_rows],
        cost: kind.cost + candidate.mount_cost,
    };
    Ok(PairOutcome {
        block: Some(block),
        warnings,
    })
}

/// One row per channel read at the candidate's position.
fn point_rows(
    geometry: &FieldGeometry,
    candidate_idx: usize,
    kind: &SensorKind,
    channel_idx: &[usize],
    n_channels: usize,
) -> Result<Vec<Vec<(usize, f64)>>, SensorError> {
    let candidate = &geometry.site.candidates[candidate_idx];
    let p = candidate.position;
    let nodes = geometry
        .locate(p, MOUNT_MARGIN)
        .map_err(|lookup| match lookup {
            GridLookup::NoFluid => SensorError::NoFluidNeighbour {
                candidate: candidate.id.clone(),
                kind: kind.name.clone(),
                x: p[0],
                y: p[1],
            },
            _ => SensorError::OutsideDomain {
                candidate: candidate.id.clone(),
                kind: kind.name.clone(),
                x: p[0],
                y: p[1],
                detail: format!(
                    "spanned by the grid nodes [{}, {}] × [{}, {}] (plus half a cell)",
                    geometry.bbox[0][0],
                    geometry.bbox[1][0],
                    geometry.bbox[0][1],
                    geometry.bbox[1][1]
                ),
            },
        })?;
    Ok(channel_idx
        .iter()
        .map(|&c| {
            nodes
                .iter()
                .map(|(point_idx, w)| (point_idx * n_channels + c, w))
                .collect()
        })
        .collect())
}
