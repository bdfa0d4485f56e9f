//! No-start probability: the uncertainty of the inputs propagated through the real model.
//!
//! Uncertain inputs (one standard deviation each; all *estimates*, documented in
//! [`Uncertainties`]): the forecast air temperature (the caller's per-step spread, else a default
//! that grows with lead time), the battery state of charge (tighter when measured from a rested
//! voltage), the battery's health, and the fuel's cold-flow limits (CFPP reproducibility is about
//! 4 °C, reference.md §9.1, cold-flow.eu, confirmed: σ ≈ 2 K). The model's own structural error is
//! a further normal term on the margin ([`MODEL_MARGIN_SIGMA_K`]), applied analytically.
//!
//! Every failure mode has its own margin in its own unit ([`super::ModeMargins`]: charge K,
//! cranking rpm, battery K above freezing, fuel K above CFPP/pour point) and its own model error
//! ([`FailureMode::model_sigma`]). Each mode's margin is treated as normal around the central
//! assessment's value with spread S = √(σ_model² + Var_inputs), so its no-start probability is
//! Φ(−m/S) (first-order second-moment reliability); the night's probability is the binding mode's
//! (see [`no_start_probability_from`]). The input variance comes from:
//! - [`Method::SigmaPoints`] (default): central differences along each input axis at ±√3 σ (the
//!   unscented points of Julier & Uhlmann 1997 with κ = 3 − d, *from memory*), 2d = 8 model runs
//!   beyond the central assessment;
//! - [`Method::Sampling`]: plain Monte Carlo with a deterministic stream keyed by the caller, and a
//!   reported standard error; the reference the sigma points are checked against.
//!
//! Deterministic: the same night and key always give the same probability.

use super::shared::NightContext;
use super::{
    Assessment, FailureMode, ModeMargins, Probe, VehicleNight, assess, fuel_flow_margin_in,
    probe_in,
};
use crate::error::ModelError;
use crate::fuel::{
    ColdFlowProperties, FuelBase, FuelDescription, cetane_number, cold_flow_properties,
};

/// Structural (model) error of the start margin, one standard deviation, K (estimate: about the
/// spread between the published start limits and the model's predictions of the validation
/// anchors, see `assess::unassisted`).
pub const MODEL_MARGIN_SIGMA_K: f64 = 10.0;

/// Default forecast error of air temperature at zero lead, K (estimate; 2-m temperature forecasts
/// are typically good to 1–2 K on the first night, from memory).
pub const FORECAST_SIGMA_AT_ZERO_LEAD_K: f64 = 1.0;
/// Growth of the default forecast error per hour of lead, K/h (estimate).
pub const FORECAST_SIGMA_GROWTH_K_PER_H: f64 = 0.08;
/// Cap of the default forecast error, K (estimate).
pub const FORECAST_SIGMA_MAX_K: f64 = 5.0;

/// How the probability is computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Method {
    /// Unscented transform over the uncertain inputs (9 model runs).
    #[default]
    SigmaPoints,
    /// Monte Carlo with this many samples.
    Sampling {
        /// Number of samples.
        samples: u32,
        /// Key of the deterministic sample stream.
        key: u64,
    },
}

/// The uncertain inputs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UncertaintySource {
    /// Forecast air temperature.
    Forecast,
    /// Battery state of charge.
    BatteryCharge,
    /// Battery health.
    BatteryHealth,
    /// Fuel cold-flow limits.
    FuelProperties,
    /// The model's own calibration.
    Model,
}

/// Standard deviations of the uncertain inputs for one night.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Uncertainties {
    /// Forecast air temperature at departure, K.
    pub forecast_sigma_k: f64,
    /// State of charge (fraction).
    pub state_of_charge_sigma: f64,
    /// Battery health (fraction).
    pub health_sigma: f64,
    /// Fuel cold-flow limits, K.
    pub fuel_sigma_k: f64,
}

/// State-of-charge uncertainty: measured from a rested voltage 0.05, given by the caller 0.1,
/// assumed 0.2 (estimates).
fn soc_sigma(night: &VehicleNight) -> f64 {
    if night.telemetry.battery_rest_v.is_some() {
        0.05
    } else if night.battery.state_of_charge.is_some() {
        0.1
    } else {
        0.2
    }
}

