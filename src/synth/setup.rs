//! Turns a site into a run plan: lattice size and units, solid nodes from the obstacle
//! polygons, edge rules from the mean wind direction, the mean profile, the gust statistics
//! and the initial state. Main types: [`RunPlan`], [`EdgeNode`]. Checks every setting that
//! can be wrong and reports it as a [`SynthError`]; the plan it returns is valid.
//!
//! Choices and their sources (also in `docs/synth.md`):
//! - lattice spacing = the finer grid spacing (twice that with `quick`), so snapshots are
//!   bilinear samples of the lattice at the site's nodes;
//! - fastest mean speed → lattice velocity 0.04 (0.06 with `quick`), capped so that the
//!   expected peak speed (3.5× the mean wind in plan view, 2× in a slice) stays at lattice
//!   Mach 0.2: plan view 0.033 (Ma ≈ 0.06 for the mean wind), slice 0.04 (0.058 quick);
//!   LBM compressibility errors grow like Ma² and become noticeable above about 0.3
//!   (common practice);
//! - relaxation time from a cell Reynolds number `u h / ν = 20` plus the Smagorinsky model
//!   with C_S = 0.15 (the usual 0.1–0.2; Hou et al. 1996 use 0.17 — common practice);
//! - gust ratios σ_v/σ_u = 0.75 and σ_w/σ_u = 0.5 for the neutral surface layer (Panofsky &
//!   Dutton 1984, *Atmospheric Turbulence*, ch. 7, from memory), integral length 150 m
//!   (order of magnitude near the ground; common practice), four cross-wind modes,
//!   direction-swing time scale 120 s (common practice for mesoscale meandering, from
//!   memory).

use crate::io::{ChannelRole, Domain, FlowSource, Plane, Site};

use super::inflow::{GustSettings, WindProfile};
use super::lattice::{tau_of_viscosity, Collision};
use super::shapes::{rasterise, Shape};
use super::solver::{Edge, LatticeSetup, Side};
use super::units::{LatticeUnits, SOUND_SPEED};
use super::SynthError;

/// Lattice velocity of the fastest mean wind (full run, quick run), before the Mach cap.
const LATTICE_SPEED: [f64; 2] = [0.04, 0.06];
/// Design peak lattice Mach number: a margin below the ≈ 0.3 where compressibility errors
/// become noticeable (common practice; Krüger et al. 2017, §7.3).
const PEAK_MACH: f64 = 0.2;
/// Expected peak speed over the fastest mean wind. Plan view: obstacles are infinitely
/// tall, so lanes and corners reach 2.5–3.5× (measured on the quay demo sites); a slice
/// speeds up less over terrain (1.9× measured on the escarpment, at the slice top).
const SPEED_UP: [f64; 2] = [3.5, 2.0];
/// Cell Reynolds number u·h/ν that sets the viscosity floor.
const CELL_REYNOLDS: f64 = 20.0;
const SMAGORINSKY: f64 = 0.15;
/// TRT Λ = 1/4: the choice with the widest stability range for advection-dominated flow
/// (Ginzburg et al. 2008). The benchmarks in `tests/synth.rs` run at Λ = 3/16 (exact
/// halfway walls for Poiseuille flow); Poiseuille, Taylor–Green and the outflow test also
/// run at this Λ = 1/4 with the demo's τ and Smagorinsky model (`docs/synth.md`).
const MAGIC: f64 = 0.25;
const GUST_LENGTH: f64 = 150.0;
/// Depth of the absorbing layer before an open edge, m, and its peak extra viscosity
/// (lattice units).
const SPONGE_WIDTH: f64 = 30.0;
const SPONGE_VISCOSITY: f64 = 0.05;
const SWING_TIME: f64 = 120.0;
const N_GUST_MODES: usize = 4;
/// Default aerodynamic roughness (m) and reference height (m) of the slice profile: open
/// grass-land z0 ≈ 0.03 m (WMO-No. 8, Annex on roughness classes; Davenport class 4) and the
/// standard 10 m anemometer height (WMO-No. 8).
const DEFAULT_ROUGHNESS: f64 = 0.03;
const DEFAULT_REFERENCE_HEIGHT: f64 = 10.0;

/// A node on an edge with a prescribed (inflow or far-field) velocity.
#[derive(Debug, Clone)]
pub struct EdgeNode {
    pub side: Side,
    /// Index along the side (j for West/East, i for South/North).
    pub k: usize,
    /// Gust mode shapes at this node's cross-wind position.
    pub phi: Vec<f64>,
    /// Frozen-turbulence delay behind the most upwind point, s.
    pub delay: f64,
    /// Mean speed here, m/s (profile value).
    pub mean_speed: f64,
}

