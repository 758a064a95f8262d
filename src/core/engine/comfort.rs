//! Comfort at a clearance step, from successive reference poses: lateral acceleration
//! v * yaw rate, and its rate of change. Pure.

use super::Engine;
use crate::core::engine::Sample;
use crate::metrics::ego::wrap_angle;
use crate::metrics::Metric;
use crate::msg::Pose;

impl Engine {
    /// Comfort at the clearance step `t`.
    pub(super) fn eval_comfort(&mut self, t: f64, pose: &Pose, out: &mut Vec<Sample>) {
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
}
