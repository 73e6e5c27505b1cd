//! Runs a site's flow: spin-up, then snapshots of the velocity at the site's grid nodes in
//! m/s. Main entry point [`generate`], output [`SynthOutput`], summary [`RunReport`].
//!
//! Each solver step first advances the gust processes (on the calling thread, fixed order),
//! writes the prescribed edge velocities, then steps the lattice (rows in parallel). A
//! snapshot is a bilinear sample of the lattice velocity at every site node (0 on solid site
//! nodes), converted to m/s. The run stops with [`SynthError::Unstable`] at the first
//! non-finite value. Writes no files and prints nothing: the caller gets the arrays and
//! reports progress through its callback.

use super::inflow::GustField;
use super::setup::{plan, RunPlan};
use super::solver::Lattice;
use super::units::SOUND_SPEED;
use super::SynthError;
use crate::io::{Plane, Site};

/// Changes whenever the generator's output for the same site would change; part of the key
/// that decides whether `crowsnest synth` can skip a run.
pub const SOLVER_VERSION: &str = "crowsnest-synth-3";

/// Progress of a run, for a progress bar.
#[derive(Debug, Clone, Copy)]
pub struct Progress {
    pub step: u64,
    pub n_steps: u64,
}

/// Numbers that describe a finished run (for the terminal and the docs).
#[derive(Debug, Clone)]
pub struct RunReport {
    pub lattice_nx: usize,
    pub lattice_ny: usize,
    /// Lattice spacing, m, and time step, s.
    pub spacing: f64,
    pub step: f64,
    pub n_steps: u64,
    /// Mach number of the fastest mean wind, and the largest seen in any snapshot.
    pub mach_mean: f64,
    pub mach_peak: f64,
    /// Relaxation time without subgrid viscosity, and the physical viscosity floor, m²/s.
    pub tau: f64,
    pub viscosity_floor: f64,
    /// Largest |ρ − 1| over the snapshots (density drift of the open edges).
    pub density_drift: f64,
}

/// Snapshots on the site grid.
#[derive(Debug, Clone)]
pub struct SynthOutput {
    /// `(T, ny, nx, C)`.
    pub shape: [usize; 4],
    /// C-order values, m/s.
    pub data: Vec<f32>,
    /// Site-grid solid mask, `(ny, nx)`, index `j * nx + i`.
    pub solid: Vec<bool>,
    /// Time between snapshots, s.
    pub dt: f64,
    pub report: RunReport,
}

/// Simulates the site's `[synth]` scenario and samples `(T, ny, nx, C)` velocity snapshots
/// (m/s) on its grid. `quick` runs a coarser, shorter case for tests and CI.
pub fn generate(
    site: &Site,
    quick: bool,
    progress: &mut dyn FnMut(Progress),
) -> Result<SynthOutput, SynthError> {
    let plan = plan(site, quick)?;
    run(&plan, progress)
}

fn run(plan: &RunPlan, progress: &mut dyn FnMut(Progress)) -> Result<SynthOutput, SynthError> {
    let units = plan.units;
    let mut lattice = Lattice::new(plan.lattice.clone());
    let nx_l = lattice.nx();
    lattice.initialise(|i, j| {
        let u = plan.initial[j * nx_l + i];
        (1.0, u[0], u[1])
    });
    let mut gusts = GustField::new(plan.gusts, plan.seed, units.step, plan.max_delay);
    let n_steps = plan.n_spin_up_steps + plan.steps_per_snapshot * plan.n_snapshots as u64;
    let n_channels = plan.channel_component.len();
    let frame = plan.site_nx * plan.site_ny * n_channels;
    let mut data = Vec::with_capacity(frame * plan.n_snapshots);
    let mut mach_peak: f64 = 0.0;
    let mut density_drift: f64 = 0.0;
    let report_every = (n_steps / 200).max(1);
    progress(Progress { step: 0, n_steps });
    for step in 1..=n_steps {
        gusts.advance();
        set_edge_velocities(plan, &gusts, &mut lattice);
        lattice.step();
        let after_spin_up = step.saturating_sub(plan.n_spin_up_steps);
        if step > plan.n_spin_up_steps && after_spin_up % plan.steps_per_snapshot == 0 {
            let (peak, drift) =
                sample(plan, &lattice, &mut data).map_err(|()| SynthError::Unstable {
                    time: step as f64 * units.step,
                })?;
            mach_peak = mach_peak.max(peak / SOUND_SPEED);
            density_drift = density_drift.max(drift);
        }
        if step % report_every == 0 || step == n_steps {
            progress(Progress { step, n_steps });
        }
    }
    debug_assert_eq!(data.len(), frame * plan.n_snapshots);
    let collision = plan.lattice.collision;
    Ok(SynthOutput {
        shape: [plan.n_snapshots, plan.site_ny, plan.site_nx, n_channels],
        data,
        solid: plan.site_solid.clone(),
        dt: plan.snapshot_dt,
        report: RunReport {
            lattice_nx: plan.lattice.nx,
            lattice_ny: plan.lattice.ny,
            spacing: units.spacing,
            step: units.step,
            n_steps,
            mach_mean: units.mach(plan.peak_mean_speed),
            mach_peak,
            tau: collision.tau,
            viscosity_floor: units
                .viscosity_to_physical(super::lattice::viscosity_of_tau(collision.tau)),
            density_drift,
        },
    })
}

