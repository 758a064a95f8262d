//! The vocabulary of log files that every layer may name: a stored record, where a record
//! sits in its file, and the damage a reader skipped. Types only; the readers and writers
//! are in `logio`.

use super::Msg;

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

/// A torn or corrupt tail of a binary log.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Tail {
    /// Byte offset where the damage starts.
    pub offset: u64,
    /// What was found there.
    pub reason: String,
}

/// A damaged stretch of a binary log that the reader skipped to reach the next whole
/// record.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Damage {
    /// Byte offset where the damage starts.
    pub offset: u64,
    /// Bytes skipped.
    pub bytes: u64,
    /// Records lost in it (the damaged one, and record starts inside the stretch that did
    /// not verify).
    pub records: u64,
    /// What was found at `offset`.
    pub reason: String,
}
