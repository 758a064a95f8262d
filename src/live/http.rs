//! The HTTP edge: `/metrics` (Prometheus text), `/healthz`, `/readyz`, served by axum on a
//! small tokio runtime of its own, which also turns SIGINT and SIGTERM into the stop flag.

use std::net::SocketAddr;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use axum::extract::State;
use axum::http::{header, StatusCode};
use axum::response::IntoResponse;
use axum::routing::get;
use axum::Router;

use super::watch::Shared;

/// A running server.
pub struct Server {
    /// The bound address.
    pub addr: SocketAddr,
    shutdown: Option<tokio::sync::oneshot::Sender<()>>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Server {
    /// Stops the server and waits for it.
    pub fn stop(mut self) {
        if let Some(tx) = self.shutdown.take() {
            let _ = tx.send(());
        }
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

async fn metrics(State(s): State<Arc<Shared>>) -> impl IntoResponse {
    let text = s.exposition.lock().map(|x| x.text()).unwrap_or_default();
    ([(header::CONTENT_TYPE, "text/plain; version=0.0.4; charset=utf-8")], text)
}

async fn ready(State(s): State<Arc<Shared>>) -> impl IntoResponse {
    if s.ready.load(Ordering::SeqCst) {
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
                    .route("/metrics", get(metrics))
                    .route("/healthz", get(|| async { "ok\n" }))
                    .route("/readyz", get(ready))
                    .with_state(shared);
                let Ok(listener) = tokio::net::TcpListener::from_std(std_listener) else { return };
                let _ = axum::serve(listener, app)
                    .with_graceful_shutdown(async {
                        let _ = rx.await;
                    })
                    .await;
            });
        })
        .map_err(|e| e.to_string())?;
    Ok(Server { addr, shutdown: Some(tx), thread: Some(thread) })
}
