//! The command line from the outside: exit codes, messages, report and series files.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

use std::collections::BTreeMap;
use std::path::Path;
use std::process::Output;

mod support;

use support::bin;

fn plumbline(args: &[&str]) -> Output {
    bin().args(args).output().expect("binary runs")
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

#[test]
fn replay_of_the_shipped_log_prints_a_summary_and_writes_report_and_series() {
    let dir = tempfile::tempdir().unwrap();
    let report = dir.path().join("r.json");
    let series = dir.path().join("s.csv");
    let out = plumbline(&[
        "replay",
        "replay-logs/campus-loop.jsonl",
        "--report",
        report.to_str().unwrap(),
        "--series",
        series.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    let stdout = text(&out.stdout);
    for needle in
        ["gospa", "ospa", "ego_position_error_m", "tracking steps: 600 evaluated", "estimate/objects"]
    {
        assert!(stdout.contains(needle), "summary lacks {needle}:\n{stdout}");
    }
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    for key in
        ["version", "config_digest", "input_digest", "duration_s", "steps", "metrics", "alerts", "verdicts"]
    {
        assert!(r.get(key).is_some(), "report lacks {key}");
    }
    let g = &r["metrics"]["gospa"];
    for k in ["count", "mean", "min", "max", "p50", "p95", "p99"] {
        assert!(g[k].is_number(), "gospa lacks {k}");
    }
    assert_eq!(g["count"], support::SHIPPED_TRACKING_STEPS);
    // The series has one row per sample; its gospa rows agree with the report's count
    // and mean (the mean recomputed from the written numbers).
    let csv = std::fs::read_to_string(&series).unwrap();
    let mut lines = csv.lines();
    assert_eq!(lines.next(), Some("t,metric,value"));
    let gospa: Vec<f64> = lines
        .filter_map(|l| {
            let mut it = l.split(',');
            let (_, m, v) = (it.next()?, it.next()?, it.next()?);
            (m == "gospa").then(|| v.parse().unwrap())
        })
        .collect();
    assert_eq!(gospa.len() as u64, support::SHIPPED_TRACKING_STEPS);
    let mean = gospa.iter().sum::<f64>() / support::SHIPPED_TRACKING_STEPS as f64;
    assert!((mean - g["mean"].as_f64().unwrap()).abs() < 1e-9);
}

#[test]
fn unreadable_input_exits_2() {
    let out = plumbline(&["replay", "replay-logs/does-not-exist.jsonl"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(text(&out.stderr).contains("does-not-exist"));
}

#[test]
fn config_errors_exit_2_and_name_file_and_key() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = dir.path().join("bad.toml");
    std::fs::write(&cfg, "[tracking]\ncutof_m = 2.0\n").unwrap();
    let out = plumbline(&["--config", cfg.to_str().unwrap(), "replay", "replay-logs/campus-loop.jsonl"]);
    assert_eq!(out.status.code(), Some(2));
    let err = text(&out.stderr);
    assert!(err.contains("bad.toml") && err.contains("tracking.cutof_m"), "{err}");
    let out = plumbline(&["replay", "replay-logs/campus-loop.jsonl", "--set", "tracking.order=0"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(text(&out.stderr).contains("tracking.order"));
}

#[test]
fn set_overrides_change_the_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let r1 = dir.path().join("a.json");
    let r2 = dir.path().join("b.json");
    let log = "replay-logs/campus-loop.jsonl";
    assert!(plumbline(&["replay", log, "--quiet", "--report", r1.to_str().unwrap()]).status.success());
    assert!(plumbline(&[
        "replay",
        log,
        "--quiet",
        "--set",
        "tracking.alpha=1",
        "--report",
        r2.to_str().unwrap()
    ])
    .status
    .success());
    let a: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&r1).unwrap()).unwrap();
    let b: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&r2).unwrap()).unwrap();
    assert_ne!(a["config_digest"], b["config_digest"]);
    // alpha != 2: the total only (SPEC §6).
    assert!(b["metrics"].get("gospa").is_some());
    assert!(b["metrics"].get("gospa_missed").is_none());
    assert!(b["metrics"].get("assigned_count").is_none());
    assert!(a["metrics"].get("gospa_missed").is_some());
}

#[test]
fn convert_round_trips_and_scenario_regenerates_the_shipped_logs() {
    let dir = tempfile::tempdir().unwrap();
    let gen = dir.path().join("gen.jsonl");
    let out = plumbline(&["scenario", "--out", gen.to_str().unwrap(), "--seed", "1", "--duration", "60"]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let shipped =
        std::fs::read(Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl")).unwrap();
    assert_eq!(std::fs::read(&gen).unwrap(), shipped, "the shipped log is what the command makes");
    let plb = dir.path().join("x.plb");
    let back = dir.path().join("back.jsonl");
    assert!(plumbline(&["convert", gen.to_str().unwrap(), plb.to_str().unwrap()]).status.success());
    assert!(plumbline(&["convert", plb.to_str().unwrap(), back.to_str().unwrap()]).status.success());
    assert_eq!(std::fs::read(&back).unwrap(), shipped);
}

#[test]
fn rig_profile_raises_alerts_journals_them_and_exits_1_on_a_critical_failure() {
    let dir = tempfile::tempdir().unwrap();
    let journal = dir.path().join("alerts.jsonl");
    let report = dir.path().join("r.json");
    let out = plumbline(&[
        "--config",
        "config/rig.toml",
        "replay",
        "replay-logs/campus-loop.jsonl",
        "--journal",
        journal.to_str().unwrap(),
        "--report",
        report.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out.stderr));
    let stdout = text(&out.stdout);
    assert!(stdout.contains("localization-error") && stdout.contains("critical"), "{stdout}");
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    let alerts = r["alerts"].as_array().unwrap();
    assert!(!alerts.is_empty());
    let lines: Vec<serde_json::Value> = std::fs::read_to_string(&journal)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(&lines, alerts, "the journal holds exactly the report's events");
    let v = r["verdicts"].as_array().unwrap();
    let loc = v.iter().find(|v| v["rule"] == "localization-error").unwrap();
    assert_eq!(loc["verdict"], "fail");
    // The field profile also loads and runs.
    let out =
        plumbline(&["--config", "config/field.toml", "replay", "replay-logs/campus-loop.jsonl", "--quiet"]);
    assert!(matches!(out.status.code(), Some(0) | Some(1)), "{}", text(&out.stderr));
}

#[test]
fn gate_fails_on_a_planted_regression_and_passes_without_it() {
    let dir = tempfile::tempdir().unwrap();
    let base = dir.path().join("base.json");
    let junit = dir.path().join("gate.xml");
    let worse = dir.path().join("worse.jsonl");
    assert!(plumbline(&[
        "replay",
        "replay-logs/campus-loop.jsonl",
        "--quiet",
        "--report",
        base.to_str().unwrap()
    ])
    .status
    .success());
    let out = plumbline(&[
        "gate",
        "--baseline",
        base.to_str().unwrap(),
        "replay-logs/campus-loop.jsonl",
        "--junit",
        junit.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stdout));
    let x = std::fs::read_to_string(&junit).unwrap();
    assert!(x.contains("<testsuite name=\"plumbline-gate\"") && x.contains("failures=\"0\""), "{x}");
    // Plant a regression: the same run with a noisier tracker.
    let noisy = ["scenario", "--out", worse.to_str().unwrap(), "--seed", "1", "--noise", "0.3"];
    assert!(plumbline(&noisy).status.success());
    let out = plumbline(&[
        "gate",
        "--baseline",
        base.to_str().unwrap(),
        worse.to_str().unwrap(),
        "--junit",
        junit.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1));
    assert!(text(&out.stdout).contains("gospa") && text(&out.stdout).contains("regressed"));
    assert!(std::fs::read_to_string(&junit).unwrap().contains("type=\"regression\""));
}

#[test]
fn campaign_over_a_seeded_family_reports_rates_with_intervals() {
    let dir = tempfile::tempdir().unwrap();
    let fam = dir.path().join("fam");
    let agg = dir.path().join("agg.json");
    let gen = ["scenario", "--runs", "6", "--seed", "3", "--duration", "20", "--out", fam.to_str().unwrap()];
    assert!(plumbline(&gen).status.success());
    let out = plumbline(&[
        "--config",
        "config/rig.toml",
        "campaign",
        fam.to_str().unwrap(),
        "--jobs",
        "2",
        "--report",
        agg.to_str().unwrap(),
    ]);
    // Every run has the scripted contact, a critical rule: the campaign fails.
    assert_eq!(out.status.code(), Some(1), "{}", text(&out.stderr));
    let a: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&agg).unwrap()).unwrap();
    assert_eq!(a["runs"], 6);
    let contact = a["rules"].as_array().unwrap().iter().find(|r| r["rule"] == "collision").unwrap();
    let rate = &contact["failure_rate"];
    // Every run has the scripted contact: 6 of 6, Clopper-Pearson lower bound (0.025)^(1/6).
    assert_eq!(rate["failures"], 6);
    assert!((rate["lower"].as_f64().unwrap() - 0.025f64.powf(1.0 / 6.0)).abs() < 1e-6);
    assert_eq!(rate["upper"], 1.0);
    assert!(a["metrics"]["gospa"]["runs"] == 6);
}

#[test]
fn html_reports_are_self_contained_with_plots() {
    let dir = tempfile::tempdir().unwrap();
    let html = dir.path().join("run.html");
    let out = plumbline(&[
        "--config",
        "config/rig.toml",
        "replay",
        "replay-logs/campus-loop.jsonl",
        "--quiet",
        "--html",
        html.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1));
    let page = std::fs::read_to_string(&html).unwrap();
    for needle in [
        "GOSPA and its parts",
        "Clearance (collisions shaded red)",
        "Ego pose error",
        "Latency per role",
        "Alerts raised",
        "time (s)",
    ] {
        assert!(page.contains(needle), "{needle} missing");
    }
    assert!(page.matches("<svg").count() >= 5);
    // No network: no scripts, no external references besides the SVG namespace.
    assert!(!page.contains("<script") && !page.contains("<link"));
    let external = page.matches("http").count();
    let namespaces = page.matches("http://www.w3.org/2000/svg").count();
    assert_eq!(external, namespaces, "only SVG namespace URIs may appear");
}

/// The binary started from the project's folder with stdout and stderr piped.
fn spawn_piped(args: &[&str]) -> std::process::Child {
    use std::process::Stdio;
    bin().args(args).stdout(Stdio::piped()).stderr(Stdio::piped()).spawn().expect("binary runs")
}

#[test]
fn a_reader_that_quits_early_does_not_panic_the_command() {
    // `plumbline replay LOG | head -c 0`: stdout is a pipe whose reader is already gone.
    // The summary cannot be written; the command must still write its report and exit
    // with the code of what it found (0 on the shipped log), not die in a panic (101).
    let dir = tempfile::tempdir().unwrap();
    let report = dir.path().join("r.json");
    let mut child =
        spawn_piped(&["replay", "replay-logs/campus-loop.jsonl", "--report", report.to_str().unwrap()]);
    drop(child.stdout.take());
    let out = child.wait_with_output().unwrap();
    let stderr = text(&out.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(out.status.code(), Some(0), "{stderr}");
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    assert_eq!(r["steps"]["tracking"]["evaluated"], support::SHIPPED_TRACKING_STEPS, "{r}");
}

#[test]
fn a_closed_stderr_does_not_panic_the_command() {
    // `plumbline replay MISSING 2>&-`-like: stderr is a pipe whose reader is gone. The
    // error message cannot be written; the exit code must still say the input could not be
    // read (2), not a panic (101).
    let mut child = spawn_piped(&["replay", "no-such-log.jsonl"]);
    drop(child.stderr.take());
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(2));
}

/// Inputs that hold nothing to judge never give a green. Before: an empty `.jsonl`, a
/// folder given as the log, an estimates-only log (600 steps skipped, every critical rule
/// `no_data`) and a log whose reference is always late all exited 0.
#[test]
fn nothing_to_judge_exits_2_with_the_reason() {
    let dir = tempfile::tempdir().unwrap();
    let empty = dir.path().join("empty.jsonl");
    std::fs::write(&empty, "").unwrap();
    let out = plumbline(&["replay", empty.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2), "{}", text(&out.stderr));
    assert!(text(&out.stderr).contains("no evaluated step"), "{}", text(&out.stderr));

    let out = plumbline(&["replay", dir.path().to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    assert!(text(&out.stderr).contains("is a folder"), "{}", text(&out.stderr));

    // Estimates only: every tracking and ego step skipped for want of a reference.
    let shipped =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl"))
            .unwrap();
    let est: String =
        shipped.lines().filter(|l| l.contains("\"rig/estimate/")).map(|l| format!("{l}\n")).collect();
    let only = dir.path().join("estimates.jsonl");
    std::fs::write(&only, est).unwrap();
    let out = plumbline(&["--config", "config/rig.toml", "replay", only.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2), "{}", text(&out.stderr));
    let err = text(&out.stderr);
    assert!(err.contains("no evaluated step") && err.contains("no_reference"), "{err}");

    // The reference always 3 s late (max_wait 0.5 s): tracking steps skip; the ego steps
    // still judge, and the critical tracking requirement without data fails the run.
    // A late message is also later in the log: the records go in arrival order.
    let mut late: Vec<(f64, String)> = shipped
        .lines()
        .map(|l| {
            let mut v: serde_json::Value = serde_json::from_str(l).unwrap();
            if l.contains("\"rig/reference/objects\"") {
                v["recv"] = serde_json::json!(v["recv"].as_f64().unwrap() + 3.0);
            }
            (v["recv"].as_f64().unwrap(), format!("{v}\n"))
        })
        .collect();
    late.sort_by(|a, b| a.0.total_cmp(&b.0));
    let late: String = late.into_iter().map(|(_, l)| l).collect();
    let late_log = dir.path().join("late.jsonl");
    std::fs::write(&late_log, late).unwrap();
    let report = dir.path().join("late.json");
    let out = plumbline(&[
        "--config",
        "config/rig.toml",
        "replay",
        late_log.to_str().unwrap(),
        "--report",
        report.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out.stdout));
    let r: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    let v =
        r["verdicts"].as_array().unwrap().iter().find(|v| v["rule"] == "run-tracking-error").unwrap().clone();
    assert_eq!((v["verdict"].as_str(), v["fails_run"].as_bool()), (Some("no_data"), Some(true)), "{v}");
    // Unless the rule says that no data is acceptable.
    let rule = "[[rule]]\nname = \"run-tracking-error\"\nmetric = \"gospa\"\nwindow = \"run\"\nstat = \"mean\"\nabove = 3.0\nseverity = \"critical\"\n";
    for (extra, code) in [("", 1), ("allow_no_data = true\n", 0)] {
        let cfg = dir.path().join("one-rule.toml");
        std::fs::write(&cfg, format!("{rule}{extra}")).unwrap();
        let out = plumbline(&["--config", cfg.to_str().unwrap(), "replay", late_log.to_str().unwrap()]);
        assert_eq!(out.status.code(), Some(code), "{extra}: {}", text(&out.stdout));
    }
}

/// A campaign is never green by default when a run fails a critical rule or cannot be
/// judged whole; with `--max-failure-rate` it fails exactly when a critical rule's
/// Clopper-Pearson upper bound exceeds the rate. Before: a campaign exited 0 with 30 of 30
/// runs failing a critical rule and with an unreadable file among the runs.
#[test]
fn campaign_exit_codes_follow_failures_incomplete_runs_and_the_rate() {
    let dir = tempfile::tempdir().unwrap();
    let fam = dir.path().join("fam");
    let gen = ["scenario", "--runs", "6", "--seed", "5", "--duration", "10", "--out", fam.to_str().unwrap()];
    assert!(plumbline(&gen).status.success());
    // One critical rule that every run passes (a run-mean GOSPA far below 100 m).
    let cfg = dir.path().join("pass.toml");
    std::fs::write(
        &cfg,
        "[[rule]]\nname = \"loose\"\nmetric = \"gospa\"\nwindow = \"run\"\nstat = \"mean\"\nabove = 100.0\nseverity = \"critical\"\n",
    )
    .unwrap();
    let campaign = |extra: &[&str]| {
        let agg = dir.path().join("agg.json");
        let mut args = vec!["--config", cfg.to_str().unwrap(), "campaign", fam.to_str().unwrap(), "--report"];
        args.push(agg.to_str().unwrap());
        args.extend_from_slice(extra);
        let out = plumbline(&args);
        let a: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&agg).unwrap()).unwrap();
        (out.status.code(), a)
    };
    let (code, a) = campaign(&[]);
    assert_eq!(code, Some(0));
    assert_eq!(a["rules"][0]["failure_rate"]["failures"], 0);
    // 0 failures in 6: the 95% two-sided upper bound is 1 - 0.025^(1/6) = 0.4593 (the
    // closed form of the Clopper-Pearson bound at x = 0; scipy.stats.beta.ppf(0.975, 1, 6)).
    let upper = a["rules"][0]["failure_rate"]["upper"].as_f64().unwrap();
    assert!((upper - (1.0 - 0.025f64.powf(1.0 / 6.0))).abs() < 1e-9, "{upper}");
    assert_eq!(campaign(&["--max-failure-rate", "0.5"]).0, Some(0));
    assert_eq!(campaign(&["--max-failure-rate", "0.4"]).0, Some(1));
    // An unreadable and an empty run among them: listed apart, counted as failures.
    std::fs::write(fam.join("zz-broken.plb"), b"not a log").unwrap();
    std::fs::write(fam.join("zz-empty.jsonl"), b"").unwrap();
    let (code, a) = campaign(&[]);
    assert_eq!(code, Some(1));
    assert_eq!(a["unreadable"].as_array().unwrap().len(), 1);
    assert_eq!(a["empty"].as_array().unwrap().len(), 1);
    assert_eq!(a["rules"][0]["failure_rate"]["failures"], 2);
    assert_eq!(a["rules"][0]["failure_rate"]["runs"], 8);
    // 2 failures in 8 against 0.9: the upper bound (about 0.65) is below it.
    assert_eq!(campaign(&["--max-failure-rate", "0.9"]).0, Some(0));
}

/// A baseline made with `tracking.cutoff_m = 2` and a candidate made with 0.5 measure
/// different things: the gate refuses (exit 2, naming the key) unless the change is
/// declared intended. Before: it called GOSPA "improved".
#[test]
fn gate_refuses_reports_that_define_metrics_differently() {
    let dir = tempfile::tempdir().unwrap();
    let base = dir.path().join("base.json");
    let log = "replay-logs/campus-loop.jsonl";
    assert!(plumbline(&["replay", log, "--quiet", "--report", base.to_str().unwrap()]).status.success());
    let out =
        plumbline(&["--set", "tracking.cutoff_m=0.5", "gate", "--baseline", base.to_str().unwrap(), log]);
    assert_eq!(out.status.code(), Some(2), "{}", text(&out.stdout));
    let err = text(&out.stderr);
    assert!(
        err.contains("tracking.cutoff_m: 2.0 vs 0.5") && err.contains("--allow-definition-change"),
        "{err}"
    );
    let out = plumbline(&[
        "--set",
        "tracking.cutoff_m=0.5",
        "gate",
        "--baseline",
        base.to_str().unwrap(),
        log,
        "--allow-definition-change",
    ]);
    assert_ne!(out.status.code(), Some(2), "{}", text(&out.stderr));
    assert!(text(&out.stdout).contains("gospa"));
}

/// `compare` judges one value per run (its mean), not the autocorrelated steps: 20 field
/// runs from the generator of the simulated family are not told apart from it, and no more
/// than a few of them on their own (the rank test's false alarms run at alpha); 20 runs
/// with twice the tracker noise differ on the tracking metrics and not on localization,
/// which the noise does not touch. Before: per-step KS called eight twins of one
/// generator `differs` with p = 1.2e-37.
#[test]
fn compare_uses_per_run_statistics_with_honest_error_rates() {
    let dir = tempfile::tempdir().unwrap();
    let fam = |name: &str, runs: &str, seed: &str, noise: &str| {
        let out = dir.path().join(name);
        let args = [
            "scenario",
            "--runs",
            runs,
            "--seed",
            seed,
            "--duration",
            "10",
            "--noise",
            noise,
            "--out",
            out.to_str().unwrap(),
        ];
        assert!(plumbline(&args).status.success());
        out
    };
    let sim = fam("sim", "40", "100", "0.12");
    let same = fam("same", "20", "500", "0.12");
    let noisy = fam("noisy", "20", "500", "0.24");
    let metrics = ["gospa", "gospa_localization", "ospa", "ego_position_error_m"];
    let run = |field: &Path| {
        let report = dir.path().join("cmp.json");
        let mut args = vec!["compare", "--field", field.to_str().unwrap(), "--sim", sim.to_str().unwrap()];
        for m in &metrics {
            args.extend(["--metric", m]);
        }
        args.extend(["--report", report.to_str().unwrap()]);
        let out = plumbline(&args);
        let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
        (out.status.code(), v)
    };
    let (code, v) = run(&same);
    assert_eq!(code, Some(0));
    for row in v.as_array().unwrap() {
        assert_eq!(row["verdict"], "not_distinguished", "{}", row["metric"]);
        assert_eq!(row["field_runs"], 20);
        // alpha = 0.05 of 20 runs is 1; four or more happens with probability 1.6%.
        assert!(
            row["share_differs"].as_f64().unwrap() <= 0.15,
            "{}: {}",
            row["metric"],
            row["share_differs"]
        );
    }
    let (code, v) = run(&noisy);
    assert_eq!(code, Some(1), "a family that differs fails the comparison");
    let by: BTreeMap<String, serde_json::Value> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|r| (r["metric"].as_str().unwrap().to_string(), r.clone()))
        .collect();
    for m in ["gospa", "gospa_localization", "ospa"] {
        assert_eq!(by[m]["verdict"], "differs", "{m}");
        assert!(by[m]["ks"]["p_value"].as_f64().unwrap() < 1e-3, "{m}");
        assert!(by[m]["share_differs"].as_f64().unwrap() >= 0.4, "{m}: {}", by[m]["share_differs"]);
    }
    assert_eq!(by["ego_position_error_m"]["verdict"], "not_distinguished");
    // Three simulated runs can never give p < 0.05 for one field run: said, not hidden.
    let few = fam("few", "3", "100", "0.12");
    let report = dir.path().join("few.json");
    let one = same.join("run-0000.plb");
    let out = plumbline(&[
        "compare",
        "--field",
        one.to_str().unwrap(),
        "--sim",
        few.to_str().unwrap(),
        "--metric",
        "gospa",
        "--report",
        report.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&report).unwrap()).unwrap();
    assert_eq!(v[0]["verdict"], "too_few_runs");
}

