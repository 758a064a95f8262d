//! Clearance, the clearance-loss budget, path following, path quality and comfort: the
//! engine's geometric steps. Same alignment rules as the tracking steps; pure.
//!
//! Clearance steps run at each `reference/ego` stamp t: the footprint at the reference pose
//! against the site map (the latest map stamped at or before t) and the reference objects
//! at t (interpolated; boxes when they carry length and width, else discs of
//! `object_radius_m`). A step waits for reference objects at or after t like a tracking
//! step does. Overlap gives 0 and a collision, recorded with its start, end and obstacle.
//!
//! The clearance-loss budget runs at each ego step, with C(pose, objects) the clearance
//! of the footprint at `pose` against the map and `objects`:
//! - true = C(reference pose, reference objects)
//! - believed = C(estimated pose, estimated objects)
//! - planned = C(plan point nearest the estimated pose, estimated objects), the pose the
//!   plan meant the vehicle to be at (heading: the plan's tangent); planned = believed when
//!   no plan is known.
//! - `clearance_loss_m` = planned - true
//!   = path following  [planned - believed]
//!   + perception      [C(estimated pose, estimated objects) - C(estimated pose, reference objects)]
//!   + localization    [C(estimated pose, reference objects) - true]
//!
//! The three parts telescope, so they add up to the total exactly (up to rounding).
//! Positive means clearance lost. The estimated objects are the latest estimate set at or
//! before t.

use std::collections::VecDeque;
use std::sync::Arc;

use serde::Serialize;

use super::{Engine, Pending, PointSet};
use crate::core::align::{self, How, Point, Timeline};
use crate::core::engine::Sample;
use crate::core::ClearanceParams;
use crate::geometry::{nearer, nearest_of, Body, Nearest, ObstacleId, ObstacleIndex};
use crate::metrics::ego::wrap_angle;
use crate::metrics::path::{self, Grid};
use crate::metrics::Metric;
use crate::msg::{ObstacleSet, Path, Pose, Role};

/// Collisions kept for the report; later ones are counted.
pub const KEEP_COLLISIONS: usize = 1000;

/// A stretch of time with the footprint overlapping an obstacle.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Collision {
    /// First clearance step in contact (s).
    pub start: f64,
    /// Last clearance step in contact (s).
    pub end: f64,
    /// The obstacle touched first.
    pub obstacle: ObstacleId,
}

#[derive(Debug)]
pub(super) struct Plan {
    dense: Arc<Vec<[f64; 2]>>,
}

/// The costly part of a plan's path quality (shape, swept clearance, the shortest-path
/// search): a pure function of what the engine took from its state when the plan arrived,
/// so it gives the same samples on any thread. Replay runs it on its sink thread, beside
/// the engine ([`Engine::defer_plan_jobs`]); otherwise the engine runs it at once.
#[derive(Debug)]
pub struct PlanJob {
    t: f64,
    cp: ClearanceParams,
    map: Option<Arc<ObstacleIndex>>,
    bodies: Vec<Point>,
    work: PlanWork,
}

#[derive(Debug)]
enum PlanWork {
    /// No path: was there one from `start` to `goal`?
    Missing { start: [f64; 2], goal: [f64; 2] },
    /// A path (densified as `dense`); `excess`: its length over the shortest is due.
    Quality { pts: Vec<[f64; 2]>, dense: Arc<Vec<[f64; 2]>>, excess: bool },
}

/// A plan as it waits for the reference at its stamp: what its arrival fixed.
#[derive(Debug)]
pub(super) enum PlanStep {
    /// No path: the goal (its own, else the previous plan's end) and the previous plan's
    /// start, for when the reference ego at the stamp is not known.
    Missing { goal: Option<[f64; 2]>, prev_start: Option<[f64; 2]> },
    /// A path, densified, and whether its length excess is due.
    Quality { pts: Vec<[f64; 2]>, dense: Arc<Vec<[f64; 2]>>, excess: bool },
}

/// Plan jobs kept for the caller, and the bound on what they hold.
#[derive(Debug)]
pub(super) struct Deferred {
    jobs: Vec<(usize, PlanJob)>,
    /// Points held by the kept jobs (objects, plan and densified plan).
    held: usize,
    /// At most this many points held; a job that would exceed it runs at once instead,
    /// which gives the same samples, so nothing is lost.
    budget: usize,
}

