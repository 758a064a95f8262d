//! Direct readers of the two log forms for the two messages that make up nearly every
//! record of a log: object sets and poses. This file reads the binary (postcard) form;
//! [`json`] reads JSON Lines; [`cdr`] reads the built-in ROS 2 pose types.
//!
//! postcard's serde path decodes them correctly but slowly: every field goes through the
//! derived visitor and the generic sequence access with its error plumbing, about 440
//! instructions per object state (callgrind, 10-minute lean log), which made decoding the
//! largest single cost of a `.plb` replay. This reader walks the same bytes in the same order
//! with postcard's own rules (varints as its `try_take_varint_*`, option tags 0 and 1,
//! little-endian floats, UTF-8 strings, trailing bytes ignored as `postcard::from_bytes`
//! does) and gives up (`None`) on anything else: paths, site maps, malformed bytes. The
//! caller then takes the serde path, which decodes the rare kinds and words the errors, so
//! the two agree by construction on every input the fast one accepts; the property tests
//! in `tests/wire.rs` check that on random messages and on damaged bytes.

pub mod cdr;
pub mod json;

use compact_str::CompactString;

use serde::Deserialize;

use crate::msg::{validate, Frame, Limits, LogRecord, Msg, MsgKind, Object, ObjectSet, Pose, Reject};

/// Smallest encoding of an object: a one-byte id, x, y and seven absent-option tags.
const MIN_OBJECT_BYTES: usize = 1 + 16 + 7;

/// Most objects reserved ahead of reading them (about 1 MiB, as serde's cautious size hint).
pub(crate) const PREALLOCATE: usize = (1 << 20) / std::mem::size_of::<Object>();

struct Reader<'a> {
    b: &'a [u8],
    at: usize,
}

impl<'a> Reader<'a> {
    #[inline]
    fn byte(&mut self) -> Option<u8> {
        let v = *self.b.get(self.at)?;
        self.at += 1;
        Some(v)
    }

    #[inline]
    fn take(&mut self, n: usize) -> Option<&'a [u8]> {
        let end = self.at.checked_add(n)?;
        let s = self.b.get(self.at..end)?;
        self.at = end;
        Some(s)
    }

    #[inline]
    fn f64(&mut self) -> Option<f64> {
        let s: [u8; 8] = self.take(8)?.try_into().ok()?;
        Some(f64::from_le_bytes(s))
    }

    /// postcard's varint: 7 bits a byte, low first, at most `max` bytes, the last holding
    /// no more than `last_max`; overlong forms are accepted as postcard accepts them.
    #[inline]
    fn varint(&mut self, max: u32, last_max: u8) -> Option<u64> {
        let mut out = 0u64;
        for i in 0..max {
            let v = self.byte()?;
            out |= u64::from(v & 0x7f) << (7 * i);
            if v & 0x80 == 0 {
                return (i < max - 1 || v <= last_max).then_some(out);
            }
        }
        None
    }

    #[inline]
    fn u64(&mut self) -> Option<u64> {
        self.varint(10, 0x01)
    }

    #[inline]
    fn u32(&mut self) -> Option<u32> {
        self.varint(5, 0x0f).map(|v| v as u32)
    }

    #[inline]
    fn len(&mut self) -> Option<usize> {
        usize::try_from(self.u64()?).ok()
    }

    /// An option's tag: `Some(false)` absent, `Some(true)` present, `None` malformed.
    #[inline]
    fn tag(&mut self) -> Option<bool> {
        match self.byte()? {
            0 => Some(false),
            1 => Some(true),
            _ => None,
        }
    }

    #[inline]
    fn opt_f64(&mut self) -> Option<Option<f64>> {
        Some(if self.tag()? { Some(self.f64()?) } else { None })
    }

    #[inline]
    fn floats<const N: usize>(&mut self) -> Option<[f64; N]> {
        let mut out = [0.0; N];
        for v in &mut out {
            *v = self.f64()?;
        }
        Some(out)
    }

    #[inline]
    fn str(&mut self) -> Option<&'a str> {
        let n = self.len()?;
        std::str::from_utf8(self.take(n)?).ok()
    }

    fn object(&mut self) -> Option<Object> {
        let id = self.u64()?;
        let (x, y) = (self.f64()?, self.f64()?);
        let (vx, vy, yaw, length, width) =
            (self.opt_f64()?, self.opt_f64()?, self.opt_f64()?, self.opt_f64()?, self.opt_f64()?);
        let cov = if self.tag()? { Some(self.floats::<4>()?) } else { None };
        let class = if self.tag()? { Some(CompactString::from(self.str()?)) } else { None };
        Some(Object { id, x, y, vx, vy, yaw, length, width, cov, class })
    }

    fn object_set(&mut self) -> Option<ObjectSet> {
        let stamp = self.f64()?;
        let frame = if self.tag()? {
            Some(match self.u32()? {
                0 => Frame::World,
                1 => Frame::Ego,
                _ => return None,
            })
        } else {
            None
        };
        let n = self.len()?;
        // A damaged count must not reserve more than the bytes left could hold, nor more
        // than serde's cautious preallocation (1 MiB) before the objects are there.
        let mut objects =
            Vec::with_capacity(n.min((self.b.len() - self.at) / MIN_OBJECT_BYTES).min(PREALLOCATE));
        for _ in 0..n {
            objects.push(self.object()?);
        }
        Some(ObjectSet { stamp, frame, objects })
    }

    fn pose(&mut self) -> Option<Pose> {
        let (stamp, x, y, yaw) = (self.f64()?, self.f64()?, self.f64()?, self.f64()?);
        let v = self.opt_f64()?;
        let cov = if self.tag()? { Some(self.floats::<9>()?) } else { None };
        Some(Pose { stamp, x, y, yaw, v, cov })
    }
}

