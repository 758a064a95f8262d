//! The demo scenario: an autonomous shuttle on the loop road of the invented Aldermoor
//! campus, among pedestrians, utility carts and parked bikes. Pure and seeded: the same
//! seed gives the same records on every machine.
//!
//! What it plants, so every metric has something to find:
//! - simulator truth for objects and tracker output at 10 Hz (configurable), the tracker
//!   offset by 20 ms (so the reference is interpolated), reference ego at 50 Hz, estimated
//!   ego at 20 Hz, plans at 5 Hz;
//! - tracker noise (0.12 m, declared covariance a little optimistic), missed detections,
//!   a confirmation delay before each track appears, coasting after an object leaves;
//! - short-lived false tracks around the shuttle;
//! - one identity switch: two pedestrians cross and their track ids swap;
//! - localization drift that grows between corrections every 20 s;
//! - a site map (a hall inside the loop, bollards, a planter, a delivery van parked on the
//!   north straight that the shuttle detours around);
//! - close passes (a pedestrian walking along the road edge) and one brief contact (a cart
//!   crossing just behind the shuttle clips its rear corner from about 7.6 s to 8.0 s);
//! - a planner outage: empty plans for one second at 40 s;
//! - arrival times with per-topic pipeline latency.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

use crate::msg::LogRecord;
use crate::msg::{Msg, Object, ObjectSet, Obstacle, ObstacleSet, Path, PathPose, Pose, Role, Shape};

/// Scenario knobs.
#[derive(Debug, Clone)]
pub struct ScenarioParams {
    /// Seed.
    pub seed: u64,
    /// Length of the run (s).
    pub duration: f64,
    /// Objects over the run.
    pub objects: usize,
    /// Tracker position noise (m).
    pub noise: f64,
    /// Rate of the truth and tracker object topics (Hz).
    pub rate_hz: f64,
    /// Objects carry only the required fields (id, x, y): lean logs for throughput runs.
    pub minimal: bool,
}

impl Default for ScenarioParams {
    fn default() -> Self {
        ScenarioParams { seed: 1, duration: 60.0, objects: 14, noise: 0.12, rate_hz: 10.0, minimal: false }
    }
}

/// The loop road: a stadium with straights of `STRAIGHT` m and bends of radius `BEND` m.
const STRAIGHT: f64 = 60.0;
const BEND: f64 = 15.0;
const SHUTTLE_SPEED: f64 = 4.0;

/// Shuttle pose at arc length `s` along the loop (counter-clockwise, start at the south
/// straight's west end).
pub fn loop_pose(s: f64) -> (f64, f64, f64) {
    use std::f64::consts::PI;
    let per = 2.0 * STRAIGHT + 2.0 * PI * BEND;
    let s = s.rem_euclid(per);
    let arc = PI * BEND;
    if s < STRAIGHT {
        (s, -BEND, 0.0)
    } else if s < STRAIGHT + arc {
        let a = (s - STRAIGHT) / BEND - PI / 2.0;
        (STRAIGHT + BEND * a.cos(), BEND * a.sin(), a + PI / 2.0)
    } else if s < 2.0 * STRAIGHT + arc {
        (STRAIGHT - (s - STRAIGHT - arc), BEND, PI)
    } else {
        let a = (s - 2.0 * STRAIGHT - arc) / BEND + PI / 2.0;
        (BEND * a.cos(), BEND * a.sin(), crate::metrics::ego::wrap_angle(a + PI / 2.0))
    }
}

/// The parked van the route detours around (north straight, x = 30).
const VAN: (f64, f64, f64, f64) = (30.0, BEND + 0.3, 5.0, 2.2);
/// Detour: lateral offset (m), half length of its flat top and length of each ramp (m of
/// arc length).
const DETOUR: (f64, f64, f64) = (2.6, 6.0, 12.0);

/// The shuttle's route: the loop with the detour around the van on the north straight.
pub fn route(s: f64) -> (f64, f64, f64) {
    use std::f64::consts::PI;
    let per = 2.0 * STRAIGHT + 2.0 * PI * BEND;
    let sv = STRAIGHT + PI * BEND + (STRAIGHT - VAN.0);
    let d = s.rem_euclid(per) - sv;
    let (x, y, yaw) = loop_pose(s);
    let (a, flat, ramp) = DETOUR;
    if d.abs() >= flat + ramp {
        return (x, y, yaw);
    }
    // Offset outward (+y): a flat top with raised-cosine ramps; the route runs towards -x.
    let (off, slope) = if d.abs() <= flat {
        (a, 0.0)
    } else {
        let ph = PI * (d.abs() - flat) / ramp;
        (a * 0.5 * (1.0 + ph.cos()), -a * 0.5 * ph.sin() * PI / ramp * d.signum())
    };
    (x, y + off, slope.atan2(-1.0))
}

