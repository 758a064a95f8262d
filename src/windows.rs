//! Sliding windows of event time over a metric's values, with bounded memory and amortised
//! O(1) cost per update whatever the window length.
//!
//! A window of length L is a ring of K sub-buckets of width w = L / K, indexed by
//! `floor(t / w)`. At time t the window holds the buckets with index in
//! `(floor(t / w) - K, floor(t / w)]`: every value younger than L - w is in, every value
//! older than L is out, and values in between are in while their bucket is. Each bucket
//! keeps count, sum, min, max and the sketch bins of its values; the window keeps a running
//! [`Sketch`] that each value is added to and each expiring bucket's values are removed
//! from, so an update costs O(1) amortised and a percentile needs no merge. Mean, min, max
//! and count are exact; percentiles come from the sketch (relative error under 0.4%,
//! values below 1e-6 in magnitude count as 0).
//!
//! The sketch is written here because hdrhistogram, used for the run statistics, has no
//! cheap removal: its `subtract` walks the whole counts array and recomputes its extremes,
//! which would make every bucket expiry cost the histogram's size.
//!
//! A value older than the window's start when it arrives (a stamp regression past the
//! window) is counted in `late` and not added. Pure data structure, no clock.

use std::collections::VecDeque;

use serde::Serialize;

/// Statistics of one window.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct WindowStats {
    /// Values in the window.
    pub count: u64,
    /// Mean.
    pub mean: f64,
    /// Minimum.
    pub min: f64,
    /// Maximum.
    pub max: f64,
    /// Median.
    pub p50: f64,
    /// 95th percentile.
    pub p95: f64,
    /// 99th percentile.
    pub p99: f64,
    /// Latest value.
    pub last: f64,
}

pub use crate::stats::Stat;

impl WindowStats {
    /// One statistic.
    pub fn get(&self, s: Stat) -> f64 {
        match s {
            Stat::Count => self.count as f64,
            Stat::Mean => self.mean,
            Stat::Min => self.min,
            Stat::Max => self.max,
            Stat::P50 => self.p50,
            Stat::P95 => self.p95,
            Stat::P99 => self.p99,
            Stat::Last => self.last,
        }
    }
}

/// Mantissa bits per octave: 128 bins an octave, relative bin width 2^-7.
const SUB_BITS: u32 = 7;
const SUB: usize = 1 << SUB_BITS;
/// Smallest magnitude kept apart from zero: 2^-20 (about 9.5e-7).
const MIN_EXP: i32 = -20;
/// Magnitudes from 2^40 (about 1.1e12) up share the top bin.
const MAX_EXP: i32 = 40;
const PER_SIGN: usize = (MAX_EXP - MIN_EXP) as usize * SUB;
const BINS: usize = 2 * PER_SIGN + 1;
const ZERO: usize = PER_SIGN;

/// A log-linear sketch of signed values with O(1) insert and removal and a two-level
/// count (bins and octave blocks) so a quantile walks about 250 counters.
#[derive(Debug, Clone)]
pub struct Sketch {
    counts: Vec<u32>,
    blocks: Vec<u32>,
    n: u64,
}

impl Default for Sketch {
    fn default() -> Self {
        Sketch { counts: vec![0; BINS], blocks: vec![0; BINS.div_ceil(SUB)], n: 0 }
    }
}

impl Sketch {
    /// The bin of a value; bins are in value order.
    pub fn bin(v: f64) -> u16 {
        let a = v.abs();
        let bits = a.to_bits();
        let exp = ((bits >> 52) & 0x7ff) as i32 - 1023;
        if a.is_nan() || exp < MIN_EXP {
            return ZERO as u16;
        }
        let mag = if exp >= MAX_EXP {
            PER_SIGN - 1
        } else {
            (exp - MIN_EXP) as usize * SUB + ((bits >> (52 - SUB_BITS)) as usize & (SUB - 1))
        };
        (if v > 0.0 { ZERO + 1 + mag } else { ZERO - 1 - mag }) as u16
    }

    /// The representative value of a bin: the middle of its range.
    pub fn value(bin: u16) -> f64 {
        let b = bin as usize;
        if b == ZERO {
            return 0.0;
        }
        let (mag, sign) = if b > ZERO { (b - ZERO - 1, 1.0) } else { (ZERO - 1 - b, -1.0) };
        let exp = (mag / SUB) as i32 + MIN_EXP;
        let frac = 1.0 + ((mag % SUB) as f64 + 0.5) / SUB as f64;
        sign * frac * 2f64.powi(exp)
    }

