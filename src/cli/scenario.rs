//! `plumbline scenario --out FILE`.

use std::path::PathBuf;

use crate::config::Config;
use crate::scenario::{generate, ScenarioParams};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Output log (.jsonl or .plb).
    #[arg(long)]
    pub out: PathBuf,
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
    /// Rate of the truth and tracker object topics (Hz).
    #[arg(long, default_value_t = 10.0)]
    pub rate: f64,
    /// Objects carry only id, x and y (lean logs for throughput runs).
    #[arg(long)]
    pub minimal: bool,
}

/// Runs the command.
pub fn run(cfg: &Config, a: &Args) -> u8 {
    let ok = |x: f64| x.is_finite() && x > 0.0;
    if !(ok(a.duration) && ok(a.rate) && a.rate <= 1000.0 && a.noise.is_finite() && a.noise >= 0.0) {
        eprintln!("plumbline scenario: --duration and --rate must be > 0 (rate <= 1000), --noise >= 0");
        return super::EXIT_INPUT;
    }
    let p = ScenarioParams {
        seed: a.seed,
        duration: a.duration,
        objects: a.objects,
        noise: a.noise,
        rate_hz: a.rate,
        minimal: a.minimal,
    };
    let records = generate(cfg, &p);
    let mut w = match crate::logio::LogWriter::create(cfg, &a.out) {
        Ok(w) => w,
        Err(e) => {
            eprintln!("plumbline scenario: {}: {e}", a.out.display());
            return super::EXIT_INPUT;
        }
    };
    for r in &records {
        if let Err(e) = w.write(r) {
            eprintln!("plumbline scenario: {}: {e}", a.out.display());
            return super::EXIT_INPUT;
        }
    }
    if let Err(e) = w.finish() {
        eprintln!("plumbline scenario: {}: {e}", a.out.display());
        return super::EXIT_INPUT;
    }
    eprintln!("plumbline scenario: {} records written to {}", records.len(), a.out.display());
    super::EXIT_OK
}
