//! Log files (SPEC §3): JSON Lines and the binary `.plb` form. This is an I/O edge: it
//! reads and writes files and hands decoded records to the caller.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // log files are this edge's work (clippy.toml keeps them out of the pure layers)

pub mod chunks;
pub mod journal;
pub mod jsonl;
pub mod plb;

pub use crate::msg::record::{Damage, LogRecord, Position, Tail};

use std::path::Path;

use thiserror::Error;

use crate::msg::{Limits, Reject, Role};

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
    /// The site-map file is not a valid obstacle set.
    #[error("site map {path}: {why}")]
    BadMap {
        /// The file.
        path: String,
        /// What was wrong.
        why: Reject,
    },
}

/// Reads a site-map file (one ObstacleSet as JSON, `clearance.map_file`) as the input the
/// monitor takes before the log: the same for replay and live.
pub fn read_map(path: &str, limits: &Limits) -> Result<crate::core::Input, LogError> {
    let text = std::fs::read_to_string(path).map_err(|source| LogError::Io { path: path.into(), source })?;
    let msg = crate::msg::decode_json(crate::msg::MsgKind::Obstacles, &text, limits)
        .map_err(|why| LogError::BadMap { path: path.into(), why })?;
    Ok(crate::core::Input::Message { role: Role::ReferenceObstacles, recv: None, msg })
}

/// First rejected records listed in a report; the rest are counted only.
pub const KEEP_BAD: usize = 100;

/// What the log readers and writers need of the config: the role bindings (a record's key
/// to its role) and the message limits (the config builds it: `Config::log`).
#[derive(Debug, Clone)]
pub struct LogParams {
    /// Key expression per role.
    pub roles: Vec<(Role, String)>,
    /// Message validation limits.
    pub limits: Limits,
}

impl LogParams {
    /// The role bound to an exact key, if any.
    pub fn role_of(&self, key: &str) -> Option<Role> {
        crate::msg::role_of(&self.roles, key)
    }

    /// Message validation limits.
    pub fn limits(&self) -> Limits {
        self.limits
    }
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
pub fn role_for(cfg: &LogParams, header_roles: &[(String, String)], key: &str) -> Option<Role> {
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
pub fn read_all(
    cfg: &LogParams,
    path: &Path,
    each: &mut dyn FnMut(Item, u64),
) -> Result<ReadOutcome, LogError> {
    match Form::of(path) {
        Form::Jsonl => jsonl::read(cfg, path, each),
        Form::Plb => plb::read(cfg, path, each),
    }
}

/// Reads a log held in memory, in the given form (fuzz targets, property tests).
pub fn read_bytes(
    cfg: &LogParams,
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
    pub fn create(cfg: &LogParams, path: &Path) -> std::io::Result<LogWriter> {
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