impl Deferred {
    pub(super) fn new(budget: usize) -> Deferred {
        Deferred { jobs: Vec::new(), held: 0, budget }
    }

    /// Hands the kept jobs over; what they held no longer counts.
    pub(super) fn take(&mut self) -> Vec<(usize, PlanJob)> {
        self.held = 0;
        std::mem::take(&mut self.jobs)
    }
}

impl PlanJob {
    /// Points the job holds (its objects, the plan and the densified plan).
    fn points(&self) -> usize {
        self.bodies.len()
            + match &self.work {
                PlanWork::Missing { .. } => 2,
                PlanWork::Quality { pts, dense, .. } => pts.len() + dense.len(),
            }
    }

    /// Appends the plan's samples to `out`, in the order the engine gives them.
    pub fn run(&self, out: &mut Vec<Sample>) {
        let (t, cp, map, bodies) = (self.t, &self.cp, self.map.as_deref(), &self.bodies[..]);
        let mut push = |metric, value| out.push(Sample { t, metric, role: None, value });
        let (pts, dense, excess) = match &self.work {
            PlanWork::Missing { start, goal } => {
                let exists = grid_for(cp, map, &[*start, *goal], bodies).shortest(*start, *goal).is_some();
                push(Metric::PathMissing, if exists { 1.0 } else { 0.0 });
                return;
            }
            PlanWork::Quality { pts, dense, excess } => (pts, &dense[..], *excess),
        };
        push(Metric::PathMissing, 0.0);
        let len = path::length(pts);
        push(Metric::PathLength, len);
        push(Metric::PathCurvatureMax, path::curvature_max(dense));
        push(Metric::PathDeviation, path::deviation_max(dense, cp.deviation_window));
        // Swept footprint: the footprint at every densified pose, heading from the tangent.
        // Only the minimum is wanted, so a pose is skipped when it provably cannot go below
        // it: from the last pose measured exactly (clearance d_k), no point of the footprint
        // has moved more than |p - p_k| + r |yaw - yaw_k| (r its circumradius), so the
        // clearance here is at least d_k minus that. Exact, not an approximation.
        let r = cp.footprint.circumradius();
        let mut min_clear: Option<f64> = None;
        let mut anchor: Option<([f64; 2], f64, f64)> = None;
        for (i, p) in dense.iter().enumerate() {
            let yaw = tangent(dense, i);
            if let (Some(m), Some((q, qyaw, dq))) = (min_clear, anchor) {
                let moved = path::norm(p[0] - q[0], p[1] - q[1]) + r * wrap_angle(yaw - qyaw).abs();
                if dq - moved >= m {
                    continue;
                }
            }
            if let Some(n) = clearance_with(cp, map, p[0], p[1], yaw, bodies) {
                min_clear = Some(min_clear.map_or(n.distance, |m: f64| m.min(n.distance)));
                anchor = Some((*p, yaw, n.distance));
            }
        }
        if let Some(m) = min_clear {
            push(Metric::PathClearance, m);
            push(Metric::PathMargin, margin(m, cp.inflation));
        }
        if excess {
            let (s, g) = (pts[0], pts[pts.len() - 1]);
            if let Some(best) = grid_for(cp, map, pts, bodies).shortest(s, g) {
                if best > cp.grid_res {
                    push(Metric::PathLengthExcess, len / best);
                }
            }
        }
    }
}

/// Runs the plan jobs a deferring engine kept for `samples` and puts their samples where
/// the engine would have put them (each job's position is `samples.len()` when it was
/// kept); `out` receives the whole batch.
pub fn splice_plan_jobs(samples: &[Sample], jobs: &[(usize, PlanJob)], out: &mut Vec<Sample>) {
    let mut from = 0;
    for (at, job) in jobs {
        out.extend_from_slice(&samples[from..*at]);
        job.run(out);
        from = *at;
    }
    out.extend_from_slice(&samples[from..]);
}

