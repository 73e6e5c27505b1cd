//! The plumbing every figure shares: the [`Figure`] trait (one drawing routine, any plotters
//! backend), rendering to an SVG string or PNG bytes, the bundled font, text styles, markers,
//! the legend row under a chart and the colour bar.
//!
//! PNG text needs a real font: DejaVu Sans (Bitstream Vera licence, `assets/`) is compiled in
//! and registered with plotters' `ab_glyph` support on first use, so figures look the same on
//! every machine. SVG output names the generic `sans-serif` family and lets the viewer choose.
//! Files are written only through `io::atomic`.

use std::path::Path;
use std::sync::Once;

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontStyle;

use super::palette::{Marker, SeriesStyle, INK, INK_SOFT, PAPER};
use super::RenderError;

/// Result of a drawing routine; any plotters backend error is boxed.
pub type DrawResult = Result<(), Box<dyn std::error::Error + Send + Sync>>;

/// Font family name every figure asks for.
pub const FONT: &str = "sans-serif";
static FONT_BYTES: &[u8] = include_bytes!("../../assets/DejaVuSans.ttf");
static FONT_ONCE: Once = Once::new();

/// Title size, px.
pub const TITLE_PX: f64 = 20.0;
/// Axis description size, px.
pub const LABEL_PX: f64 = 16.0;
/// Tick label and legend size, px.
pub const TICK_PX: f64 = 14.0;
/// Small annotation size (rank labels, panel captions), px.
pub const SMALL_PX: f64 = 13.0;

/// A picture that can draw itself on any plotters backend.
pub trait Figure {
    /// Width and height in pixels (also the SVG viewBox).
    fn size(&self) -> (u32, u32);
    /// Draws the whole figure on `root` (already cleared to paper white).
    fn draw<DB>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult
    where
        DB: DrawingBackend,
        DB::ErrorType: 'static;
}

fn register_font() {
    FONT_ONCE.call_once(|| {
        // The bytes are a font we ship; failing to parse them is a build defect.
        if plotters::style::register_font(FONT, FontStyle::Normal, FONT_BYTES).is_err() {
            panic!("bundled DejaVu Sans font does not parse");
        }
    });
}

fn draw_error(figure: &str, err: impl std::fmt::Display) -> RenderError {
    RenderError::Draw {
        figure: figure.to_string(),
        message: err.to_string(),
    }
}

/// The figure as a standalone SVG document.
pub fn to_svg<F: Figure>(figure: &F, name: &str) -> Result<String, RenderError> {
    register_font();
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, figure.size()).into_drawing_area();
        root.fill(&PAPER).map_err(|e| draw_error(name, e))?;
        figure.draw(&root).map_err(|e| draw_error(name, e))?;
        root.present().map_err(|e| draw_error(name, e))?;
    }
    Ok(out)
}

/// The figure as 8-bit RGB pixels, row-major, `width * height * 3` bytes.
pub fn to_rgb<F: Figure>(figure: &F, name: &str) -> Result<Vec<u8>, RenderError> {
    register_font();
    let (w, h) = figure.size();
    let mut buf = vec![255u8; (w as usize) * (h as usize) * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, (w, h)).into_drawing_area();
        root.fill(&PAPER).map_err(|e| draw_error(name, e))?;
        figure.draw(&root).map_err(|e| draw_error(name, e))?;
        root.present().map_err(|e| draw_error(name, e))?;
    }
    Ok(buf)
}

/// The figure as PNG file bytes.
pub fn to_png<F: Figure>(figure: &F, name: &str) -> Result<Vec<u8>, RenderError> {
    let (w, h) = figure.size();
    let rgb = to_rgb(figure, name)?;
    let mut bytes = Vec::new();
    let encoder = image::codecs::png::PngEncoder::new(&mut bytes);
    image::ImageEncoder::write_image(encoder, &rgb, w, h, image::ColorType::Rgb8).map_err(|e| {
        RenderError::Encode {
            figure: name.to_string(),
            message: e.to_string(),
        }
    })?;
    Ok(bytes)
}

