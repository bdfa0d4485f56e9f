//! Checks every argument before it reaches the database: caps on ids and counts, and values
//! that must never be stored (NaN and infinities, which SQLite would turn into NULL, negative
//! durations, probabilities outside 0 to 1, control characters that PostgreSQL text refuses).

use std::collections::HashSet;

use super::error::StoreError;
use super::types::{
    AttemptKey, CalibrationWrite, CommitBatch, MAX_BATCH_ATTEMPTS, MAX_BATCH_CALIBRATIONS,
    MAX_ID_BYTES, MAX_LOOKUP_KEYS, MAX_TENANT_BYTES, StoredAttempt, StoredCalibration,
    StoredCooldownFit,
};

/// A tenant id: 1 to 128 bytes, no control characters.
pub(crate) fn tenant(tenant: &str) -> Result<(), StoreError> {
    text("tenant", tenant, MAX_TENANT_BYTES, false)
}

/// A vehicle or archetype id: 1 to 128 bytes (empty only when `empty_ok`), no control characters.
pub(crate) fn id(field: &str, id: &str, empty_ok: bool) -> Result<(), StoreError> {
    text(field, id, MAX_ID_BYTES, empty_ok)
}

fn text(field: &str, value: &str, max_bytes: usize, empty_ok: bool) -> Result<(), StoreError> {
    if value.is_empty() && !empty_ok {
        return Err(StoreError::invalid(field, "must not be empty"));
    }
    if value.len() > max_bytes {
        return Err(StoreError::invalid(
            field,
            format!("is {} bytes; at most {max_bytes} are kept", value.len()),
        ));
    }
    if value.chars().any(char::is_control) {
        return Err(StoreError::invalid(
            field,
            "must not hold control characters",
        ));
    }
    Ok(())
}

/// A count of requested items against its cap.
pub(crate) fn count(field: &str, n: usize, max: usize) -> Result<(), StoreError> {
    if n > max {
        return Err(StoreError::invalid(
            field,
            format!("{n} items; at most {max} per call"),
        ));
    }
    Ok(())
}

/// A row limit: 1 to `max`.
pub(crate) fn limit(n: usize, max: usize) -> Result<(), StoreError> {
    if n == 0 || n > max {
        return Err(StoreError::invalid(
            "limit",
            format!("is {n}; must be between 1 and {max}"),
        ));
    }
    Ok(())
}

/// Keys of an idempotency pre-check.
pub(crate) fn keys(keys: &[AttemptKey]) -> Result<(), StoreError> {
    count("keys", keys.len(), MAX_LOOKUP_KEYS)?;
    for (i, k) in keys.iter().enumerate() {
        id(&format!("keys[{i}].vehicle_id"), &k.vehicle_id, false)?;
    }
    Ok(())
}

/// Ids of a calibration lookup.
pub(crate) fn ids(field: &str, ids: &[String]) -> Result<(), StoreError> {
    count(field, ids.len(), MAX_LOOKUP_KEYS)?;
    for (i, v) in ids.iter().enumerate() {
        id(&format!("{field}[{i}]"), v, false)?;
    }
    Ok(())
}

fn finite(field: &str, value: f64) -> Result<(), StoreError> {
    if !value.is_finite() {
        return Err(StoreError::invalid(field, "must be a finite number"));
    }
    Ok(())
}

fn non_negative(field: &str, value: f64) -> Result<(), StoreError> {
    finite(field, value)?;
    if value < 0.0 {
        return Err(StoreError::invalid(field, "must not be negative"));
    }
    Ok(())
}

fn optional(
    field: &str,
    value: Option<f64>,
    check: fn(&str, f64) -> Result<(), StoreError>,
) -> Result<(), StoreError> {
    value.map_or(Ok(()), |v| check(field, v))
}

/// One attempt of a batch at `path`.
pub(crate) fn attempt(path: &str, a: &StoredAttempt) -> Result<(), StoreError> {
    id(&format!("{path}.key.vehicle_id"), &a.key.vehicle_id, false)?;
    id(&format!("{path}.archetype_id"), &a.archetype_id, true)?;
    let f = |name: &str| format!("{path}.{name}");
    non_negative(&f("cranking_s"), a.cranking_s)?;
    optional(&f("peak_cranking_rpm"), a.peak_cranking_rpm, non_negative)?;
    optional(&f("lowest_cranking_v"), a.lowest_cranking_v, non_negative)?;
    finite(&f("air_c"), a.air_c)?;
    optional(&f("coolant_c"), a.coolant_c, finite)?;
    non_negative(&f("preheat_s"), a.preheat_s)?;
    for (name, p) in [
        (
            "predicted_no_start_probability",
            a.predicted_no_start_probability,
        ),
        (
            "uncalibrated_no_start_probability",
            a.uncalibrated_no_start_probability,
        ),
    ] {
        finite(&f(name), p)?;
        if !(0.0..=1.0).contains(&p) {
            return Err(StoreError::invalid(f(name), "must be between 0 and 1"));
        }
    }
    finite(&f("predicted_margin_k"), a.predicted_margin_k)?;
    Ok(())
}

