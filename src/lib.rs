//! crowsnest plans where to mount wind sensors so that the modal coefficients of a
//! reduced-order wind model (mean field + POD modes) are observable, and proves with twin
//! experiments how many sensors are enough.
//!
//! The library is a one-way pipeline; each module reads only the output types of the modules
//! listed before it:
//!
//! `io` → `basis` → `sensors` → `select` → `twin` → `sweep` → `render`, with `synth` (a
//! built-in 2-D flow solver for demo sites and tests) beside it and `cli` (argument parsing and
//! terminal output) on top. See `docs/architecture.md`.

pub mod basis;
pub mod cli;
pub mod io;
pub mod render;
pub mod select;
pub mod sensors;
pub mod sweep;
pub mod synth;
pub mod twin;
