//! One Bayesian update of a vehicle's calibration by one observed start attempt, and the update of
//! its cool-down constant by one key-off fit (method in the module doc of `learning`).

use super::gaussian::{conjugate_update, probit_update};
use super::{
    AttemptOutcome, Belief, COOLDOWN_FIT_RELATIVE_SD, COOLDOWN_SD_FLOOR_S, CRANKING_OBSERVATION_SD,
    CRANKING_SD_FLOOR, LONG_CRANK_MARGIN_SD_K, LONG_CRANK_S, ObservedAttempt, RETRY_MARGIN_SD_K,
    THERMAL_NIGHT_SD_K, THERMAL_SD_FLOOR_K, VOLTAGE_OBSERVATION_SD, VehicleCalibration,
    attempt::validate_attempt,
};
use crate::assess::uncertainty::{Method, no_start_probability_from};
use crate::assess::{VehicleNight, assess};
use crate::error::{ModelError, check_range};

/// Observed cranking speeds below this are a starter that did not turn the engine, rpm: no speed
/// ratio is taken from them.
const MIN_OBSERVED_CRANKING_RPM: f64 = 10.0;

/// Largest |ln(observed / modelled)| taken from one reading (a factor of about 12; a reading
/// further off says more about the sensor than the vehicle).
const MAX_LOG_RATIO: f64 = 2.5;

/// The result of one update.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CalibrationUpdate {
    /// The belief before the update (needed to pool the update's evidence, see `update_pool`).
    pub prior: VehicleCalibration,
    /// The belief after it.
    pub posterior: VehicleCalibration,
    /// No-start probability the prior predicted at the attempt's conditions, 0..1.
    pub predicted_no_start_probability: f64,
    /// Charge-temperature margin the prior predicted (offset included), K.
    pub predicted_charge_margin_k: f64,
    /// Cranking speed the prior predicted (factor included), rpm.
    pub predicted_cranking_rpm: f64,
    /// The attempt informed the thermal offset (false: a failure that the cranking, battery or
    /// fuel explains).
    pub thermal_informative: bool,
    /// ln(observed / modelled) used for the cranking factor, when a speed or voltage was usable.
    pub cranking_log_ratio: Option<f64>,
}

