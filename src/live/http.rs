//! The HTTP edge: `/metrics` (Prometheus text), `/healthz`, `/readyz`, the dashboard page
//! at `/` with its embedded assets, `/api/snapshot` (the latest snapshot as JSON) and
//! `/api/stream` (server-sent events, one `snapshot` event per published snapshot), served
//! by axum on a small tokio runtime of its own, which also turns SIGINT and SIGTERM into the
//! stop flag.
//!
//! Every request passes one guard first: a header larger than `http.max_request_bytes` gets
//! 431 and a declared body larger than it 413; a client past its token bucket
//! (`http.requests_per_s`, `http.burst`) gets 429; with `http.token_file`, `/metrics` and
//! `/api/*` need `Authorization: Bearer <token>` (401 otherwise). The page's assets,
//! `/healthz` and `/readyz` carry no data and stay open. At most `http.max_streams` event
//! streams are open at once (503 beyond). Only GET is routed (405 for anything else).

use std::net::SocketAddr;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Instant;

use axum::extract::{ConnectInfo, Request, State};
use axum::http::{header, StatusCode};
use axum::middleware::Next;
use axum::response::sse::{Event, KeepAlive, Sse};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use axum::Router;

use super::access::{RateLimiter, Token, TokenWarning};
use super::watch::Shared;
use crate::config::HttpParams;

