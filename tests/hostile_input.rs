//! Input that parses but has the wrong shape or makes no physical sense: a JSON array where
//! the contract has an object, absurd coordinates, sizes, stamps and plans. Each is
//! rejected whole under a reason of its own and counted per role, and the rest of the run
//! scores exactly as it does without it (the valid records around it are untouched).

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

mod support;

use std::path::Path;

use plumbline::config::Config;
use plumbline::core::Sample;
use plumbline::logio::jsonl::decode_line;
use plumbline::msg::{decode_json, Limits, Msg, MsgKind, Obstacle, ObstacleSet, Shape};
use plumbline::wire::decode_postcard;
use support::{repo, run};

fn shipped_lines() -> Vec<String> {
    std::fs::read_to_string(repo("replay-logs/campus-loop.jsonl"))
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect()
}

fn write(path: &Path, lines: &[String]) {
    std::fs::write(path, lines.join("\n") + "\n").unwrap();
}

/// Replays `lines` with `bad` inserted after line `at` (0-based), and the lines alone;
/// returns both runs' samples and the first run's rejections by reason.
fn with_and_without(
    lines: &[String],
    at: usize,
    bad: &[String],
) -> (Vec<Sample>, Vec<Sample>, plumbline::replay::Replayed) {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("clean.jsonl"), dir.path().join("dirty.jsonl"));
    write(&a, lines);
    let mut dirty = lines[..at].to_vec();
    dirty.extend_from_slice(bad);
    dirty.extend_from_slice(&lines[at..]);
    write(&b, &dirty);
    let cfg = Config::defaults();
    let (_, clean) = run(&cfg, &a);
    let (r, dirty) = run(&cfg, &b);
    (clean, dirty, r)
}

fn code(kind: MsgKind, text: &str) -> &'static str {
    match decode_json(kind, text, &Limits::default()) {
        Ok(_) => "accepted",
        Err(e) => e.code(),
    }
}

