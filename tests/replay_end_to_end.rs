//! End to end through the replay edge: the shipped log against an independent evaluator,
//! both log forms, torn tails and bad records.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

mod support;

use std::collections::BTreeMap;
use std::path::Path;

use plumbline::config::Config;
use plumbline::logio::{read_all, Item, LogWriter};
use plumbline::replay::Replayed;
use serde_json::Value;
use support::{repo, run};

/// Source: tests/reference/evaluate.py, an independent numpy/scipy implementation of the
/// contract, run on the shipped log (its output is committed as a fixture).
#[test]
fn shipped_log_matches_the_independent_evaluator() {
    let cfg = Config::defaults();
    let (_, samples) = run(&cfg, &repo("replay-logs/campus-loop.jsonl"));
    let text = std::fs::read_to_string(repo("tests/fixtures/campus-loop.reference.json")).unwrap();
    let want: Value = serde_json::from_str(&text).unwrap();
    let mut got: BTreeMap<(String, u64), f64> = BTreeMap::new();
    for s in samples.iter().filter(|s| s.role.is_none()) {
        got.insert((s.metric.name().to_string(), s.t.to_bits()), s.value);
    }
    let mut checked = 0;
    for section in ["tracking", "ego"] {
        let steps = want[section].as_array().unwrap();
        assert!(steps.len() >= 600, "{section}: {}", steps.len());
        for step in steps {
            let t = step["t"].as_f64().unwrap();
            for (k, v) in step.as_object().unwrap() {
                if k == "t" {
                    continue;
                }
                let w = v.as_f64().unwrap();
                let g = got.get(&(k.clone(), t.to_bits())).unwrap_or_else(|| panic!("no {k} at {t}"));
                assert!((g - w).abs() <= 1e-9 * (1.0 + w.abs()), "{k} at {t}: {g} vs reference {w}");
                checked += 1;
            }
        }
    }
    assert!(checked > 8000, "{checked}");
}

#[test]
fn jsonl_and_binary_forms_give_the_same_report() {
    let cfg = Config::defaults();
    let dir = tempfile::tempdir().unwrap();
    let plb = dir.path().join("copy.plb");
    let back = dir.path().join("back.jsonl");
    convert(&cfg, &repo("replay-logs/campus-loop.jsonl"), &plb);
    convert(&cfg, &plb, &back);
    let (a, sa) = run(&cfg, &repo("replay-logs/campus-loop.jsonl"));
    let (b, sb) = run(&cfg, &plb);
    let (c, sc) = run(&cfg, &back);
    assert_eq!(sa, sb);
    assert_eq!(sa, sc);
    let strip = |r: &Replayed| {
        let mut v: Value = serde_json::from_str(&r.report.to_json()).unwrap();
        v["input"] = Value::Null;
        v["input_digest"] = Value::Null;
        v
    };
    assert_eq!(strip(&a), strip(&b));
    assert_eq!(strip(&a), strip(&c));
    // The round trip keeps every record exactly.
    assert_eq!(records(&cfg, &repo("replay-logs/campus-loop.jsonl")), records(&cfg, &back));
}

