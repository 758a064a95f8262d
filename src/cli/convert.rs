//! `plumbline convert IN OUT`.

use std::path::PathBuf;

use crate::config::Config;
use crate::logio::{read_all, Item, LogWriter};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Input log (.jsonl or .plb).
    pub input: PathBuf,
    /// Output log; its extension picks the form.
    pub output: PathBuf,
}

/// Runs the command.
pub fn run(cfg: &Config, a: &Args) -> u8 {
    let mut w = match LogWriter::create(&cfg.log(), &a.output) {
        Ok(w) => w,
        Err(e) => {
            errln!("plumbline convert: {}: {e}", a.output.display());
            return super::EXIT_INPUT;
        }
    };
    let (mut n, mut bad) = (0u64, 0u64);
    let mut err = None;
    let read = read_all(&cfg.log(), &a.input, &mut |item, _| match item {
        Item::Record { rec, .. } => {
            if err.is_none() {
                if let Err(e) = w.write(&rec) {
                    err = Some(e);
                }
                n += 1;
            }
        }
        Item::Bad { pos, reason, .. } => {
            bad += 1;
            errln!("plumbline convert: {}: {pos}: skipped: {reason}", a.input.display());
        }
        Item::Damaged(d) => {
            bad += d.records;
            errln!(
                "plumbline convert: {}: byte {}: {} damaged bytes skipped ({}; about {} records)",
                a.input.display(),
                d.offset,
                d.bytes,
                d.reason,
                d.records
            );
        }
    });
    let outcome = match read {
        Ok(o) => o,
        Err(e) => {
            errln!("plumbline convert: {e}");
            return super::EXIT_INPUT;
        }
    };
    if let Some(e) = err.or_else(|| w.finish().err()) {
        errln!("plumbline convert: {}: {e}", a.output.display());
        return super::EXIT_INPUT;
    }
    if let Some(t) = &outcome.tail {
        errln!("plumbline convert: {}: damaged tail at byte {}: {}", a.input.display(), t.offset, t.reason);
    }
    errln!("plumbline convert: {n} records written to {}, {bad} skipped", a.output.display());
    super::EXIT_OK
}
