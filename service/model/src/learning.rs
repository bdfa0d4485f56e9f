//! Per-vehicle calibration from observed start attempts: what each morning's start (or failure)
//! teaches about the factors the physics leaves uncertain, as Gaussian beliefs updated one attempt
//! at a time. Pure functions: the caller stores the state.
//!
//! # The factors
//! - **Thermal offset** θ, K, added to the predicted charge-temperature margin. The model's own
//!   structural error of the margin (σ_model = [`MODEL_MARGIN_SIGMA_K`] = 10 K) is split into a
//!   part that stays with the vehicle (leak area, glow-plug efficacy, injector state: the offset's
//!   prior spread [`THERMAL_PRIOR_SD_K`] = 8 K) and a part that changes from morning to morning
//!   ([`THERMAL_NIGHT_SD_K`] = 6 K; 8² + 6² = 10², so an uncalibrated vehicle keeps exactly today's
//!   spread). Estimates, not fitted.
//! - **Cranking log factor** c = ln(observed cranking speed / modelled cranking speed): battery and
//!   starter health. The cranking mode's model error (15 rpm) is split the same way: 12 rpm that
//!   the vehicle keeps (the factor's prior spread [`CRANKING_PRIOR_SD`] = 0.15, about 12 rpm at a
//!   typical 80 rpm cold crank) and 9 rpm from morning to morning (12² + 9² = 15²).
//! - **Cool-down time constant** τ, s, fitted from key-off readings: a Gaussian in τ.
//!
//! # The update (one attempt)
//! At the attempt's conditions the model (with the factors at zero) predicts a margin m and a
//! cranking speed n. Then:
//! - **Fired / did not fire**: the likelihood is probit, P(fired | θ) = Φ((m + θ)/σ_n) with
//!   σ_n = [`THERMAL_NIGHT_SD_K`]. The posterior of a Gaussian prior N(μ, s²) under a probit
//!   likelihood is not Gaussian; assumed-density filtering keeps the Gaussian with the same first
//!   two moments (moment matching of the truncated Gaussian: Minka 2001, *A family of algorithms
//!   for approximate Bayesian inference*, MIT thesis, §3; the closed form is in Rasmussen &
//!   Williams 2006, *Gaussian Processes for Machine Learning*, §3.9, eq. 3.58, from memory). With
//!   y = ±1 (fired / not), S² = σ_n² + s², z = y (m + μ)/S and λ = φ(z)/Φ(z):
//!   μ' = μ + y s² λ / S and s'² = s² (1 − (s²/S²) λ (z + λ)). λ is computed from ln Φ, so it
//!   stays finite in the far tails (an impossible surprise moves the mean by about the surprise
//!   instead of overflowing), and s' never drops below [`THERMAL_SD_FLOOR_K`].
//!   A vehicle that did not fire is evidence about the charge only when nothing else explains the
//!   failure: the observed (else predicted) cranking speed reached the minimum starting speed,
//!   and the battery and fuel modes had positive margins. Otherwise the thermal belief is left
//!   as it was.
//! - **Fired after retries** or **fired after a long crank** (more than [`LONG_CRANK_S`]): the
//!   charge was near the ignition limit. Besides the probit "fired" step, a Gaussian
//!   pseudo-observation m + θ ≈ 0 with spread [`RETRY_MARGIN_SD_K`] (retries) or
//!   [`LONG_CRANK_MARGIN_SD_K`] (one long crank, weaker) is applied by the conjugate Gaussian
//!   update (its noise adds σ_n in quadrature). Estimates, not fitted: a start that needs several
//!   bursts is taken to be within a few kelvin of the limit (common practice (no source)).
//! - **Cranking speed**: y = ln(observed peak / modelled) is a direct Gaussian observation of c
//!   with noise [`CRANKING_OBSERVATION_SD`]; conjugate update. When the peak speed is missing but
//!   the voltage dip is reported, ln(observed lowest / modelled terminal voltage) stands in (a DC
//!   starter's speed follows its terminal voltage at a given load, so a deeper dip than the model's
//!   means a weaker battery or a dragging starter), with the wider noise [`VOLTAGE_OBSERVATION_SD`].
//!   Both at once would count the same physics twice; the speed wins.
//! - **Cool-down** ([`update_cooldown`]): a fitted τ with a stated measurement error (default
//!   [`COOLDOWN_FIT_RELATIVE_SD`] of τ) updates N(τ̄, s²) conjugately; the first fit sets it.
//!
//! # Pooling across the fleet
//! Two levels per archetype: a vehicle's factor is θ_v = θ_a + δ_v with δ_v ~ N(0, τ_between²)
//! ([`THERMAL_BETWEEN_VEHICLE_SD_K`], [`CRANKING_BETWEEN_VEHICLE_SD`]). The pool holds the belief
//! about θ_a; a vehicle without history starts from [`vehicle_prior`] = N(μ_a, s_a² + τ_between²).
//! An empty pool gives exactly [`VehicleCalibration::uncalibrated`]. [`update_pool`] takes the
//! *likelihood message* of each vehicle update (its posterior divided by its prior, Gaussian
//! natural parameters), widens it by τ_between² (it observed θ_v, not θ_a) and folds it into the
//! pool. Messages of the same vehicle share its δ_v, which this treats as independent: the pool
//! leans towards the busiest vehicles, so its spread is floored at [`POOL_SD_FLOOR_FRACTION`] of
//! the between-vehicle spread. The cool-down constant is a property of one engine's installation
//! and is not pooled.

