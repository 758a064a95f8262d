//! Stage two: a checked raw config resolved into [`Config`], one function per section.
//! Each gives the section's defaults, checks its values and names the key of a bad one.

use super::values::{bound, count, duration, nonneg, positive};
use super::*;

impl Config {
    /// Stage two: resolves a checked raw config.
    pub fn build(raw: &RawConfig, source: &str) -> Result<Config, ConfigError> {
        let roles = roles(raw, source)?;
        let rl = &raw.limits;
        let mut tracking = tracking(&raw.tracking, source)?;
        tracking.exact_cells = count(
            source,
            "limits.exact_assignment_cells",
            rl.exact_assignment_cells,
            crate::core::EXACT_CELLS,
        )?;
        let align = align(raw, source)?;
        let clearance = clearance(raw, source)?;
        let limits = limits(rl, clearance.path_step, source)?;
        let (http_listen, http) = http(&raw.http, source)?;
        let report = report(&raw.report, source)?;
        let prefix = raw.monitor.prefix.clone().unwrap_or_else(|| "rig".into());
        let (mut windows, mut window_labels, window_buckets) = windows(&raw.windows, source)?;
        let zenoh = zenoh(&raw.zenoh, source)?;
        let live = live(&raw.live, source)?;
        let dashboard = dashboard(&raw.dashboard, source)?;
        let gate = gate(&raw.gate, source)?;
        let tgospa = tgospa(&raw.tgospa, source)?;
        // Rules last: a rule's window that is not configured is added to the windows.
        let rules = rules(&raw.rule, source, &mut windows, &mut window_labels)?;
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
            tgospa,
            warnings: Vec::new(),
        })
    }
}

/// `[roles]`: every role bound, to `rig/<role>` unless the config says otherwise.
fn roles(raw: &RawConfig, source: &str) -> Result<Vec<(Role, String)>, ConfigError> {
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
    Ok(roles)
}

/// `[tracking]`.
fn tracking(t: &RawTracking, source: &str) -> Result<TrackingParams, ConfigError> {
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
    TrackingParams::try_new(
        t.cutoff_m.unwrap_or(2.0),
        t.order.unwrap_or(1.0),
        t.alpha.unwrap_or(2.0),
        t.region_radius_m.unwrap_or(0.0),
        ego_source,
        forget_after,
    )
    .and_then(|tp| tp.with_costs(t.missed_cost_m, t.false_cost_m))
    .map_err(|e| err(source, &format!("tracking.{}", e.key), e.expected))
}

/// `[time]`, with the step and buffer bounds and the stamp lead of `[limits]`.
fn align(raw: &RawConfig, source: &str) -> Result<AlignParams, ConfigError> {
    let (tm, rl) = (&raw.time, &raw.limits);
    let mut align = AlignParams::try_new(
        duration(source, "time.max_wait", &tm.max_wait, 0.5)?,
        duration(source, "time.tolerance", &tm.tolerance, 0.1)?,
        duration(source, "time.reference_history", &tm.reference_history, 2.0)?,
        count(source, "limits.pending_steps", rl.pending_steps, 4096)?,
        count(source, "limits.buffer_messages", rl.buffer_messages, 4096)?,
    )
    .map_err(|e| err(source, &e.key, e.expected))?;
    align.max_stamp_lead =
        duration(source, "limits.max_stamp_lead_s", &rl.max_stamp_lead_s, crate::core::MAX_STAMP_LEAD)?;
    if align.max_stamp_lead <= 0.0 {
        return Err(err(source, "limits.max_stamp_lead_s", "a duration > 0"));
    }
    Ok(align)
}

/// `[vehicle]`, `[clearance]` and `[path]`.
fn clearance(raw: &RawConfig, source: &str) -> Result<ClearanceParams, ConfigError> {
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
    Ok(ClearanceParams {
        footprint,
        object_radius: positive(source, "clearance.object_radius_m", c.object_radius_m, 0.5)?,
        path_step: positive(source, "clearance.path_step_m", c.path_step_m, 0.5)?,
        inflation: nonneg(source, "clearance.planner_margin_m", c.planner_margin_m, 0.5)?,
        deviation_window: positive(source, "path.deviation_window_m", p.deviation_window_m, 10.0)?,
        grid_res: positive(source, "path.grid_m", p.grid_m, 0.2)?,
        grid_margin: nonneg(source, "path.grid_margin_m", p.grid_margin_m, 10.0)?,
        max_grid_cells: count(source, "path.max_grid_cells", p.max_grid_cells, 2_000_000)?,
        excess_every: duration(source, "path.excess_every", &p.excess_every, 1.0)?,
    })
}

/// `[limits]`: message size and plausibility bounds (a plan's points count its length
/// over `path_step`).
fn limits(rl: &RawLimits, path_step: f64, source: &str) -> Result<Limits, ConfigError> {
    let dl = Limits::default();
    Ok(Limits {
        max_objects: count(source, "limits.max_objects", rl.max_objects, 10_000)?,
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
        plan_step: path_step,
    })
}

/// `[http]`: the listen address and the serving limits.
fn http(h: &RawHttp, source: &str) -> Result<(String, HttpParams), ConfigError> {
    let listen = h.listen.clone().unwrap_or_else(|| "127.0.0.1:21847".into());
    if listen.parse::<std::net::SocketAddr>().is_err() {
        return Err(err(source, "http.listen", "an address such as \"127.0.0.1:21847\""));
    }
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
    Ok((listen, http))
}

