//! The direct binary reader (`plumbline::wire`) against postcard's own serde decoder, the
//! reference for the binary form (postcard 1.x, the crate the writer uses): on every random
//! message both decode to the same value, and on damaged bytes the direct reader accepts
//! nothing that postcard rejects and reads nothing differently.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

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

// ---- JSON Lines: the direct reader against the serde_json path (`decode_line_serde`). ----

use plumbline::config::Config;
use plumbline::logio::jsonl::{decode_line_serde, format_line};
use plumbline::logio::LogParams;
use plumbline::msg::{validate, Limits, Role};

fn role_of(cfg: &LogParams) -> impl Fn(&str) -> Option<Role> + '_ {
    move |k| plumbline::logio::role_for(cfg, &[], k)
}

/// Both readers on one line, each followed by validation as `decode_line` does: when the
/// direct one reads the line, serde_json reads it too, to the same record (bit for bit, so
/// -0.0 and 0.0 differ) or the same rejection.
fn agree(cfg: &LogParams, line: &[u8]) -> Option<bool> {
    let limits = Limits { max_objects: usize::MAX, ..Limits::default() };
    let fast = wire::json::record(line, role_of(cfg))?;
    let slow = decode_line_serde(cfg, &limits, line);
    let recv_ok = |r: &LogRecord| plumbline::msg::check_recv(r.recv, &limits);
    Some(match (validate(&fast.1.msg, &limits).and_then(|_| recv_ok(&fast.1)), slow) {
        (Ok(()), Ok((rs, s))) => fast.0 == rs && same(&fast.1, &s),
        (Err(ef), Err((rs, es))) => {
            let same = rs == Some(fast.0) && ef == es;
            if !same {
                eprintln!("direct: {ef:?} [{:?}], serde: {es:?} [{rs:?}]", fast.0);
            }
            same
        }
        (f, s) => panic!("the direct reader gives {f:?}, serde_json {s:?}"),
    })
}

#[test]
fn every_line_of_the_shipped_log_is_read_directly_and_equally() {
    let cfg = Config::defaults();
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl");
    let text = std::fs::read_to_string(p).unwrap();
    let (mut direct, mut declined) = (0, 0);
    for line in text.lines() {
        match agree(&cfg.log(), line.as_bytes()) {
            Some(true) => direct += 1,
            Some(false) => panic!("the readers differ on {line}"),
            None => declined += 1,
        }
    }
    // The shipped log's plans and site map are the kinds left to serde.
    let other = text.lines().filter(|l| l.contains("plan/path") || l.contains("reference/obstacles")).count();
    assert_eq!(declined, other);
    assert!(direct > 1000, "{direct} lines read directly");
}

/// A JSON number token: integers, fractions, exponents, negative zero, mantissas past 2^53
/// and values out of range (which both readers must refuse alike).
fn number_text() -> impl Strategy<Value = String> {
    prop_oneof![
        any::<f64>().prop_filter("finite", |v| v.is_finite()).prop_map(|v| format!("{v:?}")),
        (-1e7..1e7f64).prop_map(|v| format!("{v}")),
        // Up to 38 characters: tokens over 40 are left to serde by design.
        "-?(0|[1-9][0-9]{0,15})(\\.[0-9]{1,15})?([eE][+-]?[0-9]{1,3})?",
        Just("-0".to_string()),
        Just("9007199254740993".to_string()),
        Just("0.1e-400".to_string()),
        Just("1e309".to_string()),
    ]
}

fn ws() -> impl Strategy<Value = &'static str> {
    prop_oneof![Just(""), Just(""), Just(" "), Just("\t"), Just(" \r ")]
}

/// One field `"name": value` with optional whitespace around the colon.
fn field(name: &'static str, value: impl Strategy<Value = String>) -> impl Strategy<Value = String> {
    (value, ws(), ws()).prop_map(move |(v, a, b)| format!("\"{name}\"{a}:{b}{v}"))
}

fn opt_number() -> impl Strategy<Value = String> {
    prop_oneof![number_text(), Just("null".to_string())]
}

fn numbers(n: usize) -> impl Strategy<Value = String> {
    proptest::collection::vec(number_text(), n).prop_map(|v| format!("[{}]", v.join(",")))
}

/// Fields in a shuffled order, optional ones sometimes left out.
fn object_text(
    required: Vec<BoxedStrategy<String>>,
    optional: Vec<BoxedStrategy<String>>,
) -> BoxedStrategy<String> {
    let opts: Vec<_> = optional.into_iter().map(proptest::option::of).collect();
    (required, opts, ws())
        .prop_flat_map(|(mut fs, opts, w)| {
            fs.extend(opts.into_iter().flatten());
            Just(fs).prop_shuffle().prop_map(move |fs| format!("{{{w}{}}}", fs.join(&format!(",{w}"))))
        })
        .boxed()
}

fn object_json() -> BoxedStrategy<String> {
    object_text(
        vec![
            field("id", prop_oneof!["[0-9]{1,19}", Just("18446744073709551615".to_string())]).boxed(),
            field("x", number_text()).boxed(),
            field("y", number_text()).boxed(),
        ],
        vec![
            field("vx", opt_number()).boxed(),
            field("vy", opt_number()).boxed(),
            field("yaw", opt_number()).boxed(),
            field("length", opt_number()).boxed(),
            field("width", opt_number()).boxed(),
            field("cov", prop_oneof![numbers(4), Just("null".to_string())]).boxed(),
            field("class", prop_oneof!["\"[a-z\u{e9}]{0,8}\"", Just("null".to_string())]).boxed(),
        ],
    )
}

