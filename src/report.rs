//! The run report (SPEC §6), built from a finished monitor with the config's identity
//! ([`ReportSettings`]), and the long-form series rows. Pure: the caller writes them where
//! it wants. (The run statistics it reads are `crate::stats::RunStats`.)

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::core::engine::{Collision, Counters, Sample, StepCounts};
use crate::metrics::nees::Consistency;
use crate::metrics::Metric;
use crate::monitor::Monitor;
use crate::msg::{Name, Role};
use crate::msg::{Position, Tail};
use crate::rules::{AlertEvent, Verdict};
pub use crate::stats::RunStats;
use crate::stats::Stats;

/// Config keys renamed for what they mean: (section, old, new). Kept here, beside the
/// report's `definitions`, because the gate reads an older report's keys through it. The old names keep working for
/// one release, with a warning naming the new one (`tracking.region_m` is also the name the
/// message contract's first edition lists, so scripts that set it keep working).
pub const RENAMED_KEYS: [(&str, &str, &str); 4] = [
    ("tracking", "region_m", "region_radius_m"),
    ("clearance", "inflation_m", "planner_margin_m"),
    ("time", "retain", "reference_history"),
    ("dashboard", "step", "chart_interval"),
];

/// The current name of a `section.key` (itself unless renamed).
pub fn current_key(key: &str) -> String {
    for (sec, old, new) in RENAMED_KEYS {
        if key.strip_prefix(sec).and_then(|k| k.strip_prefix('.')) == Some(old) {
            return format!("{sec}.{new}");
        }
    }
    key.to_string()
}

/// One rejected record, for the report and the summary.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct BadRecord {
    /// `line N` or `byte N`.
    pub at: String,
    /// Role, when known.
    pub role: Option<Name>,
    /// Reason code.
    pub reason: Name,
    /// Detail.
    pub detail: String,
}

impl BadRecord {
    /// Builds one from a reader's item.
    pub fn new(pos: Position, role: Option<Role>, reason: &crate::msg::Reject) -> BadRecord {
        BadRecord {
            at: pos.to_string(),
            role: role.map(|r| Name::Borrowed(r.name())),
            reason: Name::Borrowed(reason.code()),
            detail: reason.to_string(),
        }
    }
}

/// Transport section of one role.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct RoleTransport {
    /// Messages accepted.
    pub messages: u64,
    /// Rejected while decoding or validating (the same count as the records section's
    /// `rejected`, per role).
    pub rejected: u64,
    /// The old name of `rejected`, written too for this release so scripts that read it
    /// keep working.
    pub decode_errors: u64,
    /// Dropped by a full queue.
    pub dropped: u64,
    /// Stamps older than the previous one.
    pub stamp_regressions: u64,
    /// recv - stamp.
    pub latency_s: Option<Stats>,
    /// Time between arrivals.
    pub interarrival_s: Option<Stats>,
    /// The most publishers heard on the role at once (live only).
    pub publishers_max: Option<f64>,
}

/// Steps section.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct Steps {
    /// Tracking steps (one per `estimate/objects` message).
    pub tracking: StepCounts,
    /// Ego steps (one per `estimate/ego` message).
    pub ego: StepCounts,
    /// Clearance steps (one per `reference/ego` message).
    pub clearance: StepCounts,
    /// Path following at the clearance steps, once plans have been heard.
    pub path_following: StepCounts,
    /// The clearance-loss budget at the evaluated ego steps.
    pub budget: StepCounts,
    /// Path quality (one per `plan/path` message).
    pub plans: StepCounts,
    /// Steps resolved early because too many were waiting.
    pub pending_overflow: u64,
    /// T-GOSPA windows solved and skipped (when enabled).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tgospa: Option<StepCounts>,
    /// Tracking steps that left a T-GOSPA window early (`tgospa.max_steps`; when enabled).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tgospa_trimmed: Option<u64>,
}

/// Records section.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct Records {
    /// Accepted.
    pub accepted: u64,
    /// Rejected.
    pub rejected: u64,
    /// Rejections by reason.
    pub rejected_by_reason: BTreeMap<Name, u64>,
    /// The first rejected records, with where and why.
    pub first_rejected: Vec<BadRecord>,
    /// Object states accepted.
    pub object_states: u64,
    /// A damaged binary tail.
    pub tail: Option<Tail>,
    /// Metric values that came out non-finite and were dropped (none should: every input
    /// is bounded; this counts what the last line of defence caught).
    pub non_finite_samples: u64,
    /// Messages received but not evaluated because the run was stopped first.
    pub cut_short: u64,
    /// Damaged stretches of a binary log skipped to reach the next whole record.
    pub damaged: DamageSummary,
}

/// Damaged stretches of a binary log: totals, and the first [`DamageSummary::KEEP`].
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct DamageSummary {
    /// Stretches skipped.
    pub stretches: u64,
    /// Bytes skipped in all.
    pub bytes: u64,
    /// Records lost in them (estimated: the damaged records and the record starts inside
    /// the stretches that did not verify).
    pub records: u64,
    /// The first stretches, with where they start.
    pub first: Vec<crate::msg::Damage>,
}

