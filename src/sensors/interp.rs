//! Interpolation stencils in the plane: which field points a reading at a position uses and
//! with what weights. Bilinear on structured grids (weights renormalised over fluid nodes, so
//! solid nodes never contribute), inverse-distance weighting over the nearest points of a point
//! cloud (Shepard 1968, power 2; an exact hit returns that point), with a bucket index so a
//! query costs O(1) on evenly spread clouds.
//!
//! Stencils are small fixed arrays ([`NodeWeights`]) so a million queries allocate nothing.
//! Pure geometry: no IO, no threads (callers parallelise).

use crate::io::{Grid, PlanePoint, PointCloud};

/// Largest number of field points one interpolated reading uses.
pub const MAX_NODES: usize = 4;

/// Number of nearest cloud points used by inverse-distance weighting.
pub const IDW_NEIGHBOURS: usize = 4;

/// Field points and weights (summing to 1) of one interpolated reading.
#[derive(Debug, Clone, Copy, Default)]
pub struct NodeWeights {
    pub n_nodes: usize,
    pub point_idx: [usize; MAX_NODES],
    pub weight: [f64; MAX_NODES],
}

impl NodeWeights {
    fn push(&mut self, point_idx: usize, weight: f64) {
        self.point_idx[self.n_nodes] = point_idx;
        self.weight[self.n_nodes] = weight;
        self.n_nodes += 1;
    }

    /// `(point_idx, weight)` pairs in use.
    pub fn iter(&self) -> impl Iterator<Item = (usize, f64)> + '_ {
        (0..self.n_nodes).map(|k| (self.point_idx[k], self.weight[k]))
    }
}

/// Outcome of a grid interpolation.
#[derive(Debug, Clone, Copy)]
pub enum GridLookup {
    Inside(NodeWeights),
    /// Inside the grid, but every node with a non-zero weight is solid.
    NoFluid,
    /// Outside the grid by more than the tolerance.
    Outside,
}

/// Lower node index and fraction along one axis, or `None` outside `[−margin, n−1+margin]`
/// (in node units). Positions within the margin are clamped to the edge node.
fn axis_fraction(
    coord: f64,
    origin: f64,
    spacing: f64,
    n_nodes: usize,
    margin: f64,
) -> Option<(usize, f64)> {
    let s = (coord - origin) / spacing;
    let last = (n_nodes - 1) as f64;
    if !s.is_finite() || s < -margin || s > last + margin {
        return None;
    }
    if n_nodes == 1 {
        return Some((0, 0.0));
    }
    let s = s.clamp(0.0, last);
    let lower = (s.floor() as usize).min(n_nodes - 2);
    Some((lower, s - lower as f64))
}

/// Bilinear weights at `p`, renormalised over fluid nodes. `margin` (node units) is how far
/// outside the outermost nodes a position may lie and still be clamped to the edge.
pub fn bilinear(grid: &Grid, p: PlanePoint, margin: f64) -> GridLookup {
    let Some((i0, fx)) = axis_fraction(p[0], grid.origin[0], grid.spacing[0], grid.nx, margin)
    else {
        return GridLookup::Outside;
    };
    let Some((j0, fy)) = axis_fraction(p[1], grid.origin[1], grid.spacing[1], grid.ny, margin)
    else {
        return GridLookup::Outside;
    };
    let mut out = NodeWeights::default();
    let mut total = 0.0;
    for (dj, wy) in [(0, 1.0 - fy), (1, fy)] {
        for (di, wx) in [(0, 1.0 - fx), (1, fx)] {
            let w = wx * wy;
            // Zero weights fall away (also the duplicate node of a one-node axis).
            if w <= 0.0 {
                continue;
            }
            let point_idx = (j0 + dj) * grid.nx + (i0 + di);
            if grid.solid[point_idx] {
                continue;
            }
            out.push(point_idx, w);
            total += w;
        }
    }
    if out.n_nodes == 0 {
        return GridLookup::NoFluid;
    }
    for w in &mut out.weight[..out.n_nodes] {
        *w /= total;
    }
    GridLookup::Inside(out)
}

/// Is `p` inside the grid cell of a solid node (nearest node solid)? `None` outside the grid.
pub fn in_solid_cell(grid: &Grid, p: PlanePoint) -> Option<bool> {
    let nearest = |coord: f64, origin: f64, spacing: f64, n: usize| {
        let s = ((coord - origin) / spacing).round();
        (s >= 0.0 && s <= (n - 1) as f64).then_some(s as usize)
    };
    let i = nearest(p[0], grid.origin[0], grid.spacing[0], grid.nx)?;
    let j = nearest(p[1], grid.origin[1], grid.spacing[1], grid.ny)?;
    Some(grid.solid[j * grid.nx + i])
}

