//! `watch`, `record`, `publish` and `demo`: the live commands (feature `live`).

use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use crate::config::Config;
use crate::live::publish::{self, PublishOptions};
use crate::live::watch::{self, Shared, WatchOptions};
use crate::live::{http, zenoh_io};
use crate::rules::critical_failed;
use crate::scenario::{generate, ScenarioParams};

/// Session flags shared by the live commands.
#[derive(Debug, Clone, clap::Args)]
pub struct SessionArgs {
    /// zenoh mode: peer (default) or client.
    #[arg(long)]
    pub mode: Option<String>,
    /// Endpoint to connect to, e.g. tcp/127.0.0.1:7447 (repeatable).
    #[arg(long)]
    pub connect: Vec<String>,
    /// Endpoint to listen on (repeatable).
    #[arg(long)]
    pub listen: Vec<String>,
    /// Turn multicast scouting off (use explicit endpoints).
    #[arg(long)]
    pub no_multicast: bool,
}

impl SessionArgs {
    fn apply(&self, cfg: &Config) -> Config {
        let mut c = cfg.clone();
        if let Some(m) = &self.mode {
            c.zenoh.mode = m.clone();
        }
        c.zenoh.connect.extend(self.connect.iter().cloned());
        c.zenoh.listen.extend(self.listen.iter().cloned());
        if self.no_multicast {
            c.zenoh.multicast = false;
        }
        c
    }
}

/// `watch` arguments.
#[derive(Debug, clap::Args)]
pub struct WatchArgs {
    /// Write the final report here on shutdown.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Record every received message to this binary log.
    #[arg(long, value_name = "FILE")]
    pub record: Option<PathBuf>,
    /// Append alert events here (JSON lines).
    #[arg(long, value_name = "FILE")]
    pub journal: Option<PathBuf>,
    /// Stop after this many seconds.
    #[arg(long)]
    pub duration: Option<f64>,
    /// Session settings.
    #[command(flatten)]
    pub session: SessionArgs,
}

/// `record` arguments.
#[derive(Debug, clap::Args)]
pub struct RecordArgs {
    /// The binary log to write.
    #[arg(long, value_name = "FILE")]
    pub out: PathBuf,
    /// Stop after this many seconds.
    #[arg(long)]
    pub duration: Option<f64>,
    /// Session settings.
    #[command(flatten)]
    pub session: SessionArgs,
}

/// `publish` arguments.
#[derive(Debug, clap::Args)]
pub struct PublishArgs {
    /// The log to play.
    pub log: PathBuf,
    /// Playback speed: 1.0 plays the log's own timing, 2.0 twice as fast, `max` as fast as
    /// possible (`--rate` is the old name).
    #[arg(long = "speed", alias = "rate", default_value = "1.0")]
    pub speed: String,
    /// Postcard payloads instead of JSON (`--binary` is the old name).
    #[arg(long = "postcard", alias = "binary")]
    pub postcard: bool,
    /// Shift stamps onto the wall clock: the log's first arrival becomes now, and every
    /// message keeps its recorded latency.
    #[arg(long)]
    pub restamp: bool,
    /// Session settings.
    #[command(flatten)]
    pub session: SessionArgs,
}

/// `stress` arguments.
#[derive(Debug, clap::Args)]
pub struct LoadArgs {
    /// Messages per second, all roles together (`--rate` is the old name).
    #[arg(long = "messages-per-s", alias = "rate", default_value_t = 1000.0)]
    pub messages_per_s: f64,
    /// How long to run (s, at most 600).
    #[arg(long, default_value_t = 10.0)]
    pub seconds: f64,
    /// Objects per set.
    #[arg(long, default_value_t = 10)]
    pub objects: usize,
    /// Postcard payloads instead of JSON (`--binary` is the old name).
    #[arg(long = "postcard", alias = "binary")]
    pub postcard: bool,
    /// Objects per group: 1 spreads them 3 m apart; more puts a group's objects 0.5 m
    /// apart, within the default cutoff of each other (rivals for the assignment).
    #[arg(long, default_value_t = 1)]
    pub group: usize,
    /// Session settings (endpoints must be on loopback).
    #[command(flatten)]
    pub session: SessionArgs,
}

