//! Configuration in two stages.
//!
//! Stage one ([`RawConfig`]) is a serde struct that only checks what the user wrote: known
//! keys, right types. Sources merge in order (built-in defaults, then the TOML file, then each
//! `--set section.key=value`), and each source is checked as it is applied, so an error names
//! the source (file or `--set`), the key path and what was expected. Stage two
//! ([`Config`]) is built once everything has merged: durations become seconds and
//! parameters pass the core's validating constructors.
//!
//! No I/O here: the caller reads the file and passes its text.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use thiserror::Error;

use crate::core::{AlignParams, ClearanceParams, EgoSource, TrackingParams};
use crate::geometry::Footprint;
use crate::metrics::Metric;
use crate::msg::{Limits, Role};
use crate::rules::{Rule, RuleWindow, Severity};
use crate::stats::Stat;

/// A configuration error, naming where it came from.
#[derive(Debug, Error)]
#[error("{source_name}: {}{expected}", if key.is_empty() { String::new() } else { format!("key `{key}`: ") })]
pub struct ConfigError {
    /// The file name or the `--set` text.
    pub source_name: String,
    /// Dotted key path (empty for a whole-file syntax error).
    pub key: String,
    /// What was wrong and what was expected.
    pub expected: String,
}

fn err(source: &str, key: &str, expected: impl Into<String>) -> ConfigError {
    ConfigError { source_name: source.to_string(), key: key.to_string(), expected: expected.into() }
}

/// Stage one: what the user may write. Every section and key is optional.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawConfig {
    /// role name -> key expression
    #[serde(default)]
    pub roles: BTreeMap<String, String>,
    /// `[tracking]`
    #[serde(default)]
    pub tracking: RawTracking,
    /// `[time]`
    #[serde(default)]
    pub time: RawTime,
    /// `[vehicle]`
    #[serde(default)]
    pub vehicle: RawVehicle,
    /// `[http]`
    #[serde(default)]
    pub http: RawHttp,
    /// `[limits]`
    #[serde(default)]
    pub limits: RawLimits,
    /// `[report]`
    #[serde(default)]
    pub report: RawReport,
    /// `[monitor]`
    #[serde(default)]
    pub monitor: RawMonitor,
    /// `[clearance]`
    #[serde(default)]
    pub clearance: RawClearance,
    /// `[path]`
    #[serde(default)]
    pub path: RawPath,
    /// `[windows]`
    #[serde(default)]
    pub windows: RawWindows,
    /// `[zenoh]`
    #[serde(default)]
    pub zenoh: RawZenoh,
    /// `[live]`
    #[serde(default)]
    pub live: RawLive,
    /// `[dashboard]`
    #[serde(default)]
    pub dashboard: RawDashboard,
    /// `[[rule]]`
    #[serde(default)]
    pub rule: Vec<RawRule>,
    /// `[[gate]]`
    #[serde(default)]
    pub gate: Vec<RawGate>,
}

/// One `[[gate]]`: a gated statistic.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawGate {
    /// metric name
    pub metric: String,
    /// statistic (default mean)
    pub stat: Option<String>,
    /// "higher" or "lower": which way is worse
    pub worse: String,
    /// absolute tolerance
    pub abs: Option<f64>,
    /// relative tolerance
    pub rel: Option<f64>,
}

/// `[clearance]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawClearance {
    /// radius of reference objects without a size (m)
    pub object_radius_m: Option<f64>,
    /// densification step of planned paths (m)
    pub path_step_m: Option<f64>,
    /// the margin the planner must keep (m)
    pub planner_margin_m: Option<f64>,
    /// site-map file (ObstacleSet JSON)
    pub map_file: Option<String>,
}

/// `[path]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawPath {
    /// arc length of the chord-deviation window (m)
    pub deviation_window_m: Option<f64>,
    /// occupancy grid resolution (m)
    pub grid_m: Option<f64>,
    /// grid margin around the path (m)
    pub grid_margin_m: Option<f64>,
    /// largest grid (cells)
    pub max_grid_cells: Option<i64>,
    /// evaluate the length excess at most this often
    pub excess_every: Option<toml::Value>,
}

/// `[zenoh]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawZenoh {
    /// "peer" or "client"
    pub mode: Option<String>,
    /// endpoints to connect to
    pub connect: Option<Vec<String>>,
    /// endpoints to listen on
    pub listen: Option<Vec<String>>,
    /// multicast scouting on or off
    pub multicast_scouting: Option<bool>,
    /// the interface multicast scouting uses ("auto": zenoh's choice, beyond the machine)
    pub multicast_interface: Option<String>,
    /// a zenoh config file passed through (TLS, access control)
    pub config_file: Option<String>,
}

/// `[live]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawLive {
    /// capacity of the queue from the subscriptions to the engine
    pub queue: Option<i64>,
    /// objects (and obstacles, and path poses) the queue may hold at once
    pub queue_objects: Option<i64>,
    /// how often the clock advances the engine when no message arrives
    pub tick: Option<toml::Value>,
    /// how often the exposition refreshes its gauges
    pub refresh: Option<toml::Value>,
    /// how often the recorder flushes
    pub flush: Option<toml::Value>,
    /// how long the engine may make no progress while messages wait before /healthz fails
    pub stall_after: Option<toml::Value>,
}

/// `[dashboard]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawDashboard {
    /// snapshots streamed per second
    pub rate_hz: Option<f64>,
    /// chart history
    pub history: Option<toml::Value>,
    /// time between chart rows
    pub chart_interval: Option<toml::Value>,
    /// age beyond which a value or role shows as stale
    pub stale_after: Option<toml::Value>,
}

/// `[windows]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawWindows {
    /// sliding window lengths
    pub lengths: Option<Vec<toml::Value>>,
    /// sub-buckets per window
    pub buckets: Option<i64>,
}