    /// Adds a value by its bin.
    pub fn insert(&mut self, bin: u16) {
        self.counts[bin as usize] += 1;
        self.blocks[bin as usize / SUB] += 1;
        self.n += 1;
    }

    /// Removes a value by its bin.
    pub fn remove(&mut self, bin: u16) {
        let c = &mut self.counts[bin as usize];
        if *c > 0 {
            *c -= 1;
            self.blocks[bin as usize / SUB] -= 1;
            self.n -= 1;
        }
    }

    /// The value of 0-based rank `rank` (`rank < n`).
    pub fn at_rank(&self, rank: u64) -> f64 {
        let mut seen = 0u64;
        for (bi, &bc) in self.blocks.iter().enumerate() {
            if seen + bc as u64 > rank {
                for b in bi * SUB..((bi + 1) * SUB).min(BINS) {
                    seen += self.counts[b] as u64;
                    if seen > rank {
                        return Sketch::value(b as u16);
                    }
                }
            }
            seen += bc as u64;
        }
        f64::NAN
    }

    /// The q-quantile (numpy's linear definition on the bins' values).
    pub fn quantile(&self, q: f64) -> f64 {
        if self.n == 0 {
            return f64::NAN;
        }
        let pos = q * (self.n - 1) as f64;
        let (lo, hi) = (pos.floor() as u64, pos.ceil() as u64);
        let a = self.at_rank(lo);
        if hi == lo {
            return a;
        }
        a + (self.at_rank(hi) - a) * (pos - lo as f64)
    }

    /// Values held.
    pub fn len(&self) -> u64 {
        self.n
    }

    /// Whether empty.
    pub fn is_empty(&self) -> bool {
        self.n == 0
    }
}

#[derive(Debug, Clone)]
struct Bucket {
    index: i64,
    count: u64,
    sum: f64,
    min: f64,
    max: f64,
    bins: Vec<u16>,
}

/// One sliding window of one metric.
#[derive(Debug, Clone)]
pub struct Window {
    length: f64,
    width: f64,
    k: i64,
    buckets: VecDeque<Bucket>,
    /// Bin lists of expired buckets, emptied, kept for new buckets.
    spare: Vec<Vec<u16>>,
    total: Option<Sketch>,
    count: u64,
    sum: f64,
    last: Option<f64>,
    head: i64,
    /// Values that arrived older than the window.
    pub late: u64,
}

impl Window {
    /// A window of `length` seconds in `k` sub-buckets; `percentiles` keeps the sketch.
    pub fn new(length: f64, k: usize, percentiles: bool) -> Window {
        let k = k.max(1) as i64;
        Window {
            length,
            width: length / k as f64,
            k,
            buckets: VecDeque::with_capacity(k as usize),
            spare: Vec::new(),
            total: percentiles.then(Sketch::default),
            count: 0,
            sum: 0.0,
            last: None,
            head: i64::MIN,
            late: 0,
        }
    }

    /// Window length (s).
    pub fn length(&self) -> f64 {
        self.length
    }

    fn index(&self, t: f64) -> i64 {
        // floor without the libm call (the baseline target has no rounding instruction);
        // equal to `(t / width).floor() as i64` for every input, NaN and overflow included.
        let q = t / self.width;
        let i = q as i64;
        if (i as f64) > q {
            i.saturating_sub(1)
        } else {
            i
        }
    }

    /// Moves the window's end to `t`, dropping buckets that fell out.
    pub fn advance(&mut self, t: f64) {
        let idx = self.index(t);
        self.advance_to(idx);
    }

    fn advance_to(&mut self, idx: i64) {
        if idx > self.head {
            self.head = idx;
        }
        while let Some(b) = self.buckets.front() {
            if b.index > self.head - self.k {
                break;
            }
            let mut b = self.buckets.pop_front().expect("front exists");
            self.count -= b.count;
            self.sum -= b.sum;
            if let Some(total) = self.total.as_mut() {
                for &bin in &b.bins {
                    total.remove(bin);
                }
            }
            b.bins.clear();
            if self.spare.len() < self.k as usize {
                self.spare.push(b.bins);
            }
        }
        if self.buckets.is_empty() {
            // Re-anchor the running sum so rounding does not accumulate forever.
            self.sum = 0.0;
        }
    }

    /// Adds a value at event time `t`.
    pub fn add(&mut self, t: f64, v: f64) {
        self.add_binned(t, v, Sketch::bin(v));
    }

