//! Messages of the interchange contract (SPEC §2) and their validation.
//!
//! One set of serde structs serves both forms: JSON (`serde_json`) and the binary form
//! (`postcard`). Postcard is not self-describing, so the structs avoid serde features that
//! need it (no internally tagged enums, no skipped fields); an obstacle is therefore one flat
//! struct whose `shape` says which of its optional fields must be present.
//!
//! This module does no I/O. Decoding returns a [`Reject`] with a stable reason code when a
//! message is rejected whole.

pub mod record;

pub use record::{Damage, LogRecord, Position, Tail};

/// A fixed word of the vocabulary (a metric's, a statistic's, a role's or a reason's name)
/// in an output that is also read back: borrowed when written, owned when read.
pub type Name = std::borrow::Cow<'static, str>;

use serde::{Deserialize, Serialize};
use thiserror::Error;

/// The roles a monitor listens to (SPEC §1).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Role {
    /// Simulator truth or surveyed targets.
    ReferenceObjects,
    /// The tracker under test.
    EstimateObjects,
    /// Reference-grade ego pose.
    ReferenceEgo,
    /// The localization under test.
    EstimateEgo,
    /// The planner under test.
    PlanPath,
    /// Static site map.
    ReferenceObstacles,
}

/// Which key expression each role is bound to (the config's `[roles]`).
pub type Bindings = [(Role, String)];

/// The key expression bound to a role ("" when unbound).
pub fn key_of(bindings: &Bindings, role: Role) -> &str {
    bindings.iter().find(|(r, _)| *r == role).map_or("", |(_, k)| k.as_str())
}

/// The role bound to an exact key, if any.
pub fn role_of(bindings: &Bindings, key: &str) -> Option<Role> {
    bindings.iter().find(|(_, k)| k == key).map(|(r, _)| *r)
}

impl Role {
    /// Every role, in a fixed order.
    pub const ALL: [Role; 6] = [
        Role::ReferenceObjects,
        Role::EstimateObjects,
        Role::ReferenceEgo,
        Role::EstimateEgo,
        Role::PlanPath,
        Role::ReferenceObstacles,
    ];

    /// The role's name as written in the config and the reports.
    pub fn name(self) -> &'static str {
        match self {
            Role::ReferenceObjects => "reference/objects",
            Role::EstimateObjects => "estimate/objects",
            Role::ReferenceEgo => "reference/ego",
            Role::EstimateEgo => "estimate/ego",
            Role::PlanPath => "plan/path",
            Role::ReferenceObstacles => "reference/obstacles",
        }
    }

    /// Parses a role name.
    pub fn from_name(s: &str) -> Option<Role> {
        Role::ALL.into_iter().find(|r| r.name() == s)
    }

    /// Index into per-role arrays.
    pub fn index(self) -> usize {
        self as usize
    }

    /// Which message kind the role carries.
    pub fn kind(self) -> MsgKind {
        match self {
            Role::ReferenceObjects | Role::EstimateObjects => MsgKind::Objects,
            Role::ReferenceEgo | Role::EstimateEgo => MsgKind::Pose,
            Role::PlanPath => MsgKind::Path,
            Role::ReferenceObstacles => MsgKind::Obstacles,
        }
    }
}

impl Serialize for Role {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.name())
    }
}

/// The four message kinds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MsgKind {
    /// [`ObjectSet`]
    Objects,
    /// [`Pose`]
    Pose,
    /// [`Path`]
    Path,
    /// [`ObstacleSet`]
    Obstacles,
}

/// Coordinate frame of an object set.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Frame {
    /// World coordinates (default).
    #[default]
    World,
    /// Relative to the ego pose.
    Ego,
}