/// Writes the figure as SVG to `path` (atomically).
pub fn write_svg<F: Figure>(path: &Path, figure: &F) -> Result<(), RenderError> {
    let svg = to_svg(figure, &path.display().to_string())?;
    crate::io::atomic::write_bytes_atomic(path, svg.as_bytes())?;
    Ok(())
}

/// Writes the figure as PNG to `path` (atomically).
pub fn write_png<F: Figure>(path: &Path, figure: &F) -> Result<(), RenderError> {
    let png = to_png(figure, &path.display().to_string())?;
    crate::io::atomic::write_bytes_atomic(path, &png)?;
    Ok(())
}

/// Writes `<dir>/<stem>.svg` and `<dir>/<stem>.png` and returns the SVG text (for the
/// report), so a figure is drawn once per format.
pub fn write_figure<F: Figure>(dir: &Path, stem: &str, figure: &F) -> Result<String, RenderError> {
    let svg = to_svg(figure, stem)?;
    crate::io::atomic::write_bytes_atomic(&dir.join(format!("{stem}.svg")), svg.as_bytes())?;
    let png = to_png(figure, stem)?;
    crate::io::atomic::write_bytes_atomic(&dir.join(format!("{stem}.png")), &png)?;
    Ok(svg)
}

/// Text style of `px` pixels per em in `colour`. plotters divides font sizes by 1.24 (its
/// point-to-pixel convention) in every backend, so the request is scaled up by the same.
pub fn text(px: f64, colour: RGBColor) -> TextStyle<'static> {
    let mut style = TextStyle::from((FONT, px * 1.24).into_font());
    style.color = colour.to_backend_color();
    style
}

/// The figure title, left-aligned at `(x, y)` (top-left of the text box).
pub fn draw_title<DB>(root: &DrawingArea<DB, Shift>, title: &str, x: i32, y: i32) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    root.draw(&Text::new(title.to_string(), (x, y), text(TITLE_PX, INK)))?;
    Ok(())
}

/// Draws `marker` with a white halo (for markers over a coloured field).
pub fn draw_marker_with_halo<DB>(
    root: &DrawingArea<DB, Shift>,
    at: (i32, i32),
    marker: Marker,
    size: f64,
    fill: RGBColor,
) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    draw_marker(root, at, marker, size + 2.5, PAPER, PAPER)?;
    draw_marker(root, at, marker, size, fill, INK)
}

/// Axis tick label: no trailing zeros, thousands grouped with a space ("25 000").
pub fn format_axis_value(v: &f64) -> String {
    let v = *v;
    if !v.is_finite() {
        return String::new();
    }
    if v.abs() < 1e-12 {
        return "0".to_string();
    }
    let mag = v.abs().log10().floor();
    let decimals = (3.0 - mag).clamp(0.0, 6.0) as usize;
    let mut s = format!("{v:.decimals$}");
    if s.contains('.') {
        s = s.trim_end_matches('0').trim_end_matches('.').to_string();
    }
    if v.abs() >= 10_000.0 && !s.contains('.') {
        let (sign, digits) = s.split_at(usize::from(s.starts_with('-')));
        let mut grouped = String::new();
        for (k, ch) in digits.chars().enumerate() {
            if k > 0 && (digits.len() - k) % 3 == 0 {
                grouped.push(' ');
            }
            grouped.push(ch);
        }
        s = format!("{sign}{grouped}");
    }
    s
}

