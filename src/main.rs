//! The `plumbline` binary: parse the command line, run, turn the result into an exit code.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // the binary's entry point

use clap::Parser;

// Records are decoded on worker threads and dropped on the engine thread; mimalloc's
// per-thread free lists make those cross-thread frees cheap (the system allocator takes a
// lock for each).
#[global_allocator]
static GLOBAL: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn main() -> std::process::ExitCode {
    plumbline::cli::run(plumbline::cli::Cli::parse())
}
