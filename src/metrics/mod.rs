//! One module per metric family. Each module's note gives the formula, units and source;
//! a hand-worked test sits beside it. Everything here is pure computation.

pub mod assign;
pub mod catalog;
pub mod ego;
pub mod gospa;
pub mod lp;
pub mod nees;
pub mod ospa;
pub mod path;
pub mod tgospa;
pub mod tracklife;
pub mod transport;

/// Every metric the engine emits, with its name in reports and series.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Metric {
    /// GOSPA total (m).
    Gospa,
    /// Localization term of gospa^p.
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
    /// T-GOSPA over the trailing window (m).
    Tgospa,
    /// Localization part of tgospa^p.
    TgospaLocalization,
    /// Missed part of tgospa^p.
    TgospaMissed,
    /// False part of tgospa^p.
    TgospaFalse,
    /// Switch part of tgospa^p.
    TgospaSwitch,
    /// Track switches in the window (a half switch counts 1/2).
    TgospaSwitches,
    /// Ego position error (m).
    EgoPositionError,
    /// Ego heading error (rad).
    EgoHeadingError,
    /// Ego longitudinal error (m).
    EgoLongitudinalError,
    /// Ego lateral error (m).
    EgoLateralError,
    /// Footprint clearance to the nearest reference obstacle (m).
    Clearance,
    /// 1 while the footprint overlaps an obstacle, else 0.
    Collision,
    /// Clearance as the stack believes it (estimated pose and objects) (m).
    BelievedClearance,
    /// Planned minus true clearance (m).
    ClearanceLoss,
    /// Localization part of the clearance loss (m).
    ClearanceLossLocalization,
    /// Perception part of the clearance loss (m).
    ClearanceLossPerception,
    /// Path-following part of the clearance loss (m).
    ClearanceLossPathFollowing,
    /// Smallest clearance along a plan (m).
    PathClearance,
    /// Path clearance minus the required inflation (m).
    PathMargin,
    /// Signed distance of the reference ego from the plan, left positive (m).
    CrossTrack,
    /// Reference heading minus the plan's tangent (rad).
    PathHeadingError,
    /// Plan length (m).
    PathLength,
    /// Plan length over the shortest feasible path.
    PathLengthExcess,
    /// Largest three-point curvature of a plan (1/m).
    PathCurvatureMax,
    /// Largest departure from the chord over the deviation window (m).
    PathDeviation,
    /// 1 for an empty plan while a path exists, else 0.
    PathMissing,
    /// Time between plans (s).
    PlanInterval,
    /// Planner compute time (s).
    PlanCompute,
    /// Lateral acceleration of the reference ego (m/s^2).
    LateralAccel,
    /// Lateral jerk of the reference ego (m/s^3).
    LateralJerk,
    /// Arrival minus stamp (s), per role.
    Latency,
    /// Time between arrivals (s), per role.
    Interarrival,
    /// Now minus the last arrival (s), per role; live only.
    Staleness,
    /// Distinct publishers heard on the role in the last 10 s, per role; live only.
    Publishers,
}

impl Metric {
    /// Every metric, in report order.
    pub const ALL: [Metric; 47] = [
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
        Metric::Tgospa,
        Metric::TgospaLocalization,
        Metric::TgospaMissed,
        Metric::TgospaFalse,
        Metric::TgospaSwitch,
        Metric::TgospaSwitches,
        Metric::EgoPositionError,
        Metric::EgoHeadingError,
        Metric::EgoLongitudinalError,
        Metric::EgoLateralError,
        Metric::Clearance,
        Metric::Collision,
        Metric::BelievedClearance,
        Metric::ClearanceLoss,
        Metric::ClearanceLossLocalization,
        Metric::ClearanceLossPerception,
        Metric::ClearanceLossPathFollowing,
        Metric::PathClearance,
        Metric::PathMargin,
        Metric::CrossTrack,
        Metric::PathHeadingError,
        Metric::PathLength,
        Metric::PathLengthExcess,
        Metric::PathCurvatureMax,
        Metric::PathDeviation,
        Metric::PathMissing,
        Metric::PlanInterval,
        Metric::PlanCompute,
        Metric::LateralAccel,
        Metric::LateralJerk,
        Metric::Latency,
        Metric::Interarrival,
        Metric::Staleness,
        Metric::Publishers,
    ];

    /// The contract's name (the catalog's).
    #[inline]
    pub fn name(self) -> &'static str {
        catalog::row(self).name
    }

    /// Parses a SPEC name.
    pub fn from_name(s: &str) -> Option<Metric> {
        Metric::ALL.into_iter().find(|m| m.name() == s)
    }

    /// Whether the metric is kept per role (transport and the monitor's own view of its
    /// inputs) rather than per step.
    pub fn is_per_role(self) -> bool {
        catalog::row(self).kind == catalog::Kind::PerRole
    }

    /// Whether the metric is a per-step count whose run total matters.
    pub fn is_count(self) -> bool {
        catalog::row(self).kind == catalog::Kind::Count
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
    use crate::metrics::assign::{match_with_cutoff, MatchScratch, ShortestPath};
    let m = match_with_cutoff(xs, ys, c, p, true, &mut ShortestPath::default(), &mut MatchScratch::default());
    (
        gospa::from_matching(xs.len(), ys.len(), &m, c, p, alpha),
        ospa::from_matching(xs.len(), ys.len(), &m, c, p),
    )
}
