//! Sliding windows against brute-force recomputation, and rule timing on hand-built streams.

use plumbline::config::Config;
use plumbline::metrics::Metric;
use plumbline::rules::{AlertEvent, AlertKind, Outcome, RuleSet};
use plumbline::windows::{Stat, Window, WindowSet};
use proptest::prelude::*;

/// Brute force: the values whose bucket index floor(t / w) lies in (head - k, head].
fn members(vals: &[(f64, f64)], length: f64, k: usize) -> Vec<f64> {
    let w = length / k as f64;
    let head = vals.iter().map(|&(t, _)| (t / w).floor() as i64).max().unwrap();
    let mut out = Vec::new();
    // Values are only added while their bucket is in the window at arrival; replay that.
    let mut cur = i64::MIN;
    for &(t, v) in vals {
        let idx = (t / w).floor() as i64;
        cur = cur.max(idx);
        if idx > cur - k as i64 {
            out.push((idx, v));
        }
    }
    out.into_iter().filter(|&(idx, _)| idx > head - k as i64).map(|(_, v)| v).collect()
}

fn quantile_sorted(v: &[f64], q: f64) -> f64 {
    let pos = q * (v.len() - 1) as f64;
    let (lo, hi) = (pos.floor() as usize, pos.ceil() as usize);
    v[lo] + (v[hi] - v[lo]) * (pos - lo as f64)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn window_stats_equal_brute_force(
        steps in prop::collection::vec((0.0f64..0.3, -50.0f64..50.0, 0u8..10), 1..400),
        length in prop::sample::select(vec![0.5, 1.0, 3.0, 10.0]),
        k in 1usize..16,
    ) {
        // A stream with increasing time, and now and then a stamp that goes back.
        let mut t = 0.0;
        let mut vals = Vec::new();
        for (dt, v, back) in steps {
            t += dt;
            let ts = if back == 0 { (t - 0.7f64).max(0.0) } else { t };
            vals.push((ts, v));
        }
        let mut w = Window::new(length, k, true);
        for &(t, v) in &vals {
            w.add(t, v);
        }
        let mut want = members(&vals, length, k);
        let got = w.stats();
        if want.is_empty() {
            prop_assert!(got.is_none());
            return Ok(());
        }
        let got = got.unwrap();
        prop_assert_eq!(got.count as usize, want.len());
        let mean = want.iter().sum::<f64>() / want.len() as f64;
        prop_assert!((got.mean - mean).abs() < 1e-9 * (1.0 + mean.abs()), "mean {} vs {}", got.mean, mean);
        want.sort_by(f64::total_cmp);
        prop_assert_eq!(got.min, want[0]);
        prop_assert_eq!(got.max, *want.last().unwrap());
        // Percentiles: the sketch's bins are 2^-7 wide relative to their octave, so each
        // order statistic is known to within 2^-8 relative (values under 1e-6 count as 0).
        for (q, g) in [(0.5, got.p50), (0.95, got.p95), (0.99, got.p99)] {
            let pos = q * (want.len() - 1) as f64;
            let lo = want[pos.floor() as usize];
            let hi = want[pos.ceil() as usize];
            let slack = |x: f64| x.abs() * 2f64.powi(-8) + 1e-6;
            prop_assert!(g >= lo - slack(lo) && g <= hi + slack(hi),
                "q={} got {} outside [{}, {}] (exact {})", q, g, lo, hi, quantile_sorted(&want, q));
        }
    }
}

fn rules_config(rules: &str) -> Config {
    Config::load(Some(("test.toml", rules)), &[]).expect("config")
}

/// Feeds (t, value) of one metric through windows and rules; returns the events.
fn run(cfg: &Config, metric: Metric, stream: &[(f64, f64)]) -> (Vec<AlertEvent>, RuleSet) {
    let mut windows = WindowSet::new(&cfg.windows, cfg.window_buckets);
    let mut rules = RuleSet::new(cfg.rules.clone());
    let mut events = Vec::new();
    for &(t, v) in stream {
        windows.add(metric, None, t, v);
        rules.observe(t, metric, None, &windows, &mut events);
    }
    (events, rules)
}

