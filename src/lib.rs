//! plumbline: a referee that runs beside an autonomy stack.
//!
//! The crate is split into a pure core and thin edges:
//! - [`msg`]: the messages of the interchange contract and their validation (no I/O);
//! - [`wire`]: direct readers of both log forms for object sets and poses (no I/O);
//! - [`config`]: two-stage configuration (no I/O; the caller passes file text);
//! - [`core`]: time alignment and the evaluation engine, by metric family (no I/O, no clock);
//! - [`gate`]: baseline comparison and JUnit XML (pure);
//! - [`geometry`]: footprint, obstacles, distances, spatial index (pure);
//! - [`inference`]: Clopper-Pearson and Kolmogorov-Smirnov across runs (pure);
//! - [`metrics`]: one module per metric family, the metric catalog, assignment (pure);
//! - [`stats`]: run statistics with bounded memory (pure);
//! - [`windows`]: sliding event-time windows with O(1) updates (pure);
//! - [`report`]: the JSON report and the series rows (pure formatting);
//! - [`rules`]: threshold rules, alerts and verdicts (pure);
//! - [`monitor`]: engine + statistics + windows + rules, the unit live and replay drive (pure);
//! - [`scenario`]: the demo-scenario generator (pure, seeded);
//! - [`schema`]: JSON Schemas of the messages and records (pure);
//! - `live` (feature `live`): zenoh, HTTP and signals (I/O edge);
//! - [`logio`]: log readers and writers (file I/O edge);
//! - [`replay`]: drives the engine from a log (file I/O edge, two threads);
//! - [`threads`]: the drivers' pool for independent pure work (T-GOSPA components; edge);
//! - [`campaign`]: campaign aggregation (pure);
//! - [`html`]: self-contained HTML reports with SVG plots (pure);
//! - [`cli`]: the command line (edge).
#![deny(missing_docs)]

/// `eprintln!` that survives a closed stderr: a message that cannot be written has nowhere
/// else to go and is dropped, where `eprintln!` would panic.
/// `Display` for an enum of fixed words by its `name()`, padded like a `str` (so `{:<8}`
/// lines up the way the words did when they were strings).
macro_rules! display_by_name {
    ($($t:ty),+) => {
        $(impl std::fmt::Display for $t {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.pad(self.name())
            }
        })+
    };
}

macro_rules! errln {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stderr().lock(), $($arg)*);
    }};
}

pub mod campaign;
pub mod cli;
pub mod config;
pub mod core;
pub mod dashboard;
pub mod gate;
pub mod geometry;
pub mod html;
pub mod inference;
#[cfg(feature = "live")]
pub mod live;
pub mod logio;
pub mod metrics;
pub mod monitor;
pub mod msg;
pub mod replay;
pub mod report;
pub mod rules;
pub mod scenario;
pub mod schema;
pub mod stats;
pub mod threads;
pub mod windows;
pub mod wire;
