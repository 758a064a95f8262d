//! Planar geometry for clearance: the ego footprint, obstacle shapes, distances, and a
//! spatial index over a site map. Distances go through the `geo` crate (exact for
//! non-convex polygons, 0 on overlap or containment); the index is an `rstar` R-tree of
//! obstacle bounding boxes. Pure computation.

use geo::{Coord, Distance, Euclidean, Intersects, LineString, Point as GeoPoint, Polygon};
use rstar::{primitives::GeomWithData, primitives::Rectangle, RTree, AABB};
use serde::Serialize;

use crate::msg::{Obstacle, Shape};

/// The ego footprint rectangle relative to the pose origin (x forward, y left).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Footprint {
    /// Length (m).
    pub length: f64,
    /// Width (m).
    pub width: f64,
    /// From the pose origin back to the rear edge (m).
    pub origin_to_rear: f64,
}

impl Footprint {
    /// The rectangle's corners at a pose, counter-clockwise from rear right.
    pub fn corners(&self, x: f64, y: f64, yaw: f64) -> [[f64; 2]; 4] {
        let (s, c) = yaw.sin_cos();
        let (r, f, h) = (-self.origin_to_rear, self.length - self.origin_to_rear, self.width / 2.0);
        [[r, -h], [f, -h], [f, h], [r, h]].map(|[u, v]| [x + c * u - s * v, y + s * u + c * v])
    }

    /// The footprint as a polygon at a pose.
    pub fn polygon(&self, x: f64, y: f64, yaw: f64) -> Polygon<f64> {
        polygon(&self.corners(x, y, yaw))
    }

    /// The footprint placed at a pose, ready for distance queries.
    pub fn place(&self, x: f64, y: f64, yaw: f64) -> Placed {
        let (s, c) = yaw.sin_cos();
        let (rear, front, h) = (-self.origin_to_rear, self.length - self.origin_to_rear, self.width / 2.0);
        // The frame's origin sits at the rectangle's centre so both kinds of rectangle share
        // one closed form.
        let (mu, hl) = ((rear + front) / 2.0, (front - rear) / 2.0);
        let rect = Rect { c: [x + c * mu, y + s * mu], cos: c, sin: s, hl, hw: h };
        Placed { footprint: *self, pose: [x, y, yaw], poly: std::cell::OnceCell::new(), rect }
    }

    /// Distance from the pose origin to the farthest corner.
    pub fn circumradius(&self) -> f64 {
        let f = (self.length - self.origin_to_rear).abs().max(self.origin_to_rear.abs());
        f.hypot(self.width / 2.0)
    }
}

/// An oriented rectangle: centre, heading (as cosine and sine) and half extents.
///
/// Distances between rectangles, and from rectangles to points and discs, are computed here
/// in closed form rather than through `geo`: geo's general polygon distance walks every
/// pair of edges with `hypot`, which was the largest single cost of a replay, and the
/// rectangle cases need only a change of frame, a clamp and one square root (and, between
/// two rectangles, a separating-axis test). They are checked against shapely in
/// tests/clearance.rs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rect {
    /// Centre.
    pub c: [f64; 2],
    /// Cosine of the heading.
    pub cos: f64,
    /// Sine of the heading.
    pub sin: f64,
    /// Half length (along the heading).
    pub hl: f64,
    /// Half width.
    pub hw: f64,
}

impl Rect {
    /// A rectangle centred at (x, y), `length` along `yaw`.
    pub fn new(x: f64, y: f64, yaw: f64, length: f64, width: f64) -> Rect {
        let (sin, cos) = yaw.sin_cos();
        Rect { c: [x, y], cos, sin, hl: length / 2.0, hw: width / 2.0 }
    }

    /// Corners, counter-clockwise from rear right.
    pub fn corners(&self) -> [[f64; 2]; 4] {
        let (c, s, [x, y]) = (self.cos, self.sin, self.c);
        [[-self.hl, -self.hw], [self.hl, -self.hw], [self.hl, self.hw], [-self.hl, self.hw]]
            .map(|[u, v]| [x + c * u - s * v, y + s * u + c * v])
    }

