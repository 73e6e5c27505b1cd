//! `sensors` owns the measurement operators: for every candidate mount × allowed sensor kind a
//! [`Block`] — the rows `H_c` that one reading returns in modal coordinates, the mean-field
//! offset, the noise variances `R_c` (diagonal), the cost, and the stencil that reads the same
//! rows from a full field.
//!
//! Entry points: [`build_blocks`] (all blocks of a site, in parallel over candidates, results
//! in candidate order whatever the thread count), [`build_packed`] (the same blocks in flat
//! arrays, for a million candidates) and [`beam_traces`] (where each beam of a beam
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
mod packed;
pub mod weighting;

use rayon::prelude::*;

pub use beam::{BeamStop, BeamTrace};
pub use error::SensorError;
pub use packed::{build_packed, PackedBlocks};

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
            .map(|row| apply_row(row, field))
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
    let mode_rows = ModeRows::new(basis);
    let outcomes: Vec<Result<PairOutcome, SensorError>> = site
        .candidates
        .par_iter()
        .enumerate()
        .flat_map_iter(|(candidate_idx, candidate)| {
            let geometry = &geometry;
            let mode_rows = &mode_rows;
            candidate.kind_idx.iter().map(move |&kind_idx| {
                build_pair(geometry, basis, mode_rows, candidate_idx, kind_idx)
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

pub(crate) fn check_basis(site: &Site, basis: &Basis) -> Result<(), SensorError> {
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

pub(crate) fn check_kind(site: &Site, kind: &SensorKind) -> Result<(), SensorError> {
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

/// Reading rows of one or more pairs, flat: row `r` is `entries[ends[r - 1]..ends[r]]`.
#[derive(Debug, Default)]
pub(crate) struct RowBuffer {
    pub entries: Vec<(usize, f64)>,
    pub ends: Vec<usize>,
}

impl RowBuffer {
    pub fn n_rows(&self) -> usize {
        self.ends.len()
    }

    pub fn row(&self, row: usize) -> &[(usize, f64)] {
        let start = if row == 0 { 0 } else { self.ends[row - 1] };
        &self.entries[start..self.ends[row]]
    }

    fn push_row(&mut self, entries: impl IntoIterator<Item = (usize, f64)>) {
        self.entries.extend(entries);
        self.ends.push(self.entries.len());
    }

    pub fn clear(&mut self) {
        self.entries.clear();
        self.ends.clear();
    }
}

/// `Σ w·values[dof]` over a stencil row, in stencil order (shared by every path so `h`,
/// `offset` and readings agree to the bit).
pub(crate) fn apply_row(entries: &[(usize, f64)], values: &[f64]) -> f64 {
    entries
        .iter()
        .fold(0.0, |acc, &(dof, w)| acc + w * values[dof])
}

/// The modes as rows (`n_dof × n_modes`, row-major): a reading row touches a few dofs, and
/// each dof's modes then lie in one cache line or two instead of `n_modes` columns apart.
/// Costs one more copy of the modes while blocks are built.
pub(crate) struct ModeRows {
    n_modes: usize,
    data: Vec<f64>,
}

impl ModeRows {
    pub fn new(basis: &Basis) -> Self {
        // 256 dofs × 50 modes × 8 B = 100 kB: the block being written stays in L2 across modes.
        const DOF_CHUNK: usize = 256;
        let n_modes = basis.n_modes();
        let mut data = vec![0.0; basis.modes.nrows() * n_modes];
        if n_modes > 0 {
            data.par_chunks_mut(DOF_CHUNK * n_modes)
                .enumerate()
                .for_each(|(chunk_idx, out)| {
                    let first = chunk_idx * DOF_CHUNK;
                    for mode_idx in 0..n_modes {
                        let column = basis.modes.col_as_slice(mode_idx);
                        for (k, row) in out.chunks_exact_mut(n_modes).enumerate() {
                            row[mode_idx] = column[first + k];
                        }
                    }
                });
        }
        ModeRows { n_modes, data }
    }

    pub fn n_modes(&self) -> usize {
        self.n_modes
    }

    /// `out[m] = Σ w·modes[dof, m]` over the stencil row, summed in stencil order (the same
    /// operations as [`apply_row`] on each mode column).
    pub fn apply(&self, entries: &[(usize, f64)], out: &mut [f64]) {
        out.fill(0.0);
        for &(dof, w) in entries {
            let modes = &self.data[dof * self.n_modes..(dof + 1) * self.n_modes];
            for (o, m) in out.iter_mut().zip(modes) {
                *o += w * m;
            }
        }
    }
}

/// Appends the rows of one (candidate, kind) pair to `rows` and returns its kind; warnings
/// for blocked beams, and for a pair that reads nothing, go to `warnings`.
pub(crate) fn pair_rows<'s>(
    geometry: &FieldGeometry<'s>,
    candidate_idx: usize,
    kind_idx: usize,
    rows: &mut RowBuffer,
    warnings: &mut Vec<String>,
) -> Result<&'s SensorKind, SensorError> {
    let site = geometry.site;
    let candidate = &site.candidates[candidate_idx];
    let Some(kind) = site.kinds.get(kind_idx) else {
        return Err(SensorError::BadKindIndex {
            candidate: candidate.id.clone(),
            kind_idx,
            n_kinds: site.kinds.len(),
        });
    };
    let n_rows_before = rows.n_rows();
    match &kind.measurement {
        Measurement::Point { channel_idx } => {
            point_rows(geometry, candidate_idx, kind, channel_idx, rows)?
        }
        Measurement::Scalar { channel_idx } => point_rows(
            geometry,
            candidate_idx,
            kind,
            std::slice::from_ref(channel_idx),
            rows,
        )?,
        Measurement::Beam(pattern) => {
            let channels = beam::velocity_channels(site);
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
                    rows.push_row(beam::gate_stencil(
                        geometry, &ray, pattern, centre, channels,
                    ));
                }
            }
        }
    }
    if rows.n_rows() == n_rows_before {
        warnings.push(format!(
            "candidate '{}', kind '{}': no beam gives a reading here; the pair is left out of the \
             selection",
            candidate.id, kind.name
        ));
    }
    Ok(kind)
}

fn build_pair(
    geometry: &FieldGeometry,
    basis: &Basis,
    mode_rows: &ModeRows,
    candidate_idx: usize,
    kind_idx: usize,
) -> Result<PairOutcome, SensorError> {
    let mut rows = RowBuffer::default();
    let mut warnings = Vec::new();
    let kind = pair_rows(geometry, candidate_idx, kind_idx, &mut rows, &mut warnings)?;
    let n_rows = rows.n_rows();
    if n_rows == 0 {
        return Ok(PairOutcome {
            block: None,
            warnings,
        });
    }
    let n_modes = mode_rows.n_modes();
    let mut h_row = vec![0.0; n_modes];
    let mut h = faer::Mat::<f64>::zeros(n_rows, n_modes);
    for row in 0..n_rows {
        mode_rows.apply(rows.row(row), &mut h_row);
        for (mode_idx, &value) in h_row.iter().enumerate() {
            h.col_as_slice_mut(mode_idx)[row] = value;
        }
    }
    let block = Block {
        candidate_idx,
        kind_idx,
        h,
        stencil: (0..n_rows).map(|row| rows.row(row).to_vec()).collect(),
        offset: (0..n_rows)
            .map(|row| apply_row(rows.row(row), &basis.mean))
            .collect(),
        noise_var: vec![kind.noise_sd * kind.noise_sd; n_rows],
        cost: kind.cost + geometry.site.candidates[candidate_idx].mount_cost,
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
    rows: &mut RowBuffer,
) -> Result<(), SensorError> {
    let n_channels = geometry.site.n_channels();
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
    for &c in channel_idx {
        rows.push_row(
            nodes
                .iter()
                .map(|(point_idx, w)| (point_idx * n_channels + c, w)),
        );
    }
    Ok(())
}
