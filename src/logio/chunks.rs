//! Framing: cuts a log file into chunks of whole records, so that decoding can run on
//! several threads while the engine still sees the records in file order.
//!
//! JSON Lines chunks end at a newline; a line longer than [`MAX_LINE`] is skipped without
//! being buffered whole and reported as one bad record. Binary chunks end at a record
//! boundary found by walking the length prefixes; a length out of range or a record cut
//! short ends the readable part with a [`Tail`].

use std::io::Read;

use sha2::{Digest, Sha256};

use super::{Damage, Tail};

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
    /// Binary records with a sync marker (format 2), whose checksums the framer has
    /// already verified.
    pub synced: bool,
}

/// The marker that starts every record of a format-2 binary log: after damage, the
/// reader finds the next record by it (and its length and checksum).
pub const SYNC: [u8; 4] = [0xA7, b'p', b'l', b'r'];

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
    /// A damaged stretch skipped; reading goes on after it (format 2 only).
    Skipped(Damage),
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
                return Ok(Some(Frame::Chunk(Chunk { bytes, first, end: self.off, synced: false })));
            }
            if self.eof {
                if self.carry.is_empty() {
                    return Ok(None);
                }
                let bytes = std::mem::take(&mut self.carry);
                self.line += 1;
                self.off += bytes.len() as u64;
                return Ok(Some(Frame::Chunk(Chunk {
                    bytes,
                    first: self.line,
                    end: self.off,
                    synced: false,
                })));
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
    synced: bool,
}

/// What a format-2 record at the start of some bytes is.
enum At {
    /// A whole record that verifies, this long in all.
    Record(usize),
    /// Not enough bytes to tell.
    Short,
    /// Not a record: why.
    Bad(&'static str),
}

impl<R: Read> RecordFramer<R> {
    /// Frames format-1 records (length, checksum, payload) starting at file offset `off`:
    /// damage ends the readable part.
    pub fn new(r: R, off: u64, max_record: u32) -> Self {
        RecordFramer {
            src: Hashed { r, hash: None },
            carry: Vec::new(),
            off,
            eof: false,
            done: false,
            max_record,
            synced: false,
        }
    }

    /// Frames format-2 records (sync marker, length, checksum, payload): the framer
    /// verifies each record's checksum, and after damage finds the next record that
    /// verifies and goes on, yielding the stretch in between as [`Frame::Skipped`].
    pub fn synced(r: R, off: u64, max_record: u32) -> Self {
        RecordFramer { synced: true, ..RecordFramer::new(r, off, max_record) }
    }

    fn at(&self, pos: usize) -> At {
        let b = &self.carry[pos..];
        if b.len() < 12 {
            return if b.len() >= 4 && b[..4] != SYNC { At::Bad("no sync marker") } else { At::Short };
        }
        if b[..4] != SYNC {
            return At::Bad("no sync marker");
        }
        let len = u32::from_le_bytes([b[4], b[5], b[6], b[7]]);
        if len > self.max_record {
            return At::Bad("record length out of range");
        }
        if b.len() < 12 + len as usize {
            return At::Short;
        }
        let crc = u32::from_le_bytes([b[8], b[9], b[10], b[11]]);
        if crc32fast::hash(&b[12..12 + len as usize]) != crc {
            return At::Bad("record checksum mismatch");
        }
        At::Record(12 + len as usize)
    }

    /// The next frame of a format-2 log.
    fn next_synced(&mut self) -> std::io::Result<Option<Frame>> {
        loop {
            self.more()?;
            let mut pos = 0usize;
            let mut bad = None;
            loop {
                match self.at(pos) {
                    At::Record(n) => pos += n,
                    At::Short => break,
                    At::Bad(why) => {
                        bad = Some(why);
                        break;
                    }
                }
            }
            // A short record at the end of the file is damage too, unless nothing that
            // verifies follows it (then it is a torn tail).
            if bad.is_none() && self.eof && pos < self.carry.len() {
                bad = Some("record cut short");
            }
            if pos > 0 {
                return Ok(Some(self.take_chunk(pos)));
            }
            if let Some(why) = bad {
                return self.resync(why).map(Some);
            }
            if self.eof {
                self.done = true;
                return Ok(None);
            }
        }
    }

    /// The first `pos` carried bytes (whole records) as a chunk.
    fn take_chunk(&mut self, pos: usize) -> Frame {
        let rest = self.carry.split_off(pos);
        let bytes = std::mem::replace(&mut self.carry, rest);
        let first = self.off;
        self.off += bytes.len() as u64;
        Frame::Chunk(Chunk { bytes, first, end: self.off, synced: self.synced })
    }

    /// Drops `n` carried bytes, moving the file offset past them.
    fn drop_front(&mut self, n: usize) {
        self.carry.drain(..n);
        self.off += n as u64;
    }

    /// Reads another block onto the carry; false at the end of the file.
    fn more(&mut self) -> std::io::Result<bool> {
        if !self.eof && self.src.fill(&mut self.carry, BLOCK)? == 0 {
            self.eof = true;
        }
        Ok(!self.eof)
    }