/// The README's command table lists every command and, for each, exactly the options its
/// `--help` lists (the global ones aside).
#[test]
fn the_readme_command_table_matches_help() {
    let readme = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    let table: Vec<&str> = readme.lines().filter(|l| l.starts_with("| `plumbline ")).collect();
    let help = text(&plumbline(&["--help"]).stdout);
    let commands: Vec<String> = help
        .lines()
        .skip_while(|l| !l.starts_with("Commands:"))
        .skip(1)
        .take_while(|l| l.starts_with("  "))
        .filter_map(|l| l.split_whitespace().next().map(str::to_string))
        .filter(|c| c != "help")
        .collect();
    // Without the live feature the live commands are not built.
    let want = if cfg!(feature = "live") { 12 } else { 7 };
    assert!(commands.len() >= want, "{commands:?}");
    let options = |s: &str| -> std::collections::BTreeSet<String> {
        s.split(|c: char| !(c.is_ascii_alphanumeric() || c == '-'))
            .filter(|w| w.starts_with("--") && w.len() > 2)
            .map(str::to_string)
            .collect()
    };
    for c in &commands {
        let row = table
            .iter()
            .find(|r| {
                r.starts_with(&format!("| `plumbline {c} ")) || r.starts_with(&format!("| `plumbline {c}`"))
            })
            .unwrap_or_else(|| panic!("no README row for `{c}`"));
        let row = row.replace("\\|", "/");
        let cell = row.split('|').nth(1).unwrap();
        let h = text(&plumbline(&[c, "--help"]).stdout);
        let mut want = options(&h);
        for global in ["--config", "--set", "--log-json", "--help"] {
            want.remove(global);
        }
        // Only what the Options section lists, not words of the descriptions.
        let listed: std::collections::BTreeSet<String> = h
            .lines()
            .filter(|l| l.trim_start().starts_with("--") || l.trim_start().starts_with("-"))
            .flat_map(|l| options(l.split("  ").find(|p| !p.trim().is_empty()).unwrap_or("")))
            .filter(|o| want.contains(o))
            .collect();
        assert_eq!(options(cell), listed, "README row for `{c}` against its --help");
    }
}