#[derive(Debug, Clone)]
struct Actor {
    id: u64,
    track: u64,
    class: &'static str,
    born: f64,
    dies: f64,
    p0: (f64, f64),
    v: (f64, f64),
    size: (f64, f64),
    confirm: f64,
    coast: f64,
    /// Walks back and forth between x = 0 and x = STRAIGHT instead of straight on.
    bounce: bool,
}

impl Actor {
    /// Position and velocity at `t`.
    fn at(&self, t: f64) -> ((f64, f64), (f64, f64)) {
        let dt = t - self.born;
        let (x, y) = (self.p0.0 + self.v.0 * dt, self.p0.1 + self.v.1 * dt);
        if !self.bounce {
            return ((x, y), self.v);
        }
        // Reflect x into [0, STRAIGHT]: a triangle wave.
        let per = 2.0 * STRAIGHT;
        let u = x.rem_euclid(per);
        if u <= STRAIGHT {
            ((u, y), self.v)
        } else {
            ((per - u, y), (-self.v.0, self.v.1))
        }
    }
}

/// The key expression each role is published on.
pub type Keys = crate::msg::Bindings;

fn rec(keys: &Keys, role: Role, recv: f64, msg: Msg) -> LogRecord {
    LogRecord { key: crate::msg::key_of(keys, role).to_string(), recv: Some(round6(recv)), msg }
}

/// Rounds to a microsecond so logs stay short and exact.
fn round6(x: f64) -> f64 {
    (x * 1e6).round() / 1e6
}

fn round3(x: f64) -> f64 {
    (x * 1e3).round() / 1e3
}