#[test]
fn sustain_and_clear_after_fire_at_the_exact_times() {
    // Window "last" over 1 s reads the latest value, so the condition is the raw stream.
    // Values at 10 Hz: above 5 from t = 1.0 to t = 2.0 inclusive, then below.
    // sustain 0.5 s: the condition starts at 1.0, holds at 1.5 -> raised at 1.5.
    // clear_after 0.3 s: false from 2.1, still false at 2.4 -> cleared at 2.4.
    let cfg = rules_config(
        "[[rule]]\nname = \"hot\"\nmetric = \"gospa\"\nwindow = \"1s\"\nstat = \"last\"\nabove = 5.0\n\
         sustain = \"500ms\"\nclear_after = \"300ms\"\nseverity = \"critical\"\n",
    );
    let stream: Vec<(f64, f64)> = (0..40)
        .map(|k| {
            let t = k as f64 / 10.0;
            (t, if (10..=20).contains(&k) { 9.0 } else { 1.0 })
        })
        .collect();
    let (ev, _) = run(&cfg, Metric::Gospa, &stream);
    let times: Vec<(AlertKind, f64)> = ev.iter().map(|e| (e.kind, e.t)).collect();
    assert_eq!(times.len(), 2, "{times:?}");
    assert_eq!(times[0].0, AlertKind::Raised);
    assert!((times[0].1 - 1.5).abs() < 1e-9, "{times:?}");
    assert_eq!(times[1].0, AlertKind::Cleared);
    assert!((times[1].1 - 2.4).abs() < 1e-9, "{times:?}");
}

#[test]
fn a_breach_shorter_than_sustain_never_raises_and_hysteresis_holds() {
    let cfg = rules_config(
        "[[rule]]\nname = \"r\"\nmetric = \"gospa\"\nwindow = \"1s\"\nstat = \"last\"\nabove = 5.0\n\
         sustain = \"500ms\"\nclear_after = \"1s\"\n",
    );
    // Above for 0.4 s only: no event.
    let stream: Vec<(f64, f64)> =
        (0..20).map(|k| (k as f64 / 10.0, if (5..=8).contains(&k) { 9.0 } else { 1.0 })).collect();
    assert!(run(&cfg, Metric::Gospa, &stream).0.is_empty());
    // Above 0.0..=0.6 (raised at 0.5), one dip to 1.0 at 0.7, above again: the dip is shorter
    // than clear_after, so no clear; then below from 1.0 on: cleared at 2.0.
    let stream: Vec<(f64, f64)> =
        (0..30).map(|k| (k as f64 / 10.0, if k <= 9 && k != 7 { 9.0 } else { 1.0 })).collect();
    let (ev, rules) = run(&cfg, Metric::Gospa, &stream);
    let times: Vec<(AlertKind, f64)> = ev.iter().map(|e| (e.kind, e.t)).collect();
    assert_eq!(times.len(), 2, "{times:?}");
    assert!((times[0].1 - 0.5).abs() < 1e-9 && (times[1].1 - 2.0).abs() < 1e-9, "{times:?}");
    let run_stats = plumbline::report::RunStats::new(&cfg.report);
    let v = rules.verdicts(&run_stats);
    assert_eq!(v[0].verdict, Outcome::Fail);
    assert_eq!(v[0].worst, Some(9.0));
    assert_eq!(v[0].raised, 1);
}

