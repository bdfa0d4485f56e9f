//! A test helper for the store's durability test: opens the store at a URL and commits
//! batches of start attempts (with a version-checked vehicle calibration each) in a loop,
//! printing `ack VEHICLE_ID ATTEMPTED_AT_MS` for every attempt of a batch once its commit has
//! returned. The test kills it with SIGKILL mid-run and checks every acknowledged attempt is
//! stored. Not part of the server.
//!
//! Usage: `store-commit-loop URL TENANT BATCHES BATCH_SIZE`

use std::io::Write;

use anyhow::{Context, bail};
use startmargin_service::store::{
    AttemptKey, CalibrationWrite, CommitBatch, Store, StoreConfig, StoredAttempt,
    StoredCalibration, StoredOutcome,
};

fn attempt(vehicle_id: &str, attempted_at_ms: i64) -> StoredAttempt {
    StoredAttempt {
        key: AttemptKey {
            vehicle_id: vehicle_id.to_string(),
            attempted_at_ms,
        },
        archetype_id: "loop-archetype".to_string(),
        outcome: StoredOutcome::Fired,
        cranking_s: 1.5,
        peak_cranking_rpm: Some(200.0),
        lowest_cranking_v: Some(10.1),
        air_c: -12.0,
        coolant_c: None,
        preheat_s: 8.0,
        block_heater_on: true,
        predicted_no_start_probability: 0.05,
        uncalibrated_no_start_probability: 0.04,
        predicted_margin_k: 6.0,
        calibrated_observations: 0,
        received_at_ms: attempted_at_ms,
    }
}

fn calibration(observations: u32) -> StoredCalibration {
    StoredCalibration {
        thermal_offset_mean_k: 0.0,
        thermal_offset_sd_k: 2.0,
        cranking_log_factor_mean: 0.0,
        cranking_log_factor_sd: 0.3,
        cooldown_tau_mean_s: None,
        cooldown_tau_sd_s: None,
        observations,
        updated_at_ms: 0,
        version: 0,
    }
}

#[tokio::main(flavor = "current_thread")]
async fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [url, tenant, batches, batch_size] = args.as_slice() else {
        bail!("usage: store-commit-loop URL TENANT BATCHES BATCH_SIZE");
    };
    let batches: u32 = batches.parse().context("BATCHES")?;
    let batch_size: u32 = batch_size.parse().context("BATCH_SIZE")?;
    let config = StoreConfig {
        url: url.clone(),
        max_connections: 2,
        ..StoreConfig::default()
    };
    let store = Store::open(&config).await?;
    let vehicle = "loop-vehicle";
    let mut version = None;
    let mut out = std::io::stdout().lock();
    for b in 0..batches {
        let attempts: Vec<StoredAttempt> = (0..batch_size)
            .map(|i| attempt(vehicle, i64::from(b) * i64::from(batch_size) + i64::from(i)))
            .collect();
        let batch = CommitBatch {
            vehicles: vec![CalibrationWrite {
                id: vehicle.to_string(),
                expected_version: version,
                calibration: calibration((b + 1) * batch_size),
            }],
            attempts,
            archetypes: vec![],
        };
        let outcome = store.commit(tenant, &batch).await?;
        version = outcome.vehicle_versions.get(vehicle).copied();
        for a in &batch.attempts {
            writeln!(out, "ack {} {}", a.key.vehicle_id, a.key.attempted_at_ms)?;
        }
        out.flush()?;
    }
    Ok(())
}
