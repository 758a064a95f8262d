//! The JSON Lines log reader on arbitrary bytes: every item is a valid record or a counted
//! rejection with a reason, and every metric value scored from the records is finite.
#![no_main]
use libfuzzer_sys::fuzz_target;
use plumbline::config::Config;
use plumbline::core::Input;
use plumbline::logio::{read_bytes, Form, Item};
use plumbline::monitor::Monitor;
use plumbline::msg::validate;

fuzz_target!(|data: &[u8]| {
    let cfg = Config::defaults();
    let limits = cfg.limits();
    // Whatever is accepted is scored: every metric value that comes out is finite.
    let mut monitor = Monitor::new(&cfg);
    let (mut samples, mut events) = (Vec::new(), Vec::new());
    let _ = read_bytes(&cfg, Form::Jsonl, data, &mut |item, _| match item {
        Item::Record { role, rec } => {
            assert!(validate(&rec.msg, &limits).is_ok());
            monitor.push(Input::Message { role, recv: rec.recv, msg: rec.msg }, &mut samples, &mut events);
        }
        Item::Bad { reason, .. } => assert!(!reason.code().is_empty()),
        Item::Damaged(_) => unreachable!("JSON Lines have no damaged stretches"),
    });
    monitor.finish(&mut samples, &mut events);
    assert!(samples.iter().all(|s| s.value.is_finite()), "a non-finite sample");
    assert_eq!(monitor.stats.non_finite, 0, "a non-finite value reached the monitor");
});
