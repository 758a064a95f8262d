//! Path quality and path following (SPEC §5).
//!
//! - `path_length_m`: the polyline's length.
//! - `path_curvature_max` (1/m): the largest three-point (Menger) curvature
//!   `2 |(b - a) x (c - b)| / (|ab| |bc| |ca|)` on the path densified to `path_step_m`.
//!   Three points of a circle give exactly 1/R, so a sampled circle reads 1/R up to rounding.
//! - `path_deviation_m`: the largest distance of a path point from the straight chord
//!   joining the ends of a sliding stretch of `deviation_window_m` of arc length.
//! - `path_length_excess`: path length over the shortest feasible path, found by A* (the
//!   `pathfinding` crate) on an 8-connected occupancy grid of the known obstacles inflated
//!   by the footprint's half-width, then shortened by string pulling (a grid cell is skipped
//!   when the straight segment past it stays in free cells). Bias: the result is an upper
//!   bound of the true shortest length, at most about one grid cell per bend too long, and
//!   free space narrower than a cell is closed.
//! - `cross_track_m`: the reference ego's signed distance from the plan (left positive);
//!   `path_heading_error_rad`: its heading minus the plan's tangent, wrapped.

use crate::geometry::Body;
use crate::metrics::ego::wrap_angle;

/// Euclidean length of (dx, dy). Coordinates are validated finite metres, far from where
/// the squares could overflow, so the plain root serves where `hypot`'s guard would cost
/// several times as much on every densified point.
#[inline]
pub fn norm(dx: f64, dy: f64) -> f64 {
    (dx * dx + dy * dy).sqrt()
}

/// `x.round()` (halves away from zero), inline. The x86-64 baseline has no rounding
/// instruction, so `f64::round` is a library call, and the grid rounds at every sample of
/// every line-of-sight test. For |x| < 2^52 truncation by `as i64` is exact and so is the
/// fraction `x - t`; anything else (huge, infinite, NaN) takes the library call. Equal to
/// `f64::round` for every input except the sign of a zero result (-0.3 gives +0.0), which
/// no caller can see: they convert to an index.
#[inline]
pub fn round_half_away(x: f64) -> f64 {
    if x.is_nan() || x.abs() >= 4_503_599_627_370_496.0 {
        return x.round();
    }
    let t = x as i64 as f64;
    let f = x - t;
    if f >= 0.5 {
        t + 1.0
    } else if f <= -0.5 {
        t - 1.0
    } else {
        t
    }
}

/// Resamples a polyline at most `step` apart (keeping the vertices).
pub fn densify(pts: &[[f64; 2]], step: f64) -> Vec<[f64; 2]> {
    let mut out = Vec::with_capacity(pts.len());
    for w in pts.windows(2) {
        let (a, b) = (w[0], w[1]);
        let d = norm(b[0] - a[0], b[1] - a[1]);
        let n = ((d / step).ceil() as usize).max(1);
        for k in 0..n {
            let f = k as f64 / n as f64;
            out.push([a[0] + (b[0] - a[0]) * f, a[1] + (b[1] - a[1]) * f]);
        }
    }
    if let Some(last) = pts.last() {
        out.push(*last);
    }
    out
}

/// Polyline length (m).
pub fn length(pts: &[[f64; 2]]) -> f64 {
    pts.windows(2).map(|w| norm(w[1][0] - w[0][0], w[1][1] - w[0][1])).sum()
}

/// Menger curvature of three points (1/m); 0 when two coincide.
pub fn menger(a: [f64; 2], b: [f64; 2], c: [f64; 2]) -> f64 {
    let (ab, bc, ca) =
        (norm(b[0] - a[0], b[1] - a[1]), norm(c[0] - b[0], c[1] - b[1]), norm(a[0] - c[0], a[1] - c[1]));
    let cross = (b[0] - a[0]) * (c[1] - b[1]) - (b[1] - a[1]) * (c[0] - b[0]);
    let den = ab * bc * ca;
    if den <= 1e-12 {
        0.0
    } else {
        2.0 * cross.abs() / den
    }
}

/// Largest three-point curvature along the points (1/m).
pub fn curvature_max(pts: &[[f64; 2]]) -> f64 {
    pts.windows(3).map(|w| menger(w[0], w[1], w[2])).fold(0.0, f64::max)
}

