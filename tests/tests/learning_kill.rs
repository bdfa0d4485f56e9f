//! A real `startmargind` process on an SQLite store is killed (SIGKILL) while a client reports
//! batches of start attempts, then restarted on the same store: every attempt whose report was
//! acknowledged is there (resending it is recognised as a duplicate) and nothing acknowledged
//! is counted twice.

mod learning_common;

use std::net::TcpListener;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use learning_common::{DAY_S, attempt_at, now_s};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::attempt_result::Outcome;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;

fn free_port() -> u16 {
    let l = TcpListener::bind("127.0.0.1:0").expect("bind");
    l.local_addr().expect("addr").port()
}

struct Process(Child);

impl Process {
    async fn start(binary: &Path, port: u16, store: &Path) -> Self {
        let child = Command::new(binary)
            .arg("serve")
            .env("STARTMARGIN_LISTEN", format!("127.0.0.1:{port}"))
            .env("STARTMARGIN_METRICS_LISTEN", "")
            .env("STARTMARGIN_LOG_LEVEL", "warn")
            .env(
                "STARTMARGIN_STORE_URL",
                format!("sqlite://{}", store.display()),
            )
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("startmargind starts");
        for _ in 0..400 {
            if std::net::TcpStream::connect(("127.0.0.1", port)).is_ok() {
                return Self(child);
            }
            tokio::time::sleep(Duration::from_millis(25)).await;
        }
        let mut child = child;
        let _ = child.kill();
        let _ = child.wait();
        panic!("startmargind did not listen on {port}");
    }

    fn kill(mut self) {
        self.0.kill().expect("SIGKILL");
        self.0.wait().expect("reaped");
    }
}

impl Drop for Process {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

async fn client(port: u16) -> StartMarginServiceClient<tonic::transport::Channel> {
    let channel = startmargin_e2e::connect(format!("127.0.0.1:{port}").parse().unwrap())
        .await
        .expect("connect");
    StartMarginServiceClient::new(channel)
}

/// Batch `b`: 40 attempts of 40 vehicles on day `b` after `start_s`.
fn batch(start_s: i64, b: i64) -> Vec<pb::StartAttempt> {
    (0..40)
        .map(|v| {
            attempt_at(
                &format!("K-{v}"),
                start_s + b * DAY_S,
                -6.0,
                pb::AttemptOutcome::Fired,
            )
        })
        .collect()
}

#[tokio::test]
async fn a_killed_server_keeps_every_acknowledged_attempt() {
    let binary: PathBuf = startmargin_e2e::startmargind_binary();
    let dir = std::env::temp_dir().join(format!("startmargin-kill-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("temp dir");
    let store = dir.join("starts.db");
    let port = free_port();
    let server = Process::start(&binary, port, &store).await;
    // Thirty mornings ending yesterday, the same instants on every resend.
    let start_s = now_s() - 31 * DAY_S;

    // Report batches one after another from a task; kill the server once a few are acknowledged.
    let (acked_tx, mut acked_rx) = tokio::sync::mpsc::unbounded_channel::<i64>();
    let mut c = client(port).await;
    let reporter = tokio::spawn(async move {
        for b in 0..30 {
            match c
                .report_start_attempts(pb::ReportStartAttemptsRequest {
                    attempts: batch(start_s, b),
                })
                .await
            {
                Ok(r) => {
                    let all = r
                        .into_inner()
                        .results
                        .iter()
                        .all(|x| matches!(x.outcome, Some(Outcome::Recorded(_))));
                    assert!(all, "batch {b} recorded whole");
                    let _ = acked_tx.send(b);
                }
                Err(_) => return,
            }
        }
    });
    let mut acked = Vec::new();
    while acked.len() < 4 {
        acked.push(acked_rx.recv().await.expect("a batch is acknowledged"));
    }
    server.kill();
    let _ = reporter.await;
    while let Ok(b) = acked_rx.try_recv() {
        acked.push(b);
    }

    let server = Process::start(&binary, port, &store).await;
    let mut c = client(port).await;
    for &b in &acked {
        let results = c
            .report_start_attempts(pb::ReportStartAttemptsRequest {
                attempts: batch(start_s, b),
            })
            .await
            .expect("resent")
            .into_inner()
            .results;
        for r in &results {
            match &r.outcome {
                Some(Outcome::Recorded(rec)) => {
                    assert!(rec.duplicate, "batch {b}: an acknowledged attempt was lost")
                }
                other => panic!("{other:?}"),
            }
        }
    }
    // Each vehicle has exactly one observation per stored batch: the batch in flight at the kill
    // is either whole or absent (one transaction).
    let reliability = c
        .get_fleet_reliability(pb::GetFleetReliabilityRequest::default())
        .await
        .expect("reliability")
        .into_inner();
    let stored = reliability.attempt_count;
    assert_eq!(stored % 40, 0, "whole batches only: {stored}");
    assert!(stored >= 40 * acked.len() as u64);
    let cal = c
        .get_vehicle_calibration(pb::GetVehicleCalibrationRequest {
            vehicle_id: "K-0".into(),
            attempt_limit: 100,
        })
        .await
        .expect("read")
        .into_inner();
    assert_eq!(
        u64::from(cal.calibration.expect("calibration").observations) * 40,
        stored
    );
    server.kill();
    let _ = std::fs::remove_dir_all(&dir);
}
