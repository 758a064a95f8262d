//! `gate`, `campaign` and `compare`: judging runs against a baseline, many runs together,
//! and field runs against their simulated twins.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use rayon::prelude::*;
use serde::Serialize;
use serde_json::Value;

use crate::campaign::aggregate;
use crate::config::Config;
use crate::core::Sample;
use crate::gate::{self, Row};
use crate::inference::{ks_2samp, Ks};
use crate::metrics::Metric;
use crate::replay::{replay, ReplayOptions};
use crate::report::Report;
use crate::rules::AlertEvent;

/// `gate` arguments.
#[derive(Debug, clap::Args)]
pub struct GateArgs {
    /// The baseline report (JSON).
    #[arg(long, value_name = "FILE")]
    pub baseline: PathBuf,
    /// A log to replay as the candidate.
    pub log: Option<PathBuf>,
    /// A candidate report instead of a log.
    #[arg(long, value_name = "FILE", conflicts_with = "log")]
    pub candidate: Option<PathBuf>,
    /// Write JUnit XML here.
    #[arg(long, value_name = "FILE")]
    pub junit: Option<PathBuf>,
    /// Write an HTML report here (the candidate run with the gate table; needs LOG).
    #[arg(long, value_name = "FILE", requires = "log")]
    pub html: Option<PathBuf>,
    /// Compare even when the two reports define metrics differently (a changed cutoff,
    /// order, footprint, ...): the change is intended.
    #[arg(long)]
    pub allow_definition_change: bool,
}

fn read_json(p: &Path) -> Result<Value, String> {
    let t = std::fs::read_to_string(p).map_err(|e| format!("{}: {e}", p.display()))?;
    serde_json::from_str(&t).map_err(|e| format!("{}: not a report: {e}", p.display()))
}

fn replay_report(cfg: &Config, log: &Path) -> Result<Report, String> {
    let opts = ReplayOptions { series: None, progress: &|_| {}, on_samples: None };
    replay(cfg, log, opts).map(|r| r.report).map_err(|e| e.to_string())
}

/// Runs `gate`.
pub fn gate_cmd(cfg: &Config, a: &GateArgs) -> u8 {
    let base = match read_json(&a.baseline) {
        Ok(v) => v,
        Err(e) => return super::fail("gate", e),
    };
    let mut plots = crate::html::Series::default();
    let mut cand_report = None;
    let cand = match (&a.log, &a.candidate) {
        (Some(log), _) => {
            let mut hook = |s: &[Sample], _: &[AlertEvent]| plots.add(s);
            let opts = ReplayOptions { series: None, progress: &|_| {}, on_samples: Some(&mut hook) };
            match replay(cfg, log, opts) {
                Ok(r) => {
                    let v = serde_json::to_value(&r.report).unwrap_or_default();
                    cand_report = Some(r.report);
                    v
                }
                Err(e) => return super::fail("gate", e),
            }
        }
        (None, Some(p)) => match read_json(p) {
            Ok(v) => v,
            Err(e) => return super::fail("gate", e),
        },
        (None, None) => return super::fail("gate", "give a LOG or --candidate FILE"),
    };
    let changed = gate::definition_changes(&base, &cand);
    if !changed.is_empty() {
        if !a.allow_definition_change {
            return super::fail(
                "gate",
                format!(
                    "the baseline and the candidate define their metrics differently ({}); comparing them would call a change of definition a change of quality. Make both with the same settings, or pass --allow-definition-change if the change is intended",
                    changed.join(", ")
                ),
            );
        }
        errln!("plumbline gate: definitions differ (allowed): {}", changed.join(", "));
    }
    if cand.get("records").is_some() {
        if let Some(why) = cand_report.as_ref().and_then(Report::not_evaluable) {
            return super::fail("gate", format!("the candidate holds nothing to judge: {why}"));
        }
    }
    let tol = if cfg.gate.is_empty() { gate::default_tolerances(&base, &cand) } else { cfg.gate.clone() };
    let rows = gate::compare(&base, &cand, &tol);
    out!("{}", gate_table(&rows));
    if let Some(p) = &a.junit {
        if let Err(e) = std::fs::write(p, gate::junit(&rows, &cand)) {
            return super::fail("gate", format!("{}: {e}", p.display()));
        }
    }
    if let (Some(p), Some(r)) = (&a.html, &cand_report) {
        let page = crate::html::run_report_with(r, &plots, &crate::html::gate_section(&rows));
        if let Err(e) = std::fs::write(p, page) {
            return super::fail("gate", format!("{}: {e}", p.display()));
        }
    }
    let regressed = rows.iter().filter(|r| r.status == "regressed").count();
    let critical = cand.get("verdicts").and_then(Value::as_array).is_some_and(|v| {
        v.iter().any(|v| {
            v["fails_run"].as_bool().unwrap_or(false)
                || (v["verdict"] == "fail" && v["severity"] == "critical")
        })
    });
    outln!("{regressed} regression(s){}", if critical { ", and a critical rule failed" } else { "" });
    if regressed > 0 || critical {
        super::EXIT_FAIL
    } else {
        super::EXIT_OK
    }
}

