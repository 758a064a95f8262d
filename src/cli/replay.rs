//! `plumbline replay LOG [--report FILE] [--series FILE]`.

use std::fmt::Write as _;
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::PathBuf;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use crate::config::Config;
use crate::metrics::Metric;
use crate::msg::Role;
use crate::replay::{replay, ReplayOptions};
use crate::report::Report;
use crate::rules::{critical_failed, AlertEvent, Direction, Outcome};

use crate::logio::journal::Journal;

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The log to replay (.jsonl or .plb).
    pub log: PathBuf,
    /// Write the JSON report here.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Write the long-form series (t,metric,value) here.
    #[arg(long, value_name = "FILE")]
    pub series: Option<PathBuf>,
    /// Write a self-contained HTML report with plots here.
    #[arg(long, value_name = "FILE")]
    pub html: Option<PathBuf>,
    /// Append alert events here as JSON lines, flushed on every event.
    #[arg(long, value_name = "FILE")]
    pub journal: Option<PathBuf>,
    /// Print nothing on stdout.
    #[arg(long)]
    pub quiet: bool,
}

/// Runs the command.
pub fn run(cfg: &Config, a: &Args) -> u8 {
    let size = std::fs::metadata(&a.log).map(|m| m.len()).unwrap_or(0);
    let bar = ProgressBar::with_draw_target(Some(size), ProgressDrawTarget::stderr());
    if let Ok(style) = ProgressStyle::with_template("{bar:40} {bytes}/{total_bytes} {bytes_per_sec} {eta}") {
        bar.set_style(style);
    }
    let progress = |b: u64| bar.set_position(b);
    let mut series_file = match &a.series {
        None => None,
        Some(p) => match File::create(p) {
            Ok(f) => Some(BufWriter::with_capacity(1 << 20, f)),
            Err(e) => {
                errln!("plumbline replay: {}: {e}", p.display());
                return super::EXIT_INPUT;
            }
        },
    };
    let mut journal = match &a.journal {
        None => None,
        Some(p) => match Journal::open(p) {
            Ok(j) => Some(j),
            Err(e) => {
                errln!("plumbline replay: {}: {e}", p.display());
                return super::EXIT_INPUT;
            }
        },
    };
    let mut plots = crate::html::Series::default();
    let want_plots = a.html.is_some();
    let mut hook = |samples: &[crate::core::Sample], events: &[AlertEvent]| {
        if want_plots {
            plots.add(samples);
        }
        if let Some(j) = journal.as_mut() {
            for e in events {
                j.append(e);
            }
        }
    };
    let opts = ReplayOptions {
        series: series_file.as_mut().map(|w| w as &mut (dyn Write + Send)),
        progress: &progress,
        on_samples: Some(&mut hook),
    };
    let out = match replay(cfg, &a.log, opts) {
        Ok(o) => o,
        Err(e) => {
            bar.finish_and_clear();
            errln!("plumbline replay: cannot read input: {e}");
            return super::EXIT_INPUT;
        }
    };
    bar.finish_and_clear();
    if let Some(p) = &a.report {
        if let Err(e) = std::fs::write(p, out.report.to_json()) {
            errln!("plumbline replay: {}: {e}", p.display());
            return super::EXIT_INPUT;
        }
    }
    if let Some(p) = &a.html {
        if let Err(e) = std::fs::write(p, crate::html::run_report(&out.report, &plots)) {
            errln!("plumbline replay: {}: {e}", p.display());
            return super::EXIT_INPUT;
        }
    }
    if !a.quiet {
        out!("{}", summary(&out.report));
    }
    if let Some(why) = out.report.not_evaluable() {
        errln!("plumbline replay: {}: {why}", a.log.display());
        return super::EXIT_INPUT;
    }
    if critical_failed(&out.report.verdicts) {
        super::EXIT_FAIL
    } else {
        super::EXIT_OK
    }
}

fn num(v: f64) -> String {
    if v == 0.0 {
        "0".into()
    } else if v.abs() >= 1e4 || v.abs() < 1e-3 {
        format!("{v:.3e}")
    } else {
        format!("{v:.4}")
    }
}

fn counts<K: std::fmt::Display>(m: &std::collections::BTreeMap<K, u64>) -> String {
    m.iter().map(|(k, v)| format!("{k} {v}")).collect::<Vec<_>>().join(", ")
}