/// The shipped log's identity switch (two pedestrians' estimates swap labels at 30.02 s,
/// where the per-step `track_switches` counts 2) is two full switches for T-GOSPA in every
/// window that holds it: the windows end at 1 s steps (31.02 s to 39.02 s are the nine
/// whose 10 s span (t - 10, t] contains 30.02 s), and no other window has a switch.
#[test]
fn the_shipped_identity_switch_shows_in_tgospa_switches() {
    let cfg = Config::load(None, &["tgospa.enabled=true".into()]).unwrap();
    let (r, samples) = run(&cfg, &repo("replay-logs/campus-loop.jsonl"));
    let switches: Vec<(f64, f64)> = samples
        .iter()
        .filter(|s| s.metric == plumbline::metrics::Metric::TgospaSwitches)
        .map(|s| (s.t, s.value))
        .collect();
    // One value a second from 1 s after the first tracking step (0.02 s): 59 windows.
    assert_eq!(switches.len(), 59);
    let steps = r.report.steps.tgospa.as_ref().unwrap();
    assert_eq!((steps.evaluated, steps.skipped), (59, 0));
    for (t, v) in switches {
        let holds_the_swap = t > 30.02 && t - 10.0 < 30.02;
        assert_eq!(v, if holds_the_swap { 2.0 } else { 0.0 }, "window ending at {t}");
    }
    // The run total: blocks closing at 10.02, 20.02, ..., 50.02 s and the last at the end:
    // six; its parts add up to it.
    let run = r.report.tgospa_run.unwrap();
    assert_eq!((run.blocks, run.skipped), (6, 0));
    let sum = run.localization + run.missed + run.false_ + run.switch;
    assert!((sum - run.total_p).abs() < 1e-9 * run.total_p, "{run:?}");
    assert_eq!(run.switch, 2.0 * run.switches);
    let per_step: f64 = samples
        .iter()
        .filter(|s| s.metric == plumbline::metrics::Metric::TrackSwitches && (s.t - 30.02).abs() < 1e-9)
        .map(|s| s.value)
        .sum();
    assert_eq!(per_step, 2.0);
}

#[test]
fn tgospa_settings_are_checked_with_their_keys() {
    for (set, key) in [
        ("tgospa.every=\"0s\"", "tgospa.every"),
        ("tgospa.switch_cost_m=-1", "tgospa.switch_cost_m"),
        ("tgospa.max_steps=1", "tgospa.max_steps"),
        ("tgospa.max_variables=0", "tgospa.max_variables"),
    ] {
        let e = Config::load(None, &[set.into()]).unwrap_err().to_string();
        assert!(e.contains(key), "{set}: {e}");
    }
    // Off unless enabled: no T-GOSPA in the config, the digest or the report.
    assert!(Config::defaults().tgospa.is_none());
}

/// Missed and false objects costed apart: equal to the cutoff is GOSPA itself (the same
/// report bytes); a missed object at 4 m (cost 4^1/2 = 2 with p = 1) against the cutoff's
/// 2 m (cost 1) makes each missed reference cost 2, and pairs now form up to
/// (2 + 1)^(1/1) = 3 m (missed plus false cost), so at most as many are missed; only with
/// alpha = 2.
#[test]
fn missed_and_false_objects_can_cost_apart() {
    let log = repo("replay-logs/campus-loop.jsonl");
    let base = Config::defaults();
    let same = Config::load(None, &["tracking.missed_cost_m=2.0".into(), "tracking.false_cost_m=2.0".into()])
        .unwrap();
    let (a, sa) = run(&base, &log);
    let (b, sb) = run(&same, &log);
    assert_eq!(sa, sb);
    assert_eq!(a.report.to_json(), b.report.to_json());
    let own = Config::load(None, &["tracking.missed_cost_m=4.0".into()]).unwrap();
    let (c, _) = run(&own, &log);
    let (ma, mc) = (&a.report.metrics["gospa_missed"], &c.report.metrics["gospa_missed"]);
    let (na, nc) = (&a.report.totals["missed_count"], &c.report.totals["missed_count"]);
    // Each missed reference costs 2 instead of 1; pairs may now form up to 3 m, so at most
    // as many are missed.
    assert!(nc <= na && *nc > 0.0, "{na} {nc}");
    assert!((mc.sum - 2.0 * nc).abs() < 1e-9 && (ma.sum - na).abs() < 1e-9, "{} {}", ma.sum, mc.sum);
    assert_eq!(c.report.definitions["tracking.missed_cost"], serde_json::json!(2.0));
    let e =
        Config::load(None, &["tracking.missed_cost_m=4.0".into(), "tracking.alpha=1.0".into()]).unwrap_err();
    assert!(e.to_string().contains("tracking.missed_cost_m"), "{e}");
}

