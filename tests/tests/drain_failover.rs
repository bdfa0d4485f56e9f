//! Drain and fail-over with real server processes: two `startmargind` processes on loopback, the
//! SDK's multi-endpoint client sending assessments to both, a fleet stream and a health watch on
//! the first. SIGTERM to the first: its health watch turns NOT_SERVING, its fleet stream ends with
//! UNAVAILABLE "server is draining" after the results already computed, the process exits 0 within
//! its drain deadline, and every unary call of the SDK still succeeds (retried on the second
//! process): nothing is lost. Streams are not resumed by the SDK: the caller re-sends the items
//! that got no answer on a new stream (to the second process), and each then gets its answer.
//!
//! The binary is built with `cargo build -p startmargin-service --bin startmargind` into the same
//! target folder (a no-op when it is fresh).

use std::collections::HashSet;
use std::net::{SocketAddr, TcpListener};
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use startmargin_e2e::{
    DRAINING_MESSAGE, connect, sample_night, sample_night_in_zone, vehicle_item, zone_item,
};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_sdk::{Client, VehicleNight};
use tokio::sync::mpsc;
use tokio_stream::StreamExt as _;
use tokio_stream::wrappers::ReceiverStream;
use tonic_health::pb::HealthCheckRequest;
use tonic_health::pb::health_check_response::ServingStatus;
use tonic_health::pb::health_client::HealthClient;

/// The `startmargind` binary (shared helper).
fn server_binary() -> PathBuf {
    startmargin_e2e::startmargind_binary()
}

/// A free loopback port: bind port 0, read it, release it.
fn free_port() -> u16 {
    TcpListener::bind("127.0.0.1:0")
        .and_then(|l| l.local_addr())
        .expect("a free port")
        .port()
}

/// A `startmargind` process; killed if the test fails before it exits.
struct Process {
    child: Child,
    addr: SocketAddr,
}

