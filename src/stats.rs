//! Run statistics with bounded memory: count, exact mean (compensated sum), min, max, and
//! percentiles.
//!
//! Percentiles are exact (numpy's default "linear" definition: the value at rank
//! q (n - 1) of the sorted values, interpolated between neighbours) while a metric has at
//! most `exact_values` values. Past that, the values move into an hdrhistogram with
//! `histogram_digits` significant decimal digits (3 by default: relative error below 0.1%)
//! at a resolution of 1e-6 of the metric's unit, negative and positive halves kept apart,
//! and the memory stays bounded whatever the run length.

use hdrhistogram::Histogram;
use serde::Serialize;

use crate::core::Sample;
use crate::metrics::Metric;
use crate::msg::Role;

/// Which statistic a rule reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Stat {
    /// count
    Count,
    /// mean
    Mean,
    /// min
    Min,
    /// max
    Max,
    /// p50
    P50,
    /// p95
    P95,
    /// p99
    P99,
    /// last
    Last,
}

impl Stat {
    /// Every stat name.
    pub const NAMES: [&'static str; 8] = ["count", "mean", "min", "max", "p50", "p95", "p99", "last"];

    /// Parses a stat name.
    pub fn from_name(s: &str) -> Option<Stat> {
        Some(match s {
            "count" => Stat::Count,
            "mean" => Stat::Mean,
            "min" => Stat::Min,
            "max" => Stat::Max,
            "p50" => Stat::P50,
            "p95" => Stat::P95,
            "p99" => Stat::P99,
            "last" => Stat::Last,
            _ => return None,
        })
    }

    /// The stat's name.
    pub fn name(self) -> &'static str {
        Stat::NAMES[self as usize]
    }

    /// Whether the stat needs the histogram.
    pub fn is_percentile(self) -> bool {
        matches!(self, Stat::P50 | Stat::P95 | Stat::P99)
    }
}

/// How run statistics compute percentiles (`[report]` in the config).
#[derive(Debug, Clone, Copy, Serialize)]
pub struct StatsParams {
    /// values per metric kept for exact percentiles
    pub exact_values: usize,
    /// significant digits of the fallback histogram
    pub histogram_digits: u8,
}

const SLOTS: usize = Role::ALL.len() + 1;

/// Per-metric (and per-role) run statistics.
#[derive(Debug, Clone)]
pub struct RunStats {
    slots: Vec<Option<Summary>>,
    cap: usize,
    digits: u8,
    /// Samples whose value was not a finite number, dropped before anything saw them.
    pub non_finite: u64,
}

impl RunStats {
    /// Empty statistics with the given percentile settings.
    pub fn new(p: &StatsParams) -> RunStats {
        RunStats {
            slots: vec![None; Metric::ALL.len() * SLOTS],
            cap: p.exact_values,
            digits: p.histogram_digits,
            non_finite: 0,
        }
    }

    fn slot(metric: Metric, role: Option<Role>) -> usize {
        metric as usize * SLOTS + role.map_or(0, |r| r.index() + 1)
    }

    /// Adds samples.
    pub fn add(&mut self, samples: &[Sample]) {
        for s in samples {
            let (cap, digits) = (self.cap, self.digits);
            self.slots[Self::slot(s.metric, s.role)]
                .get_or_insert_with(|| Summary::new(cap, digits))
                .add(s.value);
        }
    }

    /// Statistics of one metric, if it has values.
    pub fn get(&self, metric: Metric, role: Option<Role>) -> Option<Stats> {
        self.slots[Self::slot(metric, role)].as_ref().and_then(Summary::stats)
    }

    /// One statistic of the run (exact mean, min, max, count, last).
    pub fn stat(&self, metric: Metric, role: Option<Role>, stat: Stat) -> Option<f64> {
        let s = self.slots[Self::slot(metric, role)].as_ref()?;
        let st = s.stats()?;
        Some(match stat {
            Stat::Count => st.count as f64,
            Stat::Mean => st.mean,
            Stat::Min => st.min,
            Stat::Max => st.max,
            Stat::P50 => st.p50,
            Stat::P95 => st.p95,
            Stat::P99 => st.p99,
            Stat::Last => s.last()?,
        })
    }