/// Config errors say where: a TOML syntax error its line and column, a `[[rule]]` key
/// which rule (counted from 1, with its name), a list the form it takes; a taken HTTP port
/// names the key that moves it.
#[test]
fn config_errors_point_at_the_line_the_rule_and_the_form() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("bad.toml");
    std::fs::write(&f, "[tracking]\ncutoff_m = 2.0\n[windows\nlengths = [\"1s\"]\n").unwrap();
    let out = plumbline(&["--config", f.to_str().unwrap(), "replay", "replay-logs/campus-loop.jsonl"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(text(&out.stderr).contains("at line 3, column"), "{}", text(&out.stderr));
    std::fs::write(&f, "[[rule]]\nname = \"a\"\nmetric = \"gospa\"\nwindow = \"1s\"\nstat = \"mean\"\nabove = 1.0\n\n[[rule]]\nname = \"second\"\nmetric = \"gospa\"\nwindow = \"1s\"\nstat = \"mode\"\nabove = 1.0\n").unwrap();
    let err = text(
        &plumbline(&["--config", f.to_str().unwrap(), "replay", "replay-logs/campus-loop.jsonl"]).stderr,
    );
    assert!(err.contains("number 2 in the file") && err.contains("\"second\""), "{err}");
    let err =
        text(&plumbline(&["--set", "windows.lengths=1s", "replay", "replay-logs/campus-loop.jsonl"]).stderr);
    assert!(err.contains("[\"1s\", \"10s\"]"), "{err}");
}