/// One tracked or reference object.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Object {
    /// Track or truth id.
    pub id: u64,
    /// Position x (m).
    pub x: f64,
    /// Position y (m).
    pub y: f64,
    /// Velocity x (m/s).
    #[serde(default)]
    pub vx: Option<f64>,
    /// Velocity y (m/s).
    #[serde(default)]
    pub vy: Option<f64>,
    /// Heading (rad).
    #[serde(default)]
    pub yaw: Option<f64>,
    /// Box length along yaw (m).
    #[serde(default)]
    pub length: Option<f64>,
    /// Box width (m).
    #[serde(default)]
    pub width: Option<f64>,
    /// 2x2 position covariance, row-major (m^2).
    #[serde(default)]
    pub cov: Option<[f64; 4]>,
    /// Free-form class label.
    #[serde(default, rename = "class")]
    pub class: Option<compact_str::CompactString>,
}

impl Object {
    /// An object with only the required fields.
    pub fn at(id: u64, x: f64, y: f64) -> Object {
        Object { id, x, y, vx: None, vy: None, yaw: None, length: None, width: None, cov: None, class: None }
    }
}

/// A set of objects at one stamp.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ObjectSet {
    /// Stamp (s).
    pub stamp: f64,
    /// Frame; `None` means world.
    #[serde(default)]
    pub frame: Option<Frame>,
    /// The objects.
    #[serde(default, deserialize_with = "strict::vec")]
    pub objects: Vec<Object>,
}

/// A 2-D pose.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Pose {
    /// Stamp (s).
    pub stamp: f64,
    /// x (m).
    pub x: f64,
    /// y (m).
    pub y: f64,
    /// Heading (rad).
    pub yaw: f64,
    /// Speed (m/s).
    #[serde(default)]
    pub v: Option<f64>,
    /// 3x3 covariance of x, y, yaw, row-major.
    #[serde(default)]
    pub cov: Option<[f64; 9]>,
}

/// One pose along a planned path.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PathPose {
    /// x (m).
    pub x: f64,
    /// y (m).
    pub y: f64,
    /// Heading (rad); the tangent when absent.
    #[serde(default)]
    pub yaw: Option<f64>,
}

/// A planned path; empty `poses` means "no path found".
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Path {
    /// Stamp (s).
    pub stamp: f64,
    /// The poses.
    #[serde(deserialize_with = "strict::vec")]
    pub poses: Vec<PathPose>,
    /// Goal pose.
    #[serde(default, deserialize_with = "strict::option")]
    pub goal: Option<PathPose>,
    /// Planner compute time (s).
    #[serde(default)]
    pub compute_s: Option<f64>,
}

/// Obstacle shape tag.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Shape {
    /// Circle: `x`, `y`, `radius`.
    Circle,
    /// Box: `x`, `y`, `yaw`, `length`, `width`.
    Box,
    /// Polygon: `points`.
    Polygon,
}

/// One static obstacle (flat form; see the module note).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Obstacle {
    /// Obstacle id.
    pub id: u64,
    /// Shape tag.
    pub shape: Shape,
    /// Centre x (m).
    #[serde(default)]
    pub x: Option<f64>,
    /// Centre y (m).
    #[serde(default)]
    pub y: Option<f64>,
    /// Box heading (rad).
    #[serde(default)]
    pub yaw: Option<f64>,
    /// Circle radius (m).
    #[serde(default)]
    pub radius: Option<f64>,
    /// Box length along yaw (m).
    #[serde(default)]
    pub length: Option<f64>,
    /// Box width (m).
    #[serde(default)]
    pub width: Option<f64>,
    /// Polygon vertices (m).
    #[serde(default)]
    pub points: Option<Vec<[f64; 2]>>,
}

/// A site map at one stamp.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ObstacleSet {
    /// Stamp (s).
    pub stamp: f64,
    /// The obstacles.
    #[serde(default, deserialize_with = "strict::vec")]
    pub obstacles: Vec<Obstacle>,
}

/// Any message.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum Msg {
    /// An object set.
    Objects(ObjectSet),
    /// A pose.
    Pose(Pose),
    /// A path.
    Path(Path),
    /// A site map.
    Obstacles(ObstacleSet),
}

