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

/// What kind of quantity a metric is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A value per step (a distance, an error, a ratio).
    Value,
    /// A per-step count whose run total matters (the report's `totals`).
    Count,
    /// Kept per role (transport and the monitor's own view of its inputs), not per step.
    PerRole,
}

/// One row of the catalog: every property of one metric.
#[derive(Debug, Clone, Copy)]
pub struct Row {
    /// The metric.
    pub metric: Metric,
    /// Its name in reports, series, rules and the config (the contract's name).
    pub name: &'static str,
    /// Its unit as people read it.
    pub unit: &'static str,
    /// What kind of quantity it is.
    pub kind: Kind,
    /// Which way is worse.
    pub worse: Worse,
    /// What it means, in a line (also the Prometheus help text).
    pub meaning: &'static str,
    /// Its label on the dashboard (tiles and charts), where it has one.
    pub label: Option<&'static str>,
    /// Shown as a dashboard tile.
    pub tile: bool,
    /// Plotted in the HTML report.
    pub plot: bool,
}

/// The catalog, one row per metric in [`Metric::ALL`] order (a test holds the order).
pub static ROWS: [Row; Metric::ALL.len()] = {
    use Kind::*;
    use Metric::*;
    use Worse::*;
    [
        Row {
            metric: Gospa,
            name: "gospa",
            unit: "m",
            kind: Value,
            worse: Higher,
            meaning: "GOSPA between the reference and the estimated objects at a tracking step",
            label: Some("GOSPA"),
            tile: true,
            plot: true,
        },
        Row {
            metric: GospaLocalization,
            name: "gospa_localization",
            unit: "m^p",
            kind: Value,
            worse: Higher,
            meaning: "localization term of gospa^p: the assigned pairs' d^p",
            label: Some("GOSPA localization"),
            tile: false,
            plot: true,
        },
        Row {
            metric: GospaMissed,
            name: "gospa_missed",
            unit: "m^p",
            kind: Value,
            worse: Higher,
            meaning: "missed term of gospa^p: c^p/2 per missed reference object",
            label: Some("GOSPA missed"),
            tile: false,
            plot: true,
        },
        Row {
            metric: GospaFalse,
            name: "gospa_false",
            unit: "m^p",
            kind: Value,
            worse: Higher,
            meaning: "false term of gospa^p: c^p/2 per false estimate",
            label: Some("GOSPA false"),
            tile: false,
            plot: true,
        },
        Row {
            metric: AssignedCount,
            name: "assigned_count",
            unit: "objects",
            kind: Count,
            worse: Lower,
            meaning: "reference objects assigned an estimate at the step",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: MissedCount,
            name: "missed_count",
            unit: "objects",
            kind: Count,
            worse: Higher,
            meaning: "reference objects without an estimate at the step",
            label: Some("missed objects"),
            tile: true,
            plot: false,
        },
        Row {
            metric: FalseCount,
            name: "false_count",
            unit: "objects",
            kind: Count,
            worse: Higher,
            meaning: "estimates without a reference object at the step",
            label: Some("false objects"),
            tile: true,
            plot: false,
        },
        Row {
            metric: Ospa,
            name: "ospa",
            unit: "m",
            kind: Value,
            worse: Higher,
            meaning: "OSPA at the step",
            label: Some("OSPA"),
            tile: true,
            plot: false,
        },
        Row {
            metric: TrackSwitches,
            name: "track_switches",
            unit: "switches",
            kind: Count,
            worse: Higher,
            meaning: "reference ids whose assigned estimate id changed at the step",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: Fragmentations,
            name: "fragmentations",
            unit: "fragmentations",
            kind: Count,
            worse: Higher,
            meaning: "reference ids re-acquired after being unassigned while present",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: EstablishmentDelay,
            name: "establishment_delay_s",
            unit: "s",
            kind: Value,
            worse: Higher,
            meaning: "first assigned step minus first step in the region, per reference id",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: DeletionDelay,
            name: "deletion_delay_s",
            unit: "s",
            kind: Value,
            worse: Higher,
            meaning: "estimate id's last appearance minus the step its object left",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: Nees,
            name: "nees",
            unit: "1",
            kind: Value,
            worse: Higher,
            meaning: "mean NEES of the step's assigned pairs whose estimate carries a covariance",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: Tgospa,
            name: "tgospa",
            unit: "m",
            kind: Value,
            worse: Higher,
            meaning:
                "T-GOSPA between the reference and the estimated trajectories over the trailing tgospa.window",
            label: Some("T-GOSPA"),
            tile: true,
            plot: true,
        },
        Row {
            metric: TgospaLocalization,
            name: "tgospa_localization",
            unit: "m^p",
            kind: Value,
            worse: Higher,
            meaning: "localization part of tgospa^p: the assigned states' d^p over the window",
            label: Some("T-GOSPA localization"),
            tile: false,
            plot: true,
        },
        Row {
            metric: TgospaMissed,
            name: "tgospa_missed",
            unit: "m^p",
            kind: Value,
            worse: Higher,
            meaning:
                "missed part of tgospa^p: the missed cost per reference state left alone over the window",
            label: Some("T-GOSPA missed"),
            tile: false,
            plot: true,
        },
        Row {
            metric: TgospaFalse,
            name: "tgospa_false",
            unit: "m^p",
            kind: Value,
            worse: Higher,
            meaning: "false part of tgospa^p: the false cost per estimated state left alone over the window",
            label: Some("T-GOSPA false"),
            tile: false,
            plot: true,
        },
        Row {
            metric: TgospaSwitch,
            name: "tgospa_switch",
            unit: "m^p",
            kind: Value,
            worse: Higher,
            meaning: "switch part of tgospa^p: gamma^p per full track switch, gamma^p/2 per half switch",
            label: Some("T-GOSPA switch"),
            tile: false,
            plot: true,
        },
        Row {
            metric: TgospaSwitches,
            name: "tgospa_switches",
            unit: "switches",
            kind: Value,
            worse: Higher,
            meaning: "track switches at the T-GOSPA optimum over the window (a half switch counts 1/2)",
            label: Some("T-GOSPA switches"),
            tile: true,
            plot: true,
        },
        Row {
            metric: EgoPositionError,
            name: "ego_position_error_m",
            unit: "m",
            kind: Value,
            worse: Higher,
            meaning: "estimated minus reference ego position, its length",
            label: Some("position error"),
            tile: true,
            plot: true,
        },
        Row {
            metric: EgoHeadingError,
            name: "ego_heading_error_rad",
            unit: "rad",
            kind: Value,
            worse: Neither,
            meaning: "estimated minus reference heading, wrapped to (-pi, pi]",
            label: Some("heading error"),
            tile: true,
            plot: false,
        },
        Row {
            metric: EgoLongitudinalError,
            name: "ego_longitudinal_error_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "position error along the reference heading, forward positive",
            label: None,
            tile: false,
            plot: true,
        },
        Row {
            metric: EgoLateralError,
            name: "ego_lateral_error_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "position error across the reference heading, left positive",
            label: None,
            tile: false,
            plot: true,
        },
        Row {
            metric: Clearance,
            name: "clearance_m",
            unit: "m",
            kind: Value,
            worse: Lower,
            meaning: "footprint at the reference pose to the nearest obstacle (0 on overlap)",
            label: Some("clearance"),
            tile: true,
            plot: true,
        },
        Row {
            metric: Collision,
            name: "collision",
            unit: "flag",
            kind: Count,
            worse: Higher,
            meaning: "1 while the footprint overlaps an obstacle, else 0 (each stretch is one contact)",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: BelievedClearance,
            name: "believed_clearance_m",
            unit: "m",
            kind: Value,
            worse: Lower,
            meaning: "clearance as the stack believes it: estimated pose and objects",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: ClearanceLoss,
            name: "clearance_loss_m",
            unit: "m",
            kind: Value,
            worse: Higher,
            meaning: "planned minus true clearance: the clearance lost",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: ClearanceLossLocalization,
            name: "clearance_loss_localization_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "the part of the clearance loss from localization (signed)",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: ClearanceLossPerception,
            name: "clearance_loss_perception_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "the part of the clearance loss from perception (signed)",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: ClearanceLossPathFollowing,
            name: "clearance_loss_path_following_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "the part of the clearance loss from path following (signed)",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PathClearance,
            name: "path_clearance_m",
            unit: "m",
            kind: Value,
            worse: Lower,
            meaning: "smallest clearance of the footprint swept along a plan",
            label: None,
            tile: false,
            plot: true,
        },
        Row {
            metric: PathMargin,
            name: "path_margin_m",
            unit: "m",
            kind: Value,
            worse: Lower,
            meaning: "path clearance minus clearance.planner_margin_m (snapped to 0 within 1 um)",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: CrossTrack,
            name: "cross_track_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "signed distance of the reference ego from the plan in force, left positive",
            label: Some("cross-track"),
            tile: true,
            plot: false,
        },
        Row {
            metric: PathHeadingError,
            name: "path_heading_error_rad",
            unit: "rad",
            kind: Value,
            worse: Neither,
            meaning: "reference heading minus the plan's tangent",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PathLength,
            name: "path_length_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "length of a plan",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PathLengthExcess,
            name: "path_length_excess",
            unit: "1",
            kind: Value,
            worse: Higher,
            meaning: "plan length over the shortest feasible path on the grid",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PathCurvatureMax,
            name: "path_curvature_max",
            unit: "1/m",
            kind: Value,
            worse: Neither,
            meaning: "largest three-point curvature of a plan",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PathDeviation,
            name: "path_deviation_m",
            unit: "m",
            kind: Value,
            worse: Neither,
            meaning: "largest departure from the chord over path.deviation_window_m",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PathMissing,
            name: "path_missing",
            unit: "flag",
            kind: Count,
            worse: Higher,
            meaning: "1 for an empty plan while a path exists, else 0",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PlanInterval,
            name: "plan_interval_s",
            unit: "s",
            kind: Value,
            worse: Neither,
            meaning: "time between plans",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: PlanCompute,
            name: "plan_compute_s",
            unit: "s",
            kind: Value,
            worse: Higher,
            meaning: "planner compute time the plan reports",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: LateralAccel,
            name: "lateral_accel_mps2",
            unit: "m/s^2",
            kind: Value,
            worse: Neither,
            meaning: "lateral acceleration of the reference ego",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: LateralJerk,
            name: "lateral_jerk_mps3",
            unit: "m/s^3",
            kind: Value,
            worse: Neither,
            meaning: "rate of change of the lateral acceleration",
            label: None,
            tile: false,
            plot: false,
        },
        Row {
            metric: Latency,
            name: "latency_s",
            unit: "s",
            kind: PerRole,
            worse: Neither,
            meaning: "arrival minus stamp, per role",
            label: Some("latency"),
            tile: false,
            plot: false,
        },
        Row {
            metric: Interarrival,
            name: "interarrival_s",
            unit: "s",
            kind: PerRole,
            worse: Neither,
            meaning: "time between arrivals, per role",
            label: Some("inter-arrival"),
            tile: false,
            plot: false,
        },
        Row {
            metric: Staleness,
            name: "staleness_s",
            unit: "s",
            kind: PerRole,
            worse: Neither,
            meaning: "now minus the last arrival, per role (live)",
            label: Some("staleness"),
            tile: false,
            plot: false,
        },
        Row {
            metric: Publishers,
            name: "publishers",
            unit: "publishers",
            kind: PerRole,
            worse: Higher,
            meaning: "publishers heard on the role in the last 10 s (live)",
            label: Some("publishers"),
            tile: false,
            plot: false,
        },
    ]
};

