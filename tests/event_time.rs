//! Event time everywhere: every metric that reads the reference waits for it and resolves it
//! by the rule of the tracking steps, so a role that arrives late (within `time.max_wait`)
//! changes no metric value, and one that arrives too late gives counted skips, never values
//! computed from a stale reference.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

mod support;

use std::collections::BTreeMap;
use std::path::Path;

use plumbline::config::Config;
use plumbline::core::Sample;
use plumbline::metrics::Metric;
use support::{repo, run};

/// The shipped log with `role`'s arrivals delayed by `delay` s; records in arrival order,
/// as a recorder writes them.
fn delayed(role: &str, delay: f64, out: &Path) {
    let text = std::fs::read_to_string(repo("replay-logs/campus-loop.jsonl")).unwrap();
    let key = format!("\"rig/{role}\"");
    let mut lines: Vec<(f64, String)> = text
        .lines()
        .map(|l| {
            let mut v: serde_json::Value = serde_json::from_str(l).unwrap();
            if l.contains(&key) {
                v["recv"] = serde_json::json!(v["recv"].as_f64().unwrap() + delay);
            }
            (v["recv"].as_f64().unwrap(), v.to_string())
        })
        .collect();
    lines.sort_by(|a, b| a.0.total_cmp(&b.0));
    let body: String = lines.into_iter().map(|(_, l)| l + "\n").collect();
    std::fs::write(out, body).unwrap();
}

/// Per metric (arrival metrics left out), its (t, value) sequence in emission order.
fn by_metric(samples: &[Sample]) -> BTreeMap<&'static str, Vec<(u64, u64)>> {
    let mut m: BTreeMap<&'static str, Vec<(u64, u64)>> = BTreeMap::new();
    for s in samples {
        if matches!(s.metric, Metric::Latency | Metric::Interarrival | Metric::Staleness) {
            continue;
        }
        m.entry(s.metric.name()).or_default().push((s.t.to_bits(), s.value.to_bits()));
    }
    m
}

const ROLES: [&str; 6] = [
    "reference/objects",
    "estimate/objects",
    "reference/ego",
    "estimate/ego",
    "plan/path",
    "reference/obstacles",
];

/// Each role in turn 150 ms late (well inside `time.max_wait` = 0.5 s): every metric but
/// the arrival ones is the same, value for value. Before: delaying only the reference
/// objects moved `path_clearance_m` (mean 2.36 -> 4.38: a plan through object 18 was no
/// longer seen).
#[test]
fn a_role_150_ms_late_changes_no_metric() {
    let cfg = Config::defaults();
    let (base_run, base) = run(&cfg, &repo("replay-logs/campus-loop.jsonl"));
    let want = by_metric(&base);
    assert!(want.len() > 20, "{} metrics", want.len());
    let dir = tempfile::tempdir().unwrap();
    for role in ROLES {
        let p = dir.path().join("late.jsonl");
        delayed(role, 0.15, &p);
        let (r, got) = run(&cfg, &p);
        let got = by_metric(&got);
        for (metric, w) in &want {
            let g = got.get(metric).map(Vec::as_slice).unwrap_or(&[]);
            assert!(
                g == w.as_slice(),
                "{role} late: {metric} differs ({} values, {} undelayed)",
                g.len(),
                w.len()
            );
        }
        assert_eq!(got.len(), want.len(), "{role} late: the same metrics");
        let skips = |st: &plumbline::report::Steps| {
            [&st.tracking, &st.ego, &st.clearance, &st.path_following, &st.budget, &st.plans]
                .iter()
                .map(|s| s.skipped)
                .sum::<u64>()
        };
        assert_eq!(
            skips(&r.report.steps),
            skips(&base_run.report.steps),
            "{role} late: no step skipped for it"
        );
    }
}

/// Each reference role 3 s late (past `time.max_wait`): what reads it is skipped and
/// counted under a reason, and every value that is computed equals the undelayed one at
/// the same step. Before: with the reference 3 s late `cross_track_m` fell from 3000 values
/// to 80 without a word.
#[test]
fn a_role_3_s_late_gives_counted_skips_never_stale_values() {
    let cfg = Config::defaults();
    let (_, base) = run(&cfg, &repo("replay-logs/campus-loop.jsonl"));
    let want = by_metric(&base);
    let dir = tempfile::tempdir().unwrap();
    for role in ["reference/objects", "reference/ego", "plan/path", "estimate/objects"] {
        let p = dir.path().join("late.jsonl");
        delayed(role, 3.0, &p);
        let (r, got) = run(&cfg, &p);
        let got = by_metric(&got);
        // Every value that came out once the role had been heard (its first message
        // arrives at about 3 s; before, the run knows no such role and measures without
        // it) is the undelayed value of that step: none comes from a stale reference.
        for (metric, g) in &got {
            let w: std::collections::BTreeSet<(u64, u64)> =
                want.get(metric).into_iter().flatten().copied().collect();
            let stale: Vec<_> = g.iter().filter(|x| f64::from_bits(x.0) >= 3.1 && !w.contains(x)).collect();
            assert!(
                stale.is_empty(),
                "{role} 3 s late: {metric} has {} values no undelayed step has",
                stale.len()
            );
        }
        let st = &r.report.steps;
        let all = [&st.tracking, &st.ego, &st.clearance, &st.path_following, &st.budget, &st.plans];
        let skipped: u64 = all.iter().map(|s| s.skipped).sum();
        assert!(skipped > 100, "{role} 3 s late: {skipped} skipped steps, {st:?}");
        let reasons: Vec<&str> =
            all.iter().flat_map(|s| s.skipped_by_reason.keys().map(|k| k.as_ref())).collect();
        assert!(reasons.iter().all(|r| !r.is_empty()), "{reasons:?}");
    }
}
