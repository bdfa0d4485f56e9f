//! A real `startmargind` process is killed (SIGKILL) and restarted on the same port in the
//! middle of a replayed night. The SDK's watch handle reconnects with backoff, replays its last
//! known state, and drops the alerts it has already delivered: the alerts the client ends up with
//! are exactly those of an uninterrupted run (same ids, same states).

mod watch_common;

use std::collections::BTreeMap;
use std::net::TcpListener;
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_sdk::{WatchBuilder, WatchEvent, WatchHandle};
use watch_common::*;

/// The `startmargind` binary (shared helper).
fn server_binary() -> PathBuf {
    startmargin_e2e::startmargind_binary()
}

/// A free loopback port: bind port 0, note it, release it.
fn free_port() -> u16 {
    let l = TcpListener::bind("127.0.0.1:0").expect("bind");
    l.local_addr().expect("addr").port()
}

struct Process(Child);

impl Process {
    async fn start(binary: &PathBuf, port: u16) -> Self {
        let child = Command::new(binary)
            // A store of its own: no two server processes share an SQLite file.
            .env("STARTMARGIN_STORE_URL", startmargin_e2e::fresh_store_url())
            .arg("serve")
            .env("STARTMARGIN_LISTEN", format!("127.0.0.1:{port}"))
            .env("STARTMARGIN_METRICS_LISTEN", "")
            .env("STARTMARGIN_LOG_LEVEL", "warn")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("startmargind starts");
        // Ready when it accepts connections (bounded wait).
        for _ in 0..200 {
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
        self.0.kill().expect("kill");
        self.0.wait().expect("reaped");
    }
}

impl Drop for Process {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// A sentinel update the server refuses: its refusal comes after every event of the updates
/// sent before it.
fn sentinel() -> Update {
    Update::Telemetry(pb::TelemetryUpdate {
        vehicle_id: "no-such-vehicle".to_string(),
        telemetry: None,
        block_heater_on: None,
        key_off: false,
    })
}

/// Reads events until the refusal of `sequence`, collecting alerts.
async fn until_refused(
    watch: &mut WatchHandle,
    sequence: u64,
    alerts: &mut Vec<pb::Alert>,
    reconnects: &mut usize,
) {
    for _ in 0..1_000_000 {
        match watch.next_event().await.expect("watch goes on") {
            WatchEvent::Alert(a) => alerts.push(a),
            WatchEvent::Reconnecting { .. } => *reconnects += 1,
            WatchEvent::Refused { sequence: s, .. } if s == sequence => return,
            _ => {}
        }
    }
    panic!("no refusal of the sentinel");
}

/// Plays the night script through the SDK; with `kill_at`, kills and restarts the server after
/// that many updates. Returns the alerts delivered, by (id, state), with counts, and how many
/// times the handle reconnected.
async fn play(binary: &PathBuf, kill_at: Option<usize>) -> (BTreeMap<(String, i32), usize>, usize) {
    let port = free_port();
    let mut server = Some(Process::start(binary, port).await);
    let mut watch = WatchBuilder::new([format!("http://127.0.0.1:{port}")])
        .backoff(Duration::from_millis(50), Duration::from_millis(400))
        .jitter_key(7)
        .start()
        .expect("watch");
    let mut alerts = Vec::new();
    let mut reconnects = 0;
    let script = night_script();
    for (n, request) in script.into_iter().enumerate() {
        if Some(n) == kill_at {
            // Everything sent so far has been answered; then the server dies mid-night.
            let s = watch.send(sentinel()).await.expect("send");
            until_refused(&mut watch, s, &mut alerts, &mut reconnects).await;
            if let Some(p) = server.take() {
                p.kill();
            }
            server = Some(Process::start(binary, port).await);
        }
        watch
            .send(request.update.expect("update"))
            .await
            .expect("send");
    }
    let s = watch.send(sentinel()).await.expect("send");
    until_refused(&mut watch, s, &mut alerts, &mut reconnects).await;
    watch.close();
    while let Some(e) = watch.next_event().await {
        match e {
            WatchEvent::Alert(a) => alerts.push(a),
            WatchEvent::Reconnecting { .. } => reconnects += 1,
            _ => {}
        }
    }
    drop(server);
    let mut seen = BTreeMap::new();
    for a in alerts {
        *seen.entry((a.alert_id, a.state)).or_insert(0) += 1;
    }
    (seen, reconnects)
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn a_killed_and_restarted_server_loses_and_duplicates_no_alert() {
    let binary = server_binary();
    let (uninterrupted, calm) = play(&binary, None).await;
    assert_eq!(calm, 0);
    // Kill after the vehicles, the first telemetry rounds and the cold forecast.
    let (interrupted, reconnects) = play(&binary, Some(night_script().len() * 3 / 5)).await;
    assert!(reconnects >= 1, "the handle reconnected");
    println!(
        "{} alert events uninterrupted, {} with a restart ({reconnects} reconnect attempts)",
        uninterrupted.values().sum::<usize>(),
        interrupted.values().sum::<usize>()
    );
    assert!(!uninterrupted.is_empty());
    assert_eq!(interrupted, uninterrupted);
}
