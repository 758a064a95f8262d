//! One module per metric family. Each module's note gives the formula, units and source;
//! a hand-worked test sits beside it. Everything here is pure computation.

pub mod ego;
pub mod gospa;
pub mod nees;
pub mod ospa;
pub mod tracklife;
pub mod transport;

/// Every metric the engine emits, with its name in reports and series.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Metric {
    /// GOSPA total (m).
    Gospa,
    /// Localisation term of gospa^p.
    GospaLocalization,
    /// Missed term of gospa^p.
    GospaMissed,
    /// False term of gospa^p.
    GospaFalse,
    /// Assigned pairs.
    AssignedCount,
    /// Missed reference objects.
    MissedCount,
    /// False estimates.
    FalseCount,
    /// OSPA (m).
    Ospa,
    /// Track switches at a step.
    TrackSwitches,
    /// Fragmentations at a step.
    Fragmentations,
    /// Establishment delay of one reference id (s).
    EstablishmentDelay,
    /// Deletion delay of one estimate id (s).
    DeletionDelay,
    /// Mean NEES of the step's assigned pairs with covariance.
    Nees,
    /// Ego position error (m).
    EgoPositionError,
    /// Ego heading error (rad).
    EgoHeadingError,
    /// Ego longitudinal error (m).
    EgoLongitudinalError,
    /// Ego lateral error (m).
    EgoLateralError,
    /// Arrival minus stamp (s), per role.
    Latency,
    /// Time between arrivals (s), per role.
    Interarrival,
}

impl Metric {
    /// Every metric, in report order.
    pub const ALL: [Metric; 19] = [
        Metric::Gospa,
        Metric::GospaLocalization,
        Metric::GospaMissed,
        Metric::GospaFalse,
        Metric::AssignedCount,
        Metric::MissedCount,
        Metric::FalseCount,
        Metric::Ospa,
        Metric::TrackSwitches,
        Metric::Fragmentations,
        Metric::EstablishmentDelay,
        Metric::DeletionDelay,
        Metric::Nees,
        Metric::EgoPositionError,
        Metric::EgoHeadingError,
        Metric::EgoLongitudinalError,
        Metric::EgoLateralError,
        Metric::Latency,
        Metric::Interarrival,
    ];

    /// The SPEC §5 name.
    pub fn name(self) -> &'static str {
        match self {
            Metric::Gospa => "gospa",
            Metric::GospaLocalization => "gospa_localization",
            Metric::GospaMissed => "gospa_missed",
            Metric::GospaFalse => "gospa_false",
            Metric::AssignedCount => "assigned_count",
            Metric::MissedCount => "missed_count",
            Metric::FalseCount => "false_count",
            Metric::Ospa => "ospa",
            Metric::TrackSwitches => "track_switches",
            Metric::Fragmentations => "fragmentations",
            Metric::EstablishmentDelay => "establishment_delay_s",
            Metric::DeletionDelay => "deletion_delay_s",
            Metric::Nees => "nees",
            Metric::EgoPositionError => "ego_position_error_m",
            Metric::EgoHeadingError => "ego_heading_error_rad",
            Metric::EgoLongitudinalError => "ego_longitudinal_error_m",
            Metric::EgoLateralError => "ego_lateral_error_m",
            Metric::Latency => "latency_s",
            Metric::Interarrival => "interarrival_s",
        }
    }

    /// Parses a SPEC name.
    pub fn from_name(s: &str) -> Option<Metric> {
        Metric::ALL.into_iter().find(|m| m.name() == s)
    }

    /// Whether the metric is a per-step count whose run total matters.
    pub fn is_count(self) -> bool {
        matches!(
            self,
            Metric::TrackSwitches
                | Metric::Fragmentations
                | Metric::AssignedCount
                | Metric::MissedCount
                | Metric::FalseCount
        )
    }
}

impl serde::Serialize for Metric {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.name())
    }
}

/// `d^p`, with the common orders computed without `powf`.
#[inline]
pub fn pow_p(d: f64, p: f64) -> f64 {
    if p == 1.0 {
        d
    } else if p == 2.0 {
        d * d
    } else {
        d.powf(p)
    }
}

/// `x^(1/p)`.
#[inline]
pub fn root_p(x: f64, p: f64) -> f64 {
    if p == 1.0 {
        x
    } else if p == 2.0 {
        x.sqrt()
    } else {
        x.powf(1.0 / p)
    }
}

/// GOSPA and OSPA of two point sets in one call (a fresh solver; for tests and tools —
/// the engine keeps its solver and scratch between steps).
pub fn gospa_ospa(xs: &[[f64; 2]], ys: &[[f64; 2]], c: f64, p: f64, alpha: f64) -> (gospa::Gospa, f64) {
    use crate::core::assign::{match_with_cutoff, MatchScratch, ShortestPath};
    let m = match_with_cutoff(xs, ys, c, p, true, &mut ShortestPath::default(), &mut MatchScratch::default());
    (
        gospa::from_matching(xs.len(), ys.len(), &m, c, p, alpha),
        ospa::from_matching(xs.len(), ys.len(), &m, c, p),
    )
}
