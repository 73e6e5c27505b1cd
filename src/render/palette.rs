//! The colours and marker shapes every crowsnest figure uses, and the colour maps for fields.
//!
//! All values are our own. They follow the usual colour-vision-deficiency rules (common
//! practice): series differ in lightness as well as hue, no pair relies on a red/green contrast,
//! and every series also carries its own marker shape, so a figure still reads in grey print.
//! The unit tests check the series colours against simulated protan, deutan and tritan vision
//! (Machado, Oliveira & Fernandes 2009) in the OKLab space (Ottosson 2020).
//!
//! Colour maps interpolate between their stops in OKLab, so equal steps in the value give
//! near-equal steps in perceived colour; [`DUSK`] (sequential, light to dark) is for magnitudes
//! such as a standard deviation, [`TIDE`] (diverging, blue – paper – copper) for signed fields
//! such as POD modes. This file draws nothing.

use plotters::style::RGBColor;

/// Text, axes and outlines.
pub const INK: RGBColor = RGBColor(0x1c, 0x22, 0x2b);
/// Secondary text (captions, tick labels).
pub const INK_SOFT: RGBColor = RGBColor(0x55, 0x5e, 0x6b);
/// Light grid lines.
pub const RULE: RGBColor = RGBColor(0xe2, 0xe5, 0xea);
/// Figure background.
pub const PAPER: RGBColor = RGBColor(0xff, 0xff, 0xff);
/// Solid obstacles and solid grid cells.
pub const OBSTACLE: RGBColor = RGBColor(0x4b, 0x50, 0x58);
/// Hatching and outline of exclusion zones: a teal that appears in neither colour map.
pub const ZONE: RGBColor = RGBColor(0x06, 0x6f, 0x78);
/// Candidate mounts that were not chosen.
pub const CANDIDATE: RGBColor = RGBColor(0x86, 0x8e, 0x99);
/// Ring around sensors that already stand on site.
pub const EXISTING: RGBColor = RGBColor(0x10, 0x14, 0x1a);
/// Baselines (free run, no data): a neutral slate, drawn dashed.
pub const BASELINE: RGBColor = RGBColor(0x6f, 0x76, 0x80);
/// Highlight of the recommended choice.
pub const HIGHLIGHT: RGBColor = RGBColor(0xd9, 0x1e, 0x5b);

/// Series colours in the order they are handed out: deep blue, amber, sky, brick, orchid,
/// sand, rose. Neighbours differ strongly in lightness.
pub const SERIES: [RGBColor; 7] = [
    RGBColor(0x1b, 0x4f, 0x9c), // harbour blue
    RGBColor(0xf0, 0xa2, 0x02), // amber
    RGBColor(0x6c, 0xc0, 0xeb), // sky
    RGBColor(0x9e, 0x3a, 0x14), // brick
    RGBColor(0xb8, 0x6f, 0xd0), // orchid
    RGBColor(0xe8, 0xd5, 0x8a), // sand
    RGBColor(0xe0, 0x7b, 0xa8), // rose
];

/// Marker shapes, handed out in this order beside [`SERIES`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    Circle,
    Square,
    TriangleUp,
    Diamond,
    TriangleDown,
    Plus,
    Hexagon,
}

pub const MARKERS: [Marker; 7] = [
    Marker::Circle,
    Marker::Square,
    Marker::TriangleUp,
    Marker::Diamond,
    Marker::TriangleDown,
    Marker::Plus,
    Marker::Hexagon,
];

