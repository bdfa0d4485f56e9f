//! Records for the store suite: a plausible attempt and calibration state, and tenant ids
//! unique to each test run (so a shared PostgreSQL database needs no cleaning).

use std::sync::atomic::{AtomicU32, Ordering};

use startmargin_service::store::{AttemptKey, StoredAttempt, StoredCalibration, StoredOutcome};

/// A fired attempt of `vehicle` at `at_ms` with every optional reading present.
pub fn attempt(vehicle: &str, at_ms: i64) -> StoredAttempt {
    StoredAttempt {
        key: AttemptKey {
            vehicle_id: vehicle.to_string(),
            attempted_at_ms: at_ms,
        },
        archetype_id: "arch-a".to_string(),
        outcome: StoredOutcome::Fired,
        cranking_s: 2.5,
        peak_cranking_rpm: Some(182.0),
        lowest_cranking_v: Some(9.7),
        air_c: -18.5,
        coolant_c: Some(-17.0),
        preheat_s: 12.0,
        block_heater_on: false,
        predicted_no_start_probability: 0.125,
        uncalibrated_no_start_probability: 0.0625,
        predicted_margin_k: 4.75,
        calibrated_observations: 3,
        received_at_ms: at_ms + 60_000,
    }
}

/// A calibration state with thermal offset mean `offset_k` (version 0: set by the store).
pub fn calibration(offset_k: f64) -> StoredCalibration {
    StoredCalibration {
        thermal_offset_mean_k: offset_k,
        thermal_offset_sd_k: 1.5,
        cranking_log_factor_mean: -0.1,
        cranking_log_factor_sd: 0.2,
        cooldown_tau_mean_s: Some(14_400.0),
        cooldown_tau_sd_s: Some(1_800.0),
        observations: 7,
        updated_at_ms: 1_700_000_000_000,
        version: 0,
    }
}

/// Two tenant ids no other test of this run or of an earlier run uses.
pub fn tenant_ids() -> (String, String) {
    static NEXT: AtomicU32 = AtomicU32::new(0);
    let n = NEXT.fetch_add(1, Ordering::Relaxed);
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_nanos());
    let run = format!("{}-{nanos}-{n}", std::process::id());
    (format!("tenant-a-{run}"), format!("tenant-b-{run}"))
}