/// One `[[rule]]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRule {
    /// unique name
    pub name: String,
    /// metric name (SPEC §5)
    pub metric: String,
    /// a duration or "run"
    pub window: toml::Value,
    /// count, mean, min, max, p50, p95, p99, last
    pub stat: String,
    /// fails above this
    pub above: Option<f64>,
    /// fails below this
    pub below: Option<f64>,
    /// how long the condition must hold before raising
    pub sustain: Option<toml::Value>,
    /// how long it must be false before clearing
    pub clear_after: Option<toml::Value>,
    /// info, warning or critical
    pub severity: Option<String>,
    /// role filter
    pub role: Option<String>,
    /// judge |value| (with stat max or last)
    pub magnitude: Option<bool>,
    /// values needed before the statistic is judged
    pub min_values: Option<i64>,
    /// a run without data for this rule passes it
    pub allow_no_data: Option<bool>,
}

/// `[tracking]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTracking {
    /// cutoff c (m)
    pub cutoff_m: Option<f64>,
    /// order p
    pub order: Option<f64>,
    /// GOSPA alpha
    pub alpha: Option<f64>,
    /// evaluation radius around the reference ego (m), 0 = unlimited
    pub region_radius_m: Option<f64>,
    /// which ego pose transforms ego-frame object sets
    pub ego_frame_source: Option<String>,
    /// forget a reference or estimate id unseen this long
    pub forget_after: Option<toml::Value>,
}

/// `[time]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTime {
    /// how long a step waits for a reference at or after its stamp
    pub max_wait: Option<toml::Value>,
    /// how old the last reference before a step may be on fallback
    pub tolerance: Option<toml::Value>,
    /// how much history the reference buffers keep behind the oldest open step
    pub reference_history: Option<toml::Value>,
}

/// `[vehicle]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawVehicle {
    /// footprint length (m)
    pub length: Option<f64>,
    /// footprint width (m)
    pub width: Option<f64>,
    /// distance from the pose origin back to the rear edge (m)
    pub origin_to_rear: Option<f64>,
}

/// `[http]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawHttp {
    /// listen address
    pub listen: Option<String>,
    /// file holding the bearer token the data endpoints require
    pub token_file: Option<String>,
    /// requests per second per client address
    pub requests_per_s: Option<f64>,
    /// requests a client may make at once above that rate
    pub burst: Option<i64>,
    /// event streams open at once
    pub max_streams: Option<i64>,
    /// largest request (header and body) accepted, bytes
    pub max_request_bytes: Option<i64>,
    /// connections open at once
    pub max_connections: Option<i64>,
    /// how long a client may take to send a request's header, and a kept-alive
    /// connection may stay idle
    pub header_timeout: Option<toml::Value>,
}

/// `[limits]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawLimits {
    /// largest object count in one message
    pub max_objects: Option<i64>,
    /// steps that may wait for their reference at once
    pub pending_steps: Option<i64>,
    /// messages kept per reference buffer
    pub buffer_messages: Option<i64>,
    /// largest coordinate magnitude (m)
    pub max_coordinate_m: Option<f64>,
    /// largest object or obstacle size (m)
    pub max_size_m: Option<f64>,
    /// largest speed (m/s)
    pub max_speed_mps: Option<f64>,
    /// largest stamp or recv magnitude (s)
    pub max_stamp_s: Option<f64>,
    /// how far a message may run ahead of the arrival clock
    pub max_stamp_lead_s: Option<toml::Value>,
    /// most points of a densified plan
    pub max_plan_points: Option<i64>,
    /// largest assignment component solved exactly (rows x columns)
    pub exact_assignment_cells: Option<i64>,
}

/// `[report]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawReport {
    /// values per metric kept for exact percentiles before switching to a histogram
    pub exact_values: Option<i64>,
    /// significant digits of the fallback histogram
    pub histogram_digits: Option<i64>,
}

/// `[monitor]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawMonitor {
    /// key prefix for the monitor's own publications
    pub prefix: Option<String>,
}

/// The loopback interface's name, where discovery stays by default.
pub const LOOPBACK_INTERFACE: &str = if cfg!(target_os = "macos") { "lo0" } else { "lo" };

/// Stage two: the resolved configuration.
#[derive(Debug, Clone, Serialize)]
pub struct Config {
    /// key expression per role, indexed by [`Role::index`]
    pub roles: Vec<(Role, String)>,
    /// tracking parameters
    pub tracking: TrackingParams,
    /// alignment parameters
    pub align: AlignParams,
    /// clearance and path parameters (the ego footprint among them)
    pub clearance: ClearanceParams,
    /// site-map file to load before the input, if any
    pub map_file: Option<String>,
    /// HTTP listen address
    pub http_listen: String,
    /// HTTP access and limits (serving only: not part of the digest)
    #[serde(skip)]
    pub http: HttpParams,
    /// message size and plausibility limits
    pub limits: Limits,
    /// report percentile settings
    pub report: crate::stats::StatsParams,
    /// key prefix for the monitor's publications
    pub prefix: String,
    /// sliding window lengths (s), configured ones first, then any a rule adds
    pub windows: Vec<f64>,
    /// their labels as written (`10s`)
    pub window_labels: Vec<String>,
    /// sub-buckets per window
    pub window_buckets: usize,
    /// the rules
    pub rules: Vec<Rule>,
    /// zenoh session settings
    pub zenoh: ZenohParams,
    /// live monitor settings
    pub live: LiveParams,
    /// dashboard settings (display only: not part of the digest)
    #[serde(skip)]
    pub dashboard: crate::dashboard::DashboardParams,
    /// gated statistics (empty: the defaults of `gate::default_tolerances`)
    pub gate: Vec<crate::gate::Tolerance>,
    /// warnings of the load (old key names used), for the command to print
    #[serde(skip)]
    pub warnings: Vec<String>,
}

/// Zenoh session settings.
#[derive(Debug, Clone, Serialize)]
pub struct ZenohParams {
    /// "peer" (default) or "client"
    pub mode: String,
    /// endpoints to connect to
    pub connect: Vec<String>,
    /// endpoints to listen on
    pub listen: Vec<String>,
    /// multicast scouting
    pub multicast: bool,
    /// the interface multicast scouting uses: the loopback by default, so discovery
    /// stays on the machine; "auto" lets zenoh pick (the rig network)
    pub multicast_interface: String,
    /// passthrough zenoh config file
    pub config_file: Option<String>,
}