/// The uncertainties of a night.
pub fn uncertainties(night: &VehicleNight) -> Uncertainties {
    let f = &night.forecast;
    let step = ((night.departure_s - f.start_s) / f.step_s)
        .floor()
        .max(0.0) as usize;
    let forecast_sigma_k = match f
        .air_spread_k
        .get(step.min(f.air_spread_k.len().saturating_sub(1)))
    {
        Some(s) if !f.air_spread_k.is_empty() => *s,
        _ => {
            let lead_h = ((night.departure_s - f.start_s) / 3600.0).max(0.0);
            (FORECAST_SIGMA_AT_ZERO_LEAD_K + FORECAST_SIGMA_GROWTH_K_PER_H * lead_h)
                .min(FORECAST_SIGMA_MAX_K)
        }
    };
    Uncertainties {
        forecast_sigma_k,
        state_of_charge_sigma: soc_sigma(night),
        health_sigma: 0.1,
        fuel_sigma_k: 2.0,
    }
}

/// The probability and what drives it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NoStartProbability {
    /// Probability of a no-start at the departure, 0..1: that of the binding failure mode.
    pub probability: f64,
    /// The failure mode with the highest no-start probability.
    pub binding: FailureMode,
    /// The binding mode's margin (the central assessment's), in the mode's unit.
    pub binding_margin: f64,
    /// Spread of the binding mode's margin (inputs and model together), one standard deviation,
    /// in the mode's unit.
    pub binding_spread: f64,
    /// No-start probability of each mode, in [`FailureMode::ALL`] order.
    pub mode_probabilities: [f64; 4],
    /// Spread of each mode's margin (inputs and model), in [`FailureMode::ALL`] order.
    pub mode_spreads: [f64; 4],
    /// Spread of the charge-temperature margin (inputs and model together), one standard
    /// deviation, K.
    pub margin_spread_k: f64,
    /// The input that moves the binding mode most.
    pub dominant: UncertaintySource,
    /// Standard error of the probability estimate (sampling only; 0 for sigma points).
    pub standard_error: f64,
    /// Model runs used beyond the central assessment.
    pub model_runs: u32,
}

impl NoStartProbability {
    /// No-start probability of one mode.
    pub fn of_mode(&self, mode: FailureMode) -> f64 {
        self.mode_probabilities[mode_index(mode)]
    }

    /// Spread of one mode's margin, in its unit.
    pub fn spread_of(&self, mode: FailureMode) -> f64 {
        self.mode_spreads[mode_index(mode)]
    }
}

fn mode_index(mode: FailureMode) -> usize {
    FailureMode::ALL
        .iter()
        .position(|&m| m == mode)
        .unwrap_or(0)
}

/// Standard normal cumulative distribution Φ(x), by the complementary error function
/// (Numerical Recipes `erfcc`; check values in the tests).
pub fn normal_cdf(x: f64) -> f64 {
    0.5 * erfc(-x / std::f64::consts::SQRT_2)
}

/// Standard normal density φ(x).
fn normal_pdf(x: f64) -> f64 {
    (-0.5 * x * x).exp() / (2.0 * std::f64::consts::PI).sqrt()
}

/// Complementary error function, |error| < 1.2e-7 (Numerical Recipes `erfcc`, Chebyshev fit).
fn erfc(x: f64) -> f64 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let r = t
        * (-z * z - 1.265_512_23
            + t * (1.000_023_68
                + t * (0.374_091_96
                    + t * (0.096_784_18
                        + t * (-0.186_288_06
                            + t * (0.278_868_07
                                + t * (-1.135_203_98
                                    + t * (1.488_515_87
                                        + t * (-0.822_152_23 + t * 0.170_872_77)))))))))
            .exp();
    if x >= 0.0 { r } else { 2.0 - r }
}

/// A perturbation of the inputs in units of their standard deviations.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct Perturbation {
    forecast: f64,
    charge: f64,
    health: f64,
    fuel: f64,
}