fn gate_table(rows: &[Row]) -> String {
    let f = |x: Option<f64>| x.map(|v| format!("{v:.5}")).unwrap_or_else(|| "-".into());
    let mut s = format!(
        "{:<30} {:<5} {:>12} {:>12} {:>10}  {}\n",
        "metric", "stat", "baseline", "candidate", "allowed", "status"
    );
    for r in rows {
        s += &format!(
            "{:<30} {:<5} {:>12} {:>12} {:>10.5}  {}\n",
            r.metric,
            r.stat,
            f(r.baseline),
            f(r.candidate),
            r.allowed,
            r.status
        );
    }
    s
}

/// `campaign` arguments.
#[derive(Debug, clap::Args)]
pub struct CampaignArgs {
    /// A folder of logs, or a pattern with `*` in the file name (e.g. runs/run-*.plb).
    pub logs: String,
    /// Parallel replays.
    #[arg(long, default_value_t = 2)]
    pub jobs: usize,
    /// Write the aggregate report here.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Write each run's report into this folder.
    #[arg(long, value_name = "DIR")]
    pub out_dir: Option<PathBuf>,
    /// Write an HTML report (failure rates, worst-value histograms) here.
    #[arg(long, value_name = "FILE")]
    pub html: Option<PathBuf>,
    /// Pass when every critical rule's failure rate is credibly at most this (its 95%
    /// Clopper-Pearson upper bound, incomplete runs counted as failures); without it, any
    /// failing or incomplete run fails the campaign.
    #[arg(long, value_name = "RATE", value_parser = rate_in_unit)]
    pub max_failure_rate: Option<f64>,
}

fn rate_in_unit(s: &str) -> Result<f64, String> {
    match s.parse::<f64>() {
        Ok(v) if (0.0..=1.0).contains(&v) => Ok(v),
        _ => Err(format!("a failure rate from 0 to 1, found {s}")),
    }
}