/// HTTP access and limits.
#[derive(Debug, Clone, Default, Serialize)]
pub struct HttpParams {
    /// file holding the bearer token the data endpoints require (none: open on the bound address)
    pub token_file: Option<String>,
    /// requests per second per client address (a token bucket)
    pub requests_per_s: f64,
    /// the bucket's depth
    pub burst: usize,
    /// event streams open at once; more are refused with 503
    pub max_streams: usize,
    /// largest request accepted (declared body, and header bytes), beyond: 413 or 431
    pub max_request_bytes: usize,
    /// connections open at once (also kept below the process's open-file limit); a
    /// connection beyond is closed at once
    pub max_connections: usize,
    /// time a client has to send a request's header; an idle kept-alive connection is
    /// closed after it too (s)
    pub header_timeout: f64,
}

/// Live monitor settings.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct LiveParams {
    /// queue capacity (messages); when full, the newest message is dropped and counted
    pub queue: usize,
    /// queue capacity in objects (a message counts its objects, obstacles or path poses,
    /// at least 1): the memory bound when messages are large
    pub queue_objects: usize,
    /// engine clock tick (s)
    pub tick: f64,
    /// gauge refresh period (s)
    pub refresh: f64,
    /// recorder flush period (s)
    pub flush: f64,
    /// `/healthz` turns unhealthy when the engine has made no progress this long (s) while
    /// messages wait in its queue
    pub stall_after: f64,
}

impl Config {
    /// Built-in defaults (SPEC §7).
    pub fn defaults() -> Config {
        Config::build(&RawConfig::default(), "built-in defaults").expect("built-in defaults are valid")
    }

    /// Merges the sources and resolves. `file` is (name, text).
    pub fn load(file: Option<(&str, &str)>, sets: &[String]) -> Result<Config, ConfigError> {
        let mut table = toml::Table::new();
        let mut warnings = Vec::new();
        let mut last_source = "built-in defaults".to_string();
        if let Some((name, text)) = file {
            table = text.parse::<toml::Table>().map_err(|e| {
                let at = e
                    .span()
                    .map(|s| line_col(text, s.start))
                    .map(|(l, c)| format!(" at line {l}, column {c}"));
                err(name, "", format!("not valid TOML{}: {}", at.unwrap_or_default(), e.message().trim()))
            })?;
            warnings.extend(migrate(&mut table, name)?);
            check_raw(&table, name).map_err(|e| annotate(e, &table))?;
            last_source = name.to_string();
        }
        for s in sets {
            let label = format!("--set {s}");
            // An old key name set here means the new one, and overrides what came before.
            let set = match s.split_once('=') {
                Some((k, v)) if current_key(k.trim()) != k.trim() => {
                    let new = current_key(k.trim());
                    warnings.push(format!(
                        "{label}: `{}` is now `{new}`; the old name goes in the next release",
                        k.trim()
                    ));
                    format!("{new}={v}")
                }
                _ => s.clone(),
            };
            apply_set(&mut table, &set).map_err(|e| err(&label, &e.0, e.1))?;
            check_raw(&table, &label).map_err(|e| annotate(e, &table))?;
            last_source = label;
        }
        let raw = check_raw(&table, &last_source).map_err(|e| annotate(e, &table))?;
        let mut cfg = Config::build(&raw, &last_source).map_err(|e| annotate(e, &table))?;
        cfg.warnings = warnings;
        Ok(cfg)
    }

