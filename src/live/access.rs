//! HTTP access rules, kept apart from the server so they take the time as an argument and
//! test without sockets: the bearer token (read from a file, compared in constant time) and
//! a token bucket per client address with a bounded table.

use std::collections::HashMap;
use std::net::IpAddr;
use std::path::Path;

/// The bearer token the data endpoints require.
#[derive(Debug, Clone)]
pub struct Token {
    secret: String,
}

/// What loading a token file found worth a warning.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TokenWarning {
    /// Group or others may read the file (its mode).
    ReadableByOthers(u32),
}

impl Token {
    /// Reads the token: the file's first line, trimmed; an empty token is an error. The
    /// error names the file, never its content.
    pub fn load(path: &Path) -> Result<(Token, Option<TokenWarning>), String> {
        let text =
            std::fs::read_to_string(path).map_err(|e| format!("http.token_file {}: {e}", path.display()))?;
        let secret = text.lines().next().unwrap_or("").trim().to_string();
        if secret.is_empty() {
            return Err(format!("http.token_file {}: the file holds no token", path.display()));
        }
        let warning = readable_by_others(path).map(TokenWarning::ReadableByOthers);
        Ok((Token { secret }, warning))
    }

    /// Whether an `Authorization` header value carries this token (`Bearer <token>`; the
    /// scheme is case-insensitive, RFC 9110 section 11.1, and may be followed by more
    /// than one space).
    pub fn admits(&self, authorization: Option<&[u8]>) -> bool {
        let Some(v) = authorization else { return false };
        let Some(sp) = v.iter().position(|&b| b == b' ') else { return false };
        if !v[..sp].eq_ignore_ascii_case(b"bearer") {
            return false;
        }
        let given = &v[sp..];
        let given = &given[given.iter().take_while(|&&b| b == b' ').count()..];
        constant_time_eq(given, self.secret.as_bytes())
    }
}

#[cfg(unix)]
fn readable_by_others(path: &Path) -> Option<u32> {
    use std::os::unix::fs::PermissionsExt;
    let mode = std::fs::metadata(path).ok()?.permissions().mode() & 0o777;
    (mode & 0o044 != 0).then_some(mode)
}

#[cfg(not(unix))]
fn readable_by_others(_: &Path) -> Option<u32> {
    None
}

/// Compares without stopping at the first difference, so the time taken does not tell how
/// much of a guess was right. Written here: the standard library has no such comparison
/// and this is four lines.
fn constant_time_eq(a: &[u8], b: &[u8]) -> bool {
    let mut diff = (a.len() != b.len()) as u8;
    for i in 0..a.len().max(b.len()) {
        diff |= a.get(i).copied().unwrap_or(0) ^ b.get(i).copied().unwrap_or(0);
    }
    diff == 0
}

/// The connection cap that fits the process's open-file limit: `wanted`, but at most the
/// soft limit less `reserve` descriptors for everything else (zenoh's sockets, the
/// recorder, the journal). Reads `/proc/self/limits` (Linux); elsewhere `wanted`.
pub fn connection_cap(wanted: usize, reserve: usize) -> usize {
    let soft = std::fs::read_to_string("/proc/self/limits").ok().and_then(|t| {
        let line = t.lines().find(|l| l.starts_with("Max open files"))?;
        line["Max open files".len()..].split_whitespace().next()?.parse::<usize>().ok()
    });
    match soft {
        Some(n) => wanted.min(n.saturating_sub(reserve).max(1)),
        None => wanted,
    }
}

/// Clients tracked at once; past this, full buckets (idle clients) are forgotten first.
pub const MAX_CLIENTS: usize = 4096;

/// A token bucket per client address: `rate` requests a second, `burst` at once.
#[derive(Debug)]
pub struct RateLimiter {
    rate: f64,
    burst: f64,
    buckets: HashMap<IpAddr, (f64, f64)>,
    /// Requests refused so far.
    pub refused: u64,
}

