//! `watch`: the live monitor. Subscriptions decode samples on zenoh's threads and hand them
//! through one bounded queue (bounded in messages and in objects; when full, the newest
//! message is dropped and counted per role) to the engine loop on the calling thread, which
//! drives the same [`Monitor`] that replay drives, advances it on a clock tick so waiting
//! steps resolve by `max_wait`, feeds the recorder, the alert journal, the alerts key and
//! the dashboard, and refreshes the exposition.
//! One shutdown path: the `stop` flag (set by SIGINT/SIGTERM or the caller) ends the loop,
//! then the monitor finishes, the recorder flushes and the report is written.

use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, AtomicI64, AtomicU64, Ordering};
use std::sync::mpsc::{sync_channel, RecvTimeoutError, TrySendError};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use zenoh::Wait;

use super::exposition::Exposition;
use super::zenoh_io::{self, wall_now};
use crate::config::Config;
use crate::core::{Input, JobOutcome, Sample, TgospaJob};
use crate::dashboard::Dashboard;
use crate::logio::journal::Journal;
use crate::logio::{plb, LogRecord};
use crate::metrics::Metric;
use crate::monitor::Monitor;
use crate::msg::{Reject, Role};
use crate::report::{BadRecord, Report, RunInputs};
use crate::rules::AlertEvent;

/// What the watcher writes besides the exposition.
#[derive(Debug, Clone, Default)]
pub struct WatchOptions {
    /// Final report.
    pub report: Option<PathBuf>,
    /// Binary recording of every received message.
    pub record: Option<PathBuf>,
    /// Alert journal (JSON lines).
    pub journal: Option<PathBuf>,
    /// Stop after this many seconds.
    pub duration: Option<f64>,
    /// Do not evaluate (the `record` command): only record.
    pub record_only: bool,
}

/// State shared with the HTTP server.
pub struct Shared {
    /// The exposition.
    pub exposition: Mutex<Exposition>,
    /// Set once every subscription is declared.
    pub ready: AtomicBool,
    /// The latest dashboard snapshot (JSON), replaced at `dashboard.rate_hz`; the page's
    /// event streams wait on it.
    pub snapshot: tokio::sync::watch::Sender<Arc<str>>,
    /// What the monitor reports on itself, kept apart from the engine so that it stays
    /// true while the engine is busy or stuck.
    pub liveness: Liveness,
}

/// The monitor's own state, written by the subscriptions and the engine loop with atomics
/// and read at each scrape and health check, never through the engine.
pub struct Liveness {
    /// Messages in the queue (counted up on send, down on receipt).
    pub queued: AtomicI64,
    /// When the engine loop last made progress: milliseconds since `epoch`.
    heartbeat_ms: AtomicU64,
    epoch: Instant,
    /// Per role, the wall time of the latest sample (f64 bits; 0 = none yet).
    last_arrival: Vec<AtomicU64>,
    /// `live.stall_after` (s).
    stall_after: f64,
    /// Per role, the publishers heard (by the name their attachment gives, or
    /// `unidentified`) and when each was last heard (wall time); at most
    /// [`MAX_SOURCES`] a role, the longest silent forgotten first.
    sources: Mutex<Vec<Vec<(String, f64)>>>,
}

/// Publishers remembered per role.
pub const MAX_SOURCES: usize = 64;
/// A publisher counts in `publishers` while it was heard this recently (s).
pub const SOURCE_WINDOW: f64 = 10.0;

impl Liveness {
    /// Liveness for `live.stall_after` = `stall_after` (s); the engine counts as having
    /// made progress now.
    pub fn new(stall_after: f64) -> Liveness {
        Liveness {
            queued: AtomicI64::new(0),
            heartbeat_ms: AtomicU64::new(0),
            epoch: Instant::now(),
            last_arrival: Role::ALL.iter().map(|_| AtomicU64::new(0)).collect(),
            stall_after,
            sources: Mutex::new(vec![Vec::new(); Role::ALL.len()]),
        }
    }

