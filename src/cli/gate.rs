//! `gate`: a candidate run judged against a baseline report.

use std::path::{Path, PathBuf};

use crate::config::Config;
use crate::core::Sample;
use crate::gate::{self, Row};
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

fn read_report(p: &Path) -> Result<Report, String> {
    let t = std::fs::read_to_string(p).map_err(|e| format!("{}: {e}", p.display()))?;
    Report::read(&t).map_err(|e| format!("{}: {e}", p.display()))
}

pub(crate) fn replay_report(cfg: &Config, log: &Path) -> Result<Report, String> {
    let opts = ReplayOptions { series: None, progress: &|_| {}, on_samples: None };
    replay(cfg, log, opts).map(|r| r.report).map_err(|e| e.to_string())
}

/// Runs `gate`.
pub fn gate_cmd(cfg: &Config, a: &GateArgs) -> u8 {
    let base = match read_report(&a.baseline) {
        Ok(v) => v,
        Err(e) => return super::fail("gate", e),
    };
    let mut plots = crate::html::Series::default();
    let cand = match (&a.log, &a.candidate) {
        (Some(log), _) => {
            let mut hook = |s: &[Sample], _: &[AlertEvent]| plots.add(s);
            let opts = ReplayOptions { series: None, progress: &|_| {}, on_samples: Some(&mut hook) };
            match replay(cfg, log, opts) {
                Ok(r) => r.report,
                Err(e) => return super::fail("gate", e),
            }
        }
        (None, Some(p)) => match read_report(p) {
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
    // A replayed candidate that judged nothing is refused; a report given as the candidate
    // is taken as it is.
    let replayed = a.log.is_some();
    if let Some(why) = cand.not_evaluable().filter(|_| replayed) {
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
    if let Some(p) = a.html.as_ref().filter(|_| replayed) {
        let page = crate::html::run_report_with(&cand, &plots, &crate::html::gate_section(&rows));
        if let Err(e) = std::fs::write(p, page) {
            return super::fail("gate", format!("{}: {e}", p.display()));
        }
    }
    let regressed = rows.iter().filter(|r| r.status == crate::gate::Status::Regressed).count();
    let critical = gate::critical_failure(&cand);
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
