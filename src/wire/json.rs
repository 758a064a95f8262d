//! A direct reader of JSON Lines records that carry object sets and poses.
//!
//! serde_json reads a record correctly but field by field through the derived visitors;
//! in a JSONL replay that was the largest cost. This reader accepts a strict subset of
//! JSON: the record's fields `key` (before `msg`), `recv` and `msg`, the message's own
//! fields, each at most once and in any order, `null` for absent options, whitespace
//! anywhere JSON allows it. It gives up (`None`) on anything else (escapes or control
//! characters in strings, unknown or repeated fields, `msg` before `key`, an unbound key,
//! other message kinds, numbers it cannot read exactly as serde_json does), and the caller
//! takes the serde path, which decodes those and words the errors.
//!
//! Numbers are checked against JSON's grammar, then read by Rust's `f64::from_str`, which
//! rounds correctly, as serde_json does with its `float_roundtrip` feature: both give the
//! double nearest the decimal, integers included (serde_json converts an integer token to
//! the nearest double too), and both read `-0` as negative zero. A result out of range
//! (serde_json's "number out of range") and tokens over 40 characters go to serde.
//! `tests/wire.rs` holds this reader to the serde path on generated and damaged lines.

use compact_str::CompactString;

use crate::msg::LogRecord;
use crate::msg::{Frame, Msg, MsgKind, Object, ObjectSet, Pose, Role};

/// Longest number token read here.
const MAX_NUMBER: usize = 40;

struct Parser<'a> {
    b: &'a [u8],
    at: usize,
}

impl<'a> Parser<'a> {
    #[inline]
    fn peek(&mut self) -> Option<u8> {
        while let Some(&c) = self.b.get(self.at) {
            if !matches!(c, b' ' | b'\t' | b'\n' | b'\r') {
                return Some(c);
            }
            self.at += 1;
        }
        None
    }

    #[inline]
    fn eat(&mut self, c: u8) -> Option<()> {
        (self.peek()? == c).then(|| self.at += 1)
    }

