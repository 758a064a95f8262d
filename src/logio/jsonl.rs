//! JSON Lines logs: `{"key": "...", "recv": 12.305, "msg": {...}}`, one record a line.

use std::borrow::Cow;
use std::cell::Cell;
use std::fs::File;
use std::io::{Read, Write};
use std::path::Path;

use serde::de::{self, DeserializeSeed, Deserializer, MapAccess, Visitor};
use serde::Deserialize;
use serde_json::value::RawValue;

use super::chunks::{Chunk, Frame, LineFramer, MAX_LINE};
use super::LogParams;
use super::{io_err, role_for, Item, LogError, LogRecord, Position, ReadOutcome};
use crate::msg::{
    self, check_recv, decode_json, strict, validate, Limits, Msg, MsgKind, ObjectSet, ObstacleSet, Pose,
    Reject, Role,
};

/// A string borrowed from the line when it has no escapes.
struct Text<'a>(Cow<'a, str>);

impl<'de> Deserialize<'de> for Text<'de> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Text<'de>;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("a string")
            }
            fn visit_borrowed_str<E: de::Error>(self, v: &'de str) -> Result<Self::Value, E> {
                Ok(Text(Cow::Borrowed(v)))
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Self::Value, E> {
                Ok(Text(Cow::Owned(v.to_string())))
            }
        }
        d.deserialize_str(V)
    }
}

/// Decodes a message of a known kind straight from the line.
struct MsgSeed(MsgKind);

impl<'de> DeserializeSeed<'de> for MsgSeed {
    type Value = Msg;
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<Msg, D::Error> {
        Ok(match self.0 {
            MsgKind::Objects => Msg::Objects(strict::object::<_, ObjectSet>(d)?),
            MsgKind::Pose => Msg::Pose(strict::object::<_, Pose>(d)?),
            MsgKind::Path => Msg::Path(strict::object::<_, msg::Path>(d)?),
            MsgKind::Obstacles => Msg::Obstacles(strict::object::<_, ObstacleSet>(d)?),
        })
    }
}

enum Body<'a> {
    Typed(Role, Msg),
    Raw(&'a RawValue),
}

/// One pass over a line: when `key` comes before `msg` (as plumbline writes it) the
/// message is decoded straight into its type; otherwise it is kept raw and decoded after.
struct LineSeed<'c> {
    cfg: &'c LogParams,
    /// Set while a bound message is being decoded, so an error can name its role.
    decoding: &'c Cell<Option<Role>>,
}

struct Parsed<'a> {
    key: Option<Text<'a>>,
    recv: Option<f64>,
    body: Option<Body<'a>>,
}

impl<'de> DeserializeSeed<'de> for LineSeed<'_> {
    type Value = Parsed<'de>;
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<Self::Value, D::Error> {
        d.deserialize_map(self)
    }
}

impl<'de> Visitor<'de> for LineSeed<'_> {
    type Value = Parsed<'de>;
    fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("a record object with key, recv and msg")
    }
    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Self::Value, A::Error> {
        let mut out = Parsed { key: None, recv: None, body: None };
        while let Some(k) = map.next_key::<Text<'de>>()? {
            match &*k.0 {
                "key" => {
                    let k: Text<'de> = map.next_value()?;
                    // From here on an error belongs to the key's role (a bad `recv` too).
                    self.decoding.set(role_for(self.cfg, &[], &k.0));
                    out.key = Some(k);
                }
                "recv" => out.recv = map.next_value()?,
                "msg" => {
                    let role = out.key.as_ref().and_then(|k| role_for(self.cfg, &[], &k.0));
                    out.body = Some(match role {
                        Some(role) => Body::Typed(role, map.next_value_seed(MsgSeed(role.kind()))?),
                        None => Body::Raw(map.next_value()?),
                    });
                }
                _ => {
                    map.next_value::<de::IgnoredAny>()?;
                }
            }
        }
        Ok(out)
    }
}

/// Decodes one line (without its newline).
pub fn decode_line(
    cfg: &LogParams,
    limits: &Limits,
    line: &[u8],
) -> Result<(Role, LogRecord), (Option<Role>, Reject)> {
    // Object sets and poses by the direct reader when it can (see `crate::wire::json`);
    // what it declines goes the serde way, which also words the errors.
    match crate::wire::json::record(line, |k| role_for(cfg, &[], k)) {
        Some((role, rec)) => {
            validate(&rec.msg, limits).map_err(|e| (Some(role), e))?;
            check_recv(rec.recv, limits).map_err(|e| (Some(role), e))?;
            Ok((role, rec))
        }
        None => decode_line_serde(cfg, limits, line),
    }
}