#[test]
fn window_mean_rule_uses_the_window() {
    // Mean over 1 s (10 buckets of 0.1 s), values 0 then 10 from t = 1.0: the 1 s mean first
    // exceeds 5 when more than half the window is 10s: at t = 1.5 the window holds
    // buckets 6..15 -> values at 0.6..1.5: four 0s and six 10s -> mean 6 > 5; at 1.4 it is
    // five and five -> 5, not above.
    let cfg = rules_config(
        "[[rule]]\nname = \"m\"\nmetric = \"ospa\"\nwindow = \"1s\"\nstat = \"mean\"\nabove = 5.0\n",
    );
    let stream: Vec<(f64, f64)> =
        (0..30).map(|k| (k as f64 / 10.0 + 0.05, if k >= 10 { 10.0 } else { 0.0 })).collect();
    let (ev, _) = run(&cfg, Metric::Ospa, &stream);
    assert_eq!(ev.len(), 1);
    assert!((ev[0].t - 1.55).abs() < 1e-9, "{:?}", ev[0]);
    assert!((ev[0].value - 6.0).abs() < 1e-12);
    let _ = Stat::Mean;
}

/// A window statistic is judged only once the window holds `min_values` values. Before:
/// at the first step a "10 s mean" was the mean of one value, so every run's worst value
/// was that first step's.
#[test]
fn min_values_holds_judgement_until_the_window_has_warmed_up() {
    let rule = "[[rule]]\nname = \"m\"\nmetric = \"gospa\"\nwindow = \"10s\"\nstat = \"mean\"\nabove = 3.0\n";
    // 10 Hz: the first value is 12 (a start-up transient), the rest 1.
    let stream: Vec<(f64, f64)> =
        (0..200).map(|k| (k as f64 / 10.0, if k == 0 { 12.0 } else { 1.0 })).collect();
    let (ev, rules) = run(&rules_config(rule), Metric::Gospa, &stream);
    assert_eq!(
        ev.first().map(|e| e.kind),
        Some(AlertKind::Raised),
        "without a warm-up the first value alone raises"
    );
    let stats = plumbline::report::RunStats::new(&rules_config(rule).report);
    assert_eq!(rules.verdicts(&stats)[0].worst, Some(12.0));
    let warm = format!("{rule}min_values = 50\n");
    let (ev, rules) = run(&rules_config(&warm), Metric::Gospa, &stream);
    assert!(ev.is_empty(), "{ev:?}");
    // The worst judged mean: 50 values, one of them 12 -> (12 + 49) / 50.
    let w = rules.verdicts(&stats)[0].worst.unwrap();
    assert!((w - 61.0 / 50.0).abs() < 1e-12, "{w}");
}

/// `magnitude = true` judges |value| of a signed metric: a heading error of -0.2 rad breaks
/// `above = 0.05` as +0.2 does. Before: the shipped heading and lateral rules only looked
/// at the positive side.
#[test]
fn magnitude_rules_judge_both_signs() {
    let rule = "[[rule]]\nname = \"h\"\nmetric = \"ego_heading_error_rad\"\nwindow = \"1s\"\nstat = \"max\"\nabove = 0.05\n";
    let stream: Vec<(f64, f64)> =
        (0..30).map(|k| (k as f64 / 10.0, if k == 12 { -0.2 } else { 0.01 })).collect();
    let (ev, _) = run(&rules_config(rule), Metric::EgoHeadingError, &stream);
    assert!(ev.is_empty(), "max of the signed values never exceeds 0.05");
    let both = format!("{rule}magnitude = true\n");
    let (ev, rules) = run(&rules_config(&both), Metric::EgoHeadingError, &stream);
    assert_eq!(ev.first().map(|e| (e.kind, e.value)), Some((AlertKind::Raised, 0.2)), "{ev:?}");
    let stats = plumbline::report::RunStats::new(&rules_config(&both).report);
    assert_eq!(rules.verdicts(&stats)[0].worst, Some(0.2));
    // Only where the window's statistics give |value| exactly.
    let bad = rule.replace("\"max\"", "\"p95\"") + "magnitude = true\n";
    let e = Config::load(Some(("r.toml", &bad)), &[]).unwrap_err();
    assert_eq!(e.key, "rule[0].magnitude");
}