    /// A string's bytes, without escapes or control characters (not yet checked as UTF-8:
    /// field names are only compared with ASCII names).
    fn raw_str(&mut self) -> Option<&'a [u8]> {
        self.eat(b'"')?;
        let start = self.at;
        loop {
            match *self.b.get(self.at)? {
                b'"' => break,
                c if c == b'\\' || c < 0x20 => return None,
                _ => self.at += 1,
            }
        }
        self.at += 1;
        Some(&self.b[start..self.at - 1])
    }

    /// A string without escapes or control characters.
    fn str(&mut self) -> Option<&'a str> {
        std::str::from_utf8(self.raw_str()?).ok()
    }

    /// A number token by JSON's grammar: its bytes.
    fn number(&mut self) -> Option<&'a [u8]> {
        self.peek()?;
        let (b, start) = (self.b, self.at);
        let digits = |mut i: usize| {
            while b.get(i).is_some_and(u8::is_ascii_digit) {
                i += 1;
            }
            i
        };
        let mut i = start + usize::from(b.get(start) == Some(&b'-'));
        i = match b.get(i)? {
            b'0' => i + 1,
            b'1'..=b'9' => digits(i + 1),
            _ => return None,
        };
        if b.get(i) == Some(&b'.') {
            let end = digits(i + 1);
            if end == i + 1 {
                return None;
            }
            i = end;
        }
        if matches!(b.get(i), Some(b'e' | b'E')) {
            i += 1;
            if matches!(b.get(i), Some(b'+' | b'-')) {
                i += 1;
            }
            let end = digits(i);
            if end == i {
                return None;
            }
            i = end;
        }
        if i - start > MAX_NUMBER {
            return None;
        }
        self.at = i;
        Some(&b[start..i])
    }

    fn f64(&mut self) -> Option<f64> {
        self.peek()?;
        if let Some((v, end)) = exact_decimal(self.b, self.at) {
            self.at = end;
            return Some(v);
        }
        let t = self.number()?;
        // The token is ASCII by construction.
        let v: f64 = std::str::from_utf8(t).ok()?.parse().ok()?;
        v.is_finite().then_some(v)
    }

    /// An unsigned integer token (`0|[1-9][0-9]*`) that fits u64; serde_json reads any
    /// other number into a u64 field as an error.
    fn u64(&mut self) -> Option<u64> {
        self.peek()?;
        let (b, mut i) = (self.b, self.at);
        let digit = |i: usize| b.get(i).filter(|c| c.is_ascii_digit()).map(|c| u64::from(c - b'0'));
        if digit(i)? == 0 && digit(i + 1).is_some() {
            return None;
        }
        let mut v = 0u64;
        while let Some(d) = digit(i) {
            v = v.checked_mul(10)?.checked_add(d)?;
            i += 1;
        }
        if matches!(b.get(i), Some(b'.' | b'e' | b'E')) {
            return None;
        }
        self.at = i;
        Some(v)
    }

    /// Consumes a `null` if one is next.
    fn null(&mut self) -> Option<bool> {
        if self.peek()? != b'n' {
            return Some(false);
        }
        self.b[self.at..].starts_with(b"null").then(|| {
            self.at += 4;
            true
        })
    }

    fn opt_f64(&mut self) -> Option<Option<f64>> {
        Some(if self.null()? { None } else { Some(self.f64()?) })
    }

    fn opt_floats<const N: usize>(&mut self) -> Option<Option<[f64; N]>> {
        if self.null()? {
            return Some(None);
        }
        self.eat(b'[')?;
        let mut out = [0.0; N];
        for (k, v) in out.iter_mut().enumerate() {
            if k > 0 {
                self.eat(b',')?;
            }
            *v = self.f64()?;
        }
        self.eat(b']')?;
        Some(Some(out))
    }

    /// An object's fields: `each` reads the value of every name (and says which of the
    /// known names it was); a name unknown or seen twice gives up.
    fn fields(&mut self, mut each: impl FnMut(&mut Self, &'a [u8]) -> Option<u32>) -> Option<u32> {
        self.eat(b'{')?;
        if self.peek()? == b'}' {
            self.at += 1;
            return Some(0);
        }
        let seen = self.field(0, &mut each)?;
        self.after_field(seen, each)
    }

    /// One `"name": value`, its bit added to `seen`.
    fn field(&mut self, seen: u32, each: &mut impl FnMut(&mut Self, &'a [u8]) -> Option<u32>) -> Option<u32> {
        let name = self.raw_str()?;
        self.eat(b':')?;
        let bit = each(self, name)?;
        (seen & bit == 0).then_some(seen | bit)
    }

    /// After a field's value: more fields after commas, to the object's end.
    fn after_field(
        &mut self,
        mut seen: u32,
        mut each: impl FnMut(&mut Self, &'a [u8]) -> Option<u32>,
    ) -> Option<u32> {
        loop {
            match self.peek()? {
                b',' => {
                    self.at += 1;
                    seen = self.field(seen, &mut each)?;
                }
                b'}' => {
                    self.at += 1;
                    return Some(seen);
                }
                _ => return None,
            }
        }
    }

    /// Consumes `lit` if the input goes on with it.
    #[inline]
    fn lit(&mut self, lit: &[u8]) -> Option<()> {
        self.b[self.at..].starts_with(lit).then(|| self.at += lit.len())
    }

    /// The head that writers of this format put first, `{"id":N,"x":F,"y":F` without
    /// whitespace, read without the field loop's name matching; on any difference nothing
    /// is consumed and the field loop reads the object from its start.
    fn compact_head(&mut self, o: &mut Object) -> Option<()> {
        self.peek()?;
        let start = self.at;
        let head = (|| {
            self.lit(b"{\"id\":")?;
            o.id = self.u64()?;
            self.lit(b",\"x\":")?;
            o.x = self.f64()?;
            self.lit(b",\"y\":")?;
            o.y = self.f64()?;
            Some(())
        })();
        if head.is_none() {
            self.at = start;
        }
        head
    }

    /// Reads an object into `o` (in place: an object is 168 bytes).
    fn object(&mut self, o: &mut Object) -> Option<()> {
        let head = self.compact_head(o);
        let each = |p: &mut Self, name: &'a [u8]| {
            Some(match name {
                b"id" => {
                    o.id = p.u64()?;
                    1
                }
                b"x" => {
                    o.x = p.f64()?;
                    2
                }
                b"y" => {
                    o.y = p.f64()?;
                    4
                }
                b"vx" => {
                    o.vx = p.opt_f64()?;
                    8
                }
                b"vy" => {
                    o.vy = p.opt_f64()?;
                    16
                }
                b"yaw" => {
                    o.yaw = p.opt_f64()?;
                    32
                }
                b"length" => {
                    o.length = p.opt_f64()?;
                    64
                }
                b"width" => {
                    o.width = p.opt_f64()?;
                    128
                }
                b"cov" => {
                    o.cov = p.opt_floats::<4>()?;
                    256
                }
                b"class" => {
                    o.class = if p.null()? { None } else { Some(CompactString::from(p.str()?)) };
                    512
                }
                _ => return None,
            })
        };
        let seen = match head {
            None => self.fields(each)?,
            // id, x and y read: the object ends, or its other fields follow.
            Some(()) => self.after_field(7, each)?,
        };
        (seen & 7 == 7).then_some(())
    }

    fn object_set(&mut self) -> Option<ObjectSet> {
        let mut set = ObjectSet { stamp: 0.0, frame: None, objects: Vec::new() };
        let seen = self.fields(|p, name| {
            Some(match name {
                b"stamp" => {
                    set.stamp = p.f64()?;
                    1
                }
                b"frame" => {
                    set.frame = match p.null()? {
                        true => None,
                        false => Some(match p.raw_str()? {
                            b"world" => Frame::World,
                            b"ego" => Frame::Ego,
                            _ => return None,
                        }),
                    };
                    2
                }
                b"objects" => {
                    p.eat(b'[')?;
                    // At least 20 bytes an object (`{"id":0,"x":0,"y":0}`, comma aside), and no
                    // more than the cautious preallocation.
                    set.objects.reserve(((p.b.len() - p.at) / 20).min(super::PREALLOCATE));
                    if p.peek()? == b']' {
                        p.at += 1;
                    } else {
                        loop {
                            set.objects.push(Object::at(0, 0.0, 0.0));
                            p.object(set.objects.last_mut()?)?;
                            match p.peek()? {
                                b',' => p.at += 1,
                                b']' => break p.at += 1,
                                _ => return None,
                            }
                        }
                    }
                    4
                }
                _ => return None,
            })
        })?;
        (seen & 1 == 1).then_some(set)
    }

    fn pose(&mut self) -> Option<Pose> {
        let mut m = Pose { stamp: 0.0, x: 0.0, y: 0.0, yaw: 0.0, v: None, cov: None };
        let seen = self.fields(|p, name| {
            Some(match name {
                b"stamp" => {
                    m.stamp = p.f64()?;
                    1
                }
                b"x" => {
                    m.x = p.f64()?;
                    2
                }
                b"y" => {
                    m.y = p.f64()?;
                    4
                }
                b"yaw" => {
                    m.yaw = p.f64()?;
                    8
                }
                b"v" => {
                    m.v = p.opt_f64()?;
                    16
                }
                b"cov" => {
                    m.cov = p.opt_floats::<9>()?;
                    32
                }
                _ => return None,
            })
        })?;
        (seen & 15 == 15).then_some(m)
    }
}

/// The powers of ten a plain decimal of at most 19 digits divides by, all exact doubles.
const POW10: [f64; 20] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18,
    1e19,
];

