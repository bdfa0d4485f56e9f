//! Connections that never complete a handshake are closed after `handshake_timeout_s`: a
//! silent TCP connection, and one that sends only part of the HTTP/2 preface; with TLS on, a
//! silent connection and one that stops inside its ClientHello. A client that completes its
//! handshake keeps its connection past that time and is served.

use std::time::{Duration, Instant};

use rcgen::{CertificateParams, KeyPair};
use startmargin_e2e::{TestServer, loopback_config};
use tokio::io::{AsyncReadExt as _, AsyncWriteExt as _};
use tokio::net::TcpStream;

const HANDSHAKE_TIMEOUT_S: f64 = 0.5;

/// Waits until the server closes `stream` (end of file or reset); the time it took.
async fn closed_after(mut stream: TcpStream) -> Duration {
    let start = Instant::now();
    let mut buf = [0u8; 1024];
    let closed = tokio::time::timeout(Duration::from_secs(20), async {
        loop {
            match stream.read(&mut buf).await {
                Ok(0) | Err(_) => break,
                // The server's own preface (SETTINGS) may come first.
                Ok(_) => continue,
            }
        }
    })
    .await;
    assert!(
        closed.is_ok(),
        "the server kept a connection without handshake open"
    );
    start.elapsed()
}

#[tokio::test]
async fn connections_without_handshake_are_closed() {
    let config = startmargin_service::Config {
        handshake_timeout_s: HANDSHAKE_TIMEOUT_S,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await.expect("server");
    let addr = server.server.addr;

    let silent = TcpStream::connect(addr).await.expect("connect");
    let mut partial = TcpStream::connect(addr).await.expect("connect");
    partial
        .write_all(b"PRI * HTTP/2.0\r\n")
        .await
        .expect("write");
    let (silent_s, partial_s) = tokio::join!(closed_after(silent), closed_after(partial));
    for (what, took) in [("silent", silent_s), ("partial preface", partial_s)] {
        assert!(
            took >= Duration::from_secs_f64(HANDSHAKE_TIMEOUT_S * 0.5),
            "{what}: closed too early ({took:?})"
        );
    }

    // The test's own channel connected at start; after the timeout it still serves.
    tokio::time::sleep(Duration::from_secs_f64(HANDSHAKE_TIMEOUT_S * 3.0)).await;
    let answer = server
        .client()
        .describe_model(startmargin_proto::v1::DescribeModelRequest {})
        .await
        .expect("a connection that completed its handshake is kept");
    assert!(!answer.into_inner().model_version.is_empty());
    server.shutdown().await.expect("shutdown");
}

#[tokio::test]
async fn tls_connections_without_handshake_are_closed() {
    let key = KeyPair::generate().expect("key");
    let cert = CertificateParams::new(vec!["localhost".to_string()])
        .expect("params")
        .self_signed(&key)
        .expect("self-signed");
    let dir = std::env::temp_dir().join(format!("startmargin-handshake-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    std::fs::write(dir.join("server.pem"), cert.pem()).expect("write");
    std::fs::write(dir.join("server.key"), key.serialize_pem()).expect("write");
    let config = startmargin_service::Config {
        handshake_timeout_s: HANDSHAKE_TIMEOUT_S,
        tls_cert_path: Some(dir.join("server.pem")),
        tls_key_path: Some(dir.join("server.key")),
        ..loopback_config()
    };
    let server = startmargin_service::spawn(config).await.expect("server");

    let silent = TcpStream::connect(server.addr).await.expect("connect");
    // A TLS handshake record announcing 512 bytes, of which only 60 come.
    let mut partial = TcpStream::connect(server.addr).await.expect("connect");
    let mut hello = vec![0x16, 0x03, 0x01, 0x02, 0x00];
    hello.extend([0x01; 60]);
    partial.write_all(&hello).await.expect("write");
    let (silent_s, partial_s) = tokio::join!(closed_after(silent), closed_after(partial));
    for (what, took) in [("silent", silent_s), ("partial ClientHello", partial_s)] {
        assert!(
            took >= Duration::from_secs_f64(HANDSHAKE_TIMEOUT_S * 0.5),
            "{what}: closed too early ({took:?})"
        );
    }
    server.shutdown().await.expect("shutdown");
    let _ = std::fs::remove_dir_all(&dir);
}