/// One Bayesian update. `prior` is the vehicle's state (or its archetype's pooled prior while it
/// has no history of its own, see `vehicle_prior`); returns the posterior plus what the model
/// predicted before the update. `night_at_attempt` comes from `night_at_attempt` (its own
/// calibration option is ignored: the prior's is used).
pub fn update(
    prior: &VehicleCalibration,
    night_at_attempt: &VehicleNight,
    attempt: &ObservedAttempt,
) -> Result<CalibrationUpdate, ModelError> {
    prior.validate()?;
    validate_attempt(attempt)?;
    let mut night = night_at_attempt.clone();
    night.options.calibration = *prior;
    night.options.include_margin_path = false;
    let centre = assess(&night)?;
    let probability = no_start_probability_from(&night, &centre, Method::SigmaPoints)?;

    // The model's own margin and speeds, without the prior's factors.
    let model_margin_k = centre.margin_k - prior.thermal_offset_k.mean;
    let scale = prior.cranking_log_factor.mean.exp();
    let model_rpm = centre.cranking.result.crank_rpm / scale;

    // Thermal offset.
    let cranking_reached = match attempt.peak_cranking_rpm {
        Some(rpm) => rpm >= night.engine.min_start_speed_rpm,
        None => centre.modes.cranking_rpm > 0.0,
    };
    let other_modes_fine =
        cranking_reached && centre.modes.battery_freeze_k > 0.0 && centre.modes.fuel_flow_k > 0.0;
    let thermal_informative = attempt.outcome != AttemptOutcome::DidNotFire || other_modes_fine;
    let mut thermal = prior.thermal_offset_k;
    if thermal_informative {
        let fired = attempt.outcome != AttemptOutcome::DidNotFire;
        thermal = probit_update(
            thermal,
            model_margin_k,
            THERMAL_NIGHT_SD_K,
            fired,
            THERMAL_SD_FLOOR_K,
        );
        let near_limit_sd_k = match attempt.outcome {
            AttemptOutcome::FiredAfterRetries => Some(RETRY_MARGIN_SD_K),
            AttemptOutcome::Fired if attempt.cranking_s > LONG_CRANK_S => {
                Some(LONG_CRANK_MARGIN_SD_K)
            }
            _ => None,
        };
        if let Some(sd_k) = near_limit_sd_k {
            // The margin m + θ was near zero: θ ≈ −m.
            let noise_k = sd_k.hypot(THERMAL_NIGHT_SD_K);
            thermal = conjugate_update(thermal, -model_margin_k, noise_k, THERMAL_SD_FLOOR_K);
        }
    }

    // Cranking factor: the observed peak speed, else the voltage dip.
    let speed_ratio = attempt
        .peak_cranking_rpm
        .filter(|&rpm| rpm >= MIN_OBSERVED_CRANKING_RPM && model_rpm > 0.0)
        .map(|rpm| ((rpm / model_rpm).ln(), CRANKING_OBSERVATION_SD));
    let model_v = centre.cranking.result.terminal_v;
    let voltage_ratio = attempt
        .lowest_cranking_v
        .filter(|&v| v > 0.0 && model_v > 0.0 && model_rpm > 0.0)
        .map(|v| ((v / model_v).ln(), VOLTAGE_OBSERVATION_SD));
    let observation = speed_ratio.or(voltage_ratio);
    let mut cranking = prior.cranking_log_factor;
    let mut cranking_log_ratio = None;
    if let Some((ratio, noise)) = observation {
        let ratio = ratio.clamp(-MAX_LOG_RATIO, MAX_LOG_RATIO);
        cranking = conjugate_update(cranking, ratio, noise, CRANKING_SD_FLOOR);
        cranking_log_ratio = Some(ratio);
    }

    Ok(CalibrationUpdate {
        prior: *prior,
        posterior: VehicleCalibration {
            thermal_offset_k: thermal,
            cranking_log_factor: cranking,
            cooldown_time_constant_s: prior.cooldown_time_constant_s,
            observations: prior.observations.saturating_add(1),
        },
        predicted_no_start_probability: probability.probability,
        predicted_charge_margin_k: centre.margin_k,
        predicted_cranking_rpm: centre.cranking.result.crank_rpm,
        thermal_informative,
        cranking_log_ratio,
    })
}

/// Updates the cool-down constant by one fit from key-off readings (`soak::fit_cooldown_time_constant_s`),
/// with its measurement error `fit_sd_s` (default [`COOLDOWN_FIT_RELATIVE_SD`] of the fit). The
/// first fit sets the belief; later ones combine conjugately. Start-attempt counts are unchanged.
pub fn update_cooldown(
    prior: &VehicleCalibration,
    fitted_time_constant_s: f64,
    fit_sd_s: Option<f64>,
) -> Result<VehicleCalibration, ModelError> {
    prior.validate()?;
    let tau_s = check_range(
        "cooldown_time_constant_s",
        fitted_time_constant_s,
        600.0,
        172_800.0,
        "10 min – 48 h",
    )?;
    let sd_s = match fit_sd_s {
        Some(sd) => check_range(
            "cooldown_fit_sd_s",
            sd,
            COOLDOWN_SD_FLOOR_S,
            172_800.0,
            "a spread of 60 s – 48 h",
        )?,
        None => (tau_s * COOLDOWN_FIT_RELATIVE_SD).max(COOLDOWN_SD_FLOOR_S),
    };
    let belief = match prior.cooldown_time_constant_s {
        None => Belief {
            mean: tau_s,
            sd: sd_s,
        },
        Some(b) => conjugate_update(b, tau_s, sd_s, COOLDOWN_SD_FLOOR_S),
    };
    Ok(VehicleCalibration {
        cooldown_time_constant_s: Some(belief),
        ..*prior
    })
}
