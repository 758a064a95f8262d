//! Campaign aggregation: many runs' reports into pass rates with confidence bounds, metric
//! distributions across runs and the worst runs by each rule. Pure.
//!
//! A run enters the aggregate as a [`RunRow`]: what the aggregate reads of its report,
//! losslessly. A campaign split into shards ([`shard_of`]: run `i` of the sorted list
//! goes to shard `i mod N + 1`, so every shard agrees without talking to the others)
//! writes its rows as a [`Partial`]; [`merge`] checks the partials fit together and gives
//! back the rows in the campaign's order, and the aggregate of those is the one-machine
//! aggregate, bit for bit (the same rows in the same order through the same sums).

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::inference::{clopper_pearson, Rate};
use crate::report::Report;
use crate::rules::{Outcome, Rule};
use crate::stats::{quantile_sorted, Stats, Summary};

/// One rule's verdict on one run, as the aggregate reads it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RowVerdict {
    /// Rule name.
    pub rule: String,
    /// Pass, fail or no data.
    pub verdict: Outcome,
    /// Whether it fails the run.
    pub fails_run: bool,
    /// Worst value seen.
    pub worst: Option<f64>,
}

/// What became of one run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "state", rename_all = "snake_case")]
pub enum RunState {
    /// The log could not be read.
    Unreadable {
        /// Why.
        error: String,
    },
    /// The log was replayed.
    Replayed {
        /// Digest of the log's bytes.
        input_digest: String,
        /// Whether it held an evaluated step.
        evaluable: bool,
        /// Whether its binary form was damaged (a skipped stretch or a damaged tail).
        damaged: bool,
        /// Per rule, in the config's order.
        verdicts: Vec<RowVerdict>,
        /// Per metric, the run's statistics.
        metrics: BTreeMap<String, Stats>,
    },
}

/// What a campaign keeps of one run: everything its aggregate reads.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunRow {
    /// The run's place in the campaign's sorted list of runs (from 0).
    pub index: u64,
    /// The run's log, as the campaign named it.
    pub input: String,
    /// What became of it.
    pub run: RunState,
}

impl RunRow {
    /// The row of a replayed run.
    pub fn replayed(index: u64, rep: &Report) -> RunRow {
        RunRow {
            index,
            input: rep.input.clone(),
            run: RunState::Replayed {
                input_digest: rep.input_digest.clone(),
                evaluable: rep.not_evaluable().is_none(),
                damaged: rep.records.tail.is_some() || rep.records.damaged.stretches > 0,
                verdicts: rep
                    .verdicts
                    .iter()
                    .map(|v| RowVerdict {
                        rule: v.rule.clone(),
                        verdict: v.verdict,
                        fails_run: v.fails_run,
                        worst: v.worst,
                    })
                    .collect(),
                metrics: rep.metrics.iter().map(|(m, s)| (m.to_string(), *s)).collect(),
            },
        }
    }

    /// The row of a run whose log could not be read.
    pub fn unreadable(index: u64, input: &str, error: &str) -> RunRow {
        RunRow { index, input: input.into(), run: RunState::Unreadable { error: error.into() } }
    }
}

/// The shard (1..=N) a run of the sorted list belongs to: round robin by its place.
pub fn shard_of(index: u64, shards: u64) -> u64 {
    index % shards.max(1) + 1
}

/// SHA-256 of the campaign's sorted run names: partials of one campaign agree on it.
pub fn names_digest(names: &[String]) -> String {
    let mut h = Sha256::new();
    for n in names {
        h.update(n.as_bytes());
        h.update(b"\n");
    }
    format!("sha256:{:x}", h.finalize())
}

/// A shard's result: its runs' rows and what identifies the campaign they belong to.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Partial {
    /// `plumbline`.
    pub tool: String,
    /// The version that made it.
    pub version: String,
    /// Digest of the resolved config.
    pub config_digest: String,
    /// This shard (1..=shards).
    pub shard: u64,
    /// How many shards the campaign has.
    pub shards: u64,
    /// Runs in the whole campaign.
    pub campaign_runs: u64,
    /// [`names_digest`] of the whole campaign's runs.
    pub campaign_digest: String,
    /// This shard's runs, in the campaign's order.
    pub rows: Vec<RunRow>,
}

impl Partial {
    /// Shard `shard` of `shards` of the campaign over `names` (sorted), made by this
    /// version with the config of `config_digest`, holding `rows`.
    pub fn new(config_digest: &str, shard: u64, shards: u64, names: &[String], rows: Vec<RunRow>) -> Partial {
        Partial {
            tool: "plumbline".into(),
            version: env!("CARGO_PKG_VERSION").into(),
            config_digest: config_digest.into(),
            shard,
            shards,
            campaign_runs: names.len() as u64,
            campaign_digest: names_digest(names),
            rows,
        }
    }
}

