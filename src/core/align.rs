//! Event-time alignment (SPEC §4): stamp-ordered buffers, the exact-match shortcut,
//! per-id linear interpolation, and the fallback to the last message before a step.
//!
//! Pure data structures; the engine decides when a step has waited long enough.

use std::collections::VecDeque;

use crate::metrics::ego::lerp_angle;
use crate::msg::{Frame, Object, ObjectSet, Pose};

/// Two stamps closer than this are the same instant (1 µs).
pub const EXACT_S: f64 = 1e-6;

/// A bounded buffer of stamped items kept sorted by stamp.
#[derive(Debug, Clone)]
pub struct Timeline<T> {
    items: VecDeque<(f64, T)>,
    cap: usize,
    /// Items dropped because the buffer was full.
    pub evicted: u64,
    /// Changes so far (inserts and prunes that dropped something): a value resolved from
    /// the buffer stays valid while this is unchanged.
    version: u64,
}

/// Where a stamp falls in a timeline.
#[derive(Debug)]
pub enum Lookup<'a, T> {
    /// An item within [`EXACT_S`] of the stamp.
    Exact(&'a T),
    /// The items just before and just after.
    Between(&'a (f64, T), &'a (f64, T)),
    /// Only items before the stamp; the latest of them.
    OnlyBefore(&'a (f64, T)),
    /// Only items after the stamp.
    OnlyAfter,
    /// Nothing buffered.
    Empty,
}

/// Why a step could not be aligned.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Miss {
    /// Nothing in the buffer.
    NoReference,
    /// The wait ended and the last message before the step is older than `tolerance`.
    TooOld,
    /// Messages exist only after the step.
    NoneBefore,
}

/// How a value at a stamp was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum How {
    /// Exact stamp match.
    Exact,
    /// Interpolated between two messages.
    Interpolated,
    /// The last message before, within tolerance.
    Fallback,
}

impl<T> Timeline<T> {
    /// An empty buffer holding at most `cap` items.
    pub fn new(cap: usize) -> Timeline<T> {
        Timeline { items: VecDeque::new(), cap: cap.max(2), evicted: 0, version: 0 }
    }

    /// Inserts in stamp order (appends in the common case).
    pub fn insert(&mut self, stamp: f64, item: T) {
        self.version += 1;
        if self.items.len() >= self.cap {
            self.items.pop_front();
            self.evicted += 1;
        }
        match self.items.back() {
            Some((s, _)) if *s > stamp => {
                let idx = self.items.partition_point(|(s, _)| *s <= stamp);
                self.items.insert(idx, (stamp, item));
            }
            _ => self.items.push_back((stamp, item)),
        }
    }

    /// Whether an item at or after `t` is buffered.
    pub fn has_at_or_after(&self, t: f64) -> bool {
        self.items.back().is_some_and(|(s, _)| *s >= t - EXACT_S)
    }

    /// Buffered items.
    pub fn len(&self) -> usize {
        self.items.len()
    }

    /// Whether nothing is buffered.
    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }

    /// The latest item stamped at or before `t`.
    pub fn latest_at_or_before(&self, t: f64) -> Option<&(f64, T)> {
        let idx = self.items.partition_point(|(s, _)| *s <= t + EXACT_S);
        idx.checked_sub(1).and_then(|i| self.items.get(i))
    }

    /// Where `t` falls.
    pub fn lookup(&self, t: f64) -> Lookup<'_, T> {
        if self.items.is_empty() {
            return Lookup::Empty;
        }
        let idx = self.items.partition_point(|(s, _)| *s < t);
        let before = idx.checked_sub(1).and_then(|i| self.items.get(i));
        let after = self.items.get(idx);
        let near_b = before.filter(|(s, _)| (s - t).abs() <= EXACT_S);
        let near_a = after.filter(|(s, _)| (s - t).abs() <= EXACT_S);
        match (near_b, near_a) {
            (Some(b), Some(a)) => {
                let pick = if (a.0 - t).abs() <= (t - b.0).abs() { a } else { b };
                return Lookup::Exact(&pick.1);
            }
            (Some(x), None) | (None, Some(x)) => return Lookup::Exact(&x.1),
            (None, None) => {}
        }
        match (before, after) {
            (Some(b), Some(a)) => Lookup::Between(b, a),
            (Some(b), None) => Lookup::OnlyBefore(b),
            (None, Some(_)) => Lookup::OnlyAfter,
            (None, None) => Lookup::Empty,
        }
    }

    /// Drops items older than `t_min`, keeping the latest one at or before it.
    pub fn prune(&mut self, t_min: f64) {
        while self.items.len() >= 2 && self.items[1].0 <= t_min {
            self.items.pop_front();
            self.version += 1;
        }
    }

    /// Changes so far (see the field).
    pub fn version(&self) -> u64 {
        self.version
    }
}

