//! `synth` owns the built-in 2-D flow generator that turns a site description into snapshot
//! files for demo sites and tests.
//!
//! Plan (not built yet): a lattice Boltzmann solver with validation against plane Poiseuille
//! flow, the Taylor–Green vortex and the Schäfer & Turek (1996) cylinder benchmark.
