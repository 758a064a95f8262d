//! Helpers shared by the integration tests: the binary to start, and replaying files.
//! Each test crate uses some of them.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

use plumbline::config::Config;
use plumbline::core::Sample;
use plumbline::replay::{replay, ReplayOptions, Replayed};

/// A path inside the repository.
pub fn repo(p: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(p)
}

/// Replays a file, collecting every sample in order.
pub fn run(cfg: &Config, path: &Path) -> (Replayed, Vec<Sample>) {
    let mut samples = Vec::new();
    let mut hook = |s: &[Sample], _: &[plumbline::rules::AlertEvent]| samples.extend_from_slice(s);
    let r = replay(cfg, path, ReplayOptions { series: None, progress: &|_| {}, on_samples: Some(&mut hook) })
        .expect("replay");
    (r, samples)
}

/// The binary under test, started from the project's folder (where `config/` and
/// `replay-logs/` are).
pub fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_plumbline"));
    c.current_dir(env!("CARGO_MANIFEST_DIR"));
    c
}

/// Tracking steps of the shipped log `replay-logs/campus-loop.jsonl`: 60 s of estimated
/// object sets at 10 Hz.
pub const SHIPPED_TRACKING_STEPS: u64 = 60 * 10;

/// Records of the shipped log: 601 reference object sets (10 Hz over 60 s, both ends), 600
/// estimate sets, 3001 reference poses (50 Hz), 1200 estimated poses (20 Hz), 300 plans
/// (5 Hz) and the site map.
pub const SHIPPED_RECORDS: u64 = 601 + 600 + 3001 + 1200 + 300 + 1;
