//! Fields on the site domain and the map layers every plan view shares: the background
//! [`FieldLayer`] (per-point standard deviation from the POD basis, or one mode), its raster
//! (grids) or dots (point clouds), solid cells, filled obstacles, hatched exclusion zones, and
//! the equal-aspect framing of the domain in a pixel box.
//!
//! Pointwise standard deviation of the reduced model: with coefficient variances `λ_k` (the
//! POD energies) and modes `φ_k` orthonormal in the weighted inner product, the field variance
//! at a degree of freedom is `Σ_k λ_k φ_k²` (Holmes, Lumley & Berkooz, *Turbulence, Coherent
//! Structures, Dynamical Systems and Symmetry*, 1996, ch. 3).

use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use super::figure::DrawResult;
use super::palette::{ColourMap, OBSTACLE, PAPER, ZONE};
use crate::basis::Basis;
use crate::io::{Domain, PlanePoint, Site};

/// A value per domain point, shown as the map background.
#[derive(Debug, Clone)]
pub struct FieldLayer {
    /// One value per point (field layout of `io`); NaN points are left blank.
    pub values: Vec<f64>,
    /// What the values are, for the colour bar ("std of u, v").
    pub label: String,
    /// Unit of the values ("m/s"; empty for dimensionless).
    pub unit: String,
    /// Signed field: diverging colour map, symmetric range around zero.
    pub diverging: bool,
}

impl FieldLayer {
    /// Standard deviation per point of the reduced model over the chosen channels (root of
    /// the summed variances), from the first `n_modes` energies.
    pub fn std_from_basis(site: &Site, basis: &Basis, channel_idx: &[usize]) -> Self {
        assert_eq!(
            basis.n_points,
            site.n_points(),
            "basis and site disagree on points"
        );
        let n_c = basis.n_channels;
        let n_modes = basis.n_modes();
        let values = (0..basis.n_points)
            .map(|p| {
                let mut var = 0.0;
                for &c in channel_idx {
                    for k in 0..n_modes {
                        let phi = basis.modes[(p * n_c + c, k)];
                        var += basis.energies[k] * phi * phi;
                    }
                }
                var.sqrt()
            })
            .collect();
        let names: Vec<&str> = channel_idx
            .iter()
            .map(|&c| site.channels[c].name.as_str())
            .collect();
        FieldLayer {
            values,
            label: format!("std of {}", names.join(", ")),
            unit: channel_idx
                .first()
                .map(|&c| site.channels[c].unit.clone())
                .unwrap_or_default(),
            diverging: false,
        }
    }

    /// Mode `mode_idx` on channel `channel_idx`, scaled so its largest magnitude is 1.
    pub fn mode(site: &Site, basis: &Basis, mode_idx: usize, channel_idx: usize) -> Self {
        let n_c = basis.n_channels;
        let mut values: Vec<f64> = (0..basis.n_points)
            .map(|p| basis.modes[(p * n_c + channel_idx, mode_idx)])
            .collect();
        let peak = values.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        if peak > 0.0 {
            values.iter_mut().for_each(|v| *v /= peak);
        }
        FieldLayer {
            values,
            label: format!(
                "mode {} of {}",
                mode_idx + 1,
                site.channels[channel_idx].name
            ),
            unit: String::new(),
            diverging: true,
        }
    }

    /// Colour-bar range: data range, or symmetric about zero for signed fields.
    pub fn range(&self) -> (f64, f64) {
        let finite = self.values.iter().copied().filter(|v| v.is_finite());
        let (lo, hi) = finite.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
        if !lo.is_finite() {
            return (0.0, 1.0);
        }
        if self.diverging {
            let m = lo.abs().max(hi.abs()).max(1e-300);
            (-m, m)
        } else if hi > lo {
            (lo.min(0.0).max(lo - (hi - lo)), hi)
        } else {
            (lo - 0.5, hi + 0.5)
        }
    }

