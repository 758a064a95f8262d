//! Replay: drives the engine from a log file. An I/O edge: one thread frames the file into
//! chunks of whole records (hashing it as it reads), worker threads decode chunks in
//! parallel, the calling thread runs the engine on the decoded records strictly in file
//! order — exactly as the live monitor sees them in arrival order — and one more thread
//! takes the engine's samples, chunk by chunk and in order, into the statistics, windows
//! and rules (a [`crate::monitor::Sink`]) and on to the series and the caller's hook. Every channel between
//! them is bounded, so memory does not grow with the log.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // the replay driver reads files and runs its decode and sink threads

use std::fs::File;
use std::io::Write;
use std::path::Path;
use std::sync::mpsc::{sync_channel, Receiver, SyncSender};

use crate::config::Config;
use crate::core::engine::{splice_plan_jobs, Engine, Input, PlanJob, Prepared, Sample};
use crate::logio::chunks::{Frame, LineFramer, RecordFramer};
use crate::logio::{jsonl, plb, Damage, Form, Item, LogError, Position, Tail};
use crate::monitor::Monitor;
use crate::msg::{Reject, Role};
use crate::report::{series_row, BadRecord, Report, RunInputs, SERIES_HEADER};
use crate::rules::AlertEvent;

/// Chunks in flight per decoding worker.
const IN_FLIGHT: usize = 2;
/// Sample batches (one per chunk) in flight from the engine to the sink.
const SINK_FLIGHT: usize = 4;
/// Points (objects and plan points) that the plan jobs of one sample batch may hold, about
/// 2 MiB of objects; beyond it the engine runs a plan's job itself, with the same samples.
const PLAN_JOB_POINTS: usize = 20_000;
/// Rejected records kept with their position for the report.
pub use crate::logio::KEEP_BAD;

/// What a replay produced.
pub struct Replayed {
    /// The report.
    pub report: Report,
    /// The monitor after the run (engine counters, statistics, windows, rules).
    pub monitor: Monitor,
}

/// A callback fed every batch of samples (on the replay's sink thread).
pub type SampleHook<'a> = dyn FnMut(&[Sample], &[AlertEvent]) + Send + 'a;

/// Options for one replay.
pub struct ReplayOptions<'a> {
    /// Where to write the long-form series, if anywhere.
    pub series: Option<&'a mut (dyn Write + Send)>,
    /// Called with bytes read so far.
    pub progress: &'a (dyn Fn(u64) + Sync),
    /// Called with every batch of samples and alert events.
    pub on_samples: Option<&'a mut SampleHook<'a>>,
}

/// Why a replay failed as a whole.
#[derive(Debug, thiserror::Error)]
pub enum ReplayError {
    /// The input could not be read.
    #[error(transparent)]
    Log(#[from] LogError),
    /// The site-map file is not a valid obstacle set.
    #[error("site map {0}")]
    Map(String),
    /// The series output could not be written.
    #[error("writing the series: {0}")]
    Series(std::io::Error),
}

enum Source {
    Lines(LineFramer<File>),
    Records(plb::Header, RecordFramer<File>),
}

impl Source {
    fn open(path: &Path) -> Result<Source, LogError> {
        // A folder opens on Linux and then fails every read: say so before anything runs.
        if path.is_dir() {
            let source = std::io::Error::new(std::io::ErrorKind::InvalidInput, "is a folder, not a log file");
            return Err(LogError::Io { path: path.display().to_string(), source });
        }
        Ok(match Form::of(path) {
            Form::Jsonl => Source::Lines(
                LineFramer::new(
                    File::open(path)
                        .map_err(|source| LogError::Io { path: path.display().to_string(), source })?,
                )
                .hashing(&[]),
            ),
            Form::Plb => {
                let (h, f) = plb::open(path, true)?;
                Source::Records(h, f)
            }
        })
    }

    fn roles(&self) -> &[(String, String)] {
        match self {
            Source::Lines(_) => &[],
            Source::Records(h, _) => &h.roles,
        }
    }

    /// The next frame; a read error ends the readable part like a damaged tail.
    fn next_frame(&mut self, at: u64) -> Option<Frame> {
        let r = match self {
            Source::Lines(f) => f.next_frame(),
            Source::Records(_, f) => f.next_frame(),
        };
        r.unwrap_or_else(|e| Some(Frame::Tail(Tail { offset: at, reason: format!("read error: {e}") })))
    }

