//! The `plumbline` binary: parse the command line, run, turn the result into an exit code.

use clap::Parser;

fn main() -> std::process::ExitCode {
    plumbline::cli::run(plumbline::cli::Cli::parse())
}
