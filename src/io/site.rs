//! The validated in-memory model of a site. Built only by the site loader (which checks every
//! value); later stages may rely on the invariants stated on each field.

use std::path::PathBuf;

/// Which physical plane the 2-D domain lies in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Plane {
    /// Plan view: first axis x (east, m), second axis y (north, m).
    Xy,
    /// Vertical slice: first axis x (along the slice, m), second axis z (height, m).
    Xz,
}

/// A point in the domain plane, metres: `(x, y)` for [`Plane::Xy`], `(x, z)` for [`Plane::Xz`].
pub type PlanePoint = [f64; 2];

/// A structured grid of nodes (cell centres) `origin + (i·dx, j·dy)`.
#[derive(Debug, Clone)]
pub struct Grid {
    pub origin: PlanePoint,
    /// Node spacing along each axis, metres, > 0.
    pub spacing: [f64; 2],
    pub nx: usize,
    pub ny: usize,
    /// `true` where the node lies in a solid (no flow); length `nx * ny`, index `j * nx + i`.
    pub solid: Vec<bool>,
    /// Cell weight (area, m²) per node; 0 for solid nodes. Uniform grids give `dx·dy`.
    pub weight: Vec<f64>,
}

/// Scattered nodes with a cell weight each (area or volume), for unstructured CFD output.
#[derive(Debug, Clone)]
pub struct PointCloud {
    pub points: Vec<PlanePoint>,
    /// Cell weight per point, > 0.
    pub weight: Vec<f64>,
}

#[derive(Debug, Clone)]
pub enum Domain {
    Grid(Grid),
    Points(PointCloud),
}

impl Domain {
    pub fn n_points(&self) -> usize {
        match self {
            Domain::Grid(g) => g.nx * g.ny,
            Domain::Points(p) => p.points.len(),
        }
    }

    /// Cell weight per point (0 on solid grid nodes).
    pub fn weights(&self) -> &[f64] {
        match self {
            Domain::Grid(g) => &g.weight,
            Domain::Points(p) => &p.weight,
        }
    }
}

/// What a channel holds; velocity components are needed by beam (line-of-sight) kinds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ChannelRole {
    /// Velocity along x (east or along-slice), m/s.
    VelocityX,
    /// Velocity along y (north), m/s; plan view only.
    VelocityY,
    /// Vertical velocity, m/s.
    VelocityZ,
    /// Any other scalar (temperature, pressure, ...).
    Scalar,
}

#[derive(Debug, Clone)]
pub struct Channel {
    pub name: String,
    pub unit: String,
    pub role: ChannelRole,
}

/// Where the snapshots live.
#[derive(Debug, Clone)]
pub struct SnapshotFiles {
    /// `.npy` or `.csv`, absolute.
    pub path: PathBuf,
    /// Time between snapshots, seconds, > 0.
    pub dt: f64,
    /// Number of snapshots, read from the file header when the site is loaded.
    pub n_snapshots: usize,
}

/// A basis computed elsewhere (for instance by the user's own CFD post-processing).
#[derive(Debug, Clone)]
pub struct BasisFiles {
    pub modes: PathBuf,
    pub mean: PathBuf,
    pub energies: PathBuf,
    /// Time between the snapshots the basis came from, seconds, > 0, when `[basis]` gives
    /// it (twin experiments need it).
    pub dt: Option<f64>,
}

/// How a sensor kind reads the field.
#[derive(Debug, Clone)]
pub enum Measurement {
    /// Chosen channels at the mount point (indices into `Site::channels`).
    Point { channel_idx: Vec<usize> },
    /// One scalar channel at the mount point.
    Scalar { channel_idx: usize },
    /// Pulsed Doppler lidar: line-of-sight velocity at range gates along fixed beams.
    Beam(BeamPattern),
}

/// One fixed beam direction, degrees. Azimuth clockwise from north (+y, or +z-up slices use
/// azimuth 90 = +x and 270 = −x), elevation above the horizon.
#[derive(Debug, Clone, Copy)]
pub struct BeamDirection {
    pub azimuth_deg: f64,
    pub elevation_deg: f64,
}

#[derive(Debug, Clone)]
pub struct BeamPattern {
    pub beams: Vec<BeamDirection>,
    /// Range of the first gate centre, m.
    pub first_gate: f64,
    /// Distance between gate centres, m.
    pub gate_spacing: f64,
    pub n_gates: usize,
    /// Length of the rectangular range gate, m.
    pub gate_length: f64,
    /// Full width at half maximum of the Gaussian pulse, m.
    pub pulse_width: f64,
}