impl Msg {
    /// The message's stamp.
    pub fn stamp(&self) -> f64 {
        match self {
            Msg::Objects(m) => m.stamp,
            Msg::Pose(m) => m.stamp,
            Msg::Path(m) => m.stamp,
            Msg::Obstacles(m) => m.stamp,
        }
    }

    /// The message's kind.
    pub fn kind(&self) -> MsgKind {
        match self {
            Msg::Objects(_) => MsgKind::Objects,
            Msg::Pose(_) => MsgKind::Pose,
            Msg::Path(_) => MsgKind::Path,
            Msg::Obstacles(_) => MsgKind::Obstacles,
        }
    }

    /// How many object states the message carries (for throughput figures).
    pub fn object_count(&self) -> usize {
        match self {
            Msg::Objects(m) => m.objects.len(),
            _ => 0,
        }
    }

    /// Serialises the message alone as JSON, leaving out absent optional fields.
    ///
    /// The structs always serialise every field (postcard needs that), so the `null`s of
    /// absent options are removed here; reading treats a missing and a `null` field alike.
    pub fn to_json(&self) -> String {
        let r = match self {
            Msg::Objects(m) => serde_json::to_value(m),
            Msg::Pose(m) => serde_json::to_value(m),
            Msg::Path(m) => serde_json::to_value(m),
            Msg::Obstacles(m) => serde_json::to_value(m),
        };
        // Serialising plain structs of finite numbers cannot fail.
        let mut v = r.unwrap_or_default();
        strip_nulls(&mut v);
        v.to_string()
    }

    /// Serialises the message alone in the binary (postcard) form.
    pub fn to_postcard(&self) -> Vec<u8> {
        let r = match self {
            Msg::Objects(m) => postcard::to_stdvec(m),
            Msg::Pose(m) => postcard::to_stdvec(m),
            Msg::Path(m) => postcard::to_stdvec(m),
            Msg::Obstacles(m) => postcard::to_stdvec(m),
        };
        r.unwrap_or_default()
    }
}

/// Structs read from JSON objects only.
///
/// serde's derived `Deserialize` for a struct also accepts a sequence of its fields in
/// order, so `[0.9, 1.0, 2.0, 0.1]` would read as a pose. The contract says every message
/// and nested object is a JSON object: these helpers ask a human-readable (JSON)
/// deserializer for a map and hand the map to the derived visitor, so anything else is
/// serde's "invalid type" (`wrong_type`). The binary form (postcard, not human-readable)
/// encodes structs as sequences and keeps the derived path.
pub mod strict {
    use std::marker::PhantomData;

    use serde::de::value::MapAccessDeserializer;
    use serde::de::{Deserialize, Deserializer, MapAccess, Visitor};

    /// A `T` read only from an object in JSON.
    pub struct Object<T>(pub T);

    impl<'de, T: Deserialize<'de>> Deserialize<'de> for Object<T> {
        fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            object(d).map(Object)
        }
    }

    /// Reads a `T` from an object (JSON) or by its derived path (binary).
    pub fn object<'de, D: Deserializer<'de>, T: Deserialize<'de>>(d: D) -> Result<T, D::Error> {
        if !d.is_human_readable() {
            return T::deserialize(d);
        }
        struct V<T>(PhantomData<T>);
        impl<'de, T: Deserialize<'de>> Visitor<'de> for V<T> {
            type Value = T;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("an object")
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<T, A::Error> {
                T::deserialize(MapAccessDeserializer::new(map))
            }
        }
        d.deserialize_map(V(PhantomData))
    }

    /// A list whose items are objects.
    pub fn vec<'de, D: Deserializer<'de>, T: Deserialize<'de>>(d: D) -> Result<Vec<T>, D::Error> {
        Vec::<Object<T>>::deserialize(d).map(|v| v.into_iter().map(|o| o.0).collect())
    }

    /// An optional object (`null` or absent is `None`).
    pub fn option<'de, D: Deserializer<'de>, T: Deserialize<'de>>(d: D) -> Result<Option<T>, D::Error> {
        Option::<Object<T>>::deserialize(d).map(|o| o.map(|o| o.0))
    }
}

