//! The evaluation engine: messages in, metric samples out.
//!
//! [`Engine::push`] takes one accepted or rejected message with its arrival time;
//! [`Engine::advance`] tells it the clock moved (a live timer); [`Engine::finish`] ends the
//! stream. Each call appends [`Sample`]s to the caller's buffer. Steps wait for their
//! reference by the rule of SPEC §4, with the wait measured on arrival times (`recv`, or the
//! stamp when a record has none), so replay and live produce the same samples.

use std::collections::BTreeMap;
use std::sync::Arc;

use serde::Serialize;

// The engine proper (inputs, draining, pruning) is this file; each metric family's step
// is a file of its own.
mod budget;
mod clearance;
mod comfort;
mod ego_step;
mod path_following;
mod pending;
mod plans;
mod readiness;
mod tgospa;
mod tracking;

use super::align::{self, How, Miss, Point, Resolved, Timeline};
use super::{AlignParams, ClearanceParams, EgoSource, TgospaParams, TrackingParams};
use crate::metrics::assign::{MatchScratch, ShortestPath};
use crate::metrics::nees::NeesPool;
use crate::metrics::tgospa::{Components, InOrder};
use crate::metrics::tracklife::{TrackLife, TrackLifeStep};
use crate::metrics::transport::Transport;
use crate::metrics::Metric;
use crate::msg::{Msg, ObjectSet, ObstacleSet, Path, Pose, Role};
pub use clearance::Collision;
pub use plans::{splice_plan_jobs, PlanJob};
pub use tgospa::{JobOutcome, TgospaJob, TgospaRun};

/// One input to the engine.
#[derive(Debug, Clone)]
pub enum Input {
    /// An accepted message on a role.
    Message {
        /// The role it arrived on.
        role: Role,
        /// Arrival time on the monitor's clock, if known.
        recv: Option<f64>,
        /// The message.
        msg: Msg,
    },
    /// An accepted message already prepared by [`Prepared::from`] (replay prepares on its
    /// decoding threads; the engine does the same for [`Input::Message`]).
    Prepared {
        /// The role it arrived on.
        role: Role,
        /// Arrival time on the monitor's clock, if known.
        recv: Option<f64>,
        /// The prepared message.
        msg: Prepared,
    },
    /// A message rejected while decoding or validating.
    Rejected {
        /// The role, when the key was bound.
        role: Option<Role>,
        /// Reason code.
        reason: &'static str,
    },
    /// A message lost before decoding (full queue).
    Dropped {
        /// The role.
        role: Role,
    },
    /// A message received but not evaluated because the run was stopped first.
    CutShort {
        /// The role.
        role: Role,
    },
}

/// One metric value at one time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    /// Step stamp (s).
    pub t: f64,
    /// Which metric.
    pub metric: Metric,
    /// The role, for transport metrics.
    pub role: Option<Role>,
    /// The value.
    pub value: f64,
}

/// Evaluated and skipped steps of one kind.
#[derive(Debug, Clone, Default, Serialize, serde::Deserialize)]
#[serde(default)]
pub struct StepCounts {
    /// Steps evaluated.
    pub evaluated: u64,
    /// Of those, with an exact reference stamp.
    pub exact: u64,
    /// Of those, interpolated.
    pub interpolated: u64,
    /// Of those, using the last reference before within tolerance.
    pub fallback: u64,
    /// Of those, assigned greedily in part (`limits.exact_assignment_cells`): their GOSPA
    /// and OSPA are upper bounds of the exact values.
    pub approximate: u64,
    /// Steps skipped.
    pub skipped: u64,
    /// Skipped steps by reason.
    pub skipped_by_reason: BTreeMap<crate::msg::Name, u64>,
}

impl StepCounts {
    pub(crate) fn skip(&mut self, reason: &'static str) {
        self.skipped += 1;
        *self.skipped_by_reason.entry(crate::msg::Name::Borrowed(reason)).or_insert(0) += 1;
    }

    fn hit(&mut self, how: How) {
        self.evaluated += 1;
        match how {
            How::Exact => self.exact += 1,
            How::Interpolated => self.interpolated += 1,
            How::Fallback => self.fallback += 1,
        }
    }
}

