//! Helpers shared by the integration tests that replay files.

use std::path::{Path, PathBuf};

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