fn strip_nulls(v: &mut serde_json::Value) {
    match v {
        serde_json::Value::Object(map) => {
            map.retain(|_, x| !x.is_null());
            map.values_mut().for_each(strip_nulls);
        }
        serde_json::Value::Array(items) => items.iter_mut().for_each(strip_nulls),
        _ => {}
    }
}

/// Why a message or record was rejected whole.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum Reject {
    /// Not parseable at all.
    #[error("malformed: {0}")]
    Malformed(String),
    /// A required field is missing.
    #[error("missing field: {0}")]
    MissingField(String),
    /// A field has the wrong type.
    #[error("wrong type: {0}")]
    WrongType(String),
    /// A number is NaN, infinite or overflows.
    #[error("non-finite number: {0}")]
    NonFinite(String),
    /// An id is not a non-negative integer that fits u64.
    #[error("bad id: {0}")]
    BadId(String),
    /// Two objects in one set share an id.
    #[error("duplicate id {0}")]
    DuplicateId(u64),
    /// `frame` is other than `world` or `ego`.
    #[error("bad frame: {0}")]
    BadFrame(String),
    /// An obstacle lacks the fields its shape needs.
    #[error("bad obstacle: {0}")]
    BadObstacle(String),
    /// More objects than the configured maximum.
    #[error("too many objects: {0} > {1}")]
    TooManyObjects(usize, usize),
    /// A covariance is not symmetric positive semi-definite.
    #[error("bad covariance: {0}")]
    BadCovariance(String),
    /// The record's key is bound to no role.
    #[error("unbound key {0}")]
    UnboundKey(String),
    /// A line longer than the reader accepts.
    #[error("line longer than {0} bytes")]
    TooLong(usize),
    /// A coordinate, size, speed, angle or covariance beyond its plausibility bound.
    #[error("out of range: {0}")]
    OutOfRange(String),
    /// An object's length or width is zero or negative.
    #[error("bad size: {0}")]
    BadSize(String),
    /// A plan with more points (poses, and its length over the densification step) than
    /// `limits.max_plan_points`.
    #[error("plan too long: {0}")]
    PlanTooLong(String),
    /// A stamp beyond `limits.max_stamp_s`, or further ahead of the arrival clock than
    /// `limits.max_stamp_lead_s`.
    #[error("implausible stamp: {0}")]
    ImplausibleStamp(String),
    /// An arrival time beyond `limits.max_stamp_s`, or jumping ahead of the arrival clock
    /// by more than `limits.max_stamp_lead_s` with no second message to confirm the jump.
    #[error("implausible recv: {0}")]
    ImplausibleRecv(String),
    /// A live sample whose encoding is neither JSON nor the project's postcard encoding.
    #[error("unknown encoding {0}")]
    BadEncoding(String),
}