/// Bucket index over a point cloud for nearest-neighbour queries.
#[derive(Debug, Clone)]
pub struct CloudIndex {
    origin: PlanePoint,
    cell: f64,
    n_bx: usize,
    n_by: usize,
    /// CSR layout: points of bucket `b` are `items[starts[b]..starts[b + 1]]`.
    starts: Vec<usize>,
    items: Vec<usize>,
    /// Bounding box of the cloud, `[min, max]`.
    pub bbox: [PlanePoint; 2],
}

/// Orders `(point_idx, distance²)` by distance, then by index.
fn before(a: (usize, f64), b: (usize, f64)) -> bool {
    a.1 < b.1 || (a.1 <= b.1 && a.0 < b.0)
}

fn dist2(a: PlanePoint, b: PlanePoint) -> f64 {
    (a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2)
}

impl CloudIndex {
    /// Builds the index; about two points per bucket on an even cloud.
    pub fn new(points: &[PlanePoint]) -> Self {
        assert!(!points.is_empty(), "a point cloud has at least one point");
        let mut lo = points[0];
        let mut hi = points[0];
        for p in points {
            for a in 0..2 {
                lo[a] = lo[a].min(p[a]);
                hi[a] = hi[a].max(p[a]);
            }
        }
        let extent = [hi[0] - lo[0], hi[1] - lo[1]];
        let n = points.len() as f64;
        let area = extent[0] * extent[1];
        let mut cell = if area > 0.0 {
            (2.0 * area / n).sqrt()
        } else {
            2.0 * extent[0].max(extent[1]) / n
        };
        if cell <= 0.0 || !cell.is_finite() {
            cell = 1.0;
        }
        // Cap the bucket count for strongly elongated clouds.
        let n_bx = ((extent[0] / cell).floor() as usize + 1).min(1 << 16);
        let n_by = ((extent[1] / cell).floor() as usize + 1).min(1 << 16);
        let cell = cell
            .max(extent[0] / n_bx as f64)
            .max(extent[1] / n_by as f64);
        let bucket_of = |p: &PlanePoint| {
            let bx = (((p[0] - lo[0]) / cell) as usize).min(n_bx - 1);
            let by = (((p[1] - lo[1]) / cell) as usize).min(n_by - 1);
            by * n_bx + bx
        };
        let mut starts = vec![0usize; n_bx * n_by + 1];
        for p in points {
            starts[bucket_of(p) + 1] += 1;
        }
        for b in 0..n_bx * n_by {
            starts[b + 1] += starts[b];
        }
        let mut fill = starts.clone();
        let mut items = vec![0usize; points.len()];
        for (idx, p) in points.iter().enumerate() {
            let b = bucket_of(p);
            items[fill[b]] = idx;
            fill[b] += 1;
        }
        CloudIndex {
            origin: lo,
            cell,
            n_bx,
            n_by,
            starts,
            items,
            bbox: [lo, hi],
        }
    }

    /// The `k ≤ MAX_NODES` nearest points to `p`, nearest first, as `(point_idx, distance²)`;
    /// ties broken by the lower point index so results are deterministic.
    pub fn nearest(
        &self,
        points: &[PlanePoint],
        p: PlanePoint,
        k: usize,
    ) -> ([(usize, f64); MAX_NODES], usize) {
        assert!((1..=MAX_NODES).contains(&k));
        let k = k.min(points.len());
        let mut best = [(usize::MAX, f64::INFINITY); MAX_NODES];
        let mut n_found = 0usize;
        // Start from the bucket nearest to `p` (clamped, so far-away queries stay cheap).
        let bucket = |coord: f64, origin: f64, n: usize| {
            (((coord - origin) / self.cell)
                .floor()
                .clamp(0.0, (n - 1) as f64)) as i64
        };
        let cx = bucket(p[0], self.origin[0], self.n_bx);
        let cy = bucket(p[1], self.origin[1], self.n_by);
        let (n_bx, n_by) = (self.n_bx as i64, self.n_by as i64);
        for ring in 0..=n_bx.max(n_by) {
            for by in (cy - ring)..=(cy + ring) {
                if by < 0 || by >= n_by {
                    continue;
                }
                let on_edge_row = by == cy - ring || by == cy + ring;
                let step = if on_edge_row { 1 } else { (2 * ring).max(1) };
                let mut bx = cx - ring;
                while bx <= cx + ring {
                    if bx >= 0 && bx < n_bx {
                        let b = by as usize * self.n_bx + bx as usize;
                        for &idx in &self.items[self.starts[b]..self.starts[b + 1]] {
                            let d2 = dist2(points[idx], p);
                            let worst = best[k - 1];
                            if n_found < k || d2 < worst.1 || (d2 <= worst.1 && idx < worst.0) {
                                let mut pos = n_found.min(k - 1);
                                best[pos] = (idx, d2);
                                while pos > 0 && before(best[pos], best[pos - 1]) {
                                    best.swap(pos, pos - 1);
                                    pos -= 1;
                                }
                                n_found = (n_found + 1).min(k);
                            }
                        }
                    }
                    bx += step;
                }
            }
            // Lower bound on the distance to any bucket not yet visited: only sides of the
            // visited square with buckets beyond them count.
            let mut reach = f64::INFINITY;
            if cx - ring > 0 {
                reach = reach.min(p[0] - (self.origin[0] + (cx - ring) as f64 * self.cell));
            }
            if cx + ring + 1 < n_bx {
                reach = reach.min(self.origin[0] + (cx + ring + 1) as f64 * self.cell - p[0]);
            }
            if cy - ring > 0 {
                reach = reach.min(p[1] - (self.origin[1] + (cy - ring) as f64 * self.cell));
            }
            if cy + ring + 1 < n_by {
                reach = reach.min(self.origin[1] + (cy + ring + 1) as f64 * self.cell - p[1]);
            }
            if reach.is_infinite() || (n_found == k && reach > 0.0 && reach * reach > best[k - 1].1)
            {
                break;
            }
        }
        (best, k)
    }