impl Drop for Process {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn start(binary: &PathBuf, name: &str) -> Process {
    let addr = SocketAddr::from(([127, 0, 0, 1], free_port()));
    let dir = std::env::temp_dir().join(format!("startmargin-drain-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let config = dir.join("startmargind.toml");
    std::fs::write(
        &config,
        format!(
            "listen = \"{addr}\"\nmetrics_listen = \"\"\ndrain_timeout_s = 5.0\n\
             compute_threads = 2\nlog_level = \"warn\"\n"
        ),
    )
    .expect("write config");
    let child = Command::new(binary)
        // A store of its own: no two server processes share an SQLite file.
        .env("STARTMARGIN_STORE_URL", startmargin_e2e::fresh_store_url())
        .arg("--config")
        .arg(&config)
        .arg("serve")
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::inherit())
        .spawn()
        .expect("start startmargind");
    Process { child, addr }
}

/// Waits (bounded) until the process answers health checks as SERVING.
async fn wait_serving(addr: SocketAddr) {
    for _ in 0..200 {
        if let Ok(channel) = connect(addr).await {
            let status = HealthClient::new(channel)
                .check(HealthCheckRequest::default())
                .await
                .map(|r| r.into_inner().status);
            if status.ok() == Some(ServingStatus::Serving as i32) {
                return;
            }
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    panic!("startmargind on {addr} did not come up");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn sigterm_drains_and_the_sdk_fails_over_with_nothing_lost() {
    let binary = server_binary();
    let mut a = start(&binary, "a");
    let b = start(&binary, "b");
    wait_serving(a.addr).await;
    wait_serving(b.addr).await;

    // A health watch and an open fleet stream on A.
    let channel_a = connect(a.addr).await.expect("connect to A");
    let mut watch = HealthClient::new(channel_a.clone())
        .watch(HealthCheckRequest::default())
        .await
        .expect("watch")
        .into_inner();
    let first = watch.next().await.expect("first").expect("status");
    assert_eq!(first.status, ServingStatus::Serving as i32);

    let (fleet_tx, fleet_rx) = mpsc::channel(64);
    let mut fleet = StartMarginServiceClient::new(channel_a)
        .assess_fleet(ReceiverStream::new(fleet_rx))
        .await
        .expect("fleet stream on A")
        .into_inner();
    let mut sent = Vec::new();
    fleet_tx
        .send(zone_item("z", "yard"))
        .await
        .expect("send zone");
    for i in 0..20 {
        let id = format!("item-{i}");
        fleet_tx
            .send(vehicle_item(
                &id,
                sample_night_in_zone(&format!("truck-{i:02}"), "yard"),
            ))
            .await
            .expect("send");
        sent.push(id);
    }
    let mut answered = HashSet::new();
    while answered.len() < 20 {
        let r = fleet.next().await.expect("result").expect("stream fine");
        if matches!(r.outcome, Some(Outcome::Assessment(_))) {
            answered.insert(r.item_id);
        }
    }

    // The SDK sends assessments to both processes throughout.
    let client = Client::builder([format!("http://{}", a.addr), format!("http://{}", b.addr)])
        .timeout(Duration::from_secs(10))
        .max_retries(6)
        .backoff(Duration::from_millis(20), Duration::from_millis(200))
        .jitter_key(7)
        .build()
        .await
        .expect("SDK client");
    // Four callers, 25 calls each, spanning the drain and the time after A has exited.
    let calls: Vec<_> = (0..4)
        .map(|task| {
            let client = client.clone();
            tokio::spawn(async move {
                let mut results = Vec::new();
                for i in 0..25 {
                    let id = format!("van-{task}-{i:02}");
                    let night = VehicleNight::from_pb_unchecked(sample_night(&id));
                    results.push(client.assess_vehicle(night).await.map(|a| a.vehicle_id));
                    tokio::time::sleep(Duration::from_millis(20)).await;
                }
                results
            })
        })
        .collect();
    tokio::time::sleep(Duration::from_millis(150)).await;

    // SIGTERM to A, while more items are on their way on its stream.
    let pid = a.child.id().to_string();
    let killed = Command::new("kill")
        .args(["-TERM", &pid])
        .status()
        .expect("kill");
    assert!(killed.success());
    for i in 20..30 {
        let id = format!("item-{i}");
        let night = sample_night_in_zone(&format!("truck-{i:02}"), "yard");
        if fleet_tx.send(vehicle_item(&id, night)).await.is_ok() {
            sent.push(id);
        }
    }

    // Health flips to NOT_SERVING, then the watch ends.
    let mut saw_not_serving = false;
    while let Some(update) = watch.next().await {
        match update {
            Ok(u) if u.status == ServingStatus::NotServing as i32 => saw_not_serving = true,
            Ok(_) => {}
            Err(_) => break,
        }
    }
    assert!(saw_not_serving, "health must turn NOT_SERVING on SIGTERM");

    // The fleet stream ends with UNAVAILABLE "server is draining" (after results in flight).
    let end = loop {
        match fleet.next().await {
            Some(Ok(r)) => {
                if matches!(r.outcome, Some(Outcome::Assessment(_))) {
                    answered.insert(r.item_id);
                }
            }
            Some(Err(status)) => break Some(status),
            None => break None,
        }
    };
    let end = end.expect("the stream must end with a status, not silently");
    assert_eq!(end.code(), tonic::Code::Unavailable, "{end:?}");
    assert_eq!(end.message(), DRAINING_MESSAGE);

    // A exits cleanly within its drain deadline.
    let mut exited = None;
    for _ in 0..140 {
        if let Some(status) = a.child.try_wait().expect("wait") {
            exited = Some(status);
            break;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    let exited = exited.expect("A must exit within its drain deadline");
    assert!(exited.success(), "A exited with {exited}");

    // Every unary call succeeded, through B when A was gone.
    let mut results = Vec::new();
    for task in calls {
        results.extend(task.await.expect("calls task"));
    }
    let failed: Vec<_> = results.iter().filter(|r| r.is_err()).collect();
    assert!(failed.is_empty(), "lost calls: {failed:?}");
    assert_eq!(results.len(), 100);

    // The caller re-sends the unanswered items on a new stream to B: each is answered.
    let missing: Vec<String> = sent
        .iter()
        .filter(|id| !answered.contains(*id))
        .cloned()
        .collect();
    let mut resend = vec![zone_item("z", "yard")];
    for id in &missing {
        let i: usize = id.trim_start_matches("item-").parse().expect("index");
        resend.push(vehicle_item(
            id,
            sample_night_in_zone(&format!("truck-{i:02}"), "yard"),
        ));
    }
    let on_b: Vec<pb::AssessFleetResponse> =
        StartMarginServiceClient::new(connect(b.addr).await.expect("B"))
            .assess_fleet(tokio_stream::iter(resend))
            .await
            .expect("stream on B")
            .into_inner()
            .collect::<Result<_, _>>()
            .await
            .expect("B's stream ends cleanly");
    for r in on_b {
        if matches!(r.outcome, Some(Outcome::Assessment(_))) {
            answered.insert(r.item_id);
        }
    }
    for id in &sent {
        assert!(answered.contains(id), "{id} was never answered");
    }
    eprintln!(
        "drain_failover: {} unary calls ok, {} stream items answered on A before the drain, {} re-sent to B",
        results.len(),
        sent.len() - missing.len(),
        missing.len()
    );
    drop(b);
}