/// `[report]`: how run statistics compute percentiles.
fn report(r: &RawReport, source: &str) -> Result<crate::stats::StatsParams, ConfigError> {
    let digits = count(source, "report.histogram_digits", r.histogram_digits, 3)?;
    if !(1..=5).contains(&digits) {
        return Err(err(source, "report.histogram_digits", "a whole number from 1 to 5"));
    }
    Ok(crate::stats::StatsParams {
        exact_values: count(source, "report.exact_values", r.exact_values, 200_000)?,
        histogram_digits: digits as u8,
    })
}

/// `[windows]`: lengths (s) with their labels as written, and the sub-buckets.
fn windows(w: &RawWindows, source: &str) -> Result<(Vec<f64>, Vec<String>, usize), ConfigError> {
    let (mut windows, mut labels) = (Vec::new(), Vec::new());
    let default_lengths = ["1s", "10s", "60s"].map(|s| toml::Value::String(s.into()));
    let lengths = w.lengths.as_deref().unwrap_or(&default_lengths);
    for (i, v) in lengths.iter().enumerate() {
        let key = format!("windows.lengths[{i}]");
        let l = duration(source, &key, &Some(v.clone()), 0.0)?;
        if l <= 0.0 {
            return Err(err(source, &key, "a duration > 0"));
        }
        windows.push(l);
        labels.push(v.as_str().unwrap_or_default().to_string());
    }
    let buckets = count(source, "windows.buckets", w.buckets, 10)?;
    if buckets > 1000 {
        return Err(err(source, "windows.buckets", "a whole number from 1 to 1000"));
    }
    Ok((windows, labels, buckets))
}

/// `[zenoh]`.
fn zenoh(z: &RawZenoh, source: &str) -> Result<ZenohParams, ConfigError> {
    let mode = z.mode.clone().unwrap_or_else(|| "peer".into());
    if mode != "peer" && mode != "client" {
        return Err(err(source, "zenoh.mode", format!("\"peer\" or \"client\", found \"{mode}\"")));
    }
    Ok(ZenohParams {
        mode,
        connect: z.connect.clone().unwrap_or_default(),
        listen: z.listen.clone().unwrap_or_default(),
        multicast: z.multicast_scouting.unwrap_or(true),
        multicast_interface: z.multicast_interface.clone().unwrap_or_else(|| LOOPBACK_INTERFACE.into()),
        config_file: z.config_file.clone(),
    })
}

/// `[live]`.
fn live(l: &RawLive, source: &str) -> Result<LiveParams, ConfigError> {
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
    Ok(live)
}

/// `[dashboard]`.
fn dashboard(d: &RawDashboard, source: &str) -> Result<crate::dashboard::DashboardParams, ConfigError> {
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
    Ok(dashboard)
}

/// `[tgospa]`: none unless enabled.
fn tgospa(t: &RawTgospa, source: &str) -> Result<Option<crate::core::TgospaParams>, ConfigError> {
    let d = crate::core::TgospaParams::default();
    let p = crate::core::TgospaParams::try_new(
        duration(source, "tgospa.every", &t.every, d.every)?,
        duration(source, "tgospa.window", &t.window, d.window)?,
        t.switch_cost_m.unwrap_or(d.switch_cost),
        count(source, "tgospa.max_variables", t.max_variables, d.max_variables)?,
        count(source, "tgospa.max_steps", t.max_steps, d.max_steps)?,
    )
    .map_err(|e| err(source, &format!("tgospa.{}", e.key), e.expected))?;
    Ok(t.enabled.unwrap_or(false).then_some(p))
}

/// `[[gate]]`: gated statistics and their tolerances.
fn gate(raw: &[RawGate], source: &str) -> Result<Vec<crate::gate::Tolerance>, ConfigError> {
    let mut gate = Vec::new();
    for (i, g) in raw.iter().enumerate() {
        let key = |k: &str| format!("gate[{i}].{k}");
        if Metric::from_name(&g.metric).is_none() {
            return Err(err(source, &key("metric"), format!("a metric name; found \"{}\"", g.metric)));
        }
        let stat = g.stat.clone().unwrap_or_else(|| "mean".into());
        if !crate::stats::Stats::FIELDS.contains(&stat.as_str()) {
            return Err(err(
                source,
                &key("stat"),
                format!("one of {}", crate::stats::Stats::FIELDS.join(", ")),
            ));
        }
        let worse = match g.worse.as_str() {
            "higher" => crate::gate::Worse::Higher,
            "lower" => crate::gate::Worse::Lower,
            w => return Err(err(source, &key("worse"), format!("\"higher\" or \"lower\", found \"{w}\""))),
        };
        let (abs, rel) = (g.abs.unwrap_or(0.0), g.rel.unwrap_or(0.0));
        if !(abs.is_finite() && abs >= 0.0 && rel.is_finite() && rel >= 0.0) {
            return Err(err(source, &key("abs"), "tolerances >= 0"));
        }
        gate.push(crate::gate::Tolerance { metric: g.metric.clone(), stat, worse, abs, rel });
    }
    Ok(gate)
}

/// `[[rule]]`: each rule checked, names unique.
fn rules(
    raw: &[RawRule],
    source: &str,
    windows: &mut Vec<f64>,
    labels: &mut Vec<String>,
) -> Result<Vec<Rule>, ConfigError> {
    let mut rules = Vec::new();
    for (i, r) in raw.iter().enumerate() {
        let rule = build_rule(source, i, r, windows, labels).map_err(|mut e| {
            e.expected = format!("rule \"{}\": {}", r.name, e.expected);
            e
        })?;
        if rules.iter().any(|q: &Rule| q.name == rule.name) {
            let why = format!("a unique name; \"{}\" is used twice", rule.name);
            return Err(err(source, &format!("rule[{i}].name"), why));
        }
        rules.push(rule);
    }
    Ok(rules)
}

/// One `[[rule]]`: its metric, statistic, threshold, window (added to the windows when not
/// configured), severity and role.
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
