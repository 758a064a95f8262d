//! The live monitor from the outside: real child processes talking zenoh on loopback.
//! Live equals replay, SIGTERM writes the final report, kill -9 of the recorder leaves a log
//! that replays up to the last flush, and the exposition passes promtool when installed.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things
#![cfg(feature = "live")]

use std::io::{Read, Write};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use plumbline::config::Config;
use plumbline::core::Sample;
use plumbline::metrics::Metric;
use plumbline::replay::{replay, ReplayOptions};

mod support;

use support::bin;

fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port()
}

fn http_get(port: u16, path: &str) -> Option<String> {
    let mut s = TcpStream::connect(("127.0.0.1", port)).ok()?;
    s.set_read_timeout(Some(Duration::from_secs(2))).ok()?;
    write!(s, "GET {path} HTTP/1.1\r\nHost: localhost\r\nConnection: close\r\n\r\n").ok()?;
    let mut out = String::new();
    s.read_to_string(&mut out).ok()?;
    Some(out)
}

struct Watcher {
    child: Child,
    http: u16,
}

impl Watcher {
    fn start(zport: u16, extra: &[&str]) -> Watcher {
        Watcher::spawn(&[], "watch", zport, extra)
    }

    /// Runs `plumbline [global..] <command> --listen .. [extra..]` and waits for /readyz.
    fn spawn(global: &[&str], command: &str, zport: u16, extra: &[&str]) -> Watcher {
        Watcher::spawn_to(global, command, zport, extra, Stdio::null())
    }

    /// As [`Watcher::spawn`], with the child's stderr sent to `stderr`.
    fn spawn_to(global: &[&str], command: &str, zport: u16, extra: &[&str], stderr: Stdio) -> Watcher {
        let http = free_port();
        let listen = format!("tcp/127.0.0.1:{zport}");
        let set = format!("http.listen=127.0.0.1:{http}");
        let mut args: Vec<&str> = global.to_vec();
        args.extend(["--set", &set, command, "--listen", &listen, "--no-multicast"]);
        args.extend_from_slice(extra);
        let child = bin().args(&args).stdout(Stdio::null()).stderr(stderr).spawn().expect("watcher starts");
        let w = Watcher { child, http };
        let t0 = Instant::now();
        while t0.elapsed() < Duration::from_secs(20) {
            if http_get(http, "/readyz").is_some_and(|r| r.starts_with("HTTP/1.1 200")) {
                return w;
            }
            std::thread::sleep(Duration::from_millis(100));
        }
        panic!("{command} not ready in 20 s");
    }

    fn signal(&mut self, sig: &str) {
        let pid = self.child.id().to_string();
        assert!(Command::new("kill").args([sig, &pid]).status().unwrap().success());
    }

    fn wait(&mut self) -> Option<i32> {
        let t0 = Instant::now();
        while t0.elapsed() < Duration::from_secs(20) {
            if let Some(s) = self.child.try_wait().unwrap() {
                return s.code();
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        let _ = self.child.kill();
        panic!("watcher did not stop");
    }
}

fn publish(zport: u16, log: &str, rate: &str) {
    let connect = format!("tcp/127.0.0.1:{zport}");
    let st = bin()
        .args(["publish", log, "--speed", rate, "--connect", &connect, "--no-multicast"])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .unwrap();
    assert!(st.success());
}

fn samples(path: &Path) -> Vec<Sample> {
    let cfg = Config::defaults();
    let mut v = Vec::new();
    let mut hook = |s: &[Sample], _: &[plumbline::rules::AlertEvent]| v.extend_from_slice(s);
    replay(&cfg, path, ReplayOptions { series: None, progress: &|_| {}, on_samples: Some(&mut hook) })
        .unwrap();
    v
}

fn arrival_free(s: &[Sample]) -> Vec<(u64, Metric, u64)> {
    // Tracking and ego metrics: everything that does not depend on arrival times.
    s.iter()
        .filter(|x| {
            x.role.is_none()
                && matches!(
                    x.metric,
                    Metric::Gospa
                        | Metric::GospaLocalization
                        | Metric::GospaMissed
                        | Metric::GospaFalse
                        | Metric::AssignedCount
                        | Metric::MissedCount
                        | Metric::FalseCount
                        | Metric::Ospa
                        | Metric::TrackSwitches
                        | Metric::Fragmentations
                        | Metric::EstablishmentDelay
                        | Metric::DeletionDelay
                        | Metric::Nees
                        | Metric::EgoPositionError
                        | Metric::EgoHeadingError
                        | Metric::EgoLongitudinalError
                        | Metric::EgoLateralError
                )
        })
        .map(|x| (x.t.to_bits(), x.metric, x.value.to_bits()))
        .collect()
}

#[test]
fn live_equals_replay_and_sigterm_writes_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("rec.plb");
    let report = dir.path().join("r.json");
    let zport = free_port();
    let mut w =
        Watcher::start(zport, &["--record", rec.to_str().unwrap(), "--report", report.to_str().unwrap()]);
    publish(zport, "replay-logs/campus-loop.jsonl", "20");
    std::thread::sleep(Duration::from_millis(800));
    // The exposition shows tracking, ego and transport families while running.
    let m = http_get(w.http, "/metrics").unwrap();
    for fam in [
        "plumbline_gospa_meters{",
        "plumbline_ego_position_error_meters{",
        "plumbline_messages_total{role=\"estimate/objects\"}",
    ] {
        assert!(m.contains(fam), "{fam} missing");
    }
    w.signal("-TERM");
    assert!(matches!(w.wait(), Some(0) | Some(1)));
    let r: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&report).expect("report on SIGTERM")).unwrap();
    assert_eq!(r["steps"]["tracking"]["evaluated"], support::SHIPPED_TRACKING_STEPS);
    let live = samples(&rec);
    let source = samples(&Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl"));
    let (a, b) = (arrival_free(&live), arrival_free(&source));
    assert!(b.len() > 8000);
    assert_eq!(a.len(), b.len());
    assert!(a == b, "live and replay differ");
}