/// Expands a folder or a `*` pattern into sorted log paths.
pub fn expand(pattern: &str) -> Result<Vec<PathBuf>, String> {
    let p = Path::new(pattern);
    let (dir, pat) = if p.is_dir() {
        (p.to_path_buf(), "*".to_string())
    } else {
        let dir = p.parent().filter(|d| !d.as_os_str().is_empty()).unwrap_or(Path::new(".")).to_path_buf();
        (dir, p.file_name().and_then(|f| f.to_str()).unwrap_or("*").to_string())
    };
    let (pre, post) = pat.split_once('*').unwrap_or((pat.as_str(), ""));
    let mut out: Vec<PathBuf> = std::fs::read_dir(&dir)
        .map_err(|e| format!("{}: {e}", dir.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|q| {
            let name = q.file_name().and_then(|f| f.to_str()).unwrap_or("");
            let log = name.ends_with(".jsonl") || name.ends_with(".plb");
            log && name.starts_with(pre) && name.ends_with(post) && name.len() >= pre.len() + post.len()
        })
        .collect();
    out.sort();
    if out.is_empty() {
        return Err(format!("{pattern}: no .jsonl or .plb logs"));
    }
    Ok(out)
}

/// Runs `campaign`.
pub fn campaign_cmd(cfg: &Config, a: &CampaignArgs) -> u8 {
    let logs = match expand(&a.logs) {
        Ok(l) => l,
        Err(e) => return super::fail("campaign", e),
    };
    if let Some(d) = &a.out_dir {
        if let Err(e) = std::fs::create_dir_all(d) {
            return super::fail("campaign", format!("{}: {e}", d.display()));
        }
    }
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(logs.len() as u64),
        indicatif::ProgressDrawTarget::stderr(),
    );
    let pool = match rayon::ThreadPoolBuilder::new().num_threads(a.jobs.max(1)).build() {
        Ok(p) => p,
        Err(e) => return super::fail("campaign", e),
    };
    let results: Vec<Result<Report, String>> = pool.install(|| {
        logs.par_iter()
            .map(|log| {
                let r = replay_report(cfg, log);
                if let (Ok(rep), Some(d)) = (&r, &a.out_dir) {
                    let name = log.file_stem().and_then(|s| s.to_str()).unwrap_or("run");
                    let _ = std::fs::write(d.join(format!("{name}.report.json")), rep.to_json());
                }
                bar.inc(1);
                r
            })
            .collect()
    });
    bar.finish_and_clear();
    let mut runs = Vec::new();
    let mut unreadable = Vec::new();
    for (log, r) in logs.iter().zip(results) {
        match r {
            Ok(rep) => runs.push(rep),
            Err(e) => {
                errln!("plumbline campaign: {}: {e}", log.display());
                unreadable.push(log.display().to_string());
            }
        }
    }
    let agg = aggregate(cfg, &runs, unreadable);
    outln!(
        "campaign of {} runs ({} unreadable, {} with nothing evaluated, {} damaged: counted as failures), {} with a critical failure",
        agg.runs,
        agg.unreadable.len(),
        agg.empty.len(),
        agg.damaged.len(),
        agg.critical_failures
    );
    for (what, list) in
        [("unreadable", &agg.unreadable), ("nothing evaluated", &agg.empty), ("damaged", &agg.damaged)]
    {
        for f in list.iter().take(10) {
            outln!("  {what}: {f}");
        }
    }
    outln!("{:<28} {:<9} {:>9} {:>9} {:>22}", "rule", "severity", "failures", "rate", "95% interval (CP)");
    for r in &agg.rules {
        match &r.failure_rate {
            Some(x) => outln!(
                "{:<28} {:<9} {:>4}/{:<4} {:>9.4} {:>10.4} .. {:<9.4}",
                r.rule,
                r.severity,
                x.failures,
                x.runs,
                x.rate,
                x.lower,
                x.upper
            ),
            None => outln!("{:<28} {:<9} {:>9}", r.rule, r.severity, "no data"),
        }
    }
    if let Some(p) = &a.html {
        if let Err(e) = std::fs::write(p, crate::html::campaign_report(&agg, &cfg.rules)) {
            return super::fail("campaign", format!("{}: {e}", p.display()));
        }
    }
    if let Some(p) = &a.report {
        let text = serde_json::to_string_pretty(&agg).unwrap_or_default();
        if let Err(e) = std::fs::write(p, text) {
            return super::fail("campaign", format!("{}: {e}", p.display()));
        }
    }
    let code = crate::campaign::exit_code(cfg, &agg, a.max_failure_rate);
    match (code, a.max_failure_rate) {
        (2, _) => errln!("plumbline campaign: no run holds an evaluated step"),
        (1, Some(r)) => {
            outln!("FAIL: a critical rule's failure rate may exceed {r} (95% upper bound above it)")
        }
        (1, None) => outln!("FAIL: a run failed a critical rule or could not be judged whole"),
        _ => {}
    }
    code
}

