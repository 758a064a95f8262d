//! Campaigns in shards: `campaign --shard K/N --partial F` on every shard, then
//! `campaign --merge`, gives the one-machine campaign's report, HTML and table byte for
//! byte (the aggregate holds no timing or host field), for N = 1, 2, 3 and 7 and partials
//! merged in shuffled order; and the merge refuses what does not fit together, naming the
//! files. The reference is the one-machine campaign over the same runs.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

mod support;

use std::path::{Path, PathBuf};

use support::bin;

fn run(args: &[&str]) -> (i32, String, String) {
    let out = bin().args(["--config", "config/rig.toml"]).args(args).output().expect("binary runs");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Eight short seeded runs and one that cannot be read (it counts as a failure of every
/// rule, so the merge must carry it too).
fn runs(dir: &Path) -> PathBuf {
    let runs = dir.join("runs");
    let (code, _, err) =
        run(&["scenario", "--out", runs.to_str().unwrap(), "--runs", "8", "--duration", "6", "--seed", "5"]);
    assert_eq!(code, 0, "{err}");
    std::fs::write(runs.join("run-0100.plb"), b"not a log").unwrap();
    runs
}

fn shard(runs: &Path, k: u64, n: u64, out: &Path) -> PathBuf {
    let p = out.join(format!("part-{n}-{k}.json"));
    let (code, stdout, err) = run(&[
        "campaign",
        runs.to_str().unwrap(),
        "--shard",
        &format!("{k}/{n}"),
        "--partial",
        p.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(stdout.starts_with(&format!("shard {k}/{n}: ")), "{stdout}");
    p
}

#[test]
fn merged_shards_equal_the_one_machine_campaign_byte_for_byte() {
    let dir = tempfile::tempdir().unwrap();
    let runs = runs(dir.path());
    let (one_r, one_h) = (dir.path().join("one.json"), dir.path().join("one.html"));
    let (one_code, one_text, _) = run(&[
        "campaign",
        runs.to_str().unwrap(),
        "--report",
        one_r.to_str().unwrap(),
        "--html",
        one_h.to_str().unwrap(),
    ]);
    let one: serde_json::Value = serde_json::from_slice(&std::fs::read(&one_r).unwrap()).unwrap();
    assert_eq!((one["runs"].as_u64(), one["unreadable"].as_array().map(Vec::len)), (Some(8), Some(1)));
    for n in [1u64, 2, 3, 7] {
        let mut parts: Vec<PathBuf> = (1..=n).map(|k| shard(&runs, k, n, dir.path())).collect();
        // Shuffled: reversed, then rotated by one.
        parts.reverse();
        parts.rotate_left(1);
        let (r, h) = (dir.path().join(format!("m{n}.json")), dir.path().join(format!("m{n}.html")));
        let mut args: Vec<String> = vec!["campaign".into(), "--merge".into()];
        args.extend(parts.iter().map(|p| p.display().to_string()));
        args.extend(["--report".into(), r.display().to_string(), "--html".into(), h.display().to_string()]);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let (code, text, err) = run(&args);
        assert_eq!(code, one_code, "N = {n}: {err}");
        assert_eq!(text, one_text, "N = {n}: the table");
        assert!(std::fs::read(&r).unwrap() == std::fs::read(&one_r).unwrap(), "N = {n}: the report differs");
        assert!(std::fs::read(&h).unwrap() == std::fs::read(&one_h).unwrap(), "N = {n}: the HTML differs");
    }
    // A folder of partials merges too.
    let folder = dir.path().join("parts3");
    std::fs::create_dir_all(&folder).unwrap();
    for k in 1..=3 {
        std::fs::rename(dir.path().join(format!("part-3-{k}.json")), folder.join(format!("{k}.json")))
            .unwrap();
    }
    let r = dir.path().join("folder.json");
    let (code, _, err) =
        run(&["campaign", "--merge", folder.to_str().unwrap(), "--report", r.to_str().unwrap()]);
    assert_eq!(code, one_code, "{err}");
    assert!(std::fs::read(&r).unwrap() == std::fs::read(&one_r).unwrap());
}

#[test]
fn the_merge_refuses_partials_that_do_not_fit_naming_the_files() {
    let dir = tempfile::tempdir().unwrap();
    let runs = runs(dir.path());
    let parts: Vec<PathBuf> = (1..=3).map(|k| shard(&runs, k, 3, dir.path())).collect();
    let s = |p: &PathBuf| p.display().to_string();
    let merge = |files: &[String]| {
        let mut a = vec!["campaign", "--merge"];
        a.extend(files.iter().map(String::as_str));
        run(&a)
    };
    // A missing shard.
    let (code, _, err) = merge(&[s(&parts[0]), s(&parts[2])]);
    assert_eq!(code, 2);
    assert!(err.contains("missing shards: 2/3"), "{err}");
    // A shard twice.
    let copy = dir.path().join("copy.json");
    std::fs::copy(&parts[1], &copy).unwrap();
    let (code, _, err) = merge(&[s(&parts[0]), s(&parts[1]), s(&copy), s(&parts[2])]);
    assert_eq!(code, 2);
    assert!(err.contains(&format!("{} and {}: both are shard 2/3", s(&parts[1]), s(&copy))), "{err}");
    // A run counted twice: shard 3 edited to carry shard 1's first run as well.
    let mut p3: serde_json::Value = serde_json::from_slice(&std::fs::read(&parts[2]).unwrap()).unwrap();
    let p1: serde_json::Value = serde_json::from_slice(&std::fs::read(&parts[0]).unwrap()).unwrap();
    p3["rows"].as_array_mut().unwrap().push(p1["rows"][0].clone());
    let bad = dir.path().join("bad.json");
    std::fs::write(&bad, p3.to_string()).unwrap();
    let (code, _, err) = merge(&[s(&parts[0]), s(&parts[1]), s(&bad)]);
    assert_eq!(code, 2);
    assert!(err.contains(&s(&bad)) && err.contains("does not belong to shard 3/3"), "{err}");
    // Another config: the shards' digest differs from the merging config's.
    let (code, _, err) = run(&[
        "--set",
        "tracking.cutoff_m=3",
        "campaign",
        "--merge",
        &s(&parts[0]),
        &s(&parts[1]),
        &s(&parts[2]),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains(&s(&parts[0])) && err.contains("made with another config"), "{err}");
    // Shards of another campaign (other runs).
    let other = dir.path().join("other");
    std::fs::create_dir_all(&other).unwrap();
    for f in std::fs::read_dir(&runs).unwrap().take(3) {
        let f = f.unwrap().path();
        std::fs::copy(&f, other.join(f.file_name().unwrap())).unwrap();
    }
    let o2 = shard(&other, 2, 3, dir.path());
    let (code, _, err) = merge(&[s(&parts[0]), s(&o2), s(&parts[2])]);
    assert_eq!(code, 2);
    assert!(err.contains("shards of different campaigns"), "{err}");
}
