//! Path following at a clearance step: the reference ego against the plan in force
//! (`cross_track_m`, `path_heading_error_rad`). Pure.

use super::Engine;
use crate::core::align::How;
use crate::core::engine::Sample;
use crate::metrics::path;
use crate::metrics::Metric;
use crate::msg::{Pose, Role};

impl Engine {
    /// Path following at the clearance step `t` (skipped, and counted, while no plan is in
    /// force or the plan in force may still be on its way).
    pub(super) fn eval_path_following(&mut self, t: f64, pose: &Pose, ready: bool, out: &mut Vec<Sample>) {
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
    }
}