    /// Colour-bar caption: label with unit.
    pub fn caption(&self) -> String {
        if self.unit.is_empty() {
            self.label.clone()
        } else {
            format!("{} ({})", self.label, self.unit)
        }
    }
}

/// Extent of the domain in plane metres: `[x_min, x_max, y_min, y_max]` (grid nodes are cell
/// centres, so the extent reaches half a cell beyond them).
pub fn domain_extent(site: &Site) -> [f64; 4] {
    match &site.domain {
        Domain::Grid(g) => [
            g.origin[0] - 0.5 * g.spacing[0],
            g.origin[0] + (g.nx as f64 - 0.5) * g.spacing[0],
            g.origin[1] - 0.5 * g.spacing[1],
            g.origin[1] + (g.ny as f64 - 0.5) * g.spacing[1],
        ],
        Domain::Points(p) => {
            let mut e = [
                f64::INFINITY,
                f64::NEG_INFINITY,
                f64::INFINITY,
                f64::NEG_INFINITY,
            ];
            for q in &p.points {
                e = [
                    e[0].min(q[0]),
                    e[1].max(q[0]),
                    e[2].min(q[1]),
                    e[3].max(q[1]),
                ];
            }
            let pad = 0.03 * (e[1] - e[0]).max(e[3] - e[2]).max(1.0);
            [e[0] - pad, e[1] + pad, e[2] - pad, e[3] + pad]
        }
    }
}

/// Data ranges and pixel size of a map panel with equal scale on both axes, fitting in
/// `max_w × max_h` pixels: the panel keeps the domain's aspect ratio, clamped so very long
/// or very tall domains still get a readable panel (the short side then gets extra margin).
#[derive(Debug, Clone, Copy)]
pub struct MapFrame {
    pub x_range: (f64, f64),
    pub y_range: (f64, f64),
    pub plot_w: u32,
    pub plot_h: u32,
}

impl MapFrame {
    pub fn fit(extent: [f64; 4], max_w: u32, max_h: u32, min_h: u32) -> Self {
        let (mut x0, mut x1, mut y0, mut y1) = (extent[0], extent[1], extent[2], extent[3]);
        let w_m = (x1 - x0).max(1e-9);
        let h_m = (y1 - y0).max(1e-9);
        let mut plot_w = max_w as f64;
        let mut plot_h = plot_w * h_m / w_m;
        if plot_h > max_h as f64 {
            plot_h = max_h as f64;
            plot_w = plot_h * w_m / h_m;
        }
        if plot_w < 0.5 * max_w as f64 && plot_h >= max_h as f64 {
            plot_w = 0.5 * max_w as f64;
        }
        plot_h = plot_h.max(min_h as f64);
        // Pad the short direction so metres per pixel agree on both axes.
        let m_per_px = (w_m / plot_w).max(h_m / plot_h);
        let pad_x = 0.5 * (m_per_px * plot_w - w_m);
        let pad_y = 0.5 * (m_per_px * plot_h - h_m);
        x0 -= pad_x;
        x1 += pad_x;
        y0 -= pad_y;
        y1 += pad_y;
        MapFrame {
            x_range: (x0, x1),
            y_range: (y0, y1),
            plot_w: plot_w.round() as u32,
            plot_h: plot_h.round() as u32,
        }
    }

    /// Pixels per metre.
    pub fn px_per_m(&self) -> f64 {
        self.plot_w as f64 / (self.x_range.1 - self.x_range.0)
    }
}

/// Most dots drawn for a point-cloud background.
pub const MAX_DOTS: usize = 20_000;