/// The gate reads reports back typed: every shipped log's report, under both shipped
/// profiles, reads back to the very bytes it was written as (nothing dropped or reshaped).
#[test]
fn reports_read_back_to_the_same_bytes() {
    for cfg_path in ["config/plumbline.toml", "config/rig.toml"] {
        let text = std::fs::read_to_string(repo(cfg_path)).unwrap();
        let cfg = Config::load(Some((cfg_path, &text)), &[]).unwrap();
        for log in ["replay-logs/campus-loop.jsonl", "replay-logs/campus-loop-seed2.plb"] {
            let (r, _) = run(&cfg, &repo(log));
            let text = r.report.to_json();
            let back = plumbline::report::Report::read(&text).unwrap();
            assert_eq!(back.to_json(), text, "{cfg_path} {log}");
            assert!(back.metrics.len() > 20, "{cfg_path} {log}: {} metrics", back.metrics.len());
            assert_eq!(back.verdicts.len(), cfg.rules.len(), "{cfg_path} {log}");
        }
    }
}

fn convert(cfg: &Config, from: &Path, to: &Path) {
    let mut w = LogWriter::create(&cfg.log(), to).unwrap();
    read_all(&cfg.log(), from, &mut |item, _| {
        if let Item::Record { rec, .. } = item {
            w.write(&rec).unwrap();
        }
    })
    .unwrap();
    w.finish().unwrap();
}

fn records(cfg: &Config, p: &Path) -> Vec<plumbline::logio::LogRecord> {
    let mut v = Vec::new();
    read_all(&cfg.log(), p, &mut |item, _| {
        if let Item::Record { rec, .. } = item {
            v.push(rec);
        }
    })
    .unwrap();
    v
}

#[test]
fn torn_binary_tail_is_reported_and_everything_before_replays() {
    let cfg = Config::defaults();
    let dir = tempfile::tempdir().unwrap();
    let plb = dir.path().join("run.plb");
    convert(&cfg, &repo("replay-logs/campus-loop.jsonl"), &plb);
    let full = std::fs::read(&plb).unwrap();
    let all = records(&cfg, &plb).len();
    // Cut the file in the middle of a record, as a power cut would.
    let cut = full.len() - 37;
    std::fs::write(&plb, &full[..cut]).unwrap();
    let (r, _) = run(&cfg, &plb);
    let tail = r.report.records.tail.clone().expect("tail reported");
    assert!(tail.offset < cut as u64 && tail.offset > 0);
    assert_eq!(r.report.records.accepted as usize, all - 1);
    // Corrupt a byte inside an early record: the CRC catches it at that record's offset,
    // the reader skips to the next record's sync marker, and only that record is lost.
    let mut bad = full.clone();
    let at = 5000;
    bad[at] ^= 0xff;
    std::fs::write(&plb, &bad).unwrap();
    let (r, _) = run(&cfg, &plb);
    assert!(r.report.records.tail.is_none());
    let d = &r.report.records.damaged;
    assert_eq!((d.stretches, d.records), (1, 1), "{d:?}");
    assert!(d.first[0].offset <= at as u64 && d.first[0].offset + d.first[0].bytes > at as u64);
    assert!(d.first[0].reason.contains("checksum") || d.first[0].reason.contains("range"), "{d:?}");
    assert_eq!(r.report.records.accepted as usize, all - 1);
}