    /// Median distance (m) from a point to its nearest other point: the cloud's typical spacing.
    pub fn typical_spacing(&self, points: &[PlanePoint]) -> f64 {
        if points.len() < 2 {
            return 1.0;
        }
        let mut d: Vec<f64> = points
            .iter()
            .map(|&p| self.nearest(points, p, 2).0[1].1.sqrt())
            .collect();
        d.sort_by(f64::total_cmp);
        let median = d[d.len() / 2];
        if median > 0.0 {
            median
        } else {
            1.0
        }
    }
}

/// Inverse-distance weights (power 2) over the nearest [`IDW_NEIGHBOURS`] points; a query
/// within `exact_tol` metres of a point returns that point alone.
pub fn inverse_distance(
    cloud: &PointCloud,
    index: &CloudIndex,
    p: PlanePoint,
    exact_tol: f64,
) -> NodeWeights {
    let (near, k) = index.nearest(&cloud.points, p, IDW_NEIGHBOURS);
    let mut out = NodeWeights::default();
    if near[0].1 <= exact_tol * exact_tol {
        out.push(near[0].0, 1.0);
        return out;
    }
    let total: f64 = near[..k].iter().map(|&(_, d2)| 1.0 / d2).sum();
    for &(idx, d2) in &near[..k] {
        out.push(idx, (1.0 / d2) / total);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn grid(nx: usize, ny: usize, spacing: [f64; 2]) -> Grid {
        Grid {
            origin: [10.0, -5.0],
            spacing,
            nx,
            ny,
            solid: vec![false; nx * ny],
            weight: vec![spacing[0] * spacing[1]; nx * ny],
        }
    }

    fn node(g: &Grid, idx: usize) -> PlanePoint {
        let (i, j) = (idx % g.nx, idx / g.nx);
        [
            g.origin[0] + i as f64 * g.spacing[0],
            g.origin[1] + j as f64 * g.spacing[1],
        ]
    }

    fn read(g: &Grid, w: &NodeWeights, f: impl Fn(PlanePoint) -> f64) -> f64 {
        w.iter().map(|(idx, wt)| wt * f(node(g, idx))).sum()
    }

    #[test]
    fn bilinear_reproduces_linear_fields_exactly() {
        // Bilinear interpolation is exact for fields a + bx + cy + dxy (common practice).
        let g = grid(7, 5, [2.5, 4.0]);
        let f = |p: PlanePoint| 1.5 - 0.3 * p[0] + 0.7 * p[1] + 0.01 * p[0] * p[1];
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for _ in 0..200 {
            let p = [rng.random_range(10.0..25.0), rng.random_range(-5.0..11.0)];
            let GridLookup::Inside(w) = bilinear(&g, p, 0.0) else {
                panic!("inside")
            };
            let sum: f64 = w.iter().map(|(_, wt)| wt).sum();
            assert!((sum - 1.0).abs() < 1e-14);
            assert!((read(&g, &w, f) - f(p)).abs() < 1e-12 * (1.0 + f(p).abs()));
        }
    }

    #[test]
    fn bilinear_at_nodes_returns_node_values() {
        let g = grid(4, 3, [1.0, 3.0]);
        for idx in 0..12 {
            let GridLookup::Inside(w) = bilinear(&g, node(&g, idx), 0.0) else {
                panic!()
            };
            let on_node: f64 = w.iter().filter(|&(i, _)| i == idx).map(|(_, wt)| wt).sum();
            assert!((on_node - 1.0).abs() < 1e-12, "node {idx}");
        }
    }

    #[test]
    fn solid_nodes_are_left_out_and_weights_renormalised() {
        let mut g = grid(3, 3, [1.0, 1.0]);
        g.solid[1] = true; // node (1, 0)
        let GridLookup::Inside(w) = bilinear(&g, [10.5, -4.5], 0.0) else {
            panic!()
        };
        assert_eq!(w.n_nodes, 3);
        assert!(w.iter().all(|(idx, _)| idx != 1));
        assert!((w.iter().map(|(_, wt)| wt).sum::<f64>() - 1.0).abs() < 1e-15);
        for k in [0, 1, 3, 4] {
            g.solid[k] = true;
        }
        assert!(matches!(
            bilinear(&g, [10.5, -4.5], 0.0),
            GridLookup::NoFluid
        ));
    }

    #[test]
    fn edges_single_node_axes_and_outside() {
        let g = grid(5, 1, [2.0, 2.0]);
        let GridLookup::Inside(w) = bilinear(&g, [13.0, -5.0], 0.0) else {
            panic!()
        };
        assert_eq!(w.n_nodes, 2);
        assert!(matches!(
            bilinear(&g, [13.0, -4.0], 0.0),
            GridLookup::Outside
        ));
        assert!(matches!(
            bilinear(&g, [13.0, -4.0], 0.5),
            GridLookup::Inside(_)
        ));
        let g = grid(2, 2, [1.0, 1.0]);
        let GridLookup::Inside(w) = bilinear(&g, [11.0, -4.0], 0.0) else {
            panic!()
        };
        assert!((read(&g, &w, |p| p[0] + p[1]) - 7.0).abs() < 1e-12);
        assert!(matches!(
            bilinear(&g, [9.0, -4.0], 0.5),
            GridLookup::Outside
        ));
    }

    fn random_cloud(n: usize, seed: u64) -> PointCloud {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let points: Vec<PlanePoint> = (0..n)
            .map(|_| [rng.random_range(0.0..100.0), rng.random_range(0.0..40.0)])
            .collect();
        PointCloud {
            weight: vec![1.0; n],
            points,
        }
    }

    #[test]
    fn nearest_matches_brute_force() {
        for n in [1, 2, 5, 127, 1000] {
            let cloud = random_cloud(n, n as u64);
            let index = CloudIndex::new(&cloud.points);
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(99);
            for _ in 0..100 {
                let q = [
                    rng.random_range(-20.0..120.0),
                    rng.random_range(-20.0..60.0),
                ];
                let (near, k) = index.nearest(&cloud.points, q, 4);
                let mut brute: Vec<(usize, f64)> = cloud
                    .points
                    .iter()
                    .enumerate()
                    .map(|(i, &p)| (i, dist2(p, q)))
                    .collect();
                brute.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
                assert_eq!(k, n.min(4));
                for m in 0..k {
                    assert_eq!(near[m].0, brute[m].0, "n={n} q={q:?} m={m}");
                }
            }
        }
    }

    #[test]
    fn inverse_distance_is_exact_at_a_node_and_normalised() {
        // Shepard (1968): IDW interpolates the data exactly at the data points.
        let cloud = random_cloud(300, 5);
        let index = CloudIndex::new(&cloud.points);
        let w = inverse_distance(&cloud, &index, cloud.points[17], 1e-9);
        assert_eq!(w.n_nodes, 1);
        assert_eq!(w.point_idx[0], 17);
        assert!((w.weight[0] - 1.0).abs() < 1e-15);
        let w = inverse_distance(&cloud, &index, [50.0, 20.0], 1e-9);
        assert_eq!(w.n_nodes, 4);
        assert!((w.iter().map(|(_, wt)| wt).sum::<f64>() - 1.0).abs() < 1e-14);
        // A constant field is reproduced anywhere (weights form a partition of unity).
        let nearest_first = w.weight[0];
        assert!(w.weight.iter().all(|&x| x <= nearest_first + 1e-15));
    }

    #[test]
    fn collinear_and_duplicate_clouds_work() {
        let points: Vec<PlanePoint> = (0..10).map(|i| [i as f64, 0.0]).collect();
        let index = CloudIndex::new(&points);
        let (near, k) = index.nearest(&points, [3.2, 5.0], 2);
        assert_eq!((k, near[0].0, near[1].0), (2, 3, 4));
        let same = vec![[1.0, 1.0]; 5];
        let index = CloudIndex::new(&same);
        assert_eq!(index.nearest(&same, [0.0, 0.0], 4).0[0].0, 0);
        assert!((CloudIndex::new(&points).typical_spacing(&points) - 1.0).abs() < 1e-12);
    }
}
