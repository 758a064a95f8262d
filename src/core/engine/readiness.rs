//! When a step may be evaluated: which roles say what about a stamp, and whether a role
//! read as "its latest message at or before t" may still have one on its way. Pure.

use super::plans::PlanStep;
use super::Engine;
use crate::core::align;
use crate::msg::Role;

impl Engine {
    /// Whether a message of `role` stamped at or after `t` has arrived, so that what the
    /// role says about `t` (its value at `t`, or its latest message at or before `t`) is
    /// known. The site map is static: known once one has arrived.
    pub(super) fn known_at(&self, role: Role, t: f64) -> bool {
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
    pub(super) fn heard(&self, role: Role) -> bool {
        self.transport[role.index()].messages > 0
    }

    /// A role read as "its latest message at or before `t`" is late when the step had to
    /// resolve without a newer one and the role's own messages arrive more than
    /// `time.max_wait` after their stamps: the one in force at `t` may still be coming.
    pub(super) fn late(&self, role: Role, t: f64, ready: bool) -> bool {
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
}