    /// [`Window::add`] with the value's sketch bin already computed (`Sketch::bin(v)`), so
    /// that the windows of one metric compute it once.
    fn add_binned(&mut self, t: f64, v: f64, bin: u16) {
        let idx = self.index(t);
        // Buckets expire only when the end moves forward.
        if idx > self.head {
            self.advance_to(idx);
        }
        if idx <= self.head - self.k {
            self.late += 1;
            return;
        }
        self.count += 1;
        self.sum += v;
        if idx == self.head {
            self.last = Some(v);
        }
        // Searched from the newest bucket, where values mostly land (tried first on its own).
        let newest = self.buckets.len().wrapping_sub(1);
        let pos = match self.buckets.back() {
            Some(b) if b.index == idx => newest,
            _ => self.find_or_insert(idx),
        };
        let b = &mut self.buckets[pos];
        b.count += 1;
        b.sum += v;
        b.min = b.min.min(v);
        b.max = b.max.max(v);
        if let Some(total) = self.total.as_mut() {
            b.bins.push(bin);
            total.insert(bin);
        }
    }

    /// The position of the bucket of index `idx`, inserted in index order if new.
    fn find_or_insert(&mut self, idx: i64) -> usize {
        match self.buckets.iter().rposition(|b| b.index <= idx) {
            Some(p) if self.buckets[p].index == idx => p,
            found => {
                let at = found.map_or(0, |p| p + 1);
                let bins = self.spare.pop().unwrap_or_default();
                let b = Bucket {
                    index: idx,
                    count: 0,
                    sum: 0.0,
                    min: f64::INFINITY,
                    max: f64::NEG_INFINITY,
                    bins,
                };
                self.buckets.insert(at, b);
                at
            }
        }
    }

    /// Statistics at the window's current end, `None` when empty.
    pub fn stats(&self) -> Option<WindowStats> {
        if self.count == 0 {
            return None;
        }
        let (mut min, mut max, mut sum) = (f64::INFINITY, f64::NEG_INFINITY, 0.0);
        for b in &self.buckets {
            min = min.min(b.min);
            max = max.max(b.max);
            sum += b.sum;
        }
        let q = |x: f64| self.total.as_ref().map_or(f64::NAN, |h| h.quantile(x).clamp(min, max));
        Some(WindowStats {
            count: self.count,
            mean: sum / self.count as f64,
            min,
            max,
            p50: q(0.5),
            p95: q(0.95),
            p99: q(0.99),
            last: self.last.unwrap_or(f64::NAN),
        })
    }