#[test]
fn kill_9_of_the_recorder_leaves_a_log_that_replays_to_the_last_flush() {
    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("rec.plb");
    let zport = free_port();
    let mut w = Watcher::spawn(&[], "record", zport, &["--out", rec.to_str().unwrap()]);
    publish(zport, "replay-logs/campus-loop.jsonl", "20");
    // Wait until the recording stops growing (the queue is drained and flushed; a loaded
    // machine may need longer than the 100 ms flush period), then kill without warning.
    let (t0, mut last, mut since) = (Instant::now(), 0u64, Instant::now());
    while t0.elapsed() < Duration::from_secs(15) {
        let len = std::fs::metadata(&rec).map(|m| m.len()).unwrap_or(0);
        if len != last {
            (last, since) = (len, Instant::now());
        } else if len > 0 && since.elapsed() > Duration::from_millis(500) {
            break;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    w.signal("-KILL");
    let _ = w.child.wait();
    let cfg = Config::defaults();
    let mut n = 0;
    let out = plumbline::logio::read_all(&cfg.log(), &rec, &mut |item, _| {
        if let plumbline::logio::Item::Record { .. } = item {
            n += 1;
        }
    })
    .expect("the recording opens");
    // Everything received was flushed (at most 100 ms after it arrived): all of it is there.
    assert_eq!(n, support::SHIPPED_RECORDS, "tail: {:?}", out.tail);
}

/// The exposition after the shipped log (600 tracking steps: 60 s at 10 Hz; 5703 records):
/// its families, labels and counts are checked here, and promtool's linter passes over it
/// where promtool is installed. Without promtool the lint part is skipped visibly, and in
/// CI (`CI` set, where `.ci/run` installs it) a missing promtool fails the test.
#[test]
fn exposition_names_and_values_and_promtool_lint() {
    let promtool = Command::new("promtool")
        .arg("--version")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok();
    if !promtool {
        assert!(std::env::var_os("CI").is_none(), "promtool is missing in CI (.ci/run installs it)");
        eprintln!("SKIPPED (lint part only): promtool not installed; names and values are still checked");
    }
    let zport = free_port();
    let mut w = Watcher::start(zport, &[]);
    publish(zport, "replay-logs/campus-loop.jsonl", "max");
    std::thread::sleep(Duration::from_millis(800));
    let m = http_get(w.http, "/metrics").unwrap();
    let body = m.split("\r\n\r\n").nth(1).unwrap_or("").to_string();
    w.signal("-TERM");
    w.wait();
    // The body may be chunked; promtool reads the plain text, so strip chunk sizes.
    let text: String = if m.to_ascii_lowercase().contains("transfer-encoding: chunked") {
        let mut out = String::new();
        let mut rest = body.as_str();
        while let Some((size, tail)) = rest.split_once("\r\n") {
            let n = usize::from_str_radix(size.trim(), 16).unwrap_or(0);
            if n == 0 {
                break;
            }
            out.push_str(&tail[..n]);
            rest = &tail[n + 2..];
        }
        out
    } else {
        body
    };
    let value = |line_start: &str| -> Option<f64> {
        text.lines().find(|l| l.starts_with(line_start))?.rsplit(' ').next()?.parse().ok()
    };
    // Every record of the log was accepted and counted by role: 600 estimate sets, 3001
    // reference poses (the log's own counts, as the replay summary prints them).
    assert_eq!(
        value("plumbline_messages_total{role=\"estimate/objects\"}"),
        Some(support::SHIPPED_TRACKING_STEPS as f64),
        "{text}"
    );
    assert_eq!(value("plumbline_messages_total{role=\"reference/ego\"}"), Some(3001.0), "{text}");
    assert_eq!(
        value("plumbline_steps_total{outcome=\"evaluated\",step=\"tracking\"}"),
        Some(support::SHIPPED_TRACKING_STEPS as f64),
        "{text}"
    );
    assert_eq!(value("plumbline_rejected_total{role=\"estimate/objects\"}").unwrap_or(0.0), 0.0);
    // The run gauges hold the run's statistics: 600 GOSPA values.
    assert_eq!(
        value("plumbline_gospa_meters{role=\"\",stat=\"count\",window=\"run\"}"),
        Some(support::SHIPPED_TRACKING_STEPS as f64),
        "{text}"
    );
    for family in [
        "plumbline_latency_distribution_seconds_bucket",
        "plumbline_collision_events",
        "plumbline_ingest_seconds",
    ] {
        assert!(text.contains(family), "no {family}");
    }
    if !promtool {
        return;
    }
    let mut p = Command::new("promtool")
        .args(["check", "metrics"])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    p.stdin.take().unwrap().write_all(text.as_bytes()).unwrap();
    let out = p.wait_with_output().unwrap();
    let msg = String::from_utf8_lossy(&out.stdout).to_string() + &String::from_utf8_lossy(&out.stderr);
    // Clean: no errors and no lint findings.
    assert!(out.status.success() && msg.trim().is_empty(), "promtool: {msg}");
}

#[test]
fn live_alerts_match_replay_and_arrive_on_the_alerts_key() {
    use zenoh::Wait;
    let dir = tempfile::tempdir().unwrap();
    let journal = dir.path().join("alerts.jsonl");
    let zport = free_port();
    let mut w = Watcher::spawn(
        &["--config", "config/rig.toml"],
        "watch",
        zport,
        &["--journal", journal.to_str().unwrap()],
    );
    let http = w.http;
    // A subscriber of our own on the alerts key, through the watcher's endpoint.
    let mut zc = zenoh::Config::default();
    zc.insert_json5("connect/endpoints", &format!("[\"tcp/127.0.0.1:{zport}\"]")).unwrap();
    zc.insert_json5("scouting/multicast/enabled", "false").unwrap();
    let session = zenoh::open(zc).wait().unwrap();
    let got = std::sync::Arc::new(std::sync::Mutex::new(Vec::<String>::new()));
    let g2 = got.clone();
    let _sub = session
        .declare_subscriber("rig/monitor/alerts")
        .callback(move |s| {
            g2.lock().unwrap().push(String::from_utf8_lossy(&s.payload().to_bytes()).into_owned())
        })
        .wait()
        .unwrap();
    std::thread::sleep(Duration::from_millis(500));
    publish(zport, "replay-logs/campus-loop.jsonl", "20");
    // The publisher is gone: the truth topic goes silent and its staleness rule raises
    // (polled: a loaded machine may need a moment to drain the queue first).
    let t0 = Instant::now();
    while t0.elapsed() < Duration::from_secs(15)
        && !std::fs::read_to_string(&journal).unwrap_or_default().contains("\"rule\":\"truth-silent\"")
    {
        std::thread::sleep(Duration::from_millis(100));
    }
    let m = http_get(http, "/metrics").unwrap();
    assert!(m.contains("plumbline_alerts_total{"), "alerts are counted in /metrics");
    assert!(m.contains("plumbline_alert_active{"));
    w.signal("-TERM");
    w.wait();
    // Replay with the same profile: the same events for rules that do not read arrival times.
    let cfg = Config::load(Some(("rig", include_str!("../config/rig.toml"))), &[]).unwrap();
    let rep = replay(
        &cfg,
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl"),
        ReplayOptions { series: None, progress: &|_| {}, on_samples: None },
    )
    .unwrap()
    .report;
    let keep = |v: &serde_json::Value| {
        !["latency_s", "interarrival_s", "staleness_s"].contains(&v["metric"].as_str().unwrap_or(""))
    };
    let want: Vec<serde_json::Value> =
        rep.alerts.iter().map(|e| serde_json::to_value(e).unwrap()).filter(|v| keep(v)).collect();
    let all: Vec<serde_json::Value> = std::fs::read_to_string(&journal)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert!(
        all.iter().any(|v| v["rule"] == "truth-silent" && v["kind"] == "raised"),
        "a silent topic raises its staleness rule (live only)"
    );
    let live: Vec<serde_json::Value> = all.into_iter().filter(|v| keep(v)).collect();
    assert!(!want.is_empty());
    assert_eq!(live, want, "live and replay raise the same alerts at the same event times");
    let on_key: Vec<serde_json::Value> =
        got.lock().unwrap().iter().map(|l| serde_json::from_str(l).unwrap()).filter(|v| keep(v)).collect();
    assert_eq!(on_key, want, "the alerts key carries the same events");
    let _ = session.close().wait();
}

/// Reads `/api/stream` for `secs` seconds and returns the `snapshot` events' data.
fn stream_events(port: u16, secs: f64) -> Vec<String> {
    let mut s = TcpStream::connect(("127.0.0.1", port)).unwrap();
    s.set_read_timeout(Some(Duration::from_millis(200))).unwrap();
    write!(s, "GET /api/stream HTTP/1.1\r\nHost: localhost\r\nAccept: text/event-stream\r\n\r\n").unwrap();
    let (t0, mut raw, mut buf) = (Instant::now(), Vec::new(), [0u8; 65536]);
    while t0.elapsed().as_secs_f64() < secs {
        match s.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => raw.extend_from_slice(&buf[..n]),
            Err(_) => {}
        }
    }
    let text = String::from_utf8_lossy(&raw);
    assert!(text.starts_with("HTTP/1.1 200"), "{}", &text[..text.len().min(200)]);
    assert!(text.to_ascii_lowercase().contains("content-type: text/event-stream"));
    // Chunked transfer: data lines may be split across chunks, so find whole events by the
    // `event: snapshot` marker and take the JSON object that follows its `data:` field.
    text.split("event: snapshot\n")
        .skip(1)
        .filter_map(|e| e.strip_prefix("data: "))
        .map(str::to_string)
        .collect()
}

#[test]
fn dashboard_serves_its_page_a_snapshot_and_a_stream_at_the_configured_rate() {
    let zport = free_port();
    let mut w = Watcher::spawn(&["--set", "dashboard.rate_hz=4"], "demo", zport, &["--duration", "30"]);
    // The page and its assets come from the binary itself.
    let page = http_get(w.http, "/").unwrap();
    assert!(page.starts_with("HTTP/1.1 200") && page.contains("<script src=\"app.js\">"), "{page}");
    for (asset, ctype) in [("/app.js", "text/javascript"), ("/app.css", "text/css")] {
        let r = http_get(w.http, asset).unwrap();
        assert!(r.starts_with("HTTP/1.1 200") && r.contains(ctype), "{asset}");
        // The SVG namespace is a name, not a fetch; nothing else may name another host.
        let r = r.replace("http://www.w3.org/2000/svg", "");
        assert!(!r.contains("http://") && !r.contains("https://"), "{asset} refers to the network");
    }
    std::thread::sleep(Duration::from_secs(3));
    let snap = http_get(w.http, "/api/snapshot").unwrap();
    let body = &snap[snap.find("\r\n\r\n").unwrap() + 4..];
    let v: serde_json::Value = serde_json::from_str(body).unwrap();
    assert_eq!(v["rate_hz"], 4.0);
    assert_eq!(v["history_s"], 120.0);
    let ids: Vec<&str> = v["charts"].as_array().unwrap().iter().map(|c| c["id"].as_str().unwrap()).collect();
    assert_eq!(ids, ["gospa", "clearance", "ego", "latency"]);
    let rows = v["row_times"].as_array().unwrap().len();
    assert!(rows >= 4, "3 s at 0.5 s a row: {rows}");
    assert!(v["topics"]
        .as_array()
        .unwrap()
        .iter()
        .any(|t| t["role"] == "estimate/objects" && t["state"] == "ok"));
    // The stream: 4 snapshots a second, each a whole snapshot whose clock moves on.
    let events = stream_events(w.http, 2.6);
    assert!((8..=12).contains(&events.len()), "{} events in 2.6 s at 4 Hz", events.len());
    let clocks: Vec<f64> = events
        .iter()
        .filter_map(|e| serde_json::from_str::<serde_json::Value>(e.lines().next()?).ok())
        .map(|v| v["now"].as_f64().unwrap())
        .collect();
    assert!(clocks.len() >= 6 && clocks.windows(2).all(|p| p[1] > p[0]), "{clocks:?}");
    w.signal("-TERM");
    assert_eq!(w.wait(), Some(0));
}

/// Sends raw request bytes and returns the status line's code.
fn http_raw(port: u16, request: &[u8]) -> u16 {
    let mut s = TcpStream::connect(("127.0.0.1", port)).unwrap();
    s.set_read_timeout(Some(Duration::from_secs(3))).unwrap();
    let _ = s.write_all(request);
    let mut buf = [0u8; 64];
    let n = s.read(&mut buf).unwrap_or(0);
    let head = String::from_utf8_lossy(&buf[..n]);
    head.split(' ').nth(1).and_then(|c| c.parse().ok()).unwrap_or(0)
}

#[test]
fn http_guard_token_sizes_rate_and_streams() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    let token = dir.path().join("token");
    std::fs::write(&token, "s3cret\n").unwrap();
    std::fs::set_permissions(&token, std::fs::Permissions::from_mode(0o600)).unwrap();
    let tf = format!("http.token_file={}", token.display());
    let global = [
        "--set",
        &tf,
        "--set",
        "http.requests_per_s=4",
        "--set",
        "http.burst=30",
        "--set",
        "http.max_streams=1",
        "--set",
        "http.max_request_bytes=2048",
    ];
    let mut w = Watcher::spawn(&global, "watch", free_port(), &[]);
    let get = |path: &str, auth: &str| {
        http_raw(
            w.http,
            format!("GET {path} HTTP/1.1\r\nHost: x\r\n{auth}Connection: close\r\n\r\n").as_bytes(),
        )
    };
    let bearer = "Authorization: Bearer s3cret\r\n";
    // Data endpoints need the token; the page, health and readiness do not.
    assert_eq!(get("/metrics", ""), 401);
    assert_eq!(get("/api/snapshot", "Authorization: Bearer s3cre\r\n"), 401);
    assert_eq!(get("/metrics", bearer), 200);
    assert_eq!(get("/api/snapshot", bearer), 200);
    assert_eq!(get("/", ""), 200);
    assert_eq!(get("/healthz", ""), 200);
    // Sizes and methods.
    let big = format!("X-Pad: {}\r\n", "a".repeat(4000));
    assert_eq!(get("/healthz", &big), 431);
    let post = "POST /metrics HTTP/1.1\r\nHost: x\r\nContent-Length: 100000\r\nConnection: close\r\n\r\n";
    assert_eq!(http_raw(w.http, post.as_bytes()), 413);
    let post = "POST /healthz HTTP/1.1\r\nHost: x\r\nContent-Length: 2\r\nConnection: close\r\n\r\nhi";
    assert_eq!(http_raw(w.http, post.as_bytes()), 405);
    // One stream at a time: a second one is refused while the first is open.
    let mut first = TcpStream::connect(("127.0.0.1", w.http)).unwrap();
    write!(first, "GET /api/stream HTTP/1.1\r\nHost: x\r\n{bearer}\r\n").unwrap();
    std::thread::sleep(Duration::from_millis(300));
    assert_eq!(get("/api/stream", bearer), 503);
    drop(first);
    // RFC 9110 section 11.1: the scheme is case-insensitive.
    assert_eq!(get("/metrics", "Authorization: bearer s3cret\r\n"), 200);
    // The bucket: 30 at once at most (a few were spent above), then 429 with Retry-After.
    let codes: Vec<u16> = (0..40).map(|_| get("/", "")).collect();
    let limited = codes.iter().filter(|&&c| c == 429).count();
    assert!(limited >= 10 && codes[..10].iter().all(|&c| c == 200), "{codes:?}");
    // While anonymous requests are refused, health and readiness are in no bucket, and
    // authenticated requests have buckets of their own. Before: a local flood of /healthz
    // made 8 of 10 authenticated scrapes get 429.
    let health: Vec<u16> = (0..50).map(|_| get("/healthz", "")).collect();
    assert!(health.iter().all(|&c| c == 200), "{health:?}");
    assert_eq!(get("/readyz", ""), 200);
    let scrapes: Vec<u16> = (0..10).map(|_| get("/metrics", bearer)).collect();
    assert!(scrapes.iter().all(|&c| c == 200), "{scrapes:?}");
    assert_eq!(get("/", ""), 429);
    // After a rest the client is served again.
    std::thread::sleep(Duration::from_millis(1200));
    assert_eq!(get("/", ""), 200);
    w.signal("-TERM");
    // Nothing was evaluated (no estimate reached the engine): a run with no evaluated
    // step exits 2, never a green.
    assert_eq!(w.wait(), Some(2));
}

