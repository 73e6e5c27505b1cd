//! Beam kinds (pulsed Doppler lidar): the line of sight of every fixed beam, where it stops
//! (first solid cell, first obstacle crossing, domain edge), which range gates survive, and
//! the stencil of each gate reading.
//!
//! Conventions (also in `docs/formats.md`): azimuth clockwise from north (+y), plus the
//! candidate's heading; elevation above the horizon; the line-of-sight velocity
//! `v_r = u sin(az) cos(el) + v cos(az) cos(el) + w sin(el)` is positive away from the
//! instrument (common practice for Doppler wind lidar). In plan view the beam's horizontal
//! projection runs in the plane, `cos(el)` metres per metre of range; in a vertical slice the
//! beam moves `(sin(az) cos(el), sin(el))` in `(x, z)` per metre of range (az 90° = +x). A
//! velocity channel the site does not have contributes nothing (plan view without `w`, slices
//! without the cross-slice `v`).
//!
//! A gate centred at range `R` reads the window `[R − L/2 − 3σ, R + L/2 + 3σ]` (clipped at the
//! instrument), weighted by the range-weighting function of [`super::weighting`] and integrated
//! exactly over sub-intervals whose midpoints are interpolated in the field. A gate whose
//! window reaches past the point where the beam stops is **dropped**, not renormalised: a hard
//! target inside a gate swamps its Doppler signal, so such a reading would not exist. Since
//! windows end further out gate by gate, the kept gates are always the first ones.
//!
//! No IO and no threads; the caller parallelises over candidates.

use std::sync::OnceLock;

use super::interp::{self, CloudIndex, GridLookup, NodeWeights};
use super::weighting;
use crate::io::{BeamPattern, Candidate, ChannelRole, Domain, Plane, PlanePoint, Site};

/// Why a beam ended where it did.
#[derive(Debug, Clone, PartialEq)]
pub enum BeamStop {
    /// The beam reached the end of its last gate window unobstructed.
    Clear,
    /// It left the domain the field is known on.
    DomainEdge,
    /// It entered a solid grid cell (or, on a point cloud, a gap with no field points).
    Solid,
    /// It crossed the outline of the named obstacle.
    Obstacle { name: String },
}

impl std::fmt::Display for BeamStop {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            BeamStop::Clear => write!(f, "unobstructed"),
            BeamStop::DomainEdge => write!(f, "domain edge"),
            BeamStop::Solid => write!(f, "solid cell"),
            BeamStop::Obstacle { name } => write!(f, "obstacle '{name}'"),
        }
    }
}

/// Where one beam of a beam kind mounted at a candidate goes, for maps and diagnostics.
#[derive(Debug, Clone)]
pub struct BeamTrace {
    /// Index into the kind's `beams`.
    pub beam_idx: usize,
    /// Azimuth including the candidate's heading, degrees clockwise from north.
    pub azimuth_deg: f64,
    pub elevation_deg: f64,
    pub origin: PlanePoint,
    /// Plane position where the beam stopped (or the end of its last gate window).
    pub end: PlanePoint,
    /// Along-beam range (m) of `end`.
    pub end_range: f64,
    pub stop: BeamStop,
    /// Along-beam ranges (m) of the gate centres kept.
    pub gate_ranges: Vec<f64>,
    /// Plane positions of the gate centres kept.
    pub gate_centres: Vec<PlanePoint>,
}

/// Geometry of the field shared by every candidate: grid or cloud lookup, domain bounds.
pub(crate) struct FieldGeometry<'a> {
    pub site: &'a Site,
    pub cloud_index: Option<CloudIndex>,
    /// Typical spacing of cloud points (m), computed on first need (beams on clouds only).
    cloud_spacing: OnceLock<f64>,
    /// `[min, max]` of the region readings can be interpolated in.
    pub bbox: [PlanePoint; 2],
}

