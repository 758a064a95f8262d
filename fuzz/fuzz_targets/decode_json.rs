//! The JSON message decoder: the first byte picks the message kind, the rest is the text.
//! A decoded message must pass validation again.
#![no_main]
use libfuzzer_sys::fuzz_target;
use plumbline::msg::{decode_json, validate, Limits, MsgKind};

const KINDS: [MsgKind; 4] = [MsgKind::Objects, MsgKind::Pose, MsgKind::Path, MsgKind::Obstacles];

fuzz_target!(|data: &[u8]| {
    let Some((&k, rest)) = data.split_first() else { return };
    let limits = Limits { max_objects: 64, ..Limits::default() };
    let text = String::from_utf8_lossy(rest);
    if let Ok(m) = decode_json(KINDS[k as usize % 4], &text, &limits) {
        assert!(validate(&m, &limits).is_ok());
    }
});