/// A map chart in plane metres.
pub type MapChart<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// Draws the background layer: cell rectangles on grids (cells below `min_cell_px` pixels
/// merged into blocks, and neighbours of the same quantised colour into one rectangle, which
/// keeps SVG small), dots on point clouds (at most [`MAX_DOTS`], evenly thinned).
pub fn draw_field<DB>(
    chart: &mut MapChart<'_, DB>,
    site: &Site,
    layer: &FieldLayer,
    map: &ColourMap,
    px_per_m: f64,
    min_cell_px: f64,
) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    assert_eq!(
        layer.values.len(),
        site.n_points(),
        "one value per point expected"
    );
    const LEVELS: f64 = 96.0;
    let (lo, hi) = layer.range();
    let level = |v: f64| -> Option<i32> {
        v.is_finite()
            .then(|| (((v - lo) / (hi - lo)).clamp(0.0, 1.0) * (LEVELS - 1.0)).round() as i32)
    };
    let colour_of = |q: i32| map.at(q as f64 / (LEVELS - 1.0));
    match &site.domain {
        Domain::Grid(g) => {
            let (dx, dy) = (g.spacing[0], g.spacing[1]);
            // Cells smaller than `min_cell_px` are merged into blocks (mean of the fluid
            // nodes; solid when most nodes are), which bounds the SVG size on fine grids.
            let fx = ((min_cell_px / (dx * px_per_m)).ceil() as usize).max(1);
            let fy = ((min_cell_px / (dy * px_per_m)).ceil() as usize).max(1);
            let (ncx, ncy) = (g.nx.div_ceil(fx), g.ny.div_ceil(fy));
            let block = |ci: usize, cj: usize| -> Option<i32> {
                let (mut sum, mut n_fluid, mut n_solid) = (0.0, 0usize, 0usize);
                for j in cj * fy..((cj + 1) * fy).min(g.ny) {
                    for i in ci * fx..((ci + 1) * fx).min(g.nx) {
                        let k = j * g.nx + i;
                        if g.solid[k] {
                            n_solid += 1;
                        } else if layer.values[k].is_finite() {
                            sum += layer.values[k];
                            n_fluid += 1;
                        }
                    }
                }
                if n_solid > n_fluid {
                    Some(-1)
                } else if n_fluid > 0 {
                    level(sum / n_fluid as f64)
                } else {
                    None
                }
            };
            // Each block reaches one pixel into its right and upper neighbours, which are
            // drawn later: a browser scaling the SVG then shows no hairline seams.
            let overlap = 1.0 / px_per_m.max(1e-12);
            let edge_x = |ci: usize| g.origin[0] + ((ci * fx).min(g.nx) as f64 - 0.5) * dx;
            let edge_y = |cj: usize| g.origin[1] + ((cj * fy).min(g.ny) as f64 - 0.5) * dy;
            let mut rects = Vec::new();
            for cj in 0..ncy {
                let row: Vec<Option<i32>> = (0..ncx).map(|ci| block(ci, cj)).collect();
                let (y0, mut y1) = (edge_y(cj), edge_y(cj + 1));
                if cj + 1 < ncy {
                    y1 += overlap;
                }
                let mut ci = 0;
                while ci < ncx {
                    let q = row[ci];
                    let mut ci_end = ci + 1;
                    while ci_end < ncx && row[ci_end] == q {
                        ci_end += 1;
                    }
                    if let Some(q) = q {
                        let colour = if q < 0 { OBSTACLE } else { colour_of(q) };
                        let mut x1 = edge_x(ci_end);
                        if ci_end < ncx {
                            x1 += overlap;
                        }
                        rects.push(Rectangle::new(
                            [(edge_x(ci), y0), (x1, y1)],
                            colour.filled(),
                        ));
                    }
                    ci = ci_end;
                }
            }
            chart.draw_series(rects)?;
        }
        Domain::Points(p) => {
            let mean_w = p.weight.iter().sum::<f64>() / p.weight.len().max(1) as f64;
            let radius = (0.5 * mean_w.sqrt() * px_per_m).clamp(1.5, 7.0).round() as i32;
            let stride = p.points.len().div_ceil(MAX_DOTS).max(1);
            chart.draw_series(
                p.points
                    .iter()
                    .zip(&layer.values)
                    .step_by(stride)
                    .filter_map(|(q, v)| {
                        level(*v).map(|l| Circle::new((q[0], q[1]), radius, colour_of(l).filled()))
                    }),
            )?;
        }
    }
    Ok(())
}

