//! The clearance-loss budget at an ego step: why the clearance shrank. Pure.
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

use super::clearance::Reaches;
use super::Engine;
use crate::core::align::Point;
use crate::core::engine::Sample;
use crate::metrics::path;
use crate::metrics::Metric;
use crate::msg::{Pose, Role};

impl Engine {
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
        let radius = self.clear.cp.object_radius;
        let (ref_reach, est_reach) = (Reaches::of(&ref_bodies, radius), Reaches::of(&est_bodies, radius));
        let c = |s: &Self, p: (f64, f64, f64), b: &[Point], reach: &Reaches| {
            s.clearance_of(t, p.0, p.1, p.2, b, reach).map(|n| n.distance)
        };
        let (e, r) = ((est.x, est.y, est.yaw), (reference.x, reference.y, reference.yaw));
        let (Some(truth), Some(believed), Some(est_ref)) = (
            c(self, r, &ref_bodies, &ref_reach),
            c(self, e, &est_bodies, &est_reach),
            c(self, e, &ref_bodies, &ref_reach),
        ) else {
            return;
        };
        let planned = self
            .clear
            .plans
            .latest_at_or_before(t)
            .and_then(|(_, plan)| path::project(&plan.dense, est.x, est.y))
            .and_then(|p| c(self, (p.point[0], p.point[1], p.yaw), &est_bodies, &est_reach))
            .unwrap_or(believed);
        self.counters.budget.hit(how);
        let mut push = |metric, value| out.push(Sample { t, metric, role: None, value });
        push(Metric::BelievedClearance, believed);
        push(Metric::ClearanceLoss, planned - truth);
        push(Metric::ClearanceLossPathFollowing, planned - believed);
        push(Metric::ClearanceLossPerception, believed - est_ref);
        push(Metric::ClearanceLossLocalization, est_ref - truth);
    }
}
