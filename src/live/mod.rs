//! The live edges (feature `live`): zenoh sessions, the HTTP exposition and signals. They
//! feed the same pure [`crate::monitor::Monitor`] that replay feeds.

#![allow(clippy::disallowed_methods, clippy::disallowed_types)] // the live edge reads clocks, runs threads and writes recordings

pub mod access;
pub mod exposition;
pub mod http;
pub mod load;
pub mod publish;
pub mod watch;
pub mod zenoh_io;