/// Resolves the value at `t`: exact, interpolated, or (once the wait is over) the last
/// message before within `tolerance`.
///
/// Call it once the step is ready (a message at or after `t` is buffered) or its wait is
/// over; the fallback applies only in the second case, when nothing after `t` exists.
pub fn resolve<T>(tl: &Timeline<T>, t: f64, tolerance: f64) -> Result<Resolved<'_, T>, Miss> {
    match tl.lookup(t) {
        Lookup::Exact(x) => Ok(Resolved::One(x, How::Exact)),
        Lookup::Between(b, a) => Ok(Resolved::Two(b, a)),
        Lookup::OnlyBefore(b) if t - b.0 <= tolerance + EXACT_S => Ok(Resolved::One(&b.1, How::Fallback)),
        Lookup::OnlyBefore(_) => Err(Miss::TooOld),
        Lookup::OnlyAfter => Err(Miss::NoneBefore),
        Lookup::Empty => Err(Miss::NoReference),
    }
}

/// The outcome of [`resolve`].
#[derive(Debug)]
pub enum Resolved<'a, T> {
    /// One message used as is.
    One(&'a T, How),
    /// Two messages to interpolate between.
    Two(&'a (f64, T), &'a (f64, T)),
}

/// Linear interpolation weight of `t` between `t0` and `t1`.
pub fn weight(t0: f64, t1: f64, t: f64) -> f64 {
    if t1 > t0 {
        ((t - t0) / (t1 - t0)).clamp(0.0, 1.0)
    } else {
        0.0
    }
}

/// Pose at `t` between two poses: x, y linear, yaw along the shorter arc.
pub fn interpolate_pose(a: &Pose, b: &Pose, t: f64) -> Pose {
    let w = weight(a.stamp, b.stamp, t);
    Pose {
        stamp: t,
        x: a.x + (b.x - a.x) * w,
        y: a.y + (b.y - a.y) * w,
        yaw: lerp_angle(a.yaw, b.yaw, w),
        v: match (a.v, b.v) {
            (Some(va), Some(vb)) => Some(va + (vb - va) * w),
            _ => a.v,
        },
        cov: a.cov,
    }
}

/// A pose from a resolution.
pub fn pose_at(r: Resolved<'_, Pose>, t: f64) -> (Pose, How) {
    match r {
        Resolved::One(p, how) => (p.clone(), how),
        Resolved::Two(a, b) => (interpolate_pose(&a.1, &b.1, t), How::Interpolated),
    }
}

/// The part of an object the metrics use: no strings, cheap to copy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Point {
    /// Object id.
    pub id: u64,
    /// x (m).
    pub x: f64,
    /// y (m).
    pub y: f64,
    /// Heading (rad).
    pub yaw: Option<f64>,
    /// Box length (m).
    pub length: Option<f64>,
    /// Box width (m).
    pub width: Option<f64>,
    /// 2x2 position covariance, row-major.
    pub cov: Option<[f64; 4]>,
}

impl Point {
    /// The metric part of an object.
    pub fn of(o: &Object) -> Point {
        Point { id: o.id, x: o.x, y: o.y, yaw: o.yaw, length: o.length, width: o.width, cov: o.cov }
    }
}