/// Solid grid cells (used when no background layer is drawn).
pub fn draw_solid_cells<DB>(chart: &mut MapChart<'_, DB>, site: &Site) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    if let Domain::Grid(g) = &site.domain {
        let (dx, dy) = (g.spacing[0], g.spacing[1]);
        chart.draw_series((0..g.nx * g.ny).filter(|&k| g.solid[k]).map(|k| {
            let (i, j) = ((k % g.nx) as f64, (k / g.nx) as f64);
            let x = g.origin[0] + i * dx;
            let y = g.origin[1] + j * dy;
            Rectangle::new(
                [(x - 0.5 * dx, y - 0.5 * dy), (x + 0.5 * dx, y + 0.5 * dy)],
                OBSTACLE.filled(),
            )
        }))?;
    }
    Ok(())
}

/// Filled obstacles with a light edge, and hatched exclusion zones with a solid outline.
pub fn draw_obstacles_and_zones<DB>(
    chart: &mut MapChart<'_, DB>,
    site: &Site,
    px_per_m: f64,
) -> DrawResult
where
    DB: DrawingBackend,
    DB::ErrorType: 'static,
{
    for obstacle in &site.obstacles {
        let pts: Vec<(f64, f64)> = obstacle
            .polygon
            .vertices
            .iter()
            .map(|v| (v[0], v[1]))
            .collect();
        chart.draw_series(std::iter::once(Polygon::new(
            pts.clone(),
            OBSTACLE.filled(),
        )))?;
        let mut ring = pts;
        ring.push(ring[0]);
        chart.draw_series(std::iter::once(PathElement::new(
            ring,
            RGBColor(0xd0, 0xd4, 0xda).stroke_width(1),
        )))?;
    }
    let spacing_m = 7.0 / px_per_m.max(1e-12);
    for zone in &site.zones {
        let verts = &zone.polygon.vertices;
        let segments = hatch_segments(verts, spacing_m);
        // Each stroke is cased in translucent white so it reads on dark and light fields.
        chart.draw_series(segments.iter().map(|[a, b]| {
            PathElement::new(
                vec![(a[0], a[1]), (b[0], b[1])],
                PAPER.mix(0.55).stroke_width(3),
            )
        }))?;
        chart.draw_series(segments.iter().map(|[a, b]| {
            PathElement::new(vec![(a[0], a[1]), (b[0], b[1])], ZONE.stroke_width(1))
        }))?;
        let mut ring: Vec<(f64, f64)> = verts.iter().map(|v| (v[0], v[1])).collect();
        ring.push(ring[0]);
        chart.draw_series(std::iter::once(PathElement::new(
            ring.clone(),
            PAPER.stroke_width(4),
        )))?;
        chart.draw_series(std::iter::once(PathElement::new(
            ring,
            ZONE.stroke_width(2),
        )))?;
    }
    Ok(())
}

/// Hatch lines at 45° (running up to the right), `spacing` metres apart measured across the
/// lines, clipped to the inside of `polygon` (even–odd rule, so any simple polygon works).
pub fn hatch_segments(polygon: &[PlanePoint], spacing: f64) -> Vec<[PlanePoint; 2]> {
    if polygon.len() < 3 || spacing.is_nan() || spacing <= 0.0 {
        return Vec::new();
    }
    // Rotate by −45° so hatch lines become horizontal scan lines v = const.
    let s = std::f64::consts::FRAC_1_SQRT_2;
    let to_uv = |p: &PlanePoint| [s * (p[0] + p[1]), s * (p[1] - p[0])];
    let from_uv = |u: f64, v: f64| [s * (u - v), s * (u + v)];
    let uv: Vec<[f64; 2]> = polygon.iter().map(to_uv).collect();
    let v_min = uv.iter().map(|p| p[1]).fold(f64::INFINITY, f64::min);
    let v_max = uv.iter().map(|p| p[1]).fold(f64::NEG_INFINITY, f64::max);
    let mut out = Vec::new();
    let mut v = (v_min / spacing).floor() * spacing + 0.5 * spacing;
    // Cap the line count so a tiny spacing on a huge zone cannot explode the SVG.
    let mut n_lines = 0;
    while v < v_max && n_lines < 4000 {
        let mut us = Vec::new();
        for k in 0..uv.len() {
            let a = uv[k];
            let b = uv[(k + 1) % uv.len()];
            if (a[1] <= v) != (b[1] <= v) {
                us.push(a[0] + (v - a[1]) / (b[1] - a[1]) * (b[0] - a[0]));
            }
        }
        us.sort_by(f64::total_cmp);
        for pair in us.chunks_exact(2) {
            out.push([from_uv(pair[0], v), from_uv(pair[1], v)]);
        }
        v += spacing;
        n_lines += 1;
    }
    out
}