/// Everything the engine counted.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Counters {
    /// Tracking steps.
    pub tracking: StepCounts,
    /// Ego steps.
    pub ego: StepCounts,
    /// Clearance steps (at `reference/ego` stamps: clearance, collision, comfort).
    pub clearance: StepCounts,
    /// Path following at clearance steps (cross-track and heading error to the plan in
    /// force), counted once plans have been heard.
    pub path_following: StepCounts,
    /// The clearance-loss budget at ego steps.
    pub budget: StepCounts,
    /// Plans' path quality (at `plan/path` stamps).
    pub plans: StepCounts,
    /// T-GOSPA windows (one per `tgospa.every` of tracking stamps).
    pub tgospa: StepCounts,
    /// Tracking steps that left the T-GOSPA window early (`tgospa.max_steps`).
    pub tgospa_trimmed: u64,
    /// The run total of T-GOSPA over consecutive blocks.
    pub tgospa_run: TgospaRun,
    /// Records accepted.
    pub accepted: u64,
    /// Records rejected.
    pub rejected: u64,
    /// Rejections by reason.
    pub rejected_by_reason: BTreeMap<&'static str, u64>,
    /// Steps resolved early because the pending queue was full.
    pub pending_overflow: u64,
    /// Earliest and latest message stamps.
    pub first_stamp: Option<f64>,
    /// Latest message stamp.
    pub last_stamp: Option<f64>,
    /// Object states accepted (estimate and reference).
    pub object_states: u64,
    /// Messages received but not evaluated because the run was stopped first (also
    /// counted as `dropped` on their role).
    pub cut_short: u64,
}

/// A site map with no arrival time: loaded from a file, or a log's map record without
/// `recv`. It is known from the start and takes no part in the arrival clock.
fn is_static_map(role: Role, recv: Option<f64>) -> bool {
    role == Role::ReferenceObstacles && recv.is_none()
}

