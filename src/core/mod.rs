//! The pure core: time alignment, assignment and the evaluation engine.
//!
//! Nothing here does I/O, spawns, or reads a clock: every update carries its event time.
//! Live (zenoh) and replay (files) sources feed the same [`engine::Engine`] calls, so
//! they give the same numbers for the same input.

pub mod align;
pub mod engine;

use serde::Serialize;
use thiserror::Error;

pub use engine::{splice_plan_jobs, Collision, Engine, Input, JobOutcome, PlanJob, Sample, TgospaJob};

/// A bad parameter, with the config key it came from.
#[derive(Debug, Clone, Error, PartialEq)]
#[error("{key}: {expected}")]
pub struct ParamError {
    /// Config key (relative to its section for tracking, full path otherwise).
    pub key: String,
    /// What was expected.
    pub expected: String,
}

fn perr(key: &str, expected: &str) -> ParamError {
    ParamError { key: key.to_string(), expected: expected.to_string() }
}

/// Which ego pose transforms ego-frame object sets.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum EgoSource {
    /// `reference/ego`
    Reference,
    /// `estimate/ego`
    Estimate,
}

/// Tracking evaluation parameters (SPEC §5, §7 `[tracking]`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TrackingParams {
    /// cutoff c (m), > 0
    pub cutoff: f64,
    /// order p, >= 1
    pub order: f64,
    /// alpha in (0, 2]
    pub alpha: f64,
    /// evaluation radius (m); 0 = unlimited
    pub region: f64,
    /// ego pose source for ego-frame sets
    pub ego_source: EgoSource,
    /// forget ids unseen this long (s)
    pub forget_after: f64,
    /// Largest assignment component (rows x columns) solved exactly; a larger one, or a
    /// step with more candidate pairs than [`crate::metrics::assign::MAX_EDGES_PER_CELL`]
    /// times this, is assigned greedily (a valid upper bound, counted as `approximate`).
    pub exact_cells: usize,
    /// The distance whose p-th power halved is the cost of a missed reference object
    /// (`tracking.missed_cost_m`); `None`: the cutoff, as GOSPA has it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub missed_cost: Option<f64>,
    /// The same for a false estimate (`tracking.false_cost_m`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub false_cost: Option<f64>,
}

impl TrackingParams {
    /// The costs (m^p) of a missed reference and of a false estimate left alone:
    /// `missed_cost_m^p / 2` and `false_cost_m^p / 2`, both `c^p / 2` by default.
    pub fn state_costs(&self) -> (f64, f64) {
        let half = |d: Option<f64>| crate::metrics::pow_p(d.unwrap_or(self.cutoff), self.order) / 2.0;
        (half(self.missed_cost), half(self.false_cost))
    }

    /// Whether missed and false objects are costed otherwise than GOSPA's `c^p / 2`.
    pub fn has_own_costs(&self) -> bool {
        self.missed_cost.is_some_and(|d| d != self.cutoff)
            || self.false_cost.is_some_and(|d| d != self.cutoff)
    }

    /// Sets the missed and false costs (metres), checked: positive, and only with alpha = 2
    /// (the split into missed and false exists only there).
    pub fn with_costs(
        mut self,
        missed: Option<f64>,
        false_: Option<f64>,
    ) -> Result<TrackingParams, ParamError> {
        for (v, key) in [(missed, "missed_cost_m"), (false_, "false_cost_m")] {
            if v.is_some_and(|d| !(d.is_finite() && d > 0.0)) {
                return Err(perr(key, "a positive number of metres"));
            }
        }
        // A cost equal to the cutoff is GOSPA's own: kept as unset, so the config (and its
        // digest) is the same as without it.
        let own = |d: Option<f64>| d.filter(|&d| d != self.cutoff);
        self.missed_cost = own(missed);
        self.false_cost = own(false_);
        if self.has_own_costs() && self.alpha != 2.0 {
            return Err(perr(
                "missed_cost_m",
                "the cutoff, or alpha = 2 (missed and false costs exist only there)",
            ));
        }
        Ok(self)
    }
    /// Validating constructor.
    pub fn try_new(
        cutoff: f64,
        order: f64,
        alpha: f64,
        region: f64,
        ego_source: EgoSource,
        forget_after: f64,
    ) -> Result<TrackingParams, ParamError> {
        if !(cutoff.is_finite() && cutoff > 0.0) {
            return Err(perr("cutoff_m", "a positive number of metres"));
        }
        if !(order.is_finite() && order >= 1.0) {
            return Err(perr("order", "a number >= 1"));
        }
        if !(alpha > 0.0 && alpha <= 2.0) {
            return Err(perr("alpha", "a number in (0, 2]"));
        }
        if !(region.is_finite() && region >= 0.0) {
            return Err(perr("region_radius_m", "a number of metres >= 0 (0 = unlimited)"));
        }
        if forget_after.is_nan() || forget_after <= 0.0 {
            return Err(perr("forget_after", "a positive duration"));
        }
        Ok(TrackingParams {
            cutoff,
            order,
            alpha,
            region,
            ego_source,
            forget_after,
            exact_cells: EXACT_CELLS,
            missed_cost: None,
            false_cost: None,
        })
    }
}

impl Default for TrackingParams {
    fn default() -> Self {
        TrackingParams {
            cutoff: 2.0,
            order: 1.0,
            alpha: 2.0,
            region: 0.0,
            ego_source: EgoSource::Reference,
            forget_after: 300.0,
            exact_cells: EXACT_CELLS,
            missed_cost: None,
            false_cost: None,
        }
    }
}

