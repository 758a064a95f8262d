//! The dashboard's model: what the browser page shows, kept from the monitor's samples,
//! alert events and windows. Pure: no clock, no I/O. The live watcher feeds it and asks it
//! for a [`Snapshot`] (served as JSON at `/api/snapshot` and streamed as server-sent events).
//!
//! - **Tiles**: the latest value of a few key metrics, with its event time and how long ago
//!   (on the monitor's clock) it arrived; `no_data` before the first value, `stale` when it
//!   arrived more than `stale_after` ago.
//! - **Charts**: a ring of rows taken every `step` of the monitor's clock over `history`
//!   (default 2 minutes at 0.5 s: 240 rows). Each row reads one statistic of the shortest
//!   sliding window per line (the mean, the minimum for clearance, the p99 for latency), or
//!   `null` while that window is empty or its key has had no value for `stale_after`, so a
//!   gap shows as a gap and never as a zero or a frozen value.
//! - **Alerts**: the raised ones with the event time they were raised at (as in the alert
//!   journal) and how long they have been active on the monitor's clock; the latest events.
//! - **Topics**: per role, the message rate over the last 5 s of the monitor's clock,
//!   latency p50/p99 of the sliding window nearest 10 s, staleness, dropped, rejected and
//!   stamp regressions, and a state (`no_data`, `stale`, `ok`; the site map, published once
//!   or rarely, is never stale).
//! - **Verdicts**: every rule's verdict so far.
//!
//! Memory is bounded: the ring holds `history / step` rows, the event list
//! [`RECENT_EVENTS`], the active list one entry per rule and role.

use std::collections::VecDeque;

use serde::Serialize;

use crate::core::Sample;
use crate::metrics::Metric;
use crate::monitor::Monitor;
use crate::msg::Role;
use crate::rules::{AlertEvent, AlertKind, Severity, Verdict};
use crate::stats::Stat;

/// Alert events kept for the page.
pub const RECENT_EVENTS: usize = 20;

/// How the dashboard samples and streams.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DashboardParams {
    /// Snapshots streamed per second.
    pub rate_hz: f64,
    /// Chart history (s).
    pub history: f64,
    /// Chart row spacing (s).
    pub step: f64,
    /// A value or a role older than this is stale (s).
    pub stale_after: f64,
}

impl Default for DashboardParams {
    fn default() -> Self {
        DashboardParams { rate_hz: 5.0, history: 120.0, step: 0.5, stale_after: 2.0 }
    }
}

/// One line of a chart: which window statistic of which key it reads.
#[derive(Debug, Clone, Copy)]
struct Line {
    metric: Metric,
    role: Option<Role>,
    stat: Stat,
    label: &'static str,
}

/// A chart: a title, a unit and its lines.
#[derive(Debug, Clone)]
struct ChartDef {
    id: &'static str,
    title: String,
    unit: &'static str,
    lines: Vec<Line>,
}

fn line(metric: Metric, stat: Stat, label: &'static str) -> Line {
    Line { metric, role: None, stat, label }
}

/// The charts; `w` is the label of the window they read (the shortest configured).
fn charts(order: f64, w: &str) -> Vec<ChartDef> {
    // GOSPA's parts are terms of gospa^p: metres only for p = 1.
    let gospa_unit = if order == 1.0 { "m" } else { "m^p" };
    vec![
        ChartDef {
            id: "gospa",
            title: format!("Tracking error (GOSPA, {w} mean)"),
            unit: gospa_unit,
            lines: vec![
                line(Metric::Gospa, Stat::Mean, "gospa"),
                line(Metric::GospaLocalization, Stat::Mean, "localization"),
                line(Metric::GospaMissed, Stat::Mean, "missed"),
                line(Metric::GospaFalse, Stat::Mean, "false"),
            ],
        },
        ChartDef {
            id: "clearance",
            title: format!("Clearance ({w} minimum) and its loss ({w} mean)"),
            unit: "m",
            lines: vec![
                line(Metric::Clearance, Stat::Min, "clearance"),
                line(Metric::ClearanceLoss, Stat::Mean, "loss"),
                line(Metric::ClearanceLossLocalization, Stat::Mean, "loss: localization"),
                line(Metric::ClearanceLossPerception, Stat::Mean, "loss: perception"),
                line(Metric::ClearanceLossPathFollowing, Stat::Mean, "loss: path following"),
            ],
        },
        ChartDef {
            id: "ego",
            title: format!("Localization error ({w} mean)"),
            unit: "m",
            lines: vec![
                line(Metric::EgoPositionError, Stat::Mean, "position"),
                line(Metric::EgoLongitudinalError, Stat::Mean, "longitudinal"),
                line(Metric::EgoLateralError, Stat::Mean, "lateral"),
            ],
        },
        ChartDef {
            id: "latency",
            title: format!("Arrival latency ({w} p99, per role)"),
            unit: "s",
            lines: Role::ALL
                .iter()
                .map(|&r| Line { metric: Metric::Latency, role: Some(r), stat: Stat::P99, label: r.name() })
                .collect(),
        },
    ]
}