    /// Count, mean, min and max of a metric without computing percentiles (cheap).
    pub fn basic(&self, metric: Metric, role: Option<Role>) -> Option<(u64, f64, f64, f64)> {
        self.slots[Self::slot(metric, role)].as_ref().and_then(Summary::basic)
    }

    /// Whether every percentile so far is exact.
    pub fn all_exact(&self) -> bool {
        self.slots.iter().flatten().all(Summary::is_exact)
    }
}

/// Scale of the histogram: values are stored in units of 1e-6.
const SCALE: f64 = 1e6;

/// Summary statistics of one metric.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, serde::Deserialize)]
pub struct Stats {
    /// Values.
    pub count: u64,
    /// Mean (exact).
    pub mean: f64,
    /// Minimum (exact).
    pub min: f64,
    /// Maximum (exact).
    pub max: f64,
    /// Median.
    pub p50: f64,
    /// 95th percentile.
    pub p95: f64,
    /// 99th percentile.
    pub p99: f64,
    /// Sum (exact).
    pub sum: f64,
}

impl Stats {
    /// The statistics' names, as the report writes them.
    pub const FIELDS: [&'static str; 8] = ["count", "mean", "min", "max", "p50", "p95", "p99", "sum"];

    /// One statistic by its name in the report.
    pub fn get(&self, name: &str) -> Option<f64> {
        Some(match name {
            "count" => self.count as f64,
            "mean" => self.mean,
            "min" => self.min,
            "max" => self.max,
            "p50" => self.p50,
            "p95" => self.p95,
            "p99" => self.p99,
            "sum" => self.sum,
            _ => return None,
        })
    }
}

/// Values per block of [`Exact`] (32 KiB of `f64`, 4 KiB of small whole numbers).
const EXACT_BLOCK: usize = 4096;

/// The values kept for exact percentiles, in arrival order, in fixed blocks: a block is
/// allocated at its full size and never grows, so no value is ever copied and the memory
/// held is the values' own plus at most one block (a `Vec` that doubles holds up to twice
/// its values, and both copies while it moves). A block whose values are all whole numbers
/// 0..=255 (counts, flags) keeps them as bytes, an eighth of the room; the first value that
/// is not turns the block into `f64` once. Every value reads back with its own bits.
#[derive(Debug, Clone, Default)]
struct Exact {
    blocks: Vec<Block>,
    len: usize,
}

/// One block of [`Exact`].
#[derive(Debug, Clone)]
enum Block {
    /// Whole numbers 0..=255, each exactly its `f64` (no -0.0, no NaN).
    Small(Vec<u8>),
    /// Any values.
    Full(Vec<f64>),
}

/// `v` as a byte when the byte converts back to the very same bits.
fn small(v: f64) -> Option<u8> {
    let b = v as u8;
    (f64::from(b).to_bits() == v.to_bits()).then_some(b)
}

impl Block {
    fn new(v: f64) -> Block {
        match small(v) {
            Some(b) => {
                let mut s = Vec::with_capacity(EXACT_BLOCK);
                s.push(b);
                Block::Small(s)
            }
            None => {
                let mut f = Vec::with_capacity(EXACT_BLOCK);
                f.push(v);
                Block::Full(f)
            }
        }
    }

    fn len(&self) -> usize {
        match self {
            Block::Small(s) => s.len(),
            Block::Full(f) => f.len(),
        }
    }

    /// Appends `v` (the block has room).
    fn push(&mut self, v: f64) {
        match self {
            Block::Full(f) => f.push(v),
            Block::Small(s) => match small(v) {
                Some(b) => s.push(b),
                None => {
                    let mut f = Vec::with_capacity(EXACT_BLOCK);
                    f.extend(s.iter().map(|&b| f64::from(b)));
                    f.push(v);
                    *self = Block::Full(f);
                }
            },
        }
    }

    fn parts(&self) -> (&[u8], &[f64]) {
        match self {
            Block::Small(s) => (s, &[]),
            Block::Full(f) => (&[], f),
        }
    }
}

impl Exact {
    fn len(&self) -> usize {
        self.len
    }

