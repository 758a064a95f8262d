//! The Prometheus exposition: one registry, families registered once at startup with help
//! text and base units in their names, refreshed from the monitor on a timer so that a
//! scrape reads atomics and never blocks ingestion.

use prometheus::{
    Encoder, GaugeVec, HistogramOpts, HistogramVec, IntCounterVec, IntGauge, Opts, Registry, TextEncoder,
};

use crate::config::Config;
use crate::metrics::Metric;
use crate::monitor::Monitor;
use crate::msg::Role;
use crate::rules::AlertEvent;
use crate::stats::Stat;

pub use crate::metrics::catalog::{prom_histogram_name, prom_name};

/// Families renamed in this release, exported under the old name too until the next one
/// (old name, new name).
pub const RENAMED_FAMILIES: [(&str, &str); 3] = [
    ("plumbline_arrival_latency_seconds", "plumbline_latency_distribution_seconds"),
    ("plumbline_arrival_gap_seconds", "plumbline_interarrival_distribution_seconds"),
    ("plumbline_decode_errors_total", "plumbline_rejected_total"),
];

/// The `window` label of the latest-sample gauges.
pub const LATEST: &str = "latest";

/// Every family of the monitor.
pub struct Exposition {
    registry: Registry,
    values: Vec<GaugeVec>,
    labels: Vec<String>,
    latency: [HistogramVec; 2],
    interarrival: [HistogramVec; 2],
    messages: IntCounterVec,
    rejected: [IntCounterVec; 2],
    dropped: IntCounterVec,
    regressions: IntCounterVec,
    alerts: IntCounterVec,
    active: GaugeVec,
    steps: IntCounterVec,
    collisions: IntGauge,
    ingest: prometheus::Histogram,
    queue: IntGauge,
    seen: Vec<[u64; 4]>,
    steps_seen: [u64; 5],
}

fn must<T>(r: prometheus::Result<T>) -> T {
    // Registration fails only for a duplicate or malformed name, which a test rules out.
    r.expect("metric family registers")
}

impl Exposition {
    /// Registers every family.
    pub fn new(cfg: &Config) -> Exposition {
        let registry = Registry::new();
        let mut values = Vec::new();
        for m in Metric::ALL {
            let opts =
                Opts::new(prom_name(m), format!("{}: {}", m.name(), crate::metrics::catalog::row(m).meaning));
            let g = must(GaugeVec::new(opts, &["role", "window", "stat"]));
            must(registry.register(Box::new(g.clone())));
            values.push(g);
        }
        let buckets = prometheus::exponential_buckets(0.0005, 2.0, 16).expect("valid buckets");
        let hist = |name: &str, help: &str| {
            let h =
                must(HistogramVec::new(HistogramOpts::new(name, help).buckets(buckets.clone()), &["role"]));
            must(registry.register(Box::new(h.clone())));
            h
        };
        let old = |new: &str| RENAMED_FAMILIES.iter().find(|(_, n)| *n == new).map_or("", |(o, _)| *o);
        let (lat, gap) = (prom_histogram_name(Metric::Latency), prom_histogram_name(Metric::Interarrival));
        let latency = [
            hist(&lat, "latency: receive time minus stamp, per role"),
            hist(old(&lat), &format!("deprecated: the old name of {lat}")),
        ];
        let interarrival = [
            hist(&gap, "interarrival: time between receipts, per role"),
            hist(old(&gap), &format!("deprecated: the old name of {gap}")),
        ];
        let counter = |name: &str, help: &str, labels: &[&str]| {
            let c = must(IntCounterVec::new(Opts::new(name, help), labels));
            must(registry.register(Box::new(c.clone())));
            c
        };
        let messages = counter("plumbline_messages_total", "messages accepted per role", &["role"]);
        let rejected = [
            counter(
                "plumbline_rejected_total",
                "messages rejected (decoding or validation) per role",
                &["role"],
            ),
            counter(
                old("plumbline_rejected_total"),
                "deprecated: the old name of plumbline_rejected_total",
                &["role"],
            ),
        ];
        let dropped =
            counter("plumbline_dropped_total", "messages dropped by a full queue per role", &["role"]);
        let regressions = counter(
            "plumbline_stamp_regressions_total",
            "stamps older than the previous per role",
            &["role"],
        );
        let alerts = counter(
            "plumbline_alerts_total",
            "alert events (event: raised or cleared)",
            &["rule", "event", "severity"],
        );
        let steps = counter(
            "plumbline_steps_total",
            "evaluation steps (step: tracking or ego; outcome: evaluated, skipped, approximate)",
            &["step", "outcome"],
        );
        let active = must(GaugeVec::new(
            Opts::new("plumbline_alert_active", "1 while a rule is raised"),
            &["rule", "severity"],
        ));
        must(registry.register(Box::new(active.clone())));
        let collisions = must(IntGauge::new(
            "plumbline_collision_events",
            "collision events so far: stretches of overlap of the footprint with an obstacle (plumbline_collision is the 0/1 flag)",
        ));
        must(registry.register(Box::new(collisions.clone())));
        let queue = must(IntGauge::new("plumbline_queue_length", "messages waiting for the engine"));
        must(registry.register(Box::new(queue.clone())));
        let ingest = must(prometheus::Histogram::with_opts(
            HistogramOpts::new("plumbline_ingest_seconds", "receipt of a message to its gauges being set")
                .buckets(prometheus::exponential_buckets(0.00001, 2.0, 18).expect("valid buckets")),
        ));
        must(registry.register(Box::new(ingest.clone())));
        let mut labels = cfg.window_labels.clone();
        labels.push("run".into());
        Exposition {
            registry,
            values,
            labels,
            latency,
            interarrival,
            messages,
            rejected,
            dropped,
            regressions,
            alerts,
            active,
            steps,
            collisions,
            ingest,
            queue,
            seen: vec![[0; 4]; Role::ALL.len()],
            steps_seen: [0; 5],
        }
    }