    /// Stage two: resolves a checked raw config.
    pub fn build(raw: &RawConfig, source: &str) -> Result<Config, ConfigError> {
        let mut roles = Vec::new();
        for (name, key) in &raw.roles {
            let role = Role::from_name(name).ok_or_else(|| {
                let names: Vec<_> = Role::ALL.iter().map(|r| r.name()).collect();
                err(source, &format!("roles.{name}"), format!("a role, one of {}", names.join(", ")))
            })?;
            if key.is_empty() {
                return Err(err(source, &format!("roles.{name}"), "a non-empty key expression"));
            }
            roles.push((role, key.clone()));
        }
        for r in Role::ALL {
            if !roles.iter().any(|(q, _)| *q == r) {
                roles.push((r, format!("rig/{}", r.name())));
            }
        }
        roles.sort();

        let t = &raw.tracking;
        let ego_source = match t.ego_frame_source.as_deref().unwrap_or("reference") {
            "reference" => EgoSource::Reference,
            "estimate" => EgoSource::Estimate,
            other => {
                return Err(err(
                    source,
                    "tracking.ego_frame_source",
                    format!("\"reference\" or \"estimate\", found \"{other}\""),
                ))
            }
        };
        let forget_after = duration(source, "tracking.forget_after", &t.forget_after, 300.0)?;
        let mut tracking = TrackingParams::try_new(
            t.cutoff_m.unwrap_or(2.0),
            t.order.unwrap_or(1.0),
            t.alpha.unwrap_or(2.0),
            t.region_radius_m.unwrap_or(0.0),
            ego_source,
            forget_after,
        )
        .map_err(|e| err(source, &format!("tracking.{}", e.key), e.expected))?;

        let tm = &raw.time;
        let max_objects = count(source, "limits.max_objects", raw.limits.max_objects, 10_000)?;
        let mut align = AlignParams::try_new(
            duration(source, "time.max_wait", &tm.max_wait, 0.5)?,
            duration(source, "time.tolerance", &tm.tolerance, 0.1)?,
            duration(source, "time.reference_history", &tm.reference_history, 2.0)?,
            count(source, "limits.pending_steps", raw.limits.pending_steps, 4096)?,
            count(source, "limits.buffer_messages", raw.limits.buffer_messages, 4096)?,
        )
        .map_err(|e| err(source, &e.key, e.expected))?;
        let rl = &raw.limits;
        align.max_stamp_lead =
            duration(source, "limits.max_stamp_lead_s", &rl.max_stamp_lead_s, crate::core::MAX_STAMP_LEAD)?;
        if align.max_stamp_lead <= 0.0 {
            return Err(err(source, "limits.max_stamp_lead_s", "a duration > 0"));
        }
        tracking.exact_cells = count(
            source,
            "limits.exact_assignment_cells",
            rl.exact_assignment_cells,
            crate::core::EXACT_CELLS,
        )?;

        let v = &raw.vehicle;
        let footprint = Footprint {
            length: positive(source, "vehicle.length", v.length, 4.0)?,
            width: positive(source, "vehicle.width", v.width, 1.8)?,
            origin_to_rear: v.origin_to_rear.unwrap_or(1.0),
        };
        if !footprint.origin_to_rear.is_finite() {
            return Err(err(source, "vehicle.origin_to_rear", "a finite number of metres"));
        }
        let (c, p) = (&raw.clearance, &raw.path);
        let clearance = ClearanceParams {
            footprint,
            object_radius: positive(source, "clearance.object_radius_m", c.object_radius_m, 0.5)?,
            path_step: positive(source, "clearance.path_step_m", c.path_step_m, 0.5)?,
            inflation: nonneg(source, "clearance.planner_margin_m", c.planner_margin_m, 0.5)?,
            deviation_window: positive(source, "path.deviation_window_m", p.deviation_window_m, 10.0)?,
            grid_res: positive(source, "path.grid_m", p.grid_m, 0.2)?,
            grid_margin: nonneg(source, "path.grid_margin_m", p.grid_margin_m, 10.0)?,
            max_grid_cells: count(source, "path.max_grid_cells", p.max_grid_cells, 2_000_000)?,
            excess_every: duration(source, "path.excess_every", &p.excess_every, 1.0)?,
        };
        let dl = Limits::default();
        let limits = Limits {
            max_objects,
            max_coordinate: bound(
                source,
                "limits.max_coordinate_m",
                rl.max_coordinate_m,
                dl.max_coordinate,
                "m",
            )?,
            max_size: bound(source, "limits.max_size_m", rl.max_size_m, dl.max_size, "m")?,
            max_speed: bound(source, "limits.max_speed_mps", rl.max_speed_mps, dl.max_speed, "m/s")?,
            max_stamp: bound(source, "limits.max_stamp_s", rl.max_stamp_s, dl.max_stamp, "s")?,
            max_plan_points: count(source, "limits.max_plan_points", rl.max_plan_points, dl.max_plan_points)?,
            plan_step: clearance.path_step,
        };
        let http_listen = raw.http.listen.clone().unwrap_or_else(|| "127.0.0.1:21847".into());
        if http_listen.parse::<std::net::SocketAddr>().is_err() {
            return Err(err(source, "http.listen", "an address such as \"127.0.0.1:21847\""));
        }
        let h = &raw.http;
        let http = HttpParams {
            token_file: h.token_file.clone(),
            requests_per_s: positive(source, "http.requests_per_s", h.requests_per_s, 50.0)?,
            burst: count(source, "http.burst", h.burst, 100)?,
            max_streams: count(source, "http.max_streams", h.max_streams, 16)?,
            max_request_bytes: count(source, "http.max_request_bytes", h.max_request_bytes, 16_384)?,
            max_connections: count(source, "http.max_connections", h.max_connections, 256)?,
            header_timeout: duration(source, "http.header_timeout", &h.header_timeout, 10.0)?,
        };
        if http.header_timeout <= 0.0 {
            return Err(err(source, "http.header_timeout", "a duration > 0"));
        }
        if h.token_file.as_deref().is_some_and(|f| f.trim().is_empty()) {
            return Err(err(source, "http.token_file", "a path to a file holding the token"));
        }
        let digits = count(source, "report.histogram_digits", raw.report.histogram_digits, 3)?;
        if !(1..=5).contains(&digits) {
            return Err(err(source, "report.histogram_digits", "a whole number from 1 to 5"));
        }
        let report = crate::stats::StatsParams {
            exact_values: count(source, "report.exact_values", raw.report.exact_values, 200_000)?,
            histogram_digits: digits as u8,
        };
        let prefix = raw.monitor.prefix.clone().unwrap_or_else(|| "rig".into());
        let (mut windows, mut window_labels) = (Vec::new(), Vec::new());
        let default_lengths = ["1s", "10s", "60s"].map(|s| toml::Value::String(s.into()));
        let lengths = raw.windows.lengths.as_deref().unwrap_or(&default_lengths);
        for (i, v) in lengths.iter().enumerate() {
            let key = format!("windows.lengths[{i}]");
            let l = duration(source, &key, &Some(v.clone()), 0.0)?;
            if l <= 0.0 {
                return Err(err(source, &key, "a duration > 0"));
            }
            windows.push(l);
            window_labels.push(v.as_str().unwrap_or_default().to_string());
        }
        let window_buckets = count(source, "windows.buckets", raw.windows.buckets, 10)?;
        if window_buckets > 1000 {
            return Err(err(source, "windows.buckets", "a whole number from 1 to 1000"));
        }
        let z = &raw.zenoh;
        let mode = z.mode.clone().unwrap_or_else(|| "peer".into());
        if mode != "peer" && mode != "client" {
            return Err(err(source, "zenoh.mode", format!("\"peer\" or \"client\", found \"{mode}\"")));
        }
        let zenoh = ZenohParams {
            mode,
            connect: z.connect.clone().unwrap_or_default(),
            listen: z.listen.clone().unwrap_or_default(),
            multicast: z.multicast_scouting.unwrap_or(true),
            multicast_interface: z.multicast_interface.clone().unwrap_or_else(|| LOOPBACK_INTERFACE.into()),
            config_file: z.config_file.clone(),
        };
        let l = &raw.live;
        let live = LiveParams {
            queue: count(source, "live.queue", l.queue, 65_536)?,
            queue_objects: count(source, "live.queue_objects", l.queue_objects, 500_000)?,
            tick: duration(source, "live.tick", &l.tick, 0.05)?,
            refresh: duration(source, "live.refresh", &l.refresh, 0.2)?,
            flush: duration(source, "live.flush", &l.flush, 0.1)?,
            stall_after: duration(source, "live.stall_after", &l.stall_after, 5.0)?,
        };
        if live.stall_after <= 0.0 {
            return Err(err(source, "live.stall_after", "a duration > 0"));
        }
        if live.flush > 0.1 {
            return Err(err(
                source,
                "live.flush",
                "a duration of at most 100ms (the recorder's crash-safety bound)",
            ));
        }
        let d = &raw.dashboard;
        let def = crate::dashboard::DashboardParams::default();
        let dashboard = crate::dashboard::DashboardParams {
            rate_hz: positive(source, "dashboard.rate_hz", d.rate_hz, def.rate_hz)?,
            history: duration(source, "dashboard.history", &d.history, def.history)?,
            step: duration(source, "dashboard.chart_interval", &d.chart_interval, def.step)?,
            stale_after: duration(source, "dashboard.stale_after", &d.stale_after, def.stale_after)?,
        };
        if dashboard.rate_hz > 50.0 {
            return Err(err(source, "dashboard.rate_hz", "a rate in (0, 50] snapshots per second"));
        }
        if dashboard.step <= 0.0 || dashboard.history <= 0.0 || dashboard.stale_after <= 0.0 {
            return Err(err(
                source,
                "dashboard.chart_interval",
                "durations > 0 for history, chart_interval and stale_after",
            ));
        }
        if dashboard.history / dashboard.step > 10_000.0 {
            return Err(err(source, "dashboard.history", "at most 10000 rows of dashboard.chart_interval"));
        }
        let mut gate = Vec::new();
        for (i, g) in raw.gate.iter().enumerate() {
            let key = |k: &str| format!("gate[{i}].{k}");
            if Metric::from_name(&g.metric).is_none() {
                return Err(err(source, &key("metric"), format!("a metric name; found \"{}\"", g.metric)));
            }
            let stat = g.stat.clone().unwrap_or_else(|| "mean".into());
            if !["count", "mean", "min", "max", "p50", "p95", "p99", "sum"].contains(&stat.as_str()) {
                return Err(err(source, &key("stat"), "one of count, mean, min, max, p50, p95, p99, sum"));
            }
            let worse = match g.worse.as_str() {
                "higher" => crate::gate::Worse::Higher,
                "lower" => crate::gate::Worse::Lower,
                w => {
                    return Err(err(source, &key("worse"), format!("\"higher\" or \"lower\", found \"{w}\"")))
                }
            };
            let (abs, rel) = (g.abs.unwrap_or(0.0), g.rel.unwrap_or(0.0));
            if !(abs.is_finite() && abs >= 0.0 && rel.is_finite() && rel >= 0.0) {
                return Err(err(source, &key("abs"), "tolerances >= 0"));
            }
            gate.push(crate::gate::Tolerance { metric: g.metric.clone(), stat, worse, abs, rel });
        }
        let mut rules = Vec::new();
        for (i, r) in raw.rule.iter().enumerate() {
            let rule = build_rule(source, i, r, &mut windows, &mut window_labels).map_err(|mut e| {
                e.expected = format!("rule \"{}\": {}", r.name, e.expected);
                e
            })?;
            if rules.iter().any(|q: &Rule| q.name == rule.name) {
                let why = format!("a unique name; \"{}\" is used twice", rule.name);
                return Err(err(source, &format!("rule[{i}].name"), why));
            }
            rules.push(rule);
        }
        Ok(Config {
            roles,
            tracking,
            align,
            clearance,
            map_file: raw.clearance.map_file.clone(),
            http_listen,
            http,
            limits,
            report,
            prefix,
            windows,
            window_labels,
            window_buckets,
            rules,
            zenoh,
            live,
            dashboard,
            gate,
            warnings: Vec::new(),
        })
    }

