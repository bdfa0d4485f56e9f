//! Clients that never read their stream cost the server bounded memory. Each case runs a real
//! `startmargind` process (so that its resident memory is the server's alone), opens one stream,
//! sends a bounded flood without ever reading a response, and reads the process's peak resident
//! set (`VmHWM` in `/proc/<pid>/status`) against the idle server's:
//!
//! - WatchFleet refusals: telemetry for unknown vehicles with 1 MB ids, and 60,000 with 300-byte
//!   ids (over the id cap, so refused and never echoed; unread refusals stop the input);
//! - AssessFleet: 2,000 valid vehicles (unread results hold the stream's slots), and 300
//!   vehicles with 1 MB depot ids (refused per item at `vehicle.depot_id`).
//!
//! The bound asserted is generous (64 MiB above the idle server per stream); the figures measured
//! are printed (`cargo test -p startmargin-e2e --test stream_memory -- --nocapture`).

use std::net::TcpListener;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use startmargin_e2e::{at_hour, sample_night, sample_vehicle};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_proto::v1::watch_fleet_request::Update;
use tokio::sync::mpsc;
use tokio_stream::wrappers::ReceiverStream;

/// Peak resident memory a never-reading stream may add to the idle server, bytes.
const BOUND_BYTES: u64 = 64 * 1024 * 1024;
/// Longest a flood is sent for.
const FLOOD_FOR: Duration = Duration::from_secs(10);

struct Server {
    child: Child,
    port: u16,
}

impl Server {
    async fn start() -> Self {
        let port = {
            let l = TcpListener::bind("127.0.0.1:0").expect("bind");
            l.local_addr().expect("addr").port()
        };
        let child = Command::new(startmargin_e2e::startmargind_binary())
            // A store of its own: no two server processes share an SQLite file.
            .env("STARTMARGIN_STORE_URL", startmargin_e2e::fresh_store_url())
            .arg("serve")
            .env("STARTMARGIN_LISTEN", format!("127.0.0.1:{port}"))
            .env("STARTMARGIN_METRICS_LISTEN", "")
            .env("STARTMARGIN_LOG_LEVEL", "warn")
            // The update rate limit would slow the flood; the bounds under test are the others.
            .env("STARTMARGIN_WATCH_MAX_UPDATES_PER_S", "1000000")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("startmargind starts");
        let server = Self { child, port };
        for _ in 0..400 {
            if std::net::TcpStream::connect(("127.0.0.1", port)).is_ok() {
                return server;
            }
            tokio::time::sleep(Duration::from_millis(25)).await;
        }
        panic!("startmargind did not listen on {port}");
    }

    async fn client(&self) -> StartMarginServiceClient<tonic::transport::Channel> {
        StartMarginServiceClient::connect(format!("http://127.0.0.1:{}", self.port))
            .await
            .expect("connect")
    }