/// Runs `stress` (`load` is its old name).
pub fn load_cmd(cfg: &Config, a: &LoadArgs) -> u8 {
    super::renamed(&[("load", "stress"), ("--rate", "--messages-per-s"), ("--binary", "--postcard")]);
    let cfg = a.session.apply(cfg);
    if !crate::live::load::loopback_only(&cfg.zenoh.connect)
        || !crate::live::load::loopback_only(&cfg.zenoh.listen)
    {
        return fail("stress", "endpoints must be on loopback (127.0.0.0/8, localhost or [::1])");
    }
    if !(a.messages_per_s > 0.0 && a.messages_per_s <= 1e6 && a.seconds > 0.0 && a.seconds <= 600.0) {
        return fail("stress", "--messages-per-s must be in (0, 1e6] and --seconds in (0, 600]");
    }
    let session = match zenoh_io::open(&cfg) {
        Ok(s) => s,
        Err(e) => return fail("stress", e),
    };
    let opts = crate::live::load::LoadOptions {
        rate: a.messages_per_s,
        seconds: a.seconds,
        objects: a.objects,
        binary: a.postcard,
        group: a.group,
    };
    let t0 = std::time::Instant::now();
    let r = crate::live::load::run(&cfg, opts, &session);
    std::thread::sleep(std::time::Duration::from_millis(300));
    let _ = zenoh::Wait::wait(session.close());
    match r {
        Ok(n) => {
            let el = t0.elapsed().as_secs_f64();
            errln!("plumbline stress: {n} messages in {el:.2} s ({:.0}/s)", n as f64 / el);
            super::EXIT_OK
        }
        Err(e) => fail("stress", e),
    }
}

/// `demo` arguments.
#[derive(Debug, clap::Args)]
pub struct DemoArgs {
    /// Stop after this many seconds (default: until Ctrl-C).
    #[arg(long)]
    pub duration: Option<f64>,
    /// Scenario seed of the first lap.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Write the final report here.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Append alert events here (JSON lines).
    #[arg(long, value_name = "FILE")]
    pub journal: Option<PathBuf>,
    /// Session settings.
    #[command(flatten)]
    pub session: SessionArgs,
}

use super::fail;

fn serve(cfg: &Config, stop: &Arc<AtomicBool>) -> Result<(Arc<Shared>, http::Server), String> {
    let shared = Arc::new(Shared::new(cfg));
    let server = http::start(&cfg.http_listen, &cfg.http, shared.clone(), stop.clone())?;
    Ok((shared, server))
}

/// Runs `watch`.
pub fn watch_cmd(cfg: &Config, a: &WatchArgs) -> u8 {
    let cfg = a.session.apply(cfg);
    let stop = Arc::new(AtomicBool::new(false));
    let (shared, server) = match serve(&cfg, &stop) {
        Ok(x) => x,
        Err(e) => return fail("watch", e),
    };
    errln!("plumbline watch: dashboard at http://{0}/  metrics at http://{0}/metrics", server.addr);
    let session = match zenoh_io::open(&cfg) {
        Ok(s) => s,
        Err(e) => return fail("watch", e),
    };
    let opts = WatchOptions {
        report: a.report.clone(),
        record: a.record.clone(),
        journal: a.journal.clone(),
        duration: a.duration,
        record_only: false,
    };
    let r = watch::run(&cfg, &opts, &stop, &shared, &session);
    let _ = zenoh::Wait::wait(session.close());
    server.stop();
    match r {
        Ok(rep) => match rep.not_evaluable() {
            Some(why) => {
                errln!("plumbline watch: {why}");
                super::EXIT_INPUT
            }
            None if critical_failed(&rep.verdicts) => super::EXIT_FAIL,
            None => super::EXIT_OK,
        },
        Err(e) => fail("watch", e),
    }
}

/// Runs `record`.
pub fn record_cmd(cfg: &Config, a: &RecordArgs) -> u8 {
    let cfg = a.session.apply(cfg);
    let stop = Arc::new(AtomicBool::new(false));
    let (shared, server) = match serve(&cfg, &stop) {
        Ok(x) => x,
        Err(e) => return fail("record", e),
    };
    let session = match zenoh_io::open(&cfg) {
        Ok(s) => s,
        Err(e) => return fail("record", e),
    };
    let opts = WatchOptions {
        record: Some(a.out.clone()),
        duration: a.duration,
        record_only: true,
        ..Default::default()
    };
    let r = watch::run(&cfg, &opts, &stop, &shared, &session);
    let _ = zenoh::Wait::wait(session.close());
    server.stop();
    match r {
        Ok(_) => super::EXIT_OK,
        Err(e) => fail("record", e),
    }
}