impl Reject {
    /// Stable reason code used in counts and reports.
    pub fn code(&self) -> &'static str {
        match self {
            Reject::Malformed(_) => "malformed",
            Reject::MissingField(_) => "missing_field",
            Reject::WrongType(_) => "wrong_type",
            Reject::NonFinite(_) => "non_finite",
            Reject::BadId(_) => "bad_id",
            Reject::DuplicateId(_) => "duplicate_id",
            Reject::BadFrame(_) => "bad_frame",
            Reject::BadObstacle(_) => "bad_obstacle",
            Reject::TooManyObjects(..) => "too_many_objects",
            Reject::BadCovariance(_) => "bad_covariance",
            Reject::UnboundKey(_) => "unbound_key",
            Reject::TooLong(_) => "line_too_long",
            Reject::OutOfRange(_) => "out_of_range",
            Reject::BadSize(_) => "bad_size",
            Reject::PlanTooLong(_) => "plan_too_long",
            Reject::ImplausibleStamp(_) => "implausible_stamp",
            Reject::ImplausibleRecv(_) => "implausible_recv",
            Reject::BadEncoding(_) => "bad_encoding",
        }
    }

    /// Classifies a serde_json error into a reason.
    pub fn from_json(e: &serde_json::Error) -> Reject {
        let text = e.to_string();
        if text.contains("missing field") {
            Reject::MissingField(text)
        } else if text.contains("number out of range") {
            Reject::NonFinite(text)
        } else if text.contains("expected `world` or `ego`") {
            Reject::BadFrame(text)
        } else if text.contains("unknown variant") {
            Reject::BadObstacle(text)
        } else if text.contains("expected u64") {
            Reject::BadId(text)
        } else if text.contains("invalid type") || text.contains("invalid length") {
            Reject::WrongType(text)
        } else {
            Reject::Malformed(text)
        }
    }
}

/// Limits applied while validating: sizes, and the plausibility bounds of `[limits]`.
///
/// A message beyond a bound parses but makes no physical sense; it is rejected whole with
/// a reason of its own, so that it can neither fool the metrics (a coordinate of 1e308
/// turns every distance into infinity) nor stall the engine (a plan reaching 1e7 m away
/// densifies into millions of points).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Limits {
    /// Largest object or obstacle count accepted in one message.
    pub max_objects: usize,
    /// Largest coordinate magnitude (m) of a position, path pose or polygon vertex.
    pub max_coordinate: f64,
    /// Largest size (m): an object's or obstacle's length and width, a circle's radius.
    pub max_size: f64,
    /// Largest speed (m/s): `vx`, `vy` of an object, `v` of a pose.
    pub max_speed: f64,
    /// Largest stamp (and `recv`) magnitude (s): 1e10 s is past the year 2286 in Unix time.
    pub max_stamp: f64,
    /// Most points of a plan: its poses plus its length over `plan_step`.
    pub max_plan_points: usize,
    /// The step a plan is densified at (m): `clearance.path_step_m`.
    pub plan_step: f64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_objects: 10_000,
            max_coordinate: 1e7,
            max_size: 1e4,
            max_speed: 1e3,
            max_stamp: 1e10,
            max_plan_points: 100_000,
            plan_step: 0.5,
        }
    }
}

/// Largest angle magnitude (rad) accepted: a yaw is an angle, not a counter of turns.
pub const MAX_ANGLE: f64 = 1e4;
/// Largest covariance entry magnitude (m^2, rad^2): beyond it determinants overflow.
pub const MAX_COV: f64 = 1e12;

/// Decodes a JSON message of the given kind and validates it.
pub fn decode_json(kind: MsgKind, text: &str, limits: &Limits) -> Result<Msg, Reject> {
    fn parse<'a, T: Deserialize<'a>>(text: &'a str) -> Result<T, Reject> {
        serde_json::from_str::<strict::Object<T>>(text).map(|o| o.0).map_err(|e| Reject::from_json(&e))
    }
    let msg = match kind {
        MsgKind::Objects => Msg::Objects(parse(text)?),
        MsgKind::Pose => Msg::Pose(parse(text)?),
        MsgKind::Path => Msg::Path(parse(text)?),
        MsgKind::Obstacles => Msg::Obstacles(parse(text)?),
    };
    validate(&msg, limits)?;
    Ok(msg)
}

fn finite(name: &str, v: f64) -> Result<(), Reject> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(Reject::NonFinite(name.to_string()))
    }
}

/// A finite value of magnitude at most `bound`.
fn within(name: &str, v: f64, bound: f64) -> Result<(), Reject> {
    finite(name, v)?;
    if v.abs() <= bound {
        Ok(())
    } else {
        Err(Reject::OutOfRange(format!("{name} = {v:e} beyond {bound:e}")))
    }
}

