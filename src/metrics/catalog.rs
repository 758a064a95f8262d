//! The catalog of metrics: for each, the one place its name's derived forms and its
//! properties live (unit, meaning, Prometheus family, dashboard label, which way is worse).
//! The README's glossary is this catalog rendered ([`glossary_markdown`]); a test holds the
//! two equal.

use super::Metric;

/// Which way a metric gets worse, for the gate's defaults and the glossary.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Worse {
    /// A larger value is worse.
    Higher,
    /// A smaller value is worse.
    Lower,
    /// Signed, or neither way (a rate, a length): not gated by default.
    Neither,
}

/// What the catalog says of one metric.
#[derive(Debug, Clone, Copy)]
pub struct Entry {
    /// The metric.
    pub metric: Metric,
    /// Its unit as people read it.
    pub unit: &'static str,
    /// What it means, in a line.
    pub meaning: &'static str,
    /// Its label on the dashboard (tiles and charts), where it has one.
    pub label: Option<&'static str>,
    /// Which way is worse.
    pub worse: Worse,
}

/// The catalog entry of a metric.
pub fn entry(m: Metric) -> Entry {
    use Metric::*;
    use Worse::*;
    let (unit, meaning, label, worse) = match m {
        Gospa => (
            "m",
            "GOSPA between the reference and the estimated objects at a tracking step",
            Some("GOSPA"),
            Higher,
        ),
        GospaLocalization => (
            "m^p",
            "localization term of gospa^p: the assigned pairs' d^p",
            Some("GOSPA localization"),
            Higher,
        ),
        GospaMissed => {
            ("m^p", "missed term of gospa^p: c^p/2 per missed reference object", Some("GOSPA missed"), Higher)
        }
        GospaFalse => ("m^p", "false term of gospa^p: c^p/2 per false estimate", Some("GOSPA false"), Higher),
        AssignedCount => ("objects", "reference objects assigned an estimate at the step", None, Lower),
        MissedCount => {
            ("objects", "reference objects without an estimate at the step", Some("missed objects"), Higher)
        }
        FalseCount => {
            ("objects", "estimates without a reference object at the step", Some("false objects"), Higher)
        }
        Ospa => ("m", "OSPA at the step", Some("OSPA"), Higher),
        TrackSwitches => {
            ("switches", "reference ids whose assigned estimate id changed at the step", None, Higher)
        }
        Fragmentations => {
            ("fragmentations", "reference ids re-acquired after being unassigned while present", None, Higher)
        }
        EstablishmentDelay => {
            ("s", "first assigned step minus first step in the region, per reference id", None, Higher)
        }
        DeletionDelay => ("s", "estimate id's last appearance minus the step its object left", None, Higher),
        Nees => {
            ("1", "mean NEES of the step's assigned pairs whose estimate carries a covariance", None, Higher)
        }
        EgoPositionError => {
            ("m", "estimated minus reference ego position, its length", Some("position error"), Higher)
        }
        EgoHeadingError => {
            ("rad", "estimated minus reference heading, wrapped to (-pi, pi]", Some("heading error"), Neither)
        }
        EgoLongitudinalError => {
            ("m", "position error along the reference heading, forward positive", None, Neither)
        }
        EgoLateralError => ("m", "position error across the reference heading, left positive", None, Neither),
        Clearance => (
            "m",
            "footprint at the reference pose to the nearest obstacle (0 on overlap)",
            Some("clearance"),
            Lower,
        ),
        Collision => (
            "flag",
            "1 while the footprint overlaps an obstacle, else 0 (each stretch is one contact)",
            None,
            Higher,
        ),
        BelievedClearance => {
            ("m", "clearance as the stack believes it: estimated pose and objects", None, Lower)
        }
        ClearanceLoss => ("m", "planned minus true clearance: the clearance lost", None, Higher),
        ClearanceLossLocalization => {
            ("m", "the part of the clearance loss from localization (signed)", None, Neither)
        }
        ClearanceLossPerception => {
            ("m", "the part of the clearance loss from perception (signed)", None, Neither)
        }
        ClearanceLossPathFollowing => {
            ("m", "the part of the clearance loss from path following (signed)", None, Neither)
        }
        PathClearance => ("m", "smallest clearance of the footprint swept along a plan", None, Lower),
        PathMargin => {
            ("m", "path clearance minus clearance.planner_margin_m (snapped to 0 within 1 um)", None, Lower)
        }
        CrossTrack => (
            "m",
            "signed distance of the reference ego from the plan in force, left positive",
            Some("cross-track"),
            Neither,
        ),
        PathHeadingError => ("rad", "reference heading minus the plan's tangent", None, Neither),
        PathLength => ("m", "length of a plan", None, Neither),
        PathLengthExcess => ("1", "plan length over the shortest feasible path on the grid", None, Higher),
        PathCurvatureMax => ("1/m", "largest three-point curvature of a plan", None, Neither),
        PathDeviation => {
            ("m", "largest departure from the chord over path.deviation_window_m", None, Neither)
        }
        PathMissing => ("flag", "1 for an empty plan while a path exists, else 0", None, Higher),
        PlanInterval => ("s", "time between plans", None, Neither),
        PlanCompute => ("s", "planner compute time the plan reports", None, Higher),
        LateralAccel => ("m/s^2", "lateral acceleration of the reference ego", None, Neither),
        LateralJerk => ("m/s^3", "rate of change of the lateral acceleration", None, Neither),
        Latency => ("s", "arrival minus stamp, per role", Some("latency"), Neither),
        Interarrival => ("s", "time between arrivals, per role", Some("inter-arrival"), Neither),
        Staleness => ("s", "now minus the last arrival, per role (live)", Some("staleness"), Neither),
        Publishers => {
            ("publishers", "publishers heard on the role in the last 10 s (live)", Some("publishers"), Higher)
        }
    };
    Entry { metric: m, unit, meaning, label, worse }
}

