//! The cost–error chart: every scored layout as a point (cost, error) with an error bar for
//! its spread, grouped by method, the Pareto front (no other layout is both cheaper and at
//! least as accurate) as a step line, an optional target error and the recommended layout
//! ringed and labelled.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::curves::RefLine;
use super::figure::{self, DrawResult, Figure, LegendGlyph, LABEL_PX, SMALL_PX, TICK_PX};
use super::palette::{SeriesStyle, HIGHLIGHT, INK, INK_SOFT, PAPER, RULE};

/// One scored layout: cost and error (mean with a `lo`–`hi` spread).
#[derive(Debug, Clone, Copy)]
pub struct ParetoPoint {
    pub cost: f64,
    pub mean: f64,
    pub lo: f64,
    pub hi: f64,
}

/// The layouts of one method.
#[derive(Debug, Clone)]
pub struct ParetoGroup {
    pub label: String,
    pub points: Vec<ParetoPoint>,
    pub style: Option<SeriesStyle>,
}

/// The cost–error figure.
#[derive(Debug, Clone)]
pub struct ParetoChart {
    pub title: String,
    /// e.g. "cost (EUR)".
    pub x_label: String,
    /// e.g. "time-mean RMSE (m/s)".
    pub y_label: String,
    pub groups: Vec<ParetoGroup>,
    pub target: Option<RefLine>,
    /// The recommended layout: point and label.
    pub highlight: Option<(ParetoPoint, String)>,
    pub width: u32,
    pub plot_height: u32,
}

impl ParetoChart {
    pub fn new(
        title: impl Into<String>,
        x_label: impl Into<String>,
        y_label: impl Into<String>,
    ) -> Self {
        ParetoChart {
            title: title.into(),
            x_label: x_label.into(),
            y_label: y_label.into(),
            groups: Vec::new(),
            target: None,
            highlight: None,
            width: 880,
            plot_height: 400,
        }
    }

    fn styles(&self) -> Vec<SeriesStyle> {
        let mut next = 0;
        self.groups
            .iter()
            .map(|g| {
                g.style.unwrap_or_else(|| {
                    let s = SeriesStyle::nth(next);
                    next += 1;
                    s
                })
            })
            .collect()
    }

    fn legend(&self) -> Vec<(LegendGlyph, String)> {
        let mut entries: Vec<(LegendGlyph, String)> = self
            .groups
            .iter()
            .zip(self.styles())
            .map(|(g, s)| {
                (
                    LegendGlyph::Marker {
                        marker: s.marker,
                        fill: s.colour,
                        edge: INK,
                        size: 5.0,
                    },
                    g.label.clone(),
                )
            })
            .collect();
        entries.push((
            LegendGlyph::Line {
                colour: INK,
                dashed: false,
            },
            "Pareto front".to_string(),
        ));
        if let Some(t) = &self.target {
            entries.push((
                LegendGlyph::Line {
                    colour: HIGHLIGHT,
                    dashed: true,
                },
                t.label.clone(),
            ));
        }
        entries
    }
}

/// Indices (into `points`) of the Pareto-optimal points, cheapest first: a point is kept
/// when no other point has lower-or-equal cost and lower-or-equal mean error with one of them
/// strictly lower.
pub fn pareto_front(points: &[ParetoPoint]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..points.len())
        .filter(|&k| points[k].cost.is_finite() && points[k].mean.is_finite())
        .collect();
    order.sort_by(|&a, &b| {
        points[a]
            .cost
            .total_cmp(&points[b].cost)
            .then(points[a].mean.total_cmp(&points[b].mean))
    });
    let mut front = Vec::new();
    let mut best = f64::INFINITY;
    for k in order {
        if points[k].mean < best {
            best = points[k].mean;
            front.push(k);
        }
    }
    front
}

const TITLE_H: u32 = 40;
const MARGIN: u32 = 14;

impl Figure for ParetoChart {
    fn size(&self) -> (u32, u32) {
        let rows = figure::legend_rows_estimate(&self.legend(), self.width - 2 * MARGIN - 10);
        (
            self.width,
            TITLE_H + self.plot_height + 52 + 24 * rows + 2 * MARGIN,
        )
    }