/// Draws `marker` centred at pixel `at`, filled with `fill` and outlined in `edge`.
pub fn draw_marker<DB>(
    root: &DrawingArea<DB, Shift>,
    at: (i32, i32),
    marker: Marker,
    size: f64,
    fill: RGBColor,
    edge: RGBColor,
) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    if marker == Marker::Circle {
        // plotters fills tiny polygons unevenly in bitmaps; its own circle is round.
        let r = size.round() as i32;
        root.draw(&Circle::new(at, r, fill.filled()))?;
        root.draw(&Circle::new(at, r, edge.stroke_width(1)))?;
        return Ok(());
    }
    let pts: Vec<(i32, i32)> = marker
        .outline(size)
        .into_iter()
        .map(|(x, y)| (at.0 + x, at.1 + y))
        .collect();
    root.draw(&Polygon::new(pts.clone(), fill.filled()))?;
    let mut ring = pts;
    ring.push(ring[0]);
    root.draw(&PathElement::new(ring, edge.stroke_width(1)))?;
    Ok(())
}

/// One entry of a legend: what the glyph shows and its text.
#[derive(Debug, Clone)]
pub enum LegendGlyph {
    /// A line (solid or dashed) with a marker in the middle: a data series.
    Series(SeriesStyle),
    /// A marker alone.
    Marker {
        marker: Marker,
        fill: RGBColor,
        edge: RGBColor,
        size: f64,
    },
    /// A filled swatch.
    Swatch(RGBColor),
    /// A hatched swatch (exclusion zones).
    Hatch(RGBColor),
    /// A ring (existing sensors).
    Ring(RGBColor),
    /// A line with dots (beams with gates).
    Beam(RGBColor),
    /// A plain line, solid or dashed (fronts, targets).
    Line { colour: RGBColor, dashed: bool },
}

/// Width of a legend glyph, px.
const GLYPH_W: i32 = 30;

/// Draws one legend glyph with its left edge at `x`, centred vertically on `y`.
pub fn draw_glyph<DB>(
    root: &DrawingArea<DB, Shift>,
    glyph: &LegendGlyph,
    x: i32,
    y: i32,
) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    match glyph {
        LegendGlyph::Series(style) => {
            draw_line(
                root,
                &[(x, y), (x + GLYPH_W, y)],
                style.colour,
                2,
                style.dashed,
            )?;
            draw_marker(
                root,
                (x + GLYPH_W / 2, y),
                style.marker,
                4.5,
                style.colour,
                PAPER,
            )?;
        }
        LegendGlyph::Marker {
            marker,
            fill,
            edge,
            size,
        } => draw_marker(root, (x + GLYPH_W / 2, y), *marker, *size, *fill, *edge)?,
        LegendGlyph::Swatch(c) => {
            root.draw(&Rectangle::new(
                [(x + 4, y - 7), (x + GLYPH_W - 4, y + 7)],
                c.filled(),
            ))?;
        }
        LegendGlyph::Hatch(c) => {
            let (x0, y0, x1, y1) = (x + 4, y - 7, x + GLYPH_W - 4, y + 7);
            for k in (-14..22).step_by(5) {
                // Diagonal strokes clipped to the swatch by hand.
                let a = (x0 + k, y1);
                let b = (x0 + k + 14, y0);
                let clip = |p: (i32, i32), q: (i32, i32)| -> Option<[(i32, i32); 2]> {
                    let (mut p, mut q) = (p, q);
                    if p.0 < x0 {
                        p = (x0, p.1 - (x0 - p.0));
                    }
                    if q.0 > x1 {
                        q = (x1, q.1 + (q.0 - x1));
                    }
                    (p.0 < q.0).then_some([p, q])
                };
                if let Some(seg) = clip(a, b) {
                    root.draw(&PathElement::new(seg.to_vec(), c.stroke_width(1)))?;
                }
            }
            root.draw(&Rectangle::new([(x0, y0), (x1, y1)], c.stroke_width(1)))?;
        }
        LegendGlyph::Ring(c) => {
            root.draw(&Circle::new((x + GLYPH_W / 2, y), 8, c.stroke_width(2)))?;
        }
        LegendGlyph::Line { colour, dashed } => {
            draw_line(root, &[(x, y), (x + GLYPH_W, y)], *colour, 2, *dashed)?;
        }
        LegendGlyph::Beam(c) => {
            draw_line(root, &[(x, y), (x + GLYPH_W, y)], *c, 2, false)?;
            for k in 0..3 {
                root.draw(&Circle::new((x + 7 + 8 * k, y), 2, c.filled()))?;
            }
        }
    }
    Ok(())
}