impl RateLimiter {
    /// A limiter.
    pub fn new(rate: f64, burst: usize) -> RateLimiter {
        RateLimiter { rate, burst: burst.max(1) as f64, buckets: HashMap::new(), refused: 0 }
    }

    /// Whether a request from `ip` at time `now` (s, any monotonic clock) may go on.
    pub fn allow(&mut self, ip: IpAddr, now: f64) -> bool {
        if self.buckets.len() >= MAX_CLIENTS && !self.buckets.contains_key(&ip) {
            let (rate, burst) = (self.rate, self.burst);
            self.buckets.retain(|_, (tokens, at)| *tokens + (now - *at) * rate < burst);
            if self.buckets.len() >= MAX_CLIENTS {
                self.buckets.clear();
            }
        }
        let (tokens, at) = self.buckets.entry(ip).or_insert((self.burst, now));
        *tokens = (*tokens + (now - *at).max(0.0) * self.rate).min(self.burst);
        *at = now;
        if *tokens >= 1.0 {
            *tokens -= 1.0;
            true
        } else {
            self.refused += 1;
            false
        }
    }

    /// Clients tracked now.
    pub fn clients(&self) -> usize {
        self.buckets.len()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bucket_allows_the_burst_then_the_rate() {
        let ip: IpAddr = "127.0.0.1".parse().unwrap();
        let mut l = RateLimiter::new(10.0, 5);
        // 5 at once, then refused until 0.1 s has refilled one.
        assert_eq!((0..8).filter(|_| l.allow(ip, 0.0)).count(), 5);
        assert!(!l.allow(ip, 0.05));
        assert!(l.allow(ip, 0.15));
        assert!(!l.allow(ip, 0.15));
        // One second idle refills to the burst, not beyond.
        assert_eq!((0..20).filter(|_| l.allow(ip, 10.0)).count(), 5);
        assert_eq!(l.refused, 3 + 1 + 1 + 15);
        // Another client has its own bucket.
        assert!(l.allow("127.0.0.2".parse().unwrap(), 10.0));
    }

    #[test]
    fn the_client_table_is_bounded() {
        let mut l = RateLimiter::new(1.0, 2);
        for i in 0..(MAX_CLIENTS as u32 + 500) {
            let ip = IpAddr::from(std::net::Ipv4Addr::from(0x0a00_0000 + i));
            l.allow(ip, i as f64 * 1e-3);
        }
        assert!(l.clients() <= MAX_CLIENTS);
    }

    #[test]
    fn the_token_must_match_whole() {
        let t = Token { secret: "s3cret-token".into() };
        assert!(t.admits(Some(b"Bearer s3cret-token")));
        // RFC 9110 section 11.1: the scheme is case-insensitive.
        assert!(t.admits(Some(b"bearer s3cret-token")));
        assert!(t.admits(Some(b"BEARER  s3cret-token")));
        for bad in [
            &b"Bearer s3cret-toke"[..],
            b"Bearer s3cret-token2",
            b"Bearers3cret-token",
            b"Basic s3cret-token",
            b"s3cret-token",
            b"",
        ] {
            assert!(!t.admits(Some(bad)), "{}", String::from_utf8_lossy(bad));
        }
        assert!(!t.admits(None));
    }

    #[cfg(unix)]
    #[test]
    fn a_token_file_readable_by_others_is_flagged_and_an_empty_one_refused() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("token");
        std::fs::write(&p, "abc\n").unwrap();
        std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o600)).unwrap();
        let (t, w) = Token::load(&p).unwrap();
        assert!(t.admits(Some(b"Bearer abc")) && w.is_none());
        std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o644)).unwrap();
        assert_eq!(Token::load(&p).unwrap().1, Some(TokenWarning::ReadableByOthers(0o644)));
        std::fs::write(&p, "  \n").unwrap();
        let e = Token::load(&p).unwrap_err();
        assert!(e.contains("holds no token") && e.contains("http.token_file"), "{e}");
    }
}