/// Everything a run needs, checked.
#[derive(Debug, Clone)]
pub struct RunPlan {
    pub plane: Plane,
    pub units: LatticeUnits,
    pub lattice: LatticeSetup,
    /// Lattice positions of the site nodes: node `(i, j)` at lattice `(i·sx, j·sy)`.
    pub scale: [f64; 2],
    pub site_nx: usize,
    pub site_ny: usize,
    /// Solid flags of the site grid (from the loaded site).
    pub site_solid: Vec<bool>,
    /// For each site channel, which velocity component it holds (0 = first plane axis).
    pub channel_component: Vec<usize>,
    /// Mean flow direction (unit vector, plane axes).
    pub direction: [f64; 2],
    pub gusts: GustSettings,
    pub seed: u64,
    pub edge_nodes: Vec<EdgeNode>,
    pub max_delay: f64,
    pub steps_per_snapshot: u64,
    pub n_spin_up_steps: u64,
    pub n_snapshots: usize,
    /// Snapshot interval, s.
    pub snapshot_dt: f64,
    /// Initial velocity per lattice node (lattice units).
    pub initial: Vec<[f64; 2]>,
    /// Fastest mean speed, m/s (sets the units).
    pub peak_mean_speed: f64,
}

fn bad(key: &str, message: impl Into<String>) -> SynthError {
    SynthError::Setting {
        key: key.to_string(),
        message: message.into(),
    }
}

