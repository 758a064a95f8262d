//! The zenoh edge: opening a session from the config, the project's encodings, and turning
//! a sample into a decoded record. Thin: no metric logic here.

use zenoh::bytes::Encoding;
use zenoh::Wait;

use crate::config::Config;
use crate::logio::LogRecord;
use crate::msg::{decode_json, Msg, Reject, Role};
use crate::wire::decode_postcard;

/// The schema that marks the project's postcard encoding.
pub const POSTCARD_SCHEMA: &str = "plumbline-postcard";

/// The encoding of postcard payloads: `application/octet-stream;plumbline-postcard`.
pub fn postcard_encoding() -> Encoding {
    Encoding::APPLICATION_OCTET_STREAM.with_schema(POSTCARD_SCHEMA)
}

/// The two forms a role's payload may take (SPEC §2).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PayloadForm {
    /// `application/json` or `text/json` (any schema such as `charset=utf-8`).
    Json,
    /// `application/octet-stream;plumbline-postcard`.
    Postcard,
}

/// Which form an encoding's text (`base[;schema]`, as zenoh prints it) names, if either.
/// Anything else (`text/plain`, bare `application/octet-stream`, zenoh's default
/// `zenoh/bytes` when the publisher set none) is neither and is rejected as
/// `bad_encoding`: reading it as JSON would guess.
pub fn payload_form(encoding: &str) -> Option<PayloadForm> {
    let (base, schema) = encoding.split_once(';').unwrap_or((encoding, ""));
    match base {
        "application/json" | "text/json" => Some(PayloadForm::Json),
        "application/octet-stream" if schema == POSTCARD_SCHEMA => Some(PayloadForm::Postcard),
        _ => None,
    }
}

/// Whether a sample's key is role data for a role bound to `bound`: a concrete key (no
/// wildcard) that the binding includes, which for a binding without wildcards means the
/// same key. A put on `rig/**` reaches every subscriber it intersects; it is none of
/// theirs, and never recorded as role data.
pub fn is_role_data(bound: &zenoh::key_expr::KeyExpr<'_>, key: &zenoh::key_expr::KeyExpr<'_>) -> bool {
    let k = key.as_str();
    if k.contains('*') {
        return false;
    }
    k == bound.as_str() || bound.includes(key)
}

/// The attachment prefix by which a publisher names itself: `plumbline-source=<name>`.
/// plumbline's own publishers (`publish`, `demo`, `load`) attach it with their session id;
/// any stack may attach it with a name of its own. Samples without it count as one
/// unidentified publisher per role.
pub const SOURCE_PREFIX: &[u8] = b"plumbline-source=";

/// The attachment naming this session as a publisher.
pub fn source_tag(session: &zenoh::Session) -> Vec<u8> {
    let mut v = SOURCE_PREFIX.to_vec();
    v.extend_from_slice(session.zid().to_string().as_bytes());
    v
}

/// The publisher a sample's attachment names, if it names one (at most 64 bytes of it).
pub fn source_of(attachment: &[u8]) -> Option<String> {
    let name = attachment.strip_prefix(SOURCE_PREFIX)?;
    let name = &name[..name.len().min(64)];
    std::str::from_utf8(name).ok().filter(|n| !n.is_empty()).map(str::to_string)
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
    } else if z.config_file.is_none() {
        // Nothing said: listen on this machine only (zenoh's own default is every interface).
        set(&mut zc, "listen/endpoints", r#"["tcp/127.0.0.1:0"]"#.into())?;
    }
    set(&mut zc, "scouting/multicast/enabled", z.multicast.to_string())?;
    if z.config_file.is_none() || z.multicast_interface != crate::config::LOOPBACK_INTERFACE {
        set(
            &mut zc,
            "scouting/multicast/interface",
            serde_json::to_string(&z.multicast_interface).unwrap_or_default(),
        )?;
    }
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
    let enc = encoding.to_string();
    let msg: Msg = match payload_form(&enc) {
        Some(PayloadForm::Postcard) => decode_postcard(role.kind(), payload, &limits)?,
        Some(PayloadForm::Json) => {
            let text = std::str::from_utf8(payload).map_err(|e| Reject::Malformed(e.to_string()))?;
            decode_json(role.kind(), text, &limits)?
        }
        None => return Err(Reject::BadEncoding(enc)),
    };
    Ok(LogRecord { key: key.to_string(), recv: Some(recv), msg })
}

/// Seconds since the Unix epoch: the live monitor's clock.
pub fn wall_now() -> f64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_secs_f64()).unwrap_or(0.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_json_and_the_postcard_encoding_are_read() {
        assert_eq!(payload_form(&Encoding::APPLICATION_JSON.to_string()), Some(PayloadForm::Json));
        assert_eq!(payload_form("application/json;charset=utf-8"), Some(PayloadForm::Json));
        assert_eq!(payload_form(&Encoding::TEXT_JSON.to_string()), Some(PayloadForm::Json));
        assert_eq!(payload_form(&postcard_encoding().to_string()), Some(PayloadForm::Postcard));
        for other in [
            Encoding::TEXT_PLAIN.to_string(),
            Encoding::APPLICATION_OCTET_STREAM.to_string(),
            Encoding::ZENOH_BYTES.to_string(),
            Encoding::APPLICATION_OCTET_STREAM.with_schema("other").to_string(),
        ] {
            assert_eq!(payload_form(&other), None, "{other}");
        }
    }

    #[test]
    fn wildcard_puts_are_not_role_data() {
        let ke = |s: &str| zenoh::key_expr::KeyExpr::try_from(s.to_string()).unwrap();
        let bound = ke("rig/reference/objects");
        assert!(is_role_data(&bound, &ke("rig/reference/objects")));
        assert!(!is_role_data(&bound, &ke("rig/**")));
        assert!(!is_role_data(&bound, &ke("rig/*/objects")));
        let wide = ke("fleet/*/reference/objects");
        assert!(is_role_data(&wide, &ke("fleet/car1/reference/objects")));
        assert!(!is_role_data(&wide, &ke("fleet/*/reference/objects")));
    }

    #[test]
    fn the_shipped_secure_config_parses_as_a_zenoh_config() {
        let p = concat!(env!("CARGO_MANIFEST_DIR"), "/config/zenoh-secure.json5");
        let c = zenoh::Config::from_file(p).expect("config/zenoh-secure.json5 is a valid zenoh config");
        let tls = c.get_json("transport/link/tls/enable_mtls").unwrap();
        assert_eq!(tls, "true");
        assert_eq!(c.get_json("access_control/default_permission").unwrap(), "\"deny\"");
    }
}