    /// The monitor's parameters.
    pub fn monitor(&self) -> crate::monitor::MonitorParams {
        crate::monitor::MonitorParams {
            tracking: self.tracking,
            align: self.align,
            clearance: self.clearance,
            windows: self.windows.clone(),
            window_buckets: self.window_buckets,
            rules: self.rules.clone(),
            stats: self.report,
        }
    }

    /// What the log readers and writers need of this config.
    pub fn log(&self) -> crate::logio::LogParams {
        crate::logio::LogParams { roles: self.roles.clone(), limits: self.limits }
    }

    /// What a report says of this config.
    pub fn report_settings(&self) -> crate::report::ReportSettings {
        crate::report::ReportSettings {
            config_digest: self.digest(),
            definitions: self.definitions(),
            stats: self.report,
        }
    }

    /// Message validation limits.
    pub fn limits(&self) -> Limits {
        self.limits
    }

    /// The key expression bound to a role.
    pub fn key_of(&self, role: Role) -> &str {
        self.roles.iter().find(|(r, _)| *r == role).map(|(_, k)| k.as_str()).unwrap_or("")
    }

    /// The role bound to an exact key, if any.
    pub fn role_of(&self, key: &str) -> Option<Role> {
        self.roles.iter().find(|(_, k)| k == key).map(|(r, _)| *r)
    }

    /// The settings that define what a metric means, by their config keys: two reports
    /// whose definitions differ measure different things, and the gate refuses to compare
    /// them unless told the change is intended. (Windows, rules and serving settings
    /// change how values are judged or shown, not what they are.)
    pub fn definitions(&self) -> std::collections::BTreeMap<&'static str, serde_json::Value> {
        use serde_json::json;
        let (t, a, c) = (&self.tracking, &self.align, &self.clearance);
        let source = match t.ego_source {
            EgoSource::Reference => "reference",
            EgoSource::Estimate => "estimate",
        };
        [
            ("tracking.cutoff_m", json!(t.cutoff)),
            ("tracking.order", json!(t.order)),
            ("tracking.alpha", json!(t.alpha)),
            ("tracking.region_radius_m", json!(t.region)),
            ("tracking.ego_frame_source", json!(source)),
            ("tracking.forget_after", json!(t.forget_after)),
            ("time.max_wait", json!(a.max_wait)),
            ("time.tolerance", json!(a.tolerance)),
            ("vehicle.length", json!(c.footprint.length)),
            ("vehicle.width", json!(c.footprint.width)),
            ("vehicle.origin_to_rear", json!(c.footprint.origin_to_rear)),
            ("clearance.object_radius_m", json!(c.object_radius)),
            ("clearance.path_step_m", json!(c.path_step)),
            ("clearance.planner_margin_m", json!(c.inflation)),
            ("path.deviation_window_m", json!(c.deviation_window)),
            ("path.grid_m", json!(c.grid_res)),
            ("path.grid_margin_m", json!(c.grid_margin)),
            ("path.max_grid_cells", json!(c.max_grid_cells)),
            ("path.excess_every", json!(c.excess_every)),
            ("limits.exact_assignment_cells", json!(t.exact_cells)),
        ]
        .into_iter()
        .collect()
    }

    /// SHA-256 of the resolved config's canonical JSON form.
    pub fn digest(&self) -> String {
        let json = serde_json::to_string(self).unwrap_or_default();
        let mut h = Sha256::new();
        h.update(json.as_bytes());
        format!("sha256:{:x}", h.finalize())
    }
}

