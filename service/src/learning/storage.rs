//! Between the learning side and the store: the model's calibration to and from the store's
//! plain records, attempts to stored rows, and the store's errors as API errors.

use std::collections::{HashMap, HashSet};
use std::time::{SystemTime, UNIX_EPOCH};

use startmargin_model::learning::{AttemptOutcome, Belief, VehicleCalibration};
use startmargin_proto::v1 as pb;

use super::ingest::{Learned, States};
use crate::convert::attempts::ConvertedAttempt;
use crate::convert::timestamp;
use crate::error::ApiError;
use crate::store::{
    AttemptKey, CalibrationWrite, CommitBatch, Store, StoreError, StoredAttempt, StoredCalibration,
    StoredOutcome,
};

/// The store's key of an attempt: vehicle and attempt time in whole milliseconds.
pub(super) fn key_of(c: &ConvertedAttempt) -> AttemptKey {
    AttemptKey {
        vehicle_id: c.vehicle_id.clone(),
        attempted_at_ms: (c.attempted_at_s * 1000.0).round() as i64,
    }
}

/// Which of `keys` are stored already.
pub(super) async fn known(
    store: &Store,
    tenant: &str,
    keys: &[AttemptKey],
) -> Result<HashSet<AttemptKey>, ApiError> {
    if keys.is_empty() {
        return Ok(HashSet::new());
    }
    store
        .known_attempts(tenant, keys)
        .await
        .map_err(ApiError::from)
}

/// The states a batch starts from, with the stored versions to check at commit.
#[derive(Debug, Clone, Default)]
pub(super) struct Loaded {
    /// Vehicles and pools as stored.
    pub(super) states: States,
    /// Stored version of each vehicle calibration.
    pub vehicle_versions: HashMap<String, i64>,
    /// Stored version of each archetype pool.
    pub pool_versions: HashMap<String, i64>,
}

/// Loads the stored calibrations of the batch's vehicles and archetypes.
pub(super) async fn load_for<'a>(
    store: &Store,
    tenant: &str,
    attempts: impl Iterator<Item = &'a ConvertedAttempt>,
) -> Result<Loaded, ApiError> {
    let mut vehicles: Vec<String> = Vec::new();
    let mut archetypes: Vec<String> = Vec::new();
    for a in attempts {
        vehicles.push(a.vehicle_id.clone());
        archetypes.push(a.archetype_id.clone());
    }
    vehicles.sort();
    vehicles.dedup();
    archetypes.sort();
    archetypes.dedup();
    if vehicles.is_empty() {
        return Ok(Loaded::default());
    }
    let (v, a) = store.load(tenant, &vehicles, &archetypes).await?;
    Ok(loaded(v, a))
}

fn loaded(v: HashMap<String, StoredCalibration>, a: HashMap<String, StoredCalibration>) -> Loaded {
    let mut out = Loaded::default();
    for (id, c) in v {
        out.vehicle_versions.insert(id.clone(), c.version);
        out.states.vehicles.insert(id, from_stored(&c));
    }
    for (id, c) in a {
        out.pool_versions.insert(id.clone(), c.version);
        out.states.pools.insert(id, from_stored(&c));
    }
    out
}

/// Every calibration of a tenant (for the in-memory book).
pub(super) async fn load_states(store: &Store, tenant: &str) -> Result<States, ApiError> {
    let (v, a) = store.tenant_calibrations(tenant).await?;
    Ok(loaded(v, a).states)
}

/// Why a commit did not happen.
#[derive(Debug)]
pub(super) enum CommitError {
    /// Another writer changed one of the batch's calibrations since it was loaded.
    Concurrent,
    /// The store failed or refused.
    Store(ApiError),
}

/// Commits the learned attempts and the states they leave, in one transaction.
pub(super) async fn commit(
    store: &Store,
    tenant: &str,
    new: &[(usize, ConvertedAttempt)],
    learned: &[Result<Learned, ApiError>],
    states: &States,
    loaded: &Loaded,
) -> Result<(), CommitError> {
    let now_ms = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| d.as_millis() as i64);
    let mut batch = CommitBatch::default();
    let mut vehicles: Vec<&str> = Vec::new();
    let mut archetypes: Vec<&str> = Vec::new();
    for ((_, c), l) in new.iter().zip(learned) {
        let Ok(l) = l else { continue };
        batch.attempts.push(stored_attempt(c, l, now_ms));
        vehicles.push(&c.vehicle_id);
        archetypes.push(&c.archetype_id);
    }
    if batch.attempts.is_empty() {
        return Ok(());
    }
    vehicles.sort_unstable();
    vehicles.dedup();
    archetypes.sort_unstable();
    archetypes.dedup();
    for id in vehicles {
        if let Some(c) = states.vehicles.get(id) {
            batch.vehicles.push(CalibrationWrite {
                id: id.to_string(),
                expected_version: loaded.vehicle_versions.get(id).copied(),
                calibration: to_stored(c, now_ms),
            });
        }
    }
    for id in archetypes {
        if let Some(c) = states.pools.get(id) {
            batch.archetypes.push(CalibrationWrite {
                id: id.to_string(),
                expected_version: loaded.pool_versions.get(id).copied(),
                calibration: to_stored(c, now_ms),
            });
        }
    }
    match store.commit(tenant, &batch).await {
        Ok(_) => Ok(()),
        Err(StoreError::Concurrent { .. }) => Err(CommitError::Concurrent),
        Err(e) => Err(CommitError::Store(e.into())),
    }
}