const DIMENSIONS: usize = 4;
/// The axis of the fuel's cold-flow limits (see [`axis`]).
const FUEL_AXIS: usize = 3;

fn perturbed(
    night: &VehicleNight,
    u: &Uncertainties,
    p: &Perturbation,
    soc0: f64,
) -> Result<VehicleNight, ModelError> {
    let mut n = night.clone();
    let dt = p.forecast * u.forecast_sigma_k;
    for h in &mut n.forecast.hours {
        h.air_t_k += dt;
    }
    if let Some(a) = n.telemetry.ambient_t_k.as_mut() {
        *a += dt;
    }
    n.telemetry.battery_rest_v = None;
    n.battery.state_of_charge = Some((soc0 + p.charge * u.state_of_charge_sigma).clamp(0.0, 1.0));
    n.battery.health_fraction =
        (n.battery.health_fraction + p.health * u.health_sigma).clamp(0.05, 1.0);
    if p.fuel != 0.0 {
        n.fuel.description = shifted_fuel(&night.fuel.description, p.fuel * u.fuel_sigma_k)?;
    }
    n.options.include_margin_path = false;
    Ok(n)
}

/// `fuel` with its cold-flow limits (cloud point, CFPP, pour point) all `d_k` warmer, as a
/// measured fuel with the same cetane number.
fn shifted_fuel(fuel: &FuelDescription, d_k: f64) -> Result<FuelDescription, ModelError> {
    let props = cold_flow_properties(fuel)?;
    Ok(FuelDescription {
        base: FuelBase::Measured(ColdFlowProperties {
            cloud_point_k: props.cloud_point_k + d_k,
            cfpp_k: props.cfpp_k + d_k,
            pour_point_k: props.pour_point_k + d_k,
        }),
        // The derived properties already include blending and additive effects.
        biodiesel_fraction: 0.0,
        no1_blend_fraction: 0.0,
        additive: None,
        // A measured base alone would read as the conservative default cetane number: keep the
        // fuel's own, so the fuel axis moves the cold-flow limits and nothing else.
        cetane_number: Some(cetane_number(fuel)?),
        ..*fuel
    })
}

/// No-start probability of a night (the state of charge the assessment used is `soc0`): runs the
/// central assessment itself, then [`no_start_probability_from`].
pub fn no_start_probability(
    night: &VehicleNight,
    soc0: f64,
    method: Method,
) -> Result<NoStartProbability, ModelError> {
    let u = uncertainties(night);
    let centre = assess(&perturbed(night, &u, &Perturbation::default(), soc0)?)?;
    no_start_probability_from(night, &centre, method)
}

/// No-start probability around an already computed central assessment `centre` of `night`.
///
/// First-order second-moment reliability (Cornell 1969, from memory): each mode's margin is taken
/// as normal with the central value m and a spread S = √(σ_model² + Var_inputs); its no-start
/// probability is Φ(−m/S) (Φ(−m/σ_model) once m < 0, a conservative choice that keeps the
/// probability monotone in the margin), and the night's is that of the most likely mode (the modes share their
/// driver, the cold, so the union is close to its largest member: the Fréchet lower bound). So the
/// probability is at least 50 % exactly when the binding margin is at most zero: the verdict, the
/// headline margin and the probability never disagree. The input variance comes from the sigma
/// points (central differences along each input axis at ±√3 σ: exact for a margin linear in the
/// inputs) or from keyed samples.
pub fn no_start_probability_from(
    night: &VehicleNight,
    centre: &Assessment,
    method: Method,
) -> Result<NoStartProbability, ModelError> {
    no_start_probability_in(night, centre, method, &mut NightContext::new())
}

/// [`no_start_probability_from`], sharing work with the vehicle's other runs through `ctx` (the
/// battery and fuel points reuse the central soak, the fuel points its compressions).
pub fn no_start_probability_in(
    night: &VehicleNight,
    centre: &Assessment,
    method: Method,
    ctx: &mut NightContext,
) -> Result<NoStartProbability, ModelError> {
    probability_around(night, &centre.modes, centre.state_of_charge, method, ctx)
}

