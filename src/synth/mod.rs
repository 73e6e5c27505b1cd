//! `synth` owns the built-in 2-D flow generator that turns a site description into velocity
//! snapshots for the demo sites and the tests: a D2Q9 lattice Boltzmann solver with
//! two-relaxation-time collision and a Smagorinsky subgrid viscosity (`lattice`, `solver`),
//! solid obstacles rasterised from polygons with bounce-back walls (`shapes`), a mean wind
//! profile with seeded Ornstein–Uhlenbeck gusts and direction swings at the open edges
//! (`inflow`), a convective outflow, and lattice ↔ physical unit conversion (`units`).
//! [`generate`] runs a site (`setup` builds the plan, `generate` the time loop).
//!
//! It reads no files and writes none (the `cli` command writes the result through `io`),
//! prints nothing, and parallelises only inside a lattice step, where results do not depend
//! on the thread count. Method, units and validation: `docs/synth.md`.

pub mod generate;
pub mod inflow;
pub mod lattice;
pub mod setup;
pub mod shapes;
pub mod solver;
pub mod units;

pub use generate::{generate, Progress, RunReport, SynthOutput, SOLVER_VERSION};
pub use lattice::Collision;
pub use shapes::Shape;
pub use solver::{Edge, Lattice, LatticeSetup, Side};

use crate::io::Plane;

/// Why a site cannot be generated. Every variant is an input problem (exit code 2):
/// [`SynthError::Unstable`] too, because the solver is stable at the demo sites' settings
/// and a blow-up comes from the site's own wind, turbulence or grid, which the message tells
/// the user to change.
#[derive(Debug, thiserror::Error)]
pub enum SynthError {
    #[error(
        "the site has no [synth] table; expected one with wind_speed, wind_from, \
             turbulence_intensity, direction_swing, duration, spin_up and seed"
    )]
    NoSettings,
    #[error("the site uses [points]; the flow generator needs a [grid]")]
    NotAGrid,
    #[error(
        "the site brings a [basis]; the flow generator writes the file named by \
             [snapshots] file, so expected a [snapshots] table"
    )]
    NoSnapshotFile,
    #[error(
        "channel `{name}` cannot be generated on a {plane:?} site; expected velocity \
             channels only (velocity-x and velocity-y for plan view, velocity-x and \
             velocity-z for a vertical slice)"
    )]
    Channel { name: String, plane: Plane },
    #[error("{key}: {message}")]
    Setting { key: String, message: String },
    #[error(
        "the flow became unstable (non-finite values) at t = {time:.1} s; try a lower \
             wind_speed or turbulence_intensity, or a finer grid"
    )]
    Unstable { time: f64 },
}
