//! Replay: drives the engine from a log file. An I/O edge with two threads: one reads,
//! hashes and decodes the file into bounded batches, the other runs the engine, so
//! decoding and evaluation overlap. The engine sees the records in file order, exactly
//! as the live monitor sees them in arrival order.

use std::io::Write;
use std::path::Path;
use std::sync::mpsc::sync_channel;

use crate::config::Config;
use crate::core::engine::{Engine, Input, Sample};
use crate::logio::{read_all, Item, LogError, ReadOutcome};
use crate::report::{series_row, BadRecord, Report, RunInputs, RunStats, SERIES_HEADER};

/// Records per batch handed from the reader to the engine thread.
const BATCH: usize = 512;
/// Batches in flight; the reader blocks when the engine is behind (bounded memory).
const IN_FLIGHT: usize = 8;
/// Rejected records kept with their position for the report.
pub const KEEP_BAD: usize = 100;

/// What a replay produced.
pub struct Replayed {
    /// The report.
    pub report: Report,
    /// The engine after the run (counters, transport).
    pub engine: Engine,
    /// Run statistics.
    pub stats: RunStats,
}

/// A callback fed every batch of samples.
pub type SampleHook<'a> = dyn FnMut(&[Sample]) + 'a;

/// Options for one replay.
pub struct ReplayOptions<'a> {
    /// Where to write the long-form series, if anywhere.
    pub series: Option<&'a mut dyn Write>,
    /// Called with bytes read so far.
    pub progress: &'a (dyn Fn(u64) + Sync),
    /// Called with every batch of samples (for windows and rules).
    pub on_samples: Option<&'a mut SampleHook<'a>>,
}

/// Replays one log file.
pub fn replay(cfg: &Config, path: &Path, opts: ReplayOptions<'_>) -> Result<Replayed, ReplayError> {
    let ReplayOptions {
        mut series,
        progress,
        mut on_samples,
    } = opts;
    let mut engine = Engine::new(cfg.tracking, cfg.align);
    let mut stats = RunStats::new(cfg);
    let mut first_bad = Vec::new();
    let mut samples: Vec<Sample> = Vec::with_capacity(256);
    let mut text = String::new();
    let mut ryu_buf = ryu::Buffer::new();
    if let Some(w) = series.as_mut() {
        w.write_all(SERIES_HEADER.as_bytes())
            .map_err(ReplayError::Series)?;
    }

    let (tx, rx) = sync_channel::<Vec<Item>>(IN_FLIGHT);
    let outcome: Result<ReadOutcome, LogError> = std::thread::scope(|s| {
        let reader = s.spawn(move || {
            let mut batch = Vec::with_capacity(BATCH);
            let r = read_all(cfg, path, &mut |item, bytes| {
                batch.push(item);
                if batch.len() >= BATCH {
                    let full = std::mem::replace(&mut batch, Vec::with_capacity(BATCH));
                    let _ = tx.send(full);
                    progress(bytes);
                }
            });
            if !batch.is_empty() {
                let _ = tx.send(batch);
            }
            r
        });
        let mut flush = |samples: &mut Vec<Sample>,
                         text: &mut String,
                         force: bool|
         -> Result<(), ReplayError> {
            stats.add(samples);
            if let Some(f) = on_samples.as_mut() {
                f(samples);
            }
            if let Some(w) = series.as_mut() {
                for smp in samples.iter() {
                    series_row(text, smp, &mut ryu_buf);
                }
                if force || text.len() > 1 << 16 {
                    w.write_all(text.as_bytes()).map_err(ReplayError::Series)?;
                    text.clear();
                }
            }
            samples.clear();
            Ok(())
        };
        let mut result = Ok(());
        for batch in rx.iter() {
            for item in batch {
                match item {
                    Item::Record { role, rec } => engine.push(
                        Input::Message {
                            role,
                            recv: rec.recv,
                            msg: rec.msg,
                        },
                        &mut samples,
                    ),
                    Item::Bad { pos, role, reason } => {
                        tracing::debug!(%pos, role = role.map(|r| r.name()), reason = %reason, "rejected record");
                        if first_bad.len() < KEEP_BAD {
                            first_bad.push(BadRecord::new(pos, role, &reason));
                        }
                        engine.push(
                            Input::Rejected {
                                role,
                                reason: reason.code(),
                            },
                            &mut samples,
                        );
                    }
                }
            }
            if result.is_ok() {
                result = flush(&mut samples, &mut text, false);
            }
        }
        engine.finish(&mut samples);
        if result.is_ok() {
            result = flush(&mut samples, &mut text, true);
        }
        let read = reader.join().unwrap_or_else(|_| {
            Err(LogError::BadHeader {
                path: path.display().to_string(),
                why: "reader thread panicked".into(),
            })
        });
        result.map_err(|e| match e {
            ReplayError::Series(e) => LogError::Io {
                path: "series output".into(),
                source: e,
            },
            ReplayError::Log(e) => e,
        })?;
        read
    });
    let outcome = outcome?;
    if let Some(w) = series.as_mut() {
        w.flush().map_err(ReplayError::Series)?;
    }
    let inputs = RunInputs {
        input: path.display().to_string(),
        input_digest: outcome.digest,
        first_rejected: first_bad,
        tail: outcome.tail,
    };
    let report = Report::build(cfg, &engine, &stats, inputs);
    Ok(Replayed {
        report,
        engine,
        stats,
    })
}

/// Why a replay failed as a whole.
#[derive(Debug, thiserror::Error)]
pub enum ReplayError {
    /// The input could not be read.
    #[error(transparent)]
    Log(#[from] LogError),
    /// The series output could not be written.
    #[error("writing the series: {0}")]
    Series(std::io::Error),
}
