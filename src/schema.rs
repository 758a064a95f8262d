//! JSON Schemas (draft 2020-12) of the messages and of a JSON Lines record, as
//! `plumbline schema` prints them. Pure: built from the config's bindings and limits.
//!
//! They say what `msg::validate` and the decoders accept, as far as a schema can: types,
//! required fields, objects where the contract has objects (an array is `wrong_type`),
//! frames, obstacle shapes and their fields, and the plausibility bounds of `[limits]` with
//! the config's values. Two rules are beyond a schema and are checked by plumbline alone:
//! ids unique within one set, and a covariance that is symmetric positive definite.
//! Unknown fields are allowed (SPEC §2: they are ignored). `scripts/schema-check.sh` holds
//! the schemas to Python's `jsonschema` package on the shipped log and on rejected records.

use serde_json::{json, Value};

use crate::msg::{Limits, MsgKind, Role, MAX_ANGLE, MAX_COV};

/// The draft every schema declares.
pub const DRAFT: &str = "https://json-schema.org/draft/2020-12/schema";

/// The largest id (u64).
const MAX_ID: u64 = u64::MAX;

fn num(bound: f64) -> Value {
    json!({"type": "number", "minimum": -bound, "maximum": bound})
}

fn opt(v: Value) -> Value {
    json!({"anyOf": [v, {"type": "null"}]})
}

fn array_of(item: Value, n: usize) -> Value {
    json!({"type": "array", "items": item, "minItems": n, "maxItems": n})
}

/// The schema of one message kind under the config's limits.
pub fn message(l: &Limits, kind: MsgKind) -> Value {
    let (xy, size, speed, stamp) = (num(l.max_coordinate), l.max_size, num(l.max_speed), num(l.max_stamp));
    let positive = json!({"type": "number", "exclusiveMinimum": 0, "maximum": size});
    let id = json!({"type": "integer", "minimum": 0, "maximum": MAX_ID});
    let (title, body) = match kind {
        MsgKind::Objects => (
            "ObjectSet",
            json!({
                "type": "object",
                "required": ["stamp"],
                "properties": {
                    "stamp": stamp,
                    "frame": opt(json!({"enum": ["world", "ego"]})),
                    "objects": {
                        "type": "array",
                        "maxItems": l.max_objects,
                        "items": {
                            "type": "object",
                            "required": ["id", "x", "y"],
                            "properties": {
                                "id": id,
                                "x": xy, "y": xy,
                                "vx": opt(speed.clone()), "vy": opt(speed),
                                "yaw": opt(num(MAX_ANGLE)),
                                "length": opt(positive.clone()), "width": opt(positive),
                                "cov": opt(array_of(num(MAX_COV), 4)),
                                "class": opt(json!({"type": "string"}))
                            }
                        }
                    }
                }
            }),
        ),
        MsgKind::Pose => (
            "Pose",
            json!({
                "type": "object",
                "required": ["stamp", "x", "y", "yaw"],
                "properties": {
                    "stamp": stamp, "x": xy, "y": xy, "yaw": num(MAX_ANGLE),
                    "v": opt(speed),
                    "cov": opt(array_of(num(MAX_COV), 9))
                }
            }),
        ),
        MsgKind::Path => {
            let pose = json!({
                "type": "object",
                "required": ["x", "y"],
                "properties": {"x": xy, "y": xy, "yaw": opt(num(MAX_ANGLE))}
            });
            (
                "Path",
                json!({
                    "type": "object",
                    "required": ["stamp", "poses"],
                    "properties": {
                        "stamp": stamp,
                        "poses": {"type": "array", "items": pose, "maxItems": l.max_plan_points},
                        "goal": opt(pose),
                        "compute_s": opt(num(l.max_stamp))
                    },
                    "$comment": "A plan's poses plus its length over clearance.path_step_m must not exceed limits.max_plan_points (checked by plumbline)."
                }),
            )
        }
        MsgKind::Obstacles => {
            let need = |fields: &[&str], extra: Value| {
                let mut props = json!({"x": xy, "y": xy});
                if let (Some(p), Some(e)) = (props.as_object_mut(), extra.as_object()) {
                    p.extend(e.clone());
                }
                json!({"required": fields, "properties": props})
            };
            let circle = need(
                &["x", "y", "radius"],
                json!({"radius": {"type": "number", "minimum": 0, "maximum": size}}),
            );
            let rect = need(&["x", "y", "length", "width"], json!({"length": positive, "width": positive}));
            let polygon = json!({
                "required": ["points"],
                "properties": {"points": {"type": "array", "minItems": 3, "items": array_of(xy.clone(), 2)}}
            });
            (
                "ObstacleSet",
                json!({
                    "type": "object",
                    "required": ["stamp"],
                    "properties": {
                        "stamp": stamp,
                        "obstacles": {
                            "type": "array",
                            "maxItems": l.max_objects,
                            "items": {
                                "type": "object",
                                "required": ["id", "shape"],
                                "properties": {
                                    "id": id,
                                    "shape": {"enum": ["circle", "box", "polygon"]},
                                    "yaw": opt(num(MAX_ANGLE))
                                },
                                "allOf": [
                                    {"if": {"properties": {"shape": {"const": "circle"}}}, "then": circle},
                                    {"if": {"properties": {"shape": {"const": "box"}}}, "then": rect},
                                    {"if": {"properties": {"shape": {"const": "polygon"}}}, "then": polygon}
                                ]
                            }
                        }
                    }
                }),
            )
        }
    };
    let mut v = body;
    if let Some(o) = v.as_object_mut() {
        o.insert("$schema".into(), json!(DRAFT));
        o.insert("title".into(), json!(title));
        o.insert("$id".into(), json!(format!("plumbline:{}", title)));
    }
    v
}

