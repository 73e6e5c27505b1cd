//! The mode gallery: small multiples of POD modes on the site domain, each panel titled with
//! its mode number and energy share, on one shared diverging colour scale (each mode scaled
//! to unit peak, since a mode's sign and amplitude are arbitrary), with obstacles and zones.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::field::{self, FieldLayer, MapFrame};
use super::figure::{self, DrawResult, Figure, SMALL_PX, TICK_PX};
use super::palette::{INK, INK_SOFT, RULE, TIDE};
use crate::basis::Basis;
use crate::io::Site;

/// One panel: a caption and a value per point.
#[derive(Debug, Clone)]
pub struct ModePanel {
    pub caption: String,
    pub layer: FieldLayer,
}

/// Small multiples of modes.
#[derive(Debug, Clone)]
pub struct ModeGallery<'a> {
    pub site: &'a Site,
    pub title: String,
    pub panels: Vec<ModePanel>,
    pub n_cols: usize,
    pub width: u32,
}

impl<'a> ModeGallery<'a> {
    /// The first `n_show` modes of `basis` on channel `channel_idx`, captioned with their
    /// share of the total computed energy.
    pub fn from_basis(site: &'a Site, basis: &Basis, channel_idx: usize, n_show: usize) -> Self {
        let total: f64 = basis.energies.iter().sum();
        let panels = (0..n_show.min(basis.n_modes()))
            .map(|k| ModePanel {
                caption: format!(
                    "mode {} · {:.1} % energy",
                    k + 1,
                    100.0 * basis.energies[k] / total.max(1e-300)
                ),
                layer: FieldLayer::mode(site, basis, k, channel_idx),
            })
            .collect();
        ModeGallery {
            site,
            title: format!(
                "POD modes, channel {} (scaled to unit peak)",
                site.channels[channel_idx].name
            ),
            panels,
            n_cols: 3,
            width: 880,
        }
    }

    fn cell(&self) -> (u32, MapFrame) {
        let cols = self.n_cols.max(1) as u32;
        let cell_w = (self.width - SIDE_W - MARGIN) / cols;
        let frame = MapFrame::fit(field::domain_extent(self.site), cell_w - 2 * PAD, 320, 60);
        (cell_w, frame)
    }
}

const TITLE_H: u32 = 40;
const MARGIN: u32 = 12;
const SIDE_W: u32 = 110;
const PAD: u32 = 6;
const CAPTION_H: u32 = 22;

impl Figure for ModeGallery<'_> {
    fn size(&self) -> (u32, u32) {
        let (_, frame) = self.cell();
        let rows = self.panels.len().div_ceil(self.n_cols.max(1)).max(1) as u32;
        let h = TITLE_H + rows * (frame.plot_h + CAPTION_H + 2 * PAD) + MARGIN;
        (self.width, h.max(TITLE_H + 150))
    }

    fn draw<DB>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult
    where
        DB: DrawingBackend,
        DB::ErrorType: 'static,
    {
        figure::draw_title(root, &self.title, MARGIN as i32, 10)?;
        let (cell_w, frame) = self.cell();
        let cols = self.n_cols.max(1);
        for (n, panel) in self.panels.iter().enumerate() {
            let (row, col) = ((n / cols) as u32, (n % cols) as u32);
            let x = MARGIN + col * cell_w + PAD;
            let y = TITLE_H + row * (frame.plot_h + CAPTION_H + 2 * PAD);
            root.draw(&Text::new(
                panel.caption.clone(),
                (x as i32, y as i32),
                figure::text(SMALL_PX, INK),
            ))?;
            let area = root
                .clone()
                .shrink((x, y + CAPTION_H), (frame.plot_w, frame.plot_h));
            let mut chart = ChartBuilder::on(&area).build_cartesian_2d(
                frame.x_range.0..frame.x_range.1,
                frame.y_range.0..frame.y_range.1,
            )?;
            field::draw_field(
                &mut chart,
                self.site,
                &panel.layer,
                &TIDE,
                frame.px_per_m(),
                5.0,
            )?;
            field::draw_obstacles_and_zones(&mut chart, self.site, frame.px_per_m())?;
            area.draw(&Rectangle::new(
                [(0, 0), (frame.plot_w as i32 - 1, frame.plot_h as i32 - 1)],
                RULE.stroke_width(1),
            ))?;
        }
        let bar_x = (self.width - SIDE_W + 16) as i32;
        let (_, h) = self.size();
        let bar_h = (h as i32 - TITLE_H as i32 - 70).clamp(80, 200);
        figure::draw_colour_bar(
            root,
            &|t| TIDE.at(t),
            -1.0,
            1.0,
            "amplitude",
            bar_x,
            TITLE_H as i32,
            bar_h,
        )?;
        root.draw(&Text::new(
            "sign is arbitrary",
            (bar_x - 8, TITLE_H as i32 + bar_h + 34),
            figure::text(SMALL_PX - 1.0, INK_SOFT),
        ))?;
        let _ = TICK_PX;
        Ok(())
    }
}
