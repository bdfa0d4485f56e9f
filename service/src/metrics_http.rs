//! The operations endpoint on its own port, served by hyper's HTTP/1.1 server (already in the
//! tree under tonic): `GET /metrics` serves [`crate::metrics::render`] in the Prometheus text
//! format 0.0.4, `GET /healthz` answers 200 while serving and 503 once the server drains (for
//! probes where gRPC health cannot be used, e.g. with TLS on the API port); any other path is 404,
//! any other method 405.
//!
//! Bounded so that idle or silent clients cannot starve the probes: a connection must send its
//! request head within [`HEADER_READ_TIMEOUT`] and is closed after [`CONNECTION_TIMEOUT`] in any
//! case; one request per connection; at most [`MAX_CONNECTIONS`] are served at once, and further
//! ones wait in the listen backlog (they are not refused) until a slot frees, which the timeouts
//! guarantee.

use std::convert::Infallible;
use std::net::SocketAddr;
use std::sync::Arc;
use std::time::Duration;

use http::{Method, Request, Response, StatusCode, header};
use http_body_util::Full;
use hyper::body::{Bytes, Incoming};
use hyper::server::conn::http1;
use hyper::service::service_fn;
use hyper_util::rt::{TokioIo, TokioTimer};
use tokio::net::TcpListener;
use tokio::sync::Semaphore;
use tokio::task::JoinHandle;
use tokio_util::sync::CancellationToken;
use tracing::{debug, info};

/// Connections served at once; more wait in the backlog.
pub const MAX_CONNECTIONS: usize = 256;
/// Longest request head accepted, bytes (hyper's smallest read buffer; answered with 431 beyond).
pub const MAX_HEAD_BYTES: usize = 8 * 1024;
/// Time a connection has, from its accept, to send its request head.
pub const HEADER_READ_TIMEOUT: Duration = Duration::from_secs(2);
/// Longest life of a connection, including writing the response to a slow reader.
pub const CONNECTION_TIMEOUT: Duration = Duration::from_secs(10);
/// Content type of the exposition.
pub const CONTENT_TYPE: &str = crate::metrics::CONTENT_TYPE;

/// The metrics endpoint, running until `stop` is cancelled.
#[derive(Debug)]
pub struct MetricsServer {
    /// The bound address.
    pub addr: SocketAddr,
    /// The accept loop.
    pub task: JoinHandle<()>,
}

/// Binds `addr` and serves until `stop` is cancelled; `/healthz` turns 503 when `draining` is.
pub async fn spawn(
    addr: SocketAddr,
    draining: CancellationToken,
    stop: CancellationToken,
) -> std::io::Result<MetricsServer> {
    let listener = TcpListener::bind(addr).await?;
    let addr = listener.local_addr()?;
    info!(%addr, "metrics endpoint listening");
    let slots = Arc::new(Semaphore::new(MAX_CONNECTIONS));
    let mut builder = http1::Builder::new();
    builder
        .timer(TokioTimer::new())
        .header_read_timeout(HEADER_READ_TIMEOUT)
        .max_buf_size(MAX_HEAD_BYTES)
        .keep_alive(false);
    let task = tokio::spawn(async move {
        loop {
            // Take a slot before accepting, so that a full house leaves new clients queued in
            // the backlog instead of being accepted and dropped.
            let permit = tokio::select! {
                () = stop.cancelled() => return,
                permit = slots.clone().acquire_owned() => match permit {
                    Ok(permit) => permit,
                    Err(_) => return,
                },
            };
            let accepted = tokio::select! {
                () = stop.cancelled() => return,
                accepted = listener.accept() => accepted,
            };
            let Ok((stream, _)) = accepted else {
                // Accept errors (e.g. out of descriptors) are transient; do not spin.
                tokio::time::sleep(Duration::from_millis(50)).await;
                continue;
            };
            let draining = draining.clone();
            let connection = builder.serve_connection(
                TokioIo::new(stream),
                service_fn(move |request| {
                    let draining = draining.is_cancelled();
                    async move { Ok::<_, Infallible>(respond(&request, draining)) }
                }),
            );
            tokio::spawn(async move {
                match tokio::time::timeout(CONNECTION_TIMEOUT, connection).await {
                    Ok(Ok(())) => {}
                    Ok(Err(e)) => debug!(error = %e, "metrics connection failed"),
                    Err(_) => debug!("metrics connection timed out"),
                }
                drop(permit);
            });
        }
    });
    Ok(MetricsServer { addr, task })
}

/// The response to one request.
fn respond(request: &Request<Incoming>, draining: bool) -> Response<Full<Bytes>> {
    route(request.method(), request.uri().path(), draining)
}

/// Status, content type and body for a method and path.
fn route(method: &Method, path: &str, draining: bool) -> Response<Full<Bytes>> {
    let (status, content_type, body) = match (method, path) {
        (&Method::GET, "/metrics") => (StatusCode::OK, CONTENT_TYPE, crate::metrics::render()),
        (&Method::GET, "/healthz") if draining => (
            StatusCode::SERVICE_UNAVAILABLE,
            "text/plain",
            "draining\n".into(),
        ),
        (&Method::GET, "/healthz") => (StatusCode::OK, "text/plain", "serving\n".into()),
        (&Method::GET, _) => (StatusCode::NOT_FOUND, "text/plain", "not found\n".into()),
        _ => (
            StatusCode::METHOD_NOT_ALLOWED,
            "text/plain",
            "method not allowed\n".into(),
        ),
    };
    let mut response = Response::new(Full::new(Bytes::from(body)));
    *response.status_mut() = status;
    let headers = response.headers_mut();
    headers.insert(
        header::CONTENT_TYPE,
        header::HeaderValue::from_static(content_type),
    );
    // One request per connection: say so, so that clients reading to the end do not wait.
    headers.insert(
        header::CONNECTION,
        header::HeaderValue::from_static("close"),
    );
    if status == StatusCode::METHOD_NOT_ALLOWED {
        headers.insert(header::ALLOW, header::HeaderValue::from_static("GET"));
    }
    response
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn routes() {
        let r = route(&Method::GET, "/metrics", false);
        assert_eq!(r.status(), StatusCode::OK);
        assert_eq!(r.headers()[header::CONTENT_TYPE], CONTENT_TYPE);
        assert_eq!(
            route(&Method::GET, "/", false).status(),
            StatusCode::NOT_FOUND
        );
        assert_eq!(
            route(&Method::GET, "/healthz", false).status(),
            StatusCode::OK
        );
        assert_eq!(
            route(&Method::GET, "/healthz", true).status(),
            StatusCode::SERVICE_UNAVAILABLE
        );
        let post = route(&Method::POST, "/metrics", false);
        assert_eq!(post.status(), StatusCode::METHOD_NOT_ALLOWED);
        assert_eq!(post.headers()[header::ALLOW], "GET");
    }
}