/// Runs `publish`.
pub fn publish_cmd(cfg: &Config, a: &PublishArgs) -> u8 {
    let cfg = a.session.apply(cfg);
    super::renamed(&[("--rate", "--speed"), ("--binary", "--postcard")]);
    let rate = match a.speed.as_str() {
        "max" => None,
        s => match s.parse::<f64>() {
            Ok(r) if r.is_finite() && r > 0.0 => Some(r),
            _ => return fail("publish", format!("--speed: a positive number or `max`, found `{s}`")),
        },
    };
    let session = match zenoh_io::open(&cfg) {
        Ok(s) => s,
        Err(e) => return fail("publish", e),
    };
    let stop = AtomicBool::new(false);
    let opts = PublishOptions { rate, binary: a.postcard, restamp: a.restamp };
    let r = publish::run(&cfg, &a.log, opts, &session, &stop);
    // Give the transport a moment to deliver the last samples before closing.
    std::thread::sleep(std::time::Duration::from_millis(300));
    let _ = zenoh::Wait::wait(session.close());
    match r {
        Ok(n) => {
            errln!("plumbline publish: {n} records published");
            super::EXIT_OK
        }
        Err(e) => fail("publish", e),
    }
}

/// The built-in rig profile, used by `demo` when the config has no rules.
const RIG_PROFILE: &str = include_str!("../../config/rig.toml");

/// Runs `demo`: the scenario published live over zenoh and watched, in one process.
pub fn demo_cmd(cfg: &Config, sets: &[String], a: &DemoArgs) -> u8 {
    let mut cfg = a.session.apply(cfg);
    // The demo's stack and watcher talk on keys of this process alone, so two demos on
    // one machine (or a watcher on the default keys) never see each other's messages.
    let own = format!("{}/demo-{}", cfg.prefix, std::process::id());
    for (role, key) in cfg.roles.iter_mut() {
        *key = format!("{own}/{}", role.name());
    }
    cfg.prefix = own;
    if cfg.rules.is_empty() {
        match Config::load(Some(("config/rig.toml (built in)", RIG_PROFILE)), sets) {
            Ok(rig) => {
                cfg.rules = rig.rules;
                cfg.windows = rig.windows;
                cfg.window_labels = rig.window_labels;
            }
            Err(e) => return fail("demo", e),
        }
    }
    let stop = Arc::new(AtomicBool::new(false));
    let (shared, server) = match serve(&cfg, &stop) {
        Ok(x) => x,
        Err(e) => return fail("demo", e),
    };
    outln!("plumbline demo: the Aldermoor campus shuttle, live over zenoh on {}/*", cfg.prefix);
    outln!("dashboard at http://{0}/  metrics at http://{0}/metrics  (Ctrl-C to stop)", server.addr);
    let session = match zenoh_io::open(&cfg) {
        Ok(s) => s,
        Err(e) => return fail("demo", e),
    };
    let opts = WatchOptions {
        report: a.report.clone(),
        journal: a.journal.clone(),
        duration: a.duration,
        ..Default::default()
    };
    let r = std::thread::scope(|s| {
        let (stop2, session2, cfg2, seed) = (stop.clone(), session.clone(), cfg.clone(), a.seed);
        s.spawn(move || demo_stack(&cfg2, &session2, &stop2, seed));
        let r = watch::run(&cfg, &opts, &stop, &shared, &session);
        stop.store(true, Ordering::SeqCst);
        r
    });
    let _ = zenoh::Wait::wait(session.close());
    server.stop();
    match r {
        Ok(rep) => {
            outln!("{}", super::replay::summary(&rep));
            super::EXIT_OK
        }
        Err(e) => fail("demo", e),
    }
}

/// The demo stack: laps of the scenario, restamped to the wall clock, published with their
/// original timing until `stop`.
fn demo_stack(cfg: &Config, session: &zenoh::Session, stop: &AtomicBool, seed: u64) {
    let lap = 60.0;
    let start = zenoh_io::wall_now();
    let t0 = std::time::Instant::now();
    let tag = zenoh_io::source_tag(session);
    for k in 0.. {
        let p = ScenarioParams { seed: seed + k, duration: lap, ..Default::default() };
        let offset = start + k as f64 * lap;
        for mut rec in generate(&cfg.roles, &p) {
            if stop.load(Ordering::SeqCst) {
                return;
            }
            let at = rec.recv.unwrap_or(0.0) + k as f64 * lap;
            let due = std::time::Duration::from_secs_f64(at.max(0.0));
            if let Some(w) = due.checked_sub(t0.elapsed()) {
                std::thread::sleep(w);
            }
            publish::shift(&mut rec, offset);
            if let Err(e) = publish::put(session, &rec, false, &tag) {
                tracing::warn!(error = %e, "demo publish failed");
            }
        }
    }
}
