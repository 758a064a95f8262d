//! `campaign`: many runs judged together, pass rates with confidence bounds.

use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::campaign::aggregate;
use crate::config::Config;
use crate::report::Report;

use super::gate::replay_report;

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