/// Idle and trickling clients are closed after `http.header_timeout`, and the connection
/// cap holds below the open-file limit. Before: no idle connection was ever closed (300
/// idle sockets stayed open 75 s), a client sending a byte a second held its slot, and 600
/// of them exhausted a 512 open-file limit so that every scrape timed out.
#[test]
fn idle_and_slow_http_clients_are_closed_and_connections_are_capped() {
    let global = ["--set", "http.header_timeout=1s", "--set", "http.max_connections=8"];
    let mut w = Watcher::spawn(&global, "watch", free_port(), &[]);
    let closed_within = |s: &mut TcpStream, secs: f64| {
        s.set_read_timeout(Some(Duration::from_secs_f64(secs))).unwrap();
        let mut buf = [0u8; 256];
        // EOF (0), or a 408/400 answer followed by EOF, both mean the server let go.
        loop {
            match s.read(&mut buf) {
                Ok(0) => return true,
                Ok(_) => continue,
                Err(e) if e.kind() == std::io::ErrorKind::ConnectionReset => return true,
                Err(_) => return false,
            }
        }
    };
    // An idle connection: closed after about a second.
    let t0 = Instant::now();
    let mut idle = TcpStream::connect(("127.0.0.1", w.http)).unwrap();
    assert!(closed_within(&mut idle, 4.0), "idle connection still open");
    assert!(t0.elapsed() < Duration::from_secs(3), "{:?}", t0.elapsed());
    // A client that sends its header a byte every 300 ms never finishes it: closed too.
    let mut slow = TcpStream::connect(("127.0.0.1", w.http)).unwrap();
    let t0 = Instant::now();
    let mut gone = false;
    for b in b"GET /metrics HTTP/1.1\r\nHost: x\r\nX-Slow: aaaaaaaaaaaaaaaaaaaaaa" {
        if slow.write_all(&[*b]).is_err() {
            gone = true;
            break;
        }
        std::thread::sleep(Duration::from_millis(300));
        if t0.elapsed() > Duration::from_secs(4) {
            break;
        }
    }
    assert!(gone || closed_within(&mut slow, 2.0), "a trickling client kept its connection");
    assert!(t0.elapsed() < Duration::from_secs(5));
    // Twenty idle sockets against a cap of 8: the watcher stays up, and once the idle ones
    // are closed a scrape is served.
    let hold: Vec<TcpStream> =
        (0..20).filter_map(|_| TcpStream::connect(("127.0.0.1", w.http)).ok()).collect();
    std::thread::sleep(Duration::from_millis(1800));
    let r = http_get(w.http, "/metrics").unwrap_or_default();
    assert!(r.starts_with("HTTP/1.1 200"), "{r:.80}");
    drop(hold);
    w.signal("-TERM");
    // Nothing was evaluated (no estimate reached the engine): a run with no evaluated
    // step exits 2, never a green.
    assert_eq!(w.wait(), Some(2));
}

