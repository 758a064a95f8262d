//! T-GOSPA over sliding windows: each tracking step's reference and estimated objects are
//! kept for `tgospa.window`; every `tgospa.every` of stamps a [`TgospaJob`] solves the
//! window ending at the step (its trajectories are the ids seen in it). The job is a pure
//! function of what it holds, so it gives the same samples on any thread: replay runs it
//! beside the engine, like a plan's path quality. Pure.

use std::collections::VecDeque;
use std::sync::Arc;

use serde::{Deserialize, Serialize};

use super::{Engine, Sample, StepCounts};
use crate::core::align::Point;
use crate::core::{TgospaParams, TrackingParams};
use crate::metrics::tgospa::{self, Costs, Trajectory};
use crate::metrics::Metric;

/// Object states a window (and the run total's block) holds at most; beyond, the oldest
/// steps leave first (counted as trimmed). About 5 MB: 200 000 states are 10 s of 400
/// objects at 50 Hz, far past any stack's object list, and bound a hostile one.
const MAX_STATES: usize = 200_000;

/// Trajectory cells (trajectories times steps) a job lays out at most; a window with more
/// (ids that change at every step, say) is skipped as too large before anything is built.
const MAX_CELLS: usize = 2_000_000;

/// One tracking step as the window keeps it.
#[derive(Debug)]
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
    steps: VecDeque<Arc<Step>>,
    /// States held in `steps`.
    held: usize,
    /// States held in `block`.
    block_held: usize,
    /// The stamp at or after which the next value is due.
    due: Option<f64>,
    /// The run total's current block: the steps since `block_start`, up to one window.
    block: Vec<Arc<Step>>,
    block_start: Option<f64>,
}

/// The run total of T-GOSPA over consecutive blocks of one window each (README: sliced
/// run totals, with the bound between their sum and the whole run's value).
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct TgospaRun {
    /// Blocks solved.
    pub blocks: u64,
    /// Blocks skipped (too large, or the solver failed).
    pub skipped: u64,
    /// The sum of the blocks' T-GOSPA^p (m^p).
    pub total_p: f64,
    /// Its localization part (m^p).
    pub localization: f64,
    /// Its missed part (m^p).
    pub missed: f64,
    /// Its false part (m^p).
    pub false_: f64,
    /// Its switch part (m^p).
    pub switch: f64,
    /// Switches (a half switch counts 1/2).
    pub switches: f64,
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
            held: 0,
            block_held: 0,
            due: None,
            block: Vec::new(),
            block_start: None,
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
    /// A block of the run total (adds into it, emits no samples).
    block: bool,
    /// Cells the trajectories would need, when more than [`MAX_CELLS`] (nothing built).
    oversized: Option<usize>,
}

/// What a job's solve came to, for the step counts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum JobOutcome {
    /// Solved: the samples were appended.
    Solved,
    /// Skipped, with the reason code.
    Skipped(&'static str),
    /// A block of the run total, solved.
    Block(tgospa::TGospa),
    /// A block of the run total, skipped.
    BlockSkipped,
}

impl TgospaJob {
    /// Whether the job is a block of the run total.
    pub fn is_block(&self) -> bool {
        self.block
    }

    /// Appends the window's samples to `out` (none when skipped).
    pub fn run(&self, out: &mut Vec<Sample>) -> JobOutcome {
        self.run_on(&tgospa::InOrder, out)
    }