/// A polyline in pixels, optionally dashed (8 px on, 5 px off).
pub fn draw_line<DB>(
    root: &DrawingArea<DB, Shift>,
    pts: &[(i32, i32)],
    colour: RGBColor,
    width: u32,
    dashed: bool,
) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    let style = colour.stroke_width(width);
    if dashed {
        root.draw(&plotters::element::DashedPathElement::new(
            pts.to_vec(),
            8,
            5,
            style,
        ))?;
    } else {
        root.draw(&PathElement::new(pts.to_vec(), style))?;
    }
    Ok(())
}

/// Number of legend rows for `entries` within `width`, estimated from character counts
/// (DejaVu Sans at the tick size averages under 8.5 px per character), for sizing a figure
/// before any backend exists.
pub fn legend_rows_estimate(entries: &[(LegendGlyph, String)], width: u32) -> u32 {
    let (mut x, mut rows) = (0u32, 1u32);
    for (_, label) in entries {
        let w = GLYPH_W as u32 + 6 + (8.5 * label.chars().count() as f64) as u32;
        if x > 0 && x + w > width {
            x = 0;
            rows += 1;
        }
        x += w + 22;
    }
    if entries.is_empty() {
        0
    } else {
        rows
    }
}

/// Height in px of the legend rows [`draw_legend_rows`] would draw within `width`.
pub fn legend_rows_height<DB>(
    root: &DrawingArea<DB, Shift>,
    entries: &[(LegendGlyph, String)],
    width: i32,
) -> i32
where
    DB: DrawingBackend,
{
    legend_layout(root, entries, width).1
}

fn legend_layout<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    entries: &[(LegendGlyph, String)],
    width: i32,
) -> (Vec<(i32, i32)>, i32) {
    const ROW_H: i32 = 24;
    const GAP: i32 = 22;
    let style = text(TICK_PX, INK);
    let mut positions = Vec::with_capacity(entries.len());
    let (mut x, mut row) = (0, 0);
    for (_, label) in entries {
        let text_w = root
            .estimate_text_size(label, &style)
            .map(|(w, _)| w as i32)
            .unwrap_or(8 * label.len() as i32);
        let entry_w = GLYPH_W + 6 + text_w;
        if x > 0 && x + entry_w > width {
            x = 0;
            row += 1;
        }
        positions.push((x, row * ROW_H));
        x += entry_w + GAP;
    }
    let height = if entries.is_empty() {
        0
    } else {
        (row + 1) * ROW_H
    };
    (positions, height)
}

/// Draws legend entries left to right from `(x, y)`, wrapping at `width`; returns the height.
pub fn draw_legend_rows<DB>(
    root: &DrawingArea<DB, Shift>,
    entries: &[(LegendGlyph, String)],
    x: i32,
    y: i32,
    width: i32,
) -> Result<i32, Box<dyn std::error::Error + Send + Sync>>
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    let (positions, height) = legend_layout(root, entries, width);
    let style = text(TICK_PX, INK);
    for ((glyph, label), (dx, dy)) in entries.iter().zip(positions) {
        let cy = y + dy + 12;
        draw_glyph(root, glyph, x + dx, cy)?;
        root.draw(&Text::new(
            label.clone(),
            (x + dx + GLYPH_W + 6, cy - (TICK_PX as i32) / 2 - 1),
            style.clone(),
        ))?;
    }
    Ok(height)
}

