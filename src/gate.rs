//! The regression gate: compares a candidate run's report with a baseline's under
//! per-metric tolerances, and writes JUnit XML for CI servers. Pure (the caller reads and
//! writes files), on typed reports ([`Report::read`] reads one back).
//!
//! A metric statistic regresses when it moved in its worse direction by more than
//! `max(abs, rel * |baseline|)`, and improves when it moved the other way by more than that.
//! Without `[[gate]]` entries in the config, every metric of [`default_direction`] is gated
//! on its mean with `rel = 0.05`.

use serde::Serialize;
use serde_json::Value;

use crate::report::Report;
use crate::rules::{Outcome, Severity};

/// Which way is worse.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Worse {
    /// A larger value is worse.
    Higher,
    /// A smaller value is worse.
    Lower,
}

/// One gated statistic.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Tolerance {
    /// Metric name.
    pub metric: String,
    /// Statistic (`mean`, `p95`, `max`, ...).
    pub stat: String,
    /// Which way is worse.
    pub worse: Worse,
    /// Absolute tolerance.
    pub abs: f64,
    /// Relative tolerance (of |baseline|).
    pub rel: f64,
}

/// The direction of the metrics gated by default, from the metric catalog; signed or
/// neutral metrics, and the monitor's own view of its inputs, are left out.
pub fn default_direction(metric: &str) -> Option<Worse> {
    use crate::metrics::catalog::{row, Worse as W};
    let m = crate::metrics::Metric::from_name(metric)?;
    if m.is_per_role() {
        return None;
    }
    match row(m).worse {
        W::Higher => Some(Worse::Higher),
        W::Lower => Some(Worse::Lower),
        W::Neither => None,
    }
}

/// How a gated statistic moved.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Worse by more than the tolerance.
    Regressed,
    /// Better by more than the tolerance.
    Improved,
    /// Within the tolerance either way.
    Within,
    /// Absent from one report.
    Missing,
}

impl Status {
    /// `regressed`, `improved`, `within` or `missing`.
    pub fn name(self) -> &'static str {
        match self {
            Status::Regressed => "regressed",
            Status::Improved => "improved",
            Status::Within => "within",
            Status::Missing => "missing",
        }
    }
}

/// One row of the comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Row {
    /// Metric.
    pub metric: String,
    /// Statistic.
    pub stat: String,
    /// Baseline value.
    pub baseline: Option<f64>,
    /// Candidate value.
    pub candidate: Option<f64>,
    /// Allowed change.
    pub allowed: f64,
    /// `regressed`, `improved`, `within` or `missing`.
    pub status: Status,
}

fn stat_of(report: &Report, metric: &str, stat: &str) -> Option<f64> {
    report.metrics.get(metric)?.get(stat)
}

/// Rare-event counts, gated on their run total with an absolute tolerance of one event:
/// one extra track switch in 600 steps is not a 5% regression.
pub const EVENT_COUNTS: [&str; 3] = ["track_switches", "fragmentations", "path_missing"];

/// The settings whose values differ between two reports' `definitions`, as
/// `key: baseline vs candidate`; a report without definitions (older versions) differs in
/// nothing that can be told.
pub fn definition_changes(base: &Report, cand: &Report) -> Vec<String> {
    if base.definitions.is_empty() || cand.definitions.is_empty() {
        return Vec::new();
    }
    // A report of the release before a key's rename names it the old way.
    let current = |r: &Report| -> std::collections::BTreeMap<String, Value> {
        r.definitions.iter().map(|(k, v)| (crate::report::current_key(k), v.clone())).collect()
    };
    let (b, c) = (current(base), current(cand));
    let mut keys: Vec<&String> = b.keys().chain(c.keys()).collect();
    keys.sort();
    keys.dedup();
    keys.into_iter()
        .filter(|k| b.get(*k) != c.get(*k))
        .map(|k| {
            let show = |v: Option<&Value>| v.map_or_else(|| "(unset)".to_string(), Value::to_string);
            format!("{k}: {} vs {}", show(b.get(k)), show(c.get(k)))
        })
        .collect()
}