/// Margins this close to 0 (m) are 0: a micrometre is below anything a site map, a
/// planner or a footprint resolves, and above the rounding of headings and rotated corners
/// (measured up to 1e-7 m on 40 m plans), which would otherwise turn a plan that keeps
/// exactly the inflation distance into a breach of a `below = 0` rule.
pub const MARGIN_RESOLUTION: f64 = 1e-6;

/// A plan's margin: its swept clearance less the inflation, snapped to 0 within
/// [`MARGIN_RESOLUTION`].
fn margin(clearance: f64, inflation: f64) -> f64 {
    let m = clearance - inflation;
    if m.abs() < MARGIN_RESOLUTION {
        0.0
    } else {
        m
    }
}

/// Clearance state inside the engine.
#[derive(Debug)]
pub(super) struct ClearState {
    pub(super) cp: ClearanceParams,
    map: Timeline<Arc<ObstacleIndex>>,
    plans: Timeline<Plan>,
    pub(super) est_sets: Timeline<Arc<PointSet>>,
    pub(super) clears: VecDeque<Pending<Pose>>,
    pub(super) last_clear_t: Option<f64>,
    /// Plans waiting for the reference at their stamp.
    pub(super) plan_steps: VecDeque<Pending<PlanStep>>,
    pub(super) last_plan_t: Option<f64>,
    /// The latest stamp of any plan heard (an empty one included).
    latest_plan_stamp: Option<f64>,
    prev_ego: Option<(f64, Pose, Option<f64>)>,
    open: Option<Collision>,
    pub(super) collisions: Vec<Collision>,
    pub(super) collisions_dropped: u64,
    last_excess_t: f64,
    prev_plan: Option<(f64, [f64; 2], [f64; 2])>,
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
            clears: VecDeque::new(),
            last_clear_t: None,
            plan_steps: VecDeque::new(),
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
fn body_of(p: &Point, radius: f64) -> Body {
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

impl Engine {
    pub(super) fn on_obstacles(&mut self, set: &ObstacleSet) {
        self.clear.map.insert(set.stamp, Arc::new(ObstacleIndex::from_map(&set.obstacles)));
    }

    /// Whether a message of `role` stamped at or after `t` has arrived, so that what the
    /// role says about `t` (its value at `t`, or its latest message at or before `t`) is
    /// known. The site map is static: known once one has arrived.
    fn known_at(&self, role: Role, t: f64) -> bool {
        match role {
            Role::ReferenceObjects => self.ref_objects.has_at_or_after(t),
            Role::ReferenceEgo => self.ref_ego.has_at_or_after(t),
            Role::EstimateEgo => self.est_ego.has_at_or_after(t),
            Role::EstimateObjects => self.clear.est_sets.has_at_or_after(t),
            Role::PlanPath => self.clear.latest_plan_stamp.is_some_and(|s| s >= t - align::EXACT_S),
            Role::ReferenceObstacles => !self.clear.map.is_empty(),
        }
    }

    /// Whether the role has been heard at all this run.
    fn heard(&self, role: Role) -> bool {
        self.transport[role.index()].messages > 0
    }

    /// A role read as "its latest message at or before `t`" is late when the step had to
    /// resolve without a newer one and the role's own messages arrive more than
    /// `time.max_wait` after their stamps: the one in force at `t` may still be coming.
    fn late(&self, role: Role, t: f64, ready: bool) -> bool {
        !ready
            && !self.known_at(role, t)
            && self.transport[role.index()].last_latency().is_some_and(|l| l > self.ap.max_wait)
    }

    /// Clearance steps read the reference objects at `t`, the plan in force and the map.
    pub(super) fn clearance_ready(&self, t: f64) -> bool {
        [Role::ReferenceObjects, Role::PlanPath, Role::ReferenceObstacles]
            .iter()
            .all(|&r| self.known_at(r, t))
    }

    /// Ego steps (with their clearance budget) read the reference ego and objects, the
    /// estimated objects, the plan and the map at `t`.
    pub(super) fn ego_ready(&self, t: f64) -> bool {
        [
            Role::ReferenceEgo,
            Role::ReferenceObjects,
            Role::EstimateObjects,
            Role::PlanPath,
            Role::ReferenceObstacles,
        ]
        .iter()
        .all(|&r| self.known_at(r, t))
    }

    /// A plan's path quality reads the reference objects and the map at its stamp (and,
    /// for an empty plan, the reference ego: where the search starts).
    pub(super) fn plan_ready(&self, t: f64, step: &PlanStep) -> bool {
        self.known_at(Role::ReferenceObjects, t)
            && self.known_at(Role::ReferenceObstacles, t)
            && (!matches!(step, PlanStep::Missing { .. }) || self.known_at(Role::ReferenceEgo, t))
    }

    /// Reference objects at `t` by the alignment rule: `Ok(None)` when the role has never
    /// been heard (a setup without them), `Err(reason)` when it has but gives nothing
    /// for `t`.
    fn reference_objects_for(&self, t: f64) -> Result<(Vec<Point>, How), &'static str> {
        if !self.heard(Role::ReferenceObjects) {
            return Ok((Vec::new(), How::Exact));
        }
        let mut pts = Vec::new();
        let how = self.reference_into(t, &mut Vec::new(), &mut Vec::new(), &mut pts)?;
        Ok((pts, how))
    }

    /// Reference objects at `t` (none when the alignment finds nothing).
    #[cfg(test)]
    fn reference_points_at(&self, t: f64) -> Vec<Point> {
        self.reference_objects_for(t).map(|(p, _)| p).unwrap_or_default()
    }

    /// Estimated objects (the latest set at or before `t`).
    fn estimate_points_at(&self, t: f64) -> Vec<Point> {
        let mut out = Vec::new();
        if let Some((_, set)) = self.clear.est_sets.latest_at_or_before(t) {
            let mut scratch = Vec::new();
            if let Ok(p) = self.ref_points(set, &mut scratch) {
                out.extend_from_slice(p);
            }
        }
        out
    }

    fn map_at(&self, t: f64) -> Option<&Arc<ObstacleIndex>> {
        self.clear.map.latest_at_or_before(t).map(|(_, m)| m)
    }

    /// Clearance of the footprint at a pose against the map at `t` and `objects`.
    fn clearance_of(&self, t: f64, x: f64, y: f64, yaw: f64, objects: &[Point]) -> Option<Nearest> {
        clearance_with(&self.clear.cp, self.map_at(t).map(|m| &**m), x, y, yaw, objects)
    }

    pub(super) fn eval_clearance(&mut self, t: f64, pose: &Pose, ready: bool, out: &mut Vec<Sample>) {
        self.clear.last_clear_t = Some(t);
        match self.reference_objects_for(t) {
            Err(reason) => self.counters.clearance.skip(reason),
            Ok((bodies, how)) => {
                if let Some(n) = self.clearance_of(t, pose.x, pose.y, pose.yaw, &bodies) {
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
        if self.heard(Role::PlanPath) {
            if self.late(Role::PlanPath, t, ready) {
                self.counters.path_following.skip("plan_late");
            } else {
                match self
                    .clear
                    .plans
                    .latest_at_or_before(t)
                    .and_then(|(_, plan)| path::project(&plan.dense, pose.x, pose.y))
                {
                    None => self.counters.path_following.skip("no_plan_before"),
                    Some(p) => {
                        self.counters.path_following.hit(How::Exact);
                        out.push(Sample { t, metric: Metric::CrossTrack, role: None, value: p.lateral });
                        let value = path::heading_error(pose.yaw, &p);
                        out.push(Sample { t, metric: Metric::PathHeadingError, role: None, value });
                    }
                }
            }
        }
        let mut push = |metric, value| out.push(Sample { t, metric, role: None, value });
        // Comfort from successive reference poses: lateral acceleration v * yaw rate, and
        // its rate of change.
        if let Some((t0, p0, a0)) = &self.clear.prev_ego {
            let dt = t - t0;
            if dt > 1e-6 {
                let v = pose.v.unwrap_or_else(|| (pose.x - p0.x).hypot(pose.y - p0.y) / dt);
                let acc = v * wrap_angle(pose.yaw - p0.yaw) / dt;
                push(Metric::LateralAccel, acc);
                if let Some(a0) = a0 {
                    push(Metric::LateralJerk, (acc - a0) / dt);
                }
                self.clear.prev_ego = Some((t, pose.clone(), Some(acc)));
                return;
            }
        }
        self.clear.prev_ego = Some((t, pose.clone(), None));
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

    /// The clearance-loss budget at an ego step (see the module note). Skipped (and
    /// counted) when the reference objects at `t` are not known, or the estimated objects
    /// or the plan in force may still be on their way.
    pub(super) fn eval_budget(
        &mut self,
        t: f64,
        est: &Pose,
        reference: &Pose,
        ready: bool,
        out: &mut Vec<Sample>,
    ) {
        let (ref_bodies, how) = match self.reference_objects_for(t) {
            Ok(x) => x,
            Err(reason) => return self.counters.budget.skip(reason),
        };
        if self.late(Role::EstimateObjects, t, ready) {
            return self.counters.budget.skip("estimate_objects_late");
        }
        if self.heard(Role::PlanPath) && self.late(Role::PlanPath, t, ready) {
            return self.counters.budget.skip("plan_late");
        }
        let est_bodies = self.estimate_points_at(t);
        let c = |s: &Self, p: (f64, f64, f64), b: &[Point]| {
            s.clearance_of(t, p.0, p.1, p.2, b).map(|n| n.distance)
        };
        let (e, r) = ((est.x, est.y, est.yaw), (reference.x, reference.y, reference.yaw));
        let (Some(truth), Some(believed), Some(est_ref)) =
            (c(self, r, &ref_bodies), c(self, e, &est_bodies), c(self, e, &ref_bodies))
        else {
            return;
        };
        let planned = self
            .clear
            .plans
            .latest_at_or_before(t)
            .and_then(|(_, plan)| path::project(&plan.dense, est.x, est.y))
            .and_then(|p| c(self, (p.point[0], p.point[1], p.yaw), &est_bodies))
            .unwrap_or(believed);
        self.counters.budget.hit(how);
        let mut push = |metric, value| out.push(Sample { t, metric, role: None, value });
        push(Metric::BelievedClearance, believed);
        push(Metric::ClearanceLoss, planned - truth);
        push(Metric::ClearanceLossPathFollowing, planned - believed);
        push(Metric::ClearanceLossPerception, believed - est_ref);
        push(Metric::ClearanceLossLocalization, est_ref - truth);
    }

    /// A plan arrives: its interval and compute time now; what its path quality needs from
    /// the plan itself is fixed as a [`PlanStep`] that waits for the reference at its stamp.
    pub(super) fn on_plan(&mut self, path: &Path, out: &mut Vec<Sample>) -> PlanStep {
        let t = path.stamp;
        let cp = self.clear.cp;
        let mut push = |metric, value| out.push(Sample { t, metric, role: None, value });
        if let Some((t0, _, _)) = self.clear.prev_plan {
            push(Metric::PlanInterval, t - t0);
        }
        if let Some(c) = path.compute_s {
            push(Metric::PlanCompute, c);
        }
        self.clear.latest_plan_stamp = Some(self.clear.latest_plan_stamp.map_or(t, |s| s.max(t)));
        let pts: Vec<[f64; 2]> = path.poses.iter().map(|p| [p.x, p.y]).collect();
        if pts.is_empty() {
            let goal = path.goal.as_ref().map(|g| [g.x, g.y]).or(self.clear.prev_plan.map(|p| p.2));
            return PlanStep::Missing { goal, prev_start: self.clear.prev_plan.map(|p| p.1) };
        }
        let dense = Arc::new(path::densify(&pts, cp.path_step));
        let excess = t - self.clear.last_excess_t >= cp.excess_every - align::EXACT_S && pts.len() >= 2;
        if excess {
            self.clear.last_excess_t = t;
        }
        self.clear.prev_plan = Some((t, pts[0], pts[pts.len() - 1]));
        self.clear.plans.insert(t, Plan { dense: Arc::clone(&dense) });
        PlanStep::Quality { pts, dense, excess }
    }

    /// A plan's reference is known (or its wait is over): its path quality as a
    /// [`PlanJob`], run now or kept for the caller when deferring.
    pub(super) fn eval_plan(&mut self, t: f64, step: PlanStep, out: &mut Vec<Sample>) {
        self.clear.last_plan_t = Some(t);
        let (bodies, how) = match self.reference_objects_for(t) {
            Ok(x) => x,
            Err(reason) => return self.counters.plans.skip(reason),
        };
        let work = match step {
            PlanStep::Missing { goal, prev_start } => {
                // No path: was there one? Search from the reference ego (else the previous
                // plan's start) to the goal (else the previous plan's end).
                let start = align::resolve(&self.ref_ego, t, self.ap.tolerance)
                    .ok()
                    .map(|r| align::pose_at(r, t).0)
                    .map(|p| [p.x, p.y])
                    .or(prev_start);
                let (Some(start), Some(goal)) = (start, goal) else {
                    return self.counters.plans.skip("no_start_or_goal");
                };
                PlanWork::Missing { start, goal }
            }
            PlanStep::Quality { pts, dense, excess } => PlanWork::Quality { pts, dense, excess },
        };
        self.counters.plans.hit(how);
        let job = PlanJob { t, cp: self.clear.cp, map: self.map_at(t).cloned(), bodies, work };
        let points = job.points();
        match self.clear.deferred.as_mut() {
            Some(d) if d.held + points <= d.budget => {
                d.held += points;
                d.jobs.push((out.len(), job));
            }
            _ => job.run(out),
        }
    }
}

/// Clearance of the footprint at a pose against `map` and `objects`. An object is skipped
/// when a circle bound shows it cannot be nearer than the best so far (the map's nearest
/// first), so only a few become polygons.
fn clearance_with(
    cp: &ClearanceParams,
    map: Option<&ObstacleIndex>,
    x: f64,
    y: f64,
    yaw: f64,
    objects: &[Point],
) -> Option<Nearest> {
    let fp = &cp.footprint;
    let placed = fp.place(x, y, yaw);
    let r = fp.circumradius();
    let mut best = map.and_then(|m| m.nearest(&placed, [x, y], r));
    let radius = cp.object_radius;
    for p in objects {
        let (dx, dy) = (p.x - x, p.y - y);
        let bound = (dx * dx + dy * dy).sqrt() - reach(p, radius) - r;
        if best.is_some_and(|b| bound > b.distance) {
            continue;
        }
        let body = body_of(p, radius);
        best = nearer(best, nearest_of(std::slice::from_ref(&body), &placed, [x, y], r));
    }
    best
}

/// The occupancy grid around `pts` from the map and the objects.
fn grid_for(cp: &ClearanceParams, map: Option<&ObstacleIndex>, pts: &[[f64; 2]], objects: &[Point]) -> Grid {
    let bodies: Vec<Body> = objects.iter().map(|p| body_of(p, cp.object_radius)).collect();
    let mut lo = [f64::INFINITY; 2];
    let mut hi = [f64::NEG_INFINITY; 2];
    for p in pts {
        for k in 0..2 {
            lo[k] = lo[k].min(p[k] - cp.grid_margin);
            hi[k] = hi[k].max(p[k] + cp.grid_margin);
        }
    }
    let half = cp.footprint.width / 2.0;
    let near_map = map.into_iter().flat_map(|m| m.near_box(lo, hi, half));
    Grid::build(lo, hi, cp.grid_res, cp.max_grid_cells, near_map.chain(bodies.iter()), half)
}

fn tangent(pts: &[[f64; 2]], i: usize) -> f64 {
    let (a, b) = if i + 1 < pts.len() {
        (pts[i], pts[i + 1])
    } else if i > 0 {
        (pts[i - 1], pts[i])
    } else {
        return 0.0;
    };
    (b[1] - a[1]).atan2(b[0] - a[0])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Config;
    use crate::core::Input;
    use crate::logio::{read_all, Item};
    use crate::msg::{Msg, Role};

    impl Engine {
        /// Path clearance with every densified pose measured (no skipping).
        fn path_clearance_every_pose(&self, plan: &Path) -> Option<f64> {
            let pts: Vec<[f64; 2]> = plan.poses.iter().map(|p| [p.x, p.y]).collect();
            let dense = path::densify(&pts, self.clear.cp.path_step);
            let bodies = self.reference_points_at(plan.stamp);
            (0..dense.len())
                .filter_map(|i| {
                    self.clearance_of(plan.stamp, dense[i][0], dense[i][1], tangent(&dense, i), &bodies)
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
