//! No-start probability: the uncertainty of the inputs propagated through the real model.
//!
//! Uncertain inputs (one standard deviation each; all *estimates*, documented in
//! [`Uncertainties`]): the forecast air temperature (the caller's per-step spread, else a default
//! that grows with lead time), the battery state of charge (tighter when measured from a rested
//! voltage), the battery's health, and the fuel's cold-flow limits (CFPP reproducibility is about
//! 4 °C, reference.md §9.1, cold-flow.eu, confirmed: σ ≈ 2 K). The model's own structural error is
//! a further normal term on the margin ([`MODEL_MARGIN_SIGMA_K`]), applied analytically.
//!
//! For each perturbed input set the model gives either a hard failure (frozen battery, cranking
//! below the minimum starting speed, fuel that will not pass the filter: probability 1) or a margin
//! m, whose no-start probability is Φ(−m/σ_model). The no-start probability is the expectation of
//! that smooth function over the inputs, computed by:
//! - [`Method::SigmaPoints`] (default): the unscented transform, 2d + 1 = 9 model runs, weights of
//!   Julier & Uhlmann (1997) with κ = 3 − d (*from memory*);
//! - [`Method::Sampling`]: plain Monte Carlo with a deterministic stream keyed by the caller, and a
//!   reported standard error; the reference the sigma points are checked against.
//!
//! Deterministic: the same night and key always give the same probability.

use super::{Assessment, LimitingFactor, VehicleNight, assess};
use crate::error::ModelError;
use crate::fuel::{FuelBase, cold_flow_properties};

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
    /// Probability of a no-start at the departure, 0..1.
    pub probability: f64,
    /// Expected margin over the inputs, K.
    pub margin_mean_k: f64,
    /// Spread of the margin (inputs and model together), one standard deviation, K.
    pub margin_spread_k: f64,
    /// The source that moves the outcome most.
    pub dominant: UncertaintySource,
    /// Standard error of the probability estimate (sampling only; 0 for sigma points).
    pub standard_error: f64,
    /// Model runs used.
    pub model_runs: u32,
}

/// Standard normal cumulative distribution Φ(x), by the complementary error function
/// (Abramowitz & Stegun 7.1.26 form refined to ~1e-7; check values in the tests).
pub fn normal_cdf(x: f64) -> f64 {
    0.5 * erfc(-x / std::f64::consts::SQRT_2)
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
        let props = cold_flow_properties(&n.fuel.description)?;
        let d = p.fuel * u.fuel_sigma_k;
        n.fuel.description.base = FuelBase::Measured(crate::fuel::ColdFlowProperties {
            cloud_point_k: props.cloud_point_k + d,
            cfpp_k: props.cfpp_k + d,
            pour_point_k: props.pour_point_k + d,
        });
        // The derived properties already include blending and additive effects.
        n.fuel.description.biodiesel_fraction = 0.0;
        n.fuel.description.no1_blend_fraction = 0.0;
        n.fuel.description.additive = None;
    }
    n.options.include_margin_path = false;
    Ok(n)
}

/// Soft no-start probability of one model run.
fn run_probability(a: &Assessment) -> f64 {
    match a.limiting_factor {
        LimitingFactor::FrozenBattery
        | LimitingFactor::WaxedFuel
        | LimitingFactor::SlowCranking
            if !a.start_expected =>
        {
            1.0
        }
        _ => normal_cdf(-a.margin_k / MODEL_MARGIN_SIGMA_K),
    }
}