#[derive(Debug, Clone, Copy)]
struct Latest {
    t: f64,
    value: f64,
    seen_at: f64,
}

#[derive(Debug, Clone)]
struct Active {
    event: AlertEvent,
    seen_at: f64,
}

/// The dashboard's state.
#[derive(Debug, Clone)]
pub struct Dashboard {
    params: DashboardParams,
    charts: Vec<ChartDef>,
    /// Index of the window the charts read: the shortest sliding window.
    chart_window: usize,
    /// Rows of the ring: the monitor's clock and one value per line of every chart.
    rows: VecDeque<(f64, Vec<Option<f64>>)>,
    capacity: usize,
    next_row: Option<f64>,
    /// The tiles' metrics (the catalog's `tile` rows) and their latest values.
    tiles: Vec<Metric>,
    latest: Vec<Option<Latest>>,
    /// Per chart line (in chart order): when its key last had a value, on the monitor's clock.
    line_seen: Vec<Option<f64>>,
    active: Vec<Active>,
    /// Per metric: when it last had a value, on the monitor's clock.
    metric_seen: Vec<Option<f64>>,
    recent: VecDeque<AlertEvent>,
    /// Per role: (clock, messages) pairs for the rate, oldest first.
    counts: Vec<VecDeque<(f64, u64)>>,
    now: f64,
}

/// Span over which a role's message rate is measured (s).
const RATE_SPAN: f64 = 5.0;

impl Dashboard {
    /// An empty dashboard: `windows` the monitor's window lengths and `labels` their
    /// names (the charts read the shortest), `order` the GOSPA order (the parts' unit).
    pub fn new(params: DashboardParams, windows: &[f64], labels: &[String], order: f64) -> Dashboard {
        let capacity = ((params.history / params.step).ceil() as usize).clamp(1, 100_000);
        let chart_window = (0..windows.len()).min_by(|&a, &b| windows[a].total_cmp(&windows[b])).unwrap_or(0);
        let label = labels.get(chart_window).map_or("1s", String::as_str);
        let charts = charts(order, label);
        let lines = charts.iter().map(|c| c.lines.len()).sum();
        Dashboard {
            params,
            charts,
            chart_window,
            rows: VecDeque::with_capacity(capacity),
            capacity,
            next_row: None,
            tiles: crate::metrics::catalog::tiles().collect(),
            latest: vec![None; crate::metrics::catalog::tiles().count()],
            line_seen: vec![None; lines],
            active: Vec::new(),
            metric_seen: vec![None; Metric::ALL.len()],
            recent: VecDeque::with_capacity(RECENT_EVENTS),
            counts: vec![VecDeque::new(); Role::ALL.len()],
            now: f64::NEG_INFINITY,
        }
    }

    /// The parameters.
    pub fn params(&self) -> DashboardParams {
        self.params
    }

    /// Takes the samples and alert events the monitor made, at `now` on its clock.
    pub fn observe(&mut self, now: f64, samples: &[Sample], events: &[AlertEvent]) {
        // The monitor's clock as given: after a jump back the page follows it.
        self.now = now;
        for s in samples {
            self.metric_seen[s.metric as usize] = Some(now);
            for (k, l) in self.charts.iter().flat_map(|c| &c.lines).enumerate() {
                if l.metric == s.metric && l.role == s.role {
                    self.line_seen[k] = Some(now);
                }
            }
            if s.role.is_some() {
                continue;
            }
            if let Some(k) = self.tiles.iter().position(|m| *m == s.metric) {
                self.latest[k] = Some(Latest { t: s.t, value: s.value, seen_at: now });
            }
        }
        for e in events {
            let same = |a: &Active| a.event.rule == e.rule && a.event.role == e.role;
            self.active.retain(|a| !same(a));
            if e.kind == AlertKind::Raised {
                self.active.push(Active { event: e.clone(), seen_at: now });
            }
            if self.recent.len() == RECENT_EVENTS {
                self.recent.pop_front();
            }
            self.recent.push_back(e.clone());
        }
    }