mod attempt;
mod gaussian;
mod pool;
mod update;

#[cfg(test)]
mod tests;

pub use attempt::{night_at_attempt, validate_attempt, validate_conditions};
pub use pool::{uncalibrated_pool, update_pool, vehicle_prior};
pub use update::{CalibrationUpdate, update, update_cooldown};

use crate::assess::uncertainty::MODEL_MARGIN_SIGMA_K;

/// Prior spread of the thermal offset, K (the part of the model's margin error a vehicle keeps).
pub const THERMAL_PRIOR_SD_K: f64 = 8.0;
/// Morning-to-morning spread of the margin around the vehicle's offset, K (the probit's noise).
pub const THERMAL_NIGHT_SD_K: f64 = 6.0;
/// Floor of the thermal offset's spread, K (keeps the update from locking on a value).
pub const THERMAL_SD_FLOOR_K: f64 = 0.5;
/// Prior spread of the cranking log factor (about 12 rpm at an 80 rpm cold crank).
pub const CRANKING_PRIOR_SD: f64 = 0.15;
/// The cranking mode's model error that the vehicle keeps, rpm (the rest is morning to morning).
pub const CRANKING_VEHICLE_SIGMA_RPM: f64 = 12.0;
/// The cranking mode's morning-to-morning model error, rpm (12² + 9² = 15², the mode's σ).
pub const CRANKING_NIGHT_SIGMA_RPM: f64 = 9.0;
/// Noise of one observed ln(peak cranking speed / modelled), dimensionless (estimate: sensor
/// resolution, the peak against the steady speed, day-to-day drag).
pub const CRANKING_OBSERVATION_SD: f64 = 0.08;
/// Noise of ln(lowest cranking voltage / modelled terminal voltage) as a stand-in (estimate).
pub const VOLTAGE_OBSERVATION_SD: f64 = 0.12;
/// Floor of the cranking factor's spread.
pub const CRANKING_SD_FLOOR: f64 = 0.01;
/// Cranking time above which a start counts as hard, s (common practice (no source): a healthy
/// diesel fires within a few seconds).
pub const LONG_CRANK_S: f64 = 5.0;
/// Spread of the margin of a start that needed retries around zero, K (estimate).
pub const RETRY_MARGIN_SD_K: f64 = 4.0;
/// Spread of the margin of a start after one long crank around zero, K (estimate, weaker).
pub const LONG_CRANK_MARGIN_SD_K: f64 = 8.0;
/// Measurement error of a fitted cool-down constant, fraction of τ (estimate).
pub const COOLDOWN_FIT_RELATIVE_SD: f64 = 0.15;
/// Floor of the cool-down constant's spread, s.
pub const COOLDOWN_SD_FLOOR_S: f64 = 60.0;
/// Spread of a vehicle's offset around its archetype's, K (estimate).
pub const THERMAL_BETWEEN_VEHICLE_SD_K: f64 = 4.8;
/// Spread of a vehicle's cranking factor around its archetype's (estimate).
pub const CRANKING_BETWEEN_VEHICLE_SD: f64 = 0.09;
/// Floor of a pool's spread as a fraction of the between-vehicle spread.
pub const POOL_SD_FLOOR_FRACTION: f64 = 0.1;

const _: () = assert!(
    THERMAL_PRIOR_SD_K * THERMAL_PRIOR_SD_K + THERMAL_NIGHT_SD_K * THERMAL_NIGHT_SD_K
        == MODEL_MARGIN_SIGMA_K * MODEL_MARGIN_SIGMA_K
);

/// A Gaussian belief about one factor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Belief {
    /// Mean, in the factor's unit.
    pub mean: f64,
    /// Standard deviation, in the factor's unit.
    pub sd: f64,
}