    /// [`TgospaJob::run`] with the window's components run by `runner`.
    pub fn run_on(&self, runner: &dyn tgospa::Components, out: &mut Vec<Sample>) -> JobOutcome {
        let solved = match self.oversized {
            Some(needed) => Err(tgospa::Skip::TooLarge { needed, limit: MAX_CELLS }),
            None => tgospa::tgospa_on(runner, &self.xs, &self.ys, &self.costs, self.max_variables),
        };
        if self.block {
            return solved.map_or(JobOutcome::BlockSkipped, JobOutcome::Block);
        }
        match solved {
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

    /// Counts an outcome into the step counts or the run total.
    pub(super) fn count(outcome: JobOutcome, counts: &mut StepCounts, run: &mut TgospaRun) {
        match outcome {
            JobOutcome::Solved => counts.evaluated += 1,
            JobOutcome::Skipped(reason) => counts.skip(reason),
            JobOutcome::Block(g) => {
                run.blocks += 1;
                run.total_p += g.localization + g.missed + g.false_ + g.switch;
                run.localization += g.localization;
                run.missed += g.missed;
                run.false_ += g.false_;
                run.switch += g.switch;
                run.switches += g.switches;
            }
            JobOutcome::BlockSkipped => run.skipped += 1,
        }
    }
}

/// The ids seen on one side of the window, in order: one trajectory each.
fn ids_of<'a>(steps: impl Iterator<Item = &'a [(u64, [f64; 2])]>) -> Vec<u64> {
    let mut ids: Vec<u64> = steps.flat_map(|s| s.iter().map(|o| o.0)).collect();
    ids.sort_unstable();
    ids.dedup();
    ids
}

/// The trajectories of one side, one per id of `ids`, over the window's `n` steps.
fn trajectories<'a>(
    steps: impl Iterator<Item = &'a [(u64, [f64; 2])]>,
    ids: &[u64],
    n: usize,
) -> Vec<Trajectory> {
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

fn job_of<'a>(
    steps: impl Iterator<Item = &'a Arc<Step>> + Clone,
    n: usize,
    t: f64,
    tg: &TgState,
    block: bool,
) -> TgospaJob {
    let refs = steps.clone().map(|s| &s.refs[..]);
    let ests = steps.map(|s| &s.ests[..]);
    let (ref_ids, est_ids) = (ids_of(refs.clone()), ids_of(ests.clone()));
    let cells = (ref_ids.len() + est_ids.len()).saturating_mul(n);
    let oversized = (cells > MAX_CELLS).then_some(cells);
    let (xs, ys) = if oversized.is_some() {
        (Vec::new(), Vec::new())
    } else {
        (trajectories(refs, &ref_ids, n), trajectories(ests, &est_ids, n))
    };
    TgospaJob { t, costs: tg.costs, max_variables: tg.p.max_variables, xs, ys, block, oversized }
}

impl Engine {
    /// The run total's last block, at the end of the run.
    pub(super) fn tgospa_finish(&mut self) {
        let Some(tg) = self.tgospa.as_mut() else { return };
        if tg.block.is_empty() {
            return;
        }
        let t = tg.block.last().map_or(0.0, |s| s.t);
        let job = job_of(tg.block.iter(), tg.block.len(), t, tg, true);
        tg.block.clear();
        tg.block_held = 0;
        self.run_or_keep(job, &mut Vec::new());
    }

    /// Runs a job at once, or keeps it for the caller.
    pub(super) fn run_or_keep(&mut self, job: TgospaJob, out: &mut Vec<Sample>) {
        match self.tgospa_jobs.as_mut() {
            Some(kept) => kept.push(job),
            None => {
                let outcome = job.run_on(&*self.tgospa_runner, out);
                self.count_tgospa(outcome);
            }
        }
    }

    /// Keeps the tracking step just scored (its objects as scored, after the region
    /// filter) and, when a value is due, makes the window's job.
    pub(super) fn tgospa_step(&mut self, t: f64) -> Vec<TgospaJob> {
        let Some(tg) = self.tgospa.as_mut() else { return Vec::new() };
        let keep = |ps: &[Point]| ps.iter().map(|o| (o.id, [o.x, o.y])).collect::<Vec<_>>();
        let step = Arc::new(Step { t, refs: keep(&self.xs), ests: keep(&self.ys) });
        // The run total: a block closes at the first step one window after it opened.
        let start = *tg.block_start.get_or_insert(t);
        let mut block_job = None;
        let size = step.refs.len() + step.ests.len();
        let full = tg.block.len() >= tg.p.max_steps || tg.block_held + size > MAX_STATES;
        if !tg.block.is_empty() && (t >= start + tg.p.window || full) {
            let last = tg.block.last().map_or(t, |s| s.t);
            block_job = Some(job_of(tg.block.iter(), tg.block.len(), last, tg, true));
            tg.block.clear();
            tg.block_held = 0;
            tg.block_start = Some(t);
        }
        tg.block_held += size;
        tg.block.push(Arc::clone(&step));
        tg.held += size;
        tg.steps.push_back(step);
        while let Some(old) = tg.steps.pop_front() {
            if old.t > t - tg.p.window && tg.steps.len() < tg.p.max_steps && tg.held <= MAX_STATES {
                tg.steps.push_front(old);
                break;
            }
            tg.held -= old.refs.len() + old.ests.len();
            if old.t > t - tg.p.window {
                self.counters.tgospa_trimmed += 1;
            }
        }
        let due = *tg.due.get_or_insert(t + tg.p.every);
        if t < due {
            return block_job.into_iter().collect();
        }
        // The next value is due one period on, past this step.
        let periods = ((t - due) / tg.p.every).floor() + 1.0;
        let next = due + periods * tg.p.every;
        // (At stamps so large that a period is below their resolution, the next step.)
        tg.due = Some(if next > t { next } else { t + tg.p.every });
        let window = job_of(tg.steps.iter(), tg.steps.len(), t, tg, false);
        block_job.into_iter().chain(Some(window)).collect()
    }
}