fn within_opt(name: &str, v: Option<f64>, bound: f64) -> Result<(), Reject> {
    v.map_or(Ok(()), |v| within(name, v, bound))
}

fn within_all(name: &str, vs: &[f64], bound: f64) -> Result<(), Reject> {
    vs.iter().try_for_each(|&v| within(name, v, bound))
}

/// A finite size in (0, bound].
fn size(name: &str, v: f64, bound: f64, bad: impl Fn(String) -> Reject) -> Result<f64, Reject> {
    within(name, v, bound)?;
    if v > 0.0 {
        Ok(v)
    } else {
        Err(bad(format!("{name} = {v} is not > 0")))
    }
}

/// Checks a message's stamp against `limits.max_stamp_s`.
fn check_stamp(v: f64, limits: &Limits) -> Result<(), Reject> {
    finite("stamp", v)?;
    if v.abs() <= limits.max_stamp {
        Ok(())
    } else {
        Err(Reject::ImplausibleStamp(format!("stamp = {v:e} beyond {:e} s", limits.max_stamp)))
    }
}

/// Checks a record's arrival time, when it has one, against `limits.max_stamp_s`.
pub fn check_recv(recv: Option<f64>, limits: &Limits) -> Result<(), Reject> {
    let Some(v) = recv else { return Ok(()) };
    finite("recv", v)?;
    if v.abs() <= limits.max_stamp {
        Ok(())
    } else {
        Err(Reject::ImplausibleRecv(format!("recv = {v:e} beyond {:e} s", limits.max_stamp)))
    }
}

/// Checks the rules of SPEC §2 that serde cannot (finite numbers, unique ids, shapes,
/// covariance sanity, size limits) and the plausibility bounds of [`Limits`].
pub fn validate(msg: &Msg, limits: &Limits) -> Result<(), Reject> {
    check_stamp(msg.stamp(), limits)?;
    let (xy, len, speed) = (limits.max_coordinate, limits.max_size, limits.max_speed);
    match msg {
        Msg::Objects(set) => {
            if set.objects.len() > limits.max_objects {
                return Err(Reject::TooManyObjects(set.objects.len(), limits.max_objects));
            }
            for o in &set.objects {
                within("x", o.x, xy)?;
                within("y", o.y, xy)?;
                within_opt("vx", o.vx, speed)?;
                within_opt("vy", o.vy, speed)?;
                within_opt("yaw", o.yaw, MAX_ANGLE)?;
                if let Some(l) = o.length {
                    size("length", l, len, Reject::BadSize)?;
                }
                if let Some(w) = o.width {
                    size("width", w, len, Reject::BadSize)?;
                }
                if let Some(c) = &o.cov {
                    within_all("cov", c, MAX_COV)?;
                    check_cov2(c)?;
                }
            }
            check_unique(set.objects.iter().map(|o| o.id))?;
        }
        Msg::Pose(p) => {
            within_all("pose", &[p.x, p.y], xy)?;
            within("yaw", p.yaw, MAX_ANGLE)?;
            within_opt("v", p.v, speed)?;
            if let Some(c) = &p.cov {
                within_all("cov", c, MAX_COV)?;
            }
        }
        Msg::Path(p) => {
            for q in p.poses.iter().chain(p.goal.iter()) {
                within_all("poses", &[q.x, q.y], xy)?;
                within_opt("yaw", q.yaw, MAX_ANGLE)?;
            }
            within_opt("compute_s", p.compute_s, limits.max_stamp)?;
            check_plan_points(p, limits)?;
        }
        Msg::Obstacles(set) => {
            if set.obstacles.len() > limits.max_objects {
                return Err(Reject::TooManyObjects(set.obstacles.len(), limits.max_objects));
            }
            for o in &set.obstacles {
                check_obstacle(o, limits)?;
            }
            check_unique(set.obstacles.iter().map(|o| o.id))?;
        }
    }
    Ok(())
}