impl<'a> FieldGeometry<'a> {
    pub fn new(site: &'a Site) -> Self {
        let cloud_index = match &site.domain {
            Domain::Grid(_) => None,
            Domain::Points(c) => Some(CloudIndex::new(&c.points)),
        };
        let (lo, hi) = site.domain.extent();
        let bbox = [lo, hi];
        FieldGeometry {
            site,
            cloud_index,
            cloud_spacing: OnceLock::new(),
            bbox,
        }
    }

    /// Smallest distance (m) between field points along an axis: the sampling scale.
    pub fn sample_scale(&self) -> f64 {
        match &self.site.domain {
            Domain::Grid(g) => g.spacing[0].min(g.spacing[1]),
            Domain::Points(c) => *self.cloud_spacing.get_or_init(|| {
                self.cloud_index
                    .as_ref()
                    .map_or(1.0, |index| index.typical_spacing(&c.points))
            }),
        }
    }

    /// Interpolation weights at `p`; `None` where no fluid field point can be used.
    /// `margin` is in grid-node units (ignored on clouds).
    pub fn locate(&self, p: PlanePoint, margin: f64) -> Result<NodeWeights, GridLookup> {
        match &self.site.domain {
            Domain::Grid(g) => match interp::bilinear(g, p, margin) {
                GridLookup::Inside(w) => Ok(w),
                other => Err(other),
            },
            Domain::Points(c) => {
                let index = self
                    .cloud_index
                    .as_ref()
                    .expect("cloud index built for point clouds");
                let extent =
                    (self.bbox[1][0] - self.bbox[0][0]).max(self.bbox[1][1] - self.bbox[0][1]);
                Ok(interp::inverse_distance(
                    c,
                    index,
                    p,
                    1e-9 * extent.max(1.0),
                ))
            }
        }
    }

    /// Is `p` in a place the field does not cover (solid cell, or a gap in a point cloud)?
    fn blocked_at(&self, p: PlanePoint) -> bool {
        match &self.site.domain {
            Domain::Grid(g) => interp::in_solid_cell(g, p).unwrap_or(true),
            Domain::Points(c) => {
                let index = self
                    .cloud_index
                    .as_ref()
                    .expect("cloud index built for point clouds");
                let gap = 2.0 * self.sample_scale();
                index.nearest(&c.points, p, 1).0[0].1 > gap * gap
            }
        }
    }
}

/// `(sin, cos)` of an angle in degrees, exact at multiples of 90° so that, for instance, a
/// beam at azimuth 90° has no `v` coefficient at all.
pub fn sin_cos_deg(deg: f64) -> (f64, f64) {
    let turn = deg.rem_euclid(360.0);
    let quarter = turn / 90.0;
    if (quarter - quarter.round()).abs() < 1e-12 {
        match (quarter.round() as i64) % 4 {
            0 => (0.0, 1.0),
            1 => (1.0, 0.0),
            2 => (0.0, -1.0),
            _ => (-1.0, 0.0),
        }
    } else {
        turn.to_radians().sin_cos()
    }
}

/// A beam in the plane: position `origin + r·step` at range `r`, and the line-of-sight
/// coefficients of `(u, v, w)`.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Ray {
    pub origin: PlanePoint,
    pub step: [f64; 2],
    pub los: [f64; 3],
    pub azimuth_deg: f64,
    pub elevation_deg: f64,
}

impl Ray {
    pub fn new(plane: Plane, origin: PlanePoint, azimuth_deg: f64, elevation_deg: f64) -> Self {
        let (sin_az, cos_az) = sin_cos_deg(azimuth_deg);
        let (sin_el, cos_el) = sin_cos_deg(elevation_deg);
        let los = [sin_az * cos_el, cos_az * cos_el, sin_el];
        let step = match plane {
            Plane::Xy => [sin_az * cos_el, cos_az * cos_el],
            Plane::Xz => [sin_az * cos_el, sin_el],
        };
        Ray {
            origin,
            step,
            los,
            azimuth_deg,
            elevation_deg,
        }
    }

