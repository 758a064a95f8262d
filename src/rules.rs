//! Threshold rules over windowed statistics: alerts with sustain and hysteresis, and the
//! run's verdicts.
//!
//! A rule reads one statistic of one metric (optionally one role) in one window and
//! compares it `above` or `below` a threshold. On a sliding window the rule is checked at
//! every value of its metric:
//! - it **raises** at the first check at which the condition has held for `sustain`
//!   seconds of event time (at once when `sustain` is 0);
//! - once raised it **clears** at the first check at which the condition has been false
//!   for `clear_after` seconds (at once when 0).
//!
//! Its verdict fails when it raised at least once; its worst value is the largest (above)
//! or smallest (below) statistic seen. A rule on the window `run` is a requirement judged
//! at the end on the whole run's exact statistics. A rule without a role on a per-role
//! metric applies to every role separately. Durations are compared with the 1 µs slack of
//! the alignment rule, so 0.3 s of 10 Hz samples counts as 0.3 s despite rounding.
//! Pure: times are event times passed in.

use serde::Serialize;

use crate::core::align::EXACT_S;
use crate::metrics::Metric;
use crate::msg::{Name, Role};
use crate::stats::RunStats;
use crate::windows::{Stat, WindowSet};

/// What happened to an alert: raised, or cleared.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum AlertKind {
    /// The rule's statistic crossed its threshold.
    Raised,
    /// It stayed back on the good side for `clear_after`.
    Cleared,
}

impl AlertKind {
    /// `raised` or `cleared`.
    pub fn name(self) -> &'static str {
        match self {
            AlertKind::Raised => "raised",
            AlertKind::Cleared => "cleared",
        }
    }
}

/// A rule's verdict over a run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// The statistic stayed on the good side of the threshold.
    Pass,
    /// It crossed the threshold.
    Fail,
    /// The rule's metric had no value to judge.
    NoData,
}

impl Outcome {
    /// `pass`, `fail` or `no_data`.
    pub fn name(self) -> &'static str {
        match self {
            Outcome::Pass => "pass",
            Outcome::Fail => "fail",
            Outcome::NoData => "no_data",
        }
    }
}

/// Which side of its threshold a rule's statistic must not cross.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Direction {
    /// A value above the threshold breaches.
    Above,
    /// A value below the threshold breaches.
    Below,
}

impl Direction {
    /// `above` or `below`.
    pub fn name(self) -> &'static str {
        match self {
            Direction::Above => "above",
            Direction::Below => "below",
        }
    }
}

/// How bad a failure is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// For the record.
    Info,
    /// Look at it.
    Warning,
    /// Fails the run (exit code 1).
    Critical,
}

impl Severity {
    /// Parses `info`, `warning`, `critical`.
    pub fn from_name(s: &str) -> Option<Severity> {
        Some(match s {
            "info" => Severity::Info,
            "warning" => Severity::Warning,
            "critical" => Severity::Critical,
            _ => return None,
        })
    }

    /// The name.
    pub fn name(self) -> &'static str {
        match self {
            Severity::Info => "info",
            Severity::Warning => "warning",
            Severity::Critical => "critical",
        }
    }
}

/// Which window a rule reads.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum RuleWindow {
    /// Index into the window set's lengths.
    Sliding(usize),
    /// The whole run, judged at the end.
    Run,
}

/// One rule, validated.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Rule {
    /// Name (unique).
    pub name: String,
    /// Metric read.
    pub metric: Metric,
    /// Role filter.
    pub role: Option<Role>,
    /// Window read.
    pub window: RuleWindow,
    /// The window as written (`10s`, `run`).
    pub window_label: String,
    /// Statistic read.
    pub stat: Stat,
    /// `true`: fails above the threshold; `false`: below.
    pub above: bool,
    /// Threshold.
    pub threshold: f64,
    /// How long the condition must hold before raising (s).
    pub sustain: f64,
    /// How long it must be false before clearing (s).
    pub clear_after: f64,
    /// Severity.
    pub severity: Severity,
    /// Judge the magnitude of a signed metric: `max` reads the largest |value| (the
    /// larger of |max| and |min|), `last` the last |value| (`magnitude = true`; only
    /// with `max` or `last`, where the window's own statistics give it exactly).
    pub magnitude: bool,
    /// Values the window (or the run) must hold before its statistic is judged
    /// (`min_values`; a 10 s mean of one value is no 10 s mean).
    pub min_values: u64,
    /// A run in which the rule never had data passes it (`allow_no_data = true`); by
    /// default a critical rule without data fails the run.
    pub allow_no_data: bool,
}