impl DamageSummary {
    /// Stretches listed one by one.
    pub const KEEP: usize = 100;

    /// Counts one stretch.
    pub fn add(&mut self, d: crate::msg::Damage) {
        self.stretches += 1;
        self.bytes += d.bytes;
        self.records += d.records;
        if self.first.len() < Self::KEEP {
            self.first.push(d);
        }
    }
}

/// How percentiles were computed.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct PercentileMethod {
    /// `exact-linear` or `hdr`.
    pub method: Name,
    /// Exact values kept per metric before the histogram takes over.
    pub exact_values: usize,
    /// Histogram significant digits.
    pub histogram_digits: u8,
}

/// The report of one run.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(default)]
pub struct Report {
    /// `plumbline`.
    pub tool: Name,
    /// Crate version.
    pub version: Name,
    /// Digest of the resolved config.
    pub config_digest: String,
    /// The settings that define the metrics (`Config::definitions`), by config key.
    pub definitions: BTreeMap<Name, serde_json::Value>,
    /// Digest of the input bytes.
    pub input_digest: String,
    /// Input file.
    pub input: String,
    /// Latest minus earliest message stamp (s).
    pub duration_s: f64,
    /// Steps.
    pub steps: Steps,
    /// Records.
    pub records: Records,
    /// Per metric statistics.
    pub metrics: BTreeMap<Name, Stats>,
    /// Run totals of count metrics.
    pub totals: BTreeMap<Name, f64>,
    /// Pooled NEES consistency test.
    pub nees_consistency: Option<Consistency>,
    /// The run total of T-GOSPA over consecutive blocks of one window (when enabled).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tgospa_run: Option<crate::core::engine::TgospaRun>,
    /// Per role transport.
    pub transport: BTreeMap<Name, RoleTransport>,
    /// Percentile method.
    pub percentiles: PercentileMethod,
    /// Alert events (the first `monitor::KEEP_ALERTS`).
    pub alerts: Vec<AlertEvent>,
    /// Alert events not kept.
    pub alerts_dropped: u64,
    /// Rule verdicts.
    pub verdicts: Vec<Verdict>,
    /// Contacts between the footprint and an obstacle.
    pub collisions: Vec<Collision>,
    /// Contacts not kept.
    pub collisions_dropped: u64,
}

/// What the report is built from besides the engine.
#[derive(Debug, Clone, Default)]
pub struct RunInputs {
    /// Input path.
    pub input: String,
    /// Input digest.
    pub input_digest: String,
    /// First rejected records.
    pub first_rejected: Vec<BadRecord>,
    /// Damaged tail.
    pub tail: Option<Tail>,
    /// Damaged stretches skipped.
    pub damage: DamageSummary,
}

/// What the report says of the config it was made with (the config builds it:
/// [`crate::config::Config::report_settings`]).
#[derive(Debug, Clone)]
pub struct ReportSettings {
    /// Digest of the resolved config.
    pub config_digest: String,
    /// The settings that define the metrics, by config key.
    pub definitions: BTreeMap<&'static str, serde_json::Value>,
    /// The run statistics' percentile settings.
    pub stats: crate::stats::StatsParams,
}

impl Report {
    /// Reads a report back from its JSON. Sections a report of an earlier release did not
    /// write yet read as empty (a baseline kept from the last release stays usable); a
    /// document that is not a plumbline report is refused.
    pub fn read(text: &str) -> Result<Report, String> {
        let r: Report = serde_json::from_str(text).map_err(|e| format!("not a report: {e}"))?;
        if r.tool != "plumbline" {
            return Err(format!("not a plumbline report (its `tool` is {:?})", r.tool));
        }
        Ok(r)
    }
}

/// A map keyed by fixed words, as the report keys it.
fn names<V: Clone>(m: &BTreeMap<&'static str, V>) -> BTreeMap<Name, V> {
    m.iter().map(|(k, v)| (Name::Borrowed(k), v.clone())).collect()
}

