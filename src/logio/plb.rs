//! The binary log form `.plb`.
//!
//! Layout (all integers little-endian):
//! - magic `PLUMBLOG` (8 bytes), format version `u16` (= 1), reserved `u16` (= 0);
//! - header length `u32`, header bytes (postcard [`Header`]), CRC32 of the header `u32`;
//! - records, each: payload length `u32`, CRC32 of the payload `u32`, payload (postcard
//!   [`LogRecord`]).
//!
//! A record cut short or failing its CRC ends the readable part: the reader reports the
//! byte offset where it starts, and every record before it replays. A record whose CRC
//! holds but whose content fails validation is rejected alone and reading goes on.

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::Path;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use super::{hex_digest, io_err, role_for, Item, LogError, LogRecord, Position, ReadOutcome, Tail};
use crate::config::Config;
use crate::msg::{validate, Reject};

/// File magic.
pub const MAGIC: &[u8; 8] = b"PLUMBLOG";
/// Format version written and read.
pub const VERSION: u16 = 1;
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
    pub fn for_config(cfg: &Config, created_unix_s: f64) -> Header {
        Header {
            created_unix_s,
            tool: format!("plumbline {}", env!("CARGO_PKG_VERSION")),
            roles: cfg
                .roles
                .iter()
                .map(|(r, k)| (r.name().to_string(), k.clone()))
                .collect(),
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
        Ok(PlbWriter {
            out,
            buf: Vec::new(),
            bytes: 16 + h.len() as u64 + 4,
        })
    }

    /// Appends one record.
    pub fn write(&mut self, rec: &LogRecord) -> std::io::Result<()> {
        self.buf.clear();
        let payload = postcard::to_extend(rec, std::mem::take(&mut self.buf))
            .map_err(std::io::Error::other)?;
        self.out.write_all(&(payload.len() as u32).to_le_bytes())?;
        self.out
            .write_all(&crc32fast::hash(&payload).to_le_bytes())?;
        self.out.write_all(&payload)?;
        self.bytes += 8 + payload.len() as u64;
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
    PlbWriter::new(
        BufWriter::with_capacity(1 << 20, File::create(path)?),
        header,
    )
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
pub fn read_header(
    r: &mut impl Read,
    path: &Path,
    hasher: &mut Sha256,
) -> Result<(Header, u64), LogError> {
    let bad = |why: &str| LogError::BadHeader {
        path: path.display().to_string(),
        why: why.to_string(),
    };
    let mut fixed = [0u8; 16];
    if read_full(r, &mut fixed).map_err(io_err(path))? < 16 {
        return Err(bad("shorter than the fixed header"));
    }
    hasher.update(fixed);
    if &fixed[..8] != MAGIC {
        return Err(bad("wrong magic"));
    }
    let version = u16::from_le_bytes([fixed[8], fixed[9]]);
    if version != VERSION {
        return Err(bad(&format!(
            "format version {version}, this build reads {VERSION}"
        )));
    }
    let len = u32::from_le_bytes([fixed[12], fixed[13], fixed[14], fixed[15]]);
    if len > MAX_RECORD {
        return Err(bad("header length out of range"));
    }
    let mut h = vec![0u8; len as usize + 4];
    if read_full(r, &mut h).map_err(io_err(path))? < h.len() {
        return Err(bad("header cut short"));
    }
    hasher.update(&h);
    let (body, crc) = h.split_at(len as usize);
    if crc32fast::hash(body).to_le_bytes() != crc {
        return Err(bad("header checksum mismatch"));
    }
    let header: Header = postcard::from_bytes(body).map_err(|e| bad(&e.to_string()))?;
    Ok((header, 16 + h.len() as u64))
}

/// Reads a binary log.
pub fn read(
    cfg: &Config,
    path: &Path,
    each: &mut dyn FnMut(Item, u64),
) -> Result<ReadOutcome, LogError> {
    let f = File::open(path).map_err(io_err(path))?;
    let mut r = BufReader::with_capacity(1 << 20, f);
    let mut hasher = Sha256::new();
    let (header, mut off) = read_header(&mut r, path, &mut hasher)?;
    let limits = cfg.limits();
    let mut payload = Vec::new();
    let mut tail = None;
    loop {
        let mut lenbuf = [0u8; 8];
        let got = read_full(&mut r, &mut lenbuf).map_err(io_err(path))?;
        if got == 0 {
            break;
        }
        hasher.update(&lenbuf[..got]);
        if got < 8 {
            tail = Some(Tail {
                offset: off,
                reason: "record header cut short".into(),
            });
            break;
        }
        let len = u32::from_le_bytes([lenbuf[0], lenbuf[1], lenbuf[2], lenbuf[3]]);
        let crc = u32::from_le_bytes([lenbuf[4], lenbuf[5], lenbuf[6], lenbuf[7]]);
        if len > MAX_RECORD {
            tail = Some(Tail {
                offset: off,
                reason: format!("record length {len} out of range"),
            });
            // Hash the rest so the digest still covers the whole file.
            let mut rest = Vec::new();
            r.read_to_end(&mut rest).map_err(io_err(path))?;
            hasher.update(&rest);
            break;
        }
        payload.resize(len as usize, 0);
        let got = read_full(&mut r, &mut payload).map_err(io_err(path))?;
        hasher.update(&payload[..got]);
        if got < len as usize {
            tail = Some(Tail {
                offset: off,
                reason: format!("record cut short: {got} of {len} bytes"),
            });
            break;
        }
        if crc32fast::hash(&payload) != crc {
            tail = Some(Tail {
                offset: off,
                reason: "record checksum mismatch".into(),
            });
            let mut rest = Vec::new();
            r.read_to_end(&mut rest).map_err(io_err(path))?;
            hasher.update(&rest);
            break;
        }
        let pos = Position::Offset(off);
        off += 8 + len as u64;
        let item = match postcard::from_bytes::<LogRecord>(&payload) {
            Err(e) => Item::Bad {
                pos,
                role: None,
                reason: Reject::Malformed(e.to_string()),
            },
            Ok(rec) => match role_for(cfg, &header.roles, &rec.key) {
                None => Item::Bad {
                    pos,
                    role: None,
                    reason: Reject::UnboundKey(rec.key),
                },
                Some(role) if role.kind() != rec.msg.kind() => Item::Bad {
                    pos,
                    role: Some(role),
                    reason: Reject::WrongType(format!(
                        "message kind does not match role {}",
                        role.name()
                    )),
                },
                Some(role) => {
                    let bad_recv = rec.recv.is_some_and(|v| !v.is_finite());
                    match validate(&rec.msg, &limits) {
                        Err(reason) => Item::Bad {
                            pos,
                            role: Some(role),
                            reason,
                        },
                        Ok(()) if bad_recv => Item::Bad {
                            pos,
                            role: Some(role),
                            reason: Reject::NonFinite("recv".into()),
                        },
                        Ok(()) => Item::Record { role, rec },
                    }
                }
            },
        };
        each(item, off);
    }
    Ok(ReadOutcome {
        digest: hex_digest(hasher),
        bytes: off,
        tail,
    })
}
