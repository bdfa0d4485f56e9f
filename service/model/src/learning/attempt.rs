//! The model input at the moment of a start attempt, and the validation of what was observed.
//!
//! The attempt's own readings are the best description of its moment: the night is a one-step
//! forecast of constant air ending at the attempt, with the coolant, oil and fuel readings (when
//! given) as telemetry taken at the attempt itself, so no soak has to be predicted.

use super::{AttemptConditions, AttemptOutcome, ObservedAttempt};
use crate::archetypes::{AidConfig, EngineConfig};
use crate::assess::{
    AssessOptions, BatteryConfig, ForecastSeries, FuelConfig, Telemetry, VehicleNight,
};
use crate::constants::STANDARD_ATMOSPHERE_PA;
use crate::error::{ModelError, check_range};
use crate::oil::SaeGrade;
use crate::soak::ForecastHour;

/// Length of the one-step night before the attempt, s.
const NIGHT_STEP_S: f64 = 3_600.0;

/// Highest cranking speed a starter gives a diesel, rpm (anything above is a running engine or a
/// bad reading; typical cranking is 100–250 rpm).
pub(super) const MAX_CRANKING_RPM: f64 = 1_000.0;

/// Longest cranking time accepted for one attempt, s (every burst together).
pub(super) const MAX_CRANKING_S: f64 = 600.0;

/// Checks an observed attempt: finite, non-negative cranking time, speeds 0–1000 rpm, voltages
/// 0–32 V, and a fired attempt that cranked at all.
pub fn validate_attempt(attempt: &ObservedAttempt) -> Result<(), ModelError> {
    check_range(
        "cranking_s",
        attempt.cranking_s,
        0.0,
        MAX_CRANKING_S,
        "cranking time must be 0–600 s",
    )?;
    if let Some(rpm) = attempt.peak_cranking_rpm {
        check_range(
            "peak_cranking_rpm",
            rpm,
            0.0,
            MAX_CRANKING_RPM,
            "a cranking speed is 0–1000 rpm",
        )?;
    }
    if let Some(v) = attempt.lowest_cranking_v {
        check_range(
            "lowest_cranking_v",
            v,
            0.0,
            32.0,
            "a battery voltage is 0–32 V",
        )?;
    }
    if attempt.outcome != AttemptOutcome::DidNotFire && attempt.cranking_s == 0.0 {
        return Err(ModelError::Inconsistent(
            "an engine that fired was cranked: cranking time must be above zero",
        ));
    }
    Ok(())
}

/// Checks the conditions of an attempt.
pub fn validate_conditions(c: &AttemptConditions) -> Result<(), ModelError> {
    check_range("at_s", c.at_s, -1e12, 1e12, "a finite time")?;
    check_range(
        "air_t_k",
        c.air_t_k,
        183.15,
        333.15,
        "air temperature must be −90 to +60 °C",
    )?;
    for (name, v) in [
        ("coolant_t_k", c.coolant_t_k),
        ("oil_t_k", c.oil_t_k),
        ("fuel_t_k", c.fuel_t_k),
    ] {
        if let Some(v) = v {
            check_range(name, v, 183.15, 423.15, "−90 to +150 °C")?;
        }
    }
    if let Some(v) = c.battery_rest_v {
        check_range(
            "battery_rest_v",
            v,
            0.0,
            32.0,
            "a battery voltage is 0–32 V",
        )?;
    }
    check_range(
        "preheat_s",
        c.preheat_s,
        0.0,
        600.0,
        "preheat must be 0–600 s",
    )?;
    Ok(())
}

/// Builds the model input for the attempt moment from the vehicle's parts (no forecast needed: a
/// constant-air one-step night ending at the attempt). The preheat actually used replaces the
/// vehicle's usual one; a block heater that was on is taken as on for the hour before (it matters
/// only when no coolant or oil reading says how warm the engine was).
#[allow(clippy::too_many_arguments)]
pub fn night_at_attempt(
    engine: EngineConfig,
    aids: AidConfig,
    battery: BatteryConfig,
    oil: SaeGrade,
    fuel: FuelConfig,
    sheltered: bool,
    conditions: &AttemptConditions,
) -> Result<VehicleNight, ModelError> {
    validate_conditions(conditions)?;
    let c = conditions;
    let start_s = c.at_s - NIGHT_STEP_S;
    let has_engine_reading = c.coolant_t_k.is_some() || c.oil_t_k.is_some() || c.fuel_t_k.is_some();
    let telemetry = Telemetry {
        observed_at_s: has_engine_reading.then_some(c.at_s),
        coolant_t_k: c.coolant_t_k,
        oil_t_k: c.oil_t_k,
        fuel_t_k: c.fuel_t_k,
        ambient_t_k: Some(c.air_t_k),
        battery_rest_v: c.battery_rest_v,
        fuel_level_fraction: None,
    };
    let aids = AidConfig {
        glow_preheat_s: c.preheat_s,
        ..aids
    };
    Ok(VehicleNight {
        engine,
        aids,
        battery,
        oil,
        fuel,
        sheltered,
        telemetry,
        forecast: ForecastSeries {
            start_s,
            step_s: NIGHT_STEP_S,
            // Overcast and still: the sky radiates at about the air temperature, so a node at the
            // air temperature stays there over the step.
            hours: vec![ForecastHour {
                air_t_k: c.air_t_k,
                wind_mps: 0.0,
                cloud_fraction: 1.0,
            }],
            air_spread_k: Vec::new(),
            barometric_pa: STANDARD_ATMOSPHERE_PA,
        },
        departure_s: c.at_s,
        block_heater_plan: c.block_heater_on.then_some((start_s, c.at_s)),
        options: AssessOptions::default(),
    })
}