    fn draw<DB>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult
    where
        DB: DrawingBackend,
        DB::ErrorType: 'static,
    {
        let (w, _) = self.size();
        figure::draw_title(root, &self.title, MARGIN as i32, 10)?;
        let all: Vec<ParetoPoint> = self
            .groups
            .iter()
            .flat_map(|g| g.points.iter().copied())
            .collect();
        let finite = |v: f64| v.is_finite();
        let (mut x0, mut x1, mut y0, mut y1) = (
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
        );
        for p in &all {
            if finite(p.cost) {
                (x0, x1) = (x0.min(p.cost), x1.max(p.cost));
            }
            for v in [p.mean, p.lo, p.hi] {
                if finite(v) {
                    (y0, y1) = (y0.min(v), y1.max(v));
                }
            }
        }
        if let Some(t) = &self.target {
            (y0, y1) = (y0.min(t.value), y1.max(t.value));
        }
        if !x0.is_finite() {
            (x0, x1) = (0.0, 1.0);
        }
        if !y0.is_finite() {
            (y0, y1) = (0.0, 1.0);
        }
        let px = 0.05 * (x1 - x0).max(1e-9);
        let py = 0.08 * (y1 - y0).max(1e-9);
        let x_range = (
            (x0 - px).max(if x0 >= 0.0 { 0.0 } else { f64::NEG_INFINITY }),
            x1 + px,
        );
        let y_range = (if y0 >= 0.0 { 0.0 } else { y0 - py }, y1 + py);
        let area = root
            .clone()
            .shrink((MARGIN, TITLE_H), (w - 2 * MARGIN, self.plot_height + 52));
        let mut chart = ChartBuilder::on(&area)
            .margin_right(16)
            .x_label_area_size(52)
            .y_label_area_size(78)
            .build_cartesian_2d(x_range.0..x_range.1, y_range.0..y_range.1)?;
        chart
            .configure_mesh()
            .light_line_style(PAPER)
            .bold_line_style(RULE.stroke_width(1))
            .x_desc(self.x_label.as_str())
            .y_desc(self.y_label.as_str())
            .axis_desc_style(figure::text(LABEL_PX, INK))
            .label_style(figure::text(TICK_PX, INK_SOFT))
            .axis_style(INK.stroke_width(1))
            .x_labels(8)
            .y_labels(7)
            .x_label_formatter(&figure::format_axis_value)
            .y_label_formatter(&figure::format_axis_value)
            .draw()?;
        if let Some(t) = &self.target {
            let a = chart.backend_coord(&(x_range.0, t.value));
            let b = chart.backend_coord(&(x_range.1, t.value));
            figure::draw_line(root, &[a, b], HIGHLIGHT, 2, true)?;
        }
        // Front as a staircase: cost rises, error steps down.
        let front = pareto_front(&all);
        if !front.is_empty() {
            let mut stairs = Vec::new();
            for (n, &k) in front.iter().enumerate() {
                if n > 0 {
                    stairs.push(chart.backend_coord(&(all[k].cost, all[front[n - 1]].mean)));
                }
                stairs.push(chart.backend_coord(&(all[k].cost, all[k].mean)));
            }
            stairs.push(chart.backend_coord(&(x_range.1, all[*front.last().unwrap_or(&0)].mean)));
            figure::draw_line(root, &stairs, INK, 1, false)?;
        }
        for (g, st) in self.groups.iter().zip(self.styles()) {
            for p in &g.points {
                if !(finite(p.cost) && finite(p.mean)) {
                    continue;
                }
                if finite(p.lo) && finite(p.hi) {
                    let a = chart.backend_coord(&(p.cost, p.lo));
                    let b = chart.backend_coord(&(p.cost, p.hi));
                    root.draw(&PathElement::new(
                        vec![a, b],
                        st.colour.mix(0.7).stroke_width(1),
                    ))?;
                    for end in [a, b] {
                        root.draw(&PathElement::new(
                            vec![(end.0 - 3, end.1), (end.0 + 3, end.1)],
                            st.colour.mix(0.7).stroke_width(1),
                        ))?;
                    }
                }
                figure::draw_marker(
                    root,
                    chart.backend_coord(&(p.cost, p.mean)),
                    st.marker,
                    5.0,
                    st.colour,
                    INK,
                )?;
            }
        }
        if let Some((p, label)) = &self.highlight {
            let at = chart.backend_coord(&(p.cost, p.mean));
            root.draw(&Circle::new(at, 12, HIGHLIGHT.stroke_width(3)))?;
            let style = figure::text(SMALL_PX, HIGHLIGHT);
            let (tw, th) = root.estimate_text_size(label, &style).unwrap_or((80, 13));
            let (tw, th) = (tw as i32, th as i32);
            // Label up and to the right unless that runs off the plot; on a white box with a
            // leader so it stays readable over markers and error bars.
            // Of eight places around the point, take the one covering fewest other points.
            let (left, top) = chart.backend_coord(&(x_range.0, y_range.1));
            let (right, bottom) = chart.backend_coord(&(x_range.1, y_range.0));
            let others: Vec<(i32, i32)> = all
                .iter()
                .filter(|q| finite(q.cost) && finite(q.mean))
                .flat_map(|q| {
                    [q.mean, q.lo, q.hi]
                        .into_iter()
                        .filter(|v| finite(*v))
                        .map(move |v| (q.cost, v))
                })
                .map(|c| chart.backend_coord(&c))
                .collect();
            let places = [
                (22, -46),
                (22, 24),
                (-22 - tw, -46),
                (-22 - tw, 24),
                (-tw / 2, -56),
                (-tw / 2, 34),
                (30, -th / 2),
                (-30 - tw, -th / 2),
            ];
            let cost_of = |(dx, dy): (i32, i32)| {
                let (x0, y0, x1, y1) = (
                    at.0 + dx - 10,
                    at.1 + dy - 10,
                    at.0 + dx + tw + 10,
                    at.1 + dy + th + 14,
                );
                let outside = x0 < left || x1 > right || y0 < top || y1 > bottom;
                let covered = others
                    .iter()
                    .filter(|(px, py)| *px >= x0 && *px <= x1 && *py >= y0 && *py <= y1)
                    .count();
                covered + if outside { 1000 } else { 0 }
            };
            let best = places
                .iter()
                .copied()
                .min_by_key(|p| cost_of(*p))
                .unwrap_or(places[0]);
            let (x, y) = (at.0 + best.0, at.1 + best.1);
            let lead_x = if x > at.0 { x - 4 } else { x + tw + 4 };
            root.draw(&PathElement::new(
                vec![(at.0, at.1 - 12), (lead_x, y + th / 2 + 2)],
                HIGHLIGHT.stroke_width(1),
            ))?;
            root.draw(&Rectangle::new(
                [(x - 4, y - 2), (x + tw + 4, y + th + 6)],
                PAPER.filled(),
            ))?;
            root.draw(&Rectangle::new(
                [(x - 4, y - 2), (x + tw + 4, y + th + 6)],
                HIGHLIGHT.stroke_width(1),
            ))?;
            root.draw(&Text::new(label.clone(), (x, y + 2), style))?;
        }
        let legend_y = (TITLE_H + self.plot_height + 52 + 6) as i32;
        figure::draw_legend_rows(
            root,
            &self.legend(),
            (MARGIN + 10) as i32,
            legend_y,
            (w - 2 * MARGIN - 10) as i32,
        )?;
        Ok(())
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::needless_range_loop)]
mod tests {
    use super::*;

    fn p(cost: f64, mean: f64) -> ParetoPoint {
        ParetoPoint {
            cost,
            mean,
            lo: mean,
            hi: mean,
        }
    }

    #[test]
    fn front_keeps_only_undominated_points() {
        let pts = [
            p(10.0, 1.0),
            p(5.0, 2.0),
            p(7.0, 2.5),
            p(12.0, 0.5),
            p(12.0, 0.9),
            p(20.0, 0.6),
        ];
        assert_eq!(pareto_front(&pts), vec![1, 0, 3]);
        assert!(pareto_front(&[]).is_empty());
        assert_eq!(pareto_front(&[p(1.0, f64::NAN), p(2.0, 1.0)]), vec![1]);
    }
}