/// One calibration state at `path`.
pub(crate) fn calibration(path: &str, c: &StoredCalibration) -> Result<(), StoreError> {
    let f = |name: &str| format!("{path}.{name}");
    finite(&f("thermal_offset_mean_k"), c.thermal_offset_mean_k)?;
    non_negative(&f("thermal_offset_sd_k"), c.thermal_offset_sd_k)?;
    finite(&f("cranking_log_factor_mean"), c.cranking_log_factor_mean)?;
    non_negative(&f("cranking_log_factor_sd"), c.cranking_log_factor_sd)?;
    optional(
        &f("cooldown_tau_mean_s"),
        c.cooldown_tau_mean_s,
        non_negative,
    )?;
    optional(&f("cooldown_tau_sd_s"), c.cooldown_tau_sd_s, non_negative)?;
    if c.cooldown_tau_mean_s.is_some() != c.cooldown_tau_sd_s.is_some() {
        return Err(StoreError::invalid(
            f("cooldown_tau_sd_s"),
            "must be set exactly when cooldown_tau_mean_s is",
        ));
    }
    Ok(())
}

fn writes(path: &str, writes: &[CalibrationWrite]) -> Result<(), StoreError> {
    count(path, writes.len(), MAX_BATCH_CALIBRATIONS)?;
    let mut seen = HashSet::with_capacity(writes.len());
    for (i, w) in writes.iter().enumerate() {
        let item = format!("{path}[{i}]");
        if !seen.insert(w.id.as_str()) {
            return Err(StoreError::invalid(
                format!("{item}.id"),
                "appears twice in the batch",
            ));
        }
        write(&item, w)?;
    }
    Ok(())
}

/// One calibration write at `path`.
pub(crate) fn write(path: &str, w: &CalibrationWrite) -> Result<(), StoreError> {
    id(&format!("{path}.id"), &w.id, false)?;
    if let Some(v) = w.expected_version
        && (v < 1 || v == i64::MAX)
    {
        return Err(StoreError::invalid(
            format!("{path}.expected_version"),
            "must be a stored version (1 or more) or absent",
        ));
    }
    calibration(&format!("{path}.calibration"), &w.calibration)
}

/// A cool-down fit and the vehicle calibration it leaves: the same vehicle, a positive time
/// constant and at least one reading.
pub(crate) fn cooldown(fit: &StoredCooldownFit, w: &CalibrationWrite) -> Result<(), StoreError> {
    id("fit.vehicle_id", &fit.vehicle_id, false)?;
    finite("fit.time_constant_s", fit.time_constant_s)?;
    if fit.time_constant_s <= 0.0 {
        return Err(StoreError::invalid(
            "fit.time_constant_s",
            "must be positive",
        ));
    }
    if fit.readings == 0 {
        return Err(StoreError::invalid("fit.readings", "must be at least 1"));
    }
    write("vehicle", w)?;
    if w.id != fit.vehicle_id {
        return Err(StoreError::invalid(
            "vehicle.id",
            "must be the fit's vehicle",
        ));
    }
    if w.calibration.cooldown_tau_mean_s.is_none() {
        return Err(StoreError::invalid(
            "vehicle.calibration.cooldown_tau_mean_s",
            "must be set by a cool-down fit",
        ));
    }
    Ok(())
}

/// A whole commit batch.
pub(crate) fn batch(b: &CommitBatch) -> Result<(), StoreError> {
    count("batch.attempts", b.attempts.len(), MAX_BATCH_ATTEMPTS)?;
    for (i, a) in b.attempts.iter().enumerate() {
        attempt(&format!("batch.attempts[{i}]"), a)?;
    }
    writes("batch.vehicles", &b.vehicles)?;
    writes("batch.archetypes", &b.archetypes)?;
    Ok(())
}