/// Appends a set's objects as points, in the set's own frame.
pub fn points_of(set: &ObjectSet, out: &mut Vec<Point>) {
    out.extend(set.objects.iter().map(Point::of));
}

/// The ids of `points` with their positions, sorted by id: what [`interpolate_points`]
/// looks the later set up in. Built once per set, when it arrives.
pub fn id_index(points: &[Point], index: &mut Vec<(u64, usize)>) {
    index.clear();
    index.extend(points.iter().enumerate().map(|(i, o)| (o.id, i)));
    index.sort_unstable();
}

/// Per-id interpolation of two point sets at `t`: ids present in both, positions linear,
/// yaw along the shorter arc; size and covariance from the earlier set. `b_index` is
/// [`id_index`] of `b`. The output follows the order of `a`.
pub fn interpolate_points(
    a: &[Point],
    ta: f64,
    b: &[Point],
    tb: f64,
    b_index: &[(u64, usize)],
    t: f64,
    out: &mut Vec<Point>,
) {
    let w = weight(ta, tb, t);
    // Consecutive sets of one publisher mostly list their ids in the same order, so the
    // object after the last match is tried before the index is searched.
    let mut next = 0;
    for pa in a {
        let kb = match b.get(next) {
            Some(pb) if pb.id == pa.id => next,
            _ => match b_index.binary_search_by_key(&pa.id, |&(id, _)| id) {
                Ok(k) => b_index[k].1,
                Err(_) => continue,
            },
        };
        next = kb + 1;
        let pb = &b[kb];
        out.push(Point {
            x: pa.x + (pb.x - pa.x) * w,
            y: pa.y + (pb.y - pa.y) * w,
            yaw: match (pa.yaw, pb.yaw) {
                (Some(x), Some(y)) => Some(lerp_angle(x, y, w)),
                _ => pa.yaw,
            },
            ..*pa
        });
    }
}

/// Moves an ego-frame point into the world frame of `ego`.
pub fn to_world(o: &mut Point, ego: &Pose) {
    let (s, c) = ego.yaw.sin_cos();
    let (x, y) = (o.x, o.y);
    o.x = ego.x + c * x - s * y;
    o.y = ego.y + s * x + c * y;
    if let Some(yaw) = o.yaw {
        o.yaw = Some(crate::metrics::ego::wrap_angle(yaw + ego.yaw));
    }
    if let Some(p) = o.cov {
        // R P R^T
        let (a, b, cc, d) = (p[0], p[1], p[2], p[3]);
        let r00 = c * a - s * cc;
        let r01 = c * b - s * d;
        let r10 = s * a + c * cc;
        let r11 = s * b + c * d;
        o.cov = Some([r00 * c - r01 * s, r00 * s + r01 * c, r10 * c - r11 * s, r10 * s + r11 * c]);
    }
}

