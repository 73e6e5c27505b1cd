//! Solid shapes on the lattice: point-in-shape tests, rasterised solid masks and the wall
//! fractions that the interpolated bounce-back needs. Main type: [`Shape`].
//!
//! Coordinates here are lattice units: node `(i, j)` sits at `(i, j)`. Point-in-polygon by
//! the even–odd crossing rule (Shimrat 1962, *Comm. ACM* 5, "Algorithm 112"); wall fractions
//! by intersecting each fluid→solid link with the shape boundary.

use super::lattice::{CX, CY, Q};

/// A solid obstacle in lattice coordinates.
#[derive(Debug, Clone)]
pub enum Shape {
    /// Closed polygon, first vertex not repeated.
    Polygon(Vec<[f64; 2]>),
    Circle {
        centre: [f64; 2],
        radius: f64,
    },
}

impl Shape {
    /// True when `p` lies inside (boundary points count as inside for circles).
    pub fn contains(&self, p: [f64; 2]) -> bool {
        match self {
            Shape::Circle { centre, radius } => {
                let dx = p[0] - centre[0];
                let dy = p[1] - centre[1];
                dx * dx + dy * dy <= radius * radius
            }
            Shape::Polygon(vertices) => {
                let n = vertices.len();
                let mut inside = false;
                let mut k_prev = n - 1;
                for k in 0..n {
                    let a = vertices[k];
                    let b = vertices[k_prev];
                    if (a[1] > p[1]) != (b[1] > p[1]) {
                        let x_cross = a[0] + (p[1] - a[1]) / (b[1] - a[1]) * (b[0] - a[0]);
                        if p[0] < x_cross {
                            inside = !inside;
                        }
                    }
                    k_prev = k;
                }
                inside
            }
        }
    }

    /// Smallest `t` in `[0, 1]` at which the segment `from + t·(to − from)` meets the
    /// boundary, if any.
    pub fn first_crossing(&self, from: [f64; 2], to: [f64; 2]) -> Option<f64> {
        let d = [to[0] - from[0], to[1] - from[1]];
        match self {
            Shape::Circle { centre, radius } => {
                let m = [from[0] - centre[0], from[1] - centre[1]];
                let a = d[0] * d[0] + d[1] * d[1];
                let b = 2.0 * (m[0] * d[0] + m[1] * d[1]);
                let c = m[0] * m[0] + m[1] * m[1] - radius * radius;
                let disc = b * b - 4.0 * a * c;
                if disc < 0.0 {
                    return None;
                }
                let root = disc.sqrt();
                [(-b - root) / (2.0 * a), (-b + root) / (2.0 * a)]
                    .into_iter()
                    .filter(|t| (0.0..=1.0).contains(t))
                    .reduce(f64::min)
            }
            Shape::Polygon(vertices) => {
                let n = vertices.len();
                let mut best: Option<f64> = None;
                for k in 0..n {
                    let a = vertices[k];
                    let b = vertices[(k + 1) % n];
                    let e = [b[0] - a[0], b[1] - a[1]];
                    let denom = d[0] * e[1] - d[1] * e[0];
                    if denom.abs() < 1e-300 {
                        continue;
                    }
                    let w = [a[0] - from[0], a[1] - from[1]];
                    let t = (w[0] * e[1] - w[1] * e[0]) / denom;
                    let s = (w[0] * d[1] - w[1] * d[0]) / denom;
                    if (0.0..=1.0).contains(&t) && (0.0..=1.0).contains(&s) {
                        best = Some(best.map_or(t, |x| x.min(t)));
                    }
                }
                best
            }
        }
    }
}

/// Solid mask of an `nx × ny` lattice: a node is solid when its position lies in any shape.
pub fn rasterise(nx: usize, ny: usize, shapes: &[Shape]) -> Vec<bool> {
    let mut solid = vec![false; nx * ny];
    for j in 0..ny {
        for i in 0..nx {
            let p = [i as f64, j as f64];
            solid[j * nx + i] = shapes.iter().any(|s| s.contains(p));
        }
    }
    solid
}

