//! The regression gate: compares a candidate run's report with a baseline's under
//! per-metric tolerances, and writes JUnit XML for CI servers. Pure (the caller reads and
//! writes files).
//!
//! A metric statistic regresses when it moved in its worse direction by more than
//! `max(abs, rel * |baseline|)`, and improves when it moved the other way by more than that.
//! Without `[[gate]]` entries in the config, every metric of [`default_direction`] is gated
//! on its mean with `rel = 0.05`.

use serde::Serialize;
use serde_json::Value;

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

/// The direction of the metrics gated by default; signed or neutral metrics are left out.
pub fn default_direction(metric: &str) -> Option<Worse> {
    Some(match metric {
        "clearance_m" | "path_clearance_m" | "path_margin_m" | "believed_clearance_m" | "assigned_count" => {
            Worse::Lower
        }
        "gospa"
        | "gospa_localization"
        | "gospa_missed"
        | "gospa_false"
        | "missed_count"
        | "false_count"
        | "ospa"
        | "track_switches"
        | "fragmentations"
        | "establishment_delay_s"
        | "deletion_delay_s"
        | "nees"
        | "ego_position_error_m"
        | "clearance_loss_m"
        | "collision"
        | "path_length_excess"
        | "path_missing"
        | "plan_compute_s" => Worse::Higher,
        _ => return None,
    })
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
    pub status: &'static str,
}

fn stat_of(report: &Value, metric: &str, stat: &str) -> Option<f64> {
    report.get("metrics")?.get(metric)?.get(stat)?.as_f64()
}

/// The default tolerances for two reports: the mean of every directional metric in either.
pub fn default_tolerances(base: &Value, cand: &Value) -> Vec<Tolerance> {
    let mut names: Vec<String> = Vec::new();
    for r in [base, cand] {
        if let Some(m) = r.get("metrics").and_then(Value::as_object) {
            names.extend(m.keys().cloned());
        }
    }
    names.sort();
    names.dedup();
    names
        .into_iter()
        .filter_map(|m| {
            default_direction(&m).map(|worse| Tolerance {
                metric: m,
                stat: "mean".into(),
                worse,
                abs: 1e-9,
                rel: 0.05,
            })
        })
        .collect()
}

/// Compares the candidate with the baseline.
pub fn compare(base: &Value, cand: &Value, tolerances: &[Tolerance]) -> Vec<Row> {
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
                        "regressed"
                    } else if -worse_by > allowed {
                        "improved"
                    } else {
                        "within"
                    }
                }
                _ => "missing",
            };
            Row { metric: t.metric.clone(), stat: t.stat.clone(), baseline: b, candidate: c, allowed, status }
        })
        .collect()
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&apos;")
}

/// JUnit XML: one test case per rule verdict of the candidate and per gated metric.
pub fn junit(rows: &[Row], candidate: &Value) -> String {
    let verdicts = candidate.get("verdicts").and_then(Value::as_array).cloned().unwrap_or_default();
    let mut cases = String::new();
    let mut failures = 0;
    for v in &verdicts {
        let name = v.get("rule").and_then(Value::as_str).unwrap_or("");
        let verdict = v.get("verdict").and_then(Value::as_str).unwrap_or("");
        cases += &format!("    <testcase classname=\"plumbline.rules\" name=\"{}\" time=\"0\">", esc(name));
        if verdict == "fail" {
            failures += 1;
            let msg = format!(
                "{} rule failed: worst {} against threshold {}",
                v.get("severity").and_then(Value::as_str).unwrap_or(""),
                v.get("worst").map(Value::to_string).unwrap_or_default(),
                v.get("threshold").map(Value::to_string).unwrap_or_default()
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
        if r.status == "regressed" {
            failures += 1;
            let msg = format!(
                "regressed: baseline {:?}, candidate {:?}, allowed change {}",
                r.baseline, r.candidate, r.allowed
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

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn regressions_and_improvements_by_direction() {
        let base =
            json!({"metrics": {"gospa": {"mean": 1.0}, "clearance_m": {"mean": 2.0}, "ospa": {"mean": 0.5}}});
        let cand = json!({"metrics": {"gospa": {"mean": 1.2}, "clearance_m": {"mean": 2.5}, "ospa": {"mean": 0.51}}});
        let rows = compare(&base, &cand, &default_tolerances(&base, &cand));
        let st: Vec<(&str, &str)> = rows.iter().map(|r| (r.metric.as_str(), r.status)).collect();
        assert_eq!(st, vec![("clearance_m", "improved"), ("gospa", "regressed"), ("ospa", "within")]);
        let x = junit(
            &rows,
            &json!({"verdicts": [{"rule": "a<b", "verdict": "fail", "severity": "critical", "worst": 3, "threshold": 1}]}),
        );
        assert!(x.contains("tests=\"4\" failures=\"2\""), "{x}");
        assert!(x.contains("name=\"a&lt;b\""));
    }
}