impl Marker {
    /// Outline of the marker as a polygon around `(0, 0)` in pixels (y down), `size` the
    /// half-width in pixels. Every shape is a polygon so one element type draws them all.
    pub fn outline(self, size: f64) -> Vec<(i32, i32)> {
        let s = size;
        let poly = |n: usize, phase_deg: f64, r: f64| -> Vec<(f64, f64)> {
            (0..n)
                .map(|k| {
                    let a = (phase_deg + 360.0 * k as f64 / n as f64).to_radians();
                    (r * a.cos(), -r * a.sin())
                })
                .collect()
        };
        let pts: Vec<(f64, f64)> = match self {
            Marker::Circle => poly(20, 0.0, s),
            Marker::Square => poly(4, 45.0, s * 1.2),
            Marker::TriangleUp => poly(3, 90.0, s * 1.3),
            Marker::TriangleDown => poly(3, 270.0, s * 1.3),
            Marker::Diamond => poly(4, 90.0, s * 1.3),
            Marker::Hexagon => poly(6, 0.0, s * 1.1),
            Marker::Plus => {
                let a = s * 1.15;
                let b = s * 0.42;
                vec![
                    (-b, -a),
                    (b, -a),
                    (b, -b),
                    (a, -b),
                    (a, b),
                    (b, b),
                    (b, a),
                    (-b, a),
                    (-b, b),
                    (-a, b),
                    (-a, -b),
                    (-b, -b),
                ]
            }
        };
        pts.into_iter()
            .map(|(x, y)| (x.round() as i32, y.round() as i32))
            .collect()
    }
}

/// Colour, marker and line pattern of one series.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SeriesStyle {
    pub colour: RGBColor,
    pub marker: Marker,
    pub dashed: bool,
}

impl SeriesStyle {
    /// The style handed to the `idx`-th series of a figure.
    pub fn nth(idx: usize) -> Self {
        SeriesStyle {
            colour: SERIES[idx % SERIES.len()],
            marker: MARKERS[idx % MARKERS.len()],
            dashed: false,
        }
    }

    /// The style of a baseline (free run, hand-made grid): slate, dashed, hollow-looking ring.
    pub fn baseline() -> Self {
        SeriesStyle {
            colour: BASELINE,
            marker: Marker::Circle,
            dashed: true,
        }
    }
}

/// A colour map: stops `(position in [0, 1], colour)`, interpolated in OKLab.
#[derive(Debug, Clone, Copy)]
pub struct ColourMap {
    pub name: &'static str,
    pub stops: &'static [(f64, RGBColor)],
}

/// Sequential: cream → amber → rose → plum → deep indigo. Lightness falls monotonically.
pub const DUSK: ColourMap = ColourMap {
    name: "dusk",
    stops: &[
        (0.0, RGBColor(0xfc, 0xf7, 0xdc)),
        (0.22, RGBColor(0xf6, 0xcf, 0x86)),
        (0.45, RGBColor(0xe8, 0x8e, 0x62)),
        (0.66, RGBColor(0xbc, 0x4f, 0x74)),
        (0.84, RGBColor(0x72, 0x2c, 0x78)),
        (1.0, RGBColor(0x25, 0x16, 0x4a)),
    ],
};

/// Diverging: deep blue (negative) → warm paper (zero) → copper (positive).
pub const TIDE: ColourMap = ColourMap {
    name: "tide",
    stops: &[
        (0.0, RGBColor(0x17, 0x3f, 0x7a)),
        (0.25, RGBColor(0x62, 0x96, 0xc8)),
        (0.5, RGBColor(0xf5, 0xf2, 0xeb)),
        (0.75, RGBColor(0xe0, 0x98, 0x58)),
        (1.0, RGBColor(0x8a, 0x3b, 0x0c)),
    ],
};

impl ColourMap {
    /// Colour at `t` (clamped to [0, 1]; NaN maps to the low end).
    pub fn at(&self, t: f64) -> RGBColor {
        let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
        let stops = self.stops;
        let hi_idx = stops
            .iter()
            .position(|(p, _)| *p >= t)
            .unwrap_or(stops.len() - 1)
            .max(1);
        let (p0, c0) = stops[hi_idx - 1];
        let (p1, c1) = stops[hi_idx];
        let f = if p1 > p0 { (t - p0) / (p1 - p0) } else { 0.0 };
        let a = oklab(c0);
        let b = oklab(c1);
        from_oklab([
            a[0] + f * (b[0] - a[0]),
            a[1] + f * (b[1] - a[1]),
            a[2] + f * (b[2] - a[2]),
        ])
    }
}

fn srgb_to_linear(c: u8) -> f64 {
    let v = c as f64 / 255.0;
    if v <= 0.04045 {
        v / 12.92
    } else {
        ((v + 0.055) / 1.055).powf(2.4)
    }
}