/// The readable summary printed on stdout.
pub fn summary(r: &Report) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "plumbline report of {} ({:.1} s of stamps)", r.input, r.duration_s);
    let rec = &r.records;
    let _ = write!(s, "records: {} accepted, {} rejected", rec.accepted, rec.rejected);
    if rec.rejected > 0 {
        let _ = write!(s, " ({})", counts(&rec.rejected_by_reason));
    }
    s.push('\n');
    for b in rec.first_rejected.iter().take(5) {
        let _ = writeln!(
            s,
            "  {}: {}{}",
            b.at,
            b.detail,
            b.role.as_ref().map(|r| format!(" [{r}]")).unwrap_or_default()
        );
    }
    if rec.first_rejected.len() > 5 {
        let _ = writeln!(s, "  ... {} more in the report", rec.rejected as usize - 5);
    }
    if let Some(t) = &rec.tail {
        let _ =
            writeln!(s, "damaged tail at byte {}: {} (everything before it replayed)", t.offset, t.reason);
    }
    let d = &r.records.damaged;
    if d.stretches > 0 {
        let at: Vec<String> =
            d.first.iter().take(5).map(|x| format!("byte {} ({} bytes)", x.offset, x.bytes)).collect();
        let more = if d.stretches > 5 { format!(" and {} more", d.stretches - 5) } else { String::new() };
        let _ = writeln!(
            s,
            "damaged: {} stretches, {} bytes skipped, about {} records lost, at {}{more}; the rest replayed",
            d.stretches,
            d.bytes,
            d.records,
            at.join(", ")
        );
    }
    let st = &r.steps;
    let families = [
        ("tracking", &st.tracking),
        ("ego", &st.ego),
        ("clearance", &st.clearance),
        ("path following", &st.path_following),
        ("clearance budget", &st.budget),
        ("plan", &st.plans),
    ];
    let mut late = false;
    for (name, st) in families {
        if name != "tracking" && name != "ego" && st.evaluated + st.skipped == 0 {
            continue;
        }
        late |= st.skipped_by_reason.keys().any(|k| k.ends_with("_in_time") || k.ends_with("_late"));
        let _ = write!(
            s,
            "{name} steps: {} evaluated (exact {}, interpolated {}, last before within tolerance {}), {} skipped",
            st.evaluated, st.exact, st.interpolated, st.fallback, st.skipped
        );
        if st.skipped > 0 {
            let _ = write!(s, " ({})", counts(&st.skipped_by_reason));
        }
        if st.approximate > 0 {
            let _ = write!(
                s,
                "; {} assigned greedily past limits.exact_assignment_cells (their gospa and ospa are upper bounds)",
                st.approximate
            );
        }
        s.push('\n');
    }
    if late {
        let wait = r.definitions.get("time.max_wait").and_then(|v| v.as_f64()).unwrap_or(f64::NAN);
        let _ = write!(
            s,
            "  steps skipped as *_in_time or *_late: what they read came later than time.max_wait ({wait} s) after them, or not at all;"
        );
        let lat: Vec<String> = r
            .transport
            .iter()
            .filter_map(|(role, t)| {
                t.latency_s.as_ref().filter(|l| l.p99 > wait).map(|l| format!("{role} {:.3} s", l.p99))
            })
            .collect();
        if lat.is_empty() {
            let _ = writeln!(s, " no role arrives that late (a gap in the reference?)");
        } else {
            let _ = writeln!(
                s,
                " latency p99 above it: {} (a time.max_wait above that would have found them)",
                lat.join(", ")
            );
        }
    }
    if r.records.non_finite_samples > 0 {
        let _ = writeln!(s, "{} non-finite metric values dropped", r.records.non_finite_samples);
    }
    // The longest metric name sets the first column, so every number stays in its column.
    let w = Metric::ALL.iter().map(|m| m.name().len()).max().unwrap_or(26);
    let _ = writeln!(s, "\n{:<w$} {:>8} {:>11} {:>11} {:>11}", "metric", "count", "mean", "p95", "max");
    for m in Metric::ALL {
        if let Some(st) = r.metrics.get(m.name()) {
            let _ = writeln!(
                s,
                "{:<w$} {:>8} {:>11} {:>11} {:>11}",
                m.name(),
                st.count,
                num(st.mean),
                num(st.p95),
                num(st.max)
            );
        }
    }
    if !r.totals.is_empty() {
        let t: Vec<String> = r.totals.iter().map(|(k, v)| format!("{k} {v}")).collect();
        let _ = writeln!(s, "totals: {}", t.join(", "));
    }
    if let Some(c) = &r.nees_consistency {
        let _ = writeln!(
            s,
            "nees: mean {:.3} over {} pairs; 95% chi-square interval [{:.3}, {:.3}]: {}",
            c.mean,
            c.n,
            c.lower,
            c.upper,
            if c.inside { "consistent" } else { "inconsistent" }
        );
    }
    if !r.transport.is_empty() {
        let _ = writeln!(
            s,
            "\n{:<20} {:>8} {:>16} {:>16} {:>20} {:>8} {:>17}",
            "role",
            "messages",
            "latency p50 (s)",
            "latency p99 (s)",
            "interarrival p99 (s)",
            "rejected",
            "stamp regressions"
        );
        for role in Role::ALL {
            let Some(t) = r.transport.get(role.name()) else {
                continue;
            };
            let f = |x: Option<f64>| x.map(num).unwrap_or_else(|| "-".into());
            let _ = writeln!(
                s,
                "{:<20} {:>8} {:>16} {:>16} {:>20} {:>8} {:>17}",
                role.name(),
                t.messages,
                f(t.latency_s.map(|x| x.p50)),
                f(t.latency_s.map(|x| x.p99)),
                f(t.interarrival_s.map(|x| x.p99)),
                t.rejected,
                t.stamp_regressions
            );
        }
    }
    if !r.collisions.is_empty() {
        let _ = writeln!(s, "\ncollisions ({}):", r.collisions.len() as u64 + r.collisions_dropped);
        for c in r.collisions.iter().take(10) {
            let _ = writeln!(s, "  {:.3} s to {:.3} s with {}", c.start, c.end, c.obstacle);
        }
    }
    if !r.alerts.is_empty() {
        let _ = writeln!(s, "\nalerts ({} events):", r.alerts.len() as u64 + r.alerts_dropped);
        for e in r.alerts.iter().take(20) {
            let role = e.role.as_ref().map(|x| format!(" [{x}]")).unwrap_or_default();
            let _ = writeln!(
                s,
                "  t={:>9.3} {:<8} {:<9} {}{}: {} {} over {} = {} (threshold {})",
                e.t,
                e.kind,
                e.severity,
                e.rule,
                role,
                e.stat,
                e.metric,
                e.window,
                num(e.value),
                num(e.threshold)
            );
        }
        if r.alerts.len() > 20 {
            let _ = writeln!(s, "  ... {} more in the report", r.alerts.len() - 20);
        }
    }
    if !r.verdicts.is_empty() {
        let _ = writeln!(
            s,
            "\n{:<28} {:<9} {:<8} {:<18} {:>11} {:>13} {:>12}",
            "rule", "severity", "verdict", "statistic", "worst", "threshold", "times raised"
        );
        for v in &r.verdicts {
            let worst = v.worst.map(num).unwrap_or_else(|| "-".into());
            let stat = format!("{} over {}", v.stat, v.window);
            let sign = if v.direction == Direction::Above { ">" } else { "<" };
            let verdict =
                if v.verdict == Outcome::NoData && v.fails_run { "no_data!" } else { v.verdict.name() };
            let _ = writeln!(
                s,
                "{:<28} {:<9} {:<8} {:<18} {:>11} {:>13} {:>12}",
                v.rule,
                v.severity,
                verdict,
                stat,
                worst,
                format!("fails {sign} {}", num(v.threshold)),
                v.raised
            );
        }
        let failed = r.verdicts.iter().filter(|v| v.verdict == Outcome::Fail).count();
        let critical = r.verdicts.iter().filter(|v| v.fails_run).count();
        let _ = writeln!(
            s,
            "{failed} rule(s) failed, {critical} failing the run; worst: the worst judged value of the statistic (a sliding rule fails only when its breach held for its sustain time)"
        );
        if r.verdicts.iter().any(|v| v.verdict == Outcome::NoData && v.fails_run) {
            let _ = writeln!(s, "no_data!: a critical rule without data fails the run (set allow_no_data = true on it if that is acceptable)");
        }
    }
    s
}