/// Squared distance from a point to a segment (the callers compare, then take one root).
fn seg_distance2(p: [f64; 2], a: [f64; 2], b: [f64; 2]) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let l2 = dx * dx + dy * dy;
    let t = if l2 > 0.0 { (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / l2).clamp(0.0, 1.0) } else { 0.0 };
    let (ex, ey) = (p[0] - a[0] - t * dx, p[1] - a[1] - t * dy);
    ex * ex + ey * ey
}

/// Largest departure from the chord over every stretch of `window` metres of arc length.
pub fn deviation_max(pts: &[[f64; 2]], window: f64) -> f64 {
    let mut arc = Vec::with_capacity(pts.len());
    let mut s = 0.0;
    for (i, p) in pts.iter().enumerate() {
        if i > 0 {
            s += norm(p[0] - pts[i - 1][0], p[1] - pts[i - 1][1]);
        }
        arc.push(s);
    }
    let mut best2 = 0.0f64;
    let mut j = 0;
    for i in 0..pts.len() {
        j = j.max(i);
        while j + 1 < pts.len() && arc[j] - arc[i] < window {
            j += 1;
        }
        for k in i + 1..j {
            best2 = best2.max(seg_distance2(pts[k], pts[i], pts[j]));
        }
        if j + 1 == pts.len() && arc[j] - arc[i] < window {
            break;
        }
    }
    best2.sqrt()
}

/// Where a point projects onto a polyline.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Projection {
    /// The nearest point on the path.
    pub point: [f64; 2],
    /// The path's tangent heading there (rad).
    pub yaw: f64,
    /// Signed distance, left of the path positive (m).
    pub lateral: f64,
}

/// Slack of the bounding-box test in [`project`] (m), plus 1e-12 of the point's
/// coordinates: rounding of coordinates up to `limits.max_coordinate_m` (1e7 m by default)
/// is about 2e-9 m.
const PRUNE_SLACK_M: f64 = 1e-6;

/// Projects (x, y) onto the polyline (at least two points).
pub fn project(pts: &[[f64; 2]], x: f64, y: f64) -> Option<Projection> {
    // Squared distances compare the same; the root, the side and the heading are taken
    // for the nearest segment only.
    let mut best: Option<(f64, usize, [f64; 2])> = None;
    let slack = PRUNE_SLACK_M + (x.abs() + y.abs()) * 1e-12;
    for (i, w) in pts.windows(2).enumerate() {
        let (a, b) = (w[0], w[1]);
        // A segment whose bounding box is farther than the nearest point so far cannot
        // hold a nearer one: skipped without the division. The gap is shrunk by `slack`
        // and the bound raised by a relative 1e-9, far more than the rounding
        // of the foot point and of d2 below, so a skipped segment is one whose d2 would
        // not have passed `d2 < bd2`: the result is the full scan's, bit for bit.
        if let Some((bd2, _, _)) = best {
            let gx = (a[0].min(b[0]) - x).max(x - a[0].max(b[0])) - slack;
            let gy = (a[1].min(b[1]) - y).max(y - a[1].max(b[1])) - slack;
            let (gx, gy) = (gx.max(0.0), gy.max(0.0));
            if gx * gx + gy * gy > bd2 * (1.0 + 1e-9) {
                continue;
            }
        }
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let l2 = dx * dx + dy * dy;
        if l2 <= 0.0 {
            continue;
        }
        let t = (((x - a[0]) * dx + (y - a[1]) * dy) / l2).clamp(0.0, 1.0);
        let q = [a[0] + t * dx, a[1] + t * dy];
        let (ex, ey) = (x - q[0], y - q[1]);
        let d2 = ex * ex + ey * ey;
        if best.is_none_or(|(bd2, _, _)| d2 < bd2) {
            best = Some((d2, i, q));
        }
    }
    best.map(|(d2, i, q)| {
        let (a, b) = (pts[i], pts[i + 1]);
        let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
        let d = d2.sqrt();
        let side = dx * (y - a[1]) - dy * (x - a[0]);
        Projection { point: q, yaw: dy.atan2(dx), lateral: if side >= 0.0 { d } else { -d } }
    })
}

/// Heading error against a projection, wrapped to (-pi, pi].
pub fn heading_error(yaw: f64, p: &Projection) -> f64 {
    wrap_angle(yaw - p.yaw)
}

/// An occupancy grid.
#[derive(Debug, Clone)]
pub struct Grid {
    origin: [f64; 2],
    res: f64,
    w: usize,
    h: usize,
    occ: Vec<bool>,
}

