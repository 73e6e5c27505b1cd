//! The site map: a plan view (or slice) in metres at equal scale with the background field,
//! obstacles, hatched exclusion zones, candidate mounts, chosen sensors with rank labels,
//! beams with their range gates, existing sensors ringed, a legend and a colour bar in a side
//! panel.
//!
//! Input is plain data: the validated [`Site`] for geometry, an optional [`FieldLayer`], the
//! chosen sensors as [`MapSensor`]s (from a `select::Layout` via [`MapSensor::from_layout`])
//! and beam traces as [`MapBeam`]s (from `sensors`, converted by the caller). Rank labels are
//! placed greedily at the first of eight positions around the marker that overlaps no label
//! or marker already drawn.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::field::{self, FieldLayer, MapFrame};
use super::figure::{self, DrawResult, Figure, LegendGlyph, LABEL_PX, SMALL_PX, TICK_PX};
use super::palette::{
    Marker, SeriesStyle, CANDIDATE, DUSK, EXISTING, INK, INK_SOFT, MARKERS, OBSTACLE, PAPER, RULE,
    SERIES, TIDE, ZONE,
};
use crate::io::{Measurement, Plane, PlanePoint, Site};
use crate::select::Layout;

/// A sensor to show on the map.
#[derive(Debug, Clone)]
pub struct MapSensor {
    pub candidate_idx: usize,
    pub kind_idx: usize,
    /// Rank label (1-based); `None` draws no label.
    pub rank: Option<usize>,
    /// Already on site (drawn with a ring).
    pub existing: bool,
}

impl MapSensor {
    /// The sensors of a layout, ranked as in the layout; kept entries count as existing.
    pub fn from_layout(layout: &Layout) -> Vec<MapSensor> {
        layout
            .entries
            .iter()
            .map(|e| MapSensor {
                candidate_idx: e.candidate_idx,
                kind_idx: e.kind_idx,
                rank: Some(e.rank),
                existing: e.kept,
            })
            .collect()
    }
}

/// One beam projected on the map plane: from its origin to where it stops (obstacle or
/// domain edge), with the centres of the range gates it actually reads.
#[derive(Debug, Clone)]
pub struct MapBeam {
    pub kind_idx: usize,
    pub origin: PlanePoint,
    pub stop: PlanePoint,
    pub gates: Vec<PlanePoint>,
}

impl MapBeam {
    /// The beams of every beam-kind sensor in `sensors`, traced through the site by
    /// `sensors::beam_traces` (stopped by solids, obstacles and the domain edge).
    pub fn for_sensors(site: &Site, sensors: &[MapSensor]) -> Vec<MapBeam> {
        sensors
            .iter()
            .flat_map(|s| {
                crate::sensors::beam_traces(site, s.candidate_idx, s.kind_idx)
                    .into_iter()
                    .map(move |t| MapBeam {
                        kind_idx: s.kind_idx,
                        origin: t.origin,
                        stop: t.end,
                        gates: t.gate_centres,
                    })
            })
            .collect()
    }
}

/// The site map figure.
#[derive(Debug, Clone)]
pub struct SiteMap<'a> {
    pub site: &'a Site,
    pub title: String,
    pub background: Option<FieldLayer>,
    pub sensors: Vec<MapSensor>,
    pub beams: Vec<MapBeam>,
    /// Draw every candidate mount as a small mark.
    pub show_candidates: bool,
    /// Total width, px (the report uses 880).
    pub width: u32,
}

const SIDE_W: u32 = 200;
const TITLE_H: u32 = 40;
const Y_LABEL_W: u32 = 64;
const X_LABEL_H: u32 = 50;
const MARGIN: u32 = 12;
const COLOUR_BAR_H: u32 = 160;

impl<'a> SiteMap<'a> {
    pub fn new(site: &'a Site, title: impl Into<String>) -> Self {
        SiteMap {
            site,
            title: title.into(),
            background: None,
            sensors: Vec::new(),
            beams: Vec::new(),
            show_candidates: true,
            width: 880,
        }
    }

    /// A map of `layout` on `site`: its sensors ranked, existing ones ringed, beams traced.
    pub fn for_layout(
        site: &'a Site,
        title: impl Into<String>,
        layout: &Layout,
        background: Option<FieldLayer>,
    ) -> Self {
        let sensors = MapSensor::from_layout(layout);
        let beams = MapBeam::for_sensors(site, &sensors);
        SiteMap {
            background,
            sensors,
            beams,
            ..SiteMap::new(site, title)
        }
    }

    fn frame(&self) -> MapFrame {
        let max_w = self.width - SIDE_W - Y_LABEL_W - 2 * MARGIN;
        MapFrame::fit(field::domain_extent(self.site), max_w, 640, 300)
    }

    /// Style of a sensor kind: colour and marker by kind index, so a kind looks the same in
    /// every figure.
    pub fn kind_style(kind_idx: usize) -> SeriesStyle {
        SeriesStyle {
            colour: SERIES[kind_idx % SERIES.len()],
            marker: MARKERS[kind_idx % MARKERS.len()],
            dashed: false,
        }
    }
}

