//! `load`: a bounded load generator for the watcher, loopback only. It publishes object
//! sets (reference and estimate, alternating) of a given size at a given total rate for a
//! given time, then stops by itself.

use std::time::{Duration, Instant};

use zenoh::bytes::Encoding;
use zenoh::Wait;

use super::zenoh_io::{postcard_encoding, wall_now};
use crate::config::Config;
use crate::msg::{Msg, Object, ObjectSet, Role};

/// Load settings.
#[derive(Debug, Clone, Copy)]
pub struct LoadOptions {
    /// Messages per second, all roles together.
    pub rate: f64,
    /// How long (s); at most 600.
    pub seconds: f64,
    /// Objects per set.
    pub objects: usize,
    /// Postcard payloads instead of JSON.
    pub binary: bool,
    /// Objects per group: 1 spreads them 3 m apart; more puts each group's objects 0.5 m
    /// apart, within the default 2 m cutoff of each other, so the T-GOSPA programs have
    /// rivals at every step.
    pub group: usize,
}

/// Whether every configured endpoint is on the loopback interface.
pub fn loopback_only(endpoints: &[String]) -> bool {
    endpoints.iter().all(|e| {
        let host = e.split('/').nth(1).unwrap_or("");
        host.starts_with("127.") || host.starts_with("localhost") || host.starts_with("[::1]")
    })
}

/// Publishes the load; returns the messages sent.
pub fn run(cfg: &Config, o: LoadOptions, session: &zenoh::Session) -> Result<u64, String> {
    let roles = [Role::ReferenceObjects, Role::EstimateObjects];
    let pubs: Vec<_> = roles
        .iter()
        .map(|r| {
            let enc = if o.binary { postcard_encoding() } else { Encoding::APPLICATION_JSON };
            session
                .declare_publisher(cfg.key_of(*r).to_string())
                .encoding(enc)
                .congestion_control(zenoh::qos::CongestionControl::Block)
                .wait()
        })
        .collect::<Result<_, _>>()
        .map_err(|e| format!("declaring publishers: {e}"))?;
    let total = (o.rate * o.seconds.min(600.0)) as u64;
    let tag = super::zenoh_io::source_tag(session);
    let start = Instant::now();
    let mut sent = 0u64;
    while sent < total && start.elapsed().as_secs_f64() < o.seconds.min(600.0) + 5.0 {
        let due = Duration::from_secs_f64(sent as f64 / o.rate);
        if let Some(w) = due.checked_sub(start.elapsed()) {
            std::thread::sleep(w);
        }
        let t = wall_now();
        let k = (sent / 2) as f64;
        let objects = (0..o.objects as u64)
            .map(|i| {
                let drift = (k * 0.01) % 5.0;
                let offset = if sent % 2 == 1 { 0.1 } else { 0.0 };
                let (x, y) = match o.group as u64 {
                    0 | 1 => (i as f64 * 3.0 + drift, (i % 7) as f64 * 2.0 + offset),
                    n => {
                        let (g, m) = (i / n, i % n);
                        (g as f64 * 8.0 + m as f64 * 0.5 + drift, (g % 7) as f64 * 2.0 + offset)
                    }
                };
                Object::at(i + 1, x, y)
            })
            .collect();
        let msg = Msg::Objects(ObjectSet { stamp: t, frame: None, objects });
        let payload = if o.binary { msg.to_postcard() } else { msg.to_json().into_bytes() };
        pubs[(sent % 2) as usize]
            .put(payload)
            .attachment(tag.clone())
            .wait()
            .map_err(|e| format!("publishing: {e}"))?;
        sent += 1;
    }
    Ok(sent)
}