/// A plan's points once densified: its poses and its length over the step. The count is
/// what every per-plan computation (densification, swept clearance, deviation) is
/// proportional to, so bounding it bounds a plan's cost.
fn check_plan_points(p: &Path, limits: &Limits) -> Result<(), Reject> {
    let n = p.poses.len();
    if n > limits.max_plan_points {
        return Err(Reject::PlanTooLong(format!(
            "{n} poses > limits.max_plan_points = {}",
            limits.max_plan_points
        )));
    }
    let length: f64 = p.poses.windows(2).map(|w| (w[1].x - w[0].x).hypot(w[1].y - w[0].y)).sum();
    let points = n as f64 + length / limits.plan_step;
    if points > limits.max_plan_points as f64 {
        return Err(Reject::PlanTooLong(format!(
            "{length:.1} m at {} m a point with {n} poses is {points:.0} points > limits.max_plan_points = {}",
            limits.plan_step, limits.max_plan_points
        )));
    }
    Ok(())
}

/// A 2x2 covariance must be symmetric with a positive-definite matrix
/// (positive diagonal, positive determinant).
fn check_cov2(c: &[f64; 4]) -> Result<(), Reject> {
    let sym_tol = 1e-9 * (c[1].abs() + c[2].abs()).max(1.0);
    if (c[1] - c[2]).abs() > sym_tol {
        return Err(Reject::BadCovariance("not symmetric".into()));
    }
    let det = c[0] * c[3] - c[1] * c[2];
    if c[0] <= 0.0 || c[3] <= 0.0 || det <= 0.0 {
        return Err(Reject::BadCovariance("not positive definite".into()));
    }
    Ok(())
}

fn check_unique(ids: impl Iterator<Item = u64>) -> Result<(), Reject> {
    let mut v: Vec<u64> = ids.collect();
    v.sort_unstable();
    match v.windows(2).find(|w| w[0] == w[1]) {
        Some(w) => Err(Reject::DuplicateId(w[0])),
        None => Ok(()),
    }
}

