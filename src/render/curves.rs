//! The generic "metric against setting, with a band" chart: error against time (free run
//! against layouts), error against sensor count per method, noise-multiplier and
//! sampling-interval curves. Each [`Series`] is a mean line with a shaded band between `lo`
//! and `hi` (for instance mean ± one standard deviation over Monte Carlo runs), drawn with its
//! own colour and marker; baselines are dashed slate. Optional horizontal [`RefLine`]s mark a
//! target. The legend sits in rows under the chart, so it never covers data.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::figure::{self, DrawResult, Figure, LegendGlyph, LABEL_PX, SMALL_PX, TICK_PX};
use super::palette::{SeriesStyle, HIGHLIGHT, INK, INK_SOFT, PAPER, RULE};

/// One curve with its band. `x`, `mean`, `lo` and `hi` have equal lengths; `lo ≤ mean ≤ hi`
/// is not required (a band may be one-sided), but all must be finite to be drawn.
#[derive(Debug, Clone)]
pub struct Series {
    pub label: String,
    pub x: Vec<f64>,
    pub mean: Vec<f64>,
    pub lo: Vec<f64>,
    pub hi: Vec<f64>,
    /// `None`: the next palette style in order; baselines use [`SeriesStyle::baseline`].
    pub style: Option<SeriesStyle>,
}

impl Series {
    pub fn new(
        label: impl Into<String>,
        x: Vec<f64>,
        mean: Vec<f64>,
        lo: Vec<f64>,
        hi: Vec<f64>,
    ) -> Self {
        let s = Series {
            label: label.into(),
            x,
            mean,
            lo,
            hi,
            style: None,
        };
        s.check();
        s
    }

    /// A series from mean and standard deviation: band `mean ± sd`.
    pub fn with_sd(label: impl Into<String>, x: Vec<f64>, mean: Vec<f64>, sd: &[f64]) -> Self {
        let lo = mean.iter().zip(sd).map(|(m, s)| m - s).collect();
        let hi = mean.iter().zip(sd).map(|(m, s)| m + s).collect();
        Series::new(label, x, mean, lo, hi)
    }

    pub fn styled(mut self, style: SeriesStyle) -> Self {
        self.style = Some(style);
        self
    }

    #[track_caller]
    fn check(&self) {
        let n = self.x.len();
        assert!(
            self.mean.len() == n && self.lo.len() == n && self.hi.len() == n,
            "series {}: x, mean, lo, hi lengths differ",
            self.label
        );
    }
}

/// A labelled horizontal line (target error, bound).
#[derive(Debug, Clone)]
pub struct RefLine {
    pub value: f64,
    pub label: String,
}

/// A chart of series against a setting.
#[derive(Debug, Clone)]
pub struct CurveChart {
    pub title: String,
    /// Axis descriptions with units, e.g. "time (s)", "field RMSE (m/s)".
    pub x_label: String,
    pub y_label: String,
    pub series: Vec<Series>,
    pub ref_lines: Vec<RefLine>,
    pub log_x: bool,
    pub log_y: bool,
    /// The x axis counts things (sensors): ticks on whole numbers only.
    pub integer_x: bool,
    /// Start the y axis at zero (for errors) instead of at the data minimum.
    pub y_from_zero: bool,
    pub width: u32,
    /// Height of the plotting area, px.
    pub plot_height: u32,
}

impl CurveChart {
    pub fn new(
        title: impl Into<String>,
        x_label: impl Into<String>,
        y_label: impl Into<String>,
    ) -> Self {
        CurveChart {
            title: title.into(),
            x_label: x_label.into(),
            y_label: y_label.into(),
            series: Vec::new(),
            ref_lines: Vec::new(),
            log_x: false,
            log_y: false,
            integer_x: false,
            y_from_zero: true,
            width: 880,
            plot_height: 380,
        }
    }

    fn styles(&self) -> Vec<SeriesStyle> {
        let mut next = 0;
        self.series
            .iter()
            .map(|s| {
                s.style.unwrap_or_else(|| {
                    let st = SeriesStyle::nth(next);
                    next += 1;
                    st
                })
            })
            .collect()
    }