/// Writes this step's gusty velocity into every prescribed edge node.
fn set_edge_velocities(plan: &RunPlan, gusts: &GustField, lattice: &mut Lattice) {
    let units = plan.units;
    let d0 = plan.direction;
    for node in &plan.edge_nodes {
        if node.mean_speed <= 0.0 {
            lattice.edge_velocity_mut(node.side)[node.k] = [0.0, 0.0];
            continue;
        }
        let g = gusts.sample_shaped(&node.phi, node.delay);
        let u = match plan.plane {
            Plane::Xy => {
                // Rotate the mean direction clockwise (seen from above) by the swing.
                let (sin, cos) = g.swing_rad.sin_cos();
                let d = [d0[0] * cos + d0[1] * sin, -d0[0] * sin + d0[1] * cos];
                let perp = [d[1], -d[0]];
                let speed = node.mean_speed + g.along;
                [
                    speed * d[0] + g.cross * perp[0],
                    speed * d[1] + g.cross * perp[1],
                ]
            }
            Plane::Xz => [
                d0[0] * (node.mean_speed * g.swing_rad.cos() + g.along),
                g.cross,
            ],
        };
        lattice.edge_velocity_mut(node.side)[node.k] = [
            units.velocity_to_lattice(u[0]),
            units.velocity_to_lattice(u[1]),
        ];
    }
}

/// Appends one snapshot; returns the largest lattice speed and |ρ − 1| seen, or `Err` at the
/// first non-finite value.
fn sample(plan: &RunPlan, lattice: &Lattice, data: &mut Vec<f32>) -> Result<(f64, f64), ()> {
    let units = plan.units;
    let nx_l = lattice.nx();
    let ny_l = lattice.ny();
    let mut peak: f64 = 0.0;
    let mut drift: f64 = 0.0;
    for j in 0..ny_l {
        for i in 0..nx_l {
            let m = lattice.moments_at(i, j);
            if !m.iter().all(|v| v.is_finite()) {
                return Err(());
            }
            peak = peak.max((m[1] * m[1] + m[2] * m[2]).sqrt());
            drift = drift.max((m[0] - 1.0).abs());
        }
    }
    for j in 0..plan.site_ny {
        for i in 0..plan.site_nx {
            let solid = plan.site_solid[j * plan.site_nx + i];
            let x = (i as f64 * plan.scale[0]).min((nx_l - 1) as f64);
            let y = (j as f64 * plan.scale[1]).min((ny_l - 1) as f64);
            let u = if solid {
                [0.0, 0.0]
            } else {
                bilinear(lattice, x, y)
            };
            for &component in &plan.channel_component {
                data.push(units.velocity_to_physical(u[component]) as f32);
            }
        }
    }
    Ok((peak, drift))
}

/// Bilinear interpolation of the lattice velocity at lattice position `(x, y)`; solid nodes
/// count as velocity 0 (the no-slip value).
fn bilinear(lattice: &Lattice, x: f64, y: f64) -> [f64; 2] {
    let i0 = (x.floor() as usize).min(lattice.nx() - 2);
    let j0 = (y.floor() as usize).min(lattice.ny() - 2);
    let fx = x - i0 as f64;
    let fy = y - j0 as f64;
    let mut u = [0.0; 2];
    for (di, dj, w) in [
        (0, 0, (1.0 - fx) * (1.0 - fy)),
        (1, 0, fx * (1.0 - fy)),
        (0, 1, (1.0 - fx) * fy),
        (1, 1, fx * fy),
    ] {
        let (i, j) = (i0 + di, j0 + dj);
        if w <= 0.0 || lattice.is_solid(i, j) {
            continue;
        }
        let m = lattice.moments_at(i, j);
        u[0] += w * m[1];
        u[1] += w * m[2];
    }
    u
}
