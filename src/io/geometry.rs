//! Pure plane geometry on [`PlanePoint`] polygons, shared by the loader (candidate in a zone
//! or an obstacle, solid rasterisation) and later stages (beams stopped by obstacles, maps).
//!
//! Point in polygon uses the even–odd crossing rule (the classic ray-casting test, e.g.
//! O'Rourke, *Computational Geometry in C*, 2nd ed., §7.4); area is the shoelace formula.
//! Polygons are closed implicitly (first vertex not repeated). No IO, no allocation beyond
//! return values.

use super::site::{Domain, Grid, PlanePoint, Polygon};

/// Signed area (m²) by the shoelace formula: positive for counter-clockwise vertices.
pub fn signed_area(vertices: &[PlanePoint]) -> f64 {
    let n = vertices.len();
    if n < 3 {
        return 0.0;
    }
    let mut twice = 0.0;
    for idx in 0..n {
        let [x0, y0] = vertices[idx];
        let [x1, y1] = vertices[(idx + 1) % n];
        twice += x0 * y1 - x1 * y0;
    }
    0.5 * twice
}

/// Area (m²) of a simple polygon.
pub fn polygon_area(vertices: &[PlanePoint]) -> f64 {
    signed_area(vertices).abs()
}

/// `true` when `p` lies inside the polygon (even–odd rule). Points exactly on an edge may
/// fall either way; callers that need a margin test [`distance_to_boundary`] as well.
pub fn point_in_polygon(p: PlanePoint, vertices: &[PlanePoint]) -> bool {
    let n = vertices.len();
    if n < 3 {
        return false;
    }
    let [px, py] = p;
    let mut inside = false;
    let mut prev = vertices[n - 1];
    for &cur in vertices {
        let ([xi, yi], [xj, yj]) = (cur, prev);
        if (yi > py) != (yj > py) {
            let x_cross = xi + (py - yi) * (xj - xi) / (yj - yi);
            if px < x_cross {
                inside = !inside;
            }
        }
        prev = cur;
    }
    inside
}

/// Distance (m) from `p` to the segment `a`–`b`.
pub fn distance_to_segment(p: PlanePoint, a: PlanePoint, b: PlanePoint) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let (cx, cy) = (a[0] + t * dx, a[1] + t * dy);
    ((p[0] - cx).powi(2) + (p[1] - cy).powi(2)).sqrt()
}

/// Distance (m) from `p` to the nearest polygon edge.
pub fn distance_to_boundary(p: PlanePoint, vertices: &[PlanePoint]) -> f64 {
    let n = vertices.len();
    (0..n)
        .map(|idx| distance_to_segment(p, vertices[idx], vertices[(idx + 1) % n]))
        .fold(f64::INFINITY, f64::min)
}

/// Axis-aligned bounding box `(min, max)` of a non-empty vertex list.
pub fn bounding_box(vertices: &[PlanePoint]) -> (PlanePoint, PlanePoint) {
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for v in vertices {
        for axis in 0..2 {
            lo[axis] = lo[axis].min(v[axis]);
            hi[axis] = hi[axis].max(v[axis]);
        }
    }
    (lo, hi)
}

impl Polygon {
    pub fn contains(&self, p: PlanePoint) -> bool {
        point_in_polygon(p, &self.vertices)
    }

    pub fn area(&self) -> f64 {
        polygon_area(&self.vertices)
    }
}

impl Grid {
    /// Position of node `(i, j)`, m.
    pub fn node(&self, i: usize, j: usize) -> PlanePoint {
        [
            self.origin[0] + i as f64 * self.spacing[0],
            self.origin[1] + j as f64 * self.spacing[1],
        ]
    }

    /// Corner nodes `(min, max)` of the node hull: the region where bilinear
    /// interpolation between nodes is defined.
    pub fn node_hull(&self) -> (PlanePoint, PlanePoint) {
        (self.origin, self.node(self.nx - 1, self.ny - 1))
    }

    /// Index `j * nx + i` of the node nearest to `p` (clamped to the grid).
    pub fn nearest_node(&self, p: PlanePoint) -> usize {
        let axis_idx = |axis: usize, n: usize| -> usize {
            let f = ((p[axis] - self.origin[axis]) / self.spacing[axis]).round();
            if f.is_nan() || f <= 0.0 {
                0
            } else {
                (f as usize).min(n - 1)
            }
        };
        axis_idx(1, self.ny) * self.nx + axis_idx(0, self.nx)
    }
}

impl Domain {
    /// `true` when `p` lies in the region the field is defined on: the node hull of a grid
    /// (inclusive, with a 1e-9 relative tolerance) or the bounding box of a point cloud.
    pub fn contains(&self, p: PlanePoint) -> bool {
        let (lo, hi) = self.extent();
        (0..2).all(|axis| {
            let tol = 1e-9 * (hi[axis] - lo[axis]).abs().max(1.0);
            p[axis] >= lo[axis] - tol && p[axis] <= hi[axis] + tol
        })
    }

    /// `(min, max)` corners of the domain, m (see [`Domain::contains`]).
    pub fn extent(&self) -> (PlanePoint, PlanePoint) {
        match self {
            Domain::Grid(g) => g.node_hull(),
            Domain::Points(c) => bounding_box(&c.points),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shoelace_and_crossing() {
        // Unit square, counter-clockwise: area 1 (worked example, common practice).
        let square = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        assert!((signed_area(&square) - 1.0).abs() < 1e-15);
        let mut cw = square;
        cw.reverse();
        assert!((signed_area(&cw) + 1.0).abs() < 1e-15);
        // Triangle (0,0), (4,0), (0,3): area 6 = base·height/2.
        assert!((polygon_area(&[[0.0, 0.0], [4.0, 0.0], [0.0, 3.0]]) - 6.0).abs() < 1e-12);
        assert!(point_in_polygon([0.5, 0.5], &square));
        assert!(!point_in_polygon([1.5, 0.5], &square));
        assert!(!point_in_polygon([0.5, -0.1], &square));
        // Concave "U": the notch is outside.
        let u = [
            [0.0, 0.0],
            [3.0, 0.0],
            [3.0, 3.0],
            [2.0, 3.0],
            [2.0, 1.0],
            [1.0, 1.0],
            [1.0, 3.0],
            [0.0, 3.0],
        ];
        assert!(!point_in_polygon([1.5, 2.0], &u));
        assert!(point_in_polygon([0.5, 2.0], &u));
        assert!(point_in_polygon([1.5, 0.5], &u));
        assert!((polygon_area(&u) - 7.0).abs() < 1e-12);
        assert!((distance_to_boundary([0.5, 0.25], &square) - 0.25).abs() < 1e-12);
    }

    #[test]
    fn grid_nodes() {
        let g = Grid {
            origin: [10.0, -5.0],
            spacing: [2.0, 1.0],
            nx: 4,
            ny: 3,
            solid: vec![false; 12],
            weight: vec![2.0; 12],
        };
        assert_eq!(g.nearest_node([12.9, -3.6]), 4 + 1);
        assert_eq!(g.nearest_node([100.0, 100.0]), 11);
        assert_eq!(g.nearest_node([-100.0, -100.0]), 0);
        let d = Domain::Grid(g);
        assert!(d.contains([16.0, -3.0]));
        assert!(!d.contains([16.1, -3.0]));
    }
}
