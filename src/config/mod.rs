//! Configuration in two stages.
//!
//! Stage one ([`RawConfig`]) is a serde struct that only checks what the user wrote: known
//! keys, right types. Sources merge in order (built-in defaults, then the TOML file, then each
//! `--set section.key=value`), and each source is checked as it is applied, so an error names
//! the source (file or `--set`), the key path and what was expected. Stage two
//! ([`Config`]) is built once everything has merged: durations become seconds and
//! parameters pass the core's validating constructors.
//!
//! The files: `raw.rs` (stage one), `resolve.rs` (stage two, one function per section),
//! `values.rs` (durations, counts and bounds, each checked with its key), this file (the
//! resolved config, the merge of the sources, and the parameter structs each layer takes:
//! [`Config::monitor`], [`Config::log`], [`Config::report_settings`]).
//!
//! No I/O here: the caller reads the file and passes its text.

use serde::Serialize;
use sha2::{Digest, Sha256};
use thiserror::Error;

use crate::core::{AlignParams, ClearanceParams, EgoSource, TrackingParams};
use crate::geometry::Footprint;
use crate::metrics::Metric;
use crate::msg::{Limits, Role};
use crate::rules::{Rule, RuleWindow, Severity};
use crate::stats::Stat;

mod raw;
mod resolve;
mod values;

pub use raw::*;
pub use values::{duration, parse_duration};

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
    /// T-GOSPA over sliding windows, when enabled (absent from the digest otherwise)
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tgospa: Option<crate::core::TgospaParams>,
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
        let mut raw = RawConfig::default();
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
            raw = check_raw(&table, name).map_err(|e| annotate(e, &table))?;
            last_source = name.to_string();
        }
        for s in sets {
            let label = format!("--set {s}");
            // An old key name set here means the new one, and overrides what came before.
            if let Some((old, new)) = apply_set(&mut table, s).map_err(|e| err(&label, &e.0, e.1))? {
                warnings.push(format!("{label}: {}", renamed_note(&old, &new)));
            }
            raw = check_raw(&table, &label).map_err(|e| annotate(e, &table))?;
            last_source = label;
        }
        let mut cfg = Config::build(&raw, &last_source).map_err(|e| annotate(e, &table))?;
        cfg.warnings = warnings;
        Ok(cfg)
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
            tgospa: self.tgospa,
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
        crate::msg::key_of(&self.roles, role)
    }

    /// The role bound to an exact key, if any.
    pub fn role_of(&self, key: &str) -> Option<Role> {
        crate::msg::role_of(&self.roles, key)
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
        .chain(
            t.has_own_costs()
                .then(|| {
                    let (m, f) = t.state_costs();
                    [("tracking.missed_cost", json!(m)), ("tracking.false_cost", json!(f))]
                })
                .into_iter()
                .flatten(),
        )
        .chain(self.tgospa.iter().flat_map(|g| {
            [
                ("tgospa.every", json!(g.every)),
                ("tgospa.window", json!(g.window)),
                ("tgospa.switch_cost_m", json!(g.switch_cost)),
                ("tgospa.max_variables", json!(g.max_variables)),
            ]
        }))
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

/// The warning for an old name that still works (config keys, command and option names).
pub fn renamed_note(old: &str, new: &str) -> String {
    format!("`{old}` is now `{new}`; the old name goes in the next release")
}

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
        warnings
            .push(format!("{source}: {}", renamed_note(&format!("{sec}.{old}"), &format!("{sec}.{new}"))));
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

/// Applies `section.key=value`; the value is read as a TOML value, else as a string. A
/// renamed key is set under its new name, and the (old, new) pair comes back.
fn apply_set(table: &mut toml::Table, s: &str) -> Result<Option<(String, String)>, (String, String)> {
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
    let given = format!("{}.{}", parts[0], parts[1]);
    let current = current_key(&given);
    let renamed = (current != given).then(|| (given, current.clone()));
    let parts: Vec<&str> = if renamed.is_some() { current.splitn(2, '.').collect() } else { parts };
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
            Ok(renamed)
        }
        _ => Err((parts[0].to_string(), "a table".to_string())),
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
        let text = include_str!("../../config/plumbline.toml");
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