/// No-start probability of a night (the state of charge the assessment used is `soc0`).
pub fn no_start_probability(
    night: &VehicleNight,
    soc0: f64,
    method: Method,
) -> Result<NoStartProbability, ModelError> {
    let u = uncertainties(night);
    match method {
        Method::SigmaPoints => sigma_points(night, &u, soc0),
        Method::Sampling { samples, key } => sampling(night, &u, soc0, samples.max(2), key),
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

fn sigma_points(
    night: &VehicleNight,
    u: &Uncertainties,
    soc0: f64,
) -> Result<NoStartProbability, ModelError> {
    // Julier–Uhlmann: κ = 3 − d, points at ±√(d + κ) = ±√3 σ, weights κ/(d+κ) and 1/(2(d+κ)).
    let n = DIMENSIONS as f64;
    let kappa = 3.0 - n;
    let spread = (n + kappa).sqrt();
    let w0 = kappa / (n + kappa);
    let wi = 1.0 / (2.0 * (n + kappa));
    let centre = assess(&perturbed(night, u, &Perturbation::default(), soc0)?)?;
    let mut p = w0 * run_probability(&centre);
    let mut mean = w0 * centre.margin_k;
    let mut pairs = [(0.0, 0.0, 0.0, 0.0); DIMENSIONS];
    for (i, pair) in pairs.iter_mut().enumerate() {
        let plus = assess(&perturbed(night, u, &axis(i, spread), soc0)?)?;
        let minus = assess(&perturbed(night, u, &axis(i, -spread), soc0)?)?;
        p += wi * (run_probability(&plus) + run_probability(&minus));
        mean += wi * (plus.margin_k + minus.margin_k);
        *pair = (
            plus.margin_k,
            minus.margin_k,
            run_probability(&plus),
            run_probability(&minus),
        );
    }
    let mut var = w0 * (centre.margin_k - mean).powi(2);
    let mut dominant = (UncertaintySource::Model, 0.0_f64);
    for (i, (mp, mm, pp, pm)) in pairs.iter().enumerate() {
        var += wi * ((mp - mean).powi(2) + (mm - mean).powi(2));
        // Influence: the larger of the margin swing (in model sigmas) and the probability swing.
        let swing = ((mp - mm).abs() / (2.0 * spread * MODEL_MARGIN_SIGMA_K)).max((pp - pm).abs());
        if swing > dominant.1 {
            dominant = (source(i), swing);
        }
    }
    let dominant = if dominant.1 > 1.0 / spread {
        dominant.0
    } else {
        UncertaintySource::Model
    };
    Ok(NoStartProbability {
        probability: p.clamp(0.0, 1.0),
        margin_mean_k: mean,
        margin_spread_k: (var + MODEL_MARGIN_SIGMA_K * MODEL_MARGIN_SIGMA_K).sqrt(),
        dominant,
        standard_error: 0.0,
        model_runs: 1 + 2 * DIMENSIONS as u32,
    })
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

fn sampling(
    night: &VehicleNight,
    u: &Uncertainties,
    soc0: f64,
    samples: u32,
    key: u64,
) -> Result<NoStartProbability, ModelError> {
    let mut rng = SplitMix64(key);
    let (mut sum_p, mut sum_p2, mut sum_m, mut sum_m2) = (0.0, 0.0, 0.0, 0.0);
    for _ in 0..samples {
        let p = Perturbation {
            forecast: rng.normal(),
            charge: rng.normal(),
            health: rng.normal(),
            fuel: rng.normal(),
        };
        let a = assess(&perturbed(night, u, &p, soc0)?)?;
        let q = run_probability(&a);
        sum_p += q;
        sum_p2 += q * q;
        sum_m += a.margin_k;
        sum_m2 += a.margin_k * a.margin_k;
    }
    let n = f64::from(samples);
    let p = sum_p / n;
    let var_p = (sum_p2 / n - p * p).max(0.0) * n / (n - 1.0);
    let mean = sum_m / n;
    let var_m = (sum_m2 / n - mean * mean).max(0.0);
    Ok(NoStartProbability {
        probability: p,
        margin_mean_k: mean,
        margin_spread_k: (var_m + MODEL_MARGIN_SIGMA_K * MODEL_MARGIN_SIGMA_K).sqrt(),
        dominant: UncertaintySource::Model,
        standard_error: (var_p / n).sqrt(),
        model_runs: samples,
    })
}

#[cfg(test)]
#[path = "uncertainty_tests.rs"]
mod tests;