/// True when `p` lies inside `polygon` (even–odd rule).
pub fn point_in_polygon(p: PlanePoint, polygon: &[PlanePoint]) -> bool {
    let mut inside = false;
    for k in 0..polygon.len() {
        let a = polygon[k];
        let b = polygon[(k + 1) % polygon.len()];
        if (a[1] > p[1]) != (b[1] > p[1]) {
            let x = a[0] + (p[1] - a[1]) / (b[1] - a[1]) * (b[0] - a[0]);
            if p[0] < x {
                inside = !inside;
            }
        }
    }
    inside
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::needless_range_loop)]
mod tests {
    use super::*;

    #[test]
    fn hatch_of_a_square_fills_its_area() {
        // Total hatch length × spacing approximates the area (Cavalieri's principle).
        let square = [[0.0, 0.0], [100.0, 0.0], [100.0, 100.0], [0.0, 100.0]];
        let segs = hatch_segments(&square, 2.0);
        let length: f64 = segs
            .iter()
            .map(|[a, b]| ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2)).sqrt())
            .sum();
        assert!(
            (length * 2.0 - 10_000.0).abs() < 0.02 * 10_000.0,
            "{}",
            length * 2.0
        );
        for [a, b] in &segs {
            let mid = [0.5 * (a[0] + b[0]), 0.5 * (a[1] + b[1])];
            assert!(point_in_polygon(mid, &square));
            // Lines run at +45°.
            assert!(((b[1] - a[1]) - (b[0] - a[0])).abs() < 1e-9);
        }
    }

    #[test]
    fn hatch_respects_a_concave_notch() {
        // An L shape: the notch [50,100]² must stay free of hatching.
        let l_shape = [
            [0.0, 0.0],
            [100.0, 0.0],
            [100.0, 50.0],
            [50.0, 50.0],
            [50.0, 100.0],
            [0.0, 100.0],
        ];
        let segs = hatch_segments(&l_shape, 3.0);
        assert!(!segs.is_empty());
        for [a, b] in &segs {
            for t in [0.1, 0.5, 0.9] {
                let p = [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])];
                assert!(
                    !(p[0] > 50.5 && p[1] > 50.5),
                    "hatch inside the notch at {p:?}"
                );
            }
        }
    }

    #[test]
    fn frame_keeps_equal_scale() {
        let f = MapFrame::fit([0.0, 600.0, 0.0, 300.0], 600, 500, 200);
        let sx = f.plot_w as f64 / (f.x_range.1 - f.x_range.0);
        let sy = f.plot_h as f64 / (f.y_range.1 - f.y_range.0);
        assert!((sx - sy).abs() < 0.01 * sx);
        assert_eq!((f.plot_w, f.plot_h), (600, 300));
        // A very long strip gets the minimum height and padding in y, still equal scale.
        let f = MapFrame::fit([0.0, 6000.0, 0.0, 100.0], 600, 500, 200);
        let sy = f.plot_h as f64 / (f.y_range.1 - f.y_range.0);
        assert!((f.px_per_m() - sy).abs() < 0.01 * sy);
        assert!(f.y_range.0 < 0.0 && f.y_range.1 > 100.0);
    }
}