    /// Takes one sample at once: the latest-sample gauge (`window="latest"`, `stat="last"`:
    /// the span of the one latest sample, and its value) and, for latency and interarrival,
    /// the per-role histogram.
    pub fn sample(&self, s: &crate::core::Sample) {
        let rl = s.role.map_or("", Role::name);
        self.values[s.metric as usize].with_label_values(&[rl, LATEST, "last"]).set(s.value);
        let hists = match (s.metric, s.role) {
            (Metric::Latency, Some(r)) => Some((&self.latency, r)),
            (Metric::Interarrival, Some(r)) => Some((&self.interarrival, r)),
            _ => None,
        };
        if let Some((pair, r)) = hists {
            for h in pair {
                h.with_label_values(&[r.name()]).observe(s.value);
            }
        }
    }

    /// Observes the time from a message's receipt to its gauges being set (s).
    pub fn ingest(&self, seconds: f64) {
        self.ingest.observe(seconds);
    }

    /// Counts alert events.
    pub fn alert(&self, e: &AlertEvent) {
        self.alerts.with_label_values(&[&e.rule, e.kind.name(), e.severity.name()]).inc();
    }

    /// Sets the queue length gauge.
    pub fn queue_len(&self, n: usize) {
        self.queue.set(n as i64);
    }

