//! `render` owns every picture and the report: the site map, the mode gallery and energy chart,
//! error curves with bands ("metric against setting": time, sensor count, noise, sampling
//! interval), the cost–error front, the self-contained `report.html` and `layout.geojson`.
//!
//! Every figure is a plain-data struct implementing [`Figure`]; [`to_svg`] and [`to_png`] turn
//! it into an SVG document or PNG bytes (plotters, bundled DejaVu Sans for PNG text), and
//! [`write_svg`] / [`write_png`] store it through `io::atomic`. Colours and markers come from
//! [`palette`] only. The report builder takes text, tables and SVG strings; it computes no
//! statistics and chooses no layout — `sweep` and the recommendation logic feed it plain data.
//!
//! This module reads no files, prints nothing and starts no threads.

pub mod curves;
pub mod energy;
pub mod field;
pub mod figure;
pub mod gallery;
pub mod geojson;
pub mod html;
pub mod palette;
pub mod pareto;
pub mod plan_report;
pub mod report;
pub mod sitemap;

pub use curves::{CurveChart, RefLine, Series};
pub use energy::EnergyChart;
pub use field::FieldLayer;
pub use figure::{to_png, to_rgb, to_svg, write_figure, write_png, write_svg, Figure};
pub use gallery::{ModeGallery, ModePanel};
pub use pareto::{ParetoChart, ParetoGroup, ParetoPoint};
pub use report::{write_report, Report, ReportFigure, Study, Table};
pub use sitemap::{MapBeam, MapSensor, SiteMap};

/// A failure while drawing, encoding or writing a picture or report.
#[derive(Debug, thiserror::Error)]
pub enum RenderError {
    /// plotters refused to draw (a font or backend problem).
    #[error("drawing {figure}: {message}")]
    Draw { figure: String, message: String },
    /// The PNG encoder failed.
    #[error("encoding {figure} as PNG: {message}")]
    Encode { figure: String, message: String },
    /// The output file could not be written.
    #[error("writing output: {0}")]
    Io(#[from] crate::io::IoError),
}
