//! The command line: flags, glue and user-facing messages. Each command lives in its own
//! file; metric logic stays in the library.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // the commands read and write the files the user names

/// `print!` to stdout that survives a closed stdout (see [`write_out`]).
macro_rules! out {
    ($($arg:tt)*) => { $crate::cli::write_out(format_args!($($arg)*)) };
}

/// `println!` to stdout that survives a closed stdout (see [`write_out`]).
macro_rules! outln {
    ($($arg:tt)*) => { $crate::cli::write_out(format_args!("{}\n", format_args!($($arg)*))) };
}

mod campaign;
mod compare;
mod convert;
mod gate;
#[cfg(feature = "live")]
mod live;
mod replay;
mod scenario;

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

use crate::config::Config;

/// Exit code: no critical rule failed.
pub const EXIT_OK: u8 = 0;
/// Exit code: a critical rule failed or a gate regressed.
pub const EXIT_FAIL: u8 = 1;
/// Exit code: unreadable input or invalid config.
pub const EXIT_INPUT: u8 = 2;

/// plumbline: referees an autonomy stack against its reference.
#[derive(Debug, Parser)]
#[command(name = "plumbline", version, about, long_about = None)]
pub struct Cli {
    /// Config file (default: config/plumbline.toml if present, else built-in defaults).
    #[arg(long, global = true, value_name = "FILE")]
    pub config: Option<PathBuf>,
    /// Override a config key after the file: section.key=value (repeatable).
    #[arg(long = "set", global = true, value_name = "SECTION.KEY=VALUE")]
    pub sets: Vec<String>,
    /// Log as JSON lines on stderr instead of text.
    #[arg(long, global = true)]
    pub log_json: bool,
    /// The command.
    #[command(subcommand)]
    pub command: Command,
}

/// Commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Replay a log through the engine: summary on stdout, optional report and series.
    Replay(replay::Args),
    /// Convert a log between JSON Lines (.jsonl) and binary (.plb).
    Convert(convert::Args),
    /// Generate a demo-scenario log (the Aldermoor campus shuttle), or a seeded family of them.
    Scenario(scenario::Args),
    /// Compare a run with a baseline report under tolerances; JUnit XML for CI.
    Gate(gate::GateArgs),
    /// Replay many logs in parallel and aggregate pass rates with confidence bounds.
    Campaign(campaign::CampaignArgs),
    /// Field runs against their simulated twins, on per-run statistics.
    Compare(compare::CompareArgs),
    /// Print the JSON Schema (draft 2020-12) of a message or of a JSON Lines record.
    Schema(SchemaArgs),
    /// Watch a live stack over zenoh: metrics on HTTP, alerts, optional recording.
    #[cfg(feature = "live")]
    Watch(live::WatchArgs),
    /// Record every role to a binary log.
    #[cfg(feature = "live")]
    Record(live::RecordArgs),
    /// Play a log onto zenoh.
    #[cfg(feature = "live")]
    Publish(live::PublishArgs),
    /// The demo stack and the watcher in one process (no stack or router needed).
    #[cfg(feature = "live")]
    Demo(live::DemoArgs),
    /// A bounded stress generator for the watcher, loopback only (`load` is the old name).
    #[cfg(feature = "live")]
    #[command(alias = "load")]
    Stress(live::LoadArgs),
}

/// `schema` arguments.
#[derive(Debug, clap::Args)]
pub struct SchemaArgs {
    /// Which schema: record (a JSON Lines line), object-set, pose, path or obstacle-set;
    /// none: all of them in one object by name.
    pub name: Option<String>,
}

/// Runs `schema`: the schemas with the config's role keys and limits.
fn schema_cmd(cfg: &Config, a: &SchemaArgs) -> u8 {
    let v = match &a.name {
        Some(n) => match crate::schema::by_name(&cfg.limits(), &cfg.roles, n) {
            Some(v) => v,
            None => return fail("schema", format!("`{n}`: one of {}", crate::schema::NAMES.join(", "))),
        },
        None => serde_json::Value::Object(
            crate::schema::NAMES
                .iter()
                .filter_map(|n| Some((n.to_string(), crate::schema::by_name(&cfg.limits(), &cfg.roles, n)?)))
                .collect(),
        ),
    };
    outln!("{}", serde_json::to_string_pretty(&v).unwrap_or_default());
    EXIT_OK
}