/// A running server.
pub struct Server {
    /// The bound address.
    pub addr: SocketAddr,
    shutdown: Option<tokio::sync::oneshot::Sender<()>>,
    closing: tokio::sync::watch::Sender<bool>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Server {
    /// Stops the server and waits for it: event streams end first, so the graceful
    /// shutdown has no open response to wait for.
    pub fn stop(mut self) {
        self.closing.send_replace(true);
        if let Some(tx) = self.shutdown.take() {
            let _ = tx.send(());
        }
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

async fn metrics(State(s): State<AppState>) -> impl IntoResponse {
    let text = s.shared.metrics_text(super::zenoh_io::wall_now());
    ([(header::CONTENT_TYPE, "text/plain; version=0.0.4; charset=utf-8")], text)
}

/// The dashboard's assets, embedded so the page works with no network.
const INDEX_HTML: &str = include_str!("dashboard/index.html");
const APP_JS: &str = include_str!("dashboard/app.js");
const APP_CSS: &str = include_str!("dashboard/app.css");

#[derive(Clone)]
struct AppState {
    shared: Arc<Shared>,
    closing: tokio::sync::watch::Receiver<bool>,
    guard: Arc<Guard>,
}

/// What every request is checked against.
struct Guard {
    token: Option<Token>,
    limits: HttpParams,
    /// Buckets of requests that carry no valid token (or of every request without one).
    limiter: Mutex<RateLimiter>,
    /// Buckets of requests that carry the token: a local flood of anonymous requests
    /// cannot starve the authenticated scraper.
    auth_limiter: Mutex<RateLimiter>,
    streams: AtomicUsize,
    epoch: Instant,
}

/// Counts an open event stream; the count goes down when the stream is dropped.
struct StreamSlot(Arc<Guard>);

impl Drop for StreamSlot {
    fn drop(&mut self) {
        self.0.streams.fetch_sub(1, Ordering::SeqCst);
    }
}

fn refuse(code: StatusCode, why: &'static str) -> Response {
    (code, why).into_response()
}

async fn check_request(
    State(s): State<AppState>,
    ConnectInfo(peer): ConnectInfo<SocketAddr>,
    req: Request,
    next: Next,
) -> Response {
    let g = &s.guard;
    let max = g.limits.max_request_bytes;
    let header_bytes: usize =
        req.headers().iter().map(|(k, v)| k.as_str().len() + v.len() + 4).sum::<usize>()
            + req.uri().to_string().len();
    if header_bytes > max {
        return refuse(StatusCode::REQUEST_HEADER_FIELDS_TOO_LARGE, "request header too large\n");
    }
    let declared = req
        .headers()
        .get(header::CONTENT_LENGTH)
        .and_then(|v| v.to_str().ok()?.parse::<u64>().ok())
        .unwrap_or(0);
    if declared > max as u64 || req.headers().contains_key(header::TRANSFER_ENCODING) {
        return refuse(StatusCode::PAYLOAD_TOO_LARGE, "request body too large\n");
    }
    let path = req.uri().path();
    // Health and readiness carry no data and cost nothing: outside every bucket, so that
    // a flood cannot make an orchestrator think the monitor is down.
    if path == "/healthz" || path == "/readyz" {
        return next.run(req).await;
    }
    let authenticated = g
        .token
        .as_ref()
        .is_some_and(|t| t.admits(req.headers().get(header::AUTHORIZATION).map(|v| v.as_bytes())));
    let limiter = if authenticated { &g.auth_limiter } else { &g.limiter };
    let allowed =
        limiter.lock().map(|mut l| l.allow(peer.ip(), g.epoch.elapsed().as_secs_f64())).unwrap_or(true);
    if !allowed {
        let mut r = refuse(StatusCode::TOO_MANY_REQUESTS, "too many requests\n");
        r.headers_mut().insert(header::RETRY_AFTER, header::HeaderValue::from_static("1"));
        return r;
    }
    let protected = path == "/metrics" || path.starts_with("/api/");
    if protected && g.token.is_some() && !authenticated {
        let mut r = refuse(StatusCode::UNAUTHORIZED, "a bearer token is required\n");
        r.headers_mut().insert(header::WWW_AUTHENTICATE, header::HeaderValue::from_static("Bearer"));
        return r;
    }
    next.run(req).await
}

async fn snapshot(State(s): State<AppState>) -> impl IntoResponse {
    let body = s.shared.snapshot.borrow().clone();
    ([(header::CONTENT_TYPE, "application/json"), (header::CACHE_CONTROL, "no-store")], body.to_string())
}

async fn stream(State(s): State<AppState>) -> Response {
    if s.guard.streams.fetch_add(1, Ordering::SeqCst) >= s.guard.limits.max_streams {
        s.guard.streams.fetch_sub(1, Ordering::SeqCst);
        return refuse(StatusCode::SERVICE_UNAVAILABLE, "too many open streams\n");
    }
    let slot = StreamSlot(s.guard.clone());
    let rx = s.shared.snapshot.subscribe();
    let events =
        futures_util::stream::unfold((rx, s.closing, slot), |(mut rx, mut closing, slot)| async move {
            if *closing.borrow() {
                return None;
            }
            tokio::select! {
                r = rx.changed() => r.ok()?,
                _ = closing.changed() => return None,
            }
            let data = rx.borrow_and_update().clone();
            let ev = Event::default().event("snapshot").data(&*data);
            Some((Ok::<Event, std::convert::Infallible>(ev), (rx, closing, slot)))
        });
    Sse::new(events).keep_alive(KeepAlive::default()).into_response()
}

fn asset(ctype: &'static str, body: &'static str) -> impl IntoResponse {
    ([(header::CONTENT_TYPE, ctype), (header::CACHE_CONTROL, "no-cache")], body)
}

/// Healthy unless the engine has made no progress for `live.stall_after` while messages
/// wait for it (then its gauges are old and its alerts late).
async fn health(State(s): State<AppState>) -> Response {
    match s.shared.liveness.stalled() {
        None => (StatusCode::OK, "ok\n").into_response(),
        Some(idle) => {
            let n = s.shared.liveness.queue_len();
            let body =
                format!("stalled: the engine made no progress for {idle:.1} s with {n} messages waiting\n");
            (StatusCode::SERVICE_UNAVAILABLE, body).into_response()
        }
    }
}

async fn ready(State(s): State<AppState>) -> impl IntoResponse {
    if s.shared.ready.load(Ordering::SeqCst) {
        (StatusCode::OK, "ready\n")
    } else {
        (StatusCode::SERVICE_UNAVAILABLE, "subscriptions not live yet\n")
    }
}

/// Reads the token file, if any, before anything binds; warns (without the token) when
/// others may read the file.
fn load_token(limits: &HttpParams) -> Result<Option<Token>, String> {
    let Some(f) = &limits.token_file else { return Ok(None) };
    let (token, warning) = Token::load(std::path::Path::new(f))?;
    if let Some(TokenWarning::ReadableByOthers(mode)) = warning {
        tracing::warn!(file = %f, mode = format!("{mode:o}"), "token file is readable by others");
        errln!("plumbline: warning: http.token_file {f} is readable by others (mode {mode:o}); chmod 600 it");
    }
    Ok(Some(token))
}

/// Accepts connections until `shutdown`: at most `cap` open at once (one beyond is closed
/// at once, before it costs more than its descriptor), each with hyper's header-read
/// timeout, which also closes a kept-alive connection that sends nothing for that long
/// and a client that trickles its header a byte at a time. On `closing` each connection
/// finishes its request in flight and closes.
async fn serve(
    listener: tokio::net::TcpListener,
    app: Router,
    cap: usize,
    header_timeout: std::time::Duration,
    mut shutdown: tokio::sync::oneshot::Receiver<()>,
    closing: tokio::sync::watch::Receiver<bool>,
) {
    use tower::Service as _;
    let slots = Arc::new(tokio::sync::Semaphore::new(cap));
    loop {
        let (stream, peer) = tokio::select! {
            _ = &mut shutdown => break,
            r = listener.accept() => match r {
                Ok(x) => x,
                Err(e) => {
                    // Out of descriptors or a reset before accept: pause, then go on.
                    tracing::warn!(error = %e, "accepting an HTTP connection failed");
                    tokio::time::sleep(std::time::Duration::from_millis(50)).await;
                    continue;
                }
            },
        };
        let Ok(slot) = slots.clone().try_acquire_owned() else {
            tracing::warn!(%peer, cap, "HTTP connection cap reached: connection closed");
            drop(stream);
            continue;
        };
        let router = app.clone();
        let svc = hyper::service::service_fn(move |mut req: hyper::Request<hyper::body::Incoming>| {
            req.extensions_mut().insert(ConnectInfo(peer));
            let mut router = router.clone();
            async move { router.call(req).await }
        });
        let mut closing = closing.clone();
        tokio::spawn(async move {
            let conn = hyper::server::conn::http1::Builder::new()
                .timer(hyper_util::rt::TokioTimer::new())
                .header_read_timeout(header_timeout)
                .serve_connection(hyper_util::rt::TokioIo::new(stream), svc);
            let mut conn = std::pin::pin!(conn);
            tokio::select! {
                _ = conn.as_mut() => {}
                _ = until_closing(&mut closing) => {
                    conn.as_mut().graceful_shutdown();
                    let _ = conn.await;
                }
            }
            drop(slot);
        });
    }
}

/// Resolves once the server is closing (never, if the sender is gone without closing).
async fn until_closing(closing: &mut tokio::sync::watch::Receiver<bool>) {
    loop {
        if *closing.borrow_and_update() {
            return;
        }
        if closing.changed().await.is_err() {
            std::future::pending::<()>().await;
        }
    }
}

/// Binds `listen` (fails before anything else starts) and serves in the background.
/// SIGINT and SIGTERM set `stop`.
pub fn start(
    listen: &str,
    limits: &HttpParams,
    shared: Arc<Shared>,
    stop: Arc<AtomicBool>,
) -> Result<Server, String> {
    let token = load_token(limits)?;
    let has_token = token.is_some();
    let guard = Arc::new(Guard {
        token,
        limits: limits.clone(),
        limiter: Mutex::new(RateLimiter::new(limits.requests_per_s, limits.burst)),
        auth_limiter: Mutex::new(RateLimiter::new(limits.requests_per_s, limits.burst)),
        streams: AtomicUsize::new(0),
        epoch: Instant::now(),
    });
    let std_listener = std::net::TcpListener::bind(listen).map_err(|e| {
        if e.kind() == std::io::ErrorKind::AddrInUse {
            format!(
                "binding {listen}: the port is taken by another program; set http.listen to another address (--set http.listen=127.0.0.1:0 takes any free port)"
            )
        } else {
            format!("binding {listen} (http.listen): {e}")
        }
    })?;
    std_listener.set_nonblocking(true).map_err(|e| e.to_string())?;
    let addr = std_listener.local_addr().map_err(|e| e.to_string())?;
    if !addr.ip().is_loopback() && !has_token {
        tracing::warn!(%addr, "HTTP listens beyond loopback without a token");
        errln!(
            "plumbline: warning: http.listen {addr} is reachable beyond this machine and http.token_file is not set: anyone who can reach it can read /metrics and the dashboard"
        );
    }
    // Descriptors kept for zenoh's sockets, the recorder, the journal and the rest.
    let max_connections = super::access::connection_cap(limits.max_connections, 64);
    let header_timeout = std::time::Duration::from_secs_f64(limits.header_timeout);
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let (closing, closing_rx) = tokio::sync::watch::channel(false);
    let closing_conns = closing_rx.clone();
    let state = AppState { shared, closing: closing_rx, guard };
    let thread = std::thread::Builder::new()
        .name("plumbline-http".into())
        .spawn(move || {
            let rt = match tokio::runtime::Builder::new_multi_thread().worker_threads(1).enable_all().build()
            {
                Ok(rt) => rt,
                Err(e) => {
                    errln!("plumbline: HTTP runtime: {e}");
                    return;
                }
            };
            rt.block_on(async move {
                let sig_stop = stop.clone();
                tokio::spawn(async move {
                    let term = async {
                        #[cfg(unix)]
                        if let Ok(mut s) =
                            tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate())
                        {
                            s.recv().await;
                            return;
                        }
                        std::future::pending::<()>().await
                    };
                    tokio::select! {
                        _ = tokio::signal::ctrl_c() => {}
                        _ = term => {}
                    }
                    tracing::info!("signal received: shutting down");
                    sig_stop.store(true, Ordering::SeqCst);
                });
                let app = Router::new()
                    .route("/", get(|| async { asset("text/html; charset=utf-8", INDEX_HTML) }))
                    .route("/app.js", get(|| async { asset("text/javascript; charset=utf-8", APP_JS) }))
                    .route("/app.css", get(|| async { asset("text/css; charset=utf-8", APP_CSS) }))
                    .route("/api/snapshot", get(snapshot))
                    .route("/api/stream", get(stream))
                    .route("/metrics", get(metrics))
                    .route("/healthz", get(health))
                    .route("/readyz", get(ready))
                    .layer(axum::middleware::from_fn_with_state(state.clone(), check_request))
                    .with_state(state);
                let Ok(listener) = tokio::net::TcpListener::from_std(std_listener) else { return };
                serve(listener, app, max_connections, header_timeout, rx, closing_conns).await;
            });
        })
        .map_err(|e| e.to_string())?;
    Ok(Server { addr, shutdown: Some(tx), closing, thread: Some(thread) })
}