fn build_rule(
    source: &str,
    i: usize,
    r: &RawRule,
    windows: &mut Vec<f64>,
    labels: &mut Vec<String>,
) -> Result<Rule, ConfigError> {
    let key = |k: &str| format!("rule[{i}].{k}");
    let metric = Metric::from_name(&r.metric).ok_or_else(|| {
        let names: Vec<_> = Metric::ALL.iter().map(|m| m.name()).collect();
        err(source, &key("metric"), format!("a metric, one of {}; found \"{}\"", names.join(", "), r.metric))
    })?;
    let stat = Stat::from_name(&r.stat).ok_or_else(|| {
        err(source, &key("stat"), format!("one of {}; found \"{}\"", Stat::NAMES.join(", "), r.stat))
    })?;
    let (above, threshold) = match (r.above, r.below) {
        (Some(a), None) if a.is_finite() => (true, a),
        (None, Some(b)) if b.is_finite() => (false, b),
        _ => return Err(err(source, &key("above"), "exactly one of `above` or `below`, a finite number")),
    };
    let window = match &r.window {
        toml::Value::String(s) if s == "run" => RuleWindow::Run,
        v => {
            let l = duration(source, &key("window"), &Some(v.clone()), 0.0)?;
            if l <= 0.0 {
                return Err(err(source, &key("window"), "a duration > 0 or \"run\""));
            }
            let idx = match windows.iter().position(|&w| (w - l).abs() < 1e-9) {
                Some(idx) => idx,
                None => {
                    windows.push(l);
                    labels.push(v.as_str().unwrap_or_default().to_string());
                    windows.len() - 1
                }
            };
            RuleWindow::Sliding(idx)
        }
    };
    let severity = match r.severity.as_deref() {
        None => Severity::Warning,
        Some(s) => Severity::from_name(s).ok_or_else(|| {
            err(source, &key("severity"), format!("info, warning or critical; found \"{s}\""))
        })?,
    };
    let role = match r.role.as_deref() {
        None => None,
        Some(s) => Some(
            Role::from_name(s)
                .ok_or_else(|| err(source, &key("role"), format!("a role name; found \"{s}\"")))?,
        ),
    };
    if r.name.trim().is_empty() {
        return Err(err(source, &key("name"), "a non-empty name"));
    }
    let magnitude = r.magnitude.unwrap_or(false);
    if magnitude && !matches!(stat, Stat::Max | Stat::Last) {
        return Err(err(
            source,
            &key("magnitude"),
            "magnitude = true with stat \"max\" or \"last\" (the largest or the last |value|)",
        ));
    }
    if magnitude && !above {
        return Err(err(
            source,
            &key("magnitude"),
            "magnitude = true with `above` (|value| is never below 0)",
        ));
    }
    let min_values = match r.min_values {
        None => 0,
        Some(n) if n >= 0 => n as u64,
        Some(n) => return Err(err(source, &key("min_values"), format!("a whole number >= 0, found {n}"))),
    };
    Ok(Rule {
        name: r.name.clone(),
        metric,
        role,
        window_label: r.window.as_str().unwrap_or_default().to_string(),
        window,
        stat,
        above,
        threshold,
        sustain: duration(source, &key("sustain"), &r.sustain, 0.0)?,
        clear_after: duration(source, &key("clear_after"), &r.clear_after, 0.0)?,
        severity,
        magnitude,
        min_values,
        allow_no_data: r.allow_no_data.unwrap_or(false),
    })
}

/// 1-based line and column of a byte offset.
fn line_col(text: &str, at: usize) -> (usize, usize) {
    let before = &text[..at.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, col)
}

/// Says more where a key alone says little: which `[[rule]]` table (counted from 1, with
/// its name) a `rule[i]` key is, and the form a list must take.
fn annotate(mut e: ConfigError, table: &toml::Table) -> ConfigError {
    if let Some(i) =
        e.key.strip_prefix("rule[").and_then(|r| r.split(']').next()).and_then(|n| n.parse::<usize>().ok())
    {
        let name = table
            .get("rule")
            .and_then(|r| r.as_array())
            .and_then(|a| a.get(i))
            .and_then(|r| r.get("name"))
            .and_then(|n| n.as_str());
        let which = match name {
            Some(n) => format!("the [[rule]] number {} in the file, named \"{n}\"", i + 1),
            None => format!("the [[rule]] number {} in the file", i + 1),
        };
        e.expected = format!("{} ({which})", e.expected);
    }
    if e.expected.contains("expected a sequence") {
        e.expected = format!("{} (a list in brackets, e.g. lengths = [\"1s\", \"10s\"])", e.expected);
    }
    e
}

pub use crate::report::{current_key, RENAMED_KEYS};

