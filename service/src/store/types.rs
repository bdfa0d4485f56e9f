//! The records the store keeps (plain Rust, units in the names, no protocol types) and the
//! limits every operation enforces.

use std::collections::HashMap;

/// Most attempts one [`CommitBatch`] may carry.
pub const MAX_BATCH_ATTEMPTS: usize = 1_000;
/// Most vehicle calibrations, and separately most archetype pools, one [`CommitBatch`] may write.
pub const MAX_BATCH_CALIBRATIONS: usize = 1_000;
/// Most keys or ids one lookup (`known_attempts`, `load`) may ask for.
pub const MAX_LOOKUP_KEYS: usize = 10_000;
/// Most rows `recent_attempts` returns.
pub const MAX_RECENT_ATTEMPTS: usize = 1_000;
/// Most vehicle calibrations, and separately most archetype pools, `tenant_calibrations`
/// returns (a large fleet).
pub const MAX_TENANT_CALIBRATIONS: usize = 1_000_000;
/// Most rows `fleet_attempts` returns (a month of mornings of a large fleet).
pub const MAX_FLEET_ATTEMPTS: usize = 50_000;
/// Longest tenant id, bytes.
pub const MAX_TENANT_BYTES: usize = 128;
/// Longest vehicle or archetype id, bytes.
pub const MAX_ID_BYTES: usize = 128;

/// The identity of a start attempt: a vehicle and the time of the attempt. Reports are
/// idempotent by this key.
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct AttemptKey {
    /// The vehicle's id within its tenant (1 to 128 bytes, no control characters).
    pub vehicle_id: String,
    /// When the attempt began, UTC milliseconds since the Unix epoch.
    pub attempted_at_ms: i64,
}

/// How a start attempt ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum StoredOutcome {
    /// The engine ran on the first attempt.
    Fired,
    /// The engine ran, but only after more than one attempt.
    FiredAfterRetries,
    /// The engine did not run.
    DidNotFire,
}

impl StoredOutcome {
    /// The value kept in the database.
    pub(crate) fn as_db(self) -> &'static str {
        match self {
            Self::Fired => "fired",
            Self::FiredAfterRetries => "fired_after_retries",
            Self::DidNotFire => "did_not_fire",
        }
    }

    /// The outcome of a database value; `None` for a value no migration writes.
    pub(crate) fn from_db(value: &str) -> Option<Self> {
        match value {
            "fired" => Some(Self::Fired),
            "fired_after_retries" => Some(Self::FiredAfterRetries),
            "did_not_fire" => Some(Self::DidNotFire),
            _ => None,
        }
    }
}

/// One observed start attempt and what the model predicted for it beforehand.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredAttempt {
    /// Vehicle and attempt time.
    pub key: AttemptKey,
    /// The archetype pool the vehicle belongs to; empty when the engine is custom.
    pub archetype_id: String,
    /// How the attempt ended.
    pub outcome: StoredOutcome,
    /// Cranking time until the engine fired or the attempt was given up, seconds.
    pub cranking_s: f64,
    /// Highest engine speed while cranking, when measured.
    pub peak_cranking_rpm: Option<f64>,
    /// Lowest battery voltage while cranking, when measured.
    pub lowest_cranking_v: Option<f64>,
    /// Air temperature at the attempt.
    pub air_c: f64,
    /// Coolant temperature at the attempt, when measured.
    pub coolant_c: Option<f64>,
    /// Preheat (glow plug or intake heater) time before cranking, seconds.
    pub preheat_s: f64,
    /// Whether a block heater was on before the attempt.
    pub block_heater_on: bool,
    /// The no-start probability the model gave before this attempt's update, 0 to 1.
    pub predicted_no_start_probability: f64,
    /// The no-start probability of the archetype defaults (no calibration), 0 to 1.
    pub uncalibrated_no_start_probability: f64,
    /// The start margin the model gave before this attempt's update, kelvin.
    pub predicted_margin_k: f64,
    /// Observations that had calibrated that prediction.
    pub calibrated_observations: u32,
    /// When the service received the report, UTC epoch milliseconds. Not part of the content
    /// compared for duplicates: a resent report arrives later.
    pub received_at_ms: i64,
}

impl StoredAttempt {
    /// Whether `other` reports the same attempt with the same content (the receive time aside).
    pub fn same_content(&self, other: &StoredAttempt) -> bool {
        let bits = |v: f64| v.to_bits();
        let obits = |v: Option<f64>| v.map(f64::to_bits);
        self.key == other.key
            && self.archetype_id == other.archetype_id
            && self.outcome == other.outcome
            && bits(self.cranking_s) == bits(other.cranking_s)
            && obits(self.peak_cranking_rpm) == obits(other.peak_cranking_rpm)
            && obits(self.lowest_cranking_v) == obits(other.lowest_cranking_v)
            && bits(self.air_c) == bits(other.air_c)
            && obits(self.coolant_c) == obits(other.coolant_c)
            && bits(self.preheat_s) == bits(other.preheat_s)
            && self.block_heater_on == other.block_heater_on
            && bits(self.predicted_no_start_probability)
                == bits(other.predicted_no_start_probability)
            && bits(self.uncalibrated_no_start_probability)
                == bits(other.uncalibrated_no_start_probability)
            && bits(self.predicted_margin_k) == bits(other.predicted_margin_k)
            && self.calibrated_observations == other.calibrated_observations
    }
}