/// T-GOSPA over sliding windows (`[tgospa]`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TgospaParams {
    /// A value is emitted at most this often (s of event time).
    pub every: f64,
    /// Over the tracking steps of this trailing window (s).
    pub window: f64,
    /// gamma, the switch cost (m).
    pub switch_cost: f64,
    /// The most variables of one linear program; a window that needs more is skipped and
    /// counted.
    pub max_variables: usize,
    /// The most tracking steps a window holds; beyond, the oldest leave early (counted).
    pub max_steps: usize,
}

impl Default for TgospaParams {
    fn default() -> Self {
        TgospaParams { every: 1.0, window: 10.0, switch_cost: 2.0, max_variables: 20_000, max_steps: 1_000 }
    }
}

impl TgospaParams {
    /// Validating constructor (keys relative to `[tgospa]`).
    pub fn try_new(
        every: f64,
        window: f64,
        switch_cost: f64,
        max_variables: usize,
        max_steps: usize,
    ) -> Result<TgospaParams, ParamError> {
        if !(every.is_finite() && every > 0.0) {
            return Err(perr("every", "a positive duration"));
        }
        if !(window.is_finite() && window > 0.0) {
            return Err(perr("window", "a positive duration"));
        }
        if !(switch_cost.is_finite() && switch_cost >= 0.0) {
            return Err(perr("switch_cost_m", "a number of metres >= 0"));
        }
        if max_variables == 0 {
            return Err(perr("max_variables", "at least 1"));
        }
        if max_steps < 2 {
            return Err(perr("max_steps", "at least 2"));
        }
        Ok(TgospaParams { every, window, switch_cost, max_variables, max_steps })
    }
}

/// Default of `limits.exact_assignment_cells`: a 700 x 700 component.
pub const EXACT_CELLS: usize = 490_000;

/// Clearance and path-quality parameters (SPEC §5).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ClearanceParams {
    /// The ego footprint.
    pub footprint: crate::geometry::Footprint,
    /// Radius of reference objects that carry no size (m).
    pub object_radius: f64,
    /// Planned paths are densified to this step (m).
    pub path_step: f64,
    /// The margin the planner is meant to keep (m).
    pub inflation: f64,
    /// Arc length of the chord-deviation window (m).
    pub deviation_window: f64,
    /// Occupancy grid resolution (m).
    pub grid_res: f64,
    /// Grid margin around the path's box (m).
    pub grid_margin: f64,
    /// Largest grid; beyond, the resolution is coarsened.
    pub max_grid_cells: usize,
    /// The length excess is evaluated at most this often (s of event time).
    pub excess_every: f64,
}

impl Default for ClearanceParams {
    fn default() -> Self {
        ClearanceParams {
            footprint: crate::geometry::Footprint { length: 4.0, width: 1.8, origin_to_rear: 1.0 },
            object_radius: 0.5,
            path_step: 0.5,
            inflation: 0.5,
            deviation_window: 10.0,
            grid_res: 0.2,
            grid_margin: 10.0,
            max_grid_cells: 2_000_000,
            excess_every: 1.0,
        }
    }
}

/// Default of `limits.max_stamp_lead_s`.
pub const MAX_STAMP_LEAD: f64 = 60.0;

/// Time alignment parameters (SPEC §4).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AlignParams {
    /// How long a step waits for a reference at or after its stamp (s).
    pub max_wait: f64,
    /// How old the last reference before a step may be on fallback (s).
    pub tolerance: f64,
    /// History kept behind the oldest open step (s).
    pub retain: f64,
    /// Steps that may wait at once; beyond, the oldest is resolved early and counted.
    pub pending_steps: usize,
    /// Messages kept per buffer; beyond, the oldest is dropped and counted.
    pub buffer_messages: usize,
    /// How far (s) a message's time may run ahead of the arrival clock, or a stamp ahead
    /// of its own `recv`, before it is held as implausible (`limits.max_stamp_lead_s`).
    pub max_stamp_lead: f64,
}

impl AlignParams {
    /// Validating constructor.
    pub fn try_new(
        max_wait: f64,
        tolerance: f64,
        retain: f64,
        pending_steps: usize,
        buffer_messages: usize,
    ) -> Result<AlignParams, ParamError> {
        if !(max_wait.is_finite() && max_wait >= 0.0) {
            return Err(perr("time.max_wait", "a duration >= 0"));
        }
        if !(tolerance.is_finite() && tolerance >= 0.0) {
            return Err(perr("time.tolerance", "a duration >= 0"));
        }
        if !(retain.is_finite() && retain >= 0.0) {
            return Err(perr("time.reference_history", "a duration >= 0"));
        }
        if pending_steps == 0 {
            return Err(perr("limits.pending_steps", "at least 1"));
        }
        if buffer_messages < 2 {
            return Err(perr("limits.buffer_messages", "at least 2"));
        }
        Ok(AlignParams {
            max_wait,
            tolerance,
            retain,
            pending_steps,
            buffer_messages,
            max_stamp_lead: MAX_STAMP_LEAD,
        })
    }
}

impl Default for AlignParams {
    fn default() -> Self {
        AlignParams {
            max_wait: 0.5,
            tolerance: 0.1,
            retain: 2.0,
            pending_steps: 4096,
            buffer_messages: 4096,
            max_stamp_lead: MAX_STAMP_LEAD,
        }
    }
}
