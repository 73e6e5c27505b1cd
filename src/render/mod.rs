//! `render` owns every picture and the report: site maps, mode galleries, error curves with
//! bands, the cost–error front, and the self-contained `report.html`.
//!
//! Plan (not built yet): plotters for SVG and PNG; a colour-blind-safe palette of our own.