    fn legend(&self) -> Vec<(LegendGlyph, String)> {
        let mut entries: Vec<(LegendGlyph, String)> = self
            .series
            .iter()
            .zip(self.styles())
            .map(|(s, st)| (LegendGlyph::Series(st), s.label.clone()))
            .collect();
        for r in &self.ref_lines {
            entries.push((
                LegendGlyph::Line {
                    colour: HIGHLIGHT,
                    dashed: true,
                },
                r.label.clone(),
            ));
        }
        entries
    }

    fn ranges(&self) -> ((f64, f64), (f64, f64)) {
        let usable = |v: f64, log: bool| v.is_finite() && (!log || v > 0.0);
        let (mut x0, mut x1) = (f64::INFINITY, f64::NEG_INFINITY);
        let (mut y0, mut y1) = (f64::INFINITY, f64::NEG_INFINITY);
        for s in &self.series {
            for k in 0..s.x.len() {
                if usable(s.x[k], self.log_x) {
                    x0 = x0.min(s.x[k]);
                    x1 = x1.max(s.x[k]);
                }
                for v in [s.mean[k], s.lo[k], s.hi[k]] {
                    if usable(v, self.log_y) {
                        y0 = y0.min(v);
                        y1 = y1.max(v);
                    }
                }
            }
        }
        for r in &self.ref_lines {
            if usable(r.value, self.log_y) {
                y0 = y0.min(r.value);
                y1 = y1.max(r.value);
            }
        }
        if !x0.is_finite() {
            (x0, x1) = (0.0, 1.0);
        }
        if !y0.is_finite() {
            (y0, y1) = (0.0, 1.0);
        }
        if x1 <= x0 {
            (x0, x1) = if self.log_x {
                (x0 / 2.0, x0 * 2.0)
            } else {
                (x0 - 0.5, x0 + 0.5)
            };
        }
        if y1 <= y0 {
            (y0, y1) = if self.log_y {
                (y0 / 2.0, y0 * 2.0)
            } else {
                (y0 - 0.5, y1 + 0.5)
            };
        }
        if self.log_y {
            (y0, y1) = (y0 / 1.15, y1 * 1.15);
        } else {
            let pad = 0.06 * (y1 - y0);
            y0 = if self.y_from_zero && y0 >= 0.0 {
                0.0
            } else {
                y0 - pad
            };
            y1 += pad;
        }
        if !self.log_x {
            let pad = 0.02 * (x1 - x0);
            (x0, x1) = (x0 - pad, x1 + pad);
        } else {
            (x0, x1) = (x0 / 1.08, x1 * 1.08);
        }
        ((x0, x1), (y0, y1))
    }
}

/// Tick values for a log axis over `[lo, hi]`: 1-2-5 in each decade, or every integer
/// multiple when the range spans less than a decade (plotters alone labels only powers of 10).
pub fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    if lo.is_nan() || hi.is_nan() || lo <= 0.0 || hi <= lo {
        return Vec::new();
    }
    let pick = |mantissas: &[f64]| -> Vec<f64> {
        let mut out = Vec::new();
        let mut decade = 10f64.powf(lo.log10().floor());
        while decade <= hi {
            for m in mantissas {
                let v = m * decade;
                if v >= lo * (1.0 - 1e-12) && v <= hi * (1.0 + 1e-12) {
                    out.push(v);
                }
            }
            decade *= 10.0;
        }
        out
    };
    let coarse = pick(&[1.0, 2.0, 5.0]);
    if coarse.len() >= 3 {
        coarse
    } else {
        pick(&[1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0])
    }
}

