//! The zenoh edge: opening a session from the config, the project's encodings, and turning
//! a sample into a decoded record. Thin: no metric logic here.

use zenoh::bytes::Encoding;
use zenoh::Wait;

use crate::config::Config;
use crate::logio::LogRecord;
use crate::msg::{decode_json, decode_postcard, Msg, Reject, Role};

/// The schema that marks the project's postcard encoding.
pub const POSTCARD_SCHEMA: &str = "plumbline-postcard";

/// The encoding of postcard payloads: `application/octet-stream;plumbline-postcard`.
pub fn postcard_encoding() -> Encoding {
    Encoding::APPLICATION_OCTET_STREAM.with_schema(POSTCARD_SCHEMA)
}

/// Whether an encoding is the project's postcard one (anything else is read as JSON).
pub fn is_postcard(e: &Encoding) -> bool {
    e.to_string().ends_with(POSTCARD_SCHEMA)
}

/// Opens a zenoh session as the config says (`[zenoh]`: mode, connect, listen, scouting, or
/// a passthrough zenoh config file that the other keys then amend).
pub fn open(cfg: &Config) -> Result<zenoh::Session, String> {
    let z = &cfg.zenoh;
    let mut zc = match &z.config_file {
        Some(f) => zenoh::Config::from_file(f).map_err(|e| format!("zenoh config {f}: {e}"))?,
        None => zenoh::Config::default(),
    };
    let set = |zc: &mut zenoh::Config, k: &str, v: String| {
        zc.insert_json5(k, &v).map_err(|e| format!("zenoh setting {k} = {v}: {e}"))
    };
    set(&mut zc, "mode", format!("\"{}\"", z.mode))?;
    if !z.connect.is_empty() {
        set(&mut zc, "connect/endpoints", serde_json::to_string(&z.connect).unwrap_or_default())?;
    }
    if !z.listen.is_empty() {
        set(&mut zc, "listen/endpoints", serde_json::to_string(&z.listen).unwrap_or_default())?;
    }
    set(&mut zc, "scouting/multicast/enabled", z.multicast.to_string())?;
    if z.config_file.is_none() {
        // Reconnect to a restarted router within a second rather than zenoh's default
        // back-off up to 4 s (a passthrough config file keeps its own settings).
        let retry = "{period_init_ms: 250, period_max_ms: 1000, period_increase_factor: 2}";
        set(&mut zc, "connect/retry", retry.into())?;
    }
    zenoh::open(zc).wait().map_err(|e| format!("opening the zenoh session: {e}"))
}

/// Decodes one sample of a role into a record, with `recv` the arrival time.
pub fn decode(
    cfg: &Config,
    role: Role,
    key: &str,
    encoding: &Encoding,
    payload: &[u8],
    recv: f64,
) -> Result<LogRecord, Reject> {
    let limits = cfg.limits();
    let msg: Msg = if is_postcard(encoding) {
        decode_postcard(role.kind(), payload, &limits)?
    } else {
        let text = std::str::from_utf8(payload).map_err(|e| Reject::Malformed(e.to_string()))?;
        decode_json(role.kind(), text, &limits)?
    };
    Ok(LogRecord { key: key.to_string(), recv: Some(recv), msg })
}

/// Seconds since the Unix epoch: the live monitor's clock.
pub fn wall_now() -> f64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_secs_f64()).unwrap_or(0.0)
}

#[cfg(test)]
mod tests {
    #[test]
    fn the_shipped_secure_config_parses_as_a_zenoh_config() {
        let p = concat!(env!("CARGO_MANIFEST_DIR"), "/config/zenoh-secure.json5");
        let c = zenoh::Config::from_file(p).expect("config/zenoh-secure.json5 is a valid zenoh config");
        let tls = c.get_json("transport/link/tls/enable_mtls").unwrap();
        assert_eq!(tls, "true");
        assert_eq!(c.get_json("access_control/default_permission").unwrap(), "\"deny\"");
    }
}