/// The Prometheus family of a metric: `plumbline_<name>` with the unit spelled out in
/// base units, as the exposition conventions ask (`_seconds`, `_meters`, ...).
pub fn prom_name(m: Metric) -> String {
    let n = m.name();
    let base = if let Some(s) = n.strip_suffix("_mps2") {
        format!("{s}_meters_per_second_squared")
    } else if let Some(s) = n.strip_suffix("_mps3") {
        format!("{s}_meters_per_second_cubed")
    } else if let Some(s) = n.strip_suffix("_rad") {
        format!("{s}_radians")
    } else if let Some(s) = n.strip_suffix("_m") {
        format!("{s}_meters")
    } else if let Some(s) = n.strip_suffix("_s") {
        format!("{s}_seconds")
    } else if matches!(m, Metric::Gospa | Metric::Ospa) {
        format!("{n}_meters")
    } else if let Some(s) = n.strip_suffix("_count") {
        // A `_count` suffix is reserved for histograms and summaries.
        format!("{s}_objects")
    } else if m == Metric::PathCurvatureMax {
        "path_curvature_max_per_meter".to_string()
    } else {
        n.to_string()
    };
    format!("plumbline_{base}")
}

/// The Prometheus histogram family of a per-role timing metric (latency, interarrival):
/// its gauge family's name with `_histogram` before the unit, so both say the same metric.
pub fn prom_histogram_name(m: Metric) -> String {
    let g = prom_name(m);
    match g.strip_suffix("_seconds") {
        Some(stem) => format!("{stem}_histogram_seconds"),
        None => format!("{g}_histogram"),
    }
}

/// The glossary table (Markdown), as the README holds it.
pub fn glossary_markdown() -> String {
    let mut s = String::from("| metric | unit | meaning | Prometheus family | dashboard | worse when |\n|---|---|---|---|---|---|\n");
    for m in Metric::ALL {
        let e = entry(m);
        let worse = match e.worse {
            Worse::Higher => "higher",
            Worse::Lower => "lower",
            Worse::Neither => "-",
        };
        s += &format!(
            "| `{}` | {} | {} | `{}` | {} | {} |\n",
            m.name(),
            e.unit,
            e.meaning,
            prom_name(m),
            e.label.unwrap_or("-"),
            worse
        );
    }
    s
}