/// Generates the records of one run, sorted by arrival time.
pub fn generate(keys: &Keys, p: &ScenarioParams) -> Vec<LogRecord> {
    let mut rng = ChaCha8Rng::seed_from_u64(p.seed);
    let unit = Normal::new(0.0, 1.0).expect("unit normal");
    let mut actors = Vec::new();
    // Random actors keep to footpaths and lawns beside the road (bands clear of the road and
    // the hall) and stroll back and forth along them.
    let bands = [(-11.5, -8.0), (8.0, 11.5), (19.0, 23.0), (-23.0, -19.0)];
    let classes = [("pedestrian", 0.9, (0.5, 0.5)), ("cart", 1.8, (2.4, 1.2)), ("bike", 0.0, (1.8, 0.6))];
    for k in 0..p.objects {
        let (class, speed, size) = classes[k % classes.len()];
        let whole = k < p.objects / 2;
        let born = if whole { 0.0 } else { rng.random_range(0.0..p.duration * 0.7) };
        let dies =
            if whole { p.duration + 1.0 } else { (born + rng.random_range(8.0..30.0)).min(p.duration + 1.0) };
        let dir = if rng.random_bool(0.5) { 1.0 } else { -1.0 };
        let sp = speed * rng.random_range(0.6..1.2);
        let band = bands[rng.random_range(0..bands.len())];
        actors.push(Actor {
            id: k as u64 + 1,
            track: 101 + k as u64,
            class,
            born,
            dies,
            p0: (rng.random_range(0.0..STRAIGHT), rng.random_range(band.0..band.1)),
            v: (dir * sp, 0.0),
            size,
            confirm: rng.random_range(0.15..0.45),
            coast: rng.random_range(0.1..0.6),
            bounce: true,
        });
    }
    // Two pedestrians that cross at mid-run on the inner footpath; their tracks swap ids
    // after the crossing.
    let tx = (p.duration * 0.5).floor();
    let cross = (25.0, 9.5);
    let mk = |id: u64, dir: f64| Actor {
        id,
        track: 100 + id,
        class: "pedestrian",
        born: 0.0,
        dies: p.duration + 1.0,
        p0: (cross.0 - dir * 0.5 * tx, cross.1 + 0.2 * dir),
        v: (dir * 0.5, 0.0),
        size: (0.5, 0.5),
        confirm: 0.2,
        coast: 0.3,
        bounce: false,
    };
    let (cross_a, cross_b) = (p.objects as u64 + 1, p.objects as u64 + 2);
    actors.push(mk(cross_a, 1.0));
    actors.push(mk(cross_b, -1.0));
    // A pedestrian walking along the south road edge towards the shuttle: close passes.
    actors.push(Actor {
        id: p.objects as u64 + 3,
        track: 100 + p.objects as u64 + 3,
        class: "pedestrian",
        born: 0.0,
        dies: p.duration + 1.0,
        p0: (STRAIGHT, -BEND - 1.65),
        v: (-0.8, 0.0),
        size: (0.5, 0.5),
        confirm: 0.2,
        coast: 0.3,
        bounce: true,
    });
    // A cart crossing the south straight just behind the shuttle: it clips the rear corner
    // from about 7.6 s to 8.0 s.
    actors.push(Actor {
        id: p.objects as u64 + 4,
        track: 100 + p.objects as u64 + 4,
        class: "cart",
        born: 6.0,
        dies: 10.0,
        p0: (30.5, -5.0),
        v: (0.0, -5.0),
        size: (2.4, 1.2),
        confirm: 0.2,
        coast: 0.3,
        bounce: false,
    });

    let mut out = Vec::new();
    // Static site map: buildings, bollards, a planter.
    let obstacles = vec![
        Obstacle {
            id: 5,
            shape: Shape::Box,
            x: Some(VAN.0),
            y: Some(VAN.1),
            yaw: Some(0.0),
            radius: None,
            length: Some(VAN.2),
            width: Some(VAN.3),
            points: None,
        },
        Obstacle {
            id: 1,
            shape: Shape::Box,
            x: Some(30.0),
            y: Some(0.0),
            yaw: Some(0.0),
            radius: None,
            length: Some(40.0),
            width: Some(12.0),
            points: None,
        },
        Obstacle {
            id: 2,
            shape: Shape::Circle,
            x: Some(10.0),
            y: Some(-18.5),
            yaw: None,
            radius: Some(0.3),
            length: None,
            width: None,
            points: None,
        },
        Obstacle {
            id: 3,
            shape: Shape::Circle,
            x: Some(50.0),
            y: Some(18.5),
            yaw: None,
            radius: Some(0.3),
            length: None,
            width: None,
            points: None,
        },
        Obstacle {
            id: 4,
            shape: Shape::Polygon,
            x: None,
            y: None,
            yaw: None,
            radius: None,
            length: None,
            width: None,
            points: Some(vec![[-22.0, -4.0], [-19.0, -4.0], [-19.0, 4.0], [-22.0, 4.0]]),
        },
    ];
    out.push(rec(keys, Role::ReferenceObstacles, 0.0, Msg::Obstacles(ObstacleSet { stamp: 0.0, obstacles })));

    // Reference ego at 50 Hz; estimated ego at 20 Hz with drift reset every 20 s.
    let n_ego = (p.duration * 50.0) as usize;
    for k in 0..=n_ego {
        let t = k as f64 * 0.02;
        let (x, y, yaw) = route(SHUTTLE_SPEED * t);
        let recv = t + 0.002 + rng.random_range(0.0..0.002);
        out.push(rec(
            keys,
            Role::ReferenceEgo,
            recv,
            Msg::Pose(Pose {
                stamp: round6(t),
                x: round3(x),
                y: round3(y),
                yaw: round6(yaw),
                v: Some(SHUTTLE_SPEED),
                cov: None,
            }),
        ));
    }
    let (mut bx, mut by) = (0.0f64, 0.0f64);
    let n_est_ego = (p.duration * 20.0) as usize;
    for k in 0..n_est_ego {
        let t = k as f64 * 0.05 + 0.01;
        if (t % 20.0) < 0.05 {
            bx = 0.0;
            by = 0.0;
        }
        bx += 0.01 * unit.sample(&mut rng) + 0.0015;
        by += 0.01 * unit.sample(&mut rng);
        let (x, y, yaw) = route(SHUTTLE_SPEED * t);
        let yaw_e = crate::metrics::ego::wrap_angle(yaw + 0.01 * unit.sample(&mut rng) + 0.004);
        let recv = t + 0.012 + rng.random_range(0.0..0.008);
        out.push(rec(
            keys,
            Role::EstimateEgo,
            recv,
            Msg::Pose(Pose {
                stamp: round6(t),
                x: round3(x + bx),
                y: round3(y + by),
                yaw: round6(yaw_e),
                v: Some(SHUTTLE_SPEED),
                cov: None,
            }),
        ));
    }

    // Plans at 5 Hz: the next 30 m of the route, a pose every metre; an outage (empty
    // plans with the goal kept) for one second at 40 s.
    let n_plan = (p.duration * 5.0) as usize;
    for k in 0..n_plan {
        let t = k as f64 * 0.2 + 0.005;
        let s0 = SHUTTLE_SPEED * t;
        let pose = |s: f64| {
            let (x, y, yaw) = route(s);
            PathPose { x: round3(x), y: round3(y), yaw: Some(round6(yaw)) }
        };
        let outage = (40.0..41.0).contains(&t);
        let poses = if outage { Vec::new() } else { (0..=30).map(|m| pose(s0 + m as f64)).collect() };
        let compute = round6(rng.random_range(0.02..0.06));
        let recv = t + compute + rng.random_range(0.001..0.004);
        let msg = Msg::Path(Path {
            stamp: round6(t),
            poses,
            goal: Some(pose(s0 + 30.0)),
            compute_s: Some(compute),
        });
        out.push(rec(keys, Role::PlanPath, recv, msg));
    }

    // Reference objects at rate_hz (10 Hz by default).
    let dt = 1.0 / p.rate_hz;
    let n_obj = (p.duration * p.rate_hz) as usize;
    for k in 0..=n_obj {
        let t = k as f64 * dt;
        let objects = actors
            .iter()
            .filter(|a| t >= a.born && t < a.dies)
            .map(|a| {
                let ((x, y), v) = a.at(t);
                Object {
                    vx: Some(round3(v.0)),
                    vy: Some(round3(v.1)),
                    yaw: Some(round6(v.1.atan2(v.0))),
                    length: Some(a.size.0),
                    width: Some(a.size.1),
                    class: Some(a.class.into()),
                    ..Object::at(a.id, round3(x), round3(y))
                }
            })
            .collect();
        let recv = t + 0.003 + rng.random_range(0.0..0.003);
        out.push(rec(
            keys,
            Role::ReferenceObjects,
            recv,
            Msg::Objects(ObjectSet { stamp: round6(t), frame: None, objects }),
        ));
    }

    // Tracker output at the same rate, 20 ms after the truth frames.
    let declared = p.noise * 0.85;
    let mut clutter: Vec<(u64, f64, f64, f64, f64)> = Vec::new(); // id, born, dies, x, y
    let mut next_false = 901u64;
    for k in 0..n_obj {
        let t = k as f64 * dt + 0.02;
        if rng.random_bool(0.3 * dt) {
            let (ex, ey, _) = route(SHUTTLE_SPEED * t);
            clutter.push((
                next_false,
                t,
                t + rng.random_range(0.3..1.5),
                ex + rng.random_range(-12.0..12.0),
                ey + rng.random_range(-12.0..12.0),
            ));
            next_false += 1;
        }
        let mut objects = Vec::new();
        for a in &actors {
            if t < a.born + a.confirm || t >= a.dies + a.coast {
                continue;
            }
            if t < a.dies && rng.random_bool(0.015) {
                continue; // missed detection
            }
            let ((x, y), v) = a.at(t.min(a.dies));
            let track = match a.id {
                id if t > tx && id == cross_a => 100 + cross_b,
                id if t > tx && id == cross_b => 100 + cross_a,
                _ => a.track,
            };
            objects.push(Object {
                vx: Some(round3(v.0 + 0.05 * unit.sample(&mut rng))),
                vy: Some(round3(v.1 + 0.05 * unit.sample(&mut rng))),
                cov: Some([round6(declared * declared), 0.0, 0.0, round6(declared * declared)]),
                class: Some(a.class.into()),
                ..Object::at(
                    track,
                    round3(x + p.noise * unit.sample(&mut rng)),
                    round3(y + p.noise * unit.sample(&mut rng)),
                )
            });
        }
        for &(id, born, dies, x, y) in &clutter {
            if t >= born && t < dies {
                objects.push(Object {
                    cov: Some([0.09, 0.0, 0.0, 0.09]),
                    ..Object::at(id, round3(x), round3(y))
                });
            }
        }
        clutter.retain(|c| c.2 > t);
        let recv = t + 0.03 + rng.random_range(0.0..0.05);
        out.push(rec(
            keys,
            Role::EstimateObjects,
            recv,
            Msg::Objects(ObjectSet { stamp: round6(t), frame: None, objects }),
        ));
    }
    if p.minimal {
        for r in &mut out {
            if let Msg::Objects(set) = &mut r.msg {
                for o in &mut set.objects {
                    *o = Object::at(o.id, o.x, o.y);
                }
            }
        }
    }
    out.sort_by(|a, b| a.recv.unwrap_or(0.0).total_cmp(&b.recv.unwrap_or(0.0)));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_seed_same_records() {
        let keys: Vec<(Role, String)> = Role::ALL.iter().map(|&r| (r, format!("rig/{}", r.name()))).collect();
        let p = ScenarioParams { duration: 5.0, ..Default::default() };
        assert_eq!(generate(&keys, &p), generate(&keys, &p));
        let q = ScenarioParams { seed: 2, ..p.clone() };
        assert_ne!(generate(&keys, &p), generate(&keys, &q));
    }

    #[test]
    fn loop_is_continuous() {
        let mut prev = loop_pose(0.0);
        for k in 1..3000 {
            let q = loop_pose(k as f64 * 0.1);
            assert!((q.0 - prev.0).hypot(q.1 - prev.1) < 0.11, "jump at {k}");
            prev = q;
        }
    }
}