impl Figure for SiteMap<'_> {
    fn size(&self) -> (u32, u32) {
        let f = self.frame();
        let h = TITLE_H + f.plot_h + X_LABEL_H + 2 * MARGIN;
        (self.width, h.max(self.side_panel_height()))
    }

    fn draw<DB>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult
    where
        DB: DrawingBackend,
        DB::ErrorType: 'static,
    {
        let site = self.site;
        let frame = self.frame();
        let (w, _) = self.size();
        figure::draw_title(root, &self.title, MARGIN as i32, 10)?;

        let chart_w = Y_LABEL_W + frame.plot_w + MARGIN;
        let chart_h = frame.plot_h + X_LABEL_H + MARGIN;
        let chart_area = root.clone().shrink((MARGIN, TITLE_H), (chart_w, chart_h));
        let (x_name, y_name) = match site.plane {
            Plane::Xy => ("x, east (m)", "y, north (m)"),
            Plane::Xz => ("x, along slice (m)", "z, height (m)"),
        };
        let mut chart = ChartBuilder::on(&chart_area)
            .margin_top(0)
            .margin_right(MARGIN)
            .x_label_area_size(X_LABEL_H)
            .y_label_area_size(Y_LABEL_W)
            .build_cartesian_2d(
                frame.x_range.0..frame.x_range.1,
                frame.y_range.0..frame.y_range.1,
            )?;
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc(x_name)
            .y_desc(y_name)
            .axis_desc_style(figure::text(LABEL_PX, INK))
            .label_style(figure::text(TICK_PX, INK_SOFT))
            .axis_style(INK.stroke_width(1))
            .x_labels(7)
            .y_labels(6)
            .x_label_formatter(&figure::format_axis_value)
            .y_label_formatter(&figure::format_axis_value)
            .draw()?;
        // Domain backdrop, so the domain edge is visible on padded frames.
        let ext = field::domain_extent(site);
        chart.draw_series(std::iter::once(Rectangle::new(
            [(ext[0], ext[2]), (ext[1], ext[3])],
            RGBColor(0xf3, 0xf4, 0xf6).filled(),
        )))?;
        let px_per_m = frame.px_per_m();
        let colour_map = match &self.background {
            Some(layer) if layer.diverging => TIDE,
            _ => DUSK,
        };
        match &self.background {
            Some(layer) => field::draw_field(&mut chart, site, layer, &colour_map, px_per_m, 3.0)?,
            None => field::draw_solid_cells(&mut chart, site)?,
        }
        chart.draw_series(std::iter::once(Rectangle::new(
            [(ext[0], ext[2]), (ext[1], ext[3])],
            RULE.stroke_width(1),
        )))?;
        field::draw_obstacles_and_zones(&mut chart, site, px_per_m)?;

        // Everything below is in pixels, on the root area.
        let to_px = |p: PlanePoint| chart.backend_coord(&(p[0], p[1]));
        let mut taken: Vec<[i32; 4]> = Vec::new();
        if self.show_candidates {
            for c in &site.candidates {
                let (x, y) = to_px(c.position);
                figure::draw_marker(root, (x, y), Marker::Plus, 4.0, CANDIDATE, PAPER)?;
            }
        }
        for beam in &self.beams {
            let style = SiteMap::kind_style(beam.kind_idx);
            figure::draw_line(
                root,
                &[to_px(beam.origin), to_px(beam.stop)],
                style.colour,
                2,
                false,
            )?;
            for g in &beam.gates {
                let (x, y) = to_px(*g);
                root.draw(&Circle::new((x, y), 3, style.colour.filled()))?;
                root.draw(&Circle::new((x, y), 3, PAPER.stroke_width(1)))?;
            }
        }
        // Several sensors on one mount sit side by side, 14 px apart, centred on the mount.
        let sensor_px: Vec<(i32, i32)> = self
            .sensors
            .iter()
            .enumerate()
            .map(|(n, s)| {
                let same: Vec<usize> = (0..self.sensors.len())
                    .filter(|&m| self.sensors[m].candidate_idx == s.candidate_idx)
                    .collect();
                let slot = same.iter().position(|&m| m == n).unwrap_or(0) as i32;
                let (x, y) = to_px(site.candidates[s.candidate_idx].position);
                (x + 14 * slot - 7 * (same.len() as i32 - 1), y)
            })
            .collect();
        for &(x, y) in &sensor_px {
            taken.push([x - 9, y - 9, x + 9, y + 9]);
        }
        for (s, &at) in self.sensors.iter().zip(&sensor_px) {
            let style = SiteMap::kind_style(s.kind_idx);
            if s.existing {
                root.draw(&Circle::new(at, 12, PAPER.stroke_width(5)))?;
                root.draw(&Circle::new(at, 12, EXISTING.stroke_width(2)))?;
            }
            figure::draw_marker_with_halo(root, at, style.marker, 6.5, style.colour)?;
        }
        let label_style = figure::text(SMALL_PX, INK);
        for (s, &at) in self.sensors.iter().zip(&sensor_px) {
            let Some(rank) = s.rank else { continue };
            let label = rank.to_string();
            let (tw, th) = root
                .estimate_text_size(&label, &label_style)
                .map(|(a, b)| (a as i32, b as i32))
                .unwrap_or((8 * label.len() as i32, 13));
            let (bw, bh) = (tw + 6, th + 4);
            let offsets = [
                (10, -bh - 4),
                (10, 4),
                (-bw - 10, -bh - 4),
                (-bw - 10, 4),
                (-bw / 2, -bh - 12),
                (-bw / 2, 12),
                (14, -bh / 2),
                (-bw - 14, -bh / 2),
            ];
            let overlaps = |r: &[i32; 4]| {
                taken
                    .iter()
                    .any(|t| r[0] < t[2] && t[0] < r[2] && r[1] < t[3] && t[1] < r[3])
            };
            let choice = offsets
                .iter()
                .map(|(dx, dy)| [at.0 + dx, at.1 + dy, at.0 + dx + bw, at.1 + dy + bh])
                .find(|r| !overlaps(r))
                .unwrap_or([at.0 + 10, at.1 - bh - 4, at.0 + 10 + bw, at.1 - 4]);
            root.draw(&Rectangle::new(
                [(choice[0], choice[1]), (choice[2], choice[3])],
                PAPER.mix(0.88).filled(),
            ))?;
            root.draw(&Rectangle::new(
                [(choice[0], choice[1]), (choice[2], choice[3])],
                INK_SOFT.stroke_width(1),
            ))?;
            root.draw(&Text::new(
                label,
                (choice[0] + 3, choice[1] + 2),
                label_style.clone(),
            ))?;
            taken.push(choice);
        }

        // Side panel: legend, then the colour bar.
        let side_x = (w - SIDE_W + 8) as i32;
        let mut y = TITLE_H as i32;
        root.draw(&Text::new(
            "Legend",
            (side_x, y),
            figure::text(TICK_PX, INK),
        ))?;
        y += 26;
        for (glyph, label) in self.legend_entries() {
            figure::draw_glyph(root, &glyph, side_x, y + 8)?;
            root.draw(&Text::new(
                label,
                (side_x + 38, y),
                figure::text(SMALL_PX, INK),
            ))?;
            y += 26;
        }
        if let Some(layer) = &self.background {
            let (lo, hi) = layer.range();
            y += 16;
            let map = colour_map;
            figure::draw_colour_bar(
                root,
                &|t| map.at(t),
                lo,
                hi,
                &layer.caption(),
                side_x,
                y,
                COLOUR_BAR_H as i32,
            )?;
        }
        Ok(())
    }
}