/// The default tolerances for two reports: the mean of every directional metric in either
/// (5% of the baseline), and the run total of the rare-event counts ([`EVENT_COUNTS`], one
/// event).
pub fn default_tolerances(base: &Report, cand: &Report) -> Vec<Tolerance> {
    let mut names: Vec<String> = Vec::new();
    for r in [base, cand] {
        names.extend(r.metrics.keys().map(|k| k.to_string()));
    }
    names.sort();
    names.dedup();
    names
        .into_iter()
        .filter_map(|m| {
            default_direction(&m).map(|worse| {
                if EVENT_COUNTS.contains(&m.as_str()) {
                    Tolerance { metric: m, stat: "sum".into(), worse, abs: 1.0, rel: 0.0 }
                } else {
                    Tolerance { metric: m, stat: "mean".into(), worse, abs: 1e-9, rel: 0.05 }
                }
            })
        })
        .collect()
}

/// Compares the candidate with the baseline.
pub fn compare(base: &Report, cand: &Report, tolerances: &[Tolerance]) -> Vec<Row> {
    tolerances
        .iter()
        .map(|t| {
            let (b, c) = (stat_of(base, &t.metric, &t.stat), stat_of(cand, &t.metric, &t.stat));
            let allowed = b.map_or(t.abs, |b| t.abs.max(t.rel * b.abs()));
            let status = match (b, c) {
                (Some(b), Some(c)) => {
                    let worse_by = match t.worse {
                        Worse::Higher => c - b,
                        Worse::Lower => b - c,
                    };
                    if worse_by > allowed {
                        Status::Regressed
                    } else if -worse_by > allowed {
                        Status::Improved
                    } else {
                        Status::Within
                    }
                }
                _ => Status::Missing,
            };
            Row { metric: t.metric.clone(), stat: t.stat.clone(), baseline: b, candidate: c, allowed, status }
        })
        .collect()
}

/// A number as people read it: the shortest form that reads back to the same value.
fn fmt_num(v: f64) -> String {
    format!("{v}")
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&apos;")
}

/// JUnit XML: one test case per rule verdict of the candidate and per gated metric.
pub fn junit(rows: &[Row], candidate: &Report) -> String {
    let verdicts = &candidate.verdicts;
    let mut cases = String::new();
    let mut failures = 0;
    for v in verdicts {
        cases +=
            &format!("    <testcase classname=\"plumbline.rules\" name=\"{}\" time=\"0\">", esc(&v.rule));
        if v.verdict == Outcome::Fail || (v.verdict == Outcome::NoData && v.fails_run) {
            failures += 1;
            let msg = format!(
                "{} rule failed: worst {} ({} {} over {}) against threshold {}",
                v.severity.name(),
                v.worst.map_or_else(|| "none".to_string(), fmt_num),
                v.stat,
                v.metric,
                v.window,
                fmt_num(v.threshold)
            );
            cases += &format!("<failure message=\"{}\" type=\"rule\"/>", esc(&msg));
        }
        cases += "</testcase>\n";
    }
    for r in rows {
        cases += &format!(
            "    <testcase classname=\"plumbline.gate\" name=\"{}.{}\" time=\"0\">",
            esc(&r.metric),
            esc(&r.stat)
        );
        if r.status == Status::Regressed {
            failures += 1;
            let show = |x: Option<f64>| x.map_or_else(|| "none".to_string(), fmt_num);
            let msg = format!(
                "regressed: baseline {}, candidate {}, allowed change {}",
                show(r.baseline),
                show(r.candidate),
                fmt_num(r.allowed)
            );
            cases += &format!("<failure message=\"{}\" type=\"regression\"/>", esc(&msg));
        }
        cases += "</testcase>\n";
    }
    let tests = verdicts.len() + rows.len();
    format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<testsuites>\n  <testsuite name=\"plumbline-gate\" tests=\"{tests}\" failures=\"{failures}\" errors=\"0\" time=\"0\">\n{cases}  </testsuite>\n</testsuites>\n"
    )
}

/// Whether the candidate fails on its own rules: a verdict that fails the run, or a
/// critical rule that failed (a report of an early release has no `fails_run`).
pub fn critical_failure(candidate: &Report) -> bool {
    candidate
        .verdicts
        .iter()
        .any(|v| v.fails_run || (v.verdict == Outcome::Fail && v.severity == Severity::Critical))
}

display_by_name!(Status);

#[cfg(test)]
mod tests {
    use super::*;
    use crate::msg::Name;
    use crate::rules::{Direction, Verdict};
    use crate::stats::Stats;

    fn st(mean: f64, sum: f64) -> Stats {
        Stats { count: 600, mean, min: mean, max: mean, p50: mean, p95: mean, p99: mean, sum }
    }

