//! Stage one: what the user may write, as serde structs that check only known keys and
//! right types. Every section and key is optional; stage two ([`super::resolve`]) gives
//! the defaults and checks the values.

use std::collections::BTreeMap;

use serde::Deserialize;

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
    /// `[tgospa]`
    #[serde(default)]
    pub tgospa: RawTgospa,
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

/// `[tgospa]`
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTgospa {
    /// compute T-GOSPA over sliding windows
    pub enabled: Option<bool>,
    /// emit a value at most this often
    pub every: Option<toml::Value>,
    /// over the tracking steps of this trailing window
    pub window: Option<toml::Value>,
    /// gamma, the switch cost (m)
    pub switch_cost_m: Option<f64>,
    /// the most variables of one linear program
    pub max_variables: Option<i64>,
    /// the most tracking steps a window holds
    pub max_steps: Option<i64>,
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
    /// a missed reference object costs this distance^p / 2 (default: the cutoff)
    pub missed_cost_m: Option<f64>,
    /// a false estimate costs this distance^p / 2 (default: the cutoff)
    pub false_cost_m: Option<f64>,
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