fn linear_to_srgb(v: f64) -> u8 {
    let v = v.clamp(0.0, 1.0);
    let s = if v <= 0.003_130_8 {
        12.92 * v
    } else {
        1.055 * v.powf(1.0 / 2.4) - 0.055
    };
    (s * 255.0).round().clamp(0.0, 255.0) as u8
}

/// Linear-light RGB of an sRGB colour (IEC 61966-2-1 transfer curve).
pub fn linear_rgb(c: RGBColor) -> [f64; 3] {
    [
        srgb_to_linear(c.0),
        srgb_to_linear(c.1),
        srgb_to_linear(c.2),
    ]
}

/// OKLab `[L, a, b]` of linear RGB (Ottosson 2020, "A perceptual color space for image
/// processing").
pub fn oklab_of_linear(rgb: [f64; 3]) -> [f64; 3] {
    let [r, g, b] = rgb;
    let l = 0.412_221_470_8 * r + 0.536_332_536_3 * g + 0.051_445_992_9 * b;
    let m = 0.211_903_498_2 * r + 0.680_699_545_1 * g + 0.107_396_956_6 * b;
    let s = 0.088_302_461_9 * r + 0.281_718_837_6 * g + 0.629_978_700_5 * b;
    let (l, m, s) = (l.cbrt(), m.cbrt(), s.cbrt());
    [
        0.210_454_255_3 * l + 0.793_617_785_0 * m - 0.004_072_046_8 * s,
        1.977_998_495_1 * l - 2.428_592_205_0 * m + 0.450_593_709_9 * s,
        0.025_904_037_1 * l + 0.782_771_766_2 * m - 0.808_675_766_0 * s,
    ]
}

/// OKLab `[L, a, b]` of an sRGB colour.
pub fn oklab(c: RGBColor) -> [f64; 3] {
    oklab_of_linear(linear_rgb(c))
}

fn from_oklab(lab: [f64; 3]) -> RGBColor {
    let [l_, a, b] = lab;
    let l = l_ + 0.396_337_777_4 * a + 0.215_803_757_3 * b;
    let m = l_ - 0.105_561_345_8 * a - 0.063_854_172_8 * b;
    let s = l_ - 0.089_484_177_5 * a - 1.291_485_548_0 * b;
    let (l, m, s) = (l * l * l, m * m * m, s * s * s);
    let r = 4.076_741_662_1 * l - 3.307_711_591_3 * m + 0.230_969_929_2 * s;
    let g = -1.268_438_004_6 * l + 2.609_757_401_1 * m - 0.341_319_396_5 * s;
    let bl = -0.004_196_086_3 * l - 0.703_418_614_7 * m + 1.707_614_701_0 * s;
    RGBColor(linear_to_srgb(r), linear_to_srgb(g), linear_to_srgb(bl))
}

/// `#rrggbb` of a colour, for CSS and SVG.
pub fn hex(c: RGBColor) -> String {
    format!("#{:02x}{:02x}{:02x}", c.0, c.1, c.2)
}

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::needless_range_loop)]
mod tests {
    use super::*;