    pub fn at(&self, range: f64) -> PlanePoint {
        [
            self.origin[0] + range * self.step[0],
            self.origin[1] + range * self.step[1],
        ]
    }

    /// Plane distance travelled per metre of range.
    fn speed(&self) -> f64 {
        self.step[0].hypot(self.step[1])
    }
}

/// Range (m) at which the ray first crosses a polygon edge, beyond a tiny offset so a mount on
/// a wall does not block itself; `None` if it never does within `max_range`.
fn first_crossing(ray: &Ray, vertices: &[PlanePoint], max_range: f64) -> Option<f64> {
    let cross = |a: [f64; 2], b: [f64; 2]| a[0] * b[1] - a[1] * b[0];
    let mut best: Option<f64> = None;
    let eps = 1e-9 * (1.0 + max_range);
    for k in 0..vertices.len() {
        let p = vertices[k];
        let q = vertices[(k + 1) % vertices.len()];
        let edge = [q[0] - p[0], q[1] - p[1]];
        let denom = cross(ray.step, edge);
        if denom.abs() < 1e-14 * (1.0 + edge[0].abs() + edge[1].abs()) {
            continue; // parallel: a grazing beam is not blocked
        }
        let to_p = [p[0] - ray.origin[0], p[1] - ray.origin[1]];
        let range = cross(to_p, edge) / denom;
        let along_edge = cross(to_p, ray.step) / denom;
        if range > eps && range <= max_range && (-1e-12..=1.0 + 1e-12).contains(&along_edge) {
            best = Some(best.map_or(range, |b: f64| b.min(range)));
        }
    }
    best
}

/// How far (m of range) the ray gets within `max_range`, and why it stopped.
pub(crate) fn trace(geometry: &FieldGeometry, ray: &Ray, max_range: f64) -> (f64, BeamStop) {
    let speed = ray.speed();
    if speed < 1e-12 {
        return (max_range, BeamStop::Clear); // vertical beam in plan view stays on its mount
    }
    let mut stop = (max_range, BeamStop::Clear);
    let [lo, hi] = geometry.bbox;
    for axis in 0..2 {
        let d = ray.step[axis];
        if d.abs() > 1e-15 {
            let bound = if d > 0.0 { hi[axis] } else { lo[axis] };
            let range = ((bound - ray.origin[axis]) / d).max(0.0);
            if range < stop.0 {
                stop = (range, BeamStop::DomainEdge);
            }
        }
    }
    for obstacle in &geometry.site.obstacles {
        if let Some(range) = first_crossing(ray, &obstacle.polygon.vertices, stop.0) {
            if range < stop.0 {
                stop = (
                    range,
                    BeamStop::Obstacle {
                        name: obstacle.name.clone(),
                    },
                );
            }
        }
    }
    // March in quarter-spacing steps for solid cells, then bisect the first crossing.
    let delta = 0.25 * geometry.sample_scale() / speed;
    let mut free = 0.0;
    while free < stop.0 {
        let next = (free + delta).min(stop.0);
        if geometry.blocked_at(ray.at(next)) {
            let mut hit = next;
            for _ in 0..40 {
                let mid = 0.5 * (free + hit);
                if geometry.blocked_at(ray.at(mid)) {
                    hit = mid;
                } else {
                    free = mid;
                }
            }
            return (free, BeamStop::Solid);
        }
        free = next;
    }
    stop
}

/// Range (m) of gate `gate_idx`'s centre.
pub fn gate_range(pattern: &BeamPattern, gate_idx: usize) -> f64 {
    pattern.first_gate + gate_idx as f64 * pattern.gate_spacing
}

/// Farthest range (m) the last gate window reaches.
fn max_range(pattern: &BeamPattern) -> f64 {
    gate_range(pattern, pattern.n_gates.saturating_sub(1))
        + weighting::window_half_width(pattern.gate_length, pattern.pulse_width)
}

