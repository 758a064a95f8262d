//! Clearance steps: the footprint against the obstacles, and the collisions.
//!
//! Clearance steps run at each `reference/ego` stamp t: the footprint at the reference pose
//! against the site map (the latest map stamped at or before t) and the reference objects
//! at t (interpolated; boxes when they carry length and width, else discs of
//! `object_radius_m`). A step waits for reference objects at or after t like a tracking
//! step does. Overlap gives 0 and a collision, recorded with its start, end and obstacle.
//! The same step then runs path following ([`super::path_following`]) and comfort
//! ([`super::comfort`]) at the same pose. Pure.

use std::sync::Arc;

use serde::Serialize;

use super::pending::Queue;
use super::plans::{Deferred, Plan, PlanStep};
use super::{Engine, PointSet};
use crate::core::align::{How, Point, Timeline};
use crate::core::engine::Sample;
use crate::core::ClearanceParams;
use crate::geometry::{nearer, nearest_of, Body, Nearest, ObstacleId, ObstacleIndex};
use crate::metrics::Metric;
use crate::msg::{ObstacleSet, Pose, Role};

/// Collisions kept for the report; later ones are counted.
pub const KEEP_COLLISIONS: usize = 1000;

/// A stretch of time with the footprint overlapping an obstacle.
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct Collision {
    /// First clearance step in contact (s).
    pub start: f64,
    /// Last clearance step in contact (s).
    pub end: f64,
    /// The obstacle touched first.
    pub obstacle: ObstacleId,
}

/// Clearance state inside the engine.
#[derive(Debug)]
pub(super) struct ClearState {
    pub(super) cp: ClearanceParams,
    pub(super) map: Timeline<Arc<ObstacleIndex>>,
    pub(super) plans: Timeline<Plan>,
    pub(super) est_sets: Timeline<Arc<PointSet>>,
    pub(super) clears: Queue<Pose>,
    pub(super) last_clear_t: Option<f64>,
    /// Plans waiting for the reference at their stamp.
    pub(super) plan_steps: Queue<PlanStep>,
    pub(super) last_plan_t: Option<f64>,
    /// The latest stamp of any plan heard (an empty one included).
    pub(super) latest_plan_stamp: Option<f64>,
    pub(super) prev_ego: Option<(f64, Pose, Option<f64>)>,
    pub(super) open: Option<Collision>,
    pub(super) collisions: Vec<Collision>,
    pub(super) collisions_dropped: u64,
    pub(super) last_excess_t: f64,
    pub(super) prev_plan: Option<(f64, [f64; 2], [f64; 2])>,
    /// Plan jobs kept for the caller, with where their samples go (`None`: run at once).
    pub(super) deferred: Option<Deferred>,
}

impl ClearState {
    pub(super) fn new(cp: ClearanceParams) -> ClearState {
        ClearState {
            cp,
            map: Timeline::new(8),
            plans: Timeline::new(8),
            est_sets: Timeline::new(64),
            clears: Queue::new(),
            last_clear_t: None,
            plan_steps: Queue::new(),
            last_plan_t: None,
            latest_plan_stamp: None,
            prev_ego: None,
            open: None,
            collisions: Vec::new(),
            collisions_dropped: 0,
            last_excess_t: f64::NEG_INFINITY,
            prev_plan: None,
            deferred: None,
        }
    }
}

/// An object as an obstacle: a box when it has a size, else a disc of `radius`.
pub(super) fn body_of(p: &Point, radius: f64) -> Body {
    let id = ObstacleId::Object(p.id);
    match (p.length, p.width) {
        (Some(l), Some(w)) if l > 0.0 && w > 0.0 => Body::rect(id, p.x, p.y, p.yaw.unwrap_or(0.0), l, w),
        _ => Body::disc(id, [p.x, p.y], radius),
    }
}

/// The radius of a circle around the object's centre that holds its body.
fn reach(p: &Point, radius: f64) -> f64 {
    match (p.length, p.width) {
        (Some(l), Some(w)) if l > 0.0 && w > 0.0 => l.hypot(w) / 2.0,
        _ => radius,
    }
}

/// Objects as the clearance search reads them: each one's centre and [`reach`], worked out
/// once for all the poses measured against the same objects (a plan's densified poses, the
/// budget's three) and laid out together, so the search's bound test reads 24 bytes an
/// object instead of a whole point.
#[derive(Debug, Default)]
pub(super) struct Reaches(Vec<[f64; 3]>);

impl Reaches {
    pub(super) fn of(objects: &[Point], radius: f64) -> Reaches {
        Reaches(objects.iter().map(|p| [p.x, p.y, reach(p, radius)]).collect())
    }
}