/// A stack that vanishes and comes back: poses on both ego roles at 4 Hz for 2 s, silence
/// for 2 s, 2 s more. The staleness rule (1.5 periods) must raise within two periods of
/// the last message, clear when messages return, and every step must be evaluated.
#[test]
fn a_vanished_publisher_raises_staleness_within_two_periods_and_monitoring_resumes() {
    let dir = tempfile::tempdir().unwrap();
    let (cfg_path, journal, report) =
        (dir.path().join("c.toml"), dir.path().join("alerts.jsonl"), dir.path().join("r.json"));
    let period = 0.25;
    std::fs::write(
        &cfg_path,
        format!(
            "[live]\ntick = \"10ms\"\nrefresh = \"20ms\"\n\n[[rule]]\nname = \"ego-estimate-silent\"\n\
             metric = \"staleness_s\"\nrole = \"estimate/ego\"\nwindow = \"1s\"\nstat = \"last\"\n\
             above = {}\nseverity = \"warning\"\n",
            1.5 * period
        ),
    )
    .unwrap();
    let zport = free_port();
    let cfg_arg = cfg_path.to_str().unwrap().to_string();
    let extra = ["--journal", journal.to_str().unwrap(), "--report", report.to_str().unwrap()];
    let mut w = Watcher::spawn(&["--config", &cfg_arg], "watch", zport, &extra);
    let mut pcfg = Config::defaults();
    pcfg.zenoh.connect = vec![format!("tcp/127.0.0.1:{zport}")];
    pcfg.zenoh.multicast = false;
    let session = plumbline::live::zenoh_io::open(&pcfg).unwrap();
    std::thread::sleep(Duration::from_millis(500));
    let wall = plumbline::live::zenoh_io::wall_now;
    let tag = plumbline::live::zenoh_io::source_tag(&session);
    let burst = |n: usize| -> f64 {
        let mut last_put = 0.0;
        for _ in 0..n {
            let t = wall();
            for key in ["rig/reference/ego", "rig/estimate/ego"] {
                let msg = plumbline::msg::Msg::Pose(plumbline::msg::Pose {
                    stamp: t,
                    x: t.sin(),
                    y: 0.0,
                    yaw: 0.0,
                    v: None,
                    cov: None,
                });
                let rec = plumbline::logio::LogRecord { key: key.into(), recv: None, msg };
                plumbline::live::publish::put(&session, &rec, false, &tag).unwrap();
            }
            last_put = wall();
            std::thread::sleep(Duration::from_secs_f64(period));
        }
        last_put
    };
    let vanished = burst(8);
    std::thread::sleep(Duration::from_secs(2) - Duration::from_secs_f64(period));
    burst(8);
    std::thread::sleep(Duration::from_millis(500));
    w.signal("-TERM");
    assert_eq!(w.wait(), Some(0));
    let events: Vec<serde_json::Value> = std::fs::read_to_string(&journal)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    // Raised once in the gap, cleared on return (and raised again when the stack goes quiet
    // for good before the watcher stops, which the test does not wait for).
    let kinds: Vec<&str> = events.iter().map(|e| e["kind"].as_str().unwrap()).collect();
    assert_eq!(&kinds[..2], ["raised", "cleared"], "{events:?}");
    let delay = events[0]["t"].as_f64().unwrap() - vanished;
    assert!(delay >= 1.5 * period && delay <= 2.0 * period, "raised {delay:.3} s after the last message");
    let cleared = events.iter().find(|e| e["kind"] == "cleared").expect("cleared when messages returned");
    assert!(cleared["t"].as_f64().unwrap() > vanished + 1.5);
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    assert_eq!(r["steps"]["ego"]["evaluated"], 16, "{}", r["steps"]);
    assert_eq!(r["transport"]["estimate/ego"]["messages"], 16);
    let _ = zenoh::Wait::wait(session.close());
}