fn stored_attempt(c: &ConvertedAttempt, l: &Learned, received_at_ms: i64) -> StoredAttempt {
    StoredAttempt {
        key: key_of(c),
        archetype_id: c.archetype_id.clone(),
        outcome: match c.observed.outcome {
            AttemptOutcome::Fired => StoredOutcome::Fired,
            AttemptOutcome::FiredAfterRetries => StoredOutcome::FiredAfterRetries,
            AttemptOutcome::DidNotFire => StoredOutcome::DidNotFire,
        },
        cranking_s: c.observed.cranking_s,
        peak_cranking_rpm: c.observed.peak_cranking_rpm,
        lowest_cranking_v: c.observed.lowest_cranking_v,
        air_c: c.air_c,
        coolant_c: c.coolant_c,
        preheat_s: c.conditions.preheat_s,
        block_heater_on: c.conditions.block_heater_on,
        predicted_no_start_probability: l.predicted_p,
        uncalibrated_no_start_probability: l.uncalibrated_p,
        predicted_margin_k: l.predicted_margin_k,
        calibrated_observations: l.observations_before,
        received_at_ms,
    }
}

/// A stored calibration as the model's.
pub(super) fn from_stored(c: &StoredCalibration) -> VehicleCalibration {
    VehicleCalibration {
        thermal_offset_k: Belief {
            mean: c.thermal_offset_mean_k,
            sd: c.thermal_offset_sd_k,
        },
        cranking_log_factor: Belief {
            mean: c.cranking_log_factor_mean,
            sd: c.cranking_log_factor_sd,
        },
        cooldown_time_constant_s: match (c.cooldown_tau_mean_s, c.cooldown_tau_sd_s) {
            (Some(mean), Some(sd)) => Some(Belief { mean, sd }),
            _ => None,
        },
        observations: c.observations,
    }
}

pub(super) fn to_stored(c: &VehicleCalibration, now_ms: i64) -> StoredCalibration {
    StoredCalibration {
        thermal_offset_mean_k: c.thermal_offset_k.mean,
        thermal_offset_sd_k: c.thermal_offset_k.sd,
        cranking_log_factor_mean: c.cranking_log_factor.mean,
        cranking_log_factor_sd: c.cranking_log_factor.sd,
        cooldown_tau_mean_s: c.cooldown_time_constant_s.map(|b| b.mean),
        cooldown_tau_sd_s: c.cooldown_time_constant_s.map(|b| b.sd),
        observations: c.observations,
        updated_at_ms: now_ms,
        version: 0,
    }
}

/// One stored attempt as the learning read-outs use it.
#[derive(Debug, Clone)]
pub(super) struct StoredRecord {
    /// The stored row.
    pub row: StoredAttempt,
    /// The vehicle's archetype id.
    pub archetype_id: String,
    /// When the report arrived, s since 1970.
    pub received_at_s: f64,
    /// Calibrated prediction, 0..1.
    pub predicted_p: f64,
    /// Uncalibrated prediction, 0..1.
    pub uncalibrated_p: f64,
}

impl StoredRecord {
    fn new(row: StoredAttempt) -> Self {
        Self {
            archetype_id: row.archetype_id.clone(),
            received_at_s: row.received_at_ms as f64 / 1000.0,
            predicted_p: row.predicted_no_start_probability,
            uncalibrated_p: row.uncalibrated_no_start_probability,
            row,
        }
    }

    /// The engine did not fire.
    pub(super) fn failed(&self) -> bool {
        self.row.outcome == StoredOutcome::DidNotFire
    }

    /// As the API message.
    pub(super) fn to_pb(&self) -> pb::StoredStartAttempt {
        let r = &self.row;
        pb::StoredStartAttempt {
            attempted_at: Some(timestamp(r.key.attempted_at_ms as f64 / 1000.0)),
            outcome: match r.outcome {
                StoredOutcome::Fired => pb::AttemptOutcome::Fired,
                StoredOutcome::FiredAfterRetries => pb::AttemptOutcome::FiredAfterRetries,
                StoredOutcome::DidNotFire => pb::AttemptOutcome::DidNotFire,
            } as i32,
            cranking_duration: Some(prost_types::Duration {
                seconds: r.cranking_s.trunc() as i64,
                nanos: (r.cranking_s.fract() * 1e9).round().min(999_999_999.0) as i32,
            }),
            peak_cranking_rpm: r.peak_cranking_rpm,
            lowest_cranking_v: r.lowest_cranking_v,
            air_c: r.air_c,
            coolant_c: r.coolant_c,
            predicted_no_start_pct: self.predicted_p * 100.0,
            uncalibrated_no_start_pct: self.uncalibrated_p * 100.0,
        }
    }
}

/// A vehicle's latest attempts, newest first.
pub(super) async fn recent(
    store: &Store,
    tenant: &str,
    vehicle_id: &str,
    limit: u32,
) -> Result<Vec<StoredRecord>, ApiError> {
    let rows = store
        .recent_attempts(tenant, vehicle_id, limit as usize)
        .await?;
    Ok(rows.into_iter().map(StoredRecord::new).collect())
}

/// The tenant's attempts since `since_s`, newest first, at most `limit`.
pub(super) async fn fleet(
    store: &Store,
    tenant: &str,
    since_s: f64,
    limit: u32,
) -> Result<Vec<StoredRecord>, ApiError> {
    let rows = store
        .fleet_attempts(tenant, (since_s * 1000.0).floor() as i64, limit as usize)
        .await?;
    Ok(rows.into_iter().map(StoredRecord::new).collect())
}
