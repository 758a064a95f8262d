//! The binary log form `.plb`.
//!
//! Layout (all integers little-endian):
//! - magic `PLUMBLOG` (8 bytes), format version `u16` (2; 1 is still read), reserved
//!   `u16` (= 0);
//! - header length `u32`, header bytes (postcard [`Header`]), CRC32 of the header `u32`;
//! - records, each: the sync marker `A7 70 6C 72` (format 2 only), payload length `u32`,
//!   CRC32 of the payload `u32`, payload (postcard [`LogRecord`]).
//!
//! Format 2: a record that fails its marker, length or CRC is damage; the reader finds the
//! next marker that starts a record that verifies, skips the stretch in between (reported
//! with its offset, size and the records lost in it) and goes on, so a flipped bit costs
//! one record, not the rest of the file. A stretch with no whole record after it, as a
//! power cut leaves, is the damaged tail. Format 1 has no markers: a record cut short or
//! failing its CRC ends the readable part there. In both, a record whose CRC holds but
//! whose content fails validation is rejected alone and reading goes on.

use std::fs::File;
use std::io::{BufWriter, Read, Write};
use std::path::Path;

use serde::{Deserialize, Serialize};

pub use super::chunks::SYNC;
use super::chunks::{Chunk, Frame, RecordFramer};
use super::LogParams;
use super::{io_err, role_for, Item, LogError, LogRecord, Position, ReadOutcome, Tail};
use crate::msg::{check_recv, validate, Limits, Reject};

/// File magic.
pub const MAGIC: &[u8; 8] = b"PLUMBLOG";
/// Format version written (1 and 2 are read).
pub const VERSION: u16 = 2;
/// Largest record accepted; a larger length field marks a corrupt tail.
pub const MAX_RECORD: u32 = 64 << 20;

/// The header after the magic.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Header {
    /// Creation time, Unix seconds.
    pub created_unix_s: f64,
    /// Writing tool and version.
    pub tool: String,
    /// The writer's role bindings: (role name, key expression).
    pub roles: Vec<(String, String)>,
}

impl Header {
    /// A header for the given config, stamped `created_unix_s`.
    pub fn for_config(cfg: &LogParams, created_unix_s: f64) -> Header {
        Header {
            created_unix_s,
            tool: format!("plumbline {}", env!("CARGO_PKG_VERSION")),
            roles: cfg.roles.iter().map(|(r, k)| (r.name().to_string(), k.clone())).collect(),
        }
    }
}

/// Writes a binary log.
pub struct PlbWriter<W: Write> {
    out: W,
    buf: Vec<u8>,
    /// Bytes written so far.
    pub bytes: u64,
}

impl<W: Write> PlbWriter<W> {
    /// Writes the magic and header.
    pub fn new(mut out: W, header: &Header) -> std::io::Result<Self> {
        let h = postcard::to_stdvec(header).map_err(std::io::Error::other)?;
        out.write_all(MAGIC)?;
        out.write_all(&VERSION.to_le_bytes())?;
        out.write_all(&0u16.to_le_bytes())?;
        out.write_all(&(h.len() as u32).to_le_bytes())?;
        out.write_all(&h)?;
        out.write_all(&crc32fast::hash(&h).to_le_bytes())?;
        Ok(PlbWriter { out, buf: Vec::new(), bytes: 16 + h.len() as u64 + 4 })
    }

    /// Appends one record.
    pub fn write(&mut self, rec: &LogRecord) -> std::io::Result<()> {
        self.buf.clear();
        let payload =
            postcard::to_extend(rec, std::mem::take(&mut self.buf)).map_err(std::io::Error::other)?;
        self.out.write_all(&SYNC)?;
        self.out.write_all(&(payload.len() as u32).to_le_bytes())?;
        self.out.write_all(&crc32fast::hash(&payload).to_le_bytes())?;
        self.out.write_all(&payload)?;
        self.bytes += 12 + payload.len() as u64;
        self.buf = payload;
        Ok(())
    }

    /// Flushes the underlying writer.
    pub fn flush(&mut self) -> std::io::Result<()> {
        self.out.flush()
    }

    /// Flushes and returns the writer.
    pub fn finish(mut self) -> std::io::Result<W> {
        self.out.flush()?;
        Ok(self.out)
    }
}

/// Creates a binary log file.
pub fn create(path: &Path, header: &Header) -> std::io::Result<PlbWriter<BufWriter<File>>> {
    PlbWriter::new(BufWriter::with_capacity(1 << 20, File::create(path)?), header)
}

