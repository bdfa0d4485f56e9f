//! The Prometheus endpoint on its own port: `GET /metrics` answers 200 with the text exposition
//! (content type `text/plain; version=0.0.4`), and the calls made through gRPC show up in it by
//! RPC and status code; other paths get 404; `/healthz` turns 503 once the server drains.

use std::net::SocketAddr;

use startmargin_e2e::{TestServer, sample_night};
use startmargin_proto::v1 as pb;
use tokio::io::{AsyncReadExt as _, AsyncWriteExt as _};
use tokio::net::TcpStream;

/// Sends a one-line HTTP/1.1 GET and returns (status line, head, body).
async fn get(addr: SocketAddr, path: &str) -> (String, String, String) {
    let mut stream = TcpStream::connect(addr).await.expect("connect to metrics");
    let request = format!("GET {path} HTTP/1.1\r\nhost: {addr}\r\n\r\n");
    stream.write_all(request.as_bytes()).await.expect("write");
    let mut response = String::new();
    stream
        .read_to_string(&mut response)
        .await
        .expect("read to close");
    let (head, body) = response.split_once("\r\n\r\n").expect("a head");
    let status = head.lines().next().unwrap_or_default().to_string();
    (status, head.to_string(), body.to_string())
}

/// The value of a sample line `name{labels} value` in the exposition, 0 when absent.
fn sample(text: &str, series: &str) -> f64 {
    text.lines()
        .find_map(|l| l.strip_prefix(series)?.trim().parse().ok())
        .unwrap_or(0.0)
}

#[tokio::test]
async fn metrics_endpoint_serves_call_counts_by_code() {
    let t = TestServer::start().await.expect("server");
    let addr = t.server.metrics_addr.expect("metrics on by default");
    assert!(addr.ip().is_loopback());

    let ok_series = "startmargin_calls_total{rpc=\"AssessVehicle\",code=\"Ok\"}";
    let bad_series = "startmargin_calls_total{rpc=\"AssessVehicle\",code=\"InvalidArgument\"}";
    let (_, _, before) = get(addr, "/metrics").await;

    let mut client = t.client();
    for i in 0..3 {
        client
            .assess_vehicle(pb::AssessVehicleRequest {
                night: Some(sample_night(&format!("truck-{i}"))),
            })
            .await
            .expect("assessed");
    }
    let bad = client
        .assess_vehicle(pb::AssessVehicleRequest { night: None })
        .await
        .expect_err("no night");
    assert_eq!(bad.code(), tonic::Code::InvalidArgument);

    let (status, head, after) = get(addr, "/metrics").await;
    assert_eq!(status, "HTTP/1.1 200 OK");
    assert!(
        head.to_ascii_lowercase()
            .contains("content-type: text/plain; version=0.0.4"),
        "{head}"
    );
    // Counters are process-wide and other tests in this binary may add to them: at least ours.
    assert!(
        sample(&after, ok_series) - sample(&before, ok_series) >= 3.0,
        "{after}"
    );
    assert!(
        sample(&after, bad_series) - sample(&before, bad_series) >= 1.0,
        "{after}"
    );
    assert!(after.contains("# TYPE startmargin_call_duration_seconds histogram"));
    assert!(after.contains("startmargin_call_duration_seconds_count{rpc=\"AssessVehicle\"}"));

    let (status, _, _) = get(addr, "/").await;
    assert_eq!(status, "HTTP/1.1 404 Not Found");
    let (status, _, body) = get(addr, "/healthz").await;
    assert_eq!(
        (status.as_str(), body.as_str()),
        ("HTTP/1.1 200 OK", "serving\n")
    );

    t.shutdown().await.expect("drains");
    // After the stop the endpoint is closed.
    assert!(
        TcpStream::connect(addr).await.is_err(),
        "metrics port still open"
    );
}

#[tokio::test]
async fn metrics_can_be_turned_off() {
    let config = startmargin_service::Config {
        metrics_listen: String::new(),
        ..startmargin_e2e::loopback_config()
    };
    let t = TestServer::start_with(config).await.expect("server");
    assert!(t.server.metrics_addr.is_none());
    t.shutdown().await.expect("drains");
}
