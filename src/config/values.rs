//! Values as the config writes them: durations with a unit, counts, lengths, bounds;
//! each checked with the key it came from.

use super::{err, ConfigError};

/// Parses a duration string with a unit: `250us`, `500ms`, `10s`, `2m`, `1h`.
pub fn parse_duration(s: &str) -> Option<f64> {
    let s = s.trim();
    let split = s.find(|c: char| c.is_ascii_alphabetic())?;
    let (num, unit) = s.split_at(split);
    let v: f64 = num.trim().parse().ok()?;
    let scale = match unit.trim() {
        "us" => 1e-6,
        "ms" => 1e-3,
        "s" => 1.0,
        "m" | "min" => 60.0,
        "h" => 3600.0,
        _ => return None,
    };
    let out = v * scale;
    (out.is_finite() && out >= 0.0).then_some(out)
}

/// Reads a duration key: a string with a unit.
pub fn duration(source: &str, key: &str, v: &Option<toml::Value>, default: f64) -> Result<f64, ConfigError> {
    let bad = |found: String| {
        err(source, key, format!("a duration with a unit such as \"500ms\", \"10s\", \"2m\"; found {found}"))
    };
    match v {
        None => Ok(default),
        Some(toml::Value::String(s)) => parse_duration(s).ok_or_else(|| bad(format!("\"{s}\""))),
        Some(other) => Err(bad(other.to_string())),
    }
}

pub(super) fn count(source: &str, key: &str, v: Option<i64>, default: usize) -> Result<usize, ConfigError> {
    match v {
        None => Ok(default),
        Some(n) if n > 0 => Ok(n as usize),
        Some(n) => Err(err(source, key, format!("a positive whole number, found {n}"))),
    }
}

pub(super) fn nonneg(source: &str, key: &str, v: Option<f64>, default: f64) -> Result<f64, ConfigError> {
    match v {
        None => Ok(default),
        Some(x) if x.is_finite() && x >= 0.0 => Ok(x),
        Some(x) => Err(err(source, key, format!("a number of metres >= 0, found {x}"))),
    }
}

/// A positive finite bound in `unit`.
pub(super) fn bound(
    source: &str,
    key: &str,
    v: Option<f64>,
    default: f64,
    unit: &str,
) -> Result<f64, ConfigError> {
    match v {
        None => Ok(default),
        Some(x) if x.is_finite() && x > 0.0 => Ok(x),
        Some(x) => Err(err(source, key, format!("a positive number of {unit}, found {x}"))),
    }
}

pub(super) fn positive(source: &str, key: &str, v: Option<f64>, default: f64) -> Result<f64, ConfigError> {
    match v {
        None => Ok(default),
        Some(x) if x.is_finite() && x > 0.0 => Ok(x),
        Some(x) => Err(err(source, key, format!("a positive number of metres, found {x}"))),
    }
}
