//! Campaign aggregation: many runs' reports into pass rates with confidence bounds, metric
//! distributions across runs and the worst runs by each rule. Pure.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::inference::{clopper_pearson, Rate};
use crate::report::Report;
use crate::rules::{critical_failed, Outcome, Rule};
use crate::stats::{quantile_sorted, Summary};

/// One rule across the campaign.
#[derive(Debug, Clone, Serialize)]
pub struct RuleAggregate {
    /// Rule name.
    pub rule: String,
    /// Severity.
    pub severity: String,
    /// Runs that failed, out of runs with data, with the 95% Clopper-Pearson interval on the
    /// failure rate.
    pub failure_rate: Option<Rate>,
    /// Runs without data (for a rule that allows it, or one that is not critical).
    pub no_data: u64,
    /// Runs counted as failures because they could not be judged whole (unreadable,
    /// nothing evaluated, or damaged): never counted as passing.
    pub incomplete: u64,
    /// The worst runs (input, worst value), worst first.
    pub worst_runs: Vec<(String, f64)>,
    /// Every run's worst value (for the histogram).
    pub worst_values: Vec<f64>,
}

/// A metric's per-run mean across the campaign.
#[derive(Debug, Clone, Serialize)]
pub struct MetricAggregate {
    /// Runs with the metric.
    pub runs: u64,
    /// Mean of the per-run means.
    pub mean: f64,
    /// Smallest per-run mean.
    pub min: f64,
    /// Largest per-run mean.
    pub max: f64,
    /// Median per-run mean.
    pub p50: f64,
    /// 95th percentile of the per-run means.
    pub p95: f64,
}

/// The aggregate report of a campaign.
#[derive(Debug, Clone, Serialize)]
pub struct CampaignReport {
    /// Tool version.
    pub version: &'static str,
    /// Config digest.
    pub config_digest: String,
    /// Runs read (the unreadable ones are not among them).
    pub runs: u64,
    /// Runs that could not be read.
    pub unreadable: Vec<String>,
    /// Runs that were read but held no evaluated step.
    pub empty: Vec<String>,
    /// Runs whose binary log was damaged (a skipped stretch or a damaged tail): judged,
    /// but never counted as passing.
    pub damaged: Vec<String>,
    /// Runs in which a critical rule failed (or had no data and does not allow that).
    pub critical_failures: u64,
    /// Per rule.
    pub rules: Vec<RuleAggregate>,
    /// Per metric.
    pub metrics: BTreeMap<String, MetricAggregate>,
}

/// How a campaign ends, by the rule of the README: exit 1 when a run fails a critical
/// rule or could not be judged whole (unreadable, empty, damaged); with
/// `max_failure_rate`, exit 1 exactly when a critical rule's Clopper-Pearson upper bound
/// (95% two-sided, incomplete runs counted as failures) exceeds it; exit 2 when no run
/// holds anything to judge.
pub fn exit_code(rules: &[Rule], agg: &CampaignReport, max_failure_rate: Option<f64>) -> u8 {
    let judged = agg.runs as usize - agg.empty.len();
    if judged == 0 {
        return 2;
    }
    let failed = match max_failure_rate {
        None => {
            agg.critical_failures > 0
                || !agg.unreadable.is_empty()
                || !agg.empty.is_empty()
                || !agg.damaged.is_empty()
        }
        Some(limit) => rules.iter().zip(&agg.rules).any(|(r, a)| {
            r.severity == crate::rules::Severity::Critical
                && a.failure_rate.as_ref().is_some_and(|x| x.upper > limit)
        }),
    };
    u8::from(failed)
}

/// Aggregates run reports (pure): `rules` the config's rules, `config_digest` its digest.
pub fn aggregate(
    rules_cfg: &[Rule],
    config_digest: &str,
    all: &[Report],
    unreadable: Vec<String>,
) -> CampaignReport {
    // Runs with nothing evaluated are listed apart and judged by none of their verdicts.
    let (runs, empty): (Vec<&Report>, Vec<&Report>) = all.iter().partition(|r| r.not_evaluable().is_none());
    let empty: Vec<String> = empty.into_iter().map(|r| r.input.clone()).collect();
    let is_damaged = |r: &Report| r.records.tail.is_some() || r.records.damaged.stretches > 0;
    let damaged: Vec<String> = runs.iter().filter(|r| is_damaged(r)).map(|r| r.input.clone()).collect();
    // Unreadable, empty and damaged runs count as failures of every rule.
    let incomplete = (unreadable.len() + empty.len()) as u64;
    let mut rules = Vec::new();
    for (i, r) in rules_cfg.iter().enumerate() {
        let (mut fails, mut with_data, mut no_data) = (incomplete, incomplete, 0u64);
        let mut worst: Vec<(String, f64)> = Vec::new();
        let mut run_incomplete = incomplete;
        for rep in &runs {
            let Some(v) = rep.verdicts.get(i) else { continue };
            if is_damaged(rep) {
                fails += 1;
                with_data += 1;
                run_incomplete += 1;
            } else {
                match v.verdict {
                    // A critical rule without data that does not allow it fails the run.
                    Outcome::NoData if v.fails_run => {
                        fails += 1;
                        with_data += 1
                    }
                    Outcome::NoData => no_data += 1,
                    Outcome::Fail => {
                        fails += 1;
                        with_data += 1
                    }
                    _ => with_data += 1,
                }
            }
            if let Some(w) = v.worst {
                worst.push((rep.input.clone(), w));
            }
        }
        worst.sort_by(|a, b| if r.above { b.1.total_cmp(&a.1) } else { a.1.total_cmp(&b.1) });
        let values = worst.iter().map(|w| w.1).collect();
        worst.truncate(5);
        rules.push(RuleAggregate {
            rule: r.name.clone(),
            severity: r.severity.name().into(),
            failure_rate: clopper_pearson(fails, with_data, 0.05),
            no_data,
            incomplete: run_incomplete,
            worst_runs: worst,
            worst_values: values,
        });
    }
    let mut per: BTreeMap<String, Vec<f64>> = BTreeMap::new();
    for rep in &runs {
        for (m, st) in &rep.metrics {
            per.entry(m.to_string()).or_default().push(st.mean);
        }
    }
    let metrics = per
        .into_iter()
        .map(|(m, mut v)| {
            let mut s = Summary::new(usize::MAX, 3);
            v.iter().for_each(|&x| s.add(x));
            v.sort_by(f64::total_cmp);
            let st = s.stats().expect("non-empty");
            let agg = MetricAggregate {
                runs: v.len() as u64,
                mean: st.mean,
                min: st.min,
                max: st.max,
                p50: quantile_sorted(&v, 0.5),
                p95: quantile_sorted(&v, 0.95),
            };
            (m, agg)
        })
        .collect();
    CampaignReport {
        version: env!("CARGO_PKG_VERSION"),
        config_digest: config_digest.to_string(),
        runs: all.len() as u64,
        critical_failures: runs.iter().filter(|r| critical_failed(&r.verdicts)).count() as u64,
        unreadable,
        empty,
        damaged,
        rules,
        metrics,
    }
}
