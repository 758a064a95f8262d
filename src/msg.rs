//! Messages of the interchange contract (SPEC §2) and their validation.
//!
//! One set of serde structs serves both forms: JSON (`serde_json`) and the binary form
//! (`postcard`). Postcard is not self-describing, so the structs avoid serde features that
//! need it (no internally tagged enums, no skipped fields); an obstacle is therefore one flat
//! struct whose `shape` says which of its optional fields must be present.
//!
//! This module does no I/O. Decoding returns a [`Reject`] with a stable reason code when a
//! message is rejected whole.

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
    /// The localisation under test.
    EstimateEgo,
    /// The planner under test.
    PlanPath,
    /// Static site map.
    ReferenceObstacles,
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
    #[serde(default)]
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
    pub poses: Vec<PathPose>,
    /// Goal pose.
    #[serde(default)]
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
    #[serde(default)]
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

/// Limits applied while validating.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Largest object or obstacle count accepted in one message.
    pub max_objects: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits { max_objects: 10_000 }
    }
}

/// Decodes a JSON message of the given kind and validates it.
pub fn decode_json(kind: MsgKind, text: &str, limits: &Limits) -> Result<Msg, Reject> {
    fn parse<'a, T: Deserialize<'a>>(text: &'a str) -> Result<T, Reject> {
        serde_json::from_str(text).map_err(|e| Reject::from_json(&e))
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

/// Decodes a postcard message of the given kind and validates it.
pub fn decode_postcard(kind: MsgKind, bytes: &[u8], limits: &Limits) -> Result<Msg, Reject> {
    fn parse<'a, T: Deserialize<'a>>(bytes: &'a [u8]) -> Result<T, Reject> {
        postcard::from_bytes(bytes).map_err(|e| Reject::Malformed(e.to_string()))
    }
    // Object sets and poses by the direct reader when it can (see `crate::wire`).
    let msg = match kind {
        MsgKind::Objects => Msg::Objects(crate::wire::object_set(bytes).map_or_else(|| parse(bytes), Ok)?),
        MsgKind::Pose => Msg::Pose(crate::wire::pose(bytes).map_or_else(|| parse(bytes), Ok)?),
        MsgKind::Path => Msg::Path(parse(bytes)?),
        MsgKind::Obstacles => Msg::Obstacles(parse(bytes)?),
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

fn finite_opt(name: &str, v: Option<f64>) -> Result<(), Reject> {
    v.map_or(Ok(()), |v| finite(name, v))
}

fn finite_all(name: &str, vs: &[f64]) -> Result<(), Reject> {
    vs.iter().try_for_each(|&v| finite(name, v))
}

/// Checks the rules of SPEC §2 that serde cannot: finite numbers, unique ids, shapes,
/// covariance sanity, size limits.
pub fn validate(msg: &Msg, limits: &Limits) -> Result<(), Reject> {
    finite("stamp", msg.stamp())?;
    match msg {
        Msg::Objects(set) => {
            if set.objects.len() > limits.max_objects {
                return Err(Reject::TooManyObjects(set.objects.len(), limits.max_objects));
            }
            for o in &set.objects {
                finite("x", o.x)?;
                finite("y", o.y)?;
                finite_opt("vx", o.vx)?;
                finite_opt("vy", o.vy)?;
                finite_opt("yaw", o.yaw)?;
                finite_opt("length", o.length)?;
                finite_opt("width", o.width)?;
                if let Some(c) = &o.cov {
                    finite_all("cov", c)?;
                    check_cov2(c)?;
                }
            }
            check_unique(set.objects.iter().map(|o| o.id))?;
        }
        Msg::Pose(p) => {
            finite_all("pose", &[p.x, p.y, p.yaw])?;
            finite_opt("v", p.v)?;
            if let Some(c) = &p.cov {
                finite_all("cov", c)?;
            }
        }
        Msg::Path(p) => {
            for q in p.poses.iter().chain(p.goal.iter()) {
                finite_all("poses", &[q.x, q.y])?;
                finite_opt("yaw", q.yaw)?;
            }
            finite_opt("compute_s", p.compute_s)?;
        }
        Msg::Obstacles(set) => {
            if set.obstacles.len() > limits.max_objects {
                return Err(Reject::TooManyObjects(set.obstacles.len(), limits.max_objects));
            }
            for o in &set.obstacles {
                check_obstacle(o)?;
            }
            check_unique(set.obstacles.iter().map(|o| o.id))?;
        }
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

fn check_obstacle(o: &Obstacle) -> Result<(), Reject> {
    let need = |name: &str, v: Option<f64>| -> Result<f64, Reject> {
        let v = v.ok_or_else(|| Reject::BadObstacle(format!("obstacle {} needs {name}", o.id)))?;
        finite(name, v)?;
        Ok(v)
    };
    finite_opt("yaw", o.yaw)?;
    match o.shape {
        Shape::Circle => {
            need("x", o.x)?;
            need("y", o.y)?;
            if need("radius", o.radius)? < 0.0 {
                return Err(Reject::BadObstacle(format!("obstacle {}: negative radius", o.id)));
            }
        }
        Shape::Box => {
            need("x", o.x)?;
            need("y", o.y)?;
            if need("length", o.length)? < 0.0 || need("width", o.width)? < 0.0 {
                return Err(Reject::BadObstacle(format!("obstacle {}: negative size", o.id)));
            }
        }
        Shape::Polygon => {
            let pts = o
                .points
                .as_ref()
                .ok_or_else(|| Reject::BadObstacle(format!("obstacle {} needs points", o.id)))?;
            if pts.is_empty() {
                return Err(Reject::BadObstacle(format!("obstacle {}: no points", o.id)));
            }
            for p in pts {
                finite_all("points", p)?;
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
    fn postcard_round_trip_and_nonfinite_rejected() {
        let l = Limits::default();
        let m = Msg::Pose(Pose { stamp: 1.5, x: 1.0, y: 2.0, yaw: 0.5, v: Some(3.0), cov: None });
        let b = m.to_postcard();
        assert_eq!(decode_postcard(MsgKind::Pose, &b, &l).unwrap(), m);
        let bad = Msg::Pose(Pose { stamp: 1.5, x: f64::NAN, y: 2.0, yaw: 0.5, v: None, cov: None });
        let e = decode_postcard(MsgKind::Pose, &bad.to_postcard(), &l).unwrap_err();
        assert_eq!(e.code(), "non_finite");
    }

    #[test]
    fn object_limit_applies() {
        let l = Limits { max_objects: 1 };
        let t = r#"{"stamp": 1, "objects": [{"id": 1, "x": 1, "y": 2}, {"id": 2, "x": 3, "y": 4}]}"#;
        assert_eq!(decode_json(MsgKind::Objects, t, &l).unwrap_err().code(), "too_many_objects");
    }
}