/// The no-start probability around a night's central margins `centre` (its state of charge
/// `soc0`): the sigma points or samples are probes (margins only, see `assess::probe_in`).
pub(super) fn probability_around(
    night: &VehicleNight,
    centre: &ModeMargins,
    soc0: f64,
    method: Method,
    ctx: &mut NightContext,
) -> Result<NoStartProbability, ModelError> {
    let u = uncertainties(night);
    let mut variance = [0.0_f64; 4];
    let mut axis_variance = [[0.0_f64; DIMENSIONS]; 4];
    let (runs, standard_error_scale) = match method {
        Method::SigmaPoints => {
            let spread = 3.0_f64.sqrt();
            for i in 0..DIMENSIONS {
                let (plus, minus) = if i == FUEL_AXIS {
                    // The cold-flow limits move the fuel mode alone (`fuel_flow_margin_in`).
                    let fuel_point = |s: f64, ctx: &mut NightContext| {
                        let fuel = shifted_fuel(&night.fuel.description, s * u.fuel_sigma_k)?;
                        let margin_k =
                            fuel_flow_margin_in(night, &cold_flow_properties(&fuel)?, ctx)?;
                        Ok::<_, ModelError>(ModeMargins {
                            fuel_flow_k: margin_k,
                            ..*centre
                        })
                    };
                    (fuel_point(spread, ctx)?, fuel_point(-spread, ctx)?)
                } else {
                    (
                        probe_in(&perturbed(night, &u, &axis(i, spread), soc0)?, ctx)?.modes,
                        probe_in(&perturbed(night, &u, &axis(i, -spread), soc0)?, ctx)?.modes,
                    )
                };
                for ((mode, axes), total) in FailureMode::ALL
                    .iter()
                    .zip(axis_variance.iter_mut())
                    .zip(variance.iter_mut())
                {
                    let d = (plus.get(*mode) - minus.get(*mode)) / (2.0 * spread);
                    axes[i] = d * d;
                    *total += d * d;
                }
            }
            (2 * DIMENSIONS as u32, None)
        }
        Method::Sampling { samples, key } => {
            let samples = samples.max(2);
            let mut rng = SplitMix64(key);
            let mut sum = [0.0_f64; 4];
            let mut sum2 = [0.0_f64; 4];
            for _ in 0..samples {
                let p = Perturbation {
                    forecast: rng.normal(),
                    charge: rng.normal(),
                    health: rng.normal(),
                    fuel: rng.normal(),
                };
                let a = probe_in(&perturbed(night, &u, &p, soc0)?, ctx)?;
                for (k, mode) in FailureMode::ALL.iter().enumerate() {
                    let m = a.modes.get(*mode);
                    sum[k] += m;
                    sum2[k] += m * m;
                }
            }
            let n = f64::from(samples);
            for k in 0..4 {
                let mean = sum[k] / n;
                variance[k] = ((sum2[k] / n - mean * mean) * n / (n - 1.0)).max(0.0);
            }
            (samples, Some(n))
        }
    };
    let mut mode_probabilities = [0.0; 4];
    let mut spreads = [0.0; 4];
    for (k, mode) in FailureMode::ALL.iter().enumerate() {
        let sigma = calibrated_model_sigma(night, *mode);
        spreads[k] = (sigma * sigma + variance[k]).sqrt();
        mode_probabilities[k] = mode_probability(centre.get(*mode), sigma, spreads[k]);
    }
    let mut b = 0;
    for k in 1..4 {
        if mode_probabilities[k] > mode_probabilities[b] {
            b = k;
        }
    }
    let binding = FailureMode::ALL[b];
    let binding_margin = centre.get(binding);
    let sigma_b = calibrated_model_sigma(night, binding);
    // The input that moves the binding mode most, if it moves it more than the model's own error.
    let dominant = match method {
        Method::SigmaPoints => {
            let (mut best, mut best_v) = (UncertaintySource::Model, sigma_b * sigma_b);
            for (i, &v) in axis_variance[b].iter().enumerate() {
                if v > best_v {
                    (best, best_v) = (source(i), v);
                }
            }
            best
        }
        Method::Sampling { .. } => UncertaintySource::Model,
    };
    // Sampling: the spread's own sampling error, carried to the probability (delta method:
    // se(Var) ≈ Var √(2/(n−1)), dp/dVar = φ(β) m / (2 S³)).
    let standard_error = standard_error_scale.map_or(0.0, |n| {
        let s = spreads[b];
        let se_var = variance[b] * (2.0 / (n - 1.0)).sqrt();
        (normal_pdf(binding_margin / s) * binding_margin.abs() / (2.0 * s * s * s)) * se_var
    });
    Ok(NoStartProbability {
        probability: mode_probabilities[b].clamp(0.0, 1.0),
        binding,
        binding_margin,
        binding_spread: spreads[b],
        mode_probabilities,
        mode_spreads: spreads,
        margin_spread_k: spreads[mode_index(FailureMode::ChargeTemperature)],
        dominant,
        standard_error,
        model_runs: runs,
    })
}

