//! Ego steps: the estimated pose against the reference pose at its stamp (position,
//! heading, longitudinal and lateral error), then the clearance budget at the same step.
//! Pure.

use super::{miss_reason, Engine, Sample};
use crate::core::align;
use crate::metrics::{ego, Metric};
use crate::msg::Pose;

impl Engine {
    /// An ego step at the estimated pose's stamp `t`, then its clearance budget.
    pub(super) fn eval_ego(&mut self, t: f64, est: &Pose, ready: bool, out: &mut Vec<Sample>) {
        self.last_ego_t = Some(t);
        let (reference, how) = match align::resolve(&self.ref_ego, t, self.ap.tolerance) {
            Ok(r) => align::pose_at(r, t),
            Err(m) => return self.counters.ego.skip(miss_reason(m, "ego")),
        };
        self.counters.ego.hit(how);
        let e = ego::ego_error([est.x, est.y, est.yaw], [reference.x, reference.y, reference.yaw]);
        for (metric, value) in [
            (Metric::EgoPositionError, e.position),
            (Metric::EgoHeadingError, e.heading),
            (Metric::EgoLongitudinalError, e.longitudinal),
            (Metric::EgoLateralError, e.lateral),
        ] {
            out.push(Sample { t, metric, role: None, value });
        }
        self.eval_budget(t, est, &reference, ready, out);
    }
}
