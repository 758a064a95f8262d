//! The dashboard's model (pure): chart rows read the shortest window, gaps stay gaps, the
//! ring is bounded, tiles and roles go stale, alerts are active from raise to clear, and the
//! message rate is counted over the monitor's clock. Values are worked by hand.

mod support;

use plumbline::config::Config;
use plumbline::core::{Input, Sample};
use plumbline::dashboard::{Dashboard, DashboardParams};
use plumbline::metrics::Metric;
use plumbline::monitor::Monitor;
use plumbline::msg::{Msg, Pose, Role};
use plumbline::rules::{AlertEvent, AlertKind, Severity};

fn params() -> DashboardParams {
    DashboardParams { rate_hz: 5.0, history: 2.0, step: 0.5, stale_after: 1.0 }
}

fn sample(t: f64, metric: Metric, value: f64) -> Sample {
    Sample { t, metric, role: None, value }
}

fn line<'a>(snap: &'a plumbline::dashboard::Snapshot, chart: &str, metric: &str) -> &'a [Option<f64>] {
    let c = snap.charts.iter().find(|c| c.id == chart).expect("chart");
    &c.lines.iter().find(|l| l.metric == metric).expect("line").values
}

#[test]
fn rows_read_the_shortest_window_and_gaps_stay_null() {
    let cfg = Config::defaults(); // windows 1 s, 10 s, 60 s
    let mut m = Monitor::new(&cfg.monitor());
    let mut d = Dashboard::new(params(), &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    let (mut s, mut e) = (Vec::new(), Vec::new());
    d.tick(100.0, &m); // row 1: nothing yet
    let extra = [sample(100.2, Metric::Gospa, 1.0), sample(100.4, Metric::Gospa, 3.0)];
    m.inject(&mut s, &extra, &mut e);
    d.observe(100.4, &s, &e);
    d.tick(100.5, &m); // row 2: mean of 1 and 3
    let snap = d.snapshot(&m);
    assert_eq!(snap.row_times, vec![100.0, 100.5]);
    assert_eq!(line(&snap, "gospa", "gospa"), &[None, Some(2.0)]);
    // The parts had no value: null, not zero.
    assert_eq!(line(&snap, "gospa", "gospa_missed"), &[None, None]);
    // Clearance reads the window minimum.
    s.clear();
    let extra = [sample(100.6, Metric::Clearance, 0.8), sample(100.7, Metric::Clearance, 0.3)];
    m.inject(&mut s, &extra, &mut e);
    d.observe(100.7, &s, &e);
    d.tick(100.9, &m); // not due: rows sit on the 0.5 s grid
    d.tick(101.0, &m);
    let snap = d.snapshot(&m);
    assert_eq!(snap.row_times.len(), 3);
    assert_eq!(line(&snap, "clearance", "clearance_m")[2], Some(0.3));
    // GOSPA last had a value at 100.4: at 101.5 (1.1 s later, past stale_after = 1 s) its
    // line breaks although its window still holds the old values; clearance (0.8 s) holds.
    d.tick(101.5, &m);
    let snap = d.snapshot(&m);
    assert_eq!(line(&snap, "gospa", "gospa")[3], None);
    assert_eq!(line(&snap, "clearance", "clearance_m")[3], Some(0.3));
}

#[test]
fn the_ring_keeps_history_over_step_rows() {
    let cfg = Config::defaults();
    let m = Monitor::new(&cfg.monitor());
    let mut d = Dashboard::new(params(), &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    for k in 0..50 {
        d.tick(k as f64 * 0.5, &m);
    }
    let snap = d.snapshot(&m);
    // 2 s of history at 0.5 s: 4 rows, the newest ones.
    assert_eq!(snap.row_times, vec![23.0, 23.5, 24.0, 24.5]);
    assert!(snap.charts.iter().all(|c| c.lines.iter().all(|l| l.values.len() == 4)));
    // The clock jumps back an hour: rows go on at once instead of waiting for it to return.
    d.tick(24.5 - 3600.0, &m);
    assert_eq!(*d.snapshot(&m).row_times.last().unwrap(), 24.5 - 3600.0);
}

#[test]
fn tiles_go_from_no_data_to_ok_to_stale() {
    let cfg = Config::defaults();
    let m = Monitor::new(&cfg.monitor());
    let mut d = Dashboard::new(params(), &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    d.observe(10.0, &[], &[]);
    let tile = |d: &Dashboard| d.snapshot(&m).tiles.into_iter().find(|t| t.metric == "gospa").unwrap();
    assert_eq!(tile(&d).state, "no_data");
    assert_eq!(tile(&d).value, None);
    d.observe(10.5, &[sample(10.4, Metric::Gospa, 1.25)], &[]);
    let t = tile(&d);
    assert_eq!((t.state, t.value, t.t, t.age_s), ("ok", Some(1.25), Some(10.4), Some(0.0)));
    d.observe(11.5, &[], &[]); // 1.0 s later: not yet beyond stale_after
    assert_eq!(tile(&d).state, "ok");
    d.observe(11.6, &[], &[]);
    let t = tile(&d);
    assert_eq!(t.state, "stale");
    assert!((t.age_s.unwrap() - 1.1).abs() < 1e-9);
}

fn event(kind: AlertKind, t: f64) -> AlertEvent {
    AlertEvent {
        rule: "collision".into(),
        kind,
        t,
        value: 1.0,
        threshold: 0.5,
        severity: Severity::Critical,
        metric: "collision".into(),
        stat: "max".into(),
        window: "1s".into(),
        role: None,
    }
}

#[test]
fn an_alert_is_active_from_raise_to_clear() {
    let cfg = Config::defaults();
    let m = Monitor::new(&cfg.monitor());
    let mut d = Dashboard::new(params(), &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    d.observe(50.0, &[], &[event(AlertKind::Raised, 49.9)]);
    d.observe(53.0, &[], &[]);
    let snap = d.snapshot(&m);
    assert_eq!(snap.alerts_active.len(), 1);
    let a = &snap.alerts_active[0];
    assert_eq!((a.rule.as_str(), a.raised_t, a.active_s), ("collision", 49.9, 3.0));
    d.observe(54.0, &[], &[event(AlertKind::Cleared, 53.9)]);
    let snap = d.snapshot(&m);
    assert!(snap.alerts_active.is_empty());
    // Newest first.
    let kinds: Vec<_> = snap.alerts_recent.iter().map(|e| (e.kind, e.t)).collect();
    assert_eq!(kinds, vec![(AlertKind::Cleared, 53.9), (AlertKind::Raised, 49.9)]);
    // Bounded.
    for k in 0..100 {
        d.observe(60.0 + k as f64, &[], &[event(AlertKind::Raised, 60.0 + k as f64)]);
    }
    let snap = d.snapshot(&m);
    assert_eq!(snap.alerts_recent.len(), plumbline::dashboard::RECENT_EVENTS);
    assert_eq!(snap.alerts_active.len(), 1, "one entry per rule and role");
}

#[test]
fn topic_rate_and_state_follow_the_monitor_clock() {
    let cfg = Config::defaults();
    let mut m = Monitor::new(&cfg.monitor());
    let mut d = Dashboard::new(params(), &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    let (mut s, mut e) = (Vec::new(), Vec::new());
    // 10 Hz estimated poses for 3 s, ticking every 0.5 s.
    for k in 0..=30 {
        let t = 200.0 + k as f64 * 0.1;
        let msg = Msg::Pose(Pose { stamp: t - 0.02, x: 0.0, y: 0.0, yaw: 0.0, v: None, cov: None });
        m.push(Input::Message { role: Role::EstimateEgo, recv: Some(t), msg }, &mut s, &mut e);
        if k % 5 == 0 {
            d.observe(t, &s, &e);
            d.tick(t, &m);
        }
    }
    let snap = d.snapshot(&m);
    let topic = |snap: &plumbline::dashboard::Snapshot, r: &str| {
        snap.topics.iter().find(|x| x.role == r).cloned().unwrap()
    };
    let ego = topic(&snap, "estimate/ego");
    assert_eq!(ego.state, "ok");
    assert_eq!(ego.messages, 31);
    // 30 messages between the first tick (1 message) and the last (31) 3 s later.
    assert!((ego.rate_hz.unwrap() - 10.0).abs() < 1e-9, "{:?}", ego.rate_hz);
    // Latency is recv - stamp = 0.02 s for every message (sketch error under 0.4%).
    assert!((ego.latency_p99_s.unwrap() - 0.02).abs() <= 0.02 * 0.004);
    assert_eq!(topic(&snap, "reference/ego").state, "no_data");
    d.observe(204.5, &[], &[]);
    assert_eq!(topic(&d.snapshot(&m), "estimate/ego").state, "stale");
}

/// When every role heard has gone quiet the header says so, and an alert whose metric has
/// had no value for `stale_after` is marked stale. Before: the header said "streaming" and
/// a critical contact alert stayed active with nothing saying its input had stopped.
#[test]
fn the_header_and_the_alerts_say_when_the_input_is_stale() {
    let cfg = Config::defaults();
    let mut m = Monitor::new(&cfg.monitor());
    let mut d = Dashboard::new(params(), &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    let (mut s, mut e) = (Vec::new(), Vec::new());
    assert_eq!(d.snapshot(&m).input, "no_data");
    for k in 0..10 {
        let t = 300.0 + k as f64 * 0.1;
        let msg = Msg::Pose(Pose { stamp: t, x: 0.0, y: 0.0, yaw: 0.0, v: None, cov: None });
        m.push(Input::Message { role: Role::ReferenceEgo, recv: Some(t), msg }, &mut s, &mut e);
    }
    let contact = [sample(300.9, Metric::Collision, 1.0)];
    m.inject(&mut s, &contact, &mut e);
    d.observe(300.9, &s, &[event(AlertKind::Raised, 300.9)]);
    let snap = d.snapshot(&m);
    assert_eq!(snap.input, "live");
    assert!(!snap.alerts_active[0].stale);
    // 1.5 s of silence, past stale_after = 1 s.
    d.observe(302.4, &[], &[]);
    let snap = d.snapshot(&m);
    assert_eq!(snap.input, "stale");
    assert_eq!(snap.alerts_active.len(), 1, "still raised: nothing cleared it");
    assert!(snap.alerts_active[0].stale, "but marked stale");
}

/// The shipped log's identity switch reaches the dashboard: replayed with T-GOSPA on, the
/// "T-GOSPA switches" tile reads 2 once the window ending at 31.02 s is in (the swap at
/// 30.02 s); a dashboard for a monitor without T-GOSPA shows no T-GOSPA tile.
#[test]
fn the_identity_switch_shows_on_the_tgospa_switches_tile() {
    let cfg = Config::load(None, &["tgospa.enabled=true".into()]).unwrap();
    let (_, samples) = support::run(&cfg, &support::repo("replay-logs/campus-loop.jsonl"));
    let mut m = Monitor::new(&cfg.monitor());
    let mut d = Dashboard::new(params(), &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    let upto: Vec<_> = samples.iter().copied().filter(|s| s.t <= 31.5).collect();
    let (mut s, mut e) = (Vec::new(), Vec::new());
    m.inject(&mut s, &upto, &mut e);
    d.observe(31.5, &s, &e);
    let snap = d.snapshot(&m);
    let tile = snap.tiles.iter().find(|t| t.metric == "tgospa_switches").expect("a T-GOSPA switches tile");
    assert_eq!((tile.label, tile.value, tile.t), ("T-GOSPA switches", Some(2.0), Some(31.02)));
    d.keep_tiles(|m| !plumbline::metrics::catalog::row(m).name.starts_with("tgospa"));
    assert!(d.snapshot(&m).tiles.iter().all(|t| !t.metric.starts_with("tgospa")));
}