    /// Machado, Oliveira & Fernandes (2009), severity 1.0 matrices on linear RGB (from memory).
    const PROTAN: [[f64; 3]; 3] = [
        [0.152_286, 1.052_583, -0.204_868],
        [0.114_503, 0.786_281, 0.099_216],
        [-0.003_882, -0.048_116, 1.051_998],
    ];
    const DEUTAN: [[f64; 3]; 3] = [
        [0.367_322, 0.860_646, -0.227_968],
        [0.280_085, 0.672_501, 0.047_413],
        [-0.011_820, 0.042_940, 0.968_881],
    ];
    const TRITAN: [[f64; 3]; 3] = [
        [1.255_528, -0.076_749, -0.178_779],
        [-0.078_411, 0.930_809, 0.147_602],
        [0.004_733, 0.691_367, 0.303_900],
    ];
    const IDENTITY: [[f64; 3]; 3] = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]];

    fn simulate(m: &[[f64; 3]; 3], c: RGBColor) -> [f64; 3] {
        let v = linear_rgb(c);
        let mut out = [0.0; 3];
        for (row, o) in m.iter().zip(out.iter_mut()) {
            *o = (row[0] * v[0] + row[1] * v[1] + row[2] * v[2]).clamp(0.0, 1.0);
        }
        oklab_of_linear(out)
    }

    fn distance(a: [f64; 3], b: [f64; 3]) -> f64 {
        ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
    }

    #[test]
    fn oklab_matches_published_values() {
        // Ottosson (2020) lists white as L = 1, a = b = 0 and the sRGB primaries; red is
        // (0.6279554, 0.2248631, 0.1258463) (values from the OKLab post, from memory).
        let white = oklab(RGBColor(255, 255, 255));
        assert!((white[0] - 1.0).abs() < 1e-6 && white[1].abs() < 1e-6 && white[2].abs() < 1e-6);
        let red = oklab(RGBColor(255, 0, 0));
        assert!((red[0] - 0.627_955_4).abs() < 1e-5, "{red:?}");
        assert!((red[1] - 0.224_863_1).abs() < 1e-5, "{red:?}");
        assert!((red[2] - 0.125_846_3).abs() < 1e-5, "{red:?}");
    }

    #[test]
    fn oklab_round_trip_keeps_colours() {
        for c in SERIES.iter().chain([INK, PAPER, ZONE, HIGHLIGHT].iter()) {
            let back = from_oklab(oklab(*c));
            assert_eq!((back.0, back.1, back.2), (c.0, c.1, c.2));
        }
    }

    #[test]
    fn series_colours_stay_apart_under_colour_vision_deficiency() {
        // A distance of 0.02 in OKLab is about one just-noticeable step (common practice);
        // adjacent series must stay well above that for every simulated vision type. All
        // seven colours must also be separable pairwise, with a lower bar.
        for (name, m) in [
            ("normal", IDENTITY),
            ("protan", PROTAN),
            ("deutan", DEUTAN),
            ("tritan", TRITAN),
        ] {
            for i in 0..SERIES.len() {
                for j in i + 1..SERIES.len() {
                    let d = distance(simulate(&m, SERIES[i]), simulate(&m, SERIES[j]));
                    let bar = if j == i + 1 { 0.12 } else { 0.06 };
                    assert!(d > bar, "{name}: series {i} and {j} differ by only {d:.3}");
                }
                let d = distance(simulate(&m, SERIES[i]), simulate(&m, BASELINE));
                assert!(
                    d > 0.06,
                    "{name}: series {i} too close to the baseline slate ({d:.3})"
                );
            }
        }
    }

    #[test]
    fn sequential_map_lightness_falls_monotonically() {
        let mut last = f64::INFINITY;
        for k in 0..=200 {
            let l = oklab(DUSK.at(k as f64 / 200.0))[0];
            assert!(
                l < last + 1e-9,
                "lightness rises at t = {}",
                k as f64 / 200.0
            );
            last = l;
        }
        let span = oklab(DUSK.at(0.0))[0] - oklab(DUSK.at(1.0))[0];
        assert!(span > 0.6, "lightness span {span} too small to read");
    }

    #[test]
    fn diverging_map_is_lightest_at_zero() {
        let mid = oklab(TIDE.at(0.5))[0];
        for k in 0..=100 {
            let t = k as f64 / 100.0;
            let l = oklab(TIDE.at(t))[0];
            assert!(l <= mid + 1e-9);
            // Lightness falls away from the centre on both sides.
            if t < 0.5 {
                assert!(oklab(TIDE.at(t + 0.01))[0] + 1e-9 >= l);
            }
        }
    }

    #[test]
    fn colour_map_hits_its_stops_and_clamps() {
        let c = DUSK.at(0.0);
        assert_eq!((c.0, c.1, c.2), (0xfc, 0xf7, 0xdc));
        let c = DUSK.at(7.0);
        assert_eq!((c.0, c.1, c.2), (0x25, 0x16, 0x4a));
        let c = DUSK.at(f64::NAN);
        assert_eq!((c.0, c.1, c.2), (0xfc, 0xf7, 0xdc));
    }

    #[test]
    fn markers_are_closed_polygons_of_the_requested_size() {
        for m in MARKERS {
            let pts = m.outline(6.0);
            assert!(pts.len() >= 3);
            let max = pts.iter().map(|(x, y)| x.abs().max(y.abs())).max().unwrap();
            assert!((4..=9).contains(&max), "{m:?} spans {max} px");
        }
    }
}