/// serde's derived structs accept a sequence of fields in order; the contract does not
/// (every message and nested object is a JSON object). Before: `[0.9, 1.0, 2.0, 0.1]` read
/// as a pose at stamp 0.9, an obstacle set sent as an array replaced the site map.
#[test]
fn arrays_where_the_contract_has_objects_are_wrong_type() {
    let cases = [
        (MsgKind::Pose, "[0.9, 1.0, 2.0, 0.1]"),
        (MsgKind::Obstacles, "[0.0, []]"),
        (MsgKind::Obstacles, r#"{"stamp": 0, "obstacles": [[1, "circle", 3.0, 4.0, null, 0.5]]}"#),
        (MsgKind::Objects, "[1.0, null, []]"),
        (MsgKind::Objects, r#"{"stamp": 1, "objects": [[4, 10.2, -3.1]]}"#),
        (MsgKind::Path, "[1.0, []]"),
        (MsgKind::Path, r#"{"stamp": 1, "poses": [[0.0, 0.0, null]]}"#),
        (MsgKind::Path, r#"{"stamp": 1, "poses": [], "goal": [1.0, 2.0, null]}"#),
    ];
    for (kind, text) in cases {
        assert_eq!(code(kind, text), "wrong_type", "{text}");
    }
    // The same objects as objects are fine.
    assert_eq!(code(MsgKind::Pose, r#"{"stamp": 0.9, "x": 1.0, "y": 2.0, "yaw": 0.1}"#), "accepted");
    assert_eq!(
        code(MsgKind::Path, r#"{"stamp": 1, "poses": [{"x": 0, "y": 0}], "goal": {"x": 1, "y": 2}}"#),
        "accepted"
    );
    // In a log, with the role named, both decoders agree.
    let cfg = Config::defaults();
    let line = br#"{"key":"rig/estimate/ego","recv":1.0,"msg":[0.9, 1.0, 2.0, 0.1]}"#;
    let (role, e) = decode_line(&cfg.log(), &cfg.limits(), line).unwrap_err();
    assert_eq!((role.map(|r| r.name()), e.code()), (Some("estimate/ego"), "wrong_type"));
    let line = br#"{"key":"rig/reference/objects","recv":1.0,"msg":{"stamp":1,"objects":[[1,2.0,3.0]]}}"#;
    let (role, e) = decode_line(&cfg.log(), &cfg.limits(), line).unwrap_err();
    assert_eq!((role.map(|r| r.name()), e.code()), (Some("reference/objects"), "wrong_type"));
    // A whole record as an array is wrong_type too.
    let (_, e) = decode_line(&cfg.log(), &cfg.limits(), br#"["rig/estimate/ego", 1.0, {}]"#).unwrap_err();
    assert_eq!(e.code(), "wrong_type");
}

/// The binary form encodes structs as sequences and still decodes (postcard is not
/// human-readable, so the object-only rule does not apply to it).
#[test]
fn the_binary_form_still_round_trips_nested_structs() {
    let m = Msg::Obstacles(ObstacleSet {
        stamp: 0.0,
        obstacles: vec![Obstacle {
            id: 1,
            shape: Shape::Circle,
            x: Some(3.0),
            y: Some(4.0),
            yaw: None,
            radius: Some(0.5),
            length: None,
            width: None,
            points: None,
        }],
    });
    assert_eq!(decode_postcard(MsgKind::Obstacles, &m.to_postcard(), &Limits::default()).unwrap(), m);
}

/// Before: a record whose `recv` was bad was attributed to no role.
#[test]
fn a_bad_recv_is_counted_against_the_keys_role() {
    let cfg = Config::defaults();
    for line in [
        &br#"{"key":"rig/estimate/ego","recv":"soon","msg":{"stamp":1,"x":0,"y":0,"yaw":0}}"#[..],
        br#"{"key":"rig/estimate/ego","recv":1e999,"msg":{"stamp":1,"x":0,"y":0,"yaw":0}}"#,
        br#"{"recv":[1],"key":"rig/estimate/ego","msg":{"stamp":1,"x":0,"y":0,"yaw":0}}"#,
        br#"{"key":"rig/estimate/ego","recv":2e10,"msg":{"stamp":1,"x":0,"y":0,"yaw":0}}"#,
    ] {
        let (role, e) = decode_line(&cfg.log(), &cfg.limits(), line).unwrap_err();
        assert_eq!(role.map(|r| r.name()), Some("estimate/ego"), "{}: {e}", String::from_utf8_lossy(line));
    }
}

/// Coordinates, sizes, speeds and shapes beyond `[limits]`. Before: a coordinate of 1e308
/// gave ego errors of 1.4e308 and a run mean of NaN; a box of length 0 was scored as a
/// 0.5 m disc; a two-vertex polygon was accepted.
#[test]
fn absurd_coordinates_sizes_and_shapes_are_rejected_with_reasons() {
    let cases = [
        (MsgKind::Pose, r#"{"stamp": 1, "x": 1e308, "y": 0, "yaw": 0}"#, "out_of_range"),
        (MsgKind::Pose, r#"{"stamp": 1, "x": 0, "y": -1.5e7, "yaw": 0}"#, "out_of_range"),
        (MsgKind::Pose, r#"{"stamp": 1, "x": 0, "y": 0, "yaw": 1e300}"#, "out_of_range"),
        (MsgKind::Pose, r#"{"stamp": 1, "x": 0, "y": 0, "yaw": 0, "v": 1e5}"#, "out_of_range"),
        (MsgKind::Pose, r#"{"stamp": 1e12, "x": 0, "y": 0, "yaw": 0}"#, "implausible_stamp"),
        (MsgKind::Objects, r#"{"stamp": 1, "objects": [{"id": 1, "x": 2e7, "y": 0}]}"#, "out_of_range"),
        (
            MsgKind::Objects,
            r#"{"stamp": 1, "objects": [{"id": 1, "x": 0, "y": 0, "vx": 5e3}]}"#,
            "out_of_range",
        ),
        (
            MsgKind::Objects,
            r#"{"stamp": 1, "objects": [{"id": 1, "x": 0, "y": 0, "length": 0, "width": 1}]}"#,
            "bad_size",
        ),
        (
            MsgKind::Objects,
            r#"{"stamp": 1, "objects": [{"id": 1, "x": 0, "y": 0, "length": 4, "width": -1}]}"#,
            "bad_size",
        ),
        (
            MsgKind::Objects,
            r#"{"stamp": 1, "objects": [{"id": 1, "x": 0, "y": 0, "length": 1e6, "width": 1}]}"#,
            "out_of_range",
        ),
        (
            MsgKind::Objects,
            r#"{"stamp": 1, "objects": [{"id": 1, "x": 0, "y": 0, "cov": [1e300, 0, 0, 1e300]}]}"#,
            "out_of_range",
        ),
        (
            MsgKind::Obstacles,
            r#"{"stamp": 0, "obstacles": [{"id": 1, "shape": "box", "x": 0, "y": 0, "length": 0, "width": 1}]}"#,
            "bad_obstacle",
        ),
        (
            MsgKind::Obstacles,
            r#"{"stamp": 0, "obstacles": [{"id": 1, "shape": "polygon", "points": [[0, 0], [1, 1]]}]}"#,
            "bad_obstacle",
        ),
        (
            MsgKind::Obstacles,
            r#"{"stamp": 0, "obstacles": [{"id": 1, "shape": "polygon", "points": [[0, 0], [1, 0], [1, 1e9]]}]}"#,
            "out_of_range",
        ),
        (
            MsgKind::Obstacles,
            r#"{"stamp": 0, "obstacles": [{"id": 1, "shape": "circle", "x": 1e308, "y": 0, "radius": 1}]}"#,
            "out_of_range",
        ),
        (MsgKind::Path, r#"{"stamp": 1, "poses": [{"x": 0, "y": 0}, {"x": 1e308, "y": 0}]}"#, "out_of_range"),
        // 1e7 m at the default 0.5 m step is 2e7 points: beyond limits.max_plan_points.
        (MsgKind::Path, r#"{"stamp": 1, "poses": [{"x": 0, "y": 0}, {"x": 1e7, "y": 0}]}"#, "plan_too_long"),
    ];
    for (kind, text, want) in cases {
        assert_eq!(code(kind, text), want, "{text}");
    }
    // At the bounds themselves: accepted.
    assert_eq!(code(MsgKind::Pose, r#"{"stamp": 1, "x": 1e7, "y": -1e7, "yaw": 0}"#), "accepted");
    assert_eq!(
        code(MsgKind::Path, r#"{"stamp": 1, "poses": [{"x": 0, "y": 0}, {"x": 49000, "y": 0}]}"#),
        "accepted"
    );
    // The bounds are configurable, and a bad bound names its key.
    let cfg = Config::load(None, &["limits.max_coordinate_m=100".into()]).unwrap();
    assert!(decode_json(MsgKind::Pose, r#"{"stamp": 1, "x": 101, "y": 0, "yaw": 0}"#, &cfg.limits()).is_err());
    let e = Config::load(None, &["limits.max_speed_mps=-1".into()]).unwrap_err().to_string();
    assert!(e.contains("limits.max_speed_mps") && e.contains("m/s"), "{e}");
}

/// One reference set stamped 1e6 s (far ahead of its own arrival) and, in a log without
/// arrival times, one stamped 1e6 s ahead of the stream: rejected and counted against
/// their role, and the run scores exactly as without them. Before: GOSPA mean 2.39 -> 7.29
/// and a critical requirement flipped from pass to fail.
#[test]
fn a_stamp_far_ahead_never_enters_the_reference_timeline() {
    let lines = shipped_lines();
    let at = lines
        .iter()
        .position(|l| l.contains("\"rig/reference/objects\"") && l.contains("\"recv\":3."))
        .unwrap();
    let bad = r#"{"key":"rig/reference/objects","recv":3.01,"msg":{"stamp":1e6,"objects":[{"id":1,"x":0.0,"y":0.0}]}}"#;
    let (clean, dirty, r) = with_and_without(&lines, at, &[bad.to_string()]);
    assert_eq!(r.report.records.rejected_by_reason.get("implausible_stamp"), Some(&1));
    assert_eq!(r.report.transport["reference/objects"].rejected, 1);
    assert!(clean == dirty, "the run scores as without the record");

    // Without arrival times the stamp is the message's time, judged against the stream's.
    let strip = |l: &String| {
        let i = l.find(",\"recv\":").unwrap();
        let j = l[i + 1..].find(',').unwrap() + i + 1;
        format!("{}{}", &l[..i], &l[j..])
    };
    let bare: Vec<String> = lines.iter().map(strip).collect();
    assert!(!bare[10].contains("recv"));
    let bad = r#"{"key":"rig/reference/objects","msg":{"stamp":1e6,"objects":[{"id":1,"x":0.0,"y":0.0}]}}"#;
    let (clean, dirty, r) = with_and_without(&bare, at, &[bad.to_string()]);
    assert_eq!(r.report.records.rejected_by_reason.get("implausible_stamp"), Some(&1));
    assert!(clean == dirty, "the run scores as without the record");
    assert!(r.report.steps.tracking.evaluated > 500);
}

/// A plan whose pose lies 1e308 or 1e7 m away. Before: the first froze the live engine and
/// aborted the process on a 4 GiB allocation; the second cost 4.3 s and 900 MB per plan.
#[test]
fn far_away_plans_are_rejected_before_they_are_densified() {
    let lines = shipped_lines();
    let at = lines.iter().position(|l| l.contains("\"rig/plan/path\"") && l.contains("\"recv\":5.")).unwrap();
    let bad = [
        r#"{"key":"rig/plan/path","recv":5.01,"msg":{"stamp":5.0,"poses":[{"x":0.0,"y":-15.0},{"x":1e308,"y":-15.0}]}}"#
            .to_string(),
        r#"{"key":"rig/plan/path","recv":5.02,"msg":{"stamp":5.0,"poses":[{"x":0.0,"y":-15.0},{"x":1e7,"y":-15.0}]}}"#
            .to_string(),
    ];
    let (clean, dirty, r) = with_and_without(&lines, at, &bad);
    let by = &r.report.records.rejected_by_reason;
    assert_eq!((by.get("out_of_range"), by.get("plan_too_long")), (Some(&1), Some(&1)), "{by:?}");
    assert_eq!(r.report.transport["plan/path"].rejected, 2);
    assert!(clean == dirty);
    assert_eq!(r.report.records.non_finite_samples, 0);
}

/// A site map from `clearance.map_file` (stamped 0, no arrival time) beside a log on Unix
/// time takes no part in the arrival clock: the first record is not a "jump", nothing is
/// rejected, and the run's duration is the log's.
#[test]
fn a_map_file_stamped_0_does_not_move_the_clock() {
    let dir = tempfile::tempdir().unwrap();
    let map = dir.path().join("map.json");
    std::fs::write(
        &map,
        r#"{"stamp": 0.0, "obstacles": [{"id": 1, "shape": "circle", "x": 30.0, "y": 0.0, "radius": 1.0}]}"#,
    )
    .unwrap();
    let shift = 1.79e9;
    let lines: Vec<String> = shipped_lines()
        .iter()
        .filter(|l| !l.contains("\"rig/reference/obstacles\""))
        .map(|l| {
            let mut v: serde_json::Value = serde_json::from_str(l).unwrap();
            v["recv"] = serde_json::json!(v["recv"].as_f64().unwrap() + shift);
            v["msg"]["stamp"] = serde_json::json!(v["msg"]["stamp"].as_f64().unwrap() + shift);
            v.to_string()
        })
        .collect();
    let log = dir.path().join("unix.jsonl");
    write(&log, &lines);
    let cfg = Config::load(None, &[format!("clearance.map_file={}", map.display())]).unwrap();
    let (r, _) = run(&cfg, &log);
    assert_eq!(r.report.records.rejected, 0, "{:?}", r.report.records.rejected_by_reason);
    assert!(r.report.duration_s < 61.0, "{}", r.report.duration_s);
    assert!(r.report.metrics["clearance_m"].count > 1000);
}