    /// The clock moved to `now`: takes a chart row when one is due and counts messages
    /// for the rates.
    pub fn tick(&mut self, now: f64, monitor: &Monitor) {
        self.now = now;
        // Rows sit on the step's grid so that a late tick does not shift later rows; a clock
        // that jumps back more than a step starts the grid again rather than waiting.
        let step = self.params.step;
        let due = self.next_row.is_none_or(|t| now >= t || now < t - 2.0 * step);
        if !due {
            return;
        }
        self.next_row = Some(((now / step).floor() + 1.0) * step);
        // Windows move on event time, not on the monitor's clock, so a key that has gone
        // quiet still holds its last window: its line breaks once it is stale instead.
        let stale_after = self.params.stale_after;
        let mut values = Vec::new();
        for (l, seen) in self.charts.iter().flat_map(|c| &c.lines).zip(&self.line_seen) {
            let fresh = seen.is_some_and(|t| now - t <= stale_after);
            let v = monitor
                .windows
                .get(l.metric, l.role)
                .and_then(|ws| ws.get(self.chart_window))
                .and_then(|w| w.stat(l.stat))
                .filter(|v| fresh && v.is_finite());
            values.push(v);
        }
        if self.rows.len() == self.capacity {
            self.rows.pop_front();
        }
        self.rows.push_back((now, values));
        for r in Role::ALL {
            let q = &mut self.counts[r.index()];
            q.push_back((now, monitor.engine.transport(r).messages));
            while q.len() > 2 && q[1].0 <= now - RATE_SPAN {
                q.pop_front();
            }
        }
    }

    /// Leaves out the tiles of metrics the monitor will never emit (T-GOSPA when it is
    /// not enabled), so the page shows no tile that can only say "no data".
    pub fn keep_tiles(&mut self, keep: impl Fn(Metric) -> bool) {
        let kept: Vec<(Metric, Option<Latest>)> =
            self.tiles.iter().copied().zip(self.latest.iter().cloned()).filter(|(m, _)| keep(*m)).collect();
        (self.tiles, self.latest) = kept.into_iter().unzip();
    }