/// Whether a set needs an ego pose to reach the world frame.
pub fn is_ego_frame(set: &ObjectSet) -> bool {
    set.frame == Some(Frame::Ego)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constant_velocity_interpolation_is_exact() {
        // Analytic case: x(t) = 1 + 2t, y(t) = -3 + 0.5t. Samples at 0.0 and 0.1; any t
        // between must reproduce the line exactly (up to rounding).
        let at = |t: f64| Point::of(&Object::at(7, 1.0 + 2.0 * t, -3.0 + 0.5 * t));
        let (mut idx, mut out) = (Vec::new(), Vec::new());
        for k in 1..10 {
            let t = k as f64 * 0.01;
            out.clear();
            id_index(&[at(0.1)], &mut idx);
            interpolate_points(&[at(0.0)], 0.0, &[at(0.1)], 0.1, &idx, t, &mut out);
            assert_eq!(out.len(), 1);
            assert!((out[0].x - (1.0 + 2.0 * t)).abs() < 1e-12);
            assert!((out[0].y - (-3.0 + 0.5 * t)).abs() < 1e-12);
        }
    }

    #[test]
    fn only_ids_in_both_are_interpolated() {
        let (mut idx, mut out) = (Vec::new(), Vec::new());
        let a = [Object::at(1, 0.0, 0.0), Object::at(2, 5.0, 5.0)].map(|o| Point::of(&o));
        let b = [Object::at(2, 6.0, 5.0), Object::at(3, 9.0, 9.0)].map(|o| Point::of(&o));
        id_index(&b, &mut idx);
        interpolate_points(&a, 0.0, &b, 1.0, &idx, 0.25, &mut out);
        assert_eq!(out.len(), 1);
        assert_eq!(out[0].id, 2);
        assert_eq!(out[0].x, 5.25);
    }

    #[test]
    fn interpolation_pairs_ids_whatever_their_order() {
        // The later set lists its ids in another order, drops one and adds one: every id
        // in both is paired with itself (the in-order shortcut and the index search).
        let (mut idx, mut out) = (Vec::new(), Vec::new());
        let a = [1, 2, 3, 5].map(|id| Point::of(&Object::at(id, id as f64, 0.0)));
        let b = [3, 1, 2, 4].map(|id| Point::of(&Object::at(id, id as f64 + 2.0, 1.0)));
        id_index(&b, &mut idx);
        interpolate_points(&a, 0.0, &b, 1.0, &idx, 0.5, &mut out);
        let got: Vec<(u64, f64, f64)> = out.iter().map(|p| (p.id, p.x, p.y)).collect();
        assert_eq!(got, vec![(1, 2.0, 0.5), (2, 3.0, 0.5), (3, 4.0, 0.5)]);
    }

    #[test]
    fn lookup_exact_between_and_fallback() {
        let mut tl = Timeline::new(16);
        for (i, s) in [0.0, 0.1, 0.2].iter().enumerate() {
            tl.insert(*s, i);
        }
        assert!(matches!(tl.lookup(0.1 + 5e-7), Lookup::Exact(1)));
        assert!(matches!(tl.lookup(0.15), Lookup::Between((_, 1), (_, 2))));
        assert!(matches!(tl.lookup(0.25), Lookup::OnlyBefore((_, 2))));
        assert!(matches!(tl.lookup(-1.0), Lookup::OnlyAfter));
        assert!(matches!(resolve(&tl, 0.25, 0.1), Ok(Resolved::One(2, How::Fallback))));
        assert!(matches!(resolve(&tl, 0.35, 0.1), Err(Miss::TooOld)));
        // Out-of-order insert keeps stamp order.
        tl.insert(0.05, 9);
        assert!(matches!(tl.lookup(0.07), Lookup::Between((_, 9), (_, 1))));
        tl.prune(0.15);
        assert_eq!(tl.len(), 2);
    }

    #[test]
    fn pose_yaw_takes_shorter_arc_and_frames_rotate() {
        let a = Pose { stamp: 0.0, x: 0.0, y: 0.0, yaw: 3.0, v: None, cov: None };
        let b = Pose { stamp: 1.0, x: 2.0, y: 0.0, yaw: -3.0, v: None, cov: None };
        let p = interpolate_pose(&a, &b, 0.5);
        assert!((p.yaw.abs() - std::f64::consts::PI).abs() < 1e-12);
        assert_eq!(p.x, 1.0);
        let ego = Pose { stamp: 0.0, x: 10.0, y: 5.0, yaw: std::f64::consts::FRAC_PI_2, v: None, cov: None };
        let o = Object { cov: Some([4.0, 0.0, 0.0, 1.0]), ..Object::at(1, 2.0, 0.0) };
        let mut o = Point::of(&o);
        to_world(&mut o, &ego);
        assert!((o.x - 10.0).abs() < 1e-12 && (o.y - 7.0).abs() < 1e-12);
        let c = o.cov.unwrap();
        assert!((c[0] - 1.0).abs() < 1e-12 && (c[3] - 4.0).abs() < 1e-12);
    }
}