    /// Distance from a point; 0 inside or on the boundary.
    pub fn point_distance(&self, p: [f64; 2]) -> f64 {
        let (dx, dy) = (p[0] - self.c[0], p[1] - self.c[1]);
        let u = self.cos * dx + self.sin * dy;
        let v = -self.sin * dx + self.cos * dy;
        let du = (u.abs() - self.hl).max(0.0);
        let dv = (v.abs() - self.hw).max(0.0);
        if dv == 0.0 {
            du
        } else if du == 0.0 {
            dv
        } else {
            (du * du + dv * dv).sqrt()
        }
    }

    /// Whether the rectangles share a point (separating-axis test on the four edge normals;
    /// touching counts).
    pub fn overlaps(&self, o: &Rect) -> bool {
        let (a, b) = (self.corners(), o.corners());
        let axes = [[self.cos, self.sin], [-self.sin, self.cos], [o.cos, o.sin], [-o.sin, o.cos]];
        axes.iter().all(|ax| {
            let proj = |pts: &[[f64; 2]; 4]| {
                pts.iter()
                    .map(|p| p[0] * ax[0] + p[1] * ax[1])
                    .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), d| (lo.min(d), hi.max(d)))
            };
            let ((alo, ahi), (blo, bhi)) = (proj(&a), proj(&b));
            !(ahi < blo || bhi < alo)
        })
    }

    /// Distance between two rectangles; 0 on overlap. Disjoint convex polygons are nearest
    /// at a vertex of one of them, so the least vertex-to-rectangle distance both ways is it.
    pub fn distance(&self, o: &Rect) -> f64 {
        if self.overlaps(o) {
            return 0.0;
        }
        let a = o.corners().iter().map(|&p| self.point_distance(p)).fold(f64::INFINITY, f64::min);
        self.corners().iter().map(|&p| o.point_distance(p)).fold(a, f64::min)
    }
}

/// The footprint at a pose: its rectangle (for the closed forms) and, built on first use
/// only, its polygon (for general polygon obstacles, which most poses never meet).
#[derive(Debug, Clone)]
pub struct Placed {
    footprint: Footprint,
    pose: [f64; 3],
    poly: std::cell::OnceCell<Polygon<f64>>,
    /// The rectangle.
    pub rect: Rect,
}

impl Placed {
    /// The rectangle as a polygon (the same corners as [`Footprint::polygon`]).
    pub fn poly(&self) -> &Polygon<f64> {
        let [x, y, yaw] = self.pose;
        self.poly.get_or_init(|| self.footprint.polygon(x, y, yaw))
    }
}

/// The distance between two rings (or a ring and a polyline) that do not intersect: the
/// least distance from a vertex of either to an edge of the other, each measured by geo.
/// geo's own polygon distance returns the same minimum, but it tests the intersection a
/// second time and builds an R-tree of each ring on every call; against a footprint of
/// four edges and map polygons of a few, that was most of the clearance cost of a replay
/// (about 600 M of its 3.2 G engine instructions on a 10-minute log).
fn ring_gap(a: &LineString<f64>, b: &LineString<f64>) -> f64 {
    let one_way = |edges: &LineString<f64>, vertices: &LineString<f64>| {
        vertices.points().fold(f64::INFINITY, |best, v| {
            edges.lines().fold(best, |best, e| best.min(Euclidean::distance(&e, &v)))
        })
    };
    one_way(a, b).min(one_way(b, a))
}

/// The footprint's distance to a general shape: 0 when they intersect, else the gap
/// between the footprint's ring and the shape's `ring`.
fn gap<G>(fp: &Placed, shape: &G, ring: &LineString<f64>) -> f64
where
    Polygon<f64>: Intersects<G>,
{
    if fp.poly().intersects(shape) {
        0.0
    } else {
        ring_gap(fp.poly().exterior(), ring)
    }
}

fn polygon(pts: &[[f64; 2]]) -> Polygon<f64> {
    let ring: Vec<Coord<f64>> = pts.iter().map(|p| Coord { x: p[0], y: p[1] }).collect();
    Polygon::new(LineString::from(ring), vec![])
}