    /// A sample of `role` from the publisher `source` arrived at wall time `t`.
    pub fn heard_from(&self, role: Role, source: &str, t: f64) {
        let Ok(mut all) = self.sources.lock() else { return };
        let list = &mut all[role.index()];
        if let Some(e) = list.iter_mut().find(|(s, _)| s == source) {
            e.1 = t;
            return;
        }
        if list.len() >= MAX_SOURCES {
            if let Some(k) = (0..list.len()).min_by(|&a, &b| list[a].1.total_cmp(&list[b].1)) {
                list.swap_remove(k);
            }
        }
        list.push((source.to_string(), t));
    }

    /// Publishers of `role` heard in the [`SOURCE_WINDOW`] before `now`, and their names.
    pub fn publishers(&self, role: Role, now: f64) -> (usize, Vec<String>) {
        let Ok(all) = self.sources.lock() else { return (0, Vec::new()) };
        let names: Vec<String> = all[role.index()]
            .iter()
            .filter(|(_, t)| now - t <= SOURCE_WINDOW)
            .map(|(s, _)| s.clone())
            .collect();
        (names.len(), names)
    }

    /// The engine loop made progress.
    pub fn beat(&self) {
        self.heartbeat_ms.store(self.epoch.elapsed().as_millis() as u64, Ordering::Relaxed);
    }

    /// A sample arrived on `role` at wall time `t`.
    pub fn arrived(&self, role: Role, t: f64) {
        self.last_arrival[role.index()].store(t.to_bits(), Ordering::Relaxed);
    }

    /// Seconds since the latest sample of `role` at wall time `now`, if one arrived.
    pub fn staleness(&self, role: Role, now: f64) -> Option<f64> {
        let bits = self.last_arrival[role.index()].load(Ordering::Relaxed);
        (bits != 0).then(|| (now - f64::from_bits(bits)).max(0.0))
    }

    /// Messages waiting for the engine.
    pub fn queue_len(&self) -> usize {
        self.queued.load(Ordering::Relaxed).max(0) as usize
    }

    /// `Some(seconds without progress)` when the engine has made none for longer than
    /// `live.stall_after` while messages wait: the monitor is not keeping up and its
    /// gauges of metrics are old.
    pub fn stalled(&self) -> Option<f64> {
        let idle =
            self.epoch.elapsed().as_secs_f64() - self.heartbeat_ms.load(Ordering::Relaxed) as f64 / 1e3;
        (self.queue_len() > 0 && idle > self.stall_after).then_some(idle)
    }
}

impl Shared {
    /// Shared state for a config, with an empty snapshot until the watcher publishes one.
    pub fn new(cfg: &Config) -> Shared {
        Shared {
            exposition: Mutex::new(Exposition::new(cfg)),
            ready: AtomicBool::new(false),
            snapshot: tokio::sync::watch::Sender::new(Arc::from("{}")),
            liveness: Liveness::new(cfg.live.stall_after),
        }
    }

    /// The exposition text with the monitor's own gauges (staleness per role, queue
    /// length) set from [`Liveness`] at `now`, so they move even while the engine does not.
    pub fn metrics_text(&self, now: f64) -> String {
        let Ok(x) = self.exposition.lock() else { return String::new() };
        for r in Role::ALL {
            if let Some(v) = self.liveness.staleness(r, now) {
                x.sample(&Sample { t: now, metric: Metric::Staleness, role: Some(r), value: v });
            }
        }
        x.queue_len(self.liveness.queue_len());
        x.text()
    }
}

type Item = (Role, Instant, Result<LogRecord, Reject>);

/// How long the shutdown path keeps evaluating what was queued before the stop.
const DRAIN: Duration = Duration::from_millis(500);

