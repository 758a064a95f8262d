//! Framing: cuts a log file into chunks of whole records, so that decoding can run on
//! several threads while the engine still sees the records in file order.
//!
//! JSON Lines chunks end at a newline; a line longer than [`MAX_LINE`] is skipped without
//! being buffered whole and reported as one bad record. Binary chunks end at a record
//! boundary found by walking the length prefixes; a length out of range or a record cut
//! short ends the readable part with a [`Tail`].

use std::io::Read;

use sha2::{Digest, Sha256};

use super::Tail;

/// Bytes read per block.
pub const BLOCK: usize = 256 << 10;
/// Longest JSON line accepted (bytes, newline excluded).
pub const MAX_LINE: usize = 64 << 20;

/// A run of whole records.
#[derive(Debug, Default)]
pub struct Chunk {
    /// The bytes.
    pub bytes: Vec<u8>,
    /// 1-based line number (JSON Lines) or byte offset (binary) of the first record.
    pub first: u64,
    /// File offset just past the chunk (for progress).
    pub end: u64,
}

/// What a framer yields.
#[derive(Debug)]
pub enum Frame {
    /// Whole records.
    Chunk(Chunk),
    /// A line over [`MAX_LINE`], skipped.
    LongLine {
        /// Its 1-based line number.
        line: u64,
        /// File offset just past it.
        end: u64,
    },
    /// The readable part ends here.
    Tail(Tail),
}

/// A reader that can hash what passes through it.
struct Hashed<R> {
    r: R,
    hash: Option<Sha256>,
}

impl<R: Read> Hashed<R> {
    /// Reads up to `want` more bytes onto `buf`, hashing them when hashing.
    fn fill(&mut self, buf: &mut Vec<u8>, want: usize) -> std::io::Result<usize> {
        let start = buf.len();
        buf.resize(start + want, 0);
        let mut got = 0;
        while got < want {
            match self.r.read(&mut buf[start + got..]) {
                Ok(0) => break,
                Ok(n) => got += n,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => {
                    buf.truncate(start + got);
                    return Err(e);
                }
            }
        }
        buf.truncate(start + got);
        if let Some(h) = self.hash.as_mut() {
            h.update(&buf[start..]);
        }
        Ok(got)
    }

    fn start_hash(&mut self, prefix: &[u8]) {
        let mut h = Sha256::new();
        h.update(prefix);
        self.hash = Some(h);
    }

    /// Reads and hashes the rest, then returns the digest, `sha256:<hex>`.
    fn finish(mut self) -> std::io::Result<Option<String>> {
        let Some(mut h) = self.hash.take() else { return Ok(None) };
        let mut buf = Vec::with_capacity(BLOCK);
        loop {
            buf.clear();
            if self.fill(&mut buf, BLOCK)? == 0 {
                break;
            }
            h.update(&buf);
        }
        Ok(Some(format!("sha256:{:x}", h.finalize())))
    }
}

/// Frames JSON Lines.
pub struct LineFramer<R> {
    src: Hashed<R>,
    carry: Vec<u8>,
    line: u64,
    off: u64,
    eof: bool,
}

impl<R: Read> LineFramer<R> {
    /// Frames `r` from its start.
    pub fn new(r: R) -> Self {
        LineFramer { src: Hashed { r, hash: None }, carry: Vec::new(), line: 0, off: 0, eof: false }
    }

    /// Also hashes every byte read (SHA-256), starting with `prefix` (bytes already read).
    pub fn hashing(mut self, prefix: &[u8]) -> Self {
        self.src.start_hash(prefix);
        self
    }

    /// Reads and hashes the rest of the file and returns the digest of the whole file,
    /// `sha256:<hex>` (what `sha256sum` prints); `None` when not hashing.
    pub fn finish_digest(self) -> std::io::Result<Option<String>> {
        self.src.finish()
    }

    /// The next frame, or `None` at the end.
    pub fn next_frame(&mut self) -> std::io::Result<Option<Frame>> {
        loop {
            let searched = self.carry.len();
            if !self.eof && self.src.fill(&mut self.carry, BLOCK)? == 0 {
                self.eof = true;
            }
            // The carried bytes hold no newline, so only the new block is searched.
            if let Some(i) = memchr::memrchr(b'\n', &self.carry[searched..]).map(|i| i + searched) {
                let rest = self.carry.split_off(i + 1);
                let bytes = std::mem::replace(&mut self.carry, rest);
                let first = self.line + 1;
                self.line += memchr::memchr_iter(b'\n', &bytes).count() as u64;
                self.off += bytes.len() as u64;
                return Ok(Some(Frame::Chunk(Chunk { bytes, first, end: self.off })));
            }
            if self.eof {
                if self.carry.is_empty() {
                    return Ok(None);
                }
                let bytes = std::mem::take(&mut self.carry);
                self.line += 1;
                self.off += bytes.len() as u64;
                return Ok(Some(Frame::Chunk(Chunk { bytes, first: self.line, end: self.off })));
            }
            if self.carry.len() > MAX_LINE {
                return self.skip_long_line().map(Some);
            }
        }
    }