/// `compare` arguments.
#[derive(Debug, clap::Args)]
pub struct CompareArgs {
    /// The field run (a log).
    #[arg(long, value_name = "LOG")]
    pub field: PathBuf,
    /// Its simulated twins: a folder of logs or a `*` pattern.
    #[arg(long, value_name = "DIR")]
    pub sim: String,
    /// Metrics to compare (repeatable); default gospa, ospa, ego_position_error_m, clearance_m.
    #[arg(long = "metric")]
    pub metrics: Vec<String>,
    /// Significance level.
    #[arg(long, default_value_t = 0.05)]
    pub alpha: f64,
    /// Write the comparison as JSON here.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

fn values(cfg: &Config, log: &Path, metrics: &[Metric]) -> Result<BTreeMap<Metric, Vec<f64>>, String> {
    let mut out: BTreeMap<Metric, Vec<f64>> = metrics.iter().map(|&m| (m, Vec::new())).collect();
    let mut hook = |s: &[Sample], _: &[AlertEvent]| {
        for x in s.iter().filter(|x| x.role.is_none()) {
            if let Some(v) = out.get_mut(&x.metric) {
                v.push(x.value);
            }
        }
    };
    replay(cfg, log, ReplayOptions { series: None, progress: &|_| {}, on_samples: Some(&mut hook) })
        .map_err(|e| e.to_string())?;
    Ok(out)
}

/// One metric's comparison.
#[derive(Debug, Clone, Serialize)]
pub struct Comparison {
    /// Metric.
    pub metric: String,
    /// The KS test, when both sides have values.
    pub ks: Option<Ks>,
    /// `represents`, `differs` or `no_data`.
    pub verdict: &'static str,
}

/// Runs `compare`.
pub fn compare_cmd(cfg: &Config, a: &CompareArgs) -> u8 {
    let names = if a.metrics.is_empty() {
        vec!["gospa".to_string(), "ospa".into(), "ego_position_error_m".into(), "clearance_m".into()]
    } else {
        a.metrics.clone()
    };
    let mut metrics = Vec::new();
    for n in &names {
        match Metric::from_name(n) {
            Some(m) => metrics.push(m),
            None => return super::fail("compare", format!("--metric: unknown metric `{n}`")),
        }
    }
    if !(a.alpha > 0.0 && a.alpha < 1.0) {
        return super::fail("compare", "--alpha must be in (0, 1)");
    }
    let field = match values(cfg, &a.field, &metrics) {
        Ok(v) => v,
        Err(e) => return super::fail("compare", e),
    };
    let sims = match expand(&a.sim) {
        Ok(s) => s,
        Err(e) => return super::fail("compare", e),
    };
    let mut sim: BTreeMap<Metric, Vec<f64>> = metrics.iter().map(|&m| (m, Vec::new())).collect();
    for s in &sims {
        match values(cfg, s, &metrics) {
            Ok(v) => v.into_iter().for_each(|(m, x)| sim.entry(m).or_default().extend(x)),
            Err(e) => return super::fail("compare", e),
        }
    }
    let rows: Vec<Comparison> = metrics
        .iter()
        .map(|m| {
            let ks = ks_2samp(&field[m], &sim[m]);
            let verdict = match &ks {
                None => "no_data",
                Some(k) if k.p_value >= a.alpha => "represents",
                Some(_) => "differs",
            };
            Comparison { metric: m.name().into(), ks, verdict }
        })
        .collect();
    outln!("field {} against {} simulated runs, alpha {}", a.field.display(), sims.len(), a.alpha);
    outln!("{:<24} {:>8} {:>8} {:>10} {:>12}  verdict", "metric", "field n", "sim n", "KS D", "p-value");
    for r in &rows {
        match &r.ks {
            Some(k) => outln!(
                "{:<24} {:>8} {:>8} {:>10.4} {:>12.4e}  {}",
                r.metric,
                k.n1,
                k.n2,
                k.statistic,
                k.p_value,
                r.verdict
            ),
            None => outln!("{:<24} {:>8} {:>8} {:>10} {:>12}  {}", r.metric, 0, 0, "-", "-", r.verdict),
        }
    }
    if let Some(p) = &a.report {
        if let Err(e) = std::fs::write(p, serde_json::to_string_pretty(&rows).unwrap_or_default()) {
            return super::fail("compare", format!("{}: {e}", p.display()));
        }
    }
    super::EXIT_OK
}
