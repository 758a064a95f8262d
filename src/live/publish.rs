//! `publish`: plays a log onto zenoh with its original timing (scaled), or as fast as
//! possible, each record on its own key, JSON or postcard.

use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use zenoh::bytes::Encoding;
use zenoh::qos::CongestionControl;
use zenoh::Wait;

use super::zenoh_io::{postcard_encoding, wall_now};
use crate::config::Config;
use crate::logio::{read_all, Item, LogRecord};

/// How to publish.
#[derive(Debug, Clone, Copy)]
pub struct PublishOptions {
    /// Time scale (1.0 = original timing); `None` = as fast as possible.
    pub rate: Option<f64>,
    /// Postcard payloads instead of JSON.
    pub binary: bool,
    /// Shift stamps so the first record is stamped now (wall clock), keeping latency
    /// metrics meaningful against a live watcher.
    pub restamp: bool,
}

/// Publishes one record. Congestion blocks rather than drops, so a replayed log arrives
/// whole.
/// Puts one record, naming the publisher with `tag` ([`super::zenoh_io::source_tag`],
/// made once per session by the caller).
pub fn put(session: &zenoh::Session, rec: &LogRecord, binary: bool, tag: &[u8]) -> Result<(), String> {
    let r = if binary {
        session
            .put(rec.key.as_str(), rec.msg.to_postcard())
            .encoding(postcard_encoding())
            .attachment(tag.to_vec())
            .congestion_control(CongestionControl::Block)
            .wait()
    } else {
        session
            .put(rec.key.as_str(), rec.msg.to_json())
            .encoding(Encoding::APPLICATION_JSON)
            .attachment(tag.to_vec())
            .congestion_control(CongestionControl::Block)
            .wait()
    };
    r.map_err(|e| format!("publishing on {}: {e}", rec.key))
}

/// Shifts a message's stamp (and its poses' none: stamps only).
pub fn shift(rec: &mut LogRecord, by: f64) {
    use crate::msg::Msg;
    match &mut rec.msg {
        Msg::Objects(m) => m.stamp += by,
        Msg::Pose(m) => m.stamp += by,
        Msg::Path(m) => m.stamp += by,
        Msg::Obstacles(m) => m.stamp += by,
    }
}

/// Plays a log; returns the records published.
pub fn run(
    cfg: &Config,
    log: &Path,
    opts: PublishOptions,
    session: &zenoh::Session,
    stop: &AtomicBool,
) -> Result<u64, String> {
    // (first arrival in the log, when it was sent, wall-clock offset for restamping)
    let mut anchor: Option<(f64, Instant, f64)> = None;
    let mut n = 0u64;
    let mut err = None;
    let tag = super::zenoh_io::source_tag(session);
    read_all(&cfg.log(), log, &mut |item, _| {
        let Item::Record { mut rec, .. } = item else { return };
        if err.is_some() || stop.load(Ordering::SeqCst) {
            return;
        }
        let at = rec.recv.unwrap_or(rec.msg.stamp());
        // The pacing clock and the restamping offset are both anchored at the first record:
        // the log's arrival clock is moved onto the wall clock (the first record arrives
        // now), so each message keeps its recorded latency (recv - stamp). Anchoring the
        // pacing before the log was opened sent the first messages in a burst, and shifting
        // by the first stamp made the first latency the zero point: both showed as
        // messages arriving before their stamps.
        let (t0, start, offset) = *anchor.get_or_insert_with(|| (at, Instant::now(), wall_now() - at));
        if let Some(rate) = opts.rate {
            let due = Duration::from_secs_f64(((at - t0) / rate).max(0.0));
            if let Some(wait) = due.checked_sub(start.elapsed()) {
                std::thread::sleep(wait);
            }
        }
        if opts.restamp {
            shift(&mut rec, offset);
        }
        match put(session, &rec, opts.binary, &tag) {
            Ok(()) => n += 1,
            Err(e) => err = Some(e),
        }
    })
    .map_err(|e| e.to_string())?;
    match err {
        Some(e) => Err(e),
        None => Ok(n),
    }
}
