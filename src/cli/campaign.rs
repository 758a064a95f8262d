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
    if let Some(why) = cand_report.as_ref().and_then(Report::not_evaluable) {
        return super::fail("gate", format!("the candidate holds nothing to judge: {why}"));
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
    let regressed = rows.iter().filter(|r| r.status == crate::gate::Status::Regressed).count();
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
    let agg = aggregate(&cfg.rules, &cfg.digest(), &runs, unreadable);
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
    outln!("{:<28} {:<9} {:>9} {:>9} {:>22}", "rule", "severity", "failures", "rate", "95% Clopper-Pearson");
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
    let code = crate::campaign::exit_code(&cfg.rules, &agg, a.max_failure_rate);
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
    /// The field runs: a log, a folder of logs or a `*` pattern.
    #[arg(long, value_name = "LOGS")]
    pub field: String,
    /// Their simulated twins: a folder of logs or a `*` pattern.
    #[arg(long, value_name = "DIR")]
    pub sim: String,
    /// Metrics to compare (repeatable); default gospa, ospa, ego_position_error_m, clearance_m.
    #[arg(long = "metric")]
    pub metrics: Vec<String>,
    /// Significance level.
    #[arg(long, default_value_t = 0.05)]
    pub alpha: f64,
    /// Parallel replays.
    #[arg(long, default_value_t = 2)]
    pub jobs: usize,
    /// Write the comparison as JSON here.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// One field run against the simulated family: where its statistic falls among theirs.
#[derive(Debug, Clone, Serialize)]
pub struct RunComparison {
    /// The field run.
    pub input: String,
    /// Its run mean of the metric.
    pub value: f64,
    /// Two-sided Monte Carlo rank p-value among the simulated runs' means.
    pub p_value: f64,
    /// `differs` or `not_distinguished`.
    pub verdict: &'static str,
}

/// One metric's comparison.
#[derive(Debug, Clone, Serialize)]
pub struct Comparison {
    /// Metric.
    pub metric: String,
    /// Field runs with the metric.
    pub field_runs: usize,
    /// Simulated runs with the metric.
    pub sim_runs: usize,
    /// The two-sample KS test on the per-run means, when both sides have some.
    pub ks: Option<Ks>,
    /// The smallest p-value these run counts can give: at or above `alpha`, no difference
    /// can be found however large.
    pub min_p_value: Option<f64>,
    /// `differs`, `not_distinguished` (the test found no difference: not proof that there
    /// is none), `too_few_runs` or `no_data`.
    pub verdict: &'static str,
    /// Each field run against the simulated family.
    pub per_run: Vec<RunComparison>,
    /// Share of the field runs found to differ on their own.
    pub share_differs: Option<f64>,
}

/// The two-sided Monte Carlo rank p-value of `x` among `sims`:
/// `min(1, 2 min(1 + #{s <= x}, 1 + #{s >= x}) / (N + 1))`. With exchangeable runs it
/// rejects a run of the same family with probability at most alpha (the Monte Carlo test of
/// Barnard, 1963; Davison and Hinkley, "Bootstrap Methods and their Application", 1997,
/// section 4.2.5 (recalled from memory)).
pub fn rank_p_value(x: f64, sims: &[f64]) -> f64 {
    let below = sims.iter().filter(|&&s| s <= x).count();
    let above = sims.iter().filter(|&&s| s >= x).count();
    (2.0 * (1 + below.min(above)) as f64 / (sims.len() + 1) as f64).min(1.0)
}

/// A run's name and its mean of each metric it has.
type RunMeans = (String, BTreeMap<Metric, f64>);

/// Each run's mean of each metric (one value per run: the runs are independent draws,
/// where the steps within one run are strongly autocorrelated).
fn run_means(
    cfg: &Config,
    logs: &[PathBuf],
    metrics: &[Metric],
    jobs: usize,
) -> Result<Vec<RunMeans>, String> {
    let pool = rayon::ThreadPoolBuilder::new().num_threads(jobs.max(1)).build().map_err(|e| e.to_string())?;
    pool.install(|| {
        logs.par_iter()
            .map(|log| {
                let rep = replay_report(cfg, log).map_err(|e| format!("{}: {e}", log.display()))?;
                let means = metrics
                    .iter()
                    .filter_map(|&m| rep.metrics.get(m.name()).map(|st| (m, st.mean)))
                    .collect();
                Ok((log.display().to_string(), means))
            })
            .collect()
    })
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
    let (field_logs, sim_logs) = match (expand(&a.field), expand(&a.sim)) {
        (Ok(f), Ok(s)) => (f, s),
        (Err(e), _) | (_, Err(e)) => return super::fail("compare", e),
    };
    let (field, sim) =
        match (run_means(cfg, &field_logs, &metrics, a.jobs), run_means(cfg, &sim_logs, &metrics, a.jobs)) {
            (Ok(f), Ok(s)) => (f, s),
            (Err(e), _) | (_, Err(e)) => return super::fail("compare", e),
        };
    let rows: Vec<Comparison> = metrics
        .iter()
        .map(|m| {
            let of = |runs: &[RunMeans]| -> Vec<(String, f64)> {
                runs.iter().filter_map(|(n, v)| v.get(m).map(|&x| (n.clone(), x))).collect()
            };
            let (f, sv) = (of(&field), of(&sim));
            let fx: Vec<f64> = f.iter().map(|x| x.1).collect();
            let sx: Vec<f64> = sv.iter().map(|x| x.1).collect();
            let ks = ks_2samp(&fx, &sx);
            // The most extreme split of these sizes: every field run beyond every sim run.
            let min_p = (!fx.is_empty() && !sx.is_empty())
                .then(|| ks_2samp(&vec![0.0; fx.len()], &vec![1.0; sx.len()]).map_or(1.0, |k| k.p_value));
            let verdict = match (&ks, min_p) {
                (None, _) => "no_data",
                (Some(_), Some(p)) if p >= a.alpha => "too_few_runs",
                (Some(k), _) if k.p_value < a.alpha => "differs",
                _ => "not_distinguished",
            };
            let per_run: Vec<RunComparison> = f
                .iter()
                .map(|(input, x)| {
                    let p = rank_p_value(*x, &sx);
                    let verdict = if p < a.alpha { "differs" } else { "not_distinguished" };
                    RunComparison { input: input.clone(), value: *x, p_value: p, verdict }
                })
                .collect();
            let share_differs = (!per_run.is_empty() && !sx.is_empty()).then(|| {
                per_run.iter().filter(|r| r.verdict == "differs").count() as f64 / per_run.len() as f64
            });
            Comparison {
                metric: m.name().into(),
                field_runs: fx.len(),
                sim_runs: sx.len(),
                ks,
                min_p_value: min_p,
                verdict,
                per_run,
                share_differs,
            }
        })
        .collect();
    outln!(
        "{} field run(s) against {} simulated runs, alpha {}: per-run means, two-sample KS",
        field_logs.len(),
        sim_logs.len(),
        a.alpha
    );
    outln!(
        "{:<24} {:>7} {:>7} {:>8} {:>11}  {:<18} {:>14}",
        "metric",
        "field",
        "sim",
        "KS D",
        "p-value",
        "verdict",
        "runs differing"
    );
    for r in &rows {
        let share = r.share_differs.map_or("-".to_string(), |x| {
            format!("{}/{}", (x * r.per_run.len() as f64).round(), r.per_run.len())
        });
        match &r.ks {
            Some(k) => outln!(
                "{:<24} {:>7} {:>7} {:>8.4} {:>11.4e}  {:<18} {:>14}",
                r.metric,
                k.n1,
                k.n2,
                k.statistic,
                k.p_value,
                r.verdict,
                share
            ),
            None => outln!(
                "{:<24} {:>7} {:>7} {:>8} {:>11}  {:<18} {:>14}",
                r.metric,
                0,
                0,
                "-",
                "-",
                r.verdict,
                share
            ),
        }
    }
    if rows.iter().any(|r| r.verdict == "too_few_runs") {
        outln!("too_few_runs: with these run counts no p-value can fall below alpha; add simulated runs");
    }
    if let Some(p) = &a.report {
        if let Err(e) = std::fs::write(p, serde_json::to_string_pretty(&rows).unwrap_or_default()) {
            return super::fail("compare", format!("{}: {e}", p.display()));
        }
    }
    if rows.iter().any(|r| r.verdict == "differs") {
        super::EXIT_FAIL
    } else {
        super::EXIT_OK
    }
}

#[cfg(test)]
mod tests {
    use super::rank_p_value;

    /// Hand-worked: among 19 simulated values 1..19, a field value beyond all of them has
    /// 1 + 0 at or above it, so p = 2 * 1 / 20 = 0.1; one in the middle is capped at 1.
    #[test]
    fn rank_p_values_by_hand() {
        let sims: Vec<f64> = (1..=19).map(f64::from).collect();
        assert!((rank_p_value(20.0, &sims) - 0.1).abs() < 1e-15);
        assert!((rank_p_value(0.0, &sims) - 0.1).abs() < 1e-15);
        assert!((rank_p_value(2.0, &sims) - 0.3).abs() < 1e-15, "{}", rank_p_value(2.0, &sims));
        assert_eq!(rank_p_value(10.0, &sims), 1.0);
    }
}
