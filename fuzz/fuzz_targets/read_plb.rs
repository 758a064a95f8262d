//! The binary log reader. The first byte picks what the rest is: (0) a whole file as is;
//! (1) the bytes after a valid header; (2) record payloads behind a valid header, each
//! framed with the sync marker, its true length and CRC32, so the fuzzer reaches the record decoder past the
//! checksum. Every item is a valid record or a counted rejection.
#![no_main]
use libfuzzer_sys::fuzz_target;
use plumbline::config::Config;
use plumbline::core::Input;
use plumbline::logio::{plb, read_bytes, Form, Item};
use plumbline::monitor::Monitor;
use plumbline::msg::validate;

fn header(cfg: &Config) -> Vec<u8> {
    let w = plb::PlbWriter::new(Vec::new(), &plb::Header::for_config(cfg, 0.0)).expect("header");
    w.finish().expect("in memory")
}

fuzz_target!(|data: &[u8]| {
    let Some((&mode, rest)) = data.split_first() else { return };
    let cfg = Config::defaults();
    let bytes = match mode % 3 {
        0 => rest.to_vec(),
        1 => [header(&cfg), rest.to_vec()].concat(),
        _ => {
            // Payloads separated by 0xff bytes in the input.
            let mut out = header(&cfg);
            for p in rest.split(|&b| b == 0xff) {
                out.extend_from_slice(&plb::SYNC);
                out.extend_from_slice(&(p.len() as u32).to_le_bytes());
                out.extend_from_slice(&crc32fast::hash(p).to_le_bytes());
                out.extend_from_slice(p);
            }
            out
        }
    };
    let limits = cfg.limits();
    // Whatever is accepted is scored: every metric value that comes out is finite.
    let mut monitor = Monitor::new(&cfg);
    let (mut samples, mut events) = (Vec::new(), Vec::new());
    let _ = read_bytes(&cfg, Form::Plb, &bytes, &mut |item, _| match item {
        Item::Record { role, rec } => {
            assert!(validate(&rec.msg, &limits).is_ok());
            monitor.push(Input::Message { role, recv: rec.recv, msg: rec.msg }, &mut samples, &mut events);
        }
        Item::Bad { reason, .. } => assert!(!reason.code().is_empty()),
        Item::Damaged(d) => assert!(d.bytes > 0 && d.records > 0),
    });
    monitor.finish(&mut samples, &mut events);
    assert!(samples.iter().all(|s| s.value.is_finite()), "a non-finite sample");
    assert_eq!(monitor.stats.non_finite, 0, "a non-finite value reached the monitor");
});