/// The catalog row of a metric.
#[inline]
pub fn row(m: Metric) -> &'static Row {
    &ROWS[m as usize]
}

/// The dashboard's tiles, in catalog order.
pub fn tiles() -> impl Iterator<Item = Metric> {
    ROWS.iter().filter(|r| r.tile).map(|r| r.metric)
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
/// its gauge family's name with `_distribution` before the unit, so both say the same
/// metric (a family name must not carry its type, `histogram`, by the exposition's lint).
pub fn prom_histogram_name(m: Metric) -> String {
    let g = prom_name(m);
    match g.strip_suffix("_seconds") {
        Some(stem) => format!("{stem}_distribution_seconds"),
        None => format!("{g}_distribution"),
    }
}

/// The glossary table (Markdown), as the README holds it.
pub fn glossary_markdown() -> String {
    let mut s = String::from("| metric | unit | meaning | Prometheus family | dashboard | worse when |\n|---|---|---|---|---|---|\n");
    for m in Metric::ALL {
        let e = row(m);
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_are_in_metric_order_and_names_are_unique() {
        for (i, m) in Metric::ALL.into_iter().enumerate() {
            assert_eq!(m as usize, i);
            assert_eq!(ROWS[i].metric, m, "row {i}");
        }
        let mut names: Vec<&str> = ROWS.iter().map(|r| r.name).collect();
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), ROWS.len());
    }
}