/// Where an obstacle comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(tag = "source", content = "id", rename_all = "lowercase")]
pub enum ObstacleId {
    /// The static site map.
    Map(u64),
    /// A reference object.
    Object(u64),
}

impl std::fmt::Display for ObstacleId {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ObstacleId::Map(id) => write!(f, "map:{id}"),
            ObstacleId::Object(id) => write!(f, "object:{id}"),
        }
    }
}

/// An obstacle's shape, ready for distance queries.
#[derive(Debug, Clone)]
pub enum Solid {
    /// A disc.
    Disc {
        /// Centre.
        c: [f64; 2],
        /// Radius.
        r: f64,
    },
    /// An oriented box.
    Rect(Rect),
    /// A polygon.
    Poly(Polygon<f64>),
    /// A point or segment (degenerate polygons).
    Line(LineString<f64>),
}

/// One obstacle with its bounding box.
#[derive(Debug, Clone)]
pub struct Body {
    /// Where it comes from.
    pub id: ObstacleId,
    /// Its shape.
    pub solid: Solid,
    /// Bounding box min corner.
    pub lo: [f64; 2],
    /// Bounding box max corner.
    pub hi: [f64; 2],
}

/// Corners of a box centred at (x, y), `length` along `yaw`.
pub fn box_corners(x: f64, y: f64, yaw: f64, length: f64, width: f64) -> [[f64; 2]; 4] {
    let (s, c) = yaw.sin_cos();
    let (l, w) = (length / 2.0, width / 2.0);
    [[-l, -w], [l, -w], [l, w], [-l, w]].map(|[u, v]| [x + c * u - s * v, y + s * u + c * v])
}

fn bounds(pts: &[[f64; 2]]) -> ([f64; 2], [f64; 2]) {
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for p in pts {
        for k in 0..2 {
            lo[k] = lo[k].min(p[k]);
            hi[k] = hi[k].max(p[k]);
        }
    }
    (lo, hi)
}

impl Body {
    /// A disc obstacle.
    pub fn disc(id: ObstacleId, c: [f64; 2], r: f64) -> Body {
        Body { id, solid: Solid::Disc { c, r }, lo: [c[0] - r, c[1] - r], hi: [c[0] + r, c[1] + r] }
    }

    /// A box obstacle centred at (x, y), `length` along `yaw`.
    pub fn rect(id: ObstacleId, x: f64, y: f64, yaw: f64, length: f64, width: f64) -> Body {
        let r = Rect::new(x, y, yaw, length, width);
        let (lo, hi) = bounds(&r.corners());
        Body { id, solid: Solid::Rect(r), lo, hi }
    }

    /// A polygon obstacle from its vertices.
    pub fn poly(id: ObstacleId, pts: &[[f64; 2]]) -> Body {
        let (lo, hi) = bounds(pts);
        let solid = if pts.len() >= 3 {
            Solid::Poly(polygon(pts))
        } else {
            let mut v: Vec<Coord<f64>> = pts.iter().map(|p| Coord { x: p[0], y: p[1] }).collect();
            if v.len() == 1 {
                v.push(v[0]);
            }
            Solid::Line(LineString::from(v))
        };
        Body { id, solid, lo, hi }
    }

    /// A site-map obstacle (validated by `msg::validate`).
    pub fn from_map(o: &Obstacle) -> Option<Body> {
        let id = ObstacleId::Map(o.id);
        Some(match o.shape {
            Shape::Circle => Body::disc(id, [o.x?, o.y?], o.radius?),
            Shape::Box => Body::rect(id, o.x?, o.y?, o.yaw.unwrap_or(0.0), o.length?, o.width?),
            Shape::Polygon => Body::poly(id, o.points.as_ref()?),
        })
    }

    /// Distance from the placed footprint to this obstacle; 0 on overlap.
    pub fn distance(&self, fp: &Placed) -> f64 {
        match &self.solid {
            Solid::Disc { c, r } => (fp.rect.point_distance(*c) - r).max(0.0),
            Solid::Rect(b) => fp.rect.distance(b),
            Solid::Poly(p) => gap(fp, p, p.exterior()),
            Solid::Line(l) => gap(fp, l, l),
        }
    }