/// Draws a vertical colour bar: a gradient `bar_w × bar_h` with its top-left at `(x, y)`,
/// `n_ticks` labelled ticks from `lo` (bottom) to `hi` (top), and `title` above it.
#[allow(clippy::too_many_arguments)]
pub fn draw_colour_bar<DB>(
    root: &DrawingArea<DB, Shift>,
    colour_at: &dyn Fn(f64) -> RGBColor,
    lo: f64,
    hi: f64,
    title: &str,
    x: i32,
    y: i32,
    bar_h: i32,
) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    const BAR_W: i32 = 18;
    root.draw(&Text::new(title.to_string(), (x, y), text(SMALL_PX, INK)))?;
    let top = y + 28;
    for k in 0..bar_h {
        let t = 1.0 - (k as f64 + 0.5) / bar_h as f64;
        root.draw(&Rectangle::new(
            [(x, top + k), (x + BAR_W, top + k + 1)],
            colour_at(t).filled(),
        ))?;
    }
    root.draw(&Rectangle::new(
        [(x, top), (x + BAR_W, top + bar_h)],
        INK.stroke_width(1),
    ))?;
    let ticks = nice_ticks(lo, hi, 5);
    let step = if ticks.len() > 1 {
        ticks[1] - ticks[0]
    } else {
        0.0
    };
    for v in ticks {
        let t = if hi > lo { (v - lo) / (hi - lo) } else { 0.5 };
        let py = top + ((1.0 - t) * bar_h as f64).round() as i32;
        root.draw(&PathElement::new(
            vec![(x + BAR_W, py), (x + BAR_W + 4, py)],
            INK.stroke_width(1),
        ))?;
        root.draw(&Text::new(
            format_tick(v, step),
            (x + BAR_W + 7, py - 7),
            text(SMALL_PX, INK_SOFT),
        ))?;
    }
    Ok(())
}

/// Round tick values covering `[lo, hi]` with about `n_target` steps (1-2-5 steps).
pub fn nice_ticks(lo: f64, hi: f64, n_target: usize) -> Vec<f64> {
    if hi.is_nan() || lo.is_nan() || hi <= lo || !lo.is_finite() || !hi.is_finite() {
        return vec![lo];
    }
    let raw = (hi - lo) / n_target.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// A tick label with as many decimals as the tick `step` needs.
pub fn format_tick(v: f64, step: f64) -> String {
    let mut decimals = 0usize;
    if step > 0.0 && step.is_finite() {
        while decimals < 6 {
            let scaled = step * 10f64.powi(decimals as i32);
            if (scaled - scaled.round()).abs() < 1e-6 * scaled.abs().max(1.0) {
                break;
            }
            decimals += 1;
        }
    }
    let s = format!("{v:.decimals$}");
    if s.starts_with('-') && s.trim_start_matches(['-', '0', '.']).is_empty() {
        s[1..].to_string()
    } else {
        s
    }
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::needless_range_loop)]
mod tests {
    use super::*;

    #[test]
    fn nice_ticks_are_round_and_cover_the_range() {
        let t = nice_ticks(0.0, 1.0, 5);
        assert_eq!(t.len(), 6);
        assert!((t[1] - 0.2).abs() < 1e-12);
        let t = nice_ticks(0.13, 0.87, 4);
        assert!(t.iter().all(|v| (0.13..=0.87).contains(v)));
        assert!((t[0] - 0.2).abs() < 1e-12, "{t:?}");
        assert_eq!(nice_ticks(1.0, 1.0, 5), vec![1.0]);
    }

    #[test]
    fn tick_labels_drop_negative_zero() {
        assert_eq!(format_tick(-0.0001, 0.2), "0.0");
        assert_eq!(format_tick(2.5, 2.5), "2.5");
        assert_eq!(format_tick(0.25, 0.25), "0.25");
        assert_eq!(format_tick(1500.0, 500.0), "1500");
        assert_eq!(format_axis_value(&2.0), "2");
        assert_eq!(format_axis_value(&0.25), "0.25");
        assert_eq!(format_axis_value(&25000.0), "25 000");
        assert_eq!(format_axis_value(&-150.0), "-150");
        assert_eq!(format_axis_value(&1e-17), "0");
    }
}
