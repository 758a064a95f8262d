//! JSON Lines logs: `{"key": "...", "recv": 12.305, "msg": {...}}`, one record a line.

use std::borrow::Cow;
use std::fs::File;
use std::io::{BufRead, BufReader, Write};
use std::path::Path;

use serde::Deserialize;
use serde_json::value::RawValue;
use sha2::{Digest, Sha256};

use super::{hex_digest, io_err, role_for, Item, LogError, LogRecord, Position, ReadOutcome};
use crate::config::Config;
use crate::msg::{decode_json, Limits, Reject, Role};

#[derive(Deserialize)]
struct Line<'a> {
    #[serde(borrow)]
    key: Cow<'a, str>,
    #[serde(default)]
    recv: Option<f64>,
    #[serde(borrow)]
    msg: &'a RawValue,
}

/// Decodes one line (without its newline).
pub fn decode_line(
    cfg: &Config,
    limits: &Limits,
    line: &[u8],
) -> Result<(Role, LogRecord), (Option<Role>, Reject)> {
    let text = std::str::from_utf8(line).map_err(|e| (None, Reject::Malformed(e.to_string())))?;
    let l: Line<'_> = serde_json::from_str(text).map_err(|e| (None, Reject::from_json(&e)))?;
    if let Some(r) = l.recv {
        if !r.is_finite() {
            return Err((None, Reject::NonFinite("recv".into())));
        }
    }
    let role =
        role_for(cfg, &[], &l.key).ok_or_else(|| (None, Reject::UnboundKey(l.key.to_string())))?;
    let msg = decode_json(role.kind(), l.msg.get(), limits).map_err(|e| (Some(role), e))?;
    Ok((
        role,
        LogRecord {
            key: l.key.into_owned(),
            recv: l.recv,
            msg,
        },
    ))
}

/// Reads a JSON Lines log.
pub fn read(
    cfg: &Config,
    path: &Path,
    each: &mut dyn FnMut(Item, u64),
) -> Result<ReadOutcome, LogError> {
    let f = File::open(path).map_err(io_err(path))?;
    let mut r = BufReader::with_capacity(1 << 20, f);
    let limits = cfg.limits();
    let mut hasher = Sha256::new();
    let mut buf = Vec::with_capacity(4096);
    let mut line_no = 0u64;
    let mut bytes = 0u64;
    loop {
        buf.clear();
        let n = r.read_until(b'\n', &mut buf).map_err(io_err(path))?;
        if n == 0 {
            break;
        }
        hasher.update(&buf);
        bytes += n as u64;
        line_no += 1;
        let mut line = &buf[..];
        while let [rest @ .., b'\n' | b'\r'] = line {
            line = rest;
        }
        if line.iter().all(u8::is_ascii_whitespace) {
            continue;
        }
        let item = match decode_line(cfg, &limits, line) {
            Ok((role, rec)) => Item::Record { role, rec },
            Err((role, reason)) => Item::Bad {
                pos: Position::Line(line_no),
                role,
                reason,
            },
        };
        each(item, bytes);
    }
    Ok(ReadOutcome {
        digest: hex_digest(hasher),
        bytes,
        tail: None,
    })
}

/// Formats one record as a line (with its newline).
pub fn format_line(rec: &LogRecord) -> String {
    let key = serde_json::to_string(&rec.key).unwrap_or_default();
    let body = rec.msg.to_json();
    match rec.recv {
        Some(r) => format!(
            "{{\"key\":{key},\"recv\":{},\"msg\":{body}}}\n",
            ryu::Buffer::new().format(r)
        ),
        None => format!("{{\"key\":{key},\"msg\":{body}}}\n"),
    }
}

/// Writes records as JSON Lines.
pub struct JsonlWriter<W: Write> {
    out: W,
}

impl<W: Write> JsonlWriter<W> {
    /// Wraps a writer.
    pub fn new(out: W) -> Self {
        JsonlWriter { out }
    }

    /// Appends one record.
    pub fn write(&mut self, rec: &LogRecord) -> std::io::Result<()> {
        self.out.write_all(format_line(rec).as_bytes())
    }

    /// Flushes the underlying writer.
    pub fn flush(&mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}
