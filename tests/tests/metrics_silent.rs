//! Silent and slow clients on the metrics port cannot block `/healthz`: with 40 connections open
//! that never send a byte, `/healthz` answers at once (while those 40 are still open); with more
//! silent connections than the endpoint serves at once, it answers after the header timeout
//! frees their slots; a silent or half-sent request is closed by the server after that timeout.

use std::net::SocketAddr;
use std::time::{Duration, Instant};

use startmargin_e2e::TestServer;
use startmargin_service::metrics_http::{CONNECTION_TIMEOUT, HEADER_READ_TIMEOUT, MAX_CONNECTIONS};
use tokio::io::{AsyncReadExt as _, AsyncWriteExt as _};
use tokio::net::TcpStream;

/// `GET /healthz` on a fresh connection: (status line, body).
async fn healthz(addr: SocketAddr) -> (String, String) {
    let mut stream = TcpStream::connect(addr).await.expect("connect");
    stream
        .write_all(format!("GET /healthz HTTP/1.1\r\nhost: {addr}\r\n\r\n").as_bytes())
        .await
        .expect("write");
    let mut response = String::new();
    stream
        .read_to_string(&mut response)
        .await
        .expect("read to close");
    let (head, body) = response.split_once("\r\n\r\n").expect("a head");
    (
        head.lines().next().unwrap_or_default().to_string(),
        body.to_string(),
    )
}

/// Whether the server still holds `stream` open: no end of stream and no data yet.
fn still_open(stream: &TcpStream) -> bool {
    let mut buf = [0_u8; 1];
    matches!(stream.try_read(&mut buf), Err(e) if e.kind() == std::io::ErrorKind::WouldBlock)
}

/// Reads until the server closes `stream`; true if it did within `bound`.
async fn closed_within(stream: &mut TcpStream, bound: Duration) -> bool {
    let mut sink = Vec::new();
    matches!(
        tokio::time::timeout(bound, stream.read_to_end(&mut sink)).await,
        Ok(Ok(_)) | Ok(Err(_))
    )
}

#[tokio::test]
async fn forty_silent_connections_do_not_block_healthz() {
    let t = TestServer::start().await.expect("server");
    let addr = t.server.metrics_addr.expect("metrics on by default");

    let mut silent = Vec::new();
    for _ in 0..40 {
        silent.push(TcpStream::connect(addr).await.expect("connect"));
    }
    // A slow client that sends half a request head and stalls.
    let mut half = TcpStream::connect(addr).await.expect("connect");
    half.write_all(b"GET /metr").await.expect("write");

    let (status, body) = healthz(addr).await;
    assert_eq!(
        (status.as_str(), body.as_str()),
        ("HTTP/1.1 200 OK", "serving\n")
    );
    // Answered while every silent connection was still held: none had to time out first.
    let open = silent.iter().filter(|s| still_open(s)).count();
    assert_eq!(
        open,
        silent.len(),
        "silent connections closed before /healthz answered"
    );

    // The server closes the silent and the half-sent connections after the header timeout.
    let bound = HEADER_READ_TIMEOUT + Duration::from_secs(5);
    assert!(
        closed_within(&mut half, bound).await,
        "half request kept open"
    );
    for s in &mut silent {
        assert!(closed_within(s, bound).await, "silent connection kept open");
    }
    t.shutdown().await.expect("drains");
}

#[tokio::test]
async fn more_silent_connections_than_slots_only_delay_healthz() {
    let t = TestServer::start().await.expect("server");
    let addr = t.server.metrics_addr.expect("metrics on by default");

    let mut silent = Vec::new();
    for _ in 0..MAX_CONNECTIONS + 20 {
        silent.push(TcpStream::connect(addr).await.expect("connect"));
    }
    let started = Instant::now();
    let (status, _) = healthz(addr).await;
    let waited = started.elapsed();
    assert_eq!(status, "HTTP/1.1 200 OK");
    // Generous bound: one round of header timeouts frees the slots; never an endless block.
    assert!(
        waited < 2 * HEADER_READ_TIMEOUT + CONNECTION_TIMEOUT,
        "/healthz waited {waited:?} behind silent connections"
    );
    eprintln!(
        "metrics endpoint: /healthz behind {} silent connections answered after {waited:?}",
        silent.len()
    );
    drop(silent);
    t.shutdown().await.expect("drains");
}