    fn push(&mut self, v: f64) {
        match self.blocks.last_mut() {
            Some(b) if b.len() < EXACT_BLOCK => b.push(v),
            _ => self.blocks.push(Block::new(v)),
        }
        self.len += 1;
    }

    fn iter(&self) -> impl Iterator<Item = f64> + '_ {
        self.blocks.iter().flat_map(|b| {
            let (s, f) = b.parts();
            s.iter().map(|&x| f64::from(x)).chain(f.iter().copied())
        })
    }

    fn to_vec(&self) -> Vec<f64> {
        let mut v = Vec::with_capacity(self.len);
        for b in &self.blocks {
            let (s, f) = b.parts();
            v.extend(s.iter().map(|&x| f64::from(x)));
            v.extend_from_slice(f);
        }
        v
    }
}

/// Accumulates one metric's values.
#[derive(Debug, Clone)]
pub struct Summary {
    count: u64,
    sum: f64,
    comp: f64,
    last: Option<f64>,
    min: f64,
    max: f64,
    exact: Exact,
    cap: usize,
    digits: u8,
    hist: Option<(Histogram<u64>, Histogram<u64>)>,
}

impl Summary {
    /// New summary keeping up to `cap` exact values.
    pub fn new(cap: usize, digits: u8) -> Summary {
        Summary {
            count: 0,
            sum: 0.0,
            comp: 0.0,
            last: None,
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            exact: Exact::default(),
            cap,
            digits,
            hist: None,
        }
    }

    /// Adds a value.
    pub fn add(&mut self, v: f64) {
        self.count += 1;
        self.last = Some(v);
        // Neumaier's compensated summation.
        let t = self.sum + v;
        if self.sum.abs() >= v.abs() {
            self.comp += (self.sum - t) + v;
        } else {
            self.comp += (v - t) + self.sum;
        }
        self.sum = t;
        self.min = self.min.min(v);
        self.max = self.max.max(v);
        match &mut self.hist {
            Some((neg, pos)) => record(neg, pos, v),
            None if self.exact.len() < self.cap => self.exact.push(v),
            None => {
                let mk = || Histogram::<u64>::new(self.digits).expect("1..=5 digits are valid");
                let (mut neg, mut pos) = (mk(), mk());
                for x in self.exact.iter().chain(std::iter::once(v)) {
                    record(&mut neg, &mut pos, x);
                }
                self.exact = Exact::default();
                self.hist = Some((neg, pos));
            }
        }
    }

    /// Count, exact mean, min and max, `None` when empty.
    pub fn basic(&self) -> Option<(u64, f64, f64, f64)> {
        (self.count > 0).then(|| (self.count, (self.sum + self.comp) / self.count as f64, self.min, self.max))
    }

    /// The latest value added.
    pub fn last(&self) -> Option<f64> {
        self.last
    }

    /// Values added.
    pub fn count(&self) -> u64 {
        self.count
    }

    /// Whether the percentiles are exact.
    pub fn is_exact(&self) -> bool {
        self.hist.is_none()
    }

    /// The statistics, or `None` when empty.
    pub fn stats(&self) -> Option<Stats> {
        if self.count == 0 {
            return None;
        }
        let sum = self.sum + self.comp;
        let (p50, p95, p99) = match &self.hist {
            None => {
                let [p50, p95, p99] = quantiles_selected(&mut self.exact.to_vec(), [0.5, 0.95, 0.99]);
                (p50, p95, p99)
            }
            Some((neg, pos)) => {
                (hist_quantile(neg, pos, 0.5), hist_quantile(neg, pos, 0.95), hist_quantile(neg, pos, 0.99))
            }
        };
        let clamp = |x: f64| x.clamp(self.min, self.max);
        Some(Stats {
            count: self.count,
            mean: sum / self.count as f64,
            min: self.min,
            max: self.max,
            p50: clamp(p50),
            p95: clamp(p95),
            p99: clamp(p99),
            sum,
        })
    }
}