    /// Whether the point is nearer than `limit`: the same answer as
    /// `point_distance(x, y) < limit`. A disc answers from the plain root of its squared
    /// distance unless that lies within 1e-9 (relative) of `r + limit`, far beyond both
    /// roots' rounding (a few 1e-16), where `hypot` decides as `point_distance` does: the
    /// occupancy grid asks this for every cell near every object.
    pub fn nearer_than(&self, x: f64, y: f64, limit: f64) -> bool {
        if let Solid::Disc { c, r } = &self.solid {
            let reach = r + limit;
            if limit > 0.0 {
                let (dx, dy) = (x - c[0], y - c[1]);
                let d = (dx * dx + dy * dy).sqrt();
                let hair = 1e-9 * (d + reach.abs());
                if d < reach - hair {
                    return true;
                }
                if d > reach + hair {
                    return false;
                }
            }
        }
        self.point_distance(x, y) < limit
    }

    /// Distance from a point to this obstacle; 0 inside.
    pub fn point_distance(&self, x: f64, y: f64) -> f64 {
        let q = GeoPoint::new(x, y);
        match &self.solid {
            Solid::Disc { c, r } => ((x - c[0]).hypot(y - c[1]) - r).max(0.0),
            Solid::Rect(b) => b.point_distance([x, y]),
            Solid::Poly(p) => Euclidean::distance(&q, p),
            Solid::Line(l) => Euclidean::distance(&q, l),
        }
    }

    fn aabb_distance(&self, x: f64, y: f64) -> f64 {
        self.aabb_distance_2(x, y).sqrt()
    }

    /// Squared distance from a point to the body's box, 0 inside (computed as rstar's
    /// `AABB::distance_2` computes it, so both searches see the same bounds).
    fn aabb_distance_2(&self, x: f64, y: f64) -> f64 {
        let dx = (self.lo[0] - x).max(0.0).max(x - self.hi[0]);
        let dy = (self.lo[1] - y).max(0.0).max(y - self.hi[1]);
        dx * dx + dy * dy
    }
}

/// The nearest obstacle and its distance.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Nearest {
    /// Distance (m), 0 on overlap.
    pub distance: f64,
    /// Which obstacle.
    pub id: ObstacleId,
}

type Entry = GeomWithData<Rectangle<[f64; 2]>, usize>;

/// Maps of up to this many bodies are searched without the tree.
const SMALL_MAP: usize = 16;

/// An R-tree over a set of obstacles (a site map).
#[derive(Debug, Clone, Default)]
pub struct ObstacleIndex {
    bodies: Vec<Body>,
    tree: RTree<Entry>,
}

impl ObstacleIndex {
    /// Indexes the bodies.
    pub fn new(bodies: Vec<Body>) -> ObstacleIndex {
        let entries: Vec<Entry> = bodies
            .iter()
            .enumerate()
            .map(|(i, b)| GeomWithData::new(Rectangle::from_corners(b.lo, b.hi), i))
            .collect();
        ObstacleIndex { bodies, tree: RTree::bulk_load(entries) }
    }

    /// Indexes a site map's obstacles.
    pub fn from_map(obstacles: &[Obstacle]) -> ObstacleIndex {
        ObstacleIndex::new(obstacles.iter().filter_map(Body::from_map).collect())
    }

    /// The bodies.
    pub fn bodies(&self) -> &[Body] {
        &self.bodies
    }

    /// Bodies whose box comes within `d` of the box `lo..hi`.
    pub fn near_box(&self, lo: [f64; 2], hi: [f64; 2], d: f64) -> impl Iterator<Item = &Body> {
        let env = AABB::from_corners([lo[0] - d, lo[1] - d], [hi[0] + d, hi[1] + d]);
        self.tree.locate_in_envelope_intersecting(&env).map(|e| &self.bodies[e.data])
    }