    /// Damage at the start of the carried bytes: looks for the next sync marker that
    /// starts a record that verifies, reading on as needed (at most one record's worth
    /// to judge a candidate). The stretch before it is skipped; with none before the end
    /// of the file, the damage is a torn or damaged tail.
    fn resync(&mut self, why: &str) -> std::io::Result<Frame> {
        let offset = self.off;
        let mut records = 1u64;
        self.drop_front(1);
        loop {
            match memchr::memmem::find(&self.carry, &SYNC) {
                Some(q) => {
                    self.drop_front(q);
                    loop {
                        match self.at(0) {
                            At::Record(_) => {
                                let bytes = self.off - offset;
                                return Ok(Frame::Skipped(Damage {
                                    offset,
                                    bytes,
                                    records,
                                    reason: why.into(),
                                }));
                            }
                            At::Short if self.more()? => continue,
                            // A marker that starts no record that verifies: a record lost
                            // in the stretch (or a marker's bytes inside a payload).
                            At::Short | At::Bad(_) => {
                                records += 1;
                                self.drop_front(1);
                                break;
                            }
                        }
                    }
                }
                None => {
                    // No marker in the carry, but its last 3 bytes may begin one.
                    self.drop_front(self.carry.len().saturating_sub(3));
                    if !self.more()? {
                        self.done = true;
                        let reason = if self.off - offset <= 1 && self.carry.is_empty() {
                            why.to_string()
                        } else {
                            format!("{why}, and no whole record after it")
                        };
                        return Ok(Frame::Tail(Tail { offset, reason }));
                    }
                }
            }
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
        if self.synced {
            return self.next_synced();
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
                return Ok(Some(self.take_chunk(pos)));
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

    /// Format-2 records of the given payload lengths (payload bytes all 7).
    fn synced_records(lens: &[u32]) -> (Vec<u8>, Vec<usize>) {
        let (mut data, mut starts) = (Vec::new(), Vec::new());
        for &len in lens {
            starts.push(data.len());
            let payload = vec![7u8; len as usize];
            data.extend_from_slice(&SYNC);
            data.extend_from_slice(&len.to_le_bytes());
            data.extend_from_slice(&crc32fast::hash(&payload).to_le_bytes());
            data.extend_from_slice(&payload);
        }
        (data, starts)
    }

    fn frames(data: &[u8]) -> Vec<Frame> {
        let mut f = RecordFramer::synced(data, 0, 1 << 20);
        std::iter::from_fn(|| f.next_frame().unwrap()).collect()
    }

    #[test]
    fn synced_records_skip_a_damaged_one_and_go_on() {
        let (mut data, starts) = synced_records(&[30, 40, 50, 60]);
        // A flipped bit in the second record's payload.
        data[starts[1] + 20] ^= 0x10;
        let f = frames(&data);
        assert!(matches!(&f[0], Frame::Chunk(c) if c.first == 0 && c.bytes.len() == starts[1] && c.synced));
        let Frame::Skipped(d) = &f[1] else { panic!("{:?}", f[1]) };
        assert_eq!((d.offset, d.bytes, d.records), (starts[1] as u64, (starts[2] - starts[1]) as u64, 1));
        assert!(d.reason.contains("checksum"));
        assert!(
            matches!(&f[2], Frame::Chunk(c) if c.first == starts[2] as u64 && c.end == data.len() as u64)
        );
        assert_eq!(f.len(), 3);
        // A damaged marker, and garbage bytes inserted between two records.
        let (mut data, starts) = synced_records(&[30, 40, 50]);
        data[starts[1]] ^= 0x01;
        data.splice(starts[2]..starts[2], [1u8, 2, 3, 0xA7, b'p']);
        let f = frames(&data);
        let Frame::Skipped(d) = &f[1] else { panic!("{:?}", f[1]) };
        assert_eq!(d.offset, starts[1] as u64);
        assert_eq!(d.bytes as usize, starts[2] + 5 - starts[1]);
        assert!(matches!(&f[2], Frame::Chunk(c) if c.bytes.len() == 12 + 50));
    }

    #[test]
    fn a_synced_record_cut_short_is_the_tail() {
        let (data, starts) = synced_records(&[30, 40, 50]);
        let cut = &data[..data.len() - 7];
        let f = frames(cut);
        assert_eq!(f.len(), 2);
        let Frame::Tail(t) = &f[1] else { panic!("{:?}", f[1]) };
        assert_eq!(t.offset, starts[2] as u64);
        assert!(t.reason.contains("cut short"), "{}", t.reason);
        // A length flipped past the end of the file is damage when a record follows it.
        let (mut data, starts) = synced_records(&[30, 40, 50]);
        data[starts[1] + 6] = 0x0f;
        let f = frames(&data);
        assert!(
            matches!(&f[1], Frame::Skipped(d) if d.offset == starts[1] as u64 && d.records == 1),
            "{:?}",
            f[1]
        );
        assert!(matches!(&f[2], Frame::Chunk(c) if c.first == starts[2] as u64));
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