/// The head writers put first, `{"id":N,"x":F,"y":F` without whitespace (the reader's
/// shortcut), then the object's end or more fields: optional ones, whitespace, or a repeat
/// of id, x or y, which serde_json rejects as a duplicate field.
fn object_json_compact() -> BoxedStrategy<String> {
    let more = proptest::collection::vec(
        prop_oneof![
            field("vx", opt_number()),
            field("yaw", opt_number()),
            field("class", prop_oneof!["\"[a-z]{0,4}\"", Just("null".to_string())]),
            field("cov", prop_oneof![numbers(4), Just("null".to_string())]),
            field("id", "[0-9]{1,3}"),
            field("x", number_text()),
        ],
        0..3,
    );
    ("[0-9]{1,19}", number_text(), number_text(), more, ws())
        .prop_map(|(id, x, y, more, w)| {
            let tail: String = more.iter().map(|f| format!(",{w}{f}")).collect();
            format!("{{\"id\":{id},\"x\":{x},\"y\":{y}{tail}{w}}}")
        })
        .boxed()
}

fn line_json() -> BoxedStrategy<String> {
    let object = prop_oneof![object_json(), object_json_compact()];
    let objects = proptest::collection::vec(object, 0..6).prop_map(|v| format!("[{}]", v.join(",")));
    let set = object_text(
        vec![field("stamp", number_text()).boxed()],
        vec![
            field(
                "frame",
                prop_oneof![
                    Just("\"world\"".to_string()),
                    Just("\"ego\"".to_string()),
                    Just("null".to_string())
                ],
            )
            .boxed(),
            field("objects", objects).boxed(),
        ],
    );
    let pose = object_text(
        vec![
            field("stamp", number_text()).boxed(),
            field("x", number_text()).boxed(),
            field("y", number_text()).boxed(),
            field("yaw", number_text()).boxed(),
        ],
        vec![
            field("v", opt_number()).boxed(),
            field("cov", prop_oneof![numbers(9), Just("null".to_string())]).boxed(),
        ],
    );
    prop_oneof![
        (set, opt_number())
            .prop_map(|(m, r)| format!("{{\"key\":\"rig/estimate/objects\",\"recv\":{r},\"msg\":{m}}}")),
        (pose, opt_number())
            .prop_map(|(m, r)| format!("{{\"key\":\"rig/reference/ego\",\"msg\":{m},\"recv\":{r}}} ")),
    ]
    .boxed()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 3000, ..ProptestConfig::default() })]

    /// Generated lines (number forms, whitespace, nulls, field orders): the direct reader
    /// reads exactly the lines serde_json reads, to the same record.
    #[test]
    fn json_lines_read_as_serde_json_reads_them(line in line_json()) {
        let cfg = Config::defaults();
        let slow_ok = decode_line_serde(&cfg.log(), &Limits { max_objects: usize::MAX, ..Limits::default() }, line.as_bytes()).is_ok();
        match agree(&cfg.log(), line.as_bytes()) {
            Some(same) => prop_assert!(same, "the readers differ on {}", line),
            None => prop_assert!(!slow_ok, "a well-formed line left to serde: {}", line),
        }
    }

    /// Damaged lines: whatever the direct reader reads, serde_json reads alike.
    #[test]
    fn damaged_json_lines_are_read_no_differently(
        r in record(),
        edits in proptest::collection::vec((any::<usize>(), any::<u8>(), 0u8..3), 1..6),
    ) {
        let cfg = Config::defaults();
        let r = LogRecord { key: "rig/estimate/objects".into(), ..r };
        let mut bytes = format_line(&r).trim_end().as_bytes().to_vec();
        for (at, b, op) in edits {
            if bytes.is_empty() { break; }
            let at = at % bytes.len();
            match op {
                0 => bytes[at] = b,
                1 => { bytes.remove(at); }
                _ => bytes.insert(at, b),
            }
        }
        if let Some(same) = agree(&cfg.log(), &bytes) {
            prop_assert!(same);
        }
    }
}

/// Numbers at the edges of the exact fast path and of the grammar, each against serde_json
/// (values written out by hand; 2^53 + 1 = 9007199254740993 rounds to 2^53, IEEE 754).
#[test]
fn json_number_edges_read_as_serde_json_reads_them() {
    let cfg = Config::defaults();
    for n in [
        "0",
        "-0",
        "-0.0",
        "0.000",
        "1.5",
        "9007199254740991",
        "9007199254740992",
        "9007199254740993",
        "0.1234567890123456789012",
        "12345678901234567.5",
        "1e22",
        "1E-5",
        "123.456e2",
        "-7",
        "01",
        "1.",
        ".5",
        "+1",
        "1e",
        "--1",
        "1e400",
        "NaN",
        "Infinity",
    ] {
        let line =
            format!("{{\"key\":\"rig/reference/ego\",\"msg\":{{\"stamp\":{n},\"x\":0,\"y\":0,\"yaw\":0}}}}");
        let slow_ok = decode_line_serde(&cfg.log(), &Limits::default(), line.as_bytes()).is_ok();
        match agree(&cfg.log(), line.as_bytes()) {
            Some(same) => assert!(same, "{n}"),
            None => assert!(!slow_ok, "{n} left to serde"),
        }
    }
}
