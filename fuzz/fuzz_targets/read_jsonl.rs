//! The JSON Lines log reader on arbitrary bytes: every item is a valid record or a counted
//! rejection with a reason.
#![no_main]
use libfuzzer_sys::fuzz_target;
use plumbline::config::Config;
use plumbline::logio::{read_bytes, Form, Item};
use plumbline::msg::validate;

fuzz_target!(|data: &[u8]| {
    let cfg = Config::defaults();
    let limits = cfg.limits();
    let _ = read_bytes(&cfg, Form::Jsonl, data, &mut |item, _| match item {
        Item::Record { rec, .. } => assert!(validate(&rec.msg, &limits).is_ok()),
        Item::Bad { reason, .. } => assert!(!reason.code().is_empty()),
    });
});