/// Runs the parsed command line and returns the process exit code.
pub fn run(cli: Cli) -> ExitCode {
    init_tracing(cli.log_json);
    let cfg = match load_config(cli.config.as_ref(), &cli.sets) {
        Ok(c) => {
            for w in &c.warnings {
                errln!("plumbline: warning: {w}");
            }
            c
        }
        Err(e) => {
            errln!("plumbline: invalid config: {e}");
            return ExitCode::from(EXIT_INPUT);
        }
    };
    let code = match &cli.command {
        Command::Replay(a) => replay::run(&cfg, a),
        Command::Convert(a) => convert::run(&cfg, a),
        Command::Scenario(a) => scenario::run(&cfg, a),
        Command::Gate(a) => gate::gate_cmd(&cfg, a),
        Command::Campaign(a) => campaign::campaign_cmd(&cfg, a),
        Command::Compare(a) => compare::compare_cmd(&cfg, a),
        Command::Schema(a) => schema_cmd(&cfg, a),
        #[cfg(feature = "live")]
        Command::Watch(a) => live::watch_cmd(&cfg, a),
        #[cfg(feature = "live")]
        Command::Record(a) => live::record_cmd(&cfg, a),
        #[cfg(feature = "live")]
        Command::Publish(a) => live::publish_cmd(&cfg, a),
        #[cfg(feature = "live")]
        Command::Demo(a) => live::demo_cmd(&cfg, &cli.sets, a),
        #[cfg(feature = "live")]
        Command::Stress(a) => live::load_cmd(&cfg, a),
    };
    ExitCode::from(code)
}

/// Writes to stdout. A reader that quit early (`plumbline replay LOG | head`) closes the
/// pipe: the rest of the text is dropped without a panic and the command goes on, so its
/// report and series files are still written and its exit code still says what it found.
/// Any other write error is logged once.
pub(crate) fn write_out(args: std::fmt::Arguments<'_>) {
    use std::io::Write;
    use std::sync::atomic::{AtomicBool, Ordering};
    static GONE: AtomicBool = AtomicBool::new(false);
    if GONE.load(Ordering::Relaxed) {
        return;
    }
    if let Err(e) = std::io::stdout().lock().write_fmt(args) {
        GONE.store(true, Ordering::Relaxed);
        if e.kind() != std::io::ErrorKind::BrokenPipe {
            tracing::warn!(error = %e, "stdout cannot be written; the rest of the text is dropped");
        }
    }
}

/// Warns, naming the new name, for each old command or option name the command line used
/// (old names keep working for one release).
pub(crate) fn renamed(pairs: &[(&str, &str)]) {
    let args: Vec<String> = std::env::args().skip(1).collect();
    for (old, new) in pairs {
        let used = args.iter().any(|a| a == old || a.starts_with(&format!("{old}=")));
        if used {
            errln!("plumbline: warning: {}", crate::config::renamed_note(old, new));
        }
    }
}

/// Prints a command's error and returns the input/config exit code.
pub(crate) fn fail(cmd: &str, e: impl std::fmt::Display) -> u8 {
    errln!("plumbline {cmd}: {e}");
    EXIT_INPUT
}

/// Loads the config: `--config`, else `config/plumbline.toml` if present, else defaults;
/// then the `--set` overrides.
pub fn load_config(path: Option<&PathBuf>, sets: &[String]) -> Result<Config, String> {
    let default = PathBuf::from("config/plumbline.toml");
    let chosen = match path {
        Some(p) => Some(p.clone()),
        None if default.exists() => Some(default),
        None => None,
    };
    let text = match &chosen {
        Some(p) => Some(std::fs::read_to_string(p).map_err(|e| format!("{}: {e}", p.display()))?),
        None => None,
    };
    let name = chosen.as_ref().map(|p| p.display().to_string());
    let file = match (&name, &text) {
        (Some(n), Some(t)) => Some((n.as_str(), t.as_str())),
        _ => None,
    };
    Config::load(file, sets).map_err(|e| e.to_string())
}

fn init_tracing(json: bool) {
    use tracing_subscriber::EnvFilter;
    let filter = EnvFilter::try_from_env("PLUMBLINE_LOG").unwrap_or_else(|_| EnvFilter::new("warn"));
    let b = tracing_subscriber::fmt().with_env_filter(filter).with_writer(std::io::stderr);
    let _ = if json { b.json().try_init() } else { b.try_init() };
}