/// The recorder's disk fills (`/dev/full` answers every write with ENOSPC): the error is
/// reported once and monitoring goes on to the end of the input.
#[test]
fn a_full_recorder_disk_is_reported_and_monitoring_goes_on() {
    let dir = tempfile::tempdir().unwrap();
    let (report, errlog) = (dir.path().join("r.json"), dir.path().join("stderr.txt"));
    let zport = free_port();
    let err = std::fs::File::create(&errlog).unwrap();
    let extra = ["--record", "/dev/full", "--report", report.to_str().unwrap()];
    let mut w = Watcher::spawn_to(&[], "watch", zport, &extra, Stdio::from(err));
    publish(zport, "replay-logs/campus-loop.jsonl", "20");
    std::thread::sleep(Duration::from_millis(500));
    w.signal("-TERM");
    assert_eq!(w.wait(), Some(0));
    let stderr = std::fs::read_to_string(&errlog).unwrap();
    assert_eq!(stderr.matches("recorder:").count(), 1, "{stderr}");
    assert!(stderr.contains("No space left on device") && stderr.contains("monitoring goes on"), "{stderr}");
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    assert_eq!(r["steps"]["tracking"]["evaluated"], support::SHIPPED_TRACKING_STEPS, "{}", r["steps"]);
}