/// The schema of one JSON Lines record: `key` one of the config's bound keys, `recv` an
/// optional arrival time, `msg` the message of the key's role.
pub fn record(l: &Limits, roles: &[(Role, String)]) -> Value {
    let keys: Vec<&str> = roles.iter().map(|(_, k)| k.as_str()).collect();
    let by_key: Vec<Value> = roles
        .iter()
        .map(|(role, key)| {
            let mut m = message(l, role.kind());
            if let Some(o) = m.as_object_mut() {
                o.remove("$schema");
                o.remove("$id");
            }
            json!({"if": {"properties": {"key": {"const": key}}}, "then": {"properties": {"msg": m}}})
        })
        .collect();
    json!({
        "$schema": DRAFT,
        "$id": "plumbline:Record",
        "title": "Record (one line of a JSON Lines log)",
        "type": "object",
        "required": ["key", "msg"],
        "properties": {
            "key": {"enum": keys},
            "recv": opt(num(l.max_stamp)),
            "msg": {"type": "object"}
        },
        "allOf": by_key
    })
}

/// Every schema by the name `plumbline schema NAME` takes.
pub fn by_name(l: &Limits, roles: &[(Role, String)], name: &str) -> Option<Value> {
    Some(match name {
        "object-set" => message(l, MsgKind::Objects),
        "pose" => message(l, MsgKind::Pose),
        "path" => message(l, MsgKind::Path),
        "obstacle-set" => message(l, MsgKind::Obstacles),
        "record" => record(l, roles),
        _ => return None,
    })
}

/// The names `plumbline schema` takes.
pub const NAMES: [&str; 5] = ["record", "object-set", "pose", "path", "obstacle-set"];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_schema_declares_its_draft_and_the_config_bounds() {
        let l = Limits { max_coordinate: 500.0, ..Limits::default() };
        let roles: Vec<(Role, String)> =
            Role::ALL.iter().map(|&r| (r, format!("rig/{}", r.name()))).collect();
        for n in NAMES {
            let s = by_name(&l, &roles, n).unwrap();
            assert_eq!(s["$schema"], DRAFT, "{n}");
        }
        let pose = by_name(&l, &roles, "pose").unwrap();
        assert_eq!(pose["properties"]["x"]["maximum"], 500.0);
        assert_eq!(pose["required"], json!(["stamp", "x", "y", "yaw"]));
        let rec = record(&l, &roles);
        assert_eq!(rec["allOf"].as_array().unwrap().len(), 6);
        assert!(by_name(&l, &roles, "nothing").is_none());
    }
}