/// Reads an object set's binary form; `None` when the serde path must decide.
pub fn object_set(bytes: &[u8]) -> Option<ObjectSet> {
    Reader { b: bytes, at: 0 }.object_set()
}

/// Reads a pose's binary form; `None` when the serde path must decide.
pub fn pose(bytes: &[u8]) -> Option<Pose> {
    Reader { b: bytes, at: 0 }.pose()
}

/// Decodes a postcard message of the given kind and validates it.
pub fn decode_postcard(kind: MsgKind, bytes: &[u8], limits: &Limits) -> Result<Msg, Reject> {
    fn parse<'a, T: Deserialize<'a>>(bytes: &'a [u8]) -> Result<T, Reject> {
        postcard::from_bytes(bytes).map_err(|e| Reject::Malformed(e.to_string()))
    }
    // Object sets and poses by the direct reader when it can (above).
    let msg = match kind {
        MsgKind::Objects => Msg::Objects(object_set(bytes).map_or_else(|| parse(bytes), Ok)?),
        MsgKind::Pose => Msg::Pose(pose(bytes).map_or_else(|| parse(bytes), Ok)?),
        MsgKind::Path => Msg::Path(parse(bytes)?),
        MsgKind::Obstacles => Msg::Obstacles(parse(bytes)?),
    };
    validate(&msg, limits)?;
    Ok(msg)
}

/// Reads a `.plb` record carrying an object set or a pose; `None` for the other kinds and
/// for anything malformed (the serde path then decides).
pub fn log_record(bytes: &[u8]) -> Option<LogRecord> {
    let mut r = Reader { b: bytes, at: 0 };
    let key = r.str()?.to_string();
    let recv = r.opt_f64()?;
    // Variant indices in the order of `Msg`'s declaration.
    let msg = match r.u32()? {
        0 => Msg::Objects(r.object_set()?),
        1 => Msg::Pose(r.pose()?),
        _ => return None,
    };
    Some(LogRecord { key, recv, msg })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn postcard_round_trip_and_nonfinite_rejected() {
        let l = Limits::default();
        let m = Msg::Pose(Pose { stamp: 1.5, x: 1.0, y: 2.0, yaw: 0.5, v: Some(3.0), cov: None });
        let b = m.to_postcard();
        assert_eq!(decode_postcard(MsgKind::Pose, &b, &l).unwrap(), m);
        let bad = Msg::Pose(Pose { stamp: 1.5, x: f64::NAN, y: 2.0, yaw: 0.5, v: None, cov: None });
        let e = decode_postcard(MsgKind::Pose, &bad.to_postcard(), &l).unwrap_err();
        assert_eq!(e.code(), "non_finite");
    }
}
