//! Property tests of the decoders and log readers on arbitrary and mutated input: never a
//! panic, and every record either decodes to a valid message or is counted as rejected
//! with a reason. (The fuzz targets in `fuzz/` run the same entry points for millions of
//! inputs; these run a few thousand in the normal suite.)

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // a test drives the edges: it writes fixtures, reads outputs and times things

use plumbline::config::Config;
use plumbline::logio::{read_bytes, Form, Item, LogRecord, LogWriter};
use plumbline::msg::{decode_json, validate, Limits, MsgKind};
use plumbline::wire::decode_postcard;
use proptest::prelude::*;

const KINDS: [MsgKind; 4] = [MsgKind::Objects, MsgKind::Pose, MsgKind::Path, MsgKind::Obstacles];

fn shipped_head(n: usize) -> Vec<String> {
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replay-logs/campus-loop.jsonl");
    std::fs::read_to_string(p).unwrap().lines().take(n).map(str::to_string).collect()
}

/// Counts the items of a read: (records, rejected); every record passes validation again.
fn tally(form: Form, bytes: &[u8]) -> (usize, usize) {
    let cfg = Config::defaults();
    let limits = Limits::default();
    let (mut ok, mut bad) = (0, 0);
    // What is accepted is scored, and every value that comes out is finite.
    let mut monitor = plumbline::monitor::Monitor::new(&cfg.monitor());
    let (mut samples, mut events) = (Vec::new(), Vec::new());
    let _ = read_bytes(&cfg.log(), form, bytes, &mut |item, _| match item {
        Item::Record { role, rec } => {
            assert!(validate(&rec.msg, &limits).is_ok(), "a record that fails validation got through");
            let input = plumbline::core::Input::Message { role, recv: rec.recv, msg: rec.msg };
            monitor.push(input, &mut samples, &mut events);
            ok += 1;
        }
        Item::Bad { reason, .. } => {
            assert!(!reason.code().is_empty());
            bad += 1;
        }
        Item::Damaged(d) => {
            assert!(d.bytes > 0 && d.records > 0 && !d.reason.is_empty());
            bad += 1;
        }
    });
    monitor.finish(&mut samples, &mut events);
    assert_eq!(monitor.stats.non_finite, 0, "a non-finite metric value");
    (ok, bad)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, ..ProptestConfig::default() })]

    #[test]
    fn json_decoder_never_panics_on_bytes(bytes in proptest::collection::vec(any::<u8>(), 0..512), k in 0usize..4) {
        let text = String::from_utf8_lossy(&bytes);
        if let Ok(m) = decode_json(KINDS[k], &text, &Limits::default()) {
            prop_assert!(validate(&m, &Limits::default()).is_ok());
        }
    }

    #[test]
    fn postcard_decoder_never_panics_on_bytes(bytes in proptest::collection::vec(any::<u8>(), 0..512), k in 0usize..4) {
        if let Ok(m) = decode_postcard(KINDS[k], &bytes, &Limits::default()) {
            prop_assert!(validate(&m, &Limits::default()).is_ok());
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 600, ..ProptestConfig::default() })]

    /// Real records with bytes flipped, cut or inserted: each line is a record or a counted
    /// rejection, never both and never lost.
    #[test]
    fn mutated_json_lines_are_records_or_counted_rejections(
        edits in proptest::collection::vec((0usize..20_000, any::<u8>(), 0u8..3), 1..12),
    ) {
        let lines = shipped_head(40);
        let mut bytes = (lines.join("\n") + "\n").into_bytes();
        for (at, b, op) in edits {
            let at = at % bytes.len();
            match op {
                0 => bytes[at] = b,
                1 => { bytes.remove(at); }
                _ => bytes.insert(at, b),
            }
        }
        let nonblank = bytes.split(|&c| c == b'\n').filter(|l| !l.iter().all(u8::is_ascii_whitespace)).count();
        let (ok, bad) = tally(Form::Jsonl, &bytes);
        prop_assert_eq!(ok + bad, nonblank);
    }

    /// A binary log with bytes flipped or cut: no panic; whatever is read before a damaged
    /// record is a valid record or a counted rejection.
    #[test]
    fn mutated_binary_logs_never_panic(
        edits in proptest::collection::vec((0usize..40_000, any::<u8>(), any::<bool>()), 1..8),
    ) {
        let bytes = binary_head();
        let mut bytes = bytes.clone();
        for (at, b, cut) in edits {
            let at = at % bytes.len();
            if cut { bytes.truncate(at.max(1)); } else { bytes[at] = b; }
        }
        let _ = tally(Form::Plb, &bytes);
    }
}

fn binary_head() -> Vec<u8> {
    use std::sync::OnceLock;
    static BYTES: OnceLock<Vec<u8>> = OnceLock::new();
    BYTES
        .get_or_init(|| {
            let cfg = Config::defaults();
            let dir = tempfile::tempdir().unwrap();
            let p = dir.path().join("head.plb");
            let mut w = LogWriter::create(&cfg.log(), &p).unwrap();
            let text = shipped_head(60).join("\n") + "\n";
            let mut recs: Vec<LogRecord> = Vec::new();
            read_bytes(&cfg.log(), Form::Jsonl, text.as_bytes(), &mut |item, _| {
                if let Item::Record { rec, .. } = item {
                    recs.push(rec)
                }
            })
            .unwrap();
            for rec in &recs {
                w.write(rec).unwrap();
            }
            w.finish().unwrap();
            drop(w);
            std::fs::read(&p).unwrap()
        })
        .clone()
}

#[test]
fn the_unmutated_heads_read_whole() {
    // The baselines the mutations start from: 40 JSON records and 60 binary ones, all valid.
    let lines = shipped_head(40);
    assert_eq!(tally(Form::Jsonl, (lines.join("\n") + "\n").as_bytes()), (40, 0));
    assert_eq!(tally(Form::Plb, &binary_head()), (60, 0));
}