fn record(neg: &mut Histogram<u64>, pos: &mut Histogram<u64>, v: f64) {
    let mag = (v.abs() * SCALE).round().min(u64::MAX as f64 / 4.0) as u64;
    let h = if v < 0.0 { neg } else { pos };
    // Auto-resizing histograms only fail on values beyond 2^63; the clamp above prevents it.
    let _ = h.record(mag);
}

fn hist_quantile(neg: &Histogram<u64>, pos: &Histogram<u64>, q: f64) -> f64 {
    let (nn, np) = (neg.len(), pos.len());
    let n = nn + np;
    if n == 0 {
        return 0.0;
    }
    let rank = q * (n - 1) as f64;
    if rank < nn as f64 {
        // Negatives sorted ascending are magnitudes sorted descending.
        let qq = 1.0 - (rank + 0.5) / nn as f64;
        -(neg.value_at_quantile(qq.clamp(0.0, 1.0)) as f64) / SCALE
    } else {
        let qq = (rank - nn as f64 + 0.5) / np as f64;
        pos.value_at_quantile(qq.clamp(0.0, 1.0)) as f64 / SCALE
    }
}

/// The quantiles of `v` for ascending `qs`, by [`quantile_sorted`]'s rule, found by
/// selection instead of a full sort: the same order statistics (under `f64::total_cmp`, as
/// the sort), each selection working on what lies above the previous one.
pub fn quantiles_selected<const N: usize>(v: &mut [f64], qs: [f64; N]) -> [f64; N] {
    let mut out = [f64::NAN; N];
    if v.is_empty() {
        return out;
    }
    let n = v.len();
    let mut from = 0;
    for (o, q) in out.iter_mut().zip(qs) {
        let pos = q * (n - 1) as f64;
        let (lo, hi) = (pos.floor() as usize, pos.ceil() as usize);
        let (_, a, above) = v[from..].select_nth_unstable_by(lo - from, f64::total_cmp);
        let a = *a;
        // The next order statistic is the least of those above.
        let b = if hi == lo { a } else { above.iter().copied().min_by(f64::total_cmp).unwrap_or(a) };
        *o = a + (b - a) * (pos - lo as f64);
        from = lo;
    }
    out
}

