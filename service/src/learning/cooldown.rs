//! Cool-downs fitted on watch streams into the vehicle's stored calibration: each key-off whose
//! coolant readings gave a time constant updates the vehicle's cool-down belief by the model's
//! conjugate update ([`startmargin_model::learning::update_cooldown`]), stored with the fit in one
//! transaction, once per vehicle and key-off (a replayed cool-down is a duplicate). The constant
//! belongs to one engine's installation and is not pooled across the archetype.

use std::time::{SystemTime, UNIX_EPOCH};

use startmargin_model::learning::{self, Belief, VehicleCalibration};

use super::Learning;
use super::ingest::States;
use super::storage::{from_stored, to_stored};
use crate::error::ApiError;
use crate::store::{CalibrationWrite, CooldownRecorded, StoreError, StoredCooldownFit};

/// Tries of a cool-down record that raced another writer of the same vehicle.
const RECORD_TRIES: usize = 3;

/// A cool-down fitted from one key-off's coolant readings.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedCooldown {
    /// The vehicle.
    pub vehicle_id: String,
    /// The first reading after key-off, UTC seconds (the fit's key with the vehicle).
    pub keyed_off_at_s: i64,
    /// The fitted time constant, seconds.
    pub time_constant_s: f64,
    /// Coolant readings behind the fit.
    pub readings: u32,
}

/// What recording a cool-down did.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CooldownLearned {
    /// Learned from: the vehicle's cool-down belief now (time constant, seconds).
    Updated(Belief),
    /// This key-off was learned from before; nothing changed.
    Duplicate,
}

impl Learning {
    /// Learns from a fitted cool-down and stores it; counted against the tenant's report rate
    /// (RESOURCE_EXHAUSTED beyond it, nothing stored).
    pub async fn record_cooldown(
        &self,
        tenant: &str,
        fit: &FittedCooldown,
    ) -> Result<CooldownLearned, ApiError> {
        if let Err(wait) = self.take_tokens(tenant, 1) {
            return Err(ApiError::ResourceExhausted(format!(
                "this tenant reports more than {} attempts and cool-downs a minute; retry in {:.1} s",
                self.limits.max_attempts_per_minute_per_tenant,
                wait.as_secs_f64()
            )));
        }
        let lock = self.learning_lock(tenant);
        let _learning = lock.lock().await;
        let now_ms = SystemTime::now()
            .duration_since(UNIX_EPOCH)
            .map_or(0, |d| i64::try_from(d.as_millis()).unwrap_or(i64::MAX));
        let stored_fit = StoredCooldownFit {
            vehicle_id: fit.vehicle_id.clone(),
            keyed_off_at_ms: fit.keyed_off_at_s.saturating_mul(1000),
            time_constant_s: fit.time_constant_s,
            readings: fit.readings,
            recorded_at_ms: now_ms,
        };
        for _ in 0..RECORD_TRIES {
            let stored = self
                .store
                .vehicle_calibration(tenant, &fit.vehicle_id)
                .await?;
            let prior = stored
                .as_ref()
                .map_or_else(VehicleCalibration::uncalibrated, from_stored);
            let posterior = learning::update_cooldown(&prior, fit.time_constant_s, None)
                .map_err(|e| ApiError::from_model("cooldown", e))?;
            let write = CalibrationWrite {
                id: fit.vehicle_id.clone(),
                expected_version: stored.as_ref().map(|c| c.version),
                calibration: to_stored(&posterior, now_ms),
            };
            match self
                .store
                .record_cooldown(tenant, &stored_fit, &write)
                .await
            {
                Ok(CooldownRecorded::Inserted { .. }) => {
                    let mut updated = States::default();
                    updated.vehicles.insert(fit.vehicle_id.clone(), posterior);
                    self.book.apply(tenant, &updated);
                    let belief = posterior
                        .cooldown_time_constant_s
                        .ok_or_else(|| ApiError::Internal("the update set no cool-down".into()))?;
                    return Ok(CooldownLearned::Updated(belief));
                }
                Ok(CooldownRecorded::Duplicate) => return Ok(CooldownLearned::Duplicate),
                Err(StoreError::Concurrent { .. }) => continue,
                Err(e) => return Err(e.into()),
            }
        }
        Err(ApiError::Aborted(
            "another replica updated this vehicle at the same time; retry".into(),
        ))
    }
}