/// [`decode_line`] by serde_json alone (the reference the direct reader is tested against).
pub fn decode_line_serde(
    cfg: &LogParams,
    limits: &Limits,
    line: &[u8],
) -> Result<(Role, LogRecord), (Option<Role>, Reject)> {
    let text = std::str::from_utf8(line).map_err(|e| (None, Reject::Malformed(e.to_string())))?;
    let decoding = Cell::new(None);
    let mut de = serde_json::Deserializer::from_str(text);
    let parsed = LineSeed { cfg, decoding: &decoding }
        .deserialize(&mut de)
        .and_then(|p| de.end().map(|_| p))
        .map_err(|e| (decoding.get().or_else(|| key_role(cfg, text)), Reject::from_json(&e)))?;
    let key = parsed.key.ok_or_else(|| (None, Reject::MissingField("key".into())))?.0;
    let key_role = role_for(cfg, &[], &key);
    let body = parsed.body.ok_or_else(|| (key_role, Reject::MissingField("msg".into())))?;
    if parsed.recv.is_some_and(|r| !r.is_finite()) {
        return Err((key_role, Reject::NonFinite("recv".into())));
    }
    let (role, msg) = match body {
        Body::Typed(role, msg) => {
            validate(&msg, limits).map_err(|e| (Some(role), e))?;
            (role, msg)
        }
        Body::Raw(raw) => {
            let role = role_for(cfg, &[], &key).ok_or_else(|| (None, Reject::UnboundKey(key.to_string())))?;
            (role, decode_json(role.kind(), raw.get(), limits).map_err(|e| (Some(role), e))?)
        }
    };
    // The message first, then its arrival time, in the order the direct reader checks.
    check_recv(parsed.recv, limits).map_err(|e| (Some(role), e))?;
    Ok((role, LogRecord { key: key.into_owned(), recv: parsed.recv, msg }))
}

/// The role of a rejected line whose key is readable: a second, lenient pass that reads
/// only `key` and skips every other field whatever its type (the error path only).
fn key_role(cfg: &LogParams, text: &str) -> Option<Role> {
    #[derive(Deserialize)]
    struct KeyOnly<'a> {
        #[serde(borrow)]
        key: Cow<'a, str>,
    }
    let k: KeyOnly<'_> = serde_json::from_str(text).ok()?;
    role_for(cfg, &[], &k.key)
}

/// Decodes a chunk of whole lines.
pub fn decode_chunk(cfg: &LogParams, limits: &Limits, chunk: &Chunk, out: &mut Vec<Item>) {
    // Lines with their newline, as `split_inclusive` cuts them, found by memchr.
    let bytes = &chunk.bytes;
    let (mut start, mut line_no) = (0, chunk.first);
    while start < bytes.len() {
        let end = memchr::memchr(b'\n', &bytes[start..]).map_or(bytes.len(), |k| start + k + 1);
        let mut line = &bytes[start..end];
        while let [rest @ .., b'\n' | b'\r'] = line {
            line = rest;
        }
        if !line.iter().all(u8::is_ascii_whitespace) {
            out.push(match decode_line(cfg, limits, line) {
                Ok((role, rec)) => Item::Record { role, rec },
                Err((role, reason)) => Item::Bad { pos: Position::Line(line_no), role, reason },
            });
        }
        (start, line_no) = (end, line_no + 1);
    }
}

/// Reads a JSON Lines log on the calling thread.
pub fn read(cfg: &LogParams, path: &Path, each: &mut dyn FnMut(Item, u64)) -> Result<ReadOutcome, LogError> {
    let f = File::open(path).map_err(io_err(path))?;
    read_from(cfg, f, each).map_err(io_err(path))
}

/// Reads JSON Lines from any reader: the file reader above, and in-memory bytes for the
/// fuzz targets and property tests.
pub fn read_from(
    cfg: &LogParams,
    r: impl Read,
    each: &mut dyn FnMut(Item, u64),
) -> std::io::Result<ReadOutcome> {
    let mut framer = LineFramer::new(r);
    let limits = cfg.limits();
    let mut items = Vec::new();
    let mut bytes = 0;
    while let Some(frame) = framer.next_frame()? {
        bytes = decode_frame(cfg, &limits, frame, &mut items);
        for item in items.drain(..) {
            each(item, bytes);
        }
    }
    Ok(ReadOutcome { bytes, tail: None })
}

/// Decodes one frame into items; returns the file offset past it.
pub fn decode_frame(cfg: &LogParams, limits: &Limits, frame: Frame, out: &mut Vec<Item>) -> u64 {
    match frame {
        Frame::Chunk(c) => {
            decode_chunk(cfg, limits, &c, out);
            c.end
        }
        Frame::LongLine { line, end } => {
            out.push(Item::Bad { pos: Position::Line(line), role: None, reason: Reject::TooLong(MAX_LINE) });
            end
        }
        // Lines have no tail and no skipped stretch; a framer of lines yields neither.
        Frame::Tail(t) => t.offset,
        Frame::Skipped(d) => d.offset + d.bytes,
    }
}

/// Formats one record as a line (with its newline).
pub fn format_line(rec: &LogRecord) -> String {
    let key = serde_json::to_string(&rec.key).unwrap_or_default();
    let body = rec.msg.to_json();
    match rec.recv {
        Some(r) => format!("{{\"key\":{key},\"recv\":{},\"msg\":{body}}}\n", ryu::Buffer::new().format(r)),
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