/// A plain decimal at `b[i..]` (`-?(0|[1-9][0-9]*)(\.[0-9]+)?`, JSON's grammar without an
/// exponent) whose digits (at most 19), read as one integer, stay below 2^53: that integer
/// and the power of ten (at most 10^19) are exact doubles, so one IEEE division
/// gives the correctly rounded value (Clinger, "How to read floating point numbers
/// accurately", 1990: the fast path), the same double `f64::from_str` gives. Returns the
/// value and where it ends; anything else (`None`) goes the general way.
fn exact_decimal(b: &[u8], i: usize) -> Option<(f64, usize)> {
    let b = b.get(i..)?;
    let neg = b.first() == Some(&b'-');
    // Digits read into `m` as one integer; at most 19 of them cannot overflow a u64, and
    // whether `m` stays below 2^53 is checked once at the end.
    let mut m = 0u64;
    let mut k = usize::from(neg);
    let digits = |k: &mut usize, m: &mut u64| {
        let from = *k;
        while let Some(d) = b.get(*k).map(|c| c.wrapping_sub(b'0')).filter(|&d| d <= 9) {
            *m = m.wrapping_mul(10).wrapping_add(u64::from(d));
            *k += 1;
        }
        *k - from
    };
    let int_from = k;
    let int_digits = digits(&mut k, &mut m);
    // A leading zero stands alone.
    if int_digits == 0 || (int_digits > 1 && b[int_from] == b'0') {
        return None;
    }
    let mut frac = 0;
    if b.get(k) == Some(&b'.') {
        k += 1;
        frac = digits(&mut k, &mut m);
        if frac == 0 {
            return None;
        }
    }
    if int_digits + frac > 19 || m >= 1 << 53 || matches!(b.get(k), Some(b'e' | b'E')) {
        return None;
    }
    let v = m as f64 / *POW10.get(frac)?;
    Some((if neg { -v } else { v }, i + k))
}

/// Reads one line (without its newline) whose key `role_of` binds to a role carrying
/// object sets or poses; `None` when the serde path must decide.
pub fn record(line: &[u8], role_of: impl Fn(&str) -> Option<Role>) -> Option<(Role, LogRecord)> {
    let mut p = Parser { b: line, at: 0 };
    let (mut key, mut role, mut recv, mut msg) = (None, None, None, None);
    let seen = p.fields(|p, name| {
        Some(match name {
            b"key" => {
                let k = p.str()?;
                role = Some(role_of(k)?);
                key = Some(k);
                1
            }
            b"recv" => {
                recv = p.opt_f64()?;
                2
            }
            b"msg" => {
                msg = Some(match role?.kind() {
                    MsgKind::Objects => Msg::Objects(p.object_set()?),
                    MsgKind::Pose => Msg::Pose(p.pose()?),
                    MsgKind::Path | MsgKind::Obstacles => return None,
                });
                4
            }
            _ => return None,
        })
    })?;
    if p.peek().is_some() || seen & 5 != 5 {
        return None;
    }
    Some((role?, LogRecord { key: key?.to_string(), recv, msg: msg? }))
}