/// Moves renamed keys to their new names, returning a warning for each old name used;
/// both names at once is an error (which one was meant cannot be known).
fn migrate(table: &mut toml::Table, source: &str) -> Result<Vec<String>, ConfigError> {
    let mut warnings = Vec::new();
    for (sec, old, new) in RENAMED_KEYS {
        let Some(toml::Value::Table(t)) = table.get_mut(sec) else { continue };
        let Some(v) = t.remove(old) else { continue };
        if t.contains_key(new) {
            return Err(err(
                source,
                &format!("{sec}.{old}"),
                format!("only one of {sec}.{old} (the old name) and {sec}.{new}"),
            ));
        }
        t.insert(new.to_string(), v);
        warnings.push(format!(
            "{source}: `{sec}.{old}` is now `{sec}.{new}`; the old name goes in the next release"
        ));
    }
    Ok(warnings)
}

fn check_raw(table: &toml::Table, source: &str) -> Result<RawConfig, ConfigError> {
    let value = toml::Value::Table(table.clone());
    serde_path_to_error::deserialize::<_, RawConfig>(value).map_err(|e| {
        let key = e.path().to_string();
        let inner = e.into_inner().to_string();
        err(source, &key, inner.trim().to_string())
    })
}

/// Applies `section.key=value`; the value is read as a TOML value, else as a string.
fn apply_set(table: &mut toml::Table, s: &str) -> Result<(), (String, String)> {
    let (path, value) =
        s.split_once('=').ok_or_else(|| (s.to_string(), "the form section.key=value".to_string()))?;
    let path = path.trim();
    let parts: Vec<&str> = if let Some(rest) = path.strip_prefix("roles.") {
        // Role names contain a slash and may be quoted: roles."estimate/objects"
        vec!["roles", rest.trim_matches('"')]
    } else {
        path.split('.').collect()
    };
    if parts.len() != 2 || parts.iter().any(|p| p.is_empty()) {
        return Err((path.to_string(), "the form section.key=value".to_string()));
    }
    let text = value.trim();
    let parsed = format!("v = {text}")
        .parse::<toml::Table>()
        .ok()
        .and_then(|mut t| t.remove("v"))
        .unwrap_or_else(|| toml::Value::String(text.to_string()));
    let section = table.entry(parts[0].to_string()).or_insert_with(|| toml::Value::Table(toml::Table::new()));
    match section {
        toml::Value::Table(t) => {
            t.insert(parts[1].to_string(), parsed);
            Ok(())
        }
        _ => Err((parts[0].to_string(), "a table".to_string())),
    }
}

/// Parses a duration string with a unit: `250us`, `500ms`, `10s`, `2m`, `1h`.
pub fn parse_duration(s: &str) -> Option<f64> {
    let s = s.trim();
    let split = s.find(|c: char| c.is_ascii_alphabetic())?;
    let (num, unit) = s.split_at(split);
    let v: f64 = num.trim().parse().ok()?;
    let scale = match unit.trim() {
        "us" => 1e-6,
        "ms" => 1e-3,
        "s" => 1.0,
        "m" | "min" => 60.0,
        "h" => 3600.0,
        _ => return None,
    };
    let out = v * scale;
    (out.is_finite() && out >= 0.0).then_some(out)
}

/// Reads a duration key: a string with a unit.
pub fn duration(source: &str, key: &str, v: &Option<toml::Value>, default: f64) -> Result<f64, ConfigError> {
    let bad = |found: String| {
        err(source, key, format!("a duration with a unit such as \"500ms\", \"10s\", \"2m\"; found {found}"))
    };
    match v {
        None => Ok(default),
        Some(toml::Value::String(s)) => parse_duration(s).ok_or_else(|| bad(format!("\"{s}\""))),
        Some(other) => Err(bad(other.to_string())),
    }
}

fn count(source: &str, key: &str, v: Option<i64>, default: usize) -> Result<usize, ConfigError> {
    match v {
        None => Ok(default),
        Some(n) if n > 0 => Ok(n as usize),
        Some(n) => Err(err(source, key, format!("a positive whole number, found {n}"))),
    }
}

fn nonneg(source: &str, key: &str, v: Option<f64>, default: f64) -> Result<f64, ConfigError> {
    match v {
        None => Ok(default),
        Some(x) if x.is_finite() && x >= 0.0 => Ok(x),
        Some(x) => Err(err(source, key, format!("a number of metres >= 0, found {x}"))),
    }
}

/// A positive finite bound in `unit`.
fn bound(source: &str, key: &str, v: Option<f64>, default: f64, unit: &str) -> Result<f64, ConfigError> {
    match v {
        None => Ok(default),
        Some(x) if x.is_finite() && x > 0.0 => Ok(x),
        Some(x) => Err(err(source, key, format!("a positive number of {unit}, found {x}"))),
    }
}