    fn with_metrics(m: &[(&'static str, Stats)]) -> Report {
        Report {
            tool: Name::Borrowed("plumbline"),
            metrics: m.iter().map(|(k, v)| (Name::Borrowed(*k), *v)).collect(),
            ..Report::default()
        }
    }

    fn with_definitions(d: serde_json::Value) -> Report {
        let text = serde_json::json!({"tool": "plumbline", "definitions": d}).to_string();
        Report::read(&text).unwrap()
    }

    #[test]
    fn regressions_and_improvements_by_direction() {
        let base =
            with_metrics(&[("gospa", st(1.0, 0.0)), ("clearance_m", st(2.0, 0.0)), ("ospa", st(0.5, 0.0))]);
        let mut cand =
            with_metrics(&[("gospa", st(1.2, 0.0)), ("clearance_m", st(2.5, 0.0)), ("ospa", st(0.51, 0.0))]);
        let rows = compare(&base, &cand, &default_tolerances(&base, &cand));
        let st: Vec<(&str, &str)> = rows.iter().map(|r| (r.metric.as_str(), r.status.name())).collect();
        assert_eq!(st, vec![("clearance_m", "improved"), ("gospa", "regressed"), ("ospa", "within")]);
        cand.verdicts.push(Verdict {
            rule: "a<b".into(),
            verdict: Outcome::Fail,
            fails_run: true,
            worst: Some(3.0),
            threshold: 1.0,
            direction: Direction::Above,
            severity: Severity::Critical,
            metric: Name::Borrowed("gospa"),
            stat: Name::Borrowed("max"),
            window: "5s".into(),
            raised: 1,
        });
        let x = junit(&rows, &cand);
        assert!(x.contains("tests=\"4\" failures=\"2\""), "{x}");
        assert!(x.contains("name=\"a&lt;b\""));
        assert!(x.contains("critical rule failed: worst 3 (max gospa over 5s) against threshold 1"), "{x}");
        // Numbers, not Rust's debug form of options.
        assert!(x.contains("baseline 1, candidate 1.2") && !x.contains("Some("), "{x}");
        assert!(critical_failure(&cand) && !critical_failure(&base));
    }

    /// One extra track switch over a run is within the default gate; two are not.
    #[test]
    fn event_counts_are_gated_on_their_total_with_one_event_of_slack() {
        let base = with_metrics(&[("track_switches", st(1.0 / 600.0, 1.0))]);
        for (sum, status) in [(2.0, "within"), (3.0, "regressed"), (0.0, "within")] {
            let cand = with_metrics(&[("track_switches", st(sum / 600.0, sum))]);
            let rows = compare(&base, &cand, &default_tolerances(&base, &cand));
            assert_eq!((rows[0].stat.as_str(), rows[0].status.name()), ("sum", status), "{sum}");
        }
    }

    #[test]
    fn definition_changes_name_their_keys() {
        let base = with_definitions(serde_json::json!({"tracking.cutoff_m": 2.0, "tracking.order": 1.0}));
        let cand = with_definitions(serde_json::json!({"tracking.cutoff_m": 0.5, "tracking.order": 1.0}));
        assert_eq!(definition_changes(&base, &cand), vec!["tracking.cutoff_m: 2.0 vs 0.5".to_string()]);
        assert!(definition_changes(&base, &base).is_empty());
    }

    #[test]
    fn a_renamed_definition_key_is_the_same_setting() {
        let base = with_definitions(serde_json::json!({"tracking.region_m": 40.0}));
        let same = with_definitions(serde_json::json!({"tracking.region_radius_m": 40.0}));
        let other = with_definitions(serde_json::json!({"tracking.region_radius_m": 0.0}));
        assert!(definition_changes(&base, &same).is_empty());
        assert_eq!(
            definition_changes(&base, &other),
            vec!["tracking.region_radius_m: 40.0 vs 0.0".to_string()]
        );
    }

    /// A report reads back to what was written, and a document that is not one is refused.
    #[test]
    fn reports_read_back_and_others_are_refused() {
        let r = with_metrics(&[("gospa", st(1.25, 750.0))]);
        let text = serde_json::to_string(&r).unwrap();
        let back = Report::read(&text).unwrap();
        assert_eq!(serde_json::to_string(&back).unwrap(), text);
        assert_eq!(back.metrics["gospa"].get("sum"), Some(750.0));
        assert!(Report::read(r#"{"tool": "other"}"#).unwrap_err().contains("not a plumbline report"));
        assert!(Report::read("[1, 2]").unwrap_err().starts_with("not a report"));
    }
}
