//! `campaign`: many runs judged together, pass rates with confidence bounds.

use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::campaign::{aggregate, merge, shard_of, Partial, RunRow};
use crate::config::Config;
use crate::report::Report;

use super::gate::replay_report;
use super::EXIT_OK;

/// `campaign` arguments.
#[derive(Debug, clap::Args)]
pub struct CampaignArgs {
    /// A folder of logs, or a pattern with `*` in the file name (e.g. runs/run-*.plb).
    #[arg(required_unless_present = "merge")]
    pub logs: Option<String>,
    /// Run only this shard of the runs, `K/N` (K from 1): run i of the sorted list goes to
    /// shard i mod N + 1. `slurm` takes K and N from a Slurm array job
    /// (SLURM_ARRAY_TASK_ID, _MIN, _COUNT); `k8s/N` takes K from a Kubernetes indexed Job
    /// (JOB_COMPLETION_INDEX + 1). Needs --partial.
    #[arg(long, value_name = "K/N", requires = "partial", conflicts_with_all = ["merge", "report", "html", "max_failure_rate"])]
    pub shard: Option<String>,
    /// Where a shard writes its partial result (JSON), for `--merge`.
    #[arg(long, value_name = "FILE", requires = "shard")]
    pub partial: Option<PathBuf>,
    /// Merge shards' partial results (files, or folders of `*.json`) into the campaign's
    /// report, table and HTML, instead of replaying runs.
    #[arg(long, value_name = "PARTIAL", num_args = 1.., conflicts_with = "logs")]
    pub merge: Vec<PathBuf>,
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

/// The shard `K/N` a spec names (`K/N`, `slurm`, `k8s/N`), reading the scheduler's
/// variables from `env`.
pub fn parse_shard(spec: &str, env: &dyn Fn(&str) -> Option<String>) -> Result<(u64, u64), String> {
    let num = |name: &str| -> Result<u64, String> {
        let v = env(name).ok_or_else(|| format!("--shard {spec}: {name} is not set"))?;
        v.trim().parse::<u64>().map_err(|_| format!("--shard {spec}: {name} = {v:?} is not a whole number"))
    };
    let (k, n) = if spec == "slurm" {
        let id = num("SLURM_ARRAY_TASK_ID")?;
        let min = env("SLURM_ARRAY_TASK_MIN").map_or(Ok(0), |_| num("SLURM_ARRAY_TASK_MIN"))?;
        (
            id.checked_sub(min)
                .ok_or_else(|| format!("--shard {spec}: task id below the array's minimum"))?
                + 1,
            num("SLURM_ARRAY_TASK_COUNT")?,
        )
    } else if let Some(n) = spec.strip_prefix("k8s/") {
        let n =
            n.parse::<u64>().map_err(|_| format!("--shard {spec}: k8s/N with N the Job's completions"))?;
        (num("JOB_COMPLETION_INDEX")? + 1, n)
    } else {
        let (k, n) =
            spec.split_once('/').ok_or_else(|| format!("--shard {spec}: the form K/N, slurm or k8s/N"))?;
        let parse = |x: &str| {
            x.trim().parse::<u64>().map_err(|_| format!("--shard {spec}: the form K/N with whole numbers"))
        };
        (parse(k)?, parse(n)?)
    };
    if n == 0 || k == 0 || k > n {
        return Err(format!("--shard {spec}: shard {k} of {n} (K from 1 to N)"));
    }
    Ok((k, n))
}

/// Partial results named on the command line: files, and the `*.json` of folders, sorted.
fn partial_files(args: &[PathBuf]) -> Result<Vec<PathBuf>, String> {
    let mut out = Vec::new();
    for p in args {
        if p.is_dir() {
            let mut in_dir: Vec<PathBuf> = std::fs::read_dir(p)
                .map_err(|e| format!("{}: {e}", p.display()))?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|q| q.extension().is_some_and(|x| x == "json"))
                .collect();
            in_dir.sort();
            out.extend(in_dir);
        } else {
            out.push(p.clone());
        }
    }
    if out.is_empty() {
        return Err("--merge: no partial results found".into());
    }
    Ok(out)
}

