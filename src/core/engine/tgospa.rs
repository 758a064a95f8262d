//! T-GOSPA over sliding windows: each tracking step's reference and estimated objects are
//! kept for `tgospa.window`; every `tgospa.every` of stamps a [`TgospaJob`] solves the
//! window ending at the step (its trajectories are the ids seen in it). The job is a pure
//! function of what it holds, so it gives the same samples on any thread: replay runs it
//! beside the engine, like a plan's path quality. Pure.

use std::collections::VecDeque;

use super::{Engine, Sample, StepCounts};
use crate::core::align::Point;
use crate::core::{TgospaParams, TrackingParams};
use crate::metrics::tgospa::{self, Costs, Trajectory};
use crate::metrics::Metric;

/// One tracking step as the window keeps it.
#[derive(Debug, Clone)]
struct Step {
    t: f64,
    refs: Vec<(u64, [f64; 2])>,
    ests: Vec<(u64, [f64; 2])>,
}

/// The window and its schedule.
#[derive(Debug)]
pub(super) struct TgState {
    p: TgospaParams,
    costs: Costs,
    steps: VecDeque<Step>,
    /// The stamp at or after which the next value is due.
    due: Option<f64>,
}

impl TgState {
    pub(super) fn new(p: TgospaParams, tp: &TrackingParams) -> TgState {
        TgState {
            p,
            costs: {
                let (missed, false_) = tp.state_costs();
                Costs {
                    order: tp.order,
                    missed,
                    false_,
                    switch: crate::metrics::pow_p(p.switch_cost, tp.order),
                }
            },
            steps: VecDeque::new(),
            due: None,
        }
    }
}

/// One window's solve: the trajectories cut to the window, and where the samples go.
#[derive(Debug, Clone)]
pub struct TgospaJob {
    t: f64,
    costs: Costs,
    max_variables: usize,
    xs: Vec<Trajectory>,
    ys: Vec<Trajectory>,
}

/// What a job's solve came to, for the step counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum JobOutcome {
    /// Solved: the samples were appended.
    Solved,
    /// Skipped, with the reason code.
    Skipped(&'static str),
}

impl TgospaJob {
    /// States the job holds.
    pub fn states(&self) -> usize {
        self.xs.iter().chain(&self.ys).map(|t| t.iter().flatten().count()).sum()
    }

    /// Appends the window's samples to `out` (none when skipped).
    pub fn run(&self, out: &mut Vec<Sample>) -> JobOutcome {
        match tgospa::tgospa(&self.xs, &self.ys, &self.costs, self.max_variables) {
            Ok(g) => {
                let t = self.t;
                let mut push = |metric, value| out.push(Sample { t, metric, role: None, value });
                push(Metric::Tgospa, g.total);
                push(Metric::TgospaLocalization, g.localization);
                push(Metric::TgospaMissed, g.missed);
                push(Metric::TgospaFalse, g.false_);
                push(Metric::TgospaSwitch, g.switch);
                push(Metric::TgospaSwitches, g.switches);
                JobOutcome::Solved
            }
            Err(e) => JobOutcome::Skipped(e.code()),
        }
    }

    /// Counts an outcome into the step counts.
    pub fn count(outcome: JobOutcome, counts: &mut StepCounts) {
        match outcome {
            JobOutcome::Solved => counts.evaluated += 1,
            JobOutcome::Skipped(reason) => counts.skip(reason),
        }
    }
}

/// The trajectories of one side: each id seen in the window, in id order.
fn trajectories<'a>(steps: impl Iterator<Item = &'a [(u64, [f64; 2])]> + Clone, n: usize) -> Vec<Trajectory> {
    let mut ids: Vec<u64> = steps.clone().flat_map(|s| s.iter().map(|o| o.0)).collect();
    ids.sort_unstable();
    ids.dedup();
    let mut out = vec![vec![None; n]; ids.len()];
    for (k, s) in steps.enumerate() {
        for &(id, xy) in s {
            if let Ok(i) = ids.binary_search(&id) {
                out[i][k] = Some(xy);
            }
        }
    }
    out
}

impl Engine {
    /// Keeps the tracking step just scored (its objects as scored, after the region
    /// filter) and, when a value is due, makes the window's job.
    pub(super) fn tgospa_step(&mut self, t: f64) -> Option<TgospaJob> {
        let tg = self.tgospa.as_mut()?;
        let keep = |ps: &[Point]| ps.iter().map(|o| (o.id, [o.x, o.y])).collect::<Vec<_>>();
        tg.steps.push_back(Step { t, refs: keep(&self.xs), ests: keep(&self.ys) });
        while tg.steps.front().is_some_and(|s| s.t <= t - tg.p.window) {
            tg.steps.pop_front();
        }
        while tg.steps.len() > tg.p.max_steps {
            tg.steps.pop_front();
            self.counters.tgospa_trimmed += 1;
        }
        let due = *tg.due.get_or_insert(t + tg.p.every);
        if t < due {
            return None;
        }
        // The next value is due one period on, past this step.
        let periods = ((t - due) / tg.p.every).floor() + 1.0;
        let next = due + periods * tg.p.every;
        // (At stamps so large that a period is below their resolution, the next step.)
        tg.due = Some(if next > t { next } else { t + tg.p.every });
        let n = tg.steps.len();
        let refs = tg.steps.iter().map(|s| &s.refs[..]);
        let ests = tg.steps.iter().map(|s| &s.ests[..]);
        Some(TgospaJob {
            t,
            costs: tg.costs,
            max_variables: tg.p.max_variables,
            xs: trajectories(refs, n),
            ys: trajectories(ests, n),
        })
    }
}