/// Calibration state of a vehicle or of an archetype pool (the service maps it to the model's
/// type).
#[derive(Debug, Clone, PartialEq)]
pub struct StoredCalibration {
    /// Mean of the thermal margin offset, kelvin.
    pub thermal_offset_mean_k: f64,
    /// Standard deviation of the thermal margin offset, kelvin.
    pub thermal_offset_sd_k: f64,
    /// Mean of the natural log of the cranking factor (battery and starter health).
    pub cranking_log_factor_mean: f64,
    /// Standard deviation of the natural log of the cranking factor.
    pub cranking_log_factor_sd: f64,
    /// Mean of the cool-down time constant, seconds, when fitted.
    pub cooldown_tau_mean_s: Option<f64>,
    /// Standard deviation of the cool-down time constant, seconds, when fitted.
    pub cooldown_tau_sd_s: Option<f64>,
    /// Observations behind this state.
    pub observations: u32,
    /// When this state was computed, UTC epoch milliseconds.
    pub updated_at_ms: i64,
    /// Version of the stored row, for optimistic concurrency between replicas: 1 after the
    /// first write, one more after each. Ignored in a [`CalibrationWrite`] (the store sets it).
    pub version: i64,
}

/// A calibration to write, if the stored one is still the one the caller computed from.
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationWrite {
    /// The vehicle id or the archetype id (1 to 128 bytes).
    pub id: String,
    /// The version the caller loaded, or `None` when it found none; any other stored state
    /// aborts the whole batch with [`StoreError::Concurrent`](super::StoreError::Concurrent).
    pub expected_version: Option<i64>,
    /// The new state (its `version` is ignored: the store writes `expected_version + 1`, or 1).
    pub calibration: StoredCalibration,
}

/// What one `commit` writes, in one transaction.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CommitBatch {
    /// Observed attempts to insert (at most [`MAX_BATCH_ATTEMPTS`]).
    pub attempts: Vec<StoredAttempt>,
    /// New vehicle calibrations (at most [`MAX_BATCH_CALIBRATIONS`], ids distinct).
    pub vehicles: Vec<CalibrationWrite>,
    /// New archetype pools (at most [`MAX_BATCH_CALIBRATIONS`], ids distinct).
    pub archetypes: Vec<CalibrationWrite>,
}

/// What became of one attempt of a batch.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum AttemptResult {
    /// Newly stored.
    Inserted,
    /// Already stored with the same content (a resend); nothing changed.
    Duplicate,
    /// Already stored with other content; the stored attempt was kept.
    Conflict,
}

/// The result of a committed batch.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CommitOutcome {
    /// One result per attempt, in the batch's order.
    pub attempts: Vec<AttemptResult>,
    /// The new version of each vehicle calibration written, by vehicle id.
    pub vehicle_versions: HashMap<String, i64>,
    /// The new version of each archetype pool written, by archetype id.
    pub archetype_versions: HashMap<String, i64>,
}

impl CommitOutcome {
    /// Attempts newly stored.
    pub fn inserted(&self) -> usize {
        self.count(AttemptResult::Inserted)
    }

    /// Attempts that were already stored with the same content.
    pub fn duplicates(&self) -> usize {
        self.count(AttemptResult::Duplicate)
    }

    /// Attempts whose key was stored with other content.
    pub fn conflicts(&self) -> usize {
        self.count(AttemptResult::Conflict)
    }

    fn count(&self, result: AttemptResult) -> usize {
        self.attempts.iter().filter(|r| **r == result).count()
    }
}

/// Most cool-down fits a vehicle read-out returns.
pub const MAX_RECENT_COOLDOWN_FITS: usize = 100;

/// A cool-down time constant fitted from one key-off's coolant readings.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredCooldownFit {
    /// The vehicle (1 to 128 bytes).
    pub vehicle_id: String,
    /// When its cool-down began (the first reading after key-off), UTC epoch milliseconds:
    /// with the vehicle, the fit's idempotency key.
    pub keyed_off_at_ms: i64,
    /// The fitted time constant, seconds (positive).
    pub time_constant_s: f64,
    /// Coolant readings behind the fit.
    pub readings: u32,
    /// When it was recorded, UTC epoch milliseconds.
    pub recorded_at_ms: i64,
}

/// What recording a cool-down fit did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CooldownRecorded {
    /// Stored, with the vehicle calibration at this new version.
    Inserted {
        /// The vehicle calibration's new version.
        vehicle_version: i64,
    },
    /// This key-off was recorded already; nothing changed.
    Duplicate,
}
