//! Log files (SPEC §3): JSON Lines and the binary `.plb` form. This is an I/O edge: it
//! reads and writes files and hands decoded records to the caller.

pub mod chunks;
pub mod journal;
pub mod jsonl;
pub mod plb;

pub use chunks::Damage;

use std::path::Path;

use thiserror::Error;

use crate::config::Config;
use crate::msg::{Msg, Reject, Role};

/// One record as stored: key expression, arrival time, message.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LogRecord {
    /// Key expression the message arrived on.
    pub key: String,
    /// Arrival time on the monitor's clock.
    pub recv: Option<f64>,
    /// The message.
    pub msg: Msg,
}

/// Where a record sits in its file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Position {
    /// 1-based line of a JSON Lines file.
    Line(u64),
    /// Byte offset of a binary record.
    Offset(u64),
}

impl std::fmt::Display for Position {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Position::Line(n) => write!(f, "line {n}"),
            Position::Offset(n) => write!(f, "byte {n}"),
        }
    }
}

/// One item read from a log.
#[derive(Debug, Clone)]
pub enum Item {
    /// A valid record.
    Record {
        /// Its role.
        role: Role,
        /// The record.
        rec: LogRecord,
    },
    /// A damaged stretch of a binary log, skipped to reach the next whole record.
    Damaged(Damage),
    /// A rejected record.
    Bad {
        /// Where.
        pos: Position,
        /// The role, when the key was bound.
        role: Option<Role>,
        /// Why.
        reason: Reject,
    },
}

/// A log that cannot be read at all, or a damaged tail.
#[derive(Debug, Error)]
pub enum LogError {
    /// The file could not be opened or read.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: String,
        /// The cause.
        source: std::io::Error,
    },
    /// The binary header is missing or damaged.
    #[error("{path}: not a plumbline binary log: {why}")]
    BadHeader {
        /// The file.
        path: String,
        /// What was wrong.
        why: String,
    },
}

/// A torn or corrupt tail of a binary log.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Tail {
    /// Byte offset where the damage starts.
    pub offset: u64,
    /// What was found there.
    pub reason: String,
}

/// Which form a path holds, by extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Form {
    /// JSON Lines.
    Jsonl,
    /// Binary.
    Plb,
}

impl Form {
    /// `.plb` is binary; anything else is read as JSON Lines.
    pub fn of(path: &Path) -> Form {
        match path.extension().and_then(|e| e.to_str()) {
            Some("plb") => Form::Plb,
            _ => Form::Jsonl,
        }
    }
}

/// Resolves a key to a role: the config's bindings first, then the log's own header.
pub fn role_for(cfg: &Config, header_roles: &[(String, String)], key: &str) -> Option<Role> {
    cfg.role_of(key)
        .or_else(|| header_roles.iter().find(|(_, k)| k == key).and_then(|(r, _)| Role::from_name(r)))
}

/// What reading a whole log found besides its items.
#[derive(Debug, Clone, Default)]
pub struct ReadOutcome {
    /// Bytes read.
    pub bytes: u64,
    /// The damaged tail of a binary log, if any.
    pub tail: Option<Tail>,
}

/// Opens either form and calls `each` for every item, in file order, with the bytes read
/// so far.
pub fn read_all(cfg: &Config, path: &Path, each: &mut dyn FnMut(Item, u64)) -> Result<ReadOutcome, LogError> {
    match Form::of(path) {
        Form::Jsonl => jsonl::read(cfg, path, each),
        Form::Plb => plb::read(cfg, path, each),
    }
}

/// Reads a log held in memory, in the given form (fuzz targets, property tests).
pub fn read_bytes(
    cfg: &Config,
    form: Form,
    bytes: &[u8],
    each: &mut dyn FnMut(Item, u64),
) -> Result<ReadOutcome, LogError> {
    let name = Path::new("<memory>");
    match form {
        Form::Jsonl => jsonl::read_from(cfg, bytes, each).map_err(io_err(name)),
        Form::Plb => plb::read_from(cfg, bytes, name, each),
    }
}

fn io_err(path: &Path) -> impl FnOnce(std::io::Error) -> LogError + '_ {
    move |source| LogError::Io { path: path.display().to_string(), source }
}

/// A writer of either form, picked by the path's extension.
pub enum LogWriter {
    /// JSON Lines.
    Jsonl(jsonl::JsonlWriter<std::io::BufWriter<std::fs::File>>),
    /// Binary.
    Plb(plb::PlbWriter<std::io::BufWriter<std::fs::File>>),
}

impl LogWriter {
    /// Creates the file; a binary log's header carries the config's role bindings.
    pub fn create(cfg: &Config, path: &Path) -> std::io::Result<LogWriter> {
        let now = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_secs_f64())
            .unwrap_or(0.0);
        Ok(match Form::of(path) {
            Form::Jsonl => LogWriter::Jsonl(jsonl::JsonlWriter::new(std::io::BufWriter::new(
                std::fs::File::create(path)?,
            ))),
            Form::Plb => LogWriter::Plb(plb::create(path, &plb::Header::for_config(cfg, now))?),
        })
    }

    /// Appends one record.
    pub fn write(&mut self, rec: &LogRecord) -> std::io::Result<()> {
        match self {
            LogWriter::Jsonl(w) => w.write(rec),
            LogWriter::Plb(w) => w.write(rec),
        }
    }

    /// Flushes the file.
    pub fn finish(&mut self) -> std::io::Result<()> {
        match self {
            LogWriter::Jsonl(w) => w.flush(),
            LogWriter::Plb(w) => w.flush(),
        }
    }
}