    /// What the page shows now.
    pub fn snapshot(&self, monitor: &Monitor) -> Snapshot {
        let now = self.now;
        let stale_after = self.params.stale_after;
        let tiles = self
            .tiles
            .iter()
            .zip(&self.latest)
            .map(|(&m, l)| {
                let e = crate::metrics::catalog::row(m);
                let (label, unit) = (e.label.unwrap_or(m.name()), e.unit);
                let (value, t, age_s) = match l {
                    Some(l) => (Some(l.value), Some(l.t), Some((now - l.seen_at).max(0.0))),
                    None => (None, None, None),
                };
                let state = match age_s {
                    None => "no_data",
                    Some(a) if a > stale_after => "stale",
                    Some(_) => "ok",
                };
                Tile { metric: m.name(), label, unit, value, t, age_s, state }
            })
            .collect();
        let mut k = 0;
        let charts = self
            .charts
            .iter()
            .map(|c| {
                let lines = c
                    .lines
                    .iter()
                    .map(|l| {
                        let values = self.rows.iter().map(|(_, v)| v[k]).collect();
                        k += 1;
                        ChartLine {
                            metric: l.metric.name(),
                            role: l.role.map(Role::name),
                            stat: l.stat.name(),
                            label: l.label,
                            values,
                        }
                    })
                    .collect();
                Chart { id: c.id, title: c.title.clone(), unit: c.unit, lines }
            })
            .collect();
        let active = self
            .active
            .iter()
            .map(|a| ActiveAlert {
                rule: a.event.rule.clone(),
                role: a.event.role.clone(),
                severity: a.event.severity,
                metric: a.event.metric.clone(),
                raised_t: a.event.t,
                active_s: (now - a.seen_at).max(0.0),
                stale: Metric::from_name(&a.event.metric)
                    .and_then(|m| self.metric_seen[m as usize])
                    .is_none_or(|seen| now - seen > stale_after),
                value: a.event.value,
                threshold: a.event.threshold,
            })
            .collect();
        let health_window = health_window(monitor.windows.lengths());
        let topics = Role::ALL
            .iter()
            .map(|&r| {
                let tr = monitor.engine.transport(r);
                let staleness_s = tr.staleness(now);
                let lat = |s| {
                    monitor
                        .windows
                        .get(Metric::Latency, Some(r))
                        .and_then(|ws| ws.get(health_window))
                        .and_then(|w| w.stat(s))
                };
                let q = &self.counts[r.index()];
                let rate_hz = match (q.front(), q.back()) {
                    (Some(a), Some(b)) if b.0 > a.0 => Some((b.1 - a.1) as f64 / (b.0 - a.0)),
                    _ => None,
                };
                let publishers = monitor
                    .windows
                    .get(Metric::Publishers, Some(r))
                    .and_then(|ws| ws.first())
                    .and_then(|w| w.stat(Stat::Last));
                let state = match staleness_s {
                    None => "no_data",
                    Some(s) if s > stale_after && r != Role::ReferenceObstacles => "stale",
                    _ if publishers.is_some_and(|n| n > 1.0) => "merged",
                    // A site map is published once or rarely: silence is its normal state.
                    Some(_) => "ok",
                };
                Topic {
                    role: r.name(),
                    state,
                    rate_hz,
                    latency_p50_s: lat(Stat::P50),
                    latency_p99_s: lat(Stat::P99),
                    staleness_s,
                    messages: tr.messages,
                    dropped: tr.dropped,
                    rejected: tr.rejected,
                    stamp_regressions: tr.stamp_regressions,
                    publishers,
                }
            })
            .collect::<Vec<Topic>>();
        // The page's header: `no_data` before any input, `stale` when every role heard
        // (the site map aside) has gone quiet, `merged` when a role has several
        // publishers, else `live`.
        let streams: Vec<&Topic> = topics
            .iter()
            .filter(|t| t.role != Role::ReferenceObstacles.name() && t.state != "no_data")
            .collect();
        let input = if streams.is_empty() {
            "no_data"
        } else if streams.iter().all(|t| t.state == "stale") {
            "stale"
        } else if streams.iter().any(|t| t.state == "merged") {
            "merged"
        } else {
            "live"
        };
        let c = monitor.engine.counters();
        Snapshot {
            version: env!("CARGO_PKG_VERSION"),
            now,
            rate_hz: self.params.rate_hz,
            history_s: self.params.history,
            step_s: self.params.step,
            stale_after_s: stale_after,
            latency_window: monitor.windows.lengths().get(health_window).copied(),
            row_times: self.rows.iter().map(|(t, _)| *t).collect(),
            tiles,
            charts,
            alerts_active: active,
            alerts_recent: self.recent.iter().rev().cloned().collect(),
            input,
            topics,
            verdicts: monitor.verdicts(),
            steps: Steps {
                tracking_evaluated: c.tracking.evaluated,
                tracking_skipped: c.tracking.skipped,
                ego_evaluated: c.ego.evaluated,
                ego_skipped: c.ego.skipped,
            },
            collisions: {
                let (cols, dropped) = monitor.engine.collisions();
                cols.len() as u64 + dropped
            },
        }
    }
}

/// Index of the sliding window nearest 10 s (the topic table's latency window).
fn health_window(lengths: &[f64]) -> usize {
    let mut best = 0;
    for (i, &l) in lengths.iter().enumerate() {
        if (l - 10.0).abs() < (lengths[best] - 10.0).abs() {
            best = i;
        }
    }
    best
}