#[derive(Debug, Clone)]
pub struct SensorKind {
    pub name: String,
    pub measurement: Measurement,
    /// Noise standard deviation of one reading, in the channel's unit, > 0.
    pub noise_sd: f64,
    /// Time between readings, seconds, > 0.
    pub interval: f64,
    /// Purchase plus installation cost, in the site's currency, ≥ 0.
    pub cost: f64,
}

#[derive(Debug, Clone)]
pub struct Candidate {
    /// Unique among the site's candidates.
    pub id: String,
    /// Inside the domain and not in a solid.
    pub position: PlanePoint,
    /// Mount height above ground, m (plan-view sites; informational).
    pub height: Option<f64>,
    /// Indices into `Site::kinds`; non-empty.
    pub kind_idx: Vec<usize>,
    /// Extra cost of mounting a sensor here (mast, power, permits), ≥ 0.
    pub mount_cost: f64,
    /// Zone label for per-zone limits (empty when none).
    pub zone: String,
    /// Rotation added to every beam azimuth of a beam kind mounted here, degrees.
    pub heading_deg: f64,
}

/// A closed polygon in plane coordinates (first vertex not repeated).
#[derive(Debug, Clone)]
pub struct Polygon {
    pub vertices: Vec<PlanePoint>,
}

/// An area where no sensor may be mounted (runway strip, water lane, road).
#[derive(Debug, Clone)]
pub struct Zone {
    pub name: String,
    pub polygon: Polygon,
}

/// A solid obstacle (building, container stack, terrain): blocks beams; rasterised by `synth`.
#[derive(Debug, Clone)]
pub struct Obstacle {
    pub name: String,
    pub polygon: Polygon,
}

/// A sensor already on site: must be kept by the planner.
#[derive(Debug, Clone)]
pub struct ExistingSensor {
    pub candidate_idx: usize,
    pub kind_idx: usize,
}

/// WGS84 position of the local frame's origin, for GeoJSON output.
#[derive(Debug, Clone, Copy)]
pub struct GeoOrigin {
    pub lat_deg: f64,
    pub lon_deg: f64,
    /// Angle from true north to the local +y axis, clockwise, degrees.
    pub rotation_deg: f64,
}

/// Where the flow data come from.
#[derive(Debug, Clone)]
pub enum FlowSource {
    Snapshots(SnapshotFiles),
    Basis(BasisFiles),
}

/// Settings for the built-in flow generator, when the site is a generated demo.
#[derive(Debug, Clone)]
pub struct SynthSettings {
    /// Mean wind speed at the reference height, m/s.
    pub wind_speed: f64,
    /// Mean wind direction, degrees clockwise from north (the direction the wind comes from).
    pub wind_from_deg: f64,
    /// Gust intensity (standard deviation over mean), dimensionless.
    pub turbulence_intensity: f64,
    /// Amplitude of slow direction swings, degrees.
    pub direction_swing_deg: f64,
    /// Simulated span kept as snapshots, seconds.
    pub duration: f64,
    /// Spin-up discarded before the first snapshot, seconds.
    pub spin_up: f64,
    pub seed: u64,
}

/// A fully validated site.
#[derive(Debug, Clone)]
pub struct Site {
    pub name: String,
    /// Label of the currency every cost is in (`currency` in site.toml, e.g. "EUR"); empty
    /// when the site does not say.
    pub currency: String,
    /// Directory holding `site.toml`; relative paths in the file are resolved against it.
    pub root: PathBuf,
    pub plane: Plane,
    pub domain: Domain,
    pub channels: Vec<Channel>,
    pub flow: FlowSource,
    pub kinds: Vec<SensorKind>,
    pub candidates: Vec<Candidate>,
    pub zones: Vec<Zone>,
    pub obstacles: Vec<Obstacle>,
    pub existing: Vec<ExistingSensor>,
    pub geo_origin: Option<GeoOrigin>,
    pub synth: Option<SynthSettings>,
    /// Non-fatal findings of the loader, for `check` to print.
    pub warnings: Vec<String>,
}

impl Site {
    pub fn n_points(&self) -> usize {
        self.domain.n_points()
    }

    pub fn n_channels(&self) -> usize {
        self.channels.len()
    }

    pub fn n_dof(&self) -> usize {
        self.n_points() * self.n_channels()
    }

    pub fn channel_idx(&self, role: ChannelRole) -> Option<usize> {
        self.channels.iter().position(|c| c.role == role)
    }
}
