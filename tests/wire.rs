//! The direct binary reader (`plumbline::wire`) against postcard's own serde decoder, the
//! reference for the binary form (postcard 1.x, the crate the writer uses): on every random
//! message both decode to the same value, and on damaged bytes the direct reader accepts
//! nothing that postcard rejects and reads nothing differently.

use compact_str::CompactString;
use plumbline::logio::LogRecord;
use plumbline::msg::{Frame, Msg, Object, ObjectSet, Path, PathPose, Pose};
use plumbline::wire;
use proptest::prelude::*;

fn any_f64() -> impl Strategy<Value = f64> {
    // Finite, infinite and NaN alike: the reader copies bits, validation comes later.
    prop_oneof![-1e6..1e6f64, any::<f64>()]
}

fn object() -> impl Strategy<Value = Object> {
    (
        any::<u64>(),
        any_f64(),
        any_f64(),
        proptest::option::of(any_f64()),
        proptest::option::of(any_f64()),
        proptest::option::of(any_f64()),
        proptest::option::of((any_f64(), any_f64())),
        proptest::option::of(proptest::array::uniform4(any_f64())),
        proptest::option::of("[a-z\u{e9}\u{4e2d}]{0,20}"),
    )
        .prop_map(|(id, x, y, vx, vy, yaw, lw, cov, class)| Object {
            id,
            x,
            y,
            vx,
            vy,
            yaw,
            length: lw.map(|v| v.0),
            width: lw.map(|v| v.1),
            cov,
            class: class.map(CompactString::from),
        })
}

fn object_set() -> impl Strategy<Value = ObjectSet> {
    (
        any_f64(),
        proptest::option::of(prop_oneof![Just(Frame::World), Just(Frame::Ego)]),
        proptest::collection::vec(object(), 0..12),
    )
        .prop_map(|(stamp, frame, objects)| ObjectSet { stamp, frame, objects })
}

fn pose() -> impl Strategy<Value = Pose> {
    (
        any_f64(),
        any_f64(),
        any_f64(),
        any_f64(),
        proptest::option::of(any_f64()),
        proptest::option::of(proptest::array::uniform9(any_f64())),
    )
        .prop_map(|(stamp, x, y, yaw, v, cov)| Pose { stamp, x, y, yaw, v, cov })
}

fn record() -> impl Strategy<Value = LogRecord> {
    let msg = prop_oneof![
        object_set().prop_map(Msg::Objects),
        pose().prop_map(Msg::Pose),
        // A kind the direct reader leaves to serde.
        (any_f64(), 0.0..10.0f64).prop_map(|(stamp, x)| Msg::Path(Path {
            stamp,
            poses: vec![PathPose { x, y: 0.0, yaw: None }],
            goal: None,
            compute_s: None
        })),
    ];
    ("[a-z/]{0,24}", proptest::option::of(any_f64()), msg).prop_map(|(key, recv, msg)| LogRecord {
        key,
        recv,
        msg,
    })
}

/// Equal as values, NaN payloads included (compared through the binary form again).
fn same<T: serde::Serialize>(a: &T, b: &T) -> bool {
    postcard::to_stdvec(a).unwrap() == postcard::to_stdvec(b).unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 3000, ..ProptestConfig::default() })]

    #[test]
    fn object_sets_read_as_postcard_reads_them(m in object_set()) {
        let bytes = postcard::to_stdvec(&m).unwrap();
        let fast = wire::object_set(&bytes).expect("a well-formed object set is read directly");
        let slow: ObjectSet = postcard::from_bytes(&bytes).unwrap();
        prop_assert!(same(&fast, &slow));
    }

    #[test]
    fn poses_read_as_postcard_reads_them(m in pose()) {
        let bytes = postcard::to_stdvec(&m).unwrap();
        let fast = wire::pose(&bytes).expect("a well-formed pose is read directly");
        let slow: Pose = postcard::from_bytes(&bytes).unwrap();
        prop_assert!(same(&fast, &slow));
    }

    #[test]
    fn records_read_as_postcard_reads_them(r in record()) {
        let bytes = postcard::to_stdvec(&r).unwrap();
        let slow: LogRecord = postcard::from_bytes(&bytes).unwrap();
        match wire::log_record(&bytes) {
            Some(fast) => prop_assert!(same(&fast, &slow)),
            // Only the kinds it leaves to serde.
            None => prop_assert!(matches!(r.msg, Msg::Path(_) | Msg::Obstacles(_))),
        }
    }

    /// Damaged records (bytes changed, cut, inserted): whatever the direct reader accepts,
    /// postcard accepts too, with the same value.
    #[test]
    fn damaged_records_are_read_no_differently(
        r in record(),
        edits in proptest::collection::vec((any::<usize>(), any::<u8>(), 0u8..3), 1..6),
    ) {
        let mut bytes = postcard::to_stdvec(&r).unwrap();
        for (at, b, op) in edits {
            if bytes.is_empty() { break; }
            let at = at % bytes.len();
            match op {
                0 => bytes[at] = b,
                1 => { bytes.truncate(at); }
                _ => bytes.insert(at, b),
            }
        }
        if let Some(fast) = wire::log_record(&bytes) {
            let slow = postcard::from_bytes::<LogRecord>(&bytes);
            prop_assert!(slow.is_ok(), "postcard rejects what the direct reader read: {:?}", slow.err());
            prop_assert!(same(&fast, &slow.unwrap()));
        }
    }
}

/// postcard's varint edge cases, written out by hand from postcard's wire-format rules
/// (varint: 7 bits per byte, least significant group first; a u64 takes at most 10 bytes,
/// the tenth holding one bit; overlong forms with trailing zero groups are accepted).
#[test]
fn varint_edges_match_postcard() {
    let stamp = 1.5f64.to_le_bytes();
    // A one-object set: stamp, no frame, count, then the object with id `id_bytes`.
    let set_with_id = |id_bytes: &[u8]| {
        let mut b = stamp.to_vec();
        b.push(0); // frame absent
        b.push(1); // one object
        b.extend_from_slice(id_bytes);
        b.extend_from_slice(&2.0f64.to_le_bytes());
        b.extend_from_slice(&3.0f64.to_le_bytes());
        b.extend_from_slice(&[0; 7]);
        b
    };
    let cases: [(&[u8], Option<u64>); 6] = [
        (&[0x05], Some(5)),
        (&[0x85, 0x00], Some(5)), // overlong, accepted
        (&[0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01], Some(u64::MAX)),
        (&[0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x02], None), // 65th bit
        (&[0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x00], None), // 11 bytes
        (&[0x80], None),                                                       // cut
    ];
    for (id, want) in cases {
        let b = set_with_id(id);
        let slow = postcard::from_bytes::<ObjectSet>(&b).ok().map(|m| m.objects[0].id);
        let fast = wire::object_set(&b).map(|m| m.objects[0].id);
        assert_eq!(slow, want, "postcard on {id:02x?}");
        assert_eq!(fast, want, "direct reader on {id:02x?}");
    }
}
