//! Nothing acknowledged is lost when the process dies: a child process
//! (`store-commit-loop`) commits batches in a loop and prints each attempt once its commit
//! returned; the test SIGKILLs it mid-run, three times at different points, reopens the store
//! and checks that every acknowledged attempt is stored and the vehicle calibration matches
//! a whole number of batches. SQLite on a temporary file; PostgreSQL at
//! `TEST_POSTGRES_URL_FOR_STARTMARGIN` (see `store_postgres.rs`). This checks a process crash;
//! an operating-system crash is covered by the configuration (SQLite `synchronous = FULL`,
//! PostgreSQL's synchronous commit), which a test here cannot cut power to.

use std::io::{BufRead, BufReader};
use std::process::{Command, Stdio};
use std::sync::mpsc;
use std::time::Duration;

use startmargin_service::store::{AttemptKey, Store, StoreConfig};

/// Attempts per batch.
const BATCH_SIZE: u32 = 25;
/// Batches acknowledged before each kill.
const KILL_AFTER_BATCHES: [usize; 3] = [3, 11, 29];

/// Runs the helper on `url` for `tenant` and kills it after `batches` acknowledged batches;
/// returns every key it acknowledged.
fn run_and_kill(url: &str, tenant: &str, batches: usize) -> Vec<AttemptKey> {
    let mut child = Command::new(env!("CARGO_BIN_EXE_store-commit-loop"))
        .args([url, tenant, "100000", &BATCH_SIZE.to_string()])
        .stdout(Stdio::piped())
        .stderr(Stdio::inherit())
        .spawn()
        .expect("spawn the helper");
    let stdout = child.stdout.take().expect("stdout");
    let (lines_tx, lines_rx) = mpsc::channel();
    let reader = std::thread::spawn(move || {
        for line in BufReader::new(stdout).lines() {
            let Ok(line) = line else { break };
            if lines_tx.send(line).is_err() {
                break;
            }
        }
    });
    let mut acked = Vec::new();
    let wanted = batches * BATCH_SIZE as usize;
    while acked.len() < wanted {
        let line = lines_rx
            .recv_timeout(Duration::from_secs(60))
            .expect("the helper acknowledges within a minute");
        acked.push(line);
    }
    child.kill().expect("SIGKILL");
    let status = child.wait().expect("wait");
    assert!(!status.success(), "killed, not finished: {status:?}");
    // Lines already written before the kill are acknowledgements too.
    reader.join().expect("reader");
    acked.extend(lines_rx.try_iter());
    acked
        .iter()
        .map(|line| {
            let mut parts = line.split(' ');
            assert_eq!(parts.next(), Some("ack"), "{line}");
            AttemptKey {
                vehicle_id: parts.next().expect("vehicle").to_string(),
                attempted_at_ms: parts.next().expect("time").parse().expect("ms"),
            }
        })
        .collect()
}

async fn check_no_acknowledged_loss(url: &str, label: &str) {
    for (round, batches) in KILL_AFTER_BATCHES.into_iter().enumerate() {
        let tenant = format!("durability-{label}-{}-{round}", std::process::id());
        let acked = run_and_kill(url, &tenant, batches);
        assert!(acked.len() >= batches * BATCH_SIZE as usize);
        let config = StoreConfig {
            url: url.to_string(),
            ..StoreConfig::default()
        };
        let store = Store::open(&config).await.expect("reopen after SIGKILL");
        let known = store.known_attempts(&tenant, &acked).await.expect("known");
        let lost: Vec<_> = acked.iter().filter(|k| !known.contains(k)).collect();
        assert!(lost.is_empty(), "round {round}: lost {lost:?}");
        // Whole batches only: the calibration counts the attempts stored, batch by batch.
        let stored = store
            .fleet_attempts(&tenant, 0, 50_000)
            .await
            .expect("fleet");
        assert_eq!(stored.len() % BATCH_SIZE as usize, 0, "a torn batch");
        let cal = store
            .vehicle_calibration(&tenant, "loop-vehicle")
            .await
            .expect("calibration")
            .expect("written");
        assert_eq!(cal.observations as usize, stored.len());
        assert_eq!(cal.version as usize * BATCH_SIZE as usize, stored.len());
        store.close().await;
    }
}

#[tokio::test]
async fn sqlite_loses_no_acknowledged_attempt() {
    let dir = std::env::temp_dir().join(format!("startmargin-durability-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let url = format!("sqlite://{}", dir.join("starts.db").display());
    check_no_acknowledged_loss(&url, "sqlite").await;
    let _ = std::fs::remove_dir_all(&dir);
}

#[tokio::test]
async fn postgres_loses_no_acknowledged_attempt() {
    match std::env::var("TEST_POSTGRES_URL_FOR_STARTMARGIN") {
        Ok(url) if !url.is_empty() => check_no_acknowledged_loss(&url, "postgres").await,
        _ => {
            assert!(
                std::env::var_os("CI").is_none(),
                "TEST_POSTGRES_URL_FOR_STARTMARGIN is not set under CI: .ci/run starts PostgreSQL"
            );
            eprintln!(
                "PostgreSQL tests not run: TEST_POSTGRES_URL_FOR_STARTMARGIN is not set. Install the \
                 postgresql package (apt-get install postgresql), then run \
                 `. .ci/postgres.sh && start_test_postgres` before cargo test."
            );
        }
    }
}