/// What `/api/snapshot` returns (documented in the README's dashboard section).
#[derive(Debug, Clone, Serialize)]
pub struct Snapshot {
    /// Tool version.
    pub version: &'static str,
    /// The monitor's clock (s).
    pub now: f64,
    /// Snapshots streamed per second.
    pub rate_hz: f64,
    /// Chart history (s).
    pub history_s: f64,
    /// Chart row spacing (s).
    pub step_s: f64,
    /// Age beyond which a value or role is stale (s).
    pub stale_after_s: f64,
    /// Length of the window the topic latencies are read from (s).
    pub latency_window: Option<f64>,
    /// The monitor's clock at each chart row, oldest first.
    pub row_times: Vec<f64>,
    /// Latest values.
    pub tiles: Vec<Tile>,
    /// Charts, each line with one value (or null) per row.
    pub charts: Vec<Chart>,
    /// Rules raised now.
    pub alerts_active: Vec<ActiveAlert>,
    /// The latest alert events, newest first.
    pub alerts_recent: Vec<AlertEvent>,
    /// The state of the input as a whole: `live`, `stale`, `merged` or `no_data`.
    pub input: &'static str,
    /// Per-role transport health.
    pub topics: Vec<Topic>,
    /// Every rule's verdict so far.
    pub verdicts: Vec<Verdict>,
    /// Step counts.
    pub steps: Steps,
    /// Contacts so far.
    pub collisions: u64,
}

/// A tile.
#[derive(Debug, Clone, Serialize)]
pub struct Tile {
    /// Metric name.
    pub metric: &'static str,
    /// Display label.
    pub label: &'static str,
    /// Unit.
    pub unit: &'static str,
    /// Latest value.
    pub value: Option<f64>,
    /// Its event time.
    pub t: Option<f64>,
    /// Seconds since it arrived, on the monitor's clock.
    pub age_s: Option<f64>,
    /// `ok`, `stale` or `no_data`.
    pub state: &'static str,
}

/// A chart.
#[derive(Debug, Clone, Serialize)]
pub struct Chart {
    /// Identifier.
    pub id: &'static str,
    /// Title.
    pub title: String,
    /// Unit of the y axis.
    pub unit: &'static str,
    /// Lines.
    pub lines: Vec<ChartLine>,
}

/// One line of a chart.
#[derive(Debug, Clone, Serialize)]
pub struct ChartLine {
    /// Metric name.
    pub metric: &'static str,
    /// Role, for per-role metrics.
    pub role: Option<&'static str>,
    /// Window statistic.
    pub stat: &'static str,
    /// Legend label.
    pub label: &'static str,
    /// One value per row (`null`: the window was empty).
    pub values: Vec<Option<f64>>,
}

/// A raised rule.
#[derive(Debug, Clone, Serialize)]
pub struct ActiveAlert {
    /// Rule name.
    pub rule: String,
    /// Role, for per-role rules.
    pub role: Option<crate::msg::Name>,
    /// Severity.
    pub severity: Severity,
    /// Metric.
    pub metric: crate::msg::Name,
    /// Event time it was raised at (as in the alert journal).
    pub raised_t: f64,
    /// Seconds active, on the monitor's clock.
    pub active_s: f64,
    /// Its metric has had no value for `stale_after`: the alert says what was, not what is.
    pub stale: bool,
    /// Value that raised it.
    pub value: f64,
    /// Threshold.
    pub threshold: f64,
}

/// Transport health of one role.
#[derive(Debug, Clone, Serialize)]
pub struct Topic {
    /// Role.
    pub role: &'static str,
    /// `ok`, `stale`, `no_data`, or `merged` (more than one publisher).
    pub state: &'static str,
    /// Messages per second over the last 5 s of the monitor's clock.
    pub rate_hz: Option<f64>,
    /// Latency p50 (s).
    pub latency_p50_s: Option<f64>,
    /// Latency p99 (s).
    pub latency_p99_s: Option<f64>,
    /// Seconds since the last arrival.
    pub staleness_s: Option<f64>,
    /// Messages accepted.
    pub messages: u64,
    /// Dropped by a full queue.
    pub dropped: u64,
    /// Rejected while decoding or validating.
    pub rejected: u64,
    /// Stamps older than the previous one.
    pub stamp_regressions: u64,
    /// Publishers heard on the role in the last 10 s (live; `None` before any).
    pub publishers: Option<f64>,
}

/// Step counts.
#[derive(Debug, Clone, Serialize)]
pub struct Steps {
    /// Tracking steps evaluated.
    pub tracking_evaluated: u64,
    /// Tracking steps skipped.
    pub tracking_skipped: u64,
    /// Ego steps evaluated.
    pub ego_evaluated: u64,
    /// Ego steps skipped.
    pub ego_skipped: u64,
}
