//! A tiny HTTP/1.1 responder on its own port for operations: `GET /metrics` serves
//! [`crate::metrics::render`] in the Prometheus text format (version 0.0.4), `GET /healthz`
//! answers 200 while serving and 503 once the server drains (for probes where gRPC health cannot be
//! used, e.g. with TLS on the API port); anything else is 404 (405 for other methods).
//!
//! Bounded: at most [`MAX_CONNECTIONS`] connections at once (more are closed at once), request
//! heads of at most [`MAX_HEAD_BYTES`], read within [`READ_TIMEOUT`]; one request per connection.

use std::net::SocketAddr;
use std::sync::Arc;
use std::time::Duration;

use tokio::io::{AsyncReadExt as _, AsyncWriteExt as _};
use tokio::net::{TcpListener, TcpStream};
use tokio::sync::Semaphore;
use tokio::task::JoinHandle;
use tokio_util::sync::CancellationToken;
use tracing::{debug, info};

/// Connections served at once.
pub const MAX_CONNECTIONS: usize = 32;
/// Longest request head accepted, bytes.
pub const MAX_HEAD_BYTES: usize = 8 * 1024;
/// Time allowed to read a request head.
pub const READ_TIMEOUT: Duration = Duration::from_secs(5);
/// Content type of the exposition.
pub const CONTENT_TYPE: &str = "text/plain; version=0.0.4; charset=utf-8";

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
    let task = tokio::spawn(async move {
        loop {
            let accepted = tokio::select! {
                () = stop.cancelled() => return,
                accepted = listener.accept() => accepted,
            };
            let Ok((stream, _)) = accepted else {
                // Accept errors (e.g. out of descriptors) are transient; do not spin.
                tokio::time::sleep(Duration::from_millis(50)).await;
                continue;
            };
            let Ok(permit) = slots.clone().try_acquire_owned() else {
                drop(stream);
                continue;
            };
            let draining = draining.clone();
            tokio::spawn(async move {
                if let Err(e) = handle(stream, &draining).await {
                    debug!(error = %e, "metrics connection failed");
                }
                drop(permit);
            });
        }
    });
    Ok(MetricsServer { addr, task })
}

async fn handle(mut stream: TcpStream, draining: &CancellationToken) -> std::io::Result<()> {
    let mut head = Vec::with_capacity(512);
    let mut buf = [0_u8; 1024];
    let read = tokio::time::timeout(READ_TIMEOUT, async {
        loop {
            let n = stream.read(&mut buf).await?;
            if n == 0 {
                return Ok::<bool, std::io::Error>(false);
            }
            head.extend_from_slice(&buf[..n]);
            if head.windows(4).any(|w| w == b"\r\n\r\n") {
                return Ok(true);
            }
            if head.len() > MAX_HEAD_BYTES {
                return Ok(false);
            }
        }
    })
    .await;
    let complete = matches!(read, Ok(Ok(true)));
    let (status, content_type, body) = if complete {
        respond(&head, draining.is_cancelled())
    } else {
        (
            "400 Bad Request",
            "text/plain",
            String::from("bad request\n"),
        )
    };
    let response = format!(
        "HTTP/1.1 {status}\r\ncontent-type: {content_type}\r\ncontent-length: {}\r\nconnection: close\r\n\r\n{body}",
        body.len()
    );
    stream.write_all(response.as_bytes()).await?;
    stream.shutdown().await
}

/// Status line, content type and body for a request head.
fn respond(head: &[u8], draining: bool) -> (&'static str, &'static str, String) {
    let line = head.split(|&b| b == b'\r').next().unwrap_or_default();
    let line = String::from_utf8_lossy(line);
    let mut parts = line.split(' ');
    let (method, target) = (parts.next().unwrap_or(""), parts.next().unwrap_or(""));
    let path = target.split('?').next().unwrap_or("");
    match (method, path) {
        ("GET", "/metrics") => ("200 OK", CONTENT_TYPE, crate::metrics::render()),
        ("GET", "/healthz") if draining => {
            ("503 Service Unavailable", "text/plain", "draining\n".into())
        }
        ("GET", "/healthz") => ("200 OK", "text/plain", "serving\n".into()),
        ("GET", _) => ("404 Not Found", "text/plain", "not found\n".into()),
        _ => (
            "405 Method Not Allowed",
            "text/plain",
            "method not allowed\n".into(),
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn routes() {
        let (s, ct, body) = respond(b"GET /metrics HTTP/1.1\r\nhost: x\r\n\r\n", false);
        assert_eq!(s, "200 OK");
        assert_eq!(ct, CONTENT_TYPE);
        assert!(body.contains("# TYPE startmargin_calls_total counter"));
        assert_eq!(
            respond(b"GET /metrics?x=1 HTTP/1.1\r\n\r\n", false).0,
            "200 OK"
        );
        assert_eq!(respond(b"GET / HTTP/1.1\r\n\r\n", false).0, "404 Not Found");
        assert_eq!(respond(b"GET /healthz HTTP/1.1\r\n\r\n", false).0, "200 OK");
        assert!(
            respond(b"GET /healthz HTTP/1.1\r\n\r\n", true)
                .0
                .starts_with("503")
        );
        assert!(
            respond(b"POST /metrics HTTP/1.1\r\n\r\n", false)
                .0
                .starts_with("405")
        );
    }
}
