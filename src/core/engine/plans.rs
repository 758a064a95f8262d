//! Path quality of each plan: its interval and compute time when it arrives, and, once
//! the reference at its stamp is known, its shape, swept clearance, margin and length over
//! the shortest feasible path (a [`PlanJob`], which replay runs beside the engine). Pure.

use std::sync::Arc;

use super::clearance::{clearance_with, Reaches};
use super::Engine;
use crate::core::align::{self, Point};
use crate::core::engine::Sample;
use crate::core::ClearanceParams;
use crate::geometry::{Body, ObstacleIndex};
use crate::metrics::ego::wrap_angle;
use crate::metrics::path::{self, Grid};
use crate::metrics::Metric;
use crate::msg::Path;

#[derive(Debug)]
pub(super) struct Plan {
    pub(super) dense: Arc<Vec<[f64; 2]>>,
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
    bodies: Arc<Vec<Point>>,
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
        let reaches = Reaches::of(bodies, cp.object_radius);
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
            if let Some(n) = clearance_with(cp, map, p[0], p[1], yaw, bodies, &reaches) {
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

impl Engine {
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

/// The occupancy grid around `pts` from the map and the objects.
pub(super) fn grid_for(
    cp: &ClearanceParams,
    map: Option<&ObstacleIndex>,
    pts: &[[f64; 2]],
    objects: &[Point],
) -> Grid {
    let bodies: Vec<Body> = objects.iter().map(|p| super::clearance::body_of(p, cp.object_radius)).collect();
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

pub(super) fn tangent(pts: &[[f64; 2]], i: usize) -> f64 {
    let (a, b) = if i + 1 < pts.len() {
        (pts[i], pts[i + 1])
    } else if i > 0 {
        (pts[i - 1], pts[i])
    } else {
        return 0.0;
    };
    (b[1] - a[1]).atan2(b[0] - a[0])
}