/// What start attempts have taught about one vehicle (or about an archetype, pooled).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct VehicleCalibration {
    /// Added to the predicted charge-temperature margin, K.
    pub thermal_offset_k: Belief,
    /// ln(observed cranking speed / modelled cranking speed): battery + starter health.
    pub cranking_log_factor: Belief,
    /// Engine cool-down time constant fitted from key-off readings, s, when known.
    pub cooldown_time_constant_s: Option<Belief>,
    /// Start attempts that informed it.
    pub observations: u32,
}

impl VehicleCalibration {
    /// The identity: offsets at zero with the prior spreads, which reproduce the model's own
    /// error exactly, so an assessment answers bit for bit as without calibration.
    pub const fn uncalibrated() -> Self {
        VehicleCalibration {
            thermal_offset_k: Belief {
                mean: 0.0,
                sd: THERMAL_PRIOR_SD_K,
            },
            cranking_log_factor: Belief {
                mean: 0.0,
                sd: CRANKING_PRIOR_SD,
            },
            cooldown_time_constant_s: None,
            observations: 0,
        }
    }

    /// Spread of the charge margin's model error under this calibration, K:
    /// √(s_θ² + σ_night²) (exactly [`MODEL_MARGIN_SIGMA_K`] when uncalibrated).
    pub fn charge_model_sigma_k(&self) -> f64 {
        let s = self.thermal_offset_k.sd;
        (s * s + THERMAL_NIGHT_SD_K * THERMAL_NIGHT_SD_K).sqrt()
    }

    /// Spread of the cranking margin's model error under this calibration, rpm (exactly the
    /// cranking mode's 15 rpm when uncalibrated).
    pub fn cranking_model_sigma_rpm(&self) -> f64 {
        let v = CRANKING_VEHICLE_SIGMA_RPM * (self.cranking_log_factor.sd / CRANKING_PRIOR_SD);
        (v * v + CRANKING_NIGHT_SIGMA_RPM * CRANKING_NIGHT_SIGMA_RPM).sqrt()
    }

    /// Checks every belief is finite with a positive spread (a stored state read back).
    pub fn validate(&self) -> Result<(), crate::ModelError> {
        use crate::error::check_range;
        check_range(
            "thermal_offset_k.mean",
            self.thermal_offset_k.mean,
            -200.0,
            200.0,
            "a finite offset within ±200 K",
        )?;
        check_range(
            "thermal_offset_k.sd",
            self.thermal_offset_k.sd,
            THERMAL_SD_FLOOR_K,
            100.0,
            "a spread of 0.5–100 K",
        )?;
        check_range(
            "cranking_log_factor.mean",
            self.cranking_log_factor.mean,
            -3.0,
            3.0,
            "a finite factor within e^±3",
        )?;
        check_range(
            "cranking_log_factor.sd",
            self.cranking_log_factor.sd,
            CRANKING_SD_FLOOR,
            3.0,
            "a spread of 0.01–3",
        )?;
        if let Some(b) = self.cooldown_time_constant_s {
            check_range(
                "cooldown_time_constant_s.mean",
                b.mean,
                600.0,
                172_800.0,
                "10 min – 48 h",
            )?;
            check_range(
                "cooldown_time_constant_s.sd",
                b.sd,
                COOLDOWN_SD_FLOOR_S,
                172_800.0,
                "a spread of 60 s – 48 h",
            )?;
        }
        Ok(())
    }
}

impl Default for VehicleCalibration {
    fn default() -> Self {
        Self::uncalibrated()
    }
}

/// How a start attempt ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AttemptOutcome {
    /// The engine fired and ran on the first cranking burst.
    Fired,
    /// The engine fired, but only after several cranking bursts.
    FiredAfterRetries,
    /// The engine did not fire.
    DidNotFire,
}

/// One observed start attempt (SI units).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ObservedAttempt {
    /// How it ended.
    pub outcome: AttemptOutcome,
    /// Total cranking time before firing or giving up, s.
    pub cranking_s: f64,
    /// Peak cranking speed, rpm.
    pub peak_cranking_rpm: Option<f64>,
    /// Battery voltage dip while cranking (lowest), V.
    pub lowest_cranking_v: Option<f64>,
}

/// Conditions at the attempt, SI.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AttemptConditions {
    /// When the attempt began, s on the caller's axis.
    pub at_s: f64,
    /// Air temperature, K.
    pub air_t_k: f64,
    /// Coolant temperature, K.
    pub coolant_t_k: Option<f64>,
    /// Oil temperature, K.
    pub oil_t_k: Option<f64>,
    /// Fuel temperature, K.
    pub fuel_t_k: Option<f64>,
    /// Rested battery voltage before cranking, V.
    pub battery_rest_v: Option<f64>,
    /// Glow-plug / intake-heater preheat actually used, s.
    pub preheat_s: f64,
    /// The block heater was on before the attempt.
    pub block_heater_on: bool,
}
