//! Event-time alignment (SPEC §4) on hand-built streams, with the expected values worked
//! out by hand from the rule: exact match, interpolation, the wait measured on arrival
//! times, the fallback within tolerance, and the evaluation region.

use plumbline::core::{AlignParams, ClearanceParams, EgoSource, Engine, Input, Sample, TrackingParams};
use plumbline::metrics::Metric;
use plumbline::msg::{Frame, Msg, Object, ObjectSet, Pose, Role};

fn objs(stamp: f64, pts: &[(u64, f64, f64)]) -> Msg {
    Msg::Objects(ObjectSet {
        stamp,
        frame: None,
        objects: pts.iter().map(|&(id, x, y)| Object::at(id, x, y)).collect(),
    })
}

fn pose(stamp: f64, x: f64, y: f64, yaw: f64) -> Msg {
    Msg::Pose(Pose { stamp, x, y, yaw, v: None, cov: None })
}

struct Run {
    engine: Engine,
    out: Vec<Sample>,
}

impl Run {
    fn new(tp: TrackingParams) -> Run {
        Run { engine: Engine::new(tp, AlignParams::default(), ClearanceParams::default()), out: Vec::new() }
    }
    fn push(&mut self, role: Role, recv: f64, msg: Msg) {
        self.engine.push(Input::Message { role, recv: Some(recv), msg }, &mut self.out);
    }
    fn finish(mut self) -> (Engine, Vec<Sample>) {
        self.engine.finish(&mut self.out);
        (self.engine, self.out)
    }
}

fn values(out: &[Sample], m: Metric) -> Vec<(f64, f64)> {
    out.iter().filter(|s| s.metric == m).map(|s| (s.t, s.value)).collect()
}

#[test]
fn interpolates_between_bracketing_references() {
    // Truth moves 0 -> 10 m between t = 0 and 1; the estimate at t = 0.25 sits at 2.5 m:
    // interpolated reference 2.5, gospa 0 (p = 1).
    let mut r = Run::new(TrackingParams::default());
    r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 0.0, 0.0)]));
    r.push(Role::EstimateObjects, 0.26, objs(0.25, &[(7, 2.5, 0.0)]));
    r.push(Role::ReferenceObjects, 0.7, objs(1.0, &[(1, 10.0, 0.0)]));
    let (e, out) = r.finish();
    assert_eq!(values(&out, Metric::Gospa), vec![(0.25, 0.0)]);
    assert_eq!(e.counters().tracking.interpolated, 1);
}

#[test]
fn exact_stamp_within_a_microsecond_is_used_as_is() {
    let mut r = Run::new(TrackingParams::default());
    r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 0.0, 0.0)]));
    r.push(Role::ReferenceObjects, 0.1, objs(0.1, &[(1, 1.0, 0.0)]));
    r.push(Role::EstimateObjects, 0.15, objs(0.1000004, &[(7, 1.5, 0.0)]));
    let (e, out) = r.finish();
    // Against the 0.1 message as is: d = 0.5.
    assert_eq!(values(&out, Metric::Gospa), vec![(0.1000004, 0.5)]);
    assert_eq!(e.counters().tracking.exact, 1);
}

#[test]
fn wait_ends_then_last_reference_within_tolerance_is_used() {
    // Estimate at 0.05 arrives at 0.05; the next reference (stamp 0.1) arrives at 0.6, past
    // the 0.5 s wait (deadline 0.55). Fallback to the 0.0 reference, 0.05 s old (<= 0.1).
    let mut r = Run::new(TrackingParams::default());
    r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 0.0, 0.0)]));
    r.push(Role::EstimateObjects, 0.05, objs(0.05, &[(7, 0.3, 0.0)]));
    r.push(Role::ReferenceObjects, 0.6, objs(0.1, &[(1, 1.0, 0.0)]));
    let (e, out) = r.finish();
    let g = values(&out, Metric::Gospa);
    assert_eq!(g.len(), 1);
    assert!((g[0].1 - 0.3).abs() < 1e-12, "{g:?}");
    assert_eq!(e.counters().tracking.fallback, 1);
}

#[test]
fn reference_arriving_within_the_wait_is_interpolated() {
    // Same stream but the 0.1 reference arrives at 0.5 (before the 0.55 deadline):
    // interpolated reference at 0.05 is 0.5 m; estimate at 0.3 -> d = 0.2.
    let mut r = Run::new(TrackingParams::default());
    r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 0.0, 0.0)]));
    r.push(Role::EstimateObjects, 0.05, objs(0.05, &[(7, 0.3, 0.0)]));
    r.push(Role::ReferenceObjects, 0.5, objs(0.1, &[(1, 1.0, 0.0)]));
    let (e, out) = r.finish();
    let g = values(&out, Metric::Gospa);
    assert!((g[0].1 - 0.2).abs() < 1e-12, "{g:?}");
    assert_eq!(e.counters().tracking.interpolated, 1);
}

#[test]
fn too_old_reference_skips_the_step_with_its_reason() {
    let mut r = Run::new(TrackingParams::default());
    r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 0.0, 0.0)]));
    r.push(Role::EstimateObjects, 0.2, objs(0.2, &[(7, 0.0, 0.0)]));
    let (e, out) = r.finish();
    assert!(values(&out, Metric::Gospa).is_empty());
    let c = &e.counters().tracking;
    assert_eq!(c.skipped, 1);
    assert_eq!(c.skipped_by_reason.get("no_reference_in_time"), Some(&1));
}