impl Engine {
    pub(super) fn on_obstacles(&mut self, set: &ObstacleSet) {
        self.clear.map.insert(set.stamp, Arc::new(ObstacleIndex::from_map(&set.obstacles)));
    }

    /// Reference objects at `t` by the alignment rule: `Ok(None)` when the role has never
    /// been heard (a setup without them), `Err(reason)` when it has but gives nothing
    /// for `t`.
    pub(super) fn reference_objects_for(&mut self, t: f64) -> Result<(Arc<Vec<Point>>, How), &'static str> {
        if !self.heard(Role::ReferenceObjects) {
            return Ok((Arc::new(Vec::new()), How::Exact));
        }
        self.reference_shared(t)
    }

    /// Reference objects at `t` (none when the alignment finds nothing), resolved afresh.
    #[cfg(test)]
    fn reference_points_at(&self, t: f64) -> Vec<Point> {
        let mut pts = Vec::new();
        let _ = self.reference_into(t, &mut Vec::new(), &mut Vec::new(), &mut pts);
        pts
    }

    /// Estimated objects (the latest set at or before `t`).
    pub(super) fn estimate_points_at(&self, t: f64) -> Vec<Point> {
        let mut out = Vec::new();
        if let Some((_, set)) = self.clear.est_sets.latest_at_or_before(t) {
            let mut scratch = Vec::new();
            if let Ok(p) = self.ref_points(set, &mut scratch) {
                out.extend_from_slice(p);
            }
        }
        out
    }

    pub(super) fn map_at(&self, t: f64) -> Option<&Arc<ObstacleIndex>> {
        self.clear.map.latest_at_or_before(t).map(|(_, m)| m)
    }

    /// Clearance of the footprint at a pose against the map at `t` and `objects`.
    pub(super) fn clearance_of(
        &self,
        t: f64,
        x: f64,
        y: f64,
        yaw: f64,
        objects: &[Point],
        reaches: &Reaches,
    ) -> Option<Nearest> {
        clearance_with(&self.clear.cp, self.map_at(t).map(|m| &**m), x, y, yaw, objects, reaches)
    }

    pub(super) fn eval_clearance(&mut self, t: f64, pose: &Pose, ready: bool, out: &mut Vec<Sample>) {
        self.clear.last_clear_t = Some(t);
        match self.reference_objects_for(t) {
            Err(reason) => self.counters.clearance.skip(reason),
            Ok((bodies, how)) => {
                let reaches = Reaches::of(&bodies, self.clear.cp.object_radius);
                if let Some(n) = self.clearance_of(t, pose.x, pose.y, pose.yaw, &bodies, &reaches) {
                    self.counters.clearance.hit(how);
                    out.push(Sample { t, metric: Metric::Clearance, role: None, value: n.distance });
                    let touching = n.distance <= 0.0;
                    let value = if touching { 1.0 } else { 0.0 };
                    out.push(Sample { t, metric: Metric::Collision, role: None, value });
                    match (&mut self.clear.open, touching) {
                        (Some(c), true) => c.end = t,
                        (None, true) => {
                            self.clear.open = Some(Collision { start: t, end: t, obstacle: n.id })
                        }
                        (Some(_), false) => self.close_collision(),
                        (None, false) => {}
                    }
                }
            }
        }
        self.eval_path_following(t, pose, ready, out);
        self.eval_comfort(t, pose, out);
    }

    fn close_collision(&mut self) {
        if let Some(c) = self.clear.open.take() {
            if self.clear.collisions.len() < KEEP_COLLISIONS {
                self.clear.collisions.push(c);
            } else {
                self.clear.collisions_dropped += 1;
            }
        }
    }

    pub(super) fn finish_clearance(&mut self) {
        self.close_collision();
    }
}

/// Clearance of the footprint at a pose against `map` and `objects`. An object is skipped
/// when a circle bound shows it cannot be nearer than the best so far (the map's nearest
/// first), so only a few become polygons.
pub(super) fn clearance_with(
    cp: &ClearanceParams,
    map: Option<&ObstacleIndex>,
    x: f64,
    y: f64,
    yaw: f64,
    objects: &[Point],
    reaches: &Reaches,
) -> Option<Nearest> {
    let fp = &cp.footprint;
    let placed = fp.place(x, y, yaw);
    let r = fp.circumradius();
    let mut best = map.and_then(|m| m.nearest(&placed, [x, y], r));
    let radius = cp.object_radius;
    debug_assert_eq!(objects.len(), reaches.0.len());
    for (p, &[ox, oy, reach]) in objects.iter().zip(&reaches.0) {
        let (dx, dy) = (ox - x, oy - y);
        let bound = (dx * dx + dy * dy).sqrt() - reach - r;
        if best.is_some_and(|b| bound > b.distance) {
            continue;
        }
        let body = body_of(p, radius);
        best = nearer(best, nearest_of(std::slice::from_ref(&body), &placed, [x, y], r));
    }
    best
}

