//! `compare`: field runs against their simulated twins, on per-run statistics.

use std::collections::BTreeMap;
use std::path::PathBuf;

use rayon::prelude::*;
use serde::Serialize;

use crate::config::Config;
use crate::inference::{ks_2samp, Ks};
use crate::metrics::Metric;

use super::campaign::expand;
use super::gate::replay_report;

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