/// Replays the runs at `indexes` of `logs` in parallel, each into its row.
fn replay_rows(
    cfg: &Config,
    a: &CampaignArgs,
    logs: &[PathBuf],
    indexes: &[u64],
) -> Result<Vec<RunRow>, String> {
    if let Some(d) = &a.out_dir {
        std::fs::create_dir_all(d).map_err(|e| format!("{}: {e}", d.display()))?;
    }
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(indexes.len() as u64),
        indicatif::ProgressDrawTarget::stderr(),
    );
    let pool =
        rayon::ThreadPoolBuilder::new().num_threads(a.jobs.max(1)).build().map_err(|e| e.to_string())?;
    let results: Vec<Result<Report, String>> = pool.install(|| {
        indexes
            .par_iter()
            .map(|&i| {
                let log = &logs[i as usize];
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
    Ok(indexes
        .iter()
        .zip(results)
        .map(|(&i, r)| {
            let log = &logs[i as usize];
            match r {
                Ok(rep) => RunRow::replayed(i, &rep),
                Err(e) => {
                    errln!("plumbline campaign: {}: {e}", log.display());
                    RunRow::unreadable(i, &log.display().to_string(), &e)
                }
            }
        })
        .collect())
}

/// Runs `campaign`: every run, one shard of them (`--shard`), or the merge of shards.
pub fn campaign_cmd(cfg: &Config, a: &CampaignArgs) -> u8 {
    let rows = if !a.merge.is_empty() {
        merged_rows(cfg, &a.merge)
    } else {
        let logs = match expand(a.logs.as_deref().unwrap_or_default()) {
            Ok(l) => l,
            Err(e) => return super::fail("campaign", e),
        };
        if let Some(spec) = &a.shard {
            return shard_cmd(cfg, a, spec, &logs);
        }
        let all: Vec<u64> = (0..logs.len() as u64).collect();
        replay_rows(cfg, a, &logs, &all)
    };
    let rows = match rows {
        Ok(r) => r,
        Err(e) => return super::fail("campaign", e),
    };
    let agg = aggregate(&cfg.rules, &cfg.digest(), &rows);
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

/// Reads and merges the partials.
fn merged_rows(cfg: &Config, args: &[PathBuf]) -> Result<Vec<RunRow>, String> {
    let mut parts = Vec::new();
    for f in partial_files(args)? {
        let name = f.display().to_string();
        let text = std::fs::read_to_string(&f).map_err(|e| format!("{name}: {e}"))?;
        let p: Partial =
            serde_json::from_str(&text).map_err(|e| format!("{name}: not a campaign partial result: {e}"))?;
        parts.push((name, p));
    }
    merge(&parts, &cfg.digest())
}

/// Runs one shard and writes its partial result.
fn shard_cmd(cfg: &Config, a: &CampaignArgs, spec: &str, logs: &[PathBuf]) -> u8 {
    let (k, n) = match parse_shard(spec, &|v| std::env::var(v).ok()) {
        Ok(x) => x,
        Err(e) => return super::fail("campaign", e),
    };
    let mine: Vec<u64> = (0..logs.len() as u64).filter(|&i| shard_of(i, n) == k).collect();
    let rows = match replay_rows(cfg, a, logs, &mine) {
        Ok(r) => r,
        Err(e) => return super::fail("campaign", e),
    };
    let names: Vec<String> = logs.iter().map(|l| l.display().to_string()).collect();
    let partial = Partial::new(&cfg.digest(), k, n, &names, rows);
    let path = a.partial.as_deref().expect("clap requires --partial with --shard");
    let text = serde_json::to_string(&partial).unwrap_or_default();
    if let Err(e) = std::fs::write(path, text) {
        return super::fail("campaign", format!("{}: {e}", path.display()));
    }
    outln!("shard {k}/{n}: {} of {} runs, partial result in {}", mine.len(), logs.len(), path.display());
    EXIT_OK
}

#[cfg(test)]
mod tests {
    use super::parse_shard;

    #[test]
    fn shards_from_the_command_line_and_from_the_schedulers() {
        let none = |_: &str| None;
        assert_eq!(parse_shard("2/7", &none), Ok((2, 7)));
        assert!(parse_shard("0/7", &none).is_err() && parse_shard("8/7", &none).is_err());
        assert!(parse_shard("2-7", &none).unwrap_err().contains("K/N"));
        // Slurm: `--array=0-3` gives ids 0..3 with MIN 0 and COUNT 4; `--array=1-4` MIN 1.
        let slurm = |id: &'static str, min: &'static str| {
            move |v: &str| match v {
                "SLURM_ARRAY_TASK_ID" => Some(id.to_string()),
                "SLURM_ARRAY_TASK_MIN" => Some(min.to_string()),
                "SLURM_ARRAY_TASK_COUNT" => Some("4".to_string()),
                _ => None,
            }
        };
        assert_eq!(parse_shard("slurm", &slurm("0", "0")), Ok((1, 4)));
        assert_eq!(parse_shard("slurm", &slurm("4", "1")), Ok((4, 4)));
        assert!(parse_shard("slurm", &none).unwrap_err().contains("SLURM_ARRAY_TASK_ID is not set"));
        // A Kubernetes indexed Job: JOB_COMPLETION_INDEX from 0.
        let k8s = |v: &str| (v == "JOB_COMPLETION_INDEX").then(|| "2".to_string());
        assert_eq!(parse_shard("k8s/5", &k8s), Ok((3, 5)));
    }
}
