//! Streams of many small items flow at the server's pace with no connection-level error: an
//! AssessFleet of 20,000 vehicles (about 100 bytes each, one HTTP/2 DATA frame per item) and a
//! WatchFleet of 5,000 unpaced vehicle upserts through a stock Python grpcio client, and the
//! same fleet through the SDK. Before the server's flow-control settings were fixed, such a
//! stream was cut off after a few thousand items with GOAWAY ENHANCE_YOUR_CALM
//! "too_many_data_frames" (h2's small-frame budget met the server's back-pressure).
//!
//! The Python client is `tests/python/stream_client.py`, run with the interpreter of
//! `.ci/tools/venv` (created by `.ci/run` with pinned grpcio and grpcio-tools); the stubs are
//! generated from `proto/` at test time. Without that venv the Python parts are skipped with a
//! printed reason. `STARTMARGIN_STREAM_VEHICLES` sets the fleet size for a one-off larger run.

use std::path::PathBuf;
use std::process::Command;
use std::time::{Duration, Instant};

use startmargin_e2e::{TestServer, loopback_config, sample_forecast, sample_night_in_zone};
use startmargin_sdk::{Client, FleetItem, FleetOutcome, Forecast, VehicleNight};
use tokio_stream::StreamExt as _;

/// Vehicles of the fleet stream: several times the old failure point (3,000–5,400 results).
const FLEET_VEHICLES: usize = 20_000;
/// Unpaced vehicle upserts of the watch stream.
const WATCH_VEHICLES: usize = 5_000;

fn fleet_vehicles() -> usize {
    std::env::var("STARTMARGIN_STREAM_VEHICLES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(FLEET_VEHICLES)
}

fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// The venv's Python, or `None` (with the reason printed) when `.ci/run` has not created it.
fn venv_python() -> Option<PathBuf> {
    let python = repo_root().join(".ci/tools/venv/bin/python");
    let ready = python.is_file()
        && Command::new(&python)
            .args(["-c", "import grpc, grpc_tools"])
            .status()
            .is_ok_and(|s| s.success());
    if !ready {
        println!(
            "skipped: {} with grpcio and grpcio-tools is missing (bash .ci/run creates it)",
            python.display()
        );
        return None;
    }
    Some(python)
}

/// Runs the Python client against `addr` and returns its JSON summary.
fn python_client(
    python: &PathBuf,
    mode: &str,
    addr: std::net::SocketAddr,
    vehicles: usize,
) -> serde_json::Value {
    let script = repo_root().join("tests/python/stream_client.py");
    let output = Command::new(python)
        .arg(&script)
        .args([
            mode,
            "--target",
            &addr.to_string(),
            "--vehicles",
            &vehicles.to_string(),
        ])
        .output()
        .expect("run the Python client");
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        output.status.success(),
        "python client failed: {stdout}\n{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let line = stdout.lines().last().unwrap_or_default();
    println!("grpcio {mode}: {line}");
    serde_json::from_str(line).expect("the client prints one JSON line")
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn grpcio_fleet_and_watch_of_small_items_complete() {
    let Some(python) = venv_python() else {
        return;
    };
    let server = startmargin_service::spawn(loopback_config())
        .await
        .expect("server");
    let addr = server.addr;
    let vehicles = fleet_vehicles();
    let py = python.clone();
    let fleet = tokio::task::spawn_blocking(move || python_client(&py, "fleet", addr, vehicles))
        .await
        .expect("fleet client");
    assert_eq!(fleet["status"], "OK", "{fleet}");
    assert_eq!(fleet["answered"], vehicles, "{fleet}");
    assert_eq!(fleet["item_errors"], 0, "{fleet}");

    let watch =
        tokio::task::spawn_blocking(move || python_client(&python, "watch", addr, WATCH_VEHICLES))
            .await
            .expect("watch client");
    assert_eq!(watch["status"], "OK", "{watch}");
    assert_eq!(watch["answered"], WATCH_VEHICLES, "{watch}");
    assert_eq!(watch["refused"], 0, "{watch}");
    server.shutdown().await.expect("shutdown");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn sdk_fleet_of_small_items_completes() {
    let server = TestServer::start().await.expect("server");
    let client = Client::builder([format!("http://{}", server.server.addr)])
        .no_timeout()
        .build()
        .await
        .expect("client");
    let vehicles = fleet_vehicles();
    let zone = FleetItem::zone_forecast("yard", Forecast::from_pb_unchecked(sample_forecast()));
    let items = tokio_stream::iter(std::iter::once(zone).chain((0..vehicles).map(|i| {
        FleetItem::vehicle(VehicleNight::from_pb_unchecked(sample_night_in_zone(
            &format!("v{i}"),
            "yard",
        )))
    })));
    let started = Instant::now();
    let mut results = client.assess_fleet(items);
    let mut assessed = 0usize;
    while let Some(result) = results.next().await {
        let result = result.expect("the stream itself never fails");
        match result.outcome {
            Ok(FleetOutcome::Assessment(_)) => assessed += 1,
            other => panic!("{}: {other:?}", result.item_id),
        }
    }
    let elapsed = started.elapsed();
    println!(
        "sdk fleet: {assessed} vehicles in {:.1} s ({:.0} items/s)",
        elapsed.as_secs_f64(),
        assessed as f64 / elapsed.as_secs_f64()
    );
    assert_eq!(assessed, vehicles);
    // A generous bound, only against a hang.
    assert!(elapsed < Duration::from_secs(1_800), "{elapsed:?}");
    server.shutdown().await.expect("shutdown");
}