    /// Copies the monitor's windows, run statistics and counters into the families.
    pub fn refresh(&mut self, monitor: &Monitor) {
        let lengths = monitor.windows.lengths().len();
        for m in Metric::ALL {
            let roles: Vec<Option<Role>> =
                std::iter::once(None).chain(Role::ALL.iter().map(|&r| Some(r))).collect();
            for role in roles {
                let Some(ws) = monitor.windows.get(m, role) else { continue };
                let rl = role.map_or("", Role::name);
                for (i, w) in ws.iter().enumerate().take(lengths) {
                    let Some(st) = w.stats() else { continue };
                    for s in [
                        Stat::Count,
                        Stat::Mean,
                        Stat::Min,
                        Stat::Max,
                        Stat::P50,
                        Stat::P95,
                        Stat::P99,
                        Stat::Last,
                    ] {
                        self.values[m as usize]
                            .with_label_values(&[rl, &self.labels[i], s.name()])
                            .set(st.get(s));
                    }
                }
                if let Some((count, mean, min, max)) = monitor.stats.basic(m, role) {
                    let g = &self.values[m as usize];
                    for (s, v) in [("count", count as f64), ("mean", mean), ("min", min), ("max", max)] {
                        g.with_label_values(&[rl, "run", s]).set(v);
                    }
                }
            }
        }
        for r in Role::ALL {
            let t = monitor.engine.transport(r);
            let now_vals = [t.messages, t.rejected, t.dropped, t.stamp_regressions];
            let fams: [&[IntCounterVec]; 4] = [
                std::slice::from_ref(&self.messages),
                &self.rejected,
                std::slice::from_ref(&self.dropped),
                std::slice::from_ref(&self.regressions),
            ];
            for k in 0..4 {
                let d = now_vals[k].saturating_sub(self.seen[r.index()][k]);
                if d > 0 {
                    for f in fams[k] {
                        f.with_label_values(&[r.name()]).inc_by(d);
                    }
                }
            }
            self.seen[r.index()] = now_vals;
        }
        let c = monitor.engine.counters();
        let vals = [
            c.tracking.evaluated,
            c.tracking.skipped,
            c.ego.evaluated,
            c.ego.skipped,
            c.tracking.approximate,
        ];
        let labels = [
            ("tracking", "evaluated"),
            ("tracking", "skipped"),
            ("ego", "evaluated"),
            ("ego", "skipped"),
            // Of the evaluated tracking steps, those assigned greedily (upper bounds).
            ("tracking", "approximate"),
        ];
        for k in 0..vals.len() {
            let d = vals[k].saturating_sub(self.steps_seen[k]);
            if d > 0 {
                self.steps.with_label_values(&[labels[k].0, labels[k].1]).inc_by(d);
            }
        }
        self.steps_seen = vals;
        for (i, r) in monitor.rules.rules().iter().enumerate() {
            self.active.with_label_values(&[&r.name, r.severity.name()]).set(if monitor.rules.is_raised(i) {
                1.0
            } else {
                0.0
            });
        }
        let (cols, dropped) = monitor.engine.collisions();
        self.collisions.set(cols.len() as i64 + dropped as i64);
    }

    /// The text exposition.
    pub fn text(&self) -> String {
        let mut buf = Vec::new();
        let _ = TextEncoder::new().encode(&self.registry.gather(), &mut buf);
        String::from_utf8(buf).unwrap_or_default()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_family_registers_and_names_follow_conventions() {
        let x = Exposition::new(&Config::defaults());
        assert_eq!(prom_name(Metric::EgoPositionError), "plumbline_ego_position_error_meters");
        assert_eq!(prom_name(Metric::Latency), "plumbline_latency_seconds");
        assert_eq!(prom_name(Metric::Gospa), "plumbline_gospa_meters");
        assert_eq!(prom_name(Metric::LateralAccel), "plumbline_lateral_accel_meters_per_second_squared");
        assert_eq!(prom_name(Metric::MissedCount), "plumbline_missed_objects");
        assert!(x.text().is_empty() || x.text().contains("plumbline_"));
        assert_eq!(prom_histogram_name(Metric::Latency), "plumbline_latency_distribution_seconds");
        assert_eq!(prom_histogram_name(Metric::Interarrival), "plumbline_interarrival_distribution_seconds");
    }

    #[test]
    fn renamed_families_are_exported_under_both_names() {
        let x = Exposition::new(&Config::defaults());
        x.sample(&crate::core::Sample {
            t: 1.0,
            metric: Metric::Latency,
            role: Some(Role::EstimateObjects),
            value: 0.01,
        });
        let text = x.text();
        for n in ["plumbline_latency_distribution_seconds", "plumbline_arrival_latency_seconds"] {
            let line = format!("{n}_count{{role=\"estimate/objects\"}} 1");
            assert!(text.lines().any(|l| l == line), "{n}: {text}");
        }
        let latest =
            "plumbline_latency_seconds{role=\"estimate/objects\",stat=\"last\",window=\"latest\"} 0.01";
        assert!(text.lines().any(|l| l == latest), "{text}");
    }
}
