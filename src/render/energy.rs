//! The energy chart beside the mode gallery: each mode's share of the computed energy as a
//! bar and the cumulative share as a line, both in percent, with the kept rank marked.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::figure::{self, DrawResult, Figure, LegendGlyph, LABEL_PX, TICK_PX};
use super::palette::{Marker, SeriesStyle, HIGHLIGHT, INK, INK_SOFT, PAPER, RULE, SERIES};

/// Mode energies (descending) and the number of modes kept.
#[derive(Debug, Clone)]
pub struct EnergyChart {
    pub title: String,
    pub energies: Vec<f64>,
    pub n_kept: usize,
    /// Show at least this many modes (more when more are kept, so the kept rank is marked).
    pub n_show: usize,
    pub width: u32,
    pub plot_height: u32,
}

impl EnergyChart {
    pub fn new(energies: Vec<f64>, n_kept: usize) -> Self {
        EnergyChart {
            title: "Energy per POD mode".to_string(),
            energies,
            n_kept,
            n_show: 40,
            width: 880,
            plot_height: 300,
        }
    }
}

const TITLE_H: u32 = 40;
const MARGIN: u32 = 14;

impl Figure for EnergyChart {
    fn size(&self) -> (u32, u32) {
        (
            self.width,
            TITLE_H + self.plot_height + 52 + 30 + 2 * MARGIN,
        )
    }

    fn draw<DB>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult
    where
        DB: DrawingBackend,
        DB::ErrorType: 'static,
    {
        let (w, _) = self.size();
        figure::draw_title(root, &self.title, MARGIN as i32, 10)?;
        let total: f64 = self
            .energies
            .iter()
            .filter(|e| e.is_finite())
            .sum::<f64>()
            .max(1e-300);
        let n = self
            .energies
            .len()
            .min(self.n_show.max(self.n_kept + self.n_kept / 10 + 1))
            .max(1);
        let area = root
            .clone()
            .shrink((MARGIN, TITLE_H), (w - 2 * MARGIN, self.plot_height + 52));
        let mut chart = ChartBuilder::on(&area)
            .margin_right(16)
            .x_label_area_size(52)
            .y_label_area_size(78)
            .build_cartesian_2d(0.4f64..n as f64 + 0.6, 0.0f64..105.0)?;
        chart
            .configure_mesh()
            .light_line_style(PAPER)
            .bold_line_style(RULE.stroke_width(1))
            .x_desc("mode number")
            .y_desc("share of energy (%)")
            .axis_desc_style(figure::text(LABEL_PX, INK))
            .label_style(figure::text(TICK_PX, INK_SOFT))
            .axis_style(INK.stroke_width(1))
            .x_labels(n.min(12))
            .x_label_formatter(&|v| format!("{}", v.round() as i64))
            .y_labels(6)
            .y_label_formatter(&figure::format_axis_value)
            .draw()?;
        let bar = SERIES[2];
        let line = SERIES[0];
        chart.draw_series((0..n).map(|k| {
            let share = 100.0 * self.energies[k] / total;
            let x = k as f64 + 1.0;
            Rectangle::new([(x - 0.36, 0.0), (x + 0.36, share)], bar.filled())
        }))?;
        let mut cum = 0.0;
        let pts: Vec<(i32, i32)> = (0..n)
            .map(|k| {
                cum += 100.0 * self.energies[k] / total;
                chart.backend_coord(&(k as f64 + 1.0, cum))
            })
            .collect();
        figure::draw_line(root, &pts, line, 2, false)?;
        for p in pts.iter().step_by(n.div_ceil(20).max(1)) {
            figure::draw_marker(root, *p, Marker::Circle, 4.5, line, line)?;
        }
        if self.n_kept > 0 && self.n_kept <= n {
            let x = self.n_kept as f64 + 0.5;
            let a = chart.backend_coord(&(x, 0.0));
            let b = chart.backend_coord(&(x, 105.0));
            figure::draw_line(root, &[a, b], HIGHLIGHT, 2, true)?;
        }
        let entries = vec![
            (LegendGlyph::Swatch(bar), "share of one mode".to_string()),
            (
                LegendGlyph::Series(SeriesStyle {
                    colour: line,
                    marker: Marker::Circle,
                    dashed: false,
                }),
                "cumulative share".to_string(),
            ),
            (
                LegendGlyph::Line {
                    colour: HIGHLIGHT,
                    dashed: true,
                },
                format!("{} modes kept", self.n_kept),
            ),
        ];
        let y = (TITLE_H + self.plot_height + 52 + 6) as i32;
        figure::draw_legend_rows(
            root,
            &entries,
            (MARGIN + 10) as i32,
            y,
            (w - 2 * MARGIN) as i32,
        )?;
        Ok(())
    }
}
