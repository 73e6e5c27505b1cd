//! `synth` owns the built-in 2-D flow generator that turns a site description into snapshot
//! files for demo sites and tests: a D2Q9 lattice Boltzmann solver (TRT collision with a
//! Smagorinsky subgrid viscosity), solid obstacles from polygons, a gusty inflow and an open
//! outflow. See `docs/synth.md` for the method, the units and the validation.

pub mod lattice;
pub mod shapes;
pub mod solver;

pub use lattice::Collision;
pub use shapes::Shape;
pub use solver::{Edge, Lattice, LatticeSetup, Side};