#[test]
fn restamped_publishing_keeps_the_recorded_latencies() {
    // A log that starts with its slowest role (estimate/objects, recorded latency about
    // 65 ms; the ego poses arrive 2 to 20 ms after their stamps). `publish --restamp` moves
    // the arrival clock onto the wall clock, so the watcher must see each message about as
    // late as it was recorded: never earlier than its stamp. Shifting by the first stamp
    // instead would make every latency relative to the first message's and negative.
    let dir = tempfile::tempdir().unwrap();
    let text =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl"))
            .unwrap();
    let lines: Vec<&str> = text.lines().take(600).collect();
    let first = lines.iter().position(|l| l.contains("\"rig/estimate/objects\"")).unwrap();
    let short = dir.path().join("short.jsonl");
    std::fs::write(&short, lines[first..].join("\n") + "\n").unwrap();
    let rec = dir.path().join("rec.plb");
    let zport = free_port();
    let mut w = Watcher::start(zport, &["--record", rec.to_str().unwrap()]);
    let connect = format!("tcp/127.0.0.1:{zport}");
    let st = bin()
        .args(["publish", short.to_str().unwrap(), "--restamp", "--connect", &connect, "--no-multicast"])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .unwrap();
    assert!(st.success());
    std::thread::sleep(Duration::from_millis(500));
    w.signal("-TERM");
    assert!(matches!(w.wait(), Some(0) | Some(1)));
    let lat: Vec<(plumbline::msg::Role, f64)> = samples(&rec)
        .iter()
        .filter(|s| s.metric == Metric::Latency)
        .map(|s| (s.role.unwrap(), s.value))
        .collect();
    assert!(lat.len() > 300, "{} latency samples", lat.len());
    let min = lat.iter().map(|l| l.1).fold(f64::INFINITY, f64::min);
    // 1 ms of slack for the two clocks read at different moments on one machine.
    assert!(min > -0.001, "a message seen {:.4} s before its stamp", -min);
    let est: Vec<f64> =
        lat.iter().filter(|l| l.0 == plumbline::msg::Role::EstimateObjects).map(|l| l.1).collect();
    let mean = est.iter().sum::<f64>() / est.len() as f64;
    // At least the recorded 30 ms; the upper bound leaves room for a loaded machine.
    assert!((0.03..2.0).contains(&mean), "estimate/objects latency {mean:.4} s (recorded 30-79 ms)");
}