/// Builds the run plan of `site`; `quick` halves the lattice resolution, raises the lattice
/// speed and shortens spin-up and duration to about one and two flow-through times.
pub fn plan(site: &Site, quick: bool) -> Result<RunPlan, SynthError> {
    let synth = site.synth.as_ref().ok_or(SynthError::NoSettings)?;
    let Domain::Grid(grid) = &site.domain else {
        return Err(SynthError::NotAGrid);
    };
    let FlowSource::Snapshots(files) = &site.flow else {
        return Err(SynthError::NoSnapshotFile);
    };
    let mut channel_component = Vec::new();
    for channel in &site.channels {
        let component = match (site.plane, channel.role) {
            (_, ChannelRole::VelocityX) => 0,
            (Plane::Xy, ChannelRole::VelocityY) | (Plane::Xz, ChannelRole::VelocityZ) => 1,
            _ => {
                return Err(SynthError::Channel {
                    name: channel.name.clone(),
                    plane: site.plane,
                })
            }
        };
        channel_component.push(component);
    }
    let duration = synth.duration;
    let spin_up = synth.spin_up;
    if synth.turbulence_intensity > 0.5 {
        return Err(bad(
            "synth.turbulence_intensity",
            format!(
                "found {}, expected at most 0.5 (the gust model is linear)",
                synth.turbulence_intensity
            ),
        ));
    }
    if synth.direction_swing_deg > 45.0 {
        return Err(bad(
            "synth.direction_swing",
            format!(
                "found {}°, expected at most 45° (edges are fixed from the mean direction)",
                synth.direction_swing_deg
            ),
        ));
    }

    let [dx, dy] = grid.spacing;
    let spacing = dx.min(dy) * if quick { 2.0 } else { 1.0 };
    let extent = [(grid.nx - 1) as f64 * dx, (grid.ny - 1) as f64 * dy];
    let nx = (extent[0] / spacing).round() as usize + 1;
    let ny = (extent[1] / spacing).round() as usize + 1;
    if nx < 8 || ny < 8 {
        return Err(bad(
            "grid",
            format!(
                "the lattice would have {nx} × {ny} nodes; expected at least 8 along each axis \
                 (use more grid nodes)"
            ),
        ));
    }
    let h = [extent[0] / (nx - 1) as f64, extent[1] / (ny - 1) as f64];
    let to_lattice = |p: [f64; 2]| {
        [
            (p[0] - grid.origin[0]) / h[0],
            (p[1] - grid.origin[1]) / h[1],
        ]
    };
    let shapes: Vec<Shape> = site
        .obstacles
        .iter()
        .map(|o| Shape::Polygon(o.polygon.vertices.iter().map(|&p| to_lattice(p)).collect()))
        .collect();
    let mut solid = rasterise(nx, ny, &shapes);
    // Solid nodes from a mask file count too: each lattice node takes its nearest site node.
    let scale = [dx / h[0], dy / h[1]];
    for j in 0..ny {
        for i in 0..nx {
            let si = ((i as f64 / scale[0]).round() as usize).min(grid.nx - 1);
            let sj = ((j as f64 / scale[1]).round() as usize).min(grid.ny - 1);
            if grid.solid[sj * grid.nx + si] {
                solid[j * nx + i] = true;
            }
        }
    }
    if solid.iter().all(|&s| s) {
        return Err(bad("obstacles", "every lattice node is solid"));
    }

    // Mean direction in plane axes and the profile.
    let (direction, profile, speed_factor) = match site.plane {
        Plane::Xy => {
            let rotation = site.geo_origin.map_or(0.0, |g| g.rotation_deg);
            let from = (synth.wind_from_deg - rotation).to_radians();
            (
                [-from.sin(), -from.cos()],
                WindProfile::Uniform {
                    speed: synth.wind_speed,
                },
                1.0,
            )
        }
        Plane::Xz => {
            // The slice's +x points east (azimuth 90°, as for beams); only the along-slice
            // component of the wind is simulated.
            let along = (synth.wind_from_deg - 270.0).to_radians().cos();
            if along.abs() < 0.5 {
                return Err(bad(
                    "synth.wind_from",
                    format!(
                        "found {}°, which blows more than 60° across an east–west slice; \
                         expected a direction near 270° (flow towards +x) or 90° (towards −x)",
                        synth.wind_from_deg
                    ),
                ));
            }
            let profile = WindProfile::Log {
                speed_ref: synth.wind_speed * along.abs(),
                height_ref: DEFAULT_REFERENCE_HEIGHT,
                roughness: DEFAULT_ROUGHNESS,
            };
            ([along.signum(), 0.0], profile, along.abs())
        }
    };

    // Ground height (lattice units, halfway wall) of every column, for the slice profile.
    let ground: Vec<f64> = (0..nx)
        .map(|i| {
            let mut top = -0.5;
            for j in 0..ny {
                if solid[j * nx + i] {
                    top = j as f64 + 0.5;
                } else {
                    break;
                }
            }
            top
        })
        .collect();
    let mean_speed_at = |i: usize, j: usize| -> f64 {
        match site.plane {
            Plane::Xy => profile.speed_at(0.0),
            Plane::Xz => profile.speed_at(((j as f64 - ground[i]) * h[1]).max(0.0)),
        }
    };
    let peak_mean_speed = match site.plane {
        Plane::Xy => synth.wind_speed,
        Plane::Xz => profile
            .speed_at(extent[1])
            .max(synth.wind_speed * speed_factor),
    };
    let speed_up = match site.plane {
        Plane::Xy => SPEED_UP[0],
        Plane::Xz => SPEED_UP[1],
    };
    let lattice_speed = LATTICE_SPEED[usize::from(quick)].min(PEAK_MACH * SOUND_SPEED / speed_up);
    let (units, steps_per_snapshot) =
        LatticeUnits::for_speed(h[0], peak_mean_speed, lattice_speed, files.dt);
    let u_lattice = units.velocity_to_lattice(peak_mean_speed);
    let nu = u_lattice / CELL_REYNOLDS;
    let collision = Collision {
        tau: tau_of_viscosity(nu),
        magic: MAGIC,
        smagorinsky: SMAGORINSKY,
        accel: [0.0, 0.0],
    };

    // Edge rules: sides the mean wind leaves through are open, the others prescribed.
    let edges: [Edge; 4] = match site.plane {
        Plane::Xy => Side::ALL.map(|side| {
            let n = match side {
                Side::West => [-1.0, 0.0],
                Side::East => [1.0, 0.0],
                Side::South => [0.0, -1.0],
                Side::North => [0.0, 1.0],
            };
            if direction[0] * n[0] + direction[1] * n[1] > 0.5 {
                Edge::Convective
            } else {
                Edge::Velocity
            }
        }),
        Plane::Xz => {
            let (west, east) = if direction[0] > 0.0 {
                (Edge::Velocity, Edge::Convective)
            } else {
                (Edge::Convective, Edge::Velocity)
            };
            [west, east, Edge::Velocity, Edge::FreeSlip]
        }
    };

    // Gust geometry: cross-wind coordinate s and delay of every prescribed edge node.
    let perp = [direction[1], -direction[0]];
    let corners = [[0.0, 0.0], [extent[0], 0.0], [0.0, extent[1]], extent];
    let along_min = corners
        .iter()
        .map(|c| c[0] * direction[0] + c[1] * direction[1])
        .fold(f64::INFINITY, f64::min);
    let along_max = corners
        .iter()
        .map(|c| c[0] * direction[0] + c[1] * direction[1])
        .fold(f64::NEG_INFINITY, f64::max);
    let (perp_min, perp_max) = corners
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |acc, c| {
            let v = c[0] * perp[0] + c[1] * perp[1];
            (acc.0.min(v), acc.1.max(v))
        });
    let sigma_along = synth.turbulence_intensity * synth.wind_speed * speed_factor;
    let gusts = GustSettings {
        sigma_along,
        sigma_cross: sigma_along
            * match site.plane {
                Plane::Xy => 0.75,
                Plane::Xz => 0.5,
            },
        time_scale: GUST_LENGTH / synth.wind_speed,
        n_modes: N_GUST_MODES,
        swing_sd_deg: synth.direction_swing_deg,
        swing_time_scale: SWING_TIME,
    };
    let shapes_probe = super::inflow::GustField::new(gusts, 0, 1.0, 0.0);
    let mut edge_nodes = Vec::new();
    for side in Side::ALL {
        if edges[side as usize] != Edge::Velocity {
            continue;
        }
        // The slice's ground is a no-slip wall, not a gusty inflow.
        if site.plane == Plane::Xz && side == Side::South {
            continue;
        }
        let n_along = match side {
            Side::West | Side::East => ny,
            Side::South | Side::North => nx,
        };
        for k in 0..n_along {
            let (i, j) = match side {
                Side::West => (0, k),
                Side::East => (nx - 1, k),
                Side::South => (k, 0),
                Side::North => (k, ny - 1),
            };
            let p = [i as f64 * h[0], j as f64 * h[1]];
            let s = match site.plane {
                Plane::Xy => {
                    let v = p[0] * perp[0] + p[1] * perp[1];
                    ((v - perp_min) / (perp_max - perp_min).max(1e-9)).clamp(0.0, 1.0)
                }
                Plane::Xz => (p[1] / extent[1]).clamp(0.0, 1.0),
            };
            let along = p[0] * direction[0] + p[1] * direction[1];
            edge_nodes.push(EdgeNode {
                side,
                k,
                phi: shapes_probe.mode_shapes(s),
                delay: (along - along_min) / synth.wind_speed,
                mean_speed: if solid[j * nx + i] {
                    0.0
                } else {
                    mean_speed_at(i, j)
                },
            });
        }
    }
    let max_delay = (along_max - along_min) / synth.wind_speed;

    let flow_through = (along_max - along_min) / synth.wind_speed;
    let (spin_up, duration) = if quick {
        (
            spin_up.min(flow_through),
            duration.min((2.0 * flow_through).max(20.0 * files.dt)),
        )
    } else {
        (spin_up, duration)
    };
    let n_snapshots = (duration / files.dt).round() as usize;
    if n_snapshots < 2 {
        return Err(bad(
            "synth.duration",
            format!(
                "found {duration} s with snapshots every {} s; expected at least two snapshots",
                files.dt
            ),
        ));
    }
    let initial: Vec<[f64; 2]> = (0..nx * ny)
        .map(|idx| {
            let (i, j) = (idx % nx, idx / nx);
            let u = units.velocity_to_lattice(mean_speed_at(i, j));
            [u * direction[0], u * direction[1]]
        })
        .collect();

    // Absorbing sponge in front of each open edge: the viscosity rises quadratically over
    // SPONGE_WIDTH of the domain so wakes fade before they meet the outflow rule
    // (Israeli & Orszag 1981, *J. Comput. Phys.* 41, "Approximation of radiation boundary
    // conditions").
    let sponge_nodes = (SPONGE_WIDTH / h[0]).round().max(2.0);
    let mut sponge = vec![0.0; nx * ny];
    for side in Side::ALL {
        if edges[side as usize] != Edge::Convective {
            continue;
        }
        for j in 0..ny {
            for i in 0..nx {
                let distance = match side {
                    Side::West => i,
                    Side::East => nx - 1 - i,
                    Side::South => j,
                    Side::North => ny - 1 - j,
                } as f64;
                if distance < sponge_nodes {
                    let depth = (sponge_nodes - distance) / sponge_nodes;
                    let extra = SPONGE_VISCOSITY * depth * depth;
                    sponge[j * nx + i] = f64::max(sponge[j * nx + i], extra);
                }
            }
        }
    }

    Ok(RunPlan {
        plane: site.plane,
        units,
        lattice: LatticeSetup {
            nx,
            ny,
            collision,
            edges,
            solid,
            wall_fraction: Vec::new(),
            sponge,
        },
        scale,
        site_nx: grid.nx,
        site_ny: grid.ny,
        site_solid: grid.solid.clone(),
        channel_component,
        direction,
        gusts,
        seed: synth.seed,
        edge_nodes,
        max_delay,
        steps_per_snapshot,
        n_spin_up_steps: units.steps_in(spin_up),
        n_snapshots,
        snapshot_dt: files.dt,
        initial,
        peak_mean_speed,
    })
}