/// A failure mode's no-start probability at margin `m` with the model's own error `sigma` and
/// the total spread `spread` (inputs and model).
///
/// Below zero the vehicle fails at its central inputs: the inputs' spread may not pull the
/// probability back towards 50 % (a colder night would otherwise read as less likely to fail, its
/// larger spread outweighing its lower margin); the model's own error alone applies. Continuous at
/// zero, monotone in the margin on both sides.
fn mode_probability(m: f64, sigma: f64, spread: f64) -> f64 {
    let s = if m < 0.0 { sigma } else { spread };
    normal_cdf(-m / s)
}

/// The no-start probability of a probe `centre` estimated with given total spreads per mode
/// (`spreads`, e.g. those of a nearby night) instead of its own sigma points: the search for a
/// plug-in time narrows its bracket with it before it computes the real probability.
pub(super) fn estimated_probability(
    night: &VehicleNight,
    centre: &Probe,
    spreads: &[f64; 4],
) -> f64 {
    FailureMode::ALL
        .iter()
        .zip(spreads)
        .map(|(&mode, &spread)| {
            let sigma = calibrated_model_sigma(night, mode);
            mode_probability(centre.modes.get(mode), sigma, spread.max(sigma))
        })
        .fold(0.0, f64::max)
}

/// True when the no-start probability around `centre` certainly exceeds `target`, from the
/// central margins alone: every mode's spread is at least its (calibrated) model error, so Φ(−m/σ_model) is a
/// lower bound of the mode's probability (equal to it below zero). Keep it a lower bound of
/// [`no_start_probability_from`] whenever that changes (the shared-work grid test checks it).
pub(crate) fn misses_target_for_sure(night: &VehicleNight, centre: &Probe, target: f64) -> bool {
    FailureMode::ALL
        .iter()
        .any(|&m| normal_cdf(-centre.modes.get(m) / calibrated_model_sigma(night, m)) > target)
}

/// A mode's model error under the night's calibration: the charge and cranking modes keep only
/// the morning-to-morning part plus the calibration's remaining spread (`learning` module doc;
/// exactly [`FailureMode::model_sigma`] uncalibrated).
pub fn calibrated_model_sigma(night: &VehicleNight, mode: FailureMode) -> f64 {
    let c = &night.options.calibration;
    match mode {
        FailureMode::ChargeTemperature => c.charge_model_sigma_k(),
        FailureMode::CrankingSpeed => c.cranking_model_sigma_rpm(),
        FailureMode::FrozenBattery | FailureMode::FuelFlow => mode.model_sigma(),
    }
}

fn axis(i: usize, s: f64) -> Perturbation {
    let mut p = Perturbation::default();
    match i {
        0 => p.forecast = s,
        1 => p.charge = s,
        2 => p.health = s,
        _ => p.fuel = s,
    }
    p
}

fn source(i: usize) -> UncertaintySource {
    match i {
        0 => UncertaintySource::Forecast,
        1 => UncertaintySource::BatteryCharge,
        2 => UncertaintySource::BatteryHealth,
        _ => UncertaintySource::FuelProperties,
    }
}

/// SplitMix64: a tiny, well-known deterministic generator (Steele, Lea & Flood 2014, from memory).
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    /// Standard normal by Box–Muller.
    fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

#[cfg(test)]
#[path = "uncertainty_tests.rs"]
mod tests;