impl Grid {
    /// A grid over `lo..hi` at `res` metres, coarsened (doubling `res`) until it has at most
    /// `max_cells` cells, with the bodies inflated by `inflation` marked occupied.
    pub fn build<'a>(
        lo: [f64; 2],
        hi: [f64; 2],
        mut res: f64,
        max_cells: usize,
        bodies: impl Iterator<Item = &'a Body>,
        inflation: f64,
    ) -> Grid {
        let dims = |res: f64| {
            (((hi[0] - lo[0]) / res).ceil() as usize + 1, ((hi[1] - lo[1]) / res).ceil() as usize + 1)
        };
        while dims(res).0 * dims(res).1 > max_cells {
            res *= 2.0;
        }
        let (w, h) = dims(res);
        let mut g = Grid { origin: lo, res, w, h, occ: vec![false; w * h] };
        for b in bodies {
            let (i0, j0) = g.cell_clamped([b.lo[0] - inflation, b.lo[1] - inflation]);
            let (i1, j1) = g.cell_clamped([b.hi[0] + inflation, b.hi[1] + inflation]);
            for j in j0..=j1 {
                for i in i0..=i1 {
                    if !g.occ[j * w + i] {
                        let c = g.centre(i, j);
                        if b.nearer_than(c[0], c[1], inflation) {
                            g.occ[j * w + i] = true;
                        }
                    }
                }
            }
        }
        g
    }

    /// Resolution actually used (m).
    pub fn resolution(&self) -> f64 {
        self.res
    }

    /// Cells.
    pub fn cells(&self) -> usize {
        self.w * self.h
    }

    fn centre(&self, i: usize, j: usize) -> [f64; 2] {
        [self.origin[0] + i as f64 * self.res, self.origin[1] + j as f64 * self.res]
    }

    fn cell_clamped(&self, p: [f64; 2]) -> (usize, usize) {
        let i = round_half_away((p[0] - self.origin[0]) / self.res).clamp(0.0, (self.w - 1) as f64) as usize;
        let j = round_half_away((p[1] - self.origin[1]) / self.res).clamp(0.0, (self.h - 1) as f64) as usize;
        (i, j)
    }

    fn free(&self, i: usize, j: usize) -> bool {
        !self.occ[j * self.w + i]
    }

    /// Whether the straight segment between two cells stays in free cells (sampled at a
    /// quarter cell).
    fn line_free(&self, a: (usize, usize), b: (usize, usize)) -> bool {
        let (ax, ay, bx, by) = (a.0 as f64, a.1 as f64, b.0 as f64, b.1 as f64);
        let n = ((bx - ax).abs().max((by - ay).abs()) * 4.0).ceil() as usize;
        (0..=n).all(|k| {
            let f = if n == 0 { 0.0 } else { k as f64 / n as f64 };
            let (i, j) =
                (round_half_away(ax + (bx - ax) * f) as usize, round_half_away(ay + (by - ay) * f) as usize);
            self.free(i, j)
        })
    }

    /// Length of the shortest feasible path from `start` to `goal` (m), or `None` when the
    /// goal cannot be reached. Occupied start and goal cells are allowed (the vehicle may be
    /// inside the inflation already).
    pub fn shortest(&self, start: [f64; 2], goal: [f64; 2]) -> Option<f64> {
        let s = self.cell_clamped(start);
        let g = self.cell_clamped(goal);
        // In line of sight, A* and string pulling would end at the same straight segment.
        if self.line_free(s, g) {
            return Some(length(&[start, goal]));
        }
        let (w, h) = (self.w as isize, self.h as isize);
        // Integer costs in 1/1000 cell for A*: straight 1000, diagonal 1414.
        // The neighbours in a fixed array (no allocation per expanded cell).
        let succ = |&(i, j): &(usize, usize)| {
            [
                (1, 0, 1000),
                (-1, 0, 1000),
                (0, 1, 1000),
                (0, -1, 1000),
                (1, 1, 1414),
                (1, -1, 1414),
                (-1, 1, 1414),
                (-1, -1, 1414),
            ]
            .map(|(di, dj, c): (isize, isize, u64)| {
                let (ni, nj) = (i as isize + di, j as isize + dj);
                if ni < 0 || nj < 0 || ni >= w || nj >= h {
                    return None;
                }
                let (ni, nj) = (ni as usize, nj as usize);
                (self.free(ni, nj) || (ni, nj) == g).then_some(((ni, nj), c))
            })
            .into_iter()
            .flatten()
        };
        let heur = |&(i, j): &(usize, usize)| -> u64 {
            let (dx, dy) = ((i as i64 - g.0 as i64).unsigned_abs(), (j as i64 - g.1 as i64).unsigned_abs());
            let (lo, hi) = (dx.min(dy), dx.max(dy));
            1000 * (hi - lo) + 1414 * lo
        };
        let (cells, _) = pathfinding::prelude::astar(&s, succ, heur, |c| *c == g)?;
        // String pulling: from each kept cell, jump to the farthest cell in line of sight.
        let mut kept = vec![cells[0]];
        let mut i = 0;
        while i + 1 < cells.len() {
            let mut j = cells.len() - 1;
            while j > i + 1 && !self.line_free(cells[i], cells[j]) {
                j -= 1;
            }
            kept.push(cells[j]);
            i = j;
        }
        let pts: Vec<[f64; 2]> = kept.iter().map(|&(i, j)| self.centre(i, j)).collect();
        // Replace the snapped end cells by the real start and goal.
        let mut pts = pts;
        if let Some(f) = pts.first_mut() {
            *f = start;
        }
        if let Some(l) = pts.last_mut() {
            *l = goal;
        }
        Some(length(&pts))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{Body, ObstacleId};

    /// The full scan `project` prunes: every segment's foot point, the first strictly
    /// nearest kept.
    fn project_full_scan(pts: &[[f64; 2]], x: f64, y: f64) -> Option<Projection> {
        let mut best: Option<(f64, usize, [f64; 2])> = None;
        for (i, w) in pts.windows(2).enumerate() {
            let (a, b) = (w[0], w[1]);
            let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
            let l2 = dx * dx + dy * dy;
            if l2 <= 0.0 {
                continue;
            }
            let t = (((x - a[0]) * dx + (y - a[1]) * dy) / l2).clamp(0.0, 1.0);
            let q = [a[0] + t * dx, a[1] + t * dy];
            let d2 = (x - q[0]) * (x - q[0]) + (y - q[1]) * (y - q[1]);
            if best.is_none_or(|(bd2, _, _)| d2 < bd2) {
                best = Some((d2, i, q));
            }
        }
        best.map(|(d2, i, q)| {
            let (a, b) = (pts[i], pts[i + 1]);
            let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
            let side = dx * (y - a[1]) - dy * (x - a[0]);
            let d = d2.sqrt();
            Projection { point: q, yaw: dy.atan2(dx), lateral: if side >= 0.0 { d } else { -d } }
        })
    }

    proptest::proptest! {
        /// The pruned projection equals the full scan bit for bit: random polylines (with
        /// repeated vertices and far offsets), points on vertices, on segments and off them.
        #[test]
        fn pruned_projection_is_the_full_scan(
            origin in (-1e6f64..1e6, -1e6f64..1e6),
            steps in proptest::collection::vec((-3.0f64..3.0, -3.0f64..3.0, 0u8..4), 1..60),
            probe in (0usize..60, -1.0f64..2.0, -2.0f64..2.0),
        ) {
            let mut pts = vec![[origin.0, origin.1]];
            for &(dx, dy, kind) in &steps {
                let l = *pts.last().unwrap();
                // kind 0: the same vertex again (a zero-length segment).
                pts.push(if kind == 0 { l } else { [l[0] + dx, l[1] + dy] });
            }
            let k = probe.0 % pts.len();
            let v = pts[k];
            let n = pts[(k + 1) % pts.len()];
            let on_segment = [v[0] + (n[0] - v[0]) * probe.1, v[1] + (n[1] - v[1]) * probe.1];
            for (x, y) in [(v[0], v[1]), (on_segment[0], on_segment[1]), (v[0] + probe.2, v[1] - probe.2)] {
                let (got, want) = (project(&pts, x, y), project_full_scan(&pts, x, y));
                let bits = |p: Option<Projection>| {
                    p.map(|p| [p.point[0].to_bits(), p.point[1].to_bits(), p.yaw.to_bits(), p.lateral.to_bits()])
                };
                proptest::prop_assert_eq!(bits(got), bits(want));
            }
        }
    }

    /// Reference: the standard library's `f64::round`. Halves, their neighbours one ulp
    /// either side, the 2^52 edge, infinities and NaN, then random values of every scale.
    #[test]
    fn inline_round_equals_the_library_round() {
        let same = |x: f64| {
            let (a, b) = (round_half_away(x), x.round());
            assert!(a == b || (a.is_nan() && b.is_nan()), "{x:e}: {a} vs {b}");
        };
        let mut cases = vec![f64::INFINITY, f64::NEG_INFINITY, f64::NAN, f64::MAX, 4_503_599_627_370_496.0];
        for k in -2000..2000 {
            let h = k as f64 + 0.5;
            cases.extend([h, f64::from_bits(h.to_bits() + 1), f64::from_bits(h.to_bits() - 1), k as f64]);
        }
        for e in 40..56 {
            let big = (2.0f64).powi(e);
            cases.extend([big - 0.5, big + 0.5, big - 1.5, -(big - 0.5), f64::from_bits(big.to_bits() - 1)]);
        }
        let mut z = 0x9e37_79b9_7f4a_7c15u64;
        for _ in 0..200_000 {
            // splitmix64: random bit patterns cover every exponent and both signs.
            z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut x = z;
            x = (x ^ (x >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            x = (x ^ (x >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            cases.push(f64::from_bits(x ^ (x >> 31)));
            cases.push((x >> 11) as f64 / (1u64 << 20) as f64 - 4096.0);
        }
        for x in cases {
            same(x);
        }
    }

    #[test]
    fn sampled_circle_has_curvature_one_over_r() {
        // Three points of a circle define it, so Menger curvature is exactly 1/R (up to
        // rounding) at any sampling step.
        for r in [2.0, 10.0, 55.0] {
            let pts: Vec<[f64; 2]> = (0..200)
                .map(|k| {
                    let a = k as f64 * 0.01;
                    [r * a.cos(), r * a.sin()]
                })
                .collect();
            let k = curvature_max(&pts);
            assert!((k - 1.0 / r).abs() < 1e-6 / r, "R={r}: {k}");
        }
        assert_eq!(curvature_max(&[[0.0, 0.0], [1.0, 0.0], [2.0, 0.0]]), 0.0);
    }

    #[test]
    fn length_deviation_and_projection_by_hand() {
        let p = [[0.0, 0.0], [3.0, 4.0], [6.0, 0.0]];
        assert_eq!(length(&p), 10.0);
        // Over the whole path (window 10 m) the chord is (0,0)-(6,0); the apex is 4 m off.
        assert!((deviation_max(&densify(&p, 0.5), 10.0) - 4.0).abs() < 1e-9);
        let q = project(&[[0.0, 0.0], [10.0, 0.0]], 4.0, 1.5).unwrap();
        assert_eq!(q.lateral, 1.5);
        assert_eq!(project(&[[0.0, 0.0], [10.0, 0.0]], 4.0, -2.0).unwrap().lateral, -2.0);
        let d = densify(&[[0.0, 0.0], [1.0, 0.0]], 0.3);
        assert_eq!(d.len(), 5);
    }

    #[test]
    fn shortest_path_around_a_disc_matches_tangent_arc_tangent() {
        // Analytic case: from (-10, 0) to (10, 0) around a disc of radius 2 at the origin,
        // inflated by 1 m: effective radius R = 3. The shortest path is tangent + arc +
        // tangent: 2 sqrt(d^2 - R^2) + R (pi - 2 acos(R / d)) with d = 10.
        let (d, r) = (10.0f64, 3.0f64);
        let exact = 2.0 * (d * d - r * r).sqrt() + r * (std::f64::consts::PI - 2.0 * (r / d).acos());
        let body = Body::disc(ObstacleId::Map(1), [0.0, 0.0], 2.0);
        for res in [0.2, 0.1] {
            let g = Grid::build([-12.0, -8.0], [12.0, 8.0], res, 1_000_000, std::iter::once(&body), 1.0);
            let got = g.shortest([-10.0, 0.0], [10.0, 0.0]).unwrap();
            // Stated tolerance: an upper bound within two cells per bend plus the cell
            // rounding of the obstacle edge.
            assert!(got >= exact - 2.0 * res && got <= exact + 4.0 * res, "res {res}: {got} vs {exact}");
        }
        // Free space: the straight line.
        let g = Grid::build([-12.0, -8.0], [12.0, 8.0], 0.2, 1_000_000, std::iter::empty(), 1.0);
        assert!((g.shortest([-10.0, 0.0], [10.0, 0.0]).unwrap() - 20.0).abs() < 1e-9);
    }
}