fn positive(source: &str, key: &str, v: Option<f64>, default: f64) -> Result<f64, ConfigError> {
    match v {
        None => Ok(default),
        Some(x) if x.is_finite() && x > 0.0 => Ok(x),
        Some(x) => Err(err(source, key, format!("a positive number of metres, found {x}"))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_follow_the_spec() {
        let c = Config::defaults();
        assert_eq!(c.tracking.cutoff, 2.0);
        assert_eq!(c.tracking.order, 1.0);
        assert_eq!(c.tracking.alpha, 2.0);
        assert_eq!(c.tracking.region, 0.0);
        assert_eq!(c.align.max_wait, 0.5);
        assert_eq!(c.align.tolerance, 0.1);
        assert_eq!(c.key_of(Role::EstimateObjects), "rig/estimate/objects");
        assert_eq!(c.http_listen, "127.0.0.1:21847");
    }

    #[test]
    fn unknown_key_names_file_and_key() {
        let e = Config::load(Some(("site.toml", "[tracking]\ncutoff_mm = 3.0\n")), &[]).unwrap_err();
        assert_eq!(e.source_name, "site.toml");
        assert_eq!(e.key, "tracking.cutoff_mm");
        assert!(e.expected.contains("cutoff_m"), "{e}");
    }

    #[test]
    fn wrong_type_names_key() {
        let e = Config::load(Some(("a.toml", "[tracking]\norder = \"two\"\n")), &[]).unwrap_err();
        assert_eq!(e.key, "tracking.order");
        assert!(e.expected.contains("f64") || e.expected.contains("float"), "{e}");
    }

    #[test]
    fn set_overrides_after_file_and_is_validated() {
        let c = Config::load(
            Some(("a.toml", "[tracking]\ncutoff_m = 3.0\n")),
            &["tracking.cutoff_m=5".into(), "time.max_wait=250ms".into()],
        )
        .unwrap();
        assert_eq!(c.tracking.cutoff, 5.0);
        assert_eq!(c.align.max_wait, 0.25);
        let e = Config::load(None, &["tracking.order=0.5".into()]).unwrap_err();
        assert_eq!(e.source_name, "--set tracking.order=0.5");
        assert_eq!(e.key, "tracking.order");
        let e = Config::load(None, &["tracking.alpha=3".into()]).unwrap_err();
        assert_eq!(e.key, "tracking.alpha");
        let e = Config::load(None, &["time.tolerance=10".into()]).unwrap_err();
        assert_eq!(e.key, "time.tolerance");
        assert!(e.expected.contains("unit"));
    }

    #[test]
    fn roles_rebind_and_reject_unknown() {
        let c = Config::load(None, &["roles.\"estimate/objects\"=car7/tracks".into()]).unwrap();
        assert_eq!(c.role_of("car7/tracks"), Some(Role::EstimateObjects));
        let e = Config::load(Some(("r.toml", "[roles]\n\"estimate/blobs\" = \"x\"\n")), &[]).unwrap_err();
        assert_eq!(e.key, "roles.estimate/blobs");
    }

    #[test]
    fn rules_are_validated_with_their_index() {
        let ok = "[[rule]]\nname = \"g\"\nmetric = \"gospa\"\nwindow = \"5s\"\nstat = \"mean\"\nabove = 1.0\nsustain = \"2s\"\nseverity = \"critical\"\n";
        let c = Config::load(Some(("r.toml", ok)), &[]).unwrap();
        assert_eq!(c.rules.len(), 1);
        assert_eq!(c.windows, vec![1.0, 10.0, 60.0, 5.0]);
        assert_eq!(c.rules[0].sustain, 2.0);
        let bad = ok.replace("mean", "median");
        let e = Config::load(Some(("r.toml", &bad)), &[]).unwrap_err();
        assert_eq!(e.key, "rule[0].stat");
        assert!(e.to_string().contains("rule \"g\""), "{e}");
        let bad = ok.replace("above = 1.0", "above = 1.0\nbelow = 0.5");
        assert_eq!(Config::load(Some(("r.toml", &bad)), &[]).unwrap_err().key, "rule[0].above");
        let bad = ok.replace("gospa", "gospa_total");
        assert_eq!(Config::load(Some(("r.toml", &bad)), &[]).unwrap_err().key, "rule[0].metric");
        let bad = ok.replace("\"5s\"", "5");
        assert_eq!(Config::load(Some(("r.toml", &bad)), &[]).unwrap_err().key, "rule[0].window");
        let bad = ok.replace("name = \"g\"", "nam = \"g\"");
        assert!(Config::load(Some(("r.toml", &bad)), &[]).unwrap_err().key.starts_with("rule[0]"));
    }

    #[test]
    fn durations_parse_with_units() {
        assert_eq!(parse_duration("500ms"), Some(0.5));
        assert_eq!(parse_duration("2m"), Some(120.0));
        assert_eq!(parse_duration("10 s"), Some(10.0));
        assert_eq!(parse_duration("250us"), Some(0.00025));
        assert_eq!(parse_duration("5"), None);
        assert_eq!(parse_duration("-1s"), None);
        assert_eq!(parse_duration("1 fortnight"), None);
    }

    #[test]
    fn shipped_config_loads_and_equals_defaults() {
        let text = include_str!("../config/plumbline.toml");
        let c = Config::load(Some(("config/plumbline.toml", text)), &[]).unwrap();
        let d = Config::defaults();
        assert_eq!(c.digest(), d.digest());
        // Serving settings stay out of the digest; compare them apart.
        assert_eq!(c.dashboard, d.dashboard);
        assert_eq!(serde_json::to_string(&c.http).unwrap(), serde_json::to_string(&d.http).unwrap());
    }

    #[test]
    fn old_key_names_keep_working_with_a_warning() {
        let old = "[tracking]\nregion_m = 40.0\n[clearance]\ninflation_m = 0.3\n[time]\nretain = \"3s\"\n[dashboard]\nstep = \"1s\"\n";
        let c = Config::load(Some(("old.toml", old)), &[]).unwrap();
        assert_eq!(
            (c.tracking.region, c.clearance.inflation, c.align.retain, c.dashboard.step),
            (40.0, 0.3, 3.0, 1.0)
        );
        assert_eq!(c.warnings.len(), 4, "{:?}", c.warnings);
        assert!(
            c.warnings[0].contains("`tracking.region_m` is now `tracking.region_radius_m`"),
            "{:?}",
            c.warnings
        );
        let new = "[tracking]\nregion_radius_m = 40.0\n[clearance]\nplanner_margin_m = 0.3\n[time]\nreference_history = \"3s\"\n[dashboard]\nchart_interval = \"1s\"\n";
        let n = Config::load(Some(("new.toml", new)), &[]).unwrap();
        assert_eq!(n.digest(), c.digest());
        assert!(n.warnings.is_empty());
        // --set with the old name too; both names at once is refused.
        let s = Config::load(None, &["tracking.region_m=5".into()]).unwrap();
        assert_eq!((s.tracking.region, s.warnings.len()), (5.0, 1));
        let e = Config::load(None, &["tracking.region_m=5".into(), "tracking.region_m=6".into()]).unwrap();
        assert_eq!(e.tracking.region, 6.0);
        let f = Config::load(
            Some(("f.toml", "[tracking]\nregion_radius_m = 1.0\n")),
            &["tracking.region_m=7".into()],
        );
        assert_eq!(f.unwrap().tracking.region, 7.0);
        let both = "[tracking]\nregion_m = 1.0\nregion_radius_m = 2.0\n";
        let e = Config::load(Some(("both.toml", both)), &[]).unwrap_err();
        assert_eq!((e.source_name.as_str(), e.key.as_str()), ("both.toml", "tracking.region_m"));
    }
}