/// Runs the watcher until `stop` is set (or `duration` passes). `shared` carries the
/// exposition the HTTP server reads.
pub fn run(
    cfg: &Config,
    opts: &WatchOptions,
    stop: &AtomicBool,
    shared: &Arc<Shared>,
    session: &zenoh::Session,
) -> Result<Report, String> {
    let (tx, rx) = sync_channel::<Item>(cfg.live.queue);
    let dropped: Arc<Vec<AtomicU64>> = Arc::new(Role::ALL.iter().map(|_| AtomicU64::new(0)).collect());
    // Messages in the queue (`shared.liveness.queued`): counted up on send, down on
    // receipt, for the queue gauge and the health check; and their objects, against
    // `live.queue_objects`, so that large messages cannot make the queue's memory grow
    // past that bound.
    let queued_objects = Arc::new(AtomicI64::new(0));
    let object_budget = cfg.live.queue_objects as i64;
    let mut subs = Vec::new();
    for (role, key) in &cfg.roles {
        let (role, tx, dropped, c, q) = (*role, tx.clone(), dropped.clone(), cfg.clone(), shared.clone());
        let qo = queued_objects.clone();
        let bound = zenoh::key_expr::KeyExpr::try_from(key.clone())
            .map_err(|e| format!("roles.{}: {key} is not a key expression: {e}", role.name()))?;
        let sub = session
            .declare_subscriber(key.as_str())
            .callback(move |sample| {
                let recv = wall_now();
                q.liveness.arrived(role, recv);
                let source = sample.attachment().and_then(|a| zenoh_io::source_of(&a.to_bytes()));
                q.liveness.heard_from(role, source.as_deref().unwrap_or("unidentified"), recv);
                let rec = if zenoh_io::is_role_data(&bound, sample.key_expr()) {
                    let payload = sample.payload().to_bytes();
                    zenoh_io::decode(&c, role, sample.key_expr().as_str(), sample.encoding(), &payload, recv)
                } else {
                    Err(Reject::UnboundKey(sample.key_expr().to_string()))
                };
                let n = weight(&rec);
                if qo.fetch_add(n, Ordering::Relaxed) + n > object_budget {
                    qo.fetch_sub(n, Ordering::Relaxed);
                    dropped[role.index()].fetch_add(1, Ordering::Relaxed);
                    return;
                }
                match tx.try_send((role, Instant::now(), rec)) {
                    Ok(()) => {
                        q.liveness.queued.fetch_add(1, Ordering::Relaxed);
                    }
                    Err(TrySendError::Full(_)) => {
                        qo.fetch_sub(n, Ordering::Relaxed);
                        dropped[role.index()].fetch_add(1, Ordering::Relaxed);
                    }
                    Err(TrySendError::Disconnected(_)) => {}
                }
            })
            .wait()
            .map_err(|e| format!("subscribing to {key}: {e}"))?;
        subs.push(sub);
    }
    drop(tx);
    shared.ready.store(true, Ordering::SeqCst);
    tracing::info!(roles = subs.len(), "subscriptions live");

    let alerts_key = format!("{}/monitor/alerts", cfg.prefix);
    let alert_pub = session
        .declare_publisher(alerts_key.clone())
        .wait()
        .map_err(|e| format!("declaring {alerts_key}: {e}"))?;
    let mut recorder = match &opts.record {
        None => None,
        Some(p) => Some(
            plb::create(p, &plb::Header::for_config(&cfg.log(), wall_now()))
                .map_err(|e| format!("{}: {e}", p.display()))?,
        ),
    };
    let mut journal = match &opts.journal {
        None => None,
        Some(p) => Some(Journal::open(p).map_err(|e| format!("{}: {e}", p.display()))?),
    };
    let mut monitor = Monitor::new(&cfg.monitor());
    let mut dashboard = Dashboard::new(cfg.dashboard, &cfg.windows, &cfg.window_labels, cfg.tracking.order);
    if cfg.tgospa.is_none() {
        dashboard.keep_tiles(|m| !crate::metrics::catalog::row(m).name.starts_with("tgospa"));
    }
    let snapshot_every = 1.0 / cfg.dashboard.rate_hz;
    let mut last_snapshot: Option<Instant> = None;
    let (mut samples, mut events) = (Vec::new(), Vec::new());
    if let Some(path) = &cfg.map_file {
        let map = crate::logio::read_map(path, &cfg.limits()).map_err(|e| e.to_string())?;
        monitor.push(map, &mut samples, &mut events);
    }
    // T-GOSPA windows are solved on a thread of their own, off the loop that drives the
    // gauges, its components on a pool of its own; all of them at the lowest CPU priority,
    // so a solve takes only the time the loop leaves idle (measured at 2,000 msg/s with
    // rivals in every group: receipt-to-gauge p99 846 us with the solver at normal
    // priority, against 91 us with T-GOSPA off). Their samples join the monitor when they
    // are ready. A window that finds the solver still busy with two others is skipped and
    // counted (`busy`).
    let tgospa = monitor.engine.has_tgospa().then(|| {
        monitor.engine.defer_tgospa(true);
        let (jobs, job_rx) = sync_channel::<TgospaJob>(2);
        let (res_tx, results) = sync_channel::<(Vec<Sample>, JobOutcome)>(4);
        let worker = std::thread::Builder::new().name("plumbline-tgospa".into()).spawn(move || {
            lowest_priority();
            let pool = rayon::ThreadPoolBuilder::new()
                .thread_name(|i| format!("plumbline-tgospa-{i}"))
                .start_handler(|_| lowest_priority())
                .build()
                .inspect_err(|e| {
                    tracing::warn!("T-GOSPA components solved one after another: no pool ({e})")
                });
            for job in job_rx.iter() {
                let mut out = Vec::new();
                let outcome = match &pool {
                    Ok(pool) => pool.install(|| job.run_on(&crate::threads::Pooled, &mut out)),
                    Err(_) => job.run(&mut out),
                };
                if res_tx.send((out, outcome)).is_err() {
                    break;
                }
            }
        });
        (jobs, results, worker)
    });
    let mut first_bad = Vec::new();
    let mut dropped_seen = vec![0u64; Role::ALL.len()];
    let mut record_failed = false;
    let started = Instant::now();
    let (mut last_refresh, mut last_flush) = (Instant::now(), Instant::now());
    let tick = Duration::from_secs_f64(cfg.live.tick.max(0.001));
    let mut n_bad = 0u64;
    let mut ingest = hdrhistogram::Histogram::<u64>::new(3).expect("3 digits are valid");

    let live = &shared.liveness;
    let must_stop =
        || stop.load(Ordering::SeqCst) || opts.duration.is_some_and(|d| started.elapsed().as_secs_f64() >= d);
    // Messages taken from the queue but not evaluated because the stop came first.
    let mut cut_short = [0u64; 6];
    // Roles with more than one publisher now (warned once each time it starts).
    let mut merged = [false; 6];
    // Messages of a batch the stop interrupted, for the shutdown drain.
    let mut leftover: Vec<Item> = Vec::new();
    'run: loop {
        live.beat();
        if must_stop() {
            break;
        }
        let got = rx.recv_timeout(tick);
        // The clock reading comes before draining the queue: every message stamped on
        // arrival at or before `now` is then in the queue and is processed before waiting
        // steps time out at `now`, which is the order replay sees.
        let now = wall_now();
        match got {
            Ok(first) => {
                let mut batch = vec![first];
                while let Ok(x) = rx.try_recv() {
                    batch.push(x);
                }
                live.queued.fetch_sub(batch.len() as i64, Ordering::Relaxed);
                queued_objects.fetch_sub(batch.iter().map(|(_, _, r)| weight(r)).sum(), Ordering::Relaxed);
                let mut batch = batch.into_iter();
                while let Some((role, got, item)) = batch.next() {
                    // A stop takes effect between two messages, whatever the batch holds;
                    // what is left of it goes to the shutdown drain, ahead of the queue.
                    if must_stop() {
                        leftover.push((role, got, item));
                        leftover.extend(batch);
                        break 'run;
                    }
                    live.beat();
                    let before = samples.len();
                    match item {
                        Ok(rec) => {
                            if let Some(w) = recorder.as_mut() {
                                if let Err(e) = w.write(&rec) {
                                    if !record_failed {
                                        tracing::error!(error = %e, "recorder write failed; monitoring goes on");
                                        errln!("plumbline: recorder: {e}; monitoring goes on");
                                        record_failed = true;
                                    }
                                }
                            }
                            if !opts.record_only {
                                monitor.push(
                                    Input::Message { role, recv: rec.recv, msg: rec.msg },
                                    &mut samples,
                                    &mut events,
                                );
                            }
                        }
                        Err(reason) => {
                            n_bad += 1;
                            tracing::warn!(role = role.name(), reason = %reason, "rejected message");
                            if first_bad.len() < crate::logio::KEEP_BAD {
                                first_bad.push(BadRecord {
                                    at: format!("message {n_bad}"),
                                    role: Some(role.name().into()),
                                    reason: reason.code().into(),
                                    detail: reason.to_string(),
                                });
                            }
                            monitor.push(
                                Input::Rejected { role: Some(role), reason: reason.code() },
                                &mut samples,
                                &mut events,
                            );
                        }
                    }
                    if let Ok(x) = shared.exposition.lock() {
                        for s in &samples[before..] {
                            x.sample(s);
                        }
                        let d = got.elapsed();
                        x.ingest(d.as_secs_f64());
                        let _ = ingest.record(d.as_nanos() as u64);
                    }
                }
            }
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => break,
        }
        let from_messages = samples.len();
        for r in Role::ALL {
            let d = dropped[r.index()].load(Ordering::Relaxed);
            for _ in dropped_seen[r.index()]..d {
                monitor.push(Input::Dropped { role: r }, &mut samples, &mut events);
            }
            dropped_seen[r.index()] = d;
        }
        monitor.advance(now, &mut samples, &mut events);
        if let Some((jobs, results, _)) = &tgospa {
            for job in monitor.engine.take_tgospa_jobs() {
                let block = job.is_block();
                if jobs.try_send(job).is_err() {
                    let skipped = if block { JobOutcome::BlockSkipped } else { JobOutcome::Skipped("busy") };
                    monitor.engine.count_tgospa(skipped);
                }
            }
            while let Ok((solved, outcome)) = results.try_recv() {
                monitor.engine.count_tgospa(outcome);
                monitor.inject(&mut samples, &solved, &mut events);
            }
        }
        let refresh_due = last_refresh.elapsed().as_secs_f64() >= cfg.live.refresh;
        if refresh_due {
            // Staleness of every role heard from, and how many publishers each has, as
            // samples so rules can watch them (a rule `publishers above 1` requires one).
            let mut stale: Vec<Sample> = Role::ALL
                .iter()
                .filter_map(|&r| {
                    monitor.engine.transport(r).staleness(now).map(|v| Sample {
                        t: now,
                        metric: Metric::Staleness,
                        role: Some(r),
                        value: v,
                    })
                })
                .collect();
            for r in Role::ALL {
                let (n, names) = live.publishers(r, now);
                if n == 0 {
                    continue;
                }
                stale.push(Sample { t: now, metric: Metric::Publishers, role: Some(r), value: n as f64 });
                if n > 1 && !merged[r.index()] {
                    tracing::warn!(role = r.name(), publishers = ?names, "more than one publisher on a role");
                    errln!(
                        "plumbline: warning: {} has {n} publishers ({}): their messages merge into one stream",
                        r.name(),
                        names.join(", ")
                    );
                }
                merged[r.index()] = n > 1;
            }
            monitor.inject(&mut samples, &stale, &mut events);
        }
        handle(&samples[from_messages..], &events, shared, &alert_pub, journal.as_mut());
        dashboard.observe(now, &samples, &events);
        dashboard.tick(now, &monitor);
        samples.clear();
        events.clear();
        if last_snapshot.is_none_or(|t| t.elapsed().as_secs_f64() >= snapshot_every) {
            publish_snapshot(shared, &dashboard, &monitor);
            last_snapshot = Some(Instant::now());
        }
        if refresh_due {
            if let Ok(mut x) = shared.exposition.lock() {
                x.refresh(&monitor);
                x.queue_len(live.queue_len());
            }
            last_refresh = Instant::now();
        }
        if last_flush.elapsed().as_secs_f64() >= cfg.live.flush {
            if let Some(w) = recorder.as_mut() {
                if let Err(e) = w.flush() {
                    if !record_failed {
                        errln!("plumbline: recorder: {e}; monitoring goes on");
                        record_failed = true;
                    }
                }
            }
            last_flush = Instant::now();
        }
    }

    // The one shutdown path: drain what arrived (for at most `DRAIN` after the stop),
    // finish, flush, report. Past the deadline, what is still queued and the steps still
    // waiting are counted as cut short instead of evaluated, so a stop takes effect
    // within about a second whatever the engine was given.
    drop(subs);
    let stopping = Instant::now();
    let mut rest = leftover.into_iter().chain(std::iter::from_fn(|| rx.try_recv().ok()));
    for (role, _, item) in rest.by_ref() {
        if stopping.elapsed() > DRAIN {
            cut_short[role.index()] += 1;
            continue;
        }
        let Ok(rec) = item else { continue };
        if let Some(w) = recorder.as_mut() {
            let _ = w.write(&rec);
        }
        if !opts.record_only {
            monitor.push(Input::Message { role, recv: rec.recv, msg: rec.msg }, &mut samples, &mut events);
        }
    }
    let unevaluated: u64 = cut_short.iter().sum();
    for r in Role::ALL {
        for _ in 0..cut_short[r.index()] {
            monitor.push(Input::CutShort { role: r }, &mut samples, &mut events);
        }
    }
    if stopping.elapsed() > DRAIN {
        monitor.engine.cut_short();
    }
    let waiting = monitor.engine.counters().tracking.skipped_by_reason.get("cut_short").copied().unwrap_or(0)
        + monitor.engine.counters().ego.skipped_by_reason.get("cut_short").copied().unwrap_or(0);
    if unevaluated + waiting > 0 {
        tracing::warn!(messages = unevaluated, steps = waiting, "stopped before evaluating everything");
        errln!(
            "plumbline: stopped with {unevaluated} received messages not evaluated and {waiting} waiting steps cut short (counted in the report)"
        );
    }
    monitor.finish(&mut samples, &mut events);
    if let Some((jobs, results, worker)) = tgospa {
        // The windows still queued are solved before the report; the last ones here.
        drop(jobs);
        for (solved, outcome) in results.iter() {
            monitor.engine.count_tgospa(outcome);
            monitor.inject(&mut samples, &solved, &mut events);
        }
        if let Ok(w) = worker {
            let _ = w.join();
        }
        let mut solved = Vec::new();
        for job in monitor.engine.take_tgospa_jobs() {
            let outcome = job.run_on(&crate::threads::Pooled, &mut solved);
            monitor.engine.count_tgospa(outcome);
        }
        monitor.inject(&mut samples, &solved, &mut events);
    }
    handle(&samples, &events, shared, &alert_pub, journal.as_mut());
    dashboard.observe(wall_now(), &samples, &events);
    publish_snapshot(shared, &dashboard, &monitor);
    if let Ok(mut x) = shared.exposition.lock() {
        x.refresh(&monitor);
    }
    if let Some(w) = recorder.as_mut() {
        let _ = w.flush();
    }
    if !ingest.is_empty() {
        let (p50, p99) =
            (ingest.value_at_quantile(0.5) as f64 / 1e3, ingest.value_at_quantile(0.99) as f64 / 1e3);
        tracing::info!(messages = ingest.len(), p50_us = p50, p99_us = p99, "receipt to gauge update");
        errln!(
            "plumbline: receipt to gauge update over {} messages: p50 {p50:.1} us, p99 {p99:.1} us",
            ingest.len()
        );
    }
    let inputs = RunInputs {
        input: "live".into(),
        input_digest: String::new(),
        first_rejected: first_bad,
        tail: None,
        damage: Default::default(),
    };
    let report = Report::build(&cfg.report_settings(), &monitor, inputs);
    if let Some(p) = &opts.report {
        std::fs::write(p, report.to_json()).map_err(|e| format!("{}: {e}", p.display()))?;
    }
    Ok(report)
}