#[cfg(test)]
mod tests {
    use super::super::plans::{splice_plan_jobs, tangent};
    use super::*;
    use crate::config::Config;
    use crate::core::Input;
    use crate::logio::{read_all, Item};
    use crate::metrics::path;
    use crate::msg::Path;
    use crate::msg::{Msg, Role};

    impl Engine {
        /// Path clearance with every densified pose measured (no skipping).
        fn path_clearance_every_pose(&self, plan: &Path) -> Option<f64> {
            let pts: Vec<[f64; 2]> = plan.poses.iter().map(|p| [p.x, p.y]).collect();
            let dense = path::densify(&pts, self.clear.cp.path_step);
            let bodies = self.reference_points_at(plan.stamp);
            let reaches = Reaches::of(&bodies, self.clear.cp.object_radius);
            (0..dense.len())
                .filter_map(|i| {
                    let (p, yaw) = (dense[i], tangent(&dense, i));
                    self.clearance_of(plan.stamp, p[0], p[1], yaw, &bodies, &reaches)
                })
                .map(|n| n.distance)
                .reduce(f64::min)
        }
    }

    /// Plan jobs kept under a small budget (some kept, the rest run at once) and spliced
    /// back batch by batch give the samples of an engine that runs every job at once.
    #[test]
    fn kept_and_overflowing_plan_jobs_give_the_inline_samples() {
        let cfg = Config::defaults();
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl");
        let mut inputs = Vec::new();
        read_all(&cfg.log(), &path, &mut |item, _| {
            if let Item::Record { role, rec } = item {
                inputs.push(Input::Message { role, recv: rec.recv, msg: rec.msg });
            }
        })
        .unwrap();
        let mut inline = Engine::new(cfg.tracking, cfg.align, cfg.clearance);
        let mut want = Vec::new();
        for input in &inputs {
            inline.push(input.clone(), &mut want);
        }
        inline.finish(&mut want);
        // About three plans' worth of points: batches of 200 records carry more plans
        // than that, so both ways are taken.
        let mut kept = Engine::new(cfg.tracking, cfg.align, cfg.clearance);
        kept.defer_plan_jobs(Some(600));
        let (mut got, mut batch, mut ran_kept) = (Vec::new(), Vec::new(), 0);
        for part in inputs.chunks(200) {
            for input in part {
                kept.push(input.clone(), &mut batch);
            }
            let jobs = kept.take_plan_jobs();
            ran_kept += jobs.len();
            splice_plan_jobs(&batch, &jobs, &mut got);
            batch.clear();
        }
        kept.finish(&mut got);
        let plans = want.iter().filter(|s| s.metric == Metric::PathMissing).count();
        assert!(ran_kept > 0 && ran_kept < plans, "{ran_kept} of {plans} plan jobs kept");
        assert_eq!(got, want);
    }

    /// The skipping bound is exact: on every plan of the shipped log (a detour around a
    /// parked van, close passes, a contact), the minimum equals the every-pose minimum.
    #[test]
    fn skipped_poses_never_change_the_path_clearance() {
        let cfg = Config::defaults();
        let mut e = Engine::new(cfg.tracking, cfg.align, cfg.clearance);
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl");
        let (mut out, mut checked) = (Vec::new(), 0);
        // Plans by stamp: a plan's path quality comes out when its reference is known, and
        // is checked then, against the same reference.
        let mut plans = std::collections::BTreeMap::new();
        read_all(&cfg.log(), &path, &mut |item, _| {
            let Item::Record { role, rec } = item else { return };
            if let (Role::PlanPath, Msg::Path(p)) = (&role, &rec.msg) {
                if !p.poses.is_empty() {
                    plans.insert(p.stamp.to_bits(), p.clone());
                }
            }
            out.clear();
            e.push(Input::Message { role, recv: rec.recv, msg: rec.msg }, &mut out);
            for s in out.iter().filter(|s| s.metric == Metric::PathClearance) {
                let plan = plans.remove(&s.t.to_bits()).expect("a sample for a plan heard");
                assert_eq!(Some(s.value), e.path_clearance_every_pose(&plan));
                checked += 1;
            }
        })
        .unwrap();
        assert!(checked >= 250, "{checked} plans");
    }
}
