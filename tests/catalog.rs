//! The metric catalog (`src/metrics/catalog.rs`) is the one place a metric's properties
//! live; every surface reads it. For every row: the Prometheus family and its help text,
//! the gate's default direction, the glossary line, the dashboard tile's label and unit,
//! the report's totals. A metric added to the catalog reaches all of them with no other
//! edit, which this test checks row by row.

use plumbline::config::Config;
use plumbline::core::Sample;
use plumbline::dashboard::{Dashboard, DashboardParams};
use plumbline::gate;
use plumbline::metrics::catalog::{self, Kind, Worse, ROWS};
use plumbline::metrics::Metric;
use plumbline::monitor::Monitor;

#[test]
fn every_row_reaches_the_glossary_and_the_gate() {
    let glossary = catalog::glossary_markdown();
    let one = serde_json::json!({"count": 1, "mean": 1.0, "min": 1.0, "max": 1.0, "p50": 1.0, "p95": 1.0, "p99": 1.0, "sum": 1.0});
    let metrics: serde_json::Map<String, serde_json::Value> =
        ROWS.iter().map(|r| (r.name.to_string(), one.clone())).collect();
    let report = serde_json::json!({ "tool": "plumbline", "metrics": metrics }).to_string();
    let report = plumbline::report::Report::read(&report).unwrap();
    let tolerances = gate::default_tolerances(&report, &report);
    for r in &ROWS {
        let line =
            format!("| `{}` | {} | {} | `{}` |", r.name, r.unit, r.meaning, catalog::prom_name(r.metric));
        assert!(glossary.contains(&line), "glossary lacks {line}");
        let gated = tolerances.iter().find(|t| t.metric == r.name);
        let expected = match (r.kind, r.worse) {
            (Kind::PerRole, _) | (_, Worse::Neither) => None,
            (_, Worse::Higher) => Some(gate::Worse::Higher),
            (_, Worse::Lower) => Some(gate::Worse::Lower),
        };
        assert_eq!(gated.map(|t| t.worse), expected, "{}", r.name);
        assert_eq!(Metric::from_name(r.name), Some(r.metric));
        assert_eq!(r.metric.is_count(), r.kind == Kind::Count);
        assert_eq!(r.metric.is_per_role(), r.kind == Kind::PerRole);
    }
}

#[test]
fn the_dashboard_tiles_are_the_catalog_rows_marked_tile_with_their_labels_and_units() {
    let cfg = Config::defaults();
    let mut m = Monitor::new(&cfg.monitor());
    let params = DashboardParams { rate_hz: 5.0, history: 2.0, step: 0.5, stale_after: 1.0 };
    let mut d = Dashboard::new(params, &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    let tiles: Vec<&catalog::Row> = ROWS.iter().filter(|r| r.tile).collect();
    assert!(!tiles.is_empty());
    let extra: Vec<Sample> =
        tiles.iter().map(|r| Sample { t: 1.0, metric: r.metric, role: None, value: 0.25 }).collect();
    let (mut s, mut e) = (Vec::new(), Vec::new());
    m.inject(&mut s, &extra, &mut e);
    d.observe(1.0, &s, &e);
    let snap = d.snapshot(&m);
    assert_eq!(snap.tiles.len(), tiles.len());
    for (t, r) in snap.tiles.iter().zip(&tiles) {
        assert_eq!(
            (t.metric, t.label, t.unit, t.value),
            (r.name, r.label.unwrap_or(r.name), r.unit, Some(0.25))
        );
    }
}

#[cfg(feature = "live")]
#[test]
fn every_row_has_a_prometheus_family_with_its_meaning_as_help() {
    let x = plumbline::live::exposition::Exposition::new(&Config::defaults());
    for r in &ROWS {
        let role = r.metric.is_per_role().then_some(plumbline::msg::Role::EstimateObjects);
        x.sample(&Sample { t: 1.0, metric: r.metric, role, value: 1.0 });
    }
    let text = x.text();
    for r in &ROWS {
        let help = format!("# HELP {} {}: {}", catalog::prom_name(r.metric), r.name, r.meaning);
        assert!(text.lines().any(|l| l == help), "no `{help}` in /metrics");
    }
}