impl SiteMap<'_> {
    fn side_panel_height(&self) -> u32 {
        let legend = TITLE_H + 26 + 26 * self.legend_entries().len() as u32;
        let bar = if self.background.is_some() {
            16 + 28 + COLOUR_BAR_H + 20
        } else {
            0
        };
        legend + bar + MARGIN
    }

    fn legend_entries(&self) -> Vec<(LegendGlyph, String)> {
        let site = self.site;
        let mut entries = Vec::new();
        let mut kinds: Vec<usize> = self.sensors.iter().map(|s| s.kind_idx).collect();
        kinds.sort_unstable();
        kinds.dedup();
        for k in kinds {
            let style = SiteMap::kind_style(k);
            entries.push((
                LegendGlyph::Marker {
                    marker: style.marker,
                    fill: style.colour,
                    edge: INK,
                    size: 6.0,
                },
                format!("{} sensor", site.kinds[k].name),
            ));
        }
        if self.sensors.iter().any(|s| s.existing) {
            entries.push((LegendGlyph::Ring(EXISTING), "existing (kept)".to_string()));
        }
        let beam_kinds = self.beams.iter().any(|_| true)
            || self
                .sensors
                .iter()
                .any(|s| matches!(site.kinds[s.kind_idx].measurement, Measurement::Beam(_)));
        if beam_kinds && !self.beams.is_empty() {
            let c = SiteMap::kind_style(self.beams[0].kind_idx).colour;
            entries.push((LegendGlyph::Beam(c), "beam, range gates".to_string()));
        }
        if self.show_candidates && !site.candidates.is_empty() {
            entries.push((
                LegendGlyph::Marker {
                    marker: Marker::Plus,
                    fill: CANDIDATE,
                    edge: PAPER,
                    size: 4.0,
                },
                "candidate mount".to_string(),
            ));
        }
        let has_solid = !site.obstacles.is_empty()
            || matches!(&site.domain, crate::io::Domain::Grid(g) if g.solid.iter().any(|s| *s));
        if has_solid {
            entries.push((
                LegendGlyph::Swatch(OBSTACLE),
                "obstacle / solid".to_string(),
            ));
        }
        if !site.zones.is_empty() {
            entries.push((LegendGlyph::Hatch(ZONE), "exclusion zone".to_string()));
        }
        entries
    }
}