fn check_obstacle(o: &Obstacle, limits: &Limits) -> Result<(), Reject> {
    let (xy, len) = (limits.max_coordinate, limits.max_size);
    let need = |name: &str, v: Option<f64>| -> Result<f64, Reject> {
        v.ok_or_else(|| Reject::BadObstacle(format!("obstacle {} needs {name}", o.id)))
    };
    let bad = |why: String| Reject::BadObstacle(format!("obstacle {}: {why}", o.id));
    within_opt("yaw", o.yaw, MAX_ANGLE)?;
    match o.shape {
        Shape::Circle => {
            within("x", need("x", o.x)?, xy)?;
            within("y", need("y", o.y)?, xy)?;
            let r = need("radius", o.radius)?;
            within("radius", r, len)?;
            if r < 0.0 {
                return Err(bad("negative radius".into()));
            }
        }
        Shape::Box => {
            within("x", need("x", o.x)?, xy)?;
            within("y", need("y", o.y)?, xy)?;
            size("length", need("length", o.length)?, len, bad)?;
            size("width", need("width", o.width)?, len, bad)?;
        }
        Shape::Polygon => {
            let pts = o.points.as_ref().ok_or_else(|| bad("needs points".into()))?;
            if pts.len() < 3 {
                return Err(bad(format!("a polygon needs at least 3 vertices, found {}", pts.len())));
            }
            for p in pts {
                within_all("points", p, xy)?;
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn obj(text: &str) -> Result<Msg, Reject> {
        decode_json(MsgKind::Objects, text, &Limits::default())
    }

    #[test]
    fn spec_example_object_set_decodes() {
        let m = obj(r#"{"stamp": 12.30, "frame": "world",
 "objects": [{"id": 4, "x": 10.2, "y": -3.1, "vx": 1.0, "vy": 0.0, "yaw": 0.1,
              "length": 4.5, "width": 1.8, "cov": [0.04, 0.0, 0.0, 0.04], "class": "cart"}]}"#)
        .unwrap();
        let Msg::Objects(s) = m else { panic!() };
        assert_eq!(s.objects[0].id, 4);
        assert_eq!(s.objects[0].class.as_deref(), Some("cart"));
        assert_eq!(s.objects[0].length, Some(4.5));
    }

    #[test]
    fn rejections_carry_reasons() {
        let cases = [
            (r#"{"stamp": 1, "objects": [{"id": 1, "x": 1}]}"#, "missing_field"),
            (r#"{"stamp": 1, "objects": [{"id": 1, "x": "a", "y": 2}]}"#, "wrong_type"),
            (r#"{"stamp": 1e999, "objects": []}"#, "non_finite"),
            (r#"{"stamp": 1, "objects": [{"id": -1, "x": 1, "y": 2}]}"#, "bad_id"),
            (r#"{"stamp": 1, "objects": [{"id": 1.5, "x": 1, "y": 2}]}"#, "bad_id"),
            (r#"{"stamp": 1, "objects": [{"id": 18446744073709551616, "x": 1, "y": 2}]}"#, "bad_id"),
            (
                r#"{"stamp": 1, "objects": [{"id": 1, "x": 1, "y": 2}, {"id": 1, "x": 3, "y": 4}]}"#,
                "duplicate_id",
            ),
            (r#"{"stamp": 1, "frame": "map", "objects": []}"#, "bad_frame"),
            (r#"{"stamp": 1, "objects": [{"id": 1, "x": NaN, "y": 2}]}"#, "malformed"),
            (r#"{"stamp": 1, "objects": ["#, "malformed"),
            (
                r#"{"stamp": 1, "objects": [{"id": 1, "x": 1, "y": 2, "cov": [1, 0, 0, -1]}]}"#,
                "bad_covariance",
            ),
        ];
        for (text, code) in cases {
            let e = obj(text).expect_err(text);
            assert_eq!(e.code(), code, "{text}: {e}");
        }
    }

    #[test]
    fn nulls_integers_and_unknown_fields_are_valid() {
        let m = obj(r#"{"stamp": 3, "frame": null, "extra": {"a": 1},
            "objects": [{"id": 0, "x": 3, "y": -2, "vx": null, "cov": null, "foo": 1}]}"#)
        .unwrap();
        let Msg::Objects(s) = m else { panic!() };
        assert_eq!(s.frame, None);
        assert_eq!(s.objects[0].x, 3.0);
    }

    #[test]
    fn obstacles_need_their_shape_fields() {
        let l = Limits::default();
        let ok = r#"{"stamp": 0, "obstacles": [
            {"id": 1, "shape": "circle", "x": 3.0, "y": 4.0, "radius": 0.5},
            {"id": 2, "shape": "box", "x": 3.0, "y": 4.0, "yaw": 0.0, "length": 2.0, "width": 1.0},
            {"id": 3, "shape": "polygon", "points": [[0,0],[2,0],[2,1]]}]}"#;
        assert!(decode_json(MsgKind::Obstacles, ok, &l).is_ok());
        let bad = r#"{"stamp": 0, "obstacles": [{"id": 1, "shape": "circle", "x": 3.0, "y": 4.0}]}"#;
        assert_eq!(decode_json(MsgKind::Obstacles, bad, &l).unwrap_err().code(), "bad_obstacle");
        let bad = r#"{"stamp": 0, "obstacles": [{"id": 1, "shape": "blob"}]}"#;
        assert_eq!(decode_json(MsgKind::Obstacles, bad, &l).unwrap_err().code(), "bad_obstacle");
    }

    #[test]
    fn object_limit_applies() {
        let l = Limits { max_objects: 1, ..Limits::default() };
        let t = r#"{"stamp": 1, "objects": [{"id": 1, "x": 1, "y": 2}, {"id": 2, "x": 3, "y": 4}]}"#;
        assert_eq!(decode_json(MsgKind::Objects, t, &l).unwrap_err().code(), "too_many_objects");
    }
}
