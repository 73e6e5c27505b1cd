//! All integration tests, compiled into one binary; one module per feature.

#![allow(clippy::unwrap_used)]

mod bad_inputs;
mod basis;
mod basis_cli;
mod common;
mod hardening;
mod plan;
mod render;
mod rescore;
mod select;
mod sensors;
mod site_load;
mod synth;
mod synth_demo;
mod twin;