#[test]
fn without_recv_the_wait_runs_on_stamps() {
    // No recv: arrival = stamp. Reference 0.0, estimate 0.05, reference 0.7 (arrives at
    // 0.7 > 0.55): fallback to 0.0.
    let mut e = Engine::new(TrackingParams::default(), AlignParams::default(), ClearanceParams::default());
    let mut out = Vec::new();
    for (role, msg) in [
        (Role::ReferenceObjects, objs(0.0, &[(1, 0.0, 0.0)])),
        (Role::EstimateObjects, objs(0.05, &[(7, 0.4, 0.0)])),
        (Role::ReferenceObjects, objs(0.7, &[(1, 7.0, 0.0)])),
    ] {
        e.push(Input::Message { role, recv: None, msg }, &mut out);
    }
    e.finish(&mut out);
    assert_eq!(e.counters().tracking.fallback, 1);
    let g = values(&out, Metric::Gospa);
    assert!((g[0].1 - 0.4).abs() < 1e-12);
}

#[test]
fn region_selects_references_and_ignores_far_estimates() {
    // region 10 m around the reference ego at the origin, cutoff 2:
    // reference at 5 m (in), at 15 m (out); estimates at 5.5 m (assigned), 11.5 m (within
    // region + cutoff: a false estimate), 13 m (beyond: ignored).
    let tp = TrackingParams { region: 10.0, ..TrackingParams::default() };
    let mut r = Run::new(tp);
    r.push(Role::ReferenceEgo, 0.0, pose(0.0, 0.0, 0.0, 0.0));
    r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 5.0, 0.0), (2, 15.0, 0.0)]));
    r.push(Role::EstimateObjects, 0.0, objs(0.0, &[(7, 5.5, 0.0), (8, 11.5, 0.0), (9, 0.0, 13.0)]));
    let (_, out) = r.finish();
    assert_eq!(values(&out, Metric::AssignedCount), vec![(0.0, 1.0)]);
    assert_eq!(values(&out, Metric::MissedCount), vec![(0.0, 0.0)]);
    assert_eq!(values(&out, Metric::FalseCount), vec![(0.0, 1.0)]);
    // 0.5 + 2/2 = 1.5
    assert_eq!(values(&out, Metric::Gospa), vec![(0.0, 1.5)]);
}

#[test]
fn ego_frame_estimates_are_moved_by_the_configured_pose() {
    // Ego at (10, 5) facing +y; an estimate 2 m ahead in the ego frame is at (10, 7).
    for source in [EgoSource::Reference, EgoSource::Estimate] {
        let tp = TrackingParams { ego_source: source, ..TrackingParams::default() };
        let mut r = Run::new(tp);
        let role = if source == EgoSource::Reference { Role::ReferenceEgo } else { Role::EstimateEgo };
        r.push(role, 0.0, pose(0.0, 10.0, 5.0, std::f64::consts::FRAC_PI_2));
        r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 10.0, 7.0)]));
        let est = Msg::Objects(ObjectSet {
            stamp: 0.0,
            frame: Some(Frame::Ego),
            objects: vec![Object::at(3, 2.0, 0.0)],
        });
        r.push(Role::EstimateObjects, 0.0, est);
        let (_, out) = r.finish();
        let g = values(&out, Metric::Gospa);
        assert_eq!(g.len(), 1, "{source:?}");
        assert!(g[0].1 < 1e-12, "{source:?}: {g:?}");
    }
}

#[test]
fn ego_errors_against_interpolated_reference() {
    // Reference ego from (0,0,0) at t=0 to (1,0,0) at t=1; estimate at t=0.5 is (0.6, 0.2,
    // 0.1): error (0.1, 0.2) -> longitudinal 0.1, lateral 0.2, heading 0.1.
    let mut r = Run::new(TrackingParams::default());
    r.push(Role::ReferenceEgo, 0.0, pose(0.0, 0.0, 0.0, 0.0));
    r.push(Role::EstimateEgo, 0.5, pose(0.5, 0.6, 0.2, 0.1));
    r.push(Role::ReferenceEgo, 1.0, pose(1.0, 1.0, 0.0, 0.0));
    let (_, out) = r.finish();
    let lon = values(&out, Metric::EgoLongitudinalError);
    let lat = values(&out, Metric::EgoLateralError);
    assert!((lon[0].1 - 0.1).abs() < 1e-12 && (lat[0].1 - 0.2).abs() < 1e-12);
    let pos = values(&out, Metric::EgoPositionError);
    assert!((pos[0].1 - 0.05f64.sqrt()).abs() < 1e-12);
    assert!((values(&out, Metric::EgoHeadingError)[0].1 - 0.1).abs() < 1e-12);
}

#[test]
fn pending_steps_resolve_in_order_at_the_end() {
    let mut r = Run::new(TrackingParams::default());
    r.push(Role::ReferenceObjects, 0.0, objs(0.0, &[(1, 0.0, 0.0)]));
    for k in 1..=3 {
        let t = k as f64 * 0.02;
        r.push(Role::EstimateObjects, t, objs(t, &[(7, 0.0, 0.0)]));
    }
    let (e, out) = r.finish();
    let ts: Vec<f64> = values(&out, Metric::Gospa).iter().map(|v| v.0).collect();
    assert_eq!(ts, vec![0.02, 0.04, 0.06]);
    assert_eq!(e.counters().tracking.fallback, 3);
}