/// Checks that the partials (each with the file it came from) are the whole of one
/// campaign made with `config_digest` by this version, each shard once and each run once,
/// and returns the rows in the campaign's order. An error names the files.
pub fn merge(parts: &[(String, Partial)], config_digest: &str) -> Result<Vec<RunRow>, String> {
    let Some((first_file, first)) = parts.first() else {
        return Err("no partial results to merge".into());
    };
    let version = env!("CARGO_PKG_VERSION");
    for (f, p) in parts {
        if p.tool != "plumbline" {
            return Err(format!("{f}: not a plumbline partial result"));
        }
        if p.version != version {
            return Err(format!("{f}: made by version {}, this is {version}", p.version));
        }
        if p.config_digest != config_digest {
            return Err(format!(
                "{f}: made with another config ({}; this config is {config_digest}): merge with the config the shards used",
                p.config_digest
            ));
        }
        if (p.shards, p.campaign_runs, &p.campaign_digest)
            != (first.shards, first.campaign_runs, &first.campaign_digest)
        {
            return Err(format!(
                "{f} and {first_file}: shards of different campaigns (runs or shard count differ)"
            ));
        }
    }
    let mut by_shard: BTreeMap<u64, &str> = BTreeMap::new();
    for (f, p) in parts {
        if !(1..=p.shards).contains(&p.shard) {
            return Err(format!("{f}: shard {} of {}", p.shard, p.shards));
        }
        if let Some(other) = by_shard.insert(p.shard, f) {
            return Err(format!("{other} and {f}: both are shard {}/{}", p.shard, p.shards));
        }
    }
    let missing: Vec<String> = (1..=first.shards)
        .filter(|k| !by_shard.contains_key(k))
        .map(|k| format!("{k}/{}", first.shards))
        .collect();
    if !missing.is_empty() {
        return Err(format!("missing shards: {}", missing.join(", ")));
    }
    let mut seen: BTreeMap<u64, &str> = BTreeMap::new();
    let mut rows = Vec::new();
    for (f, p) in parts {
        for r in &p.rows {
            if shard_of(r.index, p.shards) != p.shard || r.index >= p.campaign_runs {
                return Err(format!(
                    "{f}: run {} ({}) does not belong to shard {}/{}",
                    r.index, r.input, p.shard, p.shards
                ));
            }
            if let Some(other) = seen.insert(r.index, f) {
                return Err(format!("{other} and {f}: run {} ({}) counted twice", r.index, r.input));
            }
            rows.push(r.clone());
        }
    }
    if rows.len() as u64 != first.campaign_runs {
        return Err(format!("the shards hold {} of the campaign's {} runs", rows.len(), first.campaign_runs));
    }
    rows.sort_by_key(|r| r.index);
    Ok(rows)
}

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

/// Aggregates runs (pure): `rules_cfg` the config's rules, `config_digest` its digest,
/// `rows` in the campaign's order.
pub fn aggregate(rules_cfg: &[Rule], config_digest: &str, rows: &[RunRow]) -> CampaignReport {
    struct Judged<'a> {
        input: &'a str,
        damaged: bool,
        verdicts: &'a [RowVerdict],
        metrics: &'a BTreeMap<String, Stats>,
    }
    let mut unreadable = Vec::new();
    let mut empty = Vec::new();
    let mut runs: Vec<Judged> = Vec::new();
    for r in rows {
        match &r.run {
            RunState::Unreadable { .. } => unreadable.push(r.input.clone()),
            RunState::Replayed { evaluable: false, .. } => empty.push(r.input.clone()),
            RunState::Replayed { damaged, verdicts, metrics, .. } => {
                runs.push(Judged { input: &r.input, damaged: *damaged, verdicts, metrics })
            }
        }
    }
    let read = rows.len() - unreadable.len();
    // Runs with nothing evaluated are listed apart and judged by none of their verdicts.
    let damaged: Vec<String> = runs.iter().filter(|r| r.damaged).map(|r| r.input.to_string()).collect();
    // Unreadable, empty and damaged runs count as failures of every rule.
    let incomplete = (unreadable.len() + empty.len()) as u64;
    let mut rules = Vec::new();
    for (i, r) in rules_cfg.iter().enumerate() {
        let (mut fails, mut with_data, mut no_data) = (incomplete, incomplete, 0u64);
        let mut worst: Vec<(String, f64)> = Vec::new();
        let mut run_incomplete = incomplete;
        for rep in &runs {
            let Some(v) = rep.verdicts.get(i) else { continue };
            if rep.damaged {
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
                worst.push((rep.input.to_string(), w));
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
        for (m, st) in rep.metrics {
            per.entry(m.clone()).or_default().push(st.mean);
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
        runs: read as u64,
        critical_failures: runs.iter().filter(|r| r.verdicts.iter().any(|v| v.fails_run)).count() as u64,
        unreadable,
        empty,
        damaged,
        rules,
        metrics,
    }
}
