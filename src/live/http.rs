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
    limiter: Mutex<RateLimiter>,
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
    let allowed =
        g.limiter.lock().map(|mut l| l.allow(peer.ip(), g.epoch.elapsed().as_secs_f64())).unwrap_or(true);
    if !allowed {
        let mut r = refuse(StatusCode::TOO_MANY_REQUESTS, "too many requests\n");
        r.headers_mut().insert(header::RETRY_AFTER, header::HeaderValue::from_static("1"));
        return r;
    }
    let path = req.uri().path();
    let protected = path == "/metrics" || path.starts_with("/api/");
    if let (true, Some(t)) = (protected, &g.token) {
        if !t.admits(req.headers().get(header::AUTHORIZATION).map(|v| v.as_bytes())) {
            let mut r = refuse(StatusCode::UNAUTHORIZED, "a bearer token is required\n");
            r.headers_mut().insert(header::WWW_AUTHENTICATE, header::HeaderValue::from_static("Bearer"));
            return r;
        }
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

/// Binds `listen` (fails before anything else starts) and serves in the background.
/// SIGINT and SIGTERM set `stop`.
pub fn start(
    listen: &str,
    limits: &HttpParams,
    shared: Arc<Shared>,
    stop: Arc<AtomicBool>,
) -> Result<Server, String> {
    let token = load_token(limits)?;
    let guard = Arc::new(Guard {
        token,
        limits: limits.clone(),
        limiter: Mutex::new(RateLimiter::new(limits.requests_per_s, limits.burst)),
        streams: AtomicUsize::new(0),
        epoch: Instant::now(),
    });
    let std_listener = std::net::TcpListener::bind(listen).map_err(|e| format!("binding {listen}: {e}"))?;
    std_listener.set_nonblocking(true).map_err(|e| e.to_string())?;
    let addr = std_listener.local_addr().map_err(|e| e.to_string())?;
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let (closing, closing_rx) = tokio::sync::watch::channel(false);
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
                let app = app.into_make_service_with_connect_info::<SocketAddr>();
                let _ = axum::serve(listener, app)
                    .with_graceful_shutdown(async {
                        let _ = rx.await;
                    })
                    .await;
            });
        })
        .map_err(|e| e.to_string())?;
    Ok(Server { addr, shutdown: Some(tx), closing, thread: Some(thread) })
}