impl Report {
    /// Builds the report.
    pub fn build(cfg: &ReportSettings, monitor: &Monitor, inputs: RunInputs) -> Report {
        let (engine, stats) = (&monitor.engine, &monitor.stats);
        let c: &Counters = engine.counters();
        let mut metrics = BTreeMap::new();
        let mut totals = BTreeMap::new();
        // With alpha != 2 the engine emits only the gospa total (SPEC §6), so the parts
        // and counts are absent here too.
        for m in Metric::ALL {
            if m.is_per_role() {
                continue;
            }
            if let Some(s) = stats.get(m, None) {
                metrics.insert(Name::Borrowed(m.name()), s);
                if m.is_count() {
                    totals.insert(Name::Borrowed(m.name()), s.sum);
                }
            }
        }
        let mut transport = BTreeMap::new();
        for r in Role::ALL {
            let t = engine.transport(r);
            if t.messages == 0 && t.rejected == 0 && t.dropped == 0 {
                continue;
            }
            transport.insert(
                Name::Borrowed(r.name()),
                RoleTransport {
                    messages: t.messages,
                    rejected: t.rejected,
                    decode_errors: t.rejected,
                    dropped: t.dropped,
                    stamp_regressions: t.stamp_regressions,
                    latency_s: stats.get(Metric::Latency, Some(r)),
                    interarrival_s: stats.get(Metric::Interarrival, Some(r)),
                    publishers_max: stats.get(Metric::Publishers, Some(r)).map(|s| s.max),
                },
            );
        }
        let duration_s = match (c.first_stamp, c.last_stamp) {
            (Some(a), Some(b)) => b - a,
            _ => 0.0,
        };
        Report {
            tool: Name::Borrowed("plumbline"),
            version: Name::Borrowed(env!("CARGO_PKG_VERSION")),
            config_digest: cfg.config_digest.clone(),
            definitions: names(&cfg.definitions),
            input_digest: inputs.input_digest,
            input: inputs.input,
            duration_s,
            steps: Steps {
                tracking: c.tracking.clone(),
                ego: c.ego.clone(),
                clearance: c.clearance.clone(),
                path_following: c.path_following.clone(),
                budget: c.budget.clone(),
                plans: c.plans.clone(),
                pending_overflow: c.pending_overflow,
                tgospa: engine.has_tgospa().then(|| c.tgospa.clone()),
                tgospa_trimmed: engine.has_tgospa().then_some(c.tgospa_trimmed),
            },
            records: Records {
                accepted: c.accepted,
                rejected: c.rejected,
                rejected_by_reason: names(&c.rejected_by_reason),
                first_rejected: inputs.first_rejected,
                object_states: c.object_states,
                tail: inputs.tail,
                non_finite_samples: stats.non_finite,
                cut_short: c.cut_short,
                damaged: inputs.damage,
            },
            metrics,
            totals,
            nees_consistency: engine.nees_pool().consistency(),
            tgospa_run: engine.has_tgospa().then_some(c.tgospa_run),
            transport,
            percentiles: PercentileMethod {
                method: Name::Borrowed(if stats.all_exact() { "exact-linear" } else { "hdr" }),
                exact_values: cfg.stats.exact_values,
                histogram_digits: cfg.stats.histogram_digits,
            },
            alerts: monitor.alerts().to_vec(),
            alerts_dropped: monitor.alerts_dropped,
            verdicts: monitor.verdicts(),
            collisions: engine.collisions().0.to_vec(),
            collisions_dropped: engine.collisions().1,
        }
    }

    /// Why the run holds nothing to judge, if it does not: no tracking or ego step was
    /// evaluated and no clearance or path value came out (transport figures alone judge
    /// no requirement). Such a run exits 2, whatever its rules say.
    pub fn not_evaluable(&self) -> Option<String> {
        let judged = self.metrics.iter().any(|(name, st)| {
            st.count > 0
                && !matches!(name.as_ref(), "latency_s" | "interarrival_s" | "staleness_s" | "publishers")
        });
        if judged {
            return None;
        }
        let (t, e, r) = (&self.steps.tracking, &self.steps.ego, &self.records);
        let mut why = format!(
            "no evaluated step: {} records accepted, {} rejected; tracking steps {} skipped, ego steps {} skipped",
            r.accepted, r.rejected, t.skipped, e.skipped
        );
        let reasons: Vec<String> = t
            .skipped_by_reason
            .iter()
            .chain(e.skipped_by_reason.iter())
            .map(|(k, v)| format!("{k} {v}"))
            .collect();
        if !reasons.is_empty() {
            why += &format!(" ({})", reasons.join(", "));
        }
        if r.accepted == 0 {
            why += "; the input holds no valid record";
        } else if t.evaluated + t.skipped + e.evaluated + e.skipped == 0 {
            why += "; no estimate/objects or estimate/ego message to evaluate";
        }
        Some(why)
    }

    /// Pretty JSON.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }
}

/// The series header line.
pub const SERIES_HEADER: &str = "t,metric,value\n";

/// The series name of a sample: the metric name, with `[role]` for transport metrics.
pub fn series_name(metric: Metric, role: Option<Role>) -> String {
    match role {
        None => metric.name().to_string(),
        Some(r) => format!("{}[{}]", metric.name(), r.name()),
    }
}

/// Appends one series row (shortest round-trip numbers).
pub fn series_row(buf: &mut String, s: &Sample, ryu_buf: &mut ryu::Buffer) {
    buf.push_str(ryu_buf.format(s.t));
    buf.push(',');
    match s.role {
        None => buf.push_str(s.metric.name()),
        Some(r) => {
            buf.push_str(s.metric.name());
            buf.push('[');
            buf.push_str(r.name());
            buf.push(']');
        }
    }
    buf.push(',');
    buf.push_str(ryu_buf.format(s.value));
    buf.push('\n');
}
