//! The monitor: the engine plus everything that consumes its samples — run statistics,
//! sliding windows and rules. Pure; live and replay drive it through the same calls.

use crate::config::Config;
use crate::core::{Engine, Input, Sample};
use crate::report::RunStats;
use crate::rules::{AlertEvent, RuleSet, Verdict};
use crate::windows::WindowSet;

/// Alert events kept for the report; later ones are counted in `alerts_dropped`.
pub const KEEP_ALERTS: usize = 10_000;

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
    /// A monitor for a config.
    pub fn new(cfg: &Config) -> Monitor {
        Monitor {
            engine: Engine::new(cfg.tracking, cfg.align, cfg.clearance),
            stats: RunStats::new(cfg),
            windows: WindowSet::new(&cfg.windows, cfg.window_buckets),
            rules: RuleSet::new(cfg.rules.clone()),
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

    fn consume(&mut self, start: usize, samples: &[Sample], events: &mut Vec<AlertEvent>) {
        let new = &samples[start..];
        self.stats.add(new);
        let ev_start = events.len();
        for s in new {
            self.windows.add(s.metric, s.role, s.t, s.value);
            self.rules.observe(s.t, s.metric, s.role, &self.windows, events);
        }
        for e in &events[ev_start..] {
            if self.alerts.len() < KEEP_ALERTS {
                self.alerts.push(e.clone());
            } else {
                self.alerts_dropped += 1;
            }
        }
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
