//! The built-in ROS 2 pose types in CDR against payloads serialized by `rosbags` (PyPI, a
//! pure-Python rosbag2 reader and writer with its own CDR serializer and ROS 2 Humble's
//! message definitions), made by tests/reference/ros2_cdr.py and committed.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test reads its fixture file

use plumbline::wire::cdr::{decode_pose, yaw_of, Cdr, CdrError, PoseType};
use serde_json::Value;

fn fixture() -> Value {
    let path = format!("{}/tests/fixtures/ros2_cdr.json", env!("CARGO_MANIFEST_DIR"));
    serde_json::from_str(&std::fs::read_to_string(path).expect("fixture present")).expect("JSON")
}

fn hex(s: &str) -> Vec<u8> {
    (0..s.len()).step_by(2).map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap()).collect()
}

fn cases() -> Vec<(PoseType, Vec<u8>, Value)> {
    let f = fixture();
    f["cases"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let kind = PoseType::from_name(c["type"].as_str().unwrap()).expect("a built-in type");
            (kind, hex(c["hex"].as_str().unwrap()), c.clone())
        })
        .collect()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * b.abs().max(1.0)
}

/// Source: rosbags' serializer, both byte orders, frames of 0 to 17 characters (so every
/// alignment after a string occurs); expected values computed in the script (stamp, yaw by
/// the same atan2 formula, speed as the planar norm, covariance rows 0, 1, 5).
#[test]
fn every_field_matches_the_rosbags_serialization() {
    let all = cases();
    assert_eq!(all.len(), 24);
    let mut orders = [0, 0];
    for (kind, bytes, c) in &all {
        assert_eq!(bytes.len() as u64, c["len"].as_u64().unwrap());
        orders[usize::from(c["little_endian"].as_bool().unwrap())] += 1;
        let p = decode_pose(*kind, bytes).unwrap_or_else(|e| panic!("{kind:?}: {e}"));
        let w = &c["want"];
        assert_eq!(p.stamp, w["stamp"].as_f64().unwrap(), "{c}");
        assert_eq!((p.x, p.y), (w["x"].as_f64().unwrap(), w["y"].as_f64().unwrap()), "{c}");
        assert!(close(p.yaw, w["yaw"].as_f64().unwrap()), "{} {c}", p.yaw);
        match (p.v, w["v"].as_f64()) {
            (Some(v), Some(want)) => assert!(close(v, want), "{v} {c}"),
            (None, None) => {}
            other => panic!("speed {other:?} for {kind:?}"),
        }
        match (p.cov, w["cov"].as_array()) {
            (Some(cov), Some(want)) => {
                let want: Vec<f64> = want.iter().map(|v| v.as_f64().unwrap()).collect();
                assert_eq!(cov.to_vec(), want, "{c}");
            }
            (None, None) => {}
            other => panic!("covariance {other:?} for {kind:?}"),
        }
    }
    assert_eq!(orders, [12, 12]);
}

/// The standard layouts' sizes, as rosbags wrote them: a PoseStamped in frame `map` is 76
/// bytes (4 header, 8 stamp, 4 + 4 frame, then 7 float64 at offset 16 after the header), an
/// Odometry in `odom` and `base_link` 724 (after the header: 8 stamp, 4 + 5 `odom` padded to
/// 20, 4 + 10 `base_link` padded to 40, then 7 x 8 + 36 x 8 + 6 x 8 + 36 x 8: 720).
#[test]
fn the_standard_layouts_have_their_sizes() {
    let f = fixture();
    assert_eq!(f["sizes"]["pose_stamped_map"], 76);
    assert_eq!(f["sizes"]["odometry_odom_base_link"], 724);
    // Read here field by field: the pose of a PoseStamped in `map` starts at offset 16.
    let (_, bytes, _) = cases()
        .into_iter()
        .find(|(k, _, c)| *k == PoseType::PoseStamped && c["frame"] == "map")
        .expect("a PoseStamped in map");
    assert_eq!(bytes.len(), 76);
    let mut r = Cdr::new(&bytes).unwrap();
    r.i32().unwrap();
    r.u32().unwrap();
    assert_eq!(r.string().unwrap(), b"map");
    assert_eq!(r.offset(), 16);
}

/// Every prefix of every payload is refused with a reason, never decoded and never a panic;
/// so are an unknown representation, a string without its NUL and a stamp of 1e9 ns.
#[test]
fn short_or_malformed_payloads_are_refused_with_a_reason() {
    for (kind, bytes, _) in cases() {
        for n in 0..bytes.len() {
            let e = decode_pose(kind, &bytes[..n]).unwrap_err();
            assert!(matches!(e, CdrError::Truncated { .. } | CdrError::String(_)), "{kind:?} at {n}: {e}");
        }
        // Padding after the message is ignored.
        let mut padded = bytes.clone();
        padded.extend([0, 0, 0]);
        assert_eq!(decode_pose(kind, &padded).unwrap(), decode_pose(kind, &bytes).unwrap());
    }
    let (kind, bytes, c) = cases().into_iter().find(|(_, _, c)| c["little_endian"] == true).unwrap();
    let mut b = bytes.clone();
    b[1] = 0x07; // XCDR2 little-endian: not plain CDR
    assert_eq!(decode_pose(kind, &b).unwrap_err(), CdrError::Representation(0x0007));
    let mut b = bytes.clone();
    b[8..12].copy_from_slice(&1_000_000_000u32.to_le_bytes());
    assert_eq!(decode_pose(kind, &b).unwrap_err().reason(), "cdr_stamp");
    // The frame's last byte (its NUL) made non-zero.
    let frame_len = c["frame"].as_str().unwrap().len();
    let mut b = bytes.clone();
    b[16 + frame_len] = b'x';
    assert_eq!(decode_pose(kind, &b).unwrap_err(), CdrError::String(12));
    // A string length near 2^32 is refused without reading past the end.
    let mut b = bytes;
    b[12..16].copy_from_slice(&u32::MAX.to_le_bytes());
    assert!(matches!(decode_pose(kind, &b).unwrap_err(), CdrError::Truncated { .. }));
}

/// Hand-worked yaws: the identity is 0; a quarter turn about z, (0, 0, sin 45°, cos 45°),
/// is pi/2; a half turn (0, 0, 1, 0) is pi.
#[test]
fn yaw_of_hand_worked_quaternions() {
    let h = std::f64::consts::FRAC_1_SQRT_2;
    assert_eq!(yaw_of(0.0, 0.0, 0.0, 1.0), 0.0);
    assert!(close(yaw_of(0.0, 0.0, h, h), std::f64::consts::FRAC_PI_2));
    assert!(close(yaw_of(0.0, 0.0, 1.0, 0.0), std::f64::consts::PI));
}