/// Twenty single-bit flips at random places in the shipped binary log: each costs at most
/// the record it hit, and what is left scores exactly as the undamaged log without those
/// records. Before (format 1): the first flip ended the replay and 20 flips kept 158 of
/// 5703 records, with exit 0.
#[test]
fn random_bit_flips_lose_only_the_records_they_hit() {
    use rand::{Rng, SeedableRng};
    let cfg = Config::defaults();
    let shipped = repo("replay-logs/campus-loop-seed2.plb");
    let full = std::fs::read(&shipped).unwrap();
    assert_eq!(u16::from_le_bytes([full[8], full[9]]), 2, "the shipped log is format 2");
    // Every record with its byte offset, from the undamaged file.
    let mut all = Vec::new();
    read_all(&cfg.log(), &shipped, &mut |item, _| {
        if let Item::Record { rec, .. } = item {
            all.push(rec);
        }
    })
    .unwrap();
    let dir = tempfile::tempdir().unwrap();
    for seed in 0..3u64 {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let mut bad = full.clone();
        // Past the header (its own checksum guards it).
        for _ in 0..20 {
            let at = rng.random_range(200..bad.len());
            bad[at] ^= 1 << rng.random_range(0..8);
        }
        let damaged = dir.path().join(format!("flipped-{seed}.plb"));
        std::fs::write(&damaged, &bad).unwrap();
        let mut kept = Vec::new();
        read_all(&cfg.log(), &damaged, &mut |item, _| {
            if let Item::Record { rec, .. } = item {
                kept.push(rec);
            }
        })
        .unwrap();
        // What is kept is the original records in order, at most 20 missing.
        assert!(kept.len() + 20 >= all.len(), "seed {seed}: kept {} of {}", kept.len(), all.len());
        let mut it = all.iter();
        for k in &kept {
            assert!(it.any(|a| a == k), "seed {seed}: a kept record is not an original one in order");
        }
        // And it scores as the undamaged records without the lost ones.
        let reference = dir.path().join(format!("kept-{seed}.jsonl"));
        let text: String = kept.iter().map(plumbline::logio::jsonl::format_line).collect();
        std::fs::write(&reference, text).unwrap();
        let (r, damaged_samples) = run(&cfg, &damaged);
        let (_, reference_samples) = run(&cfg, &reference);
        assert!(damaged_samples == reference_samples, "seed {seed}: the rest scores as the undamaged log");
        let d = &r.report.records.damaged;
        // Every lost record is counted: in a skipped stretch, or as the damaged tail.
        let counted = d.records as usize + usize::from(r.report.records.tail.is_some());
        assert!(d.stretches >= 1 && counted >= all.len() - kept.len(), "seed {seed}: {d:?}");
    }
}

#[test]
fn bad_records_are_counted_with_line_and_reason_and_valid_ones_score_the_same() {
    let cfg = Config::defaults();
    let dir = tempfile::tempdir().unwrap();
    let clean = dir.path().join("clean.jsonl");
    let dirty = dir.path().join("dirty.jsonl");
    let lines: Vec<String> = std::fs::read_to_string(repo("replay-logs/campus-loop.jsonl"))
        .unwrap()
        .lines()
        .take(400)
        .map(str::to_string)
        .collect();
    std::fs::write(&clean, lines.join("\n") + "\n").unwrap();
    let mut mixed = Vec::new();
    let junk = [
        "this is not json",
        r#"{"key": "rig/estimate/objects", "recv": 1.0, "msg": {"stamp": 1e999, "objects": []}}"#,
        r#"{"key": "rig/estimate/objects", "msg": {"stamp": 1.0, "objects": [{"id": 1, "x": 1, "y": 1}, {"id": 1, "x": 2, "y": 2}]}}"#,
        r#"{"key": "rig/reference/ego", "msg": {"stamp": 1.0, "x": 1}}"#,
        r#"{"key": "somewhere/else", "msg": {"stamp": 1.0}}"#,
        r#"{"key": "rig/estimate/objects", "msg": {"stamp": 1.0, "frame": "map", "objects": []}}"#,
    ];
    for (i, l) in lines.iter().enumerate() {
        mixed.push(l.clone());
        if i % 60 == 5 {
            mixed.push(junk[(i / 60) % junk.len()].to_string());
        }
    }
    std::fs::write(&dirty, mixed.join("\n") + "\n").unwrap();
    let (a, sa) = run(&cfg, &clean);
    let (b, sb) = run(&cfg, &dirty);
    assert_eq!(sa, sb, "valid records must score exactly as without the bad ones");
    assert_eq!(b.report.records.rejected, 7);
    assert_eq!(a.report.records.rejected, 0);
    let first = &b.report.records.first_rejected[0];
    assert_eq!(first.at, "line 7");
    assert_eq!(first.reason, "malformed");
    let reasons = &b.report.records.rejected_by_reason;
    for r in ["malformed", "non_finite", "duplicate_id", "missing_field", "unbound_key", "bad_frame"] {
        assert!(reasons.contains_key(r), "{r} missing from {reasons:?}");
    }
    assert!(b.report.transport["estimate/objects"].rejected >= 3);
}