    /// The nearest obstacle to a footprint centred near `centre` with circumradius
    /// `radius`. Candidates come in order of their box's distance from the centre; the
    /// search stops once that lower bound (minus the radius) exceeds the best distance.
    pub fn nearest(&self, fp: &Placed, centre: [f64; 2], radius: f64) -> Option<Nearest> {
        if self.bodies.len() <= SMALL_MAP {
            // A few bodies: the same candidates in the same order (box distance, ties by
            // index), without the tree's per-query heap (measured: 8,000 instructions a query
            // on a five-body map, most of it the heap).
            let mut order = [(0.0, 0usize); SMALL_MAP];
            let n = self.bodies.len();
            for (i, b) in self.bodies.iter().enumerate() {
                let d2 = b.aabb_distance_2(centre[0], centre[1]);
                let mut k = i;
                while k > 0 && order[k - 1].0 > d2 {
                    order[k] = order[k - 1];
                    k -= 1;
                }
                order[k] = (d2, i);
            }
            return self.nearest_among(order[..n].iter().copied(), fp, radius);
        }
        let by_tree = self.tree.nearest_neighbor_iter_with_distance_2(&centre).map(|(e, d2)| (d2, e.data));
        self.nearest_among(by_tree, fp, radius)
    }

    /// The search over candidates `(squared box distance, body)` in increasing distance.
    fn nearest_among(
        &self,
        candidates: impl Iterator<Item = (f64, usize)>,
        fp: &Placed,
        radius: f64,
    ) -> Option<Nearest> {
        let mut best: Option<Nearest> = None;
        for (d2, i) in candidates {
            if let Some(b) = best {
                if d2.sqrt() - radius > b.distance {
                    break;
                }
            }
            let body = &self.bodies[i];
            let d = body.distance(fp);
            if best.is_none_or(|b| d < b.distance) {
                best = Some(Nearest { distance: d, id: body.id });
            }
            if d == 0.0 {
                break;
            }
        }
        best
    }
}

/// The nearest of a few loose bodies (brute force with a box bound).
pub fn nearest_of(bodies: &[Body], fp: &Placed, centre: [f64; 2], radius: f64) -> Option<Nearest> {
    let mut best: Option<Nearest> = None;
    for b in bodies {
        if best.is_some_and(|n| b.aabb_distance(centre[0], centre[1]) - radius > n.distance) {
            continue;
        }
        let d = b.distance(fp);
        if best.is_none_or(|n| d < n.distance) {
            best = Some(Nearest { distance: d, id: b.id });
        }
    }
    best
}