/// A put on a wildcard key reaches every subscriber it intersects, and a payload in an
/// encoding that is neither JSON nor the postcard one could only be guessed at: both are
/// counted against the role whose subscription saw them and never recorded as role data.
/// Before: a put on `rig/**` was accepted once for every role (replacing the reference
/// objects and the site map with empty sets) and recorded under the wildcard, so replay of
/// the recording gave other numbers; `text/plain` was read as JSON.
#[test]
fn wildcard_puts_and_unknown_encodings_are_counted_not_used() {
    use zenoh::bytes::Encoding;
    use zenoh::Wait;
    let dir = tempfile::tempdir().unwrap();
    let (rec, report) = (dir.path().join("rec.plb"), dir.path().join("report.json"));
    let zport = free_port();
    let extra = ["--record", rec.to_str().unwrap(), "--report", report.to_str().unwrap()];
    let mut w = Watcher::start(zport, &extra);
    let connect = format!("zenoh.connect=[\"tcp/127.0.0.1:{zport}\"]");
    let cfg = Config::load(None, &[connect, "zenoh.multicast_scouting=false".into()]).unwrap();
    let session = plumbline::live::zenoh_io::open(&cfg).unwrap();
    std::thread::sleep(Duration::from_millis(800));
    let empty_set = r#"{"stamp": 1.0, "objects": []}"#;
    let pose = r#"{"stamp": 1.0, "x": 1.0, "y": 2.0, "yaw": 0.0}"#;
    session.put("rig/**", empty_set).encoding(Encoding::APPLICATION_JSON).wait().unwrap();
    session.put("rig/estimate/ego", pose).encoding(Encoding::TEXT_PLAIN).wait().unwrap();
    session.put("rig/estimate/ego", pose).encoding(Encoding::APPLICATION_OCTET_STREAM).wait().unwrap();
    session.put("rig/estimate/ego", pose).wait().unwrap();
    // And one good message, so the recording is not empty by accident.
    session.put("rig/reference/ego", pose).encoding(Encoding::APPLICATION_JSON).wait().unwrap();
    std::thread::sleep(Duration::from_millis(800));
    w.signal("-TERM");
    // Nothing was evaluated (no estimate reached the engine): a run with no evaluated
    // step exits 2, never a green.
    assert_eq!(w.wait(), Some(2));
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    let by = &r["records"]["rejected_by_reason"];
    // rig/** intersects the six default role keys: once per subscription.
    assert_eq!(by["unbound_key"], 6, "{by}");
    assert_eq!(by["bad_encoding"], 3, "{by}");
    assert_eq!(r["records"]["accepted"], 1);
    assert_eq!(r["transport"]["estimate/ego"]["rejected"], 4);
    assert_eq!(r["transport"]["estimate/ego"]["decode_errors"], 4, "the old name, kept for this release");
    // The recording holds the one good message only.
    let mut n = 0;
    plumbline::logio::read_all(&Config::defaults().log(), &rec, &mut |item, _| {
        if let plumbline::logio::Item::Record { rec, .. } = item {
            assert_eq!(rec.key, "rig/reference/ego");
            n += 1;
        }
    })
    .unwrap();
    assert_eq!(n, 1);
}