/// What a queued message counts against `live.queue_objects`.
fn weight(rec: &Result<LogRecord, Reject>) -> i64 {
    match rec {
        Ok(r) => match &r.msg {
            crate::msg::Msg::Objects(m) => m.objects.len(),
            crate::msg::Msg::Obstacles(m) => m.obstacles.len(),
            crate::msg::Msg::Path(m) => m.poses.len(),
            crate::msg::Msg::Pose(_) => 1,
        }
        .max(1) as i64,
        Err(_) => 1,
    }
}

fn publish_snapshot(shared: &Shared, dashboard: &Dashboard, monitor: &Monitor) {
    let json = serde_json::to_string(&dashboard.snapshot(monitor)).unwrap_or_else(|_| "{}".into());
    shared.snapshot.send_replace(Arc::from(json));
}

fn handle(
    samples: &[Sample],
    events: &[AlertEvent],
    shared: &Shared,
    alerts: &zenoh::pubsub::Publisher<'_>,
    journal: Option<&mut Journal>,
) {
    if let Ok(x) = shared.exposition.lock() {
        // Samples of the clock (timeouts, staleness); message samples were set on arrival.
        for s in samples {
            x.sample(s);
        }
        for e in events {
            x.alert(e);
        }
    }
    let mut journal = journal;
    for e in events {
        let text = serde_json::to_string(e).unwrap_or_default();
        tracing::warn!(rule = %e.rule, kind = e.kind.name(), t = e.t, value = e.value, threshold = e.threshold, "alert");
        if let Err(err) = alerts.put(text.clone()).encoding(zenoh::bytes::Encoding::APPLICATION_JSON).wait() {
            tracing::error!(error = %err, "publishing an alert failed");
        }
        if let Some(j) = journal.as_mut() {
            j.append(e);
        }
    }
}