/// Number of leading gates whose whole window lies before `stop_range`.
fn n_gates_kept(pattern: &BeamPattern, stop_range: f64) -> usize {
    let half = weighting::window_half_width(pattern.gate_length, pattern.pulse_width);
    let tol = 1e-9 * (1.0 + stop_range);
    (0..pattern.n_gates)
        .take_while(|&g| gate_range(pattern, g) + half <= stop_range + tol)
        .count()
}

/// The ray of beam `beam_idx` of `pattern` mounted at `candidate`.
pub(crate) fn beam_ray(
    site: &Site,
    candidate: &Candidate,
    pattern: &BeamPattern,
    beam_idx: usize,
) -> Ray {
    let beam = pattern.beams[beam_idx];
    Ray::new(
        site.plane,
        candidate.position,
        beam.azimuth_deg + candidate.heading_deg,
        beam.elevation_deg,
    )
}

/// Traces one beam: stop point, reason and kept gates.
pub(crate) fn trace_beam(
    geometry: &FieldGeometry,
    candidate: &Candidate,
    pattern: &BeamPattern,
    beam_idx: usize,
) -> (Ray, BeamTrace) {
    let ray = beam_ray(geometry.site, candidate, pattern, beam_idx);
    let (end_range, stop) = trace(geometry, &ray, max_range(pattern));
    let n_kept = n_gates_kept(pattern, end_range);
    let gate_ranges: Vec<f64> = (0..n_kept).map(|g| gate_range(pattern, g)).collect();
    let trace = BeamTrace {
        beam_idx,
        azimuth_deg: ray.azimuth_deg,
        elevation_deg: ray.elevation_deg,
        origin: ray.origin,
        end: ray.at(end_range),
        end_range,
        stop,
        gate_centres: gate_ranges.iter().map(|&r| ray.at(r)).collect(),
        gate_ranges,
    };
    (ray, trace)
}

/// Field channel of each line-of-sight component `(u, v, w)`, where the site has it.
pub(crate) fn velocity_channels(site: &Site) -> [Option<usize>; 3] {
    [
        site.channel_idx(ChannelRole::VelocityX),
        site.channel_idx(ChannelRole::VelocityY),
        site.channel_idx(ChannelRole::VelocityZ),
    ]
}