    fn skip_long_line(&mut self) -> std::io::Result<Frame> {
        self.off += self.carry.len() as u64;
        self.carry.clear();
        loop {
            if self.src.fill(&mut self.carry, BLOCK)? == 0 {
                self.eof = true;
                self.off += self.carry.len() as u64;
                self.carry.clear();
                break;
            }
            if let Some(i) = memchr::memchr(b'\n', &self.carry) {
                self.off += i as u64 + 1;
                self.carry.drain(..=i);
                break;
            }
            self.off += self.carry.len() as u64;
            self.carry.clear();
        }
        self.line += 1;
        Ok(Frame::LongLine { line: self.line, end: self.off })
    }
}

/// Frames binary records (after the header).
pub struct RecordFramer<R> {
    src: Hashed<R>,
    carry: Vec<u8>,
    off: u64,
    eof: bool,
    done: bool,
    max_record: u32,
}

impl<R: Read> RecordFramer<R> {
    /// Frames records starting at file offset `off`.
    pub fn new(r: R, off: u64, max_record: u32) -> Self {
        RecordFramer {
            src: Hashed { r, hash: None },
            carry: Vec::new(),
            off,
            eof: false,
            done: false,
            max_record,
        }
    }

    /// Also hashes every byte read (SHA-256), starting with `prefix` (the header bytes).
    pub fn hashing(mut self, prefix: &[u8]) -> Self {
        self.src.start_hash(prefix);
        self
    }

    /// Reads and hashes the rest of the file and returns the digest of the whole file,
    /// `sha256:<hex>` (what `sha256sum` prints); `None` when not hashing.
    pub fn finish_digest(self) -> std::io::Result<Option<String>> {
        self.src.finish()
    }

    /// The next frame, or `None` at the end.
    pub fn next_frame(&mut self) -> std::io::Result<Option<Frame>> {
        if self.done {
            return Ok(None);
        }
        loop {
            if !self.eof && self.src.fill(&mut self.carry, BLOCK)? == 0 {
                self.eof = true;
            }
            let mut pos = 0usize;
            let mut bad_len = None;
            while self.carry.len() - pos >= 8 {
                let b = &self.carry[pos..pos + 4];
                let len = u32::from_le_bytes([b[0], b[1], b[2], b[3]]);
                if len > self.max_record {
                    bad_len = Some(len);
                    break;
                }
                if self.carry.len() - pos < 8 + len as usize {
                    break;
                }
                pos += 8 + len as usize;
            }
            if pos > 0 {
                let rest = self.carry.split_off(pos);
                let bytes = std::mem::replace(&mut self.carry, rest);
                let first = self.off;
                self.off += bytes.len() as u64;
                return Ok(Some(Frame::Chunk(Chunk { bytes, first, end: self.off })));
            }
            if let Some(len) = bad_len {
                self.done = true;
                let reason = format!("record length {len} out of range");
                return Ok(Some(Frame::Tail(Tail { offset: self.off, reason })));
            }
            if self.eof {
                self.done = true;
                if self.carry.is_empty() {
                    return Ok(None);
                }
                let reason = if self.carry.len() < 8 {
                    "record header cut short".to_string()
                } else {
                    format!("record cut short: {} bytes of a record", self.carry.len())
                };
                return Ok(Some(Frame::Tail(Tail { offset: self.off, reason })));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_split_at_newlines_with_numbers() {
        let text = b"a\nbb\n\nccc".to_vec();
        let mut f = LineFramer::new(&text[..]);
        let Some(Frame::Chunk(c)) = f.next_frame().unwrap() else { panic!() };
        assert_eq!(c.bytes, b"a\nbb\n\n");
        assert_eq!(c.first, 1);
        let Some(Frame::Chunk(c)) = f.next_frame().unwrap() else { panic!() };
        assert_eq!((c.bytes.as_slice(), c.first, c.end), (&b"ccc"[..], 4, 9));
        assert!(f.next_frame().unwrap().is_none());
    }

    #[test]
    fn records_split_at_boundaries_and_report_a_cut() {
        let mut data = Vec::new();
        for len in [3u32, 5, 2] {
            data.extend_from_slice(&len.to_le_bytes());
            data.extend_from_slice(&[0; 4]);
            data.extend(std::iter::repeat_n(7u8, len as usize));
        }
        data.extend_from_slice(&[9, 0, 0]);
        let mut f = RecordFramer::new(&data[..], 100, 1 << 20);
        let Some(Frame::Chunk(c)) = f.next_frame().unwrap() else { panic!() };
        assert_eq!((c.first, c.bytes.len()), (100, 34));
        let Some(Frame::Tail(t)) = f.next_frame().unwrap() else { panic!() };
        assert_eq!(t.offset, 134);
        assert!(f.next_frame().unwrap().is_none());
    }
}