/// Puts the calling thread at the lowest CPU priority: on Linux the idle scheduling class
/// (it runs only when no other thread wants the core), elsewhere nothing. Failure leaves
/// the thread as it was.
fn lowest_priority() {
    #[cfg(target_os = "linux")]
    {
        let param = libc::sched_param { sched_priority: 0 };
        // SAFETY: `sched_setscheduler` reads `param` (a valid, initialised struct that
        // outlives the call); pid 0 is the calling thread. No memory is shared.
        let rc = unsafe { libc::sched_setscheduler(0, libc::SCHED_IDLE, &param) };
        if rc != 0 {
            tracing::debug!("the T-GOSPA solver keeps its priority: sched_setscheduler failed");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Health is about progress while work waits: an idle monitor is healthy, one whose
    /// engine has not moved past `stall_after` with messages queued is not, and one beat
    /// makes it healthy again. Before: `/healthz` said ok while the engine was stuck.
    #[test]
    fn a_stalled_engine_with_work_waiting_is_unhealthy() {
        let l = Liveness::new(0.05);
        std::thread::sleep(Duration::from_millis(80));
        assert_eq!(l.stalled(), None, "nothing waits: idle, not stalled");
        l.queued.store(3, Ordering::Relaxed);
        assert!(l.stalled().is_some_and(|s| s > 0.05));
        l.beat();
        assert_eq!(l.stalled(), None);
        std::thread::sleep(Duration::from_millis(80));
        assert!(l.stalled().is_some());
        // Staleness comes from the arrivals alone.
        assert_eq!(l.staleness(Role::EstimateEgo, 100.0), None);
        l.arrived(Role::EstimateEgo, 90.0);
        assert_eq!(l.staleness(Role::EstimateEgo, 100.0), Some(10.0));
        assert_eq!(l.queue_len(), 3);
    }
}
