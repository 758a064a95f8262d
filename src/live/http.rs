//! The HTTP edge: `/metrics` (Prometheus text), `/healthz`, `/readyz`, the dashboard page
//! at `/` with its embedded assets, `/api/snapshot` (the latest snapshot as JSON) and
//! `/api/stream` (server-sent events, one `snapshot` event per published snapshot), served
//! by axum on a small tokio runtime of its own, which also turns SIGINT and SIGTERM into the
//! stop flag.

use std::net::SocketAddr;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use axum::extract::State;
use axum::http::{header, StatusCode};
use axum::response::sse::{Event, KeepAlive, Sse};
use axum::response::IntoResponse;
use axum::routing::get;
use axum::Router;

use super::watch::Shared;

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
    let text = s.shared.exposition.lock().map(|x| x.text()).unwrap_or_default();
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
}

async fn snapshot(State(s): State<AppState>) -> impl IntoResponse {
    let body = s.shared.snapshot.borrow().clone();
    ([(header::CONTENT_TYPE, "application/json"), (header::CACHE_CONTROL, "no-store")], body.to_string())
}

async fn stream(State(s): State<AppState>) -> impl IntoResponse {
    let rx = s.shared.snapshot.subscribe();
    let events = futures_util::stream::unfold((rx, s.closing), |(mut rx, mut closing)| async move {
        if *closing.borrow() {
            return None;
        }
        tokio::select! {
            r = rx.changed() => r.ok()?,
            _ = closing.changed() => return None,
        }
        let data = rx.borrow_and_update().clone();
        let ev = Event::default().event("snapshot").data(&*data);
        Some((Ok::<Event, std::convert::Infallible>(ev), (rx, closing)))
    });
    Sse::new(events).keep_alive(KeepAlive::default())
}

fn asset(ctype: &'static str, body: &'static str) -> impl IntoResponse {
    ([(header::CONTENT_TYPE, ctype), (header::CACHE_CONTROL, "no-cache")], body)
}

async fn ready(State(s): State<AppState>) -> impl IntoResponse {
    if s.shared.ready.load(Ordering::SeqCst) {
        (StatusCode::OK, "ready\n")
    } else {
        (StatusCode::SERVICE_UNAVAILABLE, "subscriptions not live yet\n")
    }
}

/// Binds `listen` (fails before anything else starts) and serves in the background.
/// SIGINT and SIGTERM set `stop`.
pub fn start(listen: &str, shared: Arc<Shared>, stop: Arc<AtomicBool>) -> Result<Server, String> {
    let std_listener = std::net::TcpListener::bind(listen).map_err(|e| format!("binding {listen}: {e}"))?;
    std_listener.set_nonblocking(true).map_err(|e| e.to_string())?;
    let addr = std_listener.local_addr().map_err(|e| e.to_string())?;
    let (tx, rx) = tokio::sync::oneshot::channel::<()>();
    let (closing, closing_rx) = tokio::sync::watch::channel(false);
    let state = AppState { shared, closing: closing_rx };
    let thread = std::thread::Builder::new()
        .name("plumbline-http".into())
        .spawn(move || {
            let rt = match tokio::runtime::Builder::new_multi_thread().worker_threads(1).enable_all().build()
            {
                Ok(rt) => rt,
                Err(e) => {
                    eprintln!("plumbline: HTTP runtime: {e}");
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
                    .route("/healthz", get(|| async { "ok\n" }))
                    .route("/readyz", get(ready))
                    .with_state(state);
                let Ok(listener) = tokio::net::TcpListener::from_std(std_listener) else { return };
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