/// Reads as many bytes as are there, up to `buf.len()`.
fn read_full(r: &mut impl Read, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut got = 0;
    while got < buf.len() {
        match r.read(&mut buf[got..]) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(got)
}

/// Reads a binary log's header.
///
/// Returns the header, the raw bytes it took and the format version.
pub fn read_header(r: &mut impl Read, path: &Path) -> Result<(Header, Vec<u8>, u16), LogError> {
    let bad = |why: &str| LogError::BadHeader { path: path.display().to_string(), why: why.to_string() };
    let mut fixed = [0u8; 16];
    if read_full(r, &mut fixed).map_err(io_err(path))? < 16 {
        return Err(bad("shorter than the fixed header"));
    }
    if &fixed[..8] != MAGIC {
        return Err(bad("wrong magic"));
    }
    let version = u16::from_le_bytes([fixed[8], fixed[9]]);
    if version != 1 && version != VERSION {
        return Err(bad(&format!("format version {version}, this build reads 1 and {VERSION}")));
    }
    let len = u32::from_le_bytes([fixed[12], fixed[13], fixed[14], fixed[15]]);
    if len > MAX_RECORD {
        return Err(bad("header length out of range"));
    }
    let mut h = vec![0u8; len as usize + 4];
    if read_full(r, &mut h).map_err(io_err(path))? < h.len() {
        return Err(bad("header cut short"));
    }
    let (body, crc) = h.split_at(len as usize);
    if crc32fast::hash(body).to_le_bytes() != crc {
        return Err(bad("header checksum mismatch"));
    }
    let header: Header = postcard::from_bytes(body).map_err(|e| bad(&e.to_string()))?;
    let mut raw = fixed.to_vec();
    raw.extend_from_slice(&h);
    Ok((header, raw, version))
}

/// The framer for a file of `version` whose records start at `off`.
fn framer<R: Read>(r: R, off: u64, version: u16) -> RecordFramer<R> {
    if version >= 2 {
        RecordFramer::synced(r, off, MAX_RECORD)
    } else {
        RecordFramer::new(r, off, MAX_RECORD)
    }
}

/// Decodes a chunk of whole records. Returns the tail when a record fails its checksum;
/// the records after it are not decoded.
pub fn decode_chunk(
    cfg: &LogParams,
    header_roles: &[(String, String)],
    limits: &Limits,
    chunk: &Chunk,
    out: &mut Vec<Item>,
) -> Option<Tail> {
    let mut pos = 0usize;
    let b = &chunk.bytes;
    // Format 2 records carry the sync marker first, and the framer verified their CRCs.
    let skip = if chunk.synced { 4 } else { 0 };
    while pos + skip + 8 <= b.len() {
        let off = chunk.first + pos as u64;
        let h = pos + skip;
        let len = u32::from_le_bytes([b[h], b[h + 1], b[h + 2], b[h + 3]]) as usize;
        let crc = u32::from_le_bytes([b[h + 4], b[h + 5], b[h + 6], b[h + 7]]);
        let payload = &b[h + 8..h + 8 + len];
        pos = h + 8 + len;
        if !chunk.synced && crc32fast::hash(payload) != crc {
            return Some(Tail { offset: off, reason: "record checksum mismatch".into() });
        }
        out.push(decode_record(cfg, header_roles, limits, payload, Position::Offset(off)));
    }
    None
}

fn decode_record(
    cfg: &LogParams,
    header_roles: &[(String, String)],
    limits: &Limits,
    payload: &[u8],
    pos: Position,
) -> Item {
    // The direct reader takes object sets and poses; the rest, and anything it cannot
    // read, goes the serde way, which also words the errors.
    let rec = match crate::wire::log_record(payload).map_or_else(|| postcard::from_bytes(payload), Ok) {
        Err(e) => return Item::Bad { pos, role: None, reason: Reject::Malformed(e.to_string()) },
        Ok(rec) => rec,
    };
    let Some(role) = role_for(cfg, header_roles, &rec.key) else {
        return Item::Bad { pos, role: None, reason: Reject::UnboundKey(rec.key) };
    };
    let bad = |reason| Item::Bad { pos, role: Some(role), reason };
    if role.kind() != rec.msg.kind() {
        return bad(Reject::WrongType(format!("message kind does not match role {}", role.name())));
    }
    if let Err(reason) = validate(&rec.msg, limits) {
        return bad(reason);
    }
    if let Err(e) = check_recv(rec.recv, limits) {
        return bad(e);
    }
    Item::Record { role, rec }
}

/// Opens a binary log: its header and a framer positioned after it.
///
/// With `hash`, the framer also hashes the whole file, header included.
pub fn open(path: &Path, hash: bool) -> Result<(Header, RecordFramer<File>), LogError> {
    let mut f = File::open(path).map_err(io_err(path))?;
    let (header, raw, version) = read_header(&mut f, path)?;
    let framer = framer(f, raw.len() as u64, version);
    Ok((header, if hash { framer.hashing(&raw) } else { framer }))
}

/// Decodes one frame into items; returns the file offset past it and the tail, if any.
pub fn decode_frame(
    cfg: &LogParams,
    header_roles: &[(String, String)],
    limits: &Limits,
    frame: Frame,
    out: &mut Vec<Item>,
) -> (u64, Option<Tail>) {
    match frame {
        Frame::Chunk(c) => (c.end, decode_chunk(cfg, header_roles, limits, &c, out)),
        Frame::Tail(t) => (t.offset, Some(t)),
        Frame::Skipped(d) => {
            let end = d.offset + d.bytes;
            out.push(Item::Damaged(d));
            (end, None)
        }
        // Binary framing has no lines.
        Frame::LongLine { end, .. } => (end, None),
    }
}

/// Reads a binary log on the calling thread.
pub fn read(cfg: &LogParams, path: &Path, each: &mut dyn FnMut(Item, u64)) -> Result<ReadOutcome, LogError> {
    let f = File::open(path).map_err(io_err(path))?;
    read_from(cfg, f, path, each)
}

/// Reads a binary log from any reader (`name` labels errors): the file reader above, and
/// in-memory bytes for the fuzz targets and property tests.
pub fn read_from(
    cfg: &LogParams,
    mut r: impl Read,
    name: &Path,
    each: &mut dyn FnMut(Item, u64),
) -> Result<ReadOutcome, LogError> {
    let (header, raw, version) = read_header(&mut r, name)?;
    let mut framer = framer(r, raw.len() as u64, version);
    let limits = cfg.limits();
    let mut items = Vec::new();
    let mut bytes = 0;
    while let Some(frame) = framer.next_frame().map_err(io_err(name))? {
        let (end, tail) = decode_frame(cfg, &header.roles, &limits, frame, &mut items);
        bytes = end;
        for item in items.drain(..) {
            each(item, end);
        }
        if tail.is_some() {
            return Ok(ReadOutcome { bytes, tail });
        }
    }
    Ok(ReadOutcome { bytes, tail: None })
}