    /// Approximate heap bytes held.
    pub fn heap_bytes(&self) -> usize {
        let buckets: usize =
            self.buckets.iter().map(|b| std::mem::size_of::<Bucket>() + b.bins.capacity() * 2).sum();
        let spare: usize =
            self.spare.iter().map(|v| std::mem::size_of::<Vec<u16>>() + v.capacity() * 2).sum();
        buckets + spare + self.total.as_ref().map_or(0, |_| (BINS + BINS.div_ceil(SUB)) * 4)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bucket_index_is_the_floor_for_every_input() {
        // Against std's f64::floor: negatives, exact multiples, tiny and huge values,
        // infinities and NaN (the cast saturates and maps NaN to 0 both ways).
        for width in [0.1, 1.0, 6.0, 1e-3] {
            let w = Window::new(width * 10.0, 10, false);
            for t in [
                0.0,
                -0.0,
                0.05,
                -0.05,
                0.1,
                -0.1,
                0.3,
                -0.3,
                1.0,
                -1.0,
                12.3456,
                -12.3456,
                1e-300,
                -1e-300,
                1.7e9,
                -1.7e9,
                9.3e18,
                -9.3e18,
                1e300,
                -1e300,
                f64::INFINITY,
                f64::NEG_INFINITY,
                f64::NAN,
            ] {
                assert_eq!(w.index(t), (t / w.width).floor() as i64, "t {t} width {}", w.width);
            }
        }
    }

    #[test]
    fn sketch_bins_are_ordered_and_tight() {
        let vals = [-1e9, -3.5, -1.0, -1e-5, 0.0, 1e-7, 1e-5, 0.5, 1.0, 1.01, 3.5, 2e13];
        let bins: Vec<u16> = vals.iter().map(|&v| Sketch::bin(v)).collect();
        assert!(bins.windows(2).all(|w| w[0] <= w[1]), "{bins:?}");
        for v in [1e-5, 0.37, 1.0, 2.5, 123.456, 9.9e9, -0.01, -42.0] {
            let r = Sketch::value(Sketch::bin(v));
            assert!(((r - v) / v).abs() <= 2f64.powi(-8), "{v} -> {r}");
        }
        assert_eq!(Sketch::value(Sketch::bin(1e-7)), 0.0);
    }

    #[test]
    fn holds_what_is_younger_than_the_window() {
        // 1 s window in 10 buckets of 0.1 s.
        let mut w = Window::new(1.0, 10, true);
        for k in 0..30 {
            w.add(k as f64 * 0.1 + 0.05, k as f64);
        }
        // At t = 2.95 the buckets 20..=29 are in: values 20..=29.
        let s = w.stats().unwrap();
        assert_eq!(s.count, 10);
        assert_eq!((s.min, s.max, s.last), (20.0, 29.0, 29.0));
        assert!((s.mean - 24.5).abs() < 1e-12);
        assert!((s.p50 - 24.5).abs() <= 0.5 + 24.5 * 0.004, "{}", s.p50);
        w.advance(10.0);
        assert!(w.stats().is_none());
        w.add(1.0, 5.0);
        assert_eq!(w.late, 1);
    }
}

// === impl Window: single statistics ===

impl Window {
    /// One statistic at the window's current end, `None` when empty. Cheaper than
    /// [`Window::stats`] when a rule needs only one.
    pub fn stat(&self, s: Stat) -> Option<f64> {
        if self.count == 0 {
            return None;
        }
        Some(match s {
            Stat::Count => self.count as f64,
            Stat::Mean => self.buckets.iter().map(|b| b.sum).sum::<f64>() / self.count as f64,
            Stat::Min => self.buckets.iter().map(|b| b.min).fold(f64::INFINITY, f64::min),
            Stat::Max => self.buckets.iter().map(|b| b.max).fold(f64::NEG_INFINITY, f64::max),
            Stat::Last => self.last.unwrap_or(f64::NAN),
            Stat::P50 | Stat::P95 | Stat::P99 => {
                let q = match s {
                    Stat::P50 => 0.5,
                    Stat::P95 => 0.95,
                    _ => 0.99,
                };
                let (lo, hi) = (self.stat(Stat::Min)?, self.stat(Stat::Max)?);
                self.total.as_ref()?.quantile(q).clamp(lo, hi)
            }
        })
    }
}

/// The windows of every metric key, created when the key first has a value.
#[derive(Debug, Clone)]
pub struct WindowSet {
    lengths: Vec<f64>,
    buckets: usize,
    keys: Vec<Option<Vec<Window>>>,
}

/// Index of a (metric, role) key.
pub fn key_index(metric: crate::metrics::Metric, role: Option<crate::msg::Role>) -> usize {
    metric as usize * (crate::msg::Role::ALL.len() + 1) + role.map_or(0, |r| r.index() + 1)
}

impl WindowSet {
    /// Windows of the given lengths (seconds), each of `buckets` sub-buckets.
    pub fn new(lengths: &[f64], buckets: usize) -> WindowSet {
        let n = crate::metrics::Metric::ALL.len() * (crate::msg::Role::ALL.len() + 1);
        WindowSet { lengths: lengths.to_vec(), buckets, keys: vec![None; n] }
    }

    /// The window lengths, in order.
    pub fn lengths(&self) -> &[f64] {
        &self.lengths
    }

    /// Adds a value to every window of its key.
    pub fn add(&mut self, metric: crate::metrics::Metric, role: Option<crate::msg::Role>, t: f64, v: f64) {
        let (lengths, k) = (&self.lengths, self.buckets);
        let ws = self.keys[key_index(metric, role)]
            .get_or_insert_with(|| lengths.iter().map(|&l| Window::new(l, k, true)).collect());
        let bin = Sketch::bin(v);
        for w in ws {
            w.add_binned(t, v, bin);
        }
    }

    /// Moves every window's end to `t` (live: windows empty out when values stop).
    pub fn advance(&mut self, t: f64) {
        for w in self.keys.iter_mut().flatten().flatten() {
            w.advance(t);
        }
    }

    /// The windows of a key, in the order of [`WindowSet::lengths`].
    pub fn get(&self, metric: crate::metrics::Metric, role: Option<crate::msg::Role>) -> Option<&[Window]> {
        self.keys[key_index(metric, role)].as_deref()
    }

    /// Approximate heap bytes held by all windows.
    pub fn heap_bytes(&self) -> usize {
        self.keys.iter().flatten().flatten().map(Window::heap_bytes).sum()
    }
}