    /// (resident, peak resident) memory of the process, bytes.
    fn rss(&self) -> (u64, u64) {
        let status = std::fs::read_to_string(format!("/proc/{}/status", self.child.id()))
            .expect("/proc/<pid>/status");
        let kb = |key: &str| {
            status
                .lines()
                .find_map(|l| l.strip_prefix(key))
                .and_then(|v| v.trim().trim_end_matches("kB").trim().parse::<u64>().ok())
                .expect("a kB figure")
                * 1024
        };
        (kb("VmRSS:"), kb("VmHWM:"))
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// Sends `make(i)` for i in 0..n into a stream whose responses are never read, for at most
/// [`FLOOD_FOR`] (the server may stop reading: that is back-pressure). Returns how many were
/// taken by the transport.
async fn flood<T: Send + 'static>(
    n: usize,
    make: impl Fn(usize) -> T + Send + 'static,
) -> (ReceiverStream<T>, tokio::task::JoinHandle<usize>) {
    let (tx, rx) = mpsc::channel::<T>(1);
    let sender = tokio::spawn(async move {
        let until = Instant::now() + FLOOD_FOR;
        let mut sent = 0;
        for i in 0..n {
            let Ok(permit) = tokio::time::timeout_at(until.into(), tx.reserve()).await else {
                break;
            };
            let Ok(permit) = permit else { break };
            permit.send(make(i));
            sent += 1;
        }
        sent
    });
    (ReceiverStream::new(rx), sender)
}

/// Runs one never-reading stream on a fresh server and checks its peak memory.
async fn check(name: &str, open: impl AsyncFnOnce(&Server) -> usize) {
    let server = Server::start().await;
    // Warm up: one call, so that lazily built state (the model's tables…) is in the baseline.
    let mut client = server.client().await;
    client
        .assess_vehicle(pb::AssessVehicleRequest {
            night: Some(sample_night("warm-up")),
        })
        .await
        .expect("warm-up call");
    tokio::time::sleep(Duration::from_millis(200)).await;
    let (idle, idle_peak) = server.rss();
    let sent = open(&server).await;
    let (after, peak) = server.rss();
    let grown = peak.saturating_sub(idle_peak.max(idle));
    println!(
        "{name}: {sent} messages sent, idle RSS {:.1} MiB, peak {:.1} MiB (+{:.1} MiB), after cancel {:.1} MiB",
        idle as f64 / 1048576.0,
        peak as f64 / 1048576.0,
        grown as f64 / 1048576.0,
        after as f64 / 1048576.0,
    );
    assert!(
        grown < BOUND_BYTES,
        "{name}: peak RSS grew by {grown} bytes (bound {BOUND_BYTES})"
    );
    assert!(
        after < idle + BOUND_BYTES,
        "{name}: {after} bytes resident after the stream was dropped (idle {idle})"
    );
}

fn unknown_telemetry(id_bytes: usize, i: usize) -> pb::WatchFleetRequest {
    let mut vehicle_id = format!("{i:08}");
    vehicle_id.extend(std::iter::repeat_n('x', id_bytes - vehicle_id.len()));
    pb::WatchFleetRequest {
        update: Some(Update::Telemetry(pb::TelemetryUpdate {
            vehicle_id,
            telemetry: Some(pb::VehicleTelemetry {
                observed_at: Some(at_hour(1.0)),
                coolant_c: Some(40.0),
                ..Default::default()
            }),
            block_heater_on: None,
            key_off: false,
        })),
        sequence: i as u64,
    }
}

/// Opens a WatchFleet stream fed by a flood, waits for the flood to end, drops the stream.
async fn watch_flood(server: &Server, n: usize, id_bytes: usize) -> usize {
    let mut client = server.client().await;
    let (input, sender) = flood(n, move |i| unknown_telemetry(id_bytes, i)).await;
    let responses = client.watch_fleet(input).await.expect("stream opens");
    let sent = sender.await.expect("sender");
    drop(responses);
    drop(client);
    tokio::time::sleep(Duration::from_millis(500)).await;
    sent
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn watch_refusals_with_megabyte_ids_stay_bounded() {
    check("WatchFleet, 1,200 refusals with 1 MB ids", async |s| {
        watch_flood(s, 1_200, 1 << 20).await
    })
    .await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn sixty_thousand_watch_refusals_stay_bounded() {
    check("WatchFleet, 60,000 refusals with 300-byte ids", async |s| {
        watch_flood(s, 60_000, 300).await
    })
    .await;
}

/// Opens an AssessFleet stream fed by `n` vehicle items, never reads it, drops it.
async fn fleet_flood(
    server: &Server,
    n: usize,
    make: impl Fn(usize) -> pb::VehicleNight + Send + 'static,
) -> usize {
    let mut client = server.client().await;
    let (input, sender) = flood(n, move |i| pb::AssessFleetRequest {
        item_id: format!("item-{i}"),
        item: Some(pb::assess_fleet_request::Item::Vehicle(make(i))),
    })
    .await;
    let responses = client.assess_fleet(input).await.expect("stream opens");
    let sent = sender.await.expect("sender");
    drop(responses);
    drop(client);
    tokio::time::sleep(Duration::from_millis(500)).await;
    sent
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn an_unread_fleet_stream_stays_bounded() {
    check("AssessFleet, 2,000 vehicles never read", async |s| {
        fleet_flood(s, 2_000, |i| sample_night(&format!("unit-{i}"))).await
    })
    .await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn megabyte_depot_ids_are_refused_and_stay_bounded() {
    let depot_id = "d".repeat(1 << 20);
    check("AssessFleet, 300 vehicles with 1 MB depot ids", async |s| {
        fleet_flood(s, 300, move |i| pb::VehicleNight {
            depot_id: depot_id.clone(),
            vehicle: Some(sample_vehicle(&format!("unit-{i}"))),
            ..sample_night("x")
        })
        .await
    })
    .await;
}