/// Two publishers on the same role keys (here two `publish` runs of the shipped log) are
/// counted as two: `plumbline_publishers{role}` reads 2, the report keeps the most seen at
/// once, and a rule can require exactly one. Before: the two streams merged silently
/// (GOSPA 10.4 instead of 2.4, every topic `ok`).
#[test]
fn a_second_publisher_on_a_role_is_counted_and_can_fail_a_rule() {
    let dir = tempfile::tempdir().unwrap();
    let (report, cfgf) = (dir.path().join("report.json"), dir.path().join("one.toml"));
    std::fs::write(
        &cfgf,
        "[[rule]]\nname = \"one-tracker\"\nmetric = \"publishers\"\nrole = \"estimate/objects\"\nwindow = \"1s\"\nstat = \"max\"\nabove = 1.0\nseverity = \"critical\"\n",
    )
    .unwrap();
    let zport = free_port();
    let mut w = Watcher::spawn(
        &["--config", cfgf.to_str().unwrap()],
        "watch",
        zport,
        &["--report", report.to_str().unwrap()],
    );
    let connect = format!("tcp/127.0.0.1:{zport}");
    let pubs: Vec<Child> = (0..2)
        .map(|_| {
            bin()
                .args([
                    "publish",
                    "replay-logs/campus-loop.jsonl",
                    "--speed",
                    "10",
                    "--restamp",
                    "--connect",
                    &connect,
                    "--no-multicast",
                ])
                .stdout(Stdio::null())
                .stderr(Stdio::null())
                .spawn()
                .unwrap()
        })
        .collect();
    std::thread::sleep(Duration::from_millis(2500));
    let m = http_get(w.http, "/metrics").unwrap_or_default();
    let line = m
        .lines()
        .find(|l| {
            l.starts_with("plumbline_publishers{")
                && l.contains("role=\"estimate/objects\"")
                && l.contains("window=\"latest\"")
        })
        .unwrap_or_default()
        .to_string();
    assert!(line.ends_with(" 2"), "{line}");
    for mut p in pubs {
        let _ = p.wait();
    }
    w.signal("-TERM");
    assert_eq!(w.wait(), Some(1), "the critical one-publisher rule fails the run");
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    assert_eq!(r["transport"]["estimate/objects"]["publishers_max"], 2.0);
    let v = r["verdicts"].as_array().unwrap().iter().find(|v| v["rule"] == "one-tracker").unwrap().clone();
    assert_eq!(v["verdict"], "fail", "{v}");
}

/// A taken HTTP port is said as such, with the key that moves it.
#[test]
fn a_taken_http_port_names_the_key_that_moves_it() {
    let taken = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    let port = taken.local_addr().unwrap().port();
    let set = format!("http.listen=127.0.0.1:{port}");
    let out = bin().args(["--set", &set, "watch", "--duration", "1", "--no-multicast"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("the port is taken") && err.contains("http.listen"), "{err}");
}
