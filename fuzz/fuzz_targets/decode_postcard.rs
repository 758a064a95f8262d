//! The postcard message decoder: the first byte picks the message kind, the rest is the
//! payload. A decoded message must pass validation again.
#![no_main]
use libfuzzer_sys::fuzz_target;
use plumbline::msg::{decode_postcard, validate, Limits, MsgKind};

const KINDS: [MsgKind; 4] = [MsgKind::Objects, MsgKind::Pose, MsgKind::Path, MsgKind::Obstacles];

fuzz_target!(|data: &[u8]| {
    let Some((&k, rest)) = data.split_first() else { return };
    let limits = Limits { max_objects: 64, ..Limits::default() };
    if let Ok(m) = decode_postcard(KINDS[k as usize % 4], rest, &limits) {
        assert!(validate(&m, &limits).is_ok());
    }
});
