//! `plumbline scenario --out FILE`.

use std::path::PathBuf;

use crate::config::Config;
use crate::scenario::{generate, ScenarioParams};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Output log (.jsonl or .plb); with --runs, a folder.
    #[arg(long)]
    pub out: PathBuf,
    /// Write a seeded family of this many runs (varied noise, density and timing) into --out.
    #[arg(long)]
    pub runs: Option<usize>,
    /// Log form of each run with --runs: plb or jsonl.
    #[arg(long, default_value = "plb")]
    pub format: String,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Run length in seconds.
    #[arg(long, default_value_t = 60.0)]
    pub duration: f64,
    /// Objects over the run (besides the crossing pair).
    #[arg(long, default_value_t = 14)]
    pub objects: usize,
    /// Tracker position noise (m).
    #[arg(long, default_value_t = 0.12)]
    pub noise: f64,
    /// Rate of the truth and tracker object topics, Hz (`--rate` is the old name).
    #[arg(long = "topic-hz", alias = "rate", default_value_t = 10.0)]
    pub topic_hz: f64,
    /// Objects carry only id, x and y (lean logs for throughput runs).
    #[arg(long)]
    pub minimal: bool,
}

/// Runs the command.
pub fn run(cfg: &Config, a: &Args) -> u8 {
    super::renamed(&[("--rate", "--topic-hz")]);
    let ok = |x: f64| x.is_finite() && x > 0.0;
    if !(ok(a.duration) && ok(a.topic_hz) && a.topic_hz <= 1000.0 && a.noise.is_finite() && a.noise >= 0.0) {
        errln!("plumbline scenario: --duration and --topic-hz must be > 0 (topic-hz <= 1000), --noise >= 0");
        return super::EXIT_INPUT;
    }
    let p = ScenarioParams {
        seed: a.seed,
        duration: a.duration,
        objects: a.objects,
        noise: a.noise,
        rate_hz: a.topic_hz,
        minimal: a.minimal,
    };
    if let Some(n) = a.runs {
        return family(cfg, a, &p, n);
    }
    let records = generate(&cfg.roles, &p);
    let mut w = match crate::logio::LogWriter::create(&cfg.log(), &a.out) {
        Ok(w) => w,
        Err(e) => {
            errln!("plumbline scenario: {}: {e}", a.out.display());
            return super::EXIT_INPUT;
        }
    };
    for r in &records {
        if let Err(e) = w.write(r) {
            errln!("plumbline scenario: {}: {e}", a.out.display());
            return super::EXIT_INPUT;
        }
    }
    if let Err(e) = w.finish() {
        errln!("plumbline scenario: {}: {e}", a.out.display());
        return super::EXIT_INPUT;
    }
    errln!("plumbline scenario: {} records written to {}", records.len(), a.out.display());
    super::EXIT_OK
}

/// A seeded family of runs: run i has seed `seed + i`, tracker noise in [0.5, 2.17) times
/// `--noise` (with the default 0.12 m: [0.06, 0.26) m), 8 to 23 objects, and object topics
/// at 10 or 20 Hz, all drawn from the family seed.
fn family(cfg: &Config, a: &Args, base: &ScenarioParams, n: usize) -> u8 {
    use rand::{Rng, SeedableRng};
    if a.format != "plb" && a.format != "jsonl" {
        errln!("plumbline scenario: --format: plb or jsonl");
        return super::EXIT_INPUT;
    }
    if let Err(e) = std::fs::create_dir_all(&a.out) {
        errln!("plumbline scenario: {}: {e}", a.out.display());
        return super::EXIT_INPUT;
    }
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(a.seed ^ 0x5eed_f00d);
    for i in 0..n {
        let p = ScenarioParams {
            seed: a.seed + i as u64,
            noise: rng.random_range(0.06..0.26) * (base.noise / 0.12),
            objects: rng.random_range(8..24),
            rate_hz: if rng.random_bool(0.5) { 10.0 } else { 20.0 },
            ..base.clone()
        };
        let path = a.out.join(format!("run-{i:04}.{}", a.format));
        let mut w = match crate::logio::LogWriter::create(&cfg.log(), &path) {
            Ok(w) => w,
            Err(e) => {
                errln!("plumbline scenario: {}: {e}", path.display());
                return super::EXIT_INPUT;
            }
        };
        for r in generate(&cfg.roles, &p) {
            if let Err(e) = w.write(&r) {
                errln!("plumbline scenario: {}: {e}", path.display());
                return super::EXIT_INPUT;
            }
        }
        if let Err(e) = w.finish() {
            errln!("plumbline scenario: {}: {e}", path.display());
            return super::EXIT_INPUT;
        }
    }
    errln!("plumbline scenario: {n} runs written to {}", a.out.display());
    super::EXIT_OK
}