/// Whole-number ticks over `[lo, hi]`, at most about ten (every 2nd, 5th, ... whole number
/// on long ranges); empty when the range holds none.
pub fn integer_ticks(lo: f64, hi: f64) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite()) || hi < lo {
        return Vec::new();
    }
    let (first, last) = (lo.ceil() as i64, hi.floor() as i64);
    if last < first {
        return Vec::new();
    }
    let span = (last - first) as f64;
    let step = figure::nice_ticks(0.0, span.max(1.0), 10)
        .get(1)
        .map_or(1, |s| (s.round() as i64).max(1));
    (first..=last)
        .filter(|v| (v - first) % step == 0)
        .map(|v| v as f64)
        .collect()
}

const TITLE_H: u32 = 40;
const MARGIN: u32 = 14;
const Y_LABEL_W: u32 = 78;
const X_LABEL_H: u32 = 52;

impl Figure for CurveChart {
    fn size(&self) -> (u32, u32) {
        // Legend height depends on text widths; reserve generously by entry count.
        let rows = figure::legend_rows_estimate(&self.legend(), self.width - 2 * MARGIN - 10);
        (
            self.width,
            TITLE_H + self.plot_height + X_LABEL_H + 24 * rows + 2 * MARGIN,
        )
    }

    fn draw<DB>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult
    where
        DB: DrawingBackend,
        DB::ErrorType: 'static,
    {
        let (w, _) = self.size();
        figure::draw_title(root, &self.title, MARGIN as i32, 10)?;
        let chart_area = root.clone().shrink(
            (MARGIN, TITLE_H),
            (w - 2 * MARGIN, self.plot_height + X_LABEL_H),
        );
        let ((x0, x1), (y0, y1)) = self.ranges();
        // Sweeps use a handful of discrete settings: label exactly those on a log axis.
        let mut settings: Vec<f64> = self
            .series
            .iter()
            .flat_map(|s| s.x.iter().copied())
            .filter(|v| v.is_finite() && *v > 0.0)
            .collect();
        settings.sort_by(f64::total_cmp);
        settings.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs());
        let x_log_ticks = if (2..=10).contains(&settings.len()) {
            settings
        } else {
            log_ticks(x0, x1)
        };
        // Counting axes: ask for no more labels than whole numbers in range, so the 1-2-5 steps
        // plotters picks are whole numbers, and print only whole numbers.
        let n_x_labels = if self.integer_x && !self.log_x {
            integer_ticks(x0, x1).len().clamp(1, 10)
        } else {
            8
        };
        let integer_x = self.integer_x;
        let x_format = move |v: &f64| {
            if integer_x && (v - v.round()).abs() > 1e-9 {
                String::new()
            } else {
                figure::format_axis_value(v)
            }
        };
        macro_rules! with_chart {
            ($xr:expr, $yr:expr) => {{
                let mut chart = ChartBuilder::on(&chart_area)
                    .margin_right(16)
                    .x_label_area_size(X_LABEL_H)
                    .y_label_area_size(Y_LABEL_W)
                    .build_cartesian_2d($xr, $yr)?;
                chart
                    .configure_mesh()
                    .light_line_style(PAPER)
                    .bold_line_style(RULE.stroke_width(1))
                    .x_desc(self.x_label.as_str())
                    .y_desc(self.y_label.as_str())
                    .axis_desc_style(figure::text(LABEL_PX, INK))
                    .label_style(figure::text(TICK_PX, INK_SOFT))
                    .axis_style(INK.stroke_width(1))
                    .x_labels(n_x_labels)
                    .y_labels(7)
                    .x_label_formatter(&x_format)
                    .y_label_formatter(&figure::format_axis_value)
                    .draw()?;
                self.draw_data(root, &mut chart)?;
            }};
        }
        match (self.log_x, self.log_y) {
            (false, false) => with_chart!(x0..x1, y0..y1),
            (true, false) => with_chart!(
                (x0..x1).log_scale().with_key_points(x_log_ticks.clone()),
                y0..y1
            ),
            (false, true) => with_chart!(
                x0..x1,
                (y0..y1).log_scale().with_key_points(log_ticks(y0, y1))
            ),
            (true, true) => with_chart!(
                (x0..x1).log_scale().with_key_points(x_log_ticks.clone()),
                (y0..y1).log_scale().with_key_points(log_ticks(y0, y1))
            ),
        }
        let legend_y = (TITLE_H + self.plot_height + X_LABEL_H + 6) as i32;
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

impl CurveChart {
    fn draw_data<DB, X, Y>(
        &self,
        root: &DrawingArea<DB, Shift>,
        chart: &mut ChartContext<'_, DB, Cartesian2d<X, Y>>,
    ) -> DrawResult
    where
        DB: DrawingBackend,
        DB::ErrorType: 'static,
        X: Ranged<ValueType = f64>,
        Y: Ranged<ValueType = f64>,
    {
        let ok = |v: f64, log: bool| v.is_finite() && (!log || v > 0.0);
        let styles = self.styles();
        // Bands first, all of them, so no band hides another series' line.
        for (s, st) in self.series.iter().zip(&styles) {
            let idx: Vec<usize> = (0..s.x.len())
                .filter(|&k| {
                    ok(s.x[k], self.log_x) && ok(s.lo[k], self.log_y) && ok(s.hi[k], self.log_y)
                })
                .collect();
            if idx.len() < 2 {
                continue;
            }
            let mut pts: Vec<(f64, f64)> = idx.iter().map(|&k| (s.x[k], s.hi[k])).collect();
            pts.extend(idx.iter().rev().map(|&k| (s.x[k], s.lo[k])));
            let alpha = if st.dashed { 0.14 } else { 0.20 };
            chart.draw_series(std::iter::once(Polygon::new(
                pts,
                st.colour.mix(alpha).filled(),
            )))?;
        }
        let (x_lo, x_hi) = {
            let r = chart.x_range();
            (r.start, r.end)
        };
        for r in &self.ref_lines {
            if ok(r.value, self.log_y) {
                let a = chart.backend_coord(&(x_lo, r.value));
                let b = chart.backend_coord(&(x_hi, r.value));
                figure::draw_line(root, &[a, b], HIGHLIGHT, 2, true)?;
            }
        }
        for (s, st) in self.series.iter().zip(&styles) {
            let pts: Vec<(i32, i32)> = (0..s.x.len())
                .filter(|&k| ok(s.x[k], self.log_x) && ok(s.mean[k], self.log_y))
                .map(|k| chart.backend_coord(&(s.x[k], s.mean[k])))
                .collect();
            if pts.len() >= 2 {
                figure::draw_line(
                    root,
                    &pts,
                    st.colour,
                    if st.dashed { 2 } else { 3 },
                    st.dashed,
                )?;
            }
            // At most about a dozen markers per series, evenly spread, so dense time series
            // stay readable while shape still identifies the series.
            let stride = pts.len().div_ceil(12).max(1);
            let offset = (styles.iter().position(|x| x == st).unwrap_or(0) * stride
                / styles.len().max(1))
            .min(stride - 1);
            for p in pts.iter().skip(offset).step_by(stride) {
                figure::draw_marker(root, *p, st.marker, 5.0, st.colour, PAPER)?;
            }
        }
        let _ = SMALL_PX;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn integer_ticks_are_whole_numbers() {
        // The loss chart's x range, padded: 0..3 sensors lost.
        assert_eq!(integer_ticks(-0.06, 3.06), vec![0.0, 1.0, 2.0, 3.0]);
        assert_eq!(integer_ticks(0.8, 10.2).len(), 10);
        let long = integer_ticks(0.0, 40.0);
        assert!(
            long.len() <= 11 && long.iter().all(|v| v.fract() == 0.0),
            "{long:?}"
        );
        assert!(integer_ticks(0.2, 0.8).is_empty());
    }

    #[test]
    fn log_ticks_follow_one_two_five() {
        let t = log_ticks(0.2, 5.0);
        assert_eq!(t.len(), 5, "{t:?}");
        assert!((t[0] - 0.2).abs() < 1e-12 && (t[4] - 5.0).abs() < 1e-12);
        // Less than a decade: finer steps.
        assert!(!log_ticks(1.1, 1.9).is_empty());
        assert!(log_ticks(-1.0, 2.0).is_empty());
    }
}