/// Why a step found no reference. `*_in_time`: none at or after the step's stamp arrived
/// within `time.max_wait`, and the last one before it is older than `time.tolerance` (a
/// late reference, or a gap in it).
pub(super) fn miss_reason(m: Miss, what: &'static str) -> &'static str {
    match (what, m) {
        ("objects", Miss::NoReference) => "no_reference",
        ("objects", Miss::TooOld) => "no_reference_in_time",
        ("objects", Miss::NoneBefore) => "no_reference_before",
        ("ego", Miss::NoReference) => "no_reference_ego",
        ("ego", Miss::TooOld) => "no_reference_ego_in_time",
        ("ego", Miss::NoneBefore) => "no_reference_ego_before",
        (_, Miss::NoReference) => "no_frame_pose",
        (_, Miss::TooOld) => "no_frame_pose_in_time",
        (_, Miss::NoneBefore) => "no_frame_pose_before",
    }
}

/// An object set as the engine keeps it: its points, converted once on arrival, and their
/// ids sorted for interpolation (an ego-frame set moved into the world keeps its order).
#[derive(Debug, Clone)]
pub struct PointSet {
    stamp: f64,
    ego_frame: bool,
    points: Vec<Point>,
    by_id: Vec<(u64, usize)>,
}

impl PointSet {
    /// Converts an object set.
    pub fn of(set: &ObjectSet) -> PointSet {
        let mut points = Vec::with_capacity(set.objects.len());
        align::points_of(set, &mut points);
        let mut by_id = Vec::with_capacity(points.len());
        align::id_index(&points, &mut by_id);
        PointSet { stamp: set.stamp, ego_frame: align::is_ego_frame(set), points, by_id }
    }
}

/// A message in the form the engine works on: object sets converted to points. A pure
/// function of the message, so it may run on any thread: replay runs it on its decoding
/// threads, where the message is still in cache, and the engine never touches the objects.
#[derive(Debug, Clone)]
pub enum Prepared {
    /// An object set's points (shared by the tracking step and the clearance look-up).
    Objects(Arc<PointSet>),
    /// A pose.
    Pose(Pose),
    /// A path.
    Path(Path),
    /// A site map.
    Obstacles(ObstacleSet),
}

impl From<Msg> for Prepared {
    fn from(msg: Msg) -> Prepared {
        match msg {
            Msg::Objects(set) => Prepared::Objects(Arc::new(PointSet::of(&set))),
            Msg::Pose(p) => Prepared::Pose(p),
            Msg::Path(p) => Prepared::Path(p),
            Msg::Obstacles(o) => Prepared::Obstacles(o),
        }
    }
}

impl Prepared {
    /// The message's stamp.
    pub fn stamp(&self) -> f64 {
        match self {
            Prepared::Objects(s) => s.stamp,
            Prepared::Pose(m) => m.stamp,
            Prepared::Path(m) => m.stamp,
            Prepared::Obstacles(m) => m.stamp,
        }
    }

    /// How many object states it carries.
    pub fn object_count(&self) -> usize {
        match self {
            Prepared::Objects(s) => s.points.len(),
            _ => 0,
        }
    }
}

use pending::{Pending, Queue};

/// A resolution's stamp (bits) and the versions of the timelines it read.
type RefKey = (u64, u64, u64, u64);

/// Resolutions kept: the families of one drain read a few stamps each.
const REF_CACHE: usize = 8;

/// The engine. See the module note.
#[derive(Debug)]
pub struct Engine {
    tp: TrackingParams,
    ap: AlignParams,
    ref_objects: Timeline<Arc<PointSet>>,
    ref_ego: Timeline<Pose>,
    est_ego: Timeline<Pose>,
    tracks: Queue<Arc<PointSet>>,
    egos: Queue<Pose>,
    now: f64,
    /// A message time far ahead of the arrival clock, waiting for a second to confirm it.
    held_jump: Option<f64>,
    last_track_t: Option<f64>,
    last_ego_t: Option<f64>,
    transport: [Transport; 6],
    counters: Counters,
    tracklife: TrackLife,
    tl_step: TrackLifeStep,
    nees_pool: NeesPool,
    solver: ShortestPath,
    scratch: MatchScratch,
    /// The second matching's scratch, for GOSPA with missed and false costed apart.
    scratch2: MatchScratch,
    xs: Vec<Point>,
    ys: Vec<Point>,
    wa: Vec<Point>,
    wb: Vec<Point>,
    /// Reference objects resolved at recent stamps (see [`Engine::reference_shared`]).
    ref_cache: std::collections::VecDeque<(RefKey, Arc<Vec<Point>>, How)>,
    /// Whether a reference object set in the ego frame has been heard.
    ref_in_ego_frame: bool,
    xp: Vec<[f64; 2]>,
    yp: Vec<[f64; 2]>,
    ids: (Vec<u64>, Vec<u64>),
    clear: clearance::ClearState,
    tgospa: Option<tgospa::TgState>,
    /// T-GOSPA jobs kept for the caller (live runs them off the loop thread), or `None`
    /// to run each at once.
    tgospa_jobs: Option<Vec<TgospaJob>>,
    /// What runs a window's components when the engine solves it itself.
    tgospa_runner: Box<dyn Components>,
}

impl Engine {
    /// A new engine.
    pub fn new(tp: TrackingParams, ap: AlignParams, cp: ClearanceParams) -> Engine {
        Engine {
            tp,
            ap,
            ref_objects: Timeline::new(ap.buffer_messages),
            ref_ego: Timeline::new(ap.buffer_messages),
            est_ego: Timeline::new(ap.buffer_messages),
            tracks: Queue::new(),
            egos: Queue::new(),
            now: f64::NEG_INFINITY,
            held_jump: None,
            last_track_t: None,
            last_ego_t: None,
            transport: Default::default(),
            counters: Counters::default(),
            tracklife: TrackLife::new(tp.forget_after),
            tl_step: TrackLifeStep::default(),
            nees_pool: NeesPool::default(),
            solver: ShortestPath::default(),
            scratch: MatchScratch::default(),
            scratch2: MatchScratch::default(),
            xs: Vec::new(),
            ys: Vec::new(),
            wa: Vec::new(),
            wb: Vec::new(),
            ref_cache: std::collections::VecDeque::new(),
            ref_in_ego_frame: false,
            xp: Vec::new(),
            yp: Vec::new(),
            ids: Default::default(),
            clear: clearance::ClearState::new(cp),
            tgospa: None,
            tgospa_jobs: None,
            tgospa_runner: Box::new(InOrder),
        }
    }

    /// With `true`, each T-GOSPA window is kept as a [`TgospaJob`] for
    /// [`Engine::take_tgospa_jobs`] instead of being solved at once; the caller runs it
    /// and hands back its samples and outcome ([`Engine::count_tgospa`]).
    pub fn defer_tgospa(&mut self, on: bool) {
        self.tgospa_jobs = on.then(Vec::new);
    }

    /// What runs a T-GOSPA window's components when the engine solves the window itself
    /// (one after another by default; a driver that owns threads may hand in a pool). The
    /// values do not depend on it.
    pub fn set_tgospa_runner(&mut self, runner: Box<dyn Components>) {
        self.tgospa_runner = runner;
    }

    /// The T-GOSPA jobs kept since the last call, oldest first.
    pub fn take_tgospa_jobs(&mut self) -> Vec<TgospaJob> {
        self.tgospa_jobs.as_mut().map(std::mem::take).unwrap_or_default()
    }

    /// Counts the outcome of a T-GOSPA job the caller ran.
    pub fn count_tgospa(&mut self, outcome: JobOutcome) {
        TgospaJob::count(outcome, &mut self.counters.tgospa, &mut self.counters.tgospa_run);
    }

    /// T-GOSPA over sliding windows, or none (the default).
    pub fn set_tgospa(&mut self, p: Option<TgospaParams>) {
        self.tgospa = p.map(|p| tgospa::TgState::new(p, &self.tp));
    }

    /// Whether T-GOSPA is computed.
    pub fn has_tgospa(&self) -> bool {
        self.tgospa.is_some()
    }

    /// What has been counted so far.
    pub fn counters(&self) -> &Counters {
        &self.counters
    }

    /// Per-role transport state.
    pub fn transport(&self, role: Role) -> &Transport {
        &self.transport[role.index()]
    }

    /// Pooled NEES of the run so far.
    pub fn nees_pool(&self) -> &NeesPool {
        &self.nees_pool
    }

    /// The latest arrival time seen.
    pub fn now(&self) -> f64 {
        self.now
    }

    /// With `Some(budget)`, the costly part of each plan's path quality is not run but
    /// kept as a [`PlanJob`] with the position in the output buffer where its samples go,
    /// for [`Engine::take_plan_jobs`] and [`splice_plan_jobs`] (replay runs them beside the
    /// engine), as long as the kept jobs hold at most `budget` points (objects, plan and
    /// densified plan); a job beyond that, and every job with `None` (the default), runs at
    /// once. The samples are the same either way.
    pub fn defer_plan_jobs(&mut self, budget: Option<usize>) {
        self.clear.deferred = budget.map(plans::Deferred::new);
    }

    /// The plan jobs kept since the last call, positions counted in the output buffer the
    /// engine has been appending to since then.
    pub fn take_plan_jobs(&mut self) -> Vec<(usize, PlanJob)> {
        self.clear.deferred.as_mut().map(plans::Deferred::take).unwrap_or_default()
    }

    /// Steps waiting for their reference.
    pub fn pending(&self) -> usize {
        self.tracks.len() + self.egos.len()
    }

    /// Feeds one input.
    pub fn push(&mut self, input: Input, out: &mut Vec<Sample>) {
        match input {
            Input::Rejected { role, reason } => {
                self.counters.rejected += 1;
                *self.counters.rejected_by_reason.entry(reason).or_insert(0) += 1;
                if let Some(r) = role {
                    self.transport[r.index()].rejected += 1;
                }
            }
            Input::Dropped { role } => self.transport[role.index()].dropped += 1,
            Input::CutShort { role } => {
                self.counters.cut_short += 1;
                self.transport[role.index()].dropped += 1;
            }
            Input::Message { role, recv, msg } => {
                if self.admit(role, msg.stamp(), recv) {
                    self.message(role, recv, msg.into(), out)
                }
            }
            Input::Prepared { role, recv, msg } => {
                if self.admit(role, msg.stamp(), recv) {
                    self.message(role, recv, msg, out)
                }
            }
        }
    }

    /// The time rules a single message cannot be judged by alone: a stamp more than
    /// `limits.max_stamp_lead_s` ahead of its own `recv`, and a message time (`recv`, or
    /// the stamp without one) that far ahead of the arrival clock. A real jump of the
    /// clock is confirmed by the next message that agrees with it (within the same lead)
    /// and costs that one message; a lone outlier (one record stamped 1e9 in a run at
    /// 100 s) is rejected and never moves the clock that every wait is measured on.
    /// Rejected messages are counted under `implausible_stamp` / `implausible_recv`.
    fn admit(&mut self, role: Role, stamp: f64, recv: Option<f64>) -> bool {
        if is_static_map(role, recv) {
            return true;
        }
        let lead = self.ap.max_stamp_lead;
        let reason = if recv.is_some_and(|r| stamp - r > lead) {
            Some("implausible_stamp")
        } else {
            let t = recv.unwrap_or(stamp);
            let why = if recv.is_some() { "implausible_recv" } else { "implausible_stamp" };
            if self.now.is_finite() && t > self.now + lead {
                match self.held_jump {
                    Some(j) if (t - j).abs() <= lead => {
                        self.held_jump = None;
                        None
                    }
                    _ => {
                        self.held_jump = Some(t);
                        Some(why)
                    }
                }
            } else {
                // A message in line with the clock: a held jump was a lone outlier.
                self.held_jump = None;
                None
            }
        };
        match reason {
            None => true,
            Some(reason) => {
                self.push(Input::Rejected { role: Some(role), reason }, &mut Vec::new());
                false
            }
        }
    }

    fn message(&mut self, role: Role, recv: Option<f64>, msg: Prepared, out: &mut Vec<Sample>) {
        let stamp = msg.stamp();
        let arrival = recv.unwrap_or(stamp);
        // A site map without an arrival time (`clearance.map_file`, stamped 0 as a rule)
        // is static: it moves neither the arrival clock nor the run's span of stamps.
        let static_map = is_static_map(role, recv);
        if !static_map {
            self.advance(arrival, out);
        }
        let c = &mut self.counters;
        c.accepted += 1;
        c.object_states += msg.object_count() as u64;
        if !static_map {
            c.first_stamp = Some(c.first_stamp.map_or(stamp, |s| s.min(stamp)));
            c.last_stamp = Some(c.last_stamp.map_or(stamp, |s| s.max(stamp)));
        }
        let ts = self.transport[role.index()].accept(stamp, recv);
        if let Some(v) = ts.latency {
            out.push(Sample { t: stamp, metric: Metric::Latency, role: Some(role), value: v });
        }
        if let Some(v) = ts.interarrival {
            out.push(Sample { t: stamp, metric: Metric::Interarrival, role: Some(role), value: v });
        }
        let deadline = arrival + self.ap.max_wait;
        match (role, msg) {
            (Role::ReferenceObjects, Prepared::Objects(set)) => {
                self.ref_in_ego_frame |= set.ego_frame;
                self.ref_objects.insert(stamp, set)
            }
            (Role::EstimateObjects, Prepared::Objects(set)) => {
                self.clear.est_sets.insert(stamp, Arc::clone(&set));
                let early =
                    self.tracks.push(Pending { t: stamp, deadline, item: set }, self.ap.pending_steps);
                if let Some(p) = early {
                    self.counters.pending_overflow += 1;
                    self.eval_tracking(p.t, &p.item, out);
                }
            }
            (Role::ReferenceEgo, Prepared::Pose(p)) => {
                self.ref_ego.insert(stamp, p.clone());
                let early =
                    self.clear.clears.push(Pending { t: stamp, deadline, item: p }, self.ap.pending_steps);
                if let Some(q) = early {
                    self.counters.pending_overflow += 1;
                    self.eval_clearance(q.t, &q.item, false, out);
                }
            }
            (Role::PlanPath, Prepared::Path(p)) => {
                let step = self.on_plan(&p, out);
                let early = self
                    .clear
                    .plan_steps
                    .push(Pending { t: stamp, deadline, item: step }, self.ap.pending_steps);
                if let Some(q) = early {
                    self.counters.pending_overflow += 1;
                    self.eval_plan(q.t, q.item, out);
                }
            }
            (Role::ReferenceObstacles, Prepared::Obstacles(o)) => self.on_obstacles(&o),
            (Role::EstimateEgo, Prepared::Pose(p)) => {
                self.est_ego.insert(stamp, p.clone());
                let early = self.egos.push(Pending { t: stamp, deadline, item: p }, self.ap.pending_steps);
                if let Some(q) = early {
                    self.counters.pending_overflow += 1;
                    self.eval_ego(q.t, &q.item, false, out);
                }
            }
            // A message of the wrong kind for its role cannot be decoded, so cannot reach here.
            _ => {}
        }
        self.drain(false, out);
    }

    /// The clock reached `now`: steps whose wait is over are resolved.
    pub fn advance(&mut self, now: f64, out: &mut Vec<Sample>) {
        if now > self.now {
            self.now = now;
        }
        self.drain(false, out);
    }

    /// The run is stopping and has no time left: every waiting step is counted as skipped
    /// (`cut_short`) instead of evaluated, so [`Engine::finish`] has nothing to wait for.
    pub fn cut_short(&mut self) {
        for _ in 0..self.tracks.clear() {
            self.counters.tracking.skip("cut_short");
        }
        for _ in 0..self.egos.clear() {
            self.counters.ego.skip("cut_short");
        }
        for _ in 0..self.clear.clears.clear() {
            self.counters.clearance.skip("cut_short");
        }
        for _ in 0..self.clear.plan_steps.clear() {
            self.counters.plans.skip("cut_short");
        }
    }

    /// End of input: every waiting step is resolved as if its wait ran out.
    pub fn finish(&mut self, out: &mut Vec<Sample>) {
        self.drain(true, out);
        self.finish_clearance();
        self.tgospa_finish();
        let t = self.tracklife.last_t();
        for d in self.tracklife.finish() {
            out.push(Sample { t, metric: Metric::DeletionDelay, role: None, value: d });
        }
    }

    fn tracking_ready(&self, p: &Pending<Arc<PointSet>>) -> bool {
        let t = p.t;
        if !self.ref_objects.has_at_or_after(t) {
            return false;
        }
        if self.tp.region > 0.0 && !self.ref_ego.has_at_or_after(t) {
            return false;
        }
        if p.item.ego_frame && !self.frame_source().has_at_or_after(t) {
            return false;
        }
        true
    }

    fn frame_source(&self) -> &Timeline<Pose> {
        match self.tp.ego_source {
            EgoSource::Reference => &self.ref_ego,
            EgoSource::Estimate => &self.est_ego,
        }
    }

    fn drain(&mut self, all: bool, out: &mut Vec<Sample>) {
        // Each family's queue in stamp order: a step goes when it is due (see
        // `Queue::take_due`).
        let now = self.now;
        while let Some(p) = self.tracks.front() {
            let ready = self.tracking_ready(p);
            let Some(p) = self.tracks.take_due(now, all, ready) else { break };
            self.eval_tracking(p.t, &p.item, out);
        }
        while let Some(p) = self.egos.front() {
            let ready = self.ego_ready(p.t);
            let Some(p) = self.egos.take_due(now, all, ready) else { break };
            self.eval_ego(p.t, &p.item, ready, out);
        }
        while let Some(p) = self.clear.clears.front() {
            let ready = self.clearance_ready(p.t);
            let Some(p) = self.clear.clears.take_due(now, all, ready) else { break };
            self.eval_clearance(p.t, &p.item, ready, out);
        }
        while let Some(p) = self.clear.plan_steps.front() {
            let ready = self.plan_ready(p.t, &p.item);
            let Some(p) = self.clear.plan_steps.take_due(now, all, ready) else { break };
            self.eval_plan(p.t, p.item, out);
        }
        self.prune();
    }

    fn prune(&mut self) {
        let mut low = f64::INFINITY;
        let fronts = [
            self.tracks.front().map(|p| p.t),
            self.egos.front().map(|p| p.t),
            self.clear.clears.front().map(|p| p.t),
            self.clear.plan_steps.front().map(|p| p.t),
        ];
        for t in fronts
            .into_iter()
            .flatten()
            .chain(self.last_track_t)
            .chain(self.last_ego_t)
            .chain(self.clear.last_clear_t)
            .chain(self.clear.last_plan_t)
        {
            low = low.min(t);
        }
        if low.is_finite() {
            let h = low - self.ap.retain;
            self.ref_objects.prune(h);
            self.ref_ego.prune(h - self.ap.tolerance);
            self.est_ego.prune(h - self.ap.tolerance);
            self.clear.est_sets.prune(h);
        }
    }

    /// Pose of the frame source at `t`, by the alignment rule.
    fn frame_pose(&self, t: f64) -> Result<Pose, &'static str> {
        align::resolve(self.frame_source(), t, self.ap.tolerance)
            .map(|r| align::pose_at(r, t).0)
            .map_err(|m| miss_reason(m, "frame"))
    }

    /// The reference objects at `t` into `self.xs` (the tracking step's working set).
    fn reference_at(&mut self, t: f64) -> Result<How, &'static str> {
        let (pts, how) = self.reference_shared(t)?;
        self.xs.clear();
        self.xs.extend_from_slice(&pts);
        Ok(how)
    }

    /// The one way every family reads the reference objects at a stamp: resolved once and
    /// shared by the families that read the same stamp (tracking, clearance, the budget,
    /// plans), for as long as nothing it was resolved from has changed.
    pub(super) fn reference_shared(&mut self, t: f64) -> Result<(Arc<Vec<Point>>, How), &'static str> {
        // The frame poses matter only once a reference set in the ego frame has been heard.
        let frames =
            if self.ref_in_ego_frame { (self.ref_ego.version(), self.est_ego.version()) } else { (0, 0) };
        let key = (t.to_bits(), self.ref_objects.version(), frames.0, frames.1);
        if let Some((_, pts, how)) = self.ref_cache.iter().find(|(k, _, _)| *k == key) {
            return Ok((Arc::clone(pts), *how));
        }
        let (mut wa, mut wb) = (std::mem::take(&mut self.wa), std::mem::take(&mut self.wb));
        let mut pts = Vec::new();
        let res = self.reference_into(t, &mut wa, &mut wb, &mut pts);
        (self.wa, self.wb) = (wa, wb);
        let how = res?;
        let pts = Arc::new(pts);
        if self.ref_cache.len() >= REF_CACHE {
            self.ref_cache.pop_front();
        }
        self.ref_cache.push_back((key, Arc::clone(&pts), how));
        Ok((pts, how))
    }

    /// The reference objects at `t` by the alignment rule (exact, interpolated per id, or
    /// the fallback), appended to `out`; `wa` and `wb` are scratch for ego-frame sets.
    /// Nothing is appended when it fails.
    fn reference_into(
        &self,
        t: f64,
        wa: &mut Vec<Point>,
        wb: &mut Vec<Point>,
        out: &mut Vec<Point>,
    ) -> Result<How, &'static str> {
        match align::resolve(&self.ref_objects, t, self.ap.tolerance) {
            Err(m) => Err(miss_reason(m, "objects")),
            Ok(Resolved::One(set, how)) => self.ref_points(set, wa).map(|p| {
                out.extend_from_slice(p);
                how
            }),
            Ok(Resolved::Two(a, b)) => self.ref_points(&a.1, wa).and_then(|pa| {
                let pb = self.ref_points(&b.1, wb)?;
                out.reserve(pa.len());
                align::interpolate_points(pa, a.0, pb, b.0, &b.1.by_id, t, out);
                Ok(How::Interpolated)
            }),
        }
    }

    /// A reference set's world-frame points: cached at arrival for world-frame sets, moved
    /// by the frame pose at the set's stamp into `scratch` for ego-frame sets.
    fn ref_points<'a>(
        &self,
        set: &'a PointSet,
        scratch: &'a mut Vec<Point>,
    ) -> Result<&'a [Point], &'static str> {
        if !set.ego_frame {
            return Ok(&set.points);
        }
        let pose = self.frame_pose(set.stamp)?;
        scratch.clear();
        scratch.extend(set.points.iter().map(|p| {
            let mut q = *p;
            align::to_world(&mut q, &pose);
            q
        }));
        Ok(scratch)
    }

    /// Collisions so far (the first [`clearance::KEEP_COLLISIONS`]) and how many more.
    pub fn collisions(&self) -> (&[Collision], u64) {
        (&self.clear.collisions, self.clear.collisions_dropped)
    }
}