impl Rule {
    /// The roles the rule reads: its own, else every role for a per-role metric, else the
    /// metric's one unroled series.
    fn roles(&self) -> Vec<Option<Role>> {
        match (self.role, self.metric.is_per_role()) {
            (Some(role), _) => vec![Some(role)],
            (None, true) => Role::ALL.iter().map(|&x| Some(x)).collect(),
            (None, false) => vec![None],
        }
    }

    /// The statistic the rule judges, from a source of window or run statistics:
    /// `None` until the source holds `min_values` values.
    fn judged(&self, get: impl Fn(Stat) -> Option<f64>) -> Option<f64> {
        if self.min_values > 1 && get(Stat::Count)? < self.min_values as f64 {
            return None;
        }
        if !self.magnitude {
            return get(self.stat);
        }
        match self.stat {
            Stat::Last => get(Stat::Last).map(f64::abs),
            _ => {
                let (lo, hi) = (get(Stat::Min)?, get(Stat::Max)?);
                Some(lo.abs().max(hi.abs()))
            }
        }
    }

    /// Whether a statistic breaks the rule. A statistic that is not a number never
    /// passes: NaN compares false both ways, which would make it a silent pass.
    fn breaches(&self, v: f64) -> bool {
        if !v.is_finite() {
            return true;
        }
        if self.above {
            v > self.threshold
        } else {
            v < self.threshold
        }
    }

    /// The worse of two statistics; a non-finite one is the worst of all (`f64::max`
    /// would drop a NaN).
    fn worse(&self, a: f64, b: f64) -> f64 {
        if !a.is_finite() {
            return a;
        }
        if !b.is_finite() {
            return b;
        }
        if self.above {
            a.max(b)
        } else {
            a.min(b)
        }
    }
}

/// An alert event.
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct AlertEvent {
    /// Rule name.
    pub rule: String,
    /// Raised or cleared.
    pub kind: AlertKind,
    /// Event time (s).
    pub t: f64,
    /// The statistic's value.
    pub value: f64,
    /// The threshold.
    pub threshold: f64,
    /// Severity.
    pub severity: Severity,
    /// Metric.
    pub metric: Name,
    /// Statistic.
    pub stat: Name,
    /// Window.
    pub window: String,
    /// Role, for per-role metrics.
    pub role: Option<Name>,
}

/// A rule's verdict.
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct Verdict {
    /// Rule name.
    pub rule: String,
    /// Pass, fail or no data.
    pub verdict: Outcome,
    /// Whether this verdict fails the run: a critical rule that failed, or a critical rule
    /// with no data unless it allows that (`allow_no_data`). (Absent from reports of early
    /// releases: read as false there.)
    #[serde(default)]
    pub fails_run: bool,
    /// Worst value seen.
    pub worst: Option<f64>,
    /// Threshold.
    pub threshold: f64,
    /// Which side breaches.
    pub direction: Direction,
    /// Severity.
    pub severity: Severity,
    /// Metric.
    pub metric: Name,
    /// Statistic.
    pub stat: Name,
    /// Window.
    pub window: String,
    /// Times raised.
    pub raised: u32,
}

#[derive(Debug, Clone, Copy, Default)]
struct State {
    raised: bool,
    pending_since: Option<f64>,
    clear_since: Option<f64>,
    worst: Option<f64>,
    raised_count: u32,
}

const SLOTS: usize = Role::ALL.len() + 1;

fn slot(role: Option<Role>) -> usize {
    role.map_or(0, |r| r.index() + 1)
}

/// Every rule with its state.
#[derive(Debug, Clone)]
pub struct RuleSet {
    rules: Vec<Rule>,
    states: Vec<[State; SLOTS]>,
    by_key: Vec<Vec<usize>>,
}

impl RuleSet {
    /// Builds the index of rules by metric key.
    pub fn new(rules: Vec<Rule>) -> RuleSet {
        let mut by_key = vec![Vec::new(); Metric::ALL.len() * SLOTS];
        for (i, r) in rules.iter().enumerate() {
            if !matches!(r.window, RuleWindow::Sliding(_)) {
                continue;
            }
            let roles = r.roles();
            for role in roles {
                by_key[crate::windows::key_index(r.metric, role)].push(i);
            }
        }
        let states = vec![[State::default(); SLOTS]; rules.len()];
        RuleSet { rules, states, by_key }
    }

    /// The rules.
    pub fn rules(&self) -> &[Rule] {
        &self.rules
    }

    /// Whether a rule is raised now (for a role, or for any role).
    pub fn is_raised(&self, i: usize) -> bool {
        self.states[i].iter().any(|s| s.raised)
    }