/// Stencil `(dof, weight)` of the gate centred at `centre` (m) along `ray`: the
/// range-weighted average of `v_r` over the gate window, sorted by dof with duplicates summed.
pub(crate) fn gate_stencil(
    geometry: &FieldGeometry,
    ray: &Ray,
    pattern: &BeamPattern,
    centre: f64,
    channels: [Option<usize>; 3],
) -> Vec<(usize, f64)> {
    let n_channels = geometry.site.n_channels();
    let half = weighting::window_half_width(pattern.gate_length, pattern.pulse_width);
    let start = (centre - half).max(0.0);
    let end = centre + half;
    let speed = ray.speed();
    let mut target = (end - start) / 8.0;
    if speed > 1e-12 {
        target = target.min(0.5 * geometry.sample_scale() / speed);
    }
    let n_samples = if end > start {
        ((end - start) / target).ceil().clamp(1.0, 4096.0) as usize
    } else {
        1
    };
    let width = (end - start) / n_samples as f64;
    let mut entries: Vec<(usize, f64)> = Vec::with_capacity(n_samples * 4 * 3);
    let mut used_mass = 0.0;
    for k in 0..n_samples {
        let a = start + k as f64 * width;
        let b = a + width;
        let mass = if end > start {
            weighting::range_weight_mass(
                a - centre,
                b - centre,
                pattern.gate_length,
                pattern.pulse_width,
            )
        } else {
            1.0
        };
        if mass <= 0.0 {
            continue;
        }
        // Samples lie inside the traced part of the beam; rounding at the edge is clamped.
        let Ok(nodes) = geometry.locate(ray.at(0.5 * (a + b)), 1e-6) else {
            continue;
        };
        used_mass += mass;
        for (point_idx, node_weight) in nodes.iter() {
            for (component, channel) in channels.iter().enumerate() {
                let coefficient = ray.los[component];
                if let Some(channel_idx) = channel {
                    if coefficient != 0.0 {
                        entries.push((
                            point_idx * n_channels + channel_idx,
                            mass * node_weight * coefficient,
                        ));
                    }
                }
            }
        }
    }
    entries.sort_by_key(|&(dof, _)| dof);
    let mut merged: Vec<(usize, f64)> = Vec::with_capacity(entries.len());
    for (dof, w) in entries {
        match merged.last_mut() {
            Some(last) if last.0 == dof => last.1 += w,
            _ => merged.push((dof, w)),
        }
    }
    if used_mass > 0.0 {
        for entry in &mut merged {
            entry.1 /= used_mass;
        }
    }
    merged
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quarter_turns_are_exact_and_other_angles_follow_libm() {
        for (deg, expected) in [
            (0.0, (0.0, 1.0)),
            (90.0, (1.0, 0.0)),
            (180.0, (0.0, -1.0)),
            (270.0, (-1.0, 0.0)),
            (-90.0, (-1.0, 0.0)),
            (450.0, (1.0, 0.0)),
        ] {
            let (s, c) = sin_cos_deg(deg);
            // Exact: no leakage of a component the beam is perpendicular to.
            assert!((s - expected.0).abs() < f64::MIN_POSITIVE, "{deg}");
            assert!((c - expected.1).abs() < f64::MIN_POSITIVE, "{deg}");
        }
        let (s, c) = sin_cos_deg(30.0);
        assert!((s - 0.5).abs() < 1e-15 && (c - 0.75f64.sqrt()).abs() < 1e-15);
    }

    #[test]
    fn ray_crosses_the_nearest_edge_of_a_concave_outline() {
        // An L-shaped outline; a ray along +x at y = 1 meets its edge x = 4 first.
        let outline = [
            [4.0, 0.0],
            [8.0, 0.0],
            [8.0, 4.0],
            [6.0, 4.0],
            [6.0, 2.0],
            [4.0, 2.0],
        ];
        let ray = Ray::new(Plane::Xy, [0.0, 1.0], 90.0, 0.0);
        let range = first_crossing(&ray, &outline, 100.0).expect("the ray meets the outline");
        assert!((range - 4.0).abs() < 1e-12);
        // Above the notch (y = 3) it first meets x = 6; pointing away it meets nothing.
        let ray = Ray::new(Plane::Xy, [0.0, 3.0], 90.0, 0.0);
        let range = first_crossing(&ray, &outline, 100.0).expect("the ray meets the outline");
        assert!((range - 6.0).abs() < 1e-12);
        let away = Ray::new(Plane::Xy, [0.0, 1.0], 270.0, 0.0);
        assert!(first_crossing(&away, &outline, 100.0).is_none());
        // Beyond the range limit it does not count.
        assert!(first_crossing(&ray, &outline, 5.0).is_none());
    }

    #[test]
    fn plan_view_elevation_shortens_the_horizontal_step() {
        let ray = Ray::new(Plane::Xy, [0.0, 0.0], 0.0, 60.0);
        assert!((ray.at(10.0)[1] - 5.0).abs() < 1e-12);
        assert!((ray.los[2] - 0.75f64.sqrt()).abs() < 1e-15);
        let vertical = Ray::new(Plane::Xy, [3.0, 4.0], 0.0, 90.0);
        let p = vertical.at(50.0);
        assert!((p[0] - 3.0).abs() < 1e-15 && (p[1] - 4.0).abs() < 1e-15);
    }
}
