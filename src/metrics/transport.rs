//! Transport health per role (SPEC §5): `latency_s` = recv - stamp, `interarrival_s` =
//! recv - previous recv, `staleness_s` = now - last recv (live only), and counters
//! `rejected`, `dropped`, `stamp_regressions`. Seconds on the monitor's clock.

use serde::Serialize;

/// Per-role transport state.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Transport {
    /// Messages accepted.
    pub messages: u64,
    /// Messages rejected while decoding or validating.
    pub rejected: u64,
    /// Messages dropped by a full queue.
    pub dropped: u64,
    /// Messages whose stamp is older than the role's previous one.
    pub stamp_regressions: u64,
    #[serde(skip)]
    last_recv: Option<f64>,
    #[serde(skip)]
    last_stamp: Option<f64>,
    #[serde(skip)]
    last_latency: Option<f64>,
}

/// One accepted message's transport samples.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct TransportSample {
    /// recv - stamp, when recv is known.
    pub latency: Option<f64>,
    /// recv - previous recv, when both are known.
    pub interarrival: Option<f64>,
    /// Whether the stamp went backwards.
    pub regression: bool,
}

impl Transport {
    /// Records an accepted message.
    pub fn accept(&mut self, stamp: f64, recv: Option<f64>) -> TransportSample {
        self.messages += 1;
        let regression = self.last_stamp.is_some_and(|s| stamp < s);
        if regression {
            self.stamp_regressions += 1;
        }
        self.last_stamp = Some(stamp);
        let latency = recv.map(|r| r - stamp);
        if latency.is_some() {
            self.last_latency = latency;
        }
        let interarrival = match (recv, self.last_recv) {
            (Some(r), Some(prev)) => Some(r - prev),
            _ => None,
        };
        if recv.is_some() {
            self.last_recv = recv;
        }
        TransportSample { latency, interarrival, regression }
    }

    /// The latest message's latency (recv - stamp), when arrival times are known.
    pub fn last_latency(&self) -> Option<f64> {
        self.last_latency
    }

    /// Seconds since the last arrival at `now`, if anything arrived.
    pub fn staleness(&self, now: f64) -> Option<f64> {
        self.last_recv.map(|r| now - r)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn latency_interarrival_and_regressions() {
        let mut t = Transport::default();
        let a = t.accept(10.0, Some(10.05));
        assert!((a.latency.unwrap() - 0.05).abs() < 1e-12);
        assert_eq!(a.interarrival, None);
        let b = t.accept(10.1, Some(10.16));
        assert!((b.interarrival.unwrap() - 0.11).abs() < 1e-12);
        let c = t.accept(9.9, Some(10.2));
        assert!(c.regression);
        assert_eq!(t.stamp_regressions, 1);
        assert!((t.staleness(11.0).unwrap() - 0.8).abs() < 1e-12);
    }
}