/// The nearer of two answers.
pub fn nearer(a: Option<Nearest>, b: Option<Nearest>) -> Option<Nearest> {
    match (a, b) {
        (Some(x), Some(y)) => Some(if y.distance < x.distance { y } else { x }),
        (x, None) => x,
        (None, y) => y,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig { cases: 5000, ..ProptestConfig::default() })]

        /// The grid's occupancy test answers as `point_distance(x, y) < limit` does, at
        /// random points and at points a few ulps either side of the disc's reach, where
        /// the plain root and `hypot` could round apart.
        #[test]
        fn nearer_than_answers_as_point_distance(
            c in (-1e4..1e4f64, -1e4..1e4f64),
            r in 0.0..5.0f64,
            limit in -1.0..3.0f64,
            angle in -3.2..3.2f64,
            scale in prop_oneof![0.0..3.0f64, (-40i32..40).prop_map(|k| 1.0 + k as f64 * 1.1e-16)],
        ) {
            let body = Body::disc(ObstacleId::Object(1), [c.0, c.1], r);
            let d = (r + limit).abs() * scale;
            let (x, y) = (c.0 + d * angle.cos(), c.1 + d * angle.sin());
            prop_assert_eq!(body.nearer_than(x, y, limit), body.point_distance(x, y) < limit);
            let rect = Body::rect(ObstacleId::Object(2), c.0, c.1, angle, r + 0.1, r + 0.2);
            prop_assert_eq!(rect.nearer_than(x, y, limit), rect.point_distance(x, y) < limit);
        }
    }

    proptest! {
        /// A small map searched without the tree finds what the tree's search finds: the
        /// same distance, and the same obstacle unless two are equally near.
        #[test]
        fn small_map_search_equals_the_tree_search(
            bodies in proptest::collection::vec((-30.0..30.0f64, -30.0..30.0f64, 0.1..6.0f64, 0.1..6.0f64, -3.2..3.2f64, any::<bool>()), 1..=SMALL_MAP),
            pose in (-35.0..35.0f64, -35.0..35.0f64, -3.2..3.2f64),
        ) {
            let bodies: Vec<Body> = bodies.iter().enumerate().map(|(i, &(x, y, a, b, yaw, disc))| {
                let id = ObstacleId::Map(i as u64);
                if disc { Body::disc(id, [x, y], a / 2.0) } else { Body::rect(id, x, y, yaw, a, b) }
            }).collect();
            let index = ObstacleIndex::new(bodies);
            let fp = Footprint { length: 4.0, width: 2.0, origin_to_rear: 1.0 };
            let placed = fp.place(pose.0, pose.1, pose.2);
            let (centre, radius) = ([pose.0, pose.1], 3.5);
            let small = index.nearest(&placed, centre, radius).unwrap();
            let tree = index
                .nearest_among(index.tree.nearest_neighbor_iter_with_distance_2(&centre).map(|(e, d2)| (d2, e.data)), &placed, radius)
                .unwrap();
            prop_assert_eq!(small.distance.to_bits(), tree.distance.to_bits());
            let tied = index.bodies().iter().filter(|b| b.distance(&placed) == small.distance).count() > 1;
            prop_assert!(tied || small.id == tree.id);
        }
    }

    fn fp() -> Footprint {
        Footprint { length: 4.0, width: 2.0, origin_to_rear: 1.0 }
    }

    #[test]
    fn footprint_corners_follow_the_pose() {
        let c = fp().corners(0.0, 0.0, 0.0);
        assert_eq!(c, [[-1.0, -1.0], [3.0, -1.0], [3.0, 1.0], [-1.0, 1.0]]);
        let c = fp().corners(10.0, 0.0, std::f64::consts::FRAC_PI_2);
        assert!((c[1][0] - 11.0).abs() < 1e-12 && (c[1][1] - 3.0).abs() < 1e-12);
    }

    #[test]
    fn circle_to_rectangle_in_closed_form() {
        // Footprint [-1, 3] x [-1, 1]. A disc of radius 0.5 at (6, 0): 6 - 3 - 0.5 = 2.5.
        // At (5, 4): nearest corner (3, 1): sqrt(4 + 9) - 0.5. Overlapping at (3.2, 0): 0.
        let placed = fp().place(0.0, 0.0, 0.0);
        let d = |x, y| Body::disc(ObstacleId::Map(1), [x, y], 0.5).distance(&placed);
        assert!((d(6.0, 0.0) - 2.5).abs() < 1e-12);
        assert!((d(5.0, 4.0) - (13f64.sqrt() - 0.5)).abs() < 1e-12);
        assert_eq!(d(3.2, 0.0), 0.0);
        assert_eq!(d(0.0, 0.0), 0.0);
    }

    #[test]
    fn index_finds_the_nearest_among_many() {
        let bodies: Vec<Body> = (0..500)
            .map(|i| {
                let (x, y) = ((i % 25) as f64 * 8.0 - 100.0, (i / 25) as f64 * 8.0 - 80.0);
                Body::disc(ObstacleId::Map(i), [x, y], 0.4)
            })
            .collect();
        let idx = ObstacleIndex::new(bodies.clone());
        for (x, y, yaw) in [(3.3, 1.7, 0.3), (-55.0, 20.0, 2.0), (90.0, 70.0, -1.0)] {
            let f = fp();
            let placed = f.place(x, y, yaw);
            let a = idx.nearest(&placed, [x, y], f.circumradius()).unwrap();
            let b = nearest_of(&bodies, &placed, [x, y], f.circumradius()).unwrap();
            let brute = bodies.iter().map(|b| b.distance(&placed)).fold(f64::INFINITY, f64::min);
            assert_eq!(a.distance, brute);
            assert_eq!(b.distance, brute);
        }
    }
}