    /// Checks the rules of `metric`/`role` after a value at `t` entered the windows.
    pub fn observe(
        &mut self,
        t: f64,
        metric: Metric,
        role: Option<Role>,
        windows: &WindowSet,
        out: &mut Vec<AlertEvent>,
    ) {
        let key = crate::windows::key_index(metric, role);
        let Some(ws) = windows.get(metric, role) else { return };
        for &i in &self.by_key[key] {
            let r = &self.rules[i];
            let RuleWindow::Sliding(w) = r.window else { continue };
            let Some(win) = ws.get(w) else { continue };
            let Some(v) = r.judged(|s| win.stat(s)) else { continue };
            if v.is_nan() {
                continue;
            }
            let st = &mut self.states[i][slot(role)];
            st.worst = Some(st.worst.map_or(v, |x| r.worse(x, v)));
            let event = |kind| AlertEvent {
                rule: r.name.clone(),
                kind,
                t,
                value: v,
                threshold: r.threshold,
                severity: r.severity,
                metric: Name::Borrowed(r.metric.name()),
                stat: Name::Borrowed(r.stat.name()),
                window: r.window_label.clone(),
                role: role.map(|r| Name::Borrowed(r.name())),
            };
            if r.breaches(v) {
                st.clear_since = None;
                if !st.raised {
                    let since = *st.pending_since.get_or_insert(t);
                    if t - since >= r.sustain - EXACT_S {
                        st.raised = true;
                        st.raised_count += 1;
                        st.pending_since = None;
                        out.push(event(AlertKind::Raised));
                    }
                }
            } else {
                st.pending_since = None;
                if st.raised {
                    let since = *st.clear_since.get_or_insert(t);
                    if t - since >= r.clear_after - EXACT_S {
                        st.raised = false;
                        st.clear_since = None;
                        out.push(event(AlertKind::Cleared));
                    }
                }
            }
        }
    }

    /// The verdict of every rule; run-window rules are judged on `run`.
    pub fn verdicts(&self, run: &RunStats) -> Vec<Verdict> {
        self.rules
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let (worst, failed) = match r.window {
                    RuleWindow::Sliding(_) => {
                        let worst =
                            self.states[i].iter().filter_map(|s| s.worst).reduce(|a, b| r.worse(a, b));
                        (worst, self.states[i].iter().any(|s| s.raised_count > 0))
                    }
                    RuleWindow::Run => {
                        let roles = r.roles();
                        let worst = roles
                            .into_iter()
                            .filter_map(|role| r.judged(|s| run.stat(r.metric, role, s)))
                            .reduce(|a, b| r.worse(a, b));
                        (worst, worst.is_some_and(|v| r.breaches(v)))
                    }
                };
                let raised = self.states[i].iter().map(|s| s.raised_count).sum();
                let verdict = match (worst, failed) {
                    (_, true) => Outcome::Fail,
                    (None, false) => Outcome::NoData,
                    (Some(_), false) => Outcome::Pass,
                };
                let critical = r.severity == Severity::Critical;
                Verdict {
                    rule: r.name.clone(),
                    verdict,
                    fails_run: critical
                        && (verdict == Outcome::Fail || (verdict == Outcome::NoData && !r.allow_no_data)),
                    worst,
                    threshold: r.threshold,
                    direction: if r.above { Direction::Above } else { Direction::Below },
                    severity: r.severity,
                    metric: Name::Borrowed(r.metric.name()),
                    stat: Name::Borrowed(r.stat.name()),
                    window: r.window_label.clone(),
                    raised,
                }
            })
            .collect()
    }
}

/// Whether any verdict fails the run (a critical rule that failed, or that had no data
/// and does not allow it).
pub fn critical_failed(verdicts: &[Verdict]) -> bool {
    verdicts.iter().any(|v| v.fails_run)
}

display_by_name!(AlertKind, Outcome, Direction, Severity);

#[cfg(test)]
mod tests {
    use super::*;

    fn rule(above: bool) -> Rule {
        Rule {
            name: "r".into(),
            metric: Metric::Gospa,
            role: None,
            window: RuleWindow::Run,
            window_label: "run".into(),
            stat: Stat::from_name("mean").expect("mean is a statistic"),
            above,
            threshold: 3.0,
            sustain: 0.0,
            clear_after: 0.0,
            severity: Severity::Critical,
            magnitude: false,
            min_values: 0,
            allow_no_data: false,
        }
    }

    /// A statistic that is not a number never passes, in either direction, and is the
    /// worst of any pair. Before: a run mean of NaN (from a coordinate of 1e308) passed a
    /// critical run rule, since NaN > 3 and NaN < 3 are both false.
    #[test]
    fn a_non_finite_statistic_never_passes() {
        for above in [true, false] {
            let r = rule(above);
            for v in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
                assert!(r.breaches(v), "above={above} v={v}");
                assert!(!r.worse(1.0, v).is_finite() && !r.worse(v, 1.0).is_finite());
            }
            assert_eq!(r.breaches(5.0), above);
            assert_eq!(r.worse(1.0, 5.0), if above { 5.0 } else { 1.0 });
        }
    }
}