/// Wall fractions for the interpolated bounce-back (layout of `LatticeSetup::wall_fraction`):
/// for each fluid node and each direction `q` whose source node `x − c_q` is solid, the
/// fraction of the link from `x` towards the source at which the first shape boundary lies.
/// Links without a crossing found (a solid from rounding) get 0.5.
pub fn wall_fractions(nx: usize, ny: usize, solid: &[bool], shapes: &[Shape]) -> Vec<f64> {
    assert_eq!(solid.len(), nx * ny);
    let mut fractions = vec![0.5; nx * ny * Q];
    for j in 0..ny {
        for i in 0..nx {
            let idx = j * nx + i;
            if solid[idx] {
                continue;
            }
            for q in 1..Q {
                let si = i as i64 - CX[q] as i64;
                let sj = j as i64 - CY[q] as i64;
                if si < 0 || sj < 0 || si >= nx as i64 || sj >= ny as i64 {
                    continue;
                }
                if !solid[sj as usize * nx + si as usize] {
                    continue;
                }
                let from = [i as f64, j as f64];
                let to = [si as f64, sj as f64];
                let t = shapes
                    .iter()
                    .filter_map(|s| s.first_crossing(from, to))
                    .reduce(f64::min);
                if let Some(t) = t {
                    fractions[idx * Q + q] = t.clamp(1e-6, 1.0);
                }
            }
        }
    }
    fractions
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn polygon_contains_and_crossing() {
        let square = Shape::Polygon(vec![[1.0, 1.0], [3.0, 1.0], [3.0, 3.0], [1.0, 3.0]]);
        assert!(square.contains([2.0, 2.0]));
        assert!(!square.contains([0.5, 2.0]));
        assert!(!square.contains([2.0, 3.5]));
        let t = square
            .first_crossing([0.0, 2.0], [2.0, 2.0])
            .expect("the segment crosses the left side");
        assert!((t - 0.5).abs() < 1e-12);
        assert!(square.first_crossing([0.0, 0.0], [0.0, 4.0]).is_none());
    }

    #[test]
    fn circle_area_is_recovered_by_rasterisation() {
        // A rasterised disc of radius 20 holds π r² nodes to within the perimeter (common
        // practice: Gauss circle problem error O(r)).
        let disc = Shape::Circle {
            centre: [50.3, 40.7],
            radius: 20.0,
        };
        let solid = rasterise(100, 80, &[disc]);
        let n_solid = solid.iter().filter(|&&s| s).count() as f64;
        let area = std::f64::consts::PI * 400.0;
        assert!((n_solid - area).abs() < 2.0 * std::f64::consts::PI * 20.0 * 0.1);
    }

    #[test]
    fn wall_fractions_of_a_circle_lie_on_its_boundary() {
        let centre = [20.2, 20.6];
        let radius = 7.3;
        let disc = Shape::Circle { centre, radius };
        let solid = rasterise(40, 40, std::slice::from_ref(&disc));
        let fractions = wall_fractions(40, 40, &solid, &[disc]);
        let mut n_links = 0;
        for j in 0..40 {
            for i in 0..40 {
                let idx = j * 40 + i;
                if solid[idx] {
                    continue;
                }
                for q in 1..Q {
                    let si = i as i64 - CX[q] as i64;
                    let sj = j as i64 - CY[q] as i64;
                    if !(0..40).contains(&si) || !(0..40).contains(&sj) {
                        continue;
                    }
                    if !solid[sj as usize * 40 + si as usize] {
                        continue;
                    }
                    let t = fractions[idx * Q + q];
                    let p = [i as f64 - t * CX[q] as f64, j as f64 - t * CY[q] as f64];
                    let r = ((p[0] - centre[0]).powi(2) + (p[1] - centre[1]).powi(2)).sqrt();
                    assert!((r - radius).abs() < 1e-9);
                    assert!(t > 0.0 && t <= 1.0);
                    n_links += 1;
                }
            }
        }
        assert!(n_links > 40);
    }
}