/// The q-quantile of sorted values by linear interpolation (numpy's default).
pub fn quantile_sorted(v: &[f64], q: f64) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let pos = q * (v.len() - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = pos.ceil() as usize;
    v[lo] + (v[hi] - v[lo]) * (pos - lo as f64)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// Selection gives the very quantiles of the full sort (bit for bit), whatever the
        /// values: ties, signed zeros, infinities, one value.
        #[test]
        fn selected_quantiles_equal_sorted_ones(
            mut v in proptest::collection::vec(prop_oneof![
                -5.0..5.0f64, Just(0.0), Just(-0.0), Just(1.0), Just(f64::INFINITY), Just(f64::NEG_INFINITY)
            ], 1..300),
        ) {
            let mut sorted = v.clone();
            sorted.sort_unstable_by(f64::total_cmp);
            let qs = [0.0, 0.25, 0.5, 0.95, 0.99, 1.0];
            let got = quantiles_selected(&mut v, qs);
            for (g, q) in got.iter().zip(qs) {
                let want = quantile_sorted(&sorted, q);
                prop_assert!(g.to_bits() == want.to_bits() || (g.is_nan() && want.is_nan()), "q {}: {} vs {}", q, g, want);
            }
        }
    }

    #[test]
    fn exact_stats_by_hand() {
        let mut s = Summary::new(100, 3);
        for v in [3.0, 1.0, 4.0, 1.0, 5.0] {
            s.add(v);
        }
        let st = s.stats().unwrap();
        assert_eq!((st.count, st.min, st.max, st.sum), (5, 1.0, 5.0, 14.0));
        assert_eq!(st.mean, 2.8);
        // numpy.percentile([3,1,4,1,5], 50) = 3.0; 95 -> 4.8; 99 -> 4.96.
        assert_eq!(st.p50, 3.0);
        assert!((st.p95 - 4.8).abs() < 1e-12);
        assert!((st.p99 - 4.96).abs() < 1e-12);
        assert!(Summary::new(4, 3).stats().is_none());
    }

    /// Values across several blocks of the exact store (and a histogram switch at a cap that
    /// is not a block multiple): the percentiles are numpy's linear ones of all the values,
    /// and the histogram receives every value once.
    #[test]
    fn exact_store_spans_blocks() {
        let n = 3 * EXACT_BLOCK + 17;
        let vals: Vec<f64> = (0..n).map(|i| ((i * 7919) % n) as f64 * 0.01 - 40.0).collect();
        let mut s = Summary::new(n, 3);
        for &v in &vals {
            s.add(v);
        }
        assert!(s.is_exact());
        assert_eq!(s.exact.len(), n);
        assert!(s.exact.blocks.iter().all(|b| matches!(b, Block::Full(f) if f.capacity() == EXACT_BLOCK)));
        let mut sorted = vals.clone();
        sorted.sort_by(f64::total_cmp);
        let st = s.stats().unwrap();
        for (q, got) in [(0.5, st.p50), (0.95, st.p95), (0.99, st.p99)] {
            assert_eq!(got.to_bits(), quantile_sorted(&sorted, q).to_bits(), "q={q}");
        }
        // One more value passes the cap: the histogram counts all n + 1.
        s.add(1.5);
        assert!(!s.is_exact());
        let (neg, pos) = s.hist.as_ref().unwrap();
        assert_eq!(neg.len() + pos.len(), n as u64 + 1);
    }

    /// Counts and flags are kept as bytes, a block turns to `f64` at its first other value
    /// (a fraction, 256, -0.0, a negative), and every value reads back with its own bits: the
    /// percentiles equal numpy's linear ones of all the values, sorted here by total order.
    #[test]
    fn small_whole_numbers_are_kept_as_bytes() {
        let n = 2 * EXACT_BLOCK + 5;
        let mut vals: Vec<f64> = (0..n).map(|i| ((i * 7919) % 49) as f64).collect();
        // The third block is mixed: its values read back the same once it turns to f64.
        vals.extend([3.0, 0.5, 255.0, 256.0, -0.0, -1.0, 0.0, 7.0]);
        let mut s = Summary::new(vals.len(), 3);
        for &v in &vals {
            s.add(v);
        }
        let kinds: Vec<bool> = s.exact.blocks.iter().map(|b| matches!(b, Block::Small(_))).collect();
        assert_eq!(kinds, [true, true, false]);
        let back: Vec<u64> = s.exact.iter().map(f64::to_bits).collect();
        assert_eq!(back, vals.iter().map(|v| v.to_bits()).collect::<Vec<_>>());
        assert_eq!(s.exact.to_vec().iter().map(|v| v.to_bits()).collect::<Vec<_>>(), back);
        let mut sorted = vals.clone();
        sorted.sort_by(f64::total_cmp);
        let st = s.stats().unwrap();
        for (q, got) in [(0.5, st.p50), (0.95, st.p95), (0.99, st.p99)] {
            assert_eq!(got.to_bits(), quantile_sorted(&sorted, q).to_bits(), "q={q}");
        }
        assert_eq!(small(-0.0), None);
        assert_eq!(small(f64::NAN), None);
        assert_eq!(small(255.0), Some(255));
        assert_eq!(small(256.0), None);
    }

    #[test]
    fn histogram_mode_stays_within_stated_precision() {
        let mut s = Summary::new(1000, 3);
        let vals: Vec<f64> = (0..20_000).map(|i| ((i * 7919) % 20_000) as f64 * 0.001 - 5.0).collect();
        for &v in &vals {
            s.add(v);
        }
        assert!(!s.is_exact());
        let mut sorted = vals.clone();
        sorted.sort_by(f64::total_cmp);
        let st = s.stats().unwrap();
        for (q, got) in [(0.5, st.p50), (0.95, st.p95), (0.99, st.p99)] {
            let want = quantile_sorted(&sorted, q);
            // 3 significant digits plus one rank of the data's spacing.
            assert!((got - want).abs() <= want.abs() * 2e-3 + 2e-3, "q={q}: {got} vs {want}");
        }
        assert_eq!(st.min, -5.0);
        assert!((st.mean - vals.iter().sum::<f64>() / vals.len() as f64).abs() < 1e-12);
    }
}