    /// The SHA-256 of the whole file (the rest is read if the replay stopped early).
    fn finish_digest(self) -> String {
        let d = match self {
            Source::Lines(f) => f.finish_digest(),
            Source::Records(_, f) => f.finish_digest(),
        };
        d.ok().flatten().unwrap_or_default()
    }
}

/// A decoded record, its message already prepared for the engine.
enum Ready {
    Record { role: Role, recv: Option<f64>, msg: Prepared },
    Bad { pos: Position, role: Option<Role>, reason: Reject },
    Damaged(Damage),
}

impl From<Item> for Ready {
    fn from(item: Item) -> Ready {
        match item {
            Item::Record { role, rec } => Ready::Record { role, recv: rec.recv, msg: rec.msg.into() },
            Item::Bad { pos, role, reason } => Ready::Bad { pos, role, reason },
            Item::Damaged(d) => Ready::Damaged(d),
        }
    }
}

struct Decoded {
    items: Vec<Ready>,
    end: u64,
    tail: Option<Tail>,
}

fn workers() -> usize {
    std::thread::available_parallelism().map_or(2, |n| n.get()).clamp(1, 4)
}

/// Replays one log file.
pub fn replay(cfg: &Config, path: &Path, opts: ReplayOptions<'_>) -> Result<Replayed, ReplayError> {
    let ReplayOptions { series, progress, on_samples } = opts;
    let mut source = Source::open(path)?;
    let header_roles: Vec<(String, String)> = source.roles().to_vec();
    let limits = cfg.limits();
    let log = cfg.log();
    let mut monitor = Monitor::new(&cfg.monitor());
    let mut first_events: Vec<AlertEvent> = Vec::new();
    if let Some(map) = load_map(cfg)? {
        monitor.push(map, &mut Vec::new(), &mut first_events);
    }
    let (mut engine, sink) = monitor.split();
    // Plans' path quality (the costliest steps of a log with plans) runs on the sink
    // thread, beside the engine; the sink puts its samples where the engine would have.
    engine.defer_plan_jobs(Some(PLAN_JOB_POINTS));
    // A T-GOSPA window's components, solved on rayon's pool (the values are the same on
    // any number of threads); the windows themselves stay in stamp order.
    engine.set_tgospa_runner(Box::new(crate::threads::Pooled));
    let mut first_bad = Vec::new();
    let mut samples: Vec<Sample> = Vec::with_capacity(4096);
    let mut tail = None;
    let mut damage = crate::report::DamageSummary::default();
    let n = workers();
    let is_lines = matches!(source, Source::Lines(_));

    let (digest, sunk) = std::thread::scope(|s| {
        let (mut to_workers, mut from_workers): (Vec<SyncSender<Frame>>, Vec<Receiver<Decoded>>) =
            (Vec::new(), Vec::new());
        for _ in 0..n {
            let (tx_in, rx_in) = sync_channel::<Frame>(IN_FLIGHT);
            let (tx_out, rx_out) = sync_channel::<Decoded>(IN_FLIGHT);
            to_workers.push(tx_in);
            from_workers.push(rx_out);
            let roles = &header_roles;
            let limits = &limits;
            let log = &log;
            let decode = move || {
                let mut decoded = Vec::new();
                for frame in rx_in.iter() {
                    let (end, tail) = match frame {
                        Frame::Tail(t) => (t.offset, Some(t)),
                        f if is_lines => (jsonl::decode_frame(log, limits, f, &mut decoded), None),
                        f => plb::decode_frame(log, roles, limits, f, &mut decoded),
                    };
                    // Prepared here, while the messages are in this core's cache; the
                    // objects are dropped on the thread that made them.
                    let items: Vec<Ready> = decoded.drain(..).map(Ready::from).collect();
                    if tx_out.send(Decoded { items, end, tail }).is_err() {
                        break;
                    }
                }
            };
            spawn_named(s, "plumbline-decode", decode);
        }
        // The framer hashes what it reads, so the digest costs no second read.
        let framer = spawn_named(s, "plumbline-frame", move || {
            let mut k = 0;
            let mut at = 0;
            while let Some(frame) = source.next_frame(at) {
                if let Frame::Chunk(c) = &frame {
                    at = c.end;
                }
                let stop = matches!(frame, Frame::Tail(_));
                if let Frame::Skipped(d) = &frame {
                    at = d.offset + d.bytes;
                }
                if to_workers[k % to_workers.len()].send(frame).is_err() || stop {
                    break;
                }
                k += 1;
            }
            drop(to_workers);
            source.finish_digest()
        });
        // The sink: statistics, windows, rules, then the series and the hook, batch by batch.
        let (to_sink, from_engine) = sync_channel::<(Vec<Sample>, Vec<(usize, PlanJob)>)>(SINK_FLIGHT);
        let (recycle, recycled) = sync_channel::<Vec<Sample>>(SINK_FLIGHT + 1);
        let sink_thread = spawn_named(s, "plumbline-sink", move || {
            let (mut sink, mut series, mut on_samples) = (sink, series, on_samples);
            let mut events = first_events;
            let (mut text, mut ryu_buf) = (String::new(), ryu::Buffer::new());
            let mut write_err = None;
            if let Some(w) = series.as_mut() {
                write_err = w.write_all(SERIES_HEADER.as_bytes()).err();
            }
            let mut spliced = Vec::new();
            for (mut batch, jobs) in from_engine.iter() {
                if !jobs.is_empty() {
                    spliced.clear();
                    splice_plan_jobs(&batch, &jobs, &mut spliced);
                    std::mem::swap(&mut batch, &mut spliced);
                }
                sink.consume(&mut batch, &mut events);
                if write_err.is_none() {
                    let out = (&mut on_samples, &mut series, &mut text, &mut ryu_buf);
                    write_err = emit(&batch, &mut events, out, false).err();
                }
                events.clear();
                batch.clear();
                // Back to the engine for its next chunk; when the return queue is full the
                // batch is simply freed.
                let _ = recycle.try_send(batch);
            }
            if write_err.is_none() {
                write_err =
                    emit(&[], &mut events, (&mut on_samples, &mut series, &mut text, &mut ryu_buf), true)
                        .err();
            }
            (sink, write_err)
        });

        let mut k = 0;
        let send = |samples: &mut Vec<Sample>, engine: &mut Engine| {
            let next = recycled.try_recv().unwrap_or_else(|_| Vec::with_capacity(4096));
            // The sink stops only when this side hangs up.
            let _ = to_sink.send((std::mem::replace(samples, next), engine.take_plan_jobs()));
        };
        while let Ok(d) = from_workers[k % n].recv() {
            k += 1;
            for item in d.items {
                match item {
                    Ready::Record { role, recv, msg } => {
                        engine.push(Input::Prepared { role, recv, msg }, &mut samples)
                    }
                    Ready::Bad { pos, role, reason } => {
                        tracing::debug!(%pos, role = role.map(|r| r.name()), reason = %reason, "rejected record");
                        if first_bad.len() < KEEP_BAD {
                            first_bad.push(BadRecord::new(pos, role, &reason));
                        }
                        engine.push(Input::Rejected { role, reason: reason.code() }, &mut samples);
                    }
                    Ready::Damaged(d) => {
                        tracing::warn!(offset = d.offset, bytes = d.bytes, records = d.records, reason = %d.reason, "damaged stretch skipped");
                        damage.add(d);
                    }
                }
            }
            progress(d.end);
            send(&mut samples, &mut engine);
            if d.tail.is_some() {
                tail = d.tail;
                break;
            }
        }
        // Dropping the receivers stops the workers and the framer if we left early.
        drop(from_workers);
        engine.finish(&mut samples);
        send(&mut samples, &mut engine);
        drop(to_sink);
        let sunk = sink_thread.join().expect("the sink thread does not panic");
        (framer.join().unwrap_or_default(), sunk)
    });
    let (sink, write_err) = sunk;
    engine.defer_plan_jobs(None);
    let monitor = Monitor::join(engine, sink);
    if let Some(e) = write_err {
        return Err(ReplayError::Series(e));
    }
    let inputs = RunInputs {
        input: path.display().to_string(),
        input_digest: digest,
        first_rejected: first_bad,
        tail,
        damage,
    };
    let report = Report::build(&cfg.report_settings(), &monitor, inputs);
    Ok(Replayed { report, monitor })
}

/// Reads the site map named by `clearance.map_file`, as an input for the monitor.
pub fn load_map(cfg: &Config) -> Result<Option<Input>, ReplayError> {
    let Some(path) = &cfg.map_file else { return Ok(None) };
    match crate::logio::read_map(path, &cfg.limits()) {
        Ok(input) => Ok(Some(input)),
        Err(LogError::BadMap { path, why }) => Err(ReplayError::Map(format!("{path}: {why}"))),
        Err(e) => Err(e.into()),
    }
}

/// Spawns a named scoped thread (names show in `top -H` and `perf`). Spawning fails only
/// when the OS is out of threads; the work then runs on the caller's thread.
fn spawn_named<'s, 'e, T: Send + 's>(
    s: &'s std::thread::Scope<'s, 'e>,
    name: &str,
    f: impl FnOnce() -> T + Send + 's,
) -> std::thread::ScopedJoinHandle<'s, T> {
    std::thread::Builder::new().name(name.into()).spawn_scoped(s, f).expect("spawn a replay thread")
}

/// Where a batch goes after the sink: the caller's hook and the series.
type Outputs<'r, 'a> = (
    &'r mut Option<&'a mut SampleHook<'a>>,
    &'r mut Option<&'a mut (dyn Write + Send)>,
    &'r mut String,
    &'r mut ryu::Buffer,
);

fn emit(
    samples: &[Sample],
    events: &mut [AlertEvent],
    out: Outputs<'_, '_>,
    force: bool,
) -> std::io::Result<()> {
    let (hook, series, text, ryu_buf) = out;
    if let Some(f) = hook.as_mut() {
        f(samples, events);
    }
    if let Some(w) = series.as_mut() {
        for smp in samples {
            series_row(text, smp, ryu_buf);
        }
        if force || text.len() > 1 << 16 {
            w.write_all(text.as_bytes())?;
            text.clear();
        }
        if force {
            w.flush()?;
        }
    }
    Ok(())
}
