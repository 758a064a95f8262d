//! The monitor: the engine plus everything that consumes its samples — run statistics,
//! sliding windows and rules. Pure; live and replay drive it through the same calls.

use crate::core::{AlignParams, ClearanceParams, Engine, Input, Sample, TrackingParams};
use crate::rules::{AlertEvent, Rule, RuleSet, Verdict};
use crate::stats::{RunStats, StatsParams};
use crate::windows::WindowSet;

/// Alert events kept for the report; later ones are counted in `alerts_dropped`.
pub const KEEP_ALERTS: usize = 10_000;

/// What a monitor is built from (the config builds it: [`crate::config::Config::monitor`]).
#[derive(Debug, Clone)]
pub struct MonitorParams {
    /// Tracking metrics.
    pub tracking: TrackingParams,
    /// Time alignment.
    pub align: AlignParams,
    /// Clearance and path metrics.
    pub clearance: ClearanceParams,
    /// Sliding window lengths (s).
    pub windows: Vec<f64>,
    /// Sub-buckets per window.
    pub window_buckets: usize,
    /// The rules.
    pub rules: Vec<Rule>,
    /// Run statistics' percentile settings.
    pub stats: StatsParams,
    /// T-GOSPA over sliding windows, if enabled.
    pub tgospa: Option<crate::core::TgospaParams>,
}

/// Engine, statistics, windows and rules.
#[derive(Debug)]
pub struct Monitor {
    /// The evaluation engine.
    pub engine: Engine,
    /// Run statistics.
    pub stats: RunStats,
    /// Sliding windows.
    pub windows: WindowSet,
    /// Rules and their state.
    pub rules: RuleSet,
    alerts: Vec<AlertEvent>,
    /// Alert events beyond [`KEEP_ALERTS`].
    pub alerts_dropped: u64,
}

impl Monitor {
    /// A monitor built from its parameters.
    pub fn new(p: &MonitorParams) -> Monitor {
        let mut engine = Engine::new(p.tracking, p.align, p.clearance);
        engine.set_tgospa(p.tgospa);
        Monitor {
            engine,
            stats: RunStats::new(&p.stats),
            windows: WindowSet::new(&p.windows, p.window_buckets),
            rules: RuleSet::new(p.rules.clone()),
            alerts: Vec::new(),
            alerts_dropped: 0,
        }
    }

    /// Feeds one input; new samples and alert events are appended to the buffers.
    pub fn push(&mut self, input: Input, samples: &mut Vec<Sample>, events: &mut Vec<AlertEvent>) {
        let start = samples.len();
        self.engine.push(input, samples);
        self.consume(start, samples, events);
    }

    /// The clock moved to `now` (live timer): waiting steps may resolve, windows age.
    pub fn advance(&mut self, now: f64, samples: &mut Vec<Sample>, events: &mut Vec<AlertEvent>) {
        let start = samples.len();
        self.engine.advance(now, samples);
        self.consume(start, samples, events);
    }

    /// Feeds samples made outside the engine (live staleness) to statistics, windows and rules.
    pub fn inject(&mut self, samples: &mut Vec<Sample>, extra: &[Sample], events: &mut Vec<AlertEvent>) {
        let start = samples.len();
        samples.extend_from_slice(extra);
        self.consume(start, samples, events);
    }

    /// End of input.
    pub fn finish(&mut self, samples: &mut Vec<Sample>, events: &mut Vec<AlertEvent>) {
        let start = samples.len();
        self.engine.finish(samples);
        self.consume(start, samples, events);
    }

    fn consume(&mut self, start: usize, samples: &mut Vec<Sample>, events: &mut Vec<AlertEvent>) {
        self.stats.non_finite += drop_non_finite(samples, start);
        let Monitor { stats, windows, rules, alerts, alerts_dropped, .. } = self;
        consume(stats, windows, rules, alerts, alerts_dropped, &samples[start..], events);
    }

    /// Splits the engine from what consumes its samples, so that the two can run on two
    /// threads (replay); [`Monitor::join`] puts them back. Fed the same samples in the
    /// same order, the parts reach exactly the state the whole would.
    pub fn split(self) -> (Engine, Sink) {
        let Monitor { engine, stats, windows, rules, alerts, alerts_dropped } = self;
        (engine, Sink { stats, windows, rules, alerts, alerts_dropped })
    }

    /// The inverse of [`Monitor::split`].
    pub fn join(engine: Engine, sink: Sink) -> Monitor {
        let Sink { stats, windows, rules, alerts, alerts_dropped } = sink;
        Monitor { engine, stats, windows, rules, alerts, alerts_dropped }
    }

    /// Alert events so far (the first [`KEEP_ALERTS`]).
    pub fn alerts(&self) -> &[AlertEvent] {
        &self.alerts
    }

    /// Every rule's verdict now.
    pub fn verdicts(&self) -> Vec<Verdict> {
        self.rules.verdicts(&self.stats)
    }
}

/// What consumes the engine's samples: run statistics, windows, rules and the alert list.
#[derive(Debug)]
pub struct Sink {
    stats: RunStats,
    windows: WindowSet,
    rules: RuleSet,
    alerts: Vec<AlertEvent>,
    alerts_dropped: u64,
}

impl Sink {
    /// Takes a batch of samples in order; new alert events are appended to `events`. A
    /// sample whose value is not finite is removed from the batch first (and counted), so
    /// what the caller writes after this call is what the statistics saw.
    pub fn consume(&mut self, samples: &mut Vec<Sample>, events: &mut Vec<AlertEvent>) {
        self.stats.non_finite += drop_non_finite(samples, 0);
        let Sink { stats, windows, rules, alerts, alerts_dropped } = self;
        consume(stats, windows, rules, alerts, alerts_dropped, samples, events);
    }
}

/// Removes the samples from `from` on whose value is NaN or infinite, keeping the order of
/// the rest; returns how many went. The last line of defence: input bounds (`[limits]`)
/// keep every metric finite, and this keeps a value that still is not from reaching a
/// statistic, a window, a rule, the series or a gauge.
pub fn drop_non_finite(samples: &mut Vec<Sample>, from: usize) -> u64 {
    if samples[from..].iter().all(|s| s.value.is_finite()) {
        return 0;
    }
    let before = samples.len();
    let mut k = from;
    for i in from..samples.len() {
        if samples[i].value.is_finite() {
            samples[k] = samples[i];
            k += 1;
        }
    }
    samples.truncate(k);
    (before - k) as u64
}

fn consume(
    stats: &mut RunStats,
    windows: &mut WindowSet,
    rules: &mut RuleSet,
    alerts: &mut Vec<AlertEvent>,
    alerts_dropped: &mut u64,
    new: &[Sample],
    events: &mut Vec<AlertEvent>,
) {
    stats.add(new);
    let ev_start = events.len();
    for s in new {
        windows.add(s.metric, s.role, s.t, s.value);
        rules.observe(s.t, s.metric, s.role, windows, events);
    }
    for e in &events[ev_start..] {
        if alerts.len() < KEEP_ALERTS {
            alerts.push(e.clone());
        } else {
            *alerts_dropped += 1;
        }
    }
}
