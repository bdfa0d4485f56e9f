//! Pooling across an archetype's vehicles (hierarchy in the module doc of `learning`): the prior a
//! vehicle without history starts from, and the pool's update by one vehicle update.

use super::{
    Belief, CRANKING_BETWEEN_VEHICLE_SD, CRANKING_PRIOR_SD, CalibrationUpdate,
    POOL_SD_FLOOR_FRACTION, THERMAL_BETWEEN_VEHICLE_SD_K, THERMAL_PRIOR_SD_K, VehicleCalibration,
};

/// The pool of an archetype that has seen nothing: centred on zero, with the spread that makes
/// [`vehicle_prior`] exactly as wide as an uncalibrated vehicle.
pub fn uncalibrated_pool() -> VehicleCalibration {
    let between = |total: f64, between: f64| (total * total - between * between).sqrt();
    VehicleCalibration {
        thermal_offset_k: Belief {
            mean: 0.0,
            sd: between(THERMAL_PRIOR_SD_K, THERMAL_BETWEEN_VEHICLE_SD_K),
        },
        cranking_log_factor: Belief {
            mean: 0.0,
            sd: between(CRANKING_PRIOR_SD, CRANKING_BETWEEN_VEHICLE_SD),
        },
        cooldown_time_constant_s: None,
        observations: 0,
    }
}

/// Prior for a vehicle from its archetype's pool: N(μ_a, s_a² + τ_between²) per factor, no
/// cool-down constant (not pooled), no observations of its own. A pool that has seen nothing gives
/// exactly [`VehicleCalibration::uncalibrated`].
pub fn vehicle_prior(pool: &VehicleCalibration) -> VehicleCalibration {
    if pool.observations == 0 {
        return VehicleCalibration::uncalibrated();
    }
    let widen = |b: Belief, between: f64| Belief {
        mean: b.mean,
        sd: b.sd.hypot(between),
    };
    VehicleCalibration {
        thermal_offset_k: widen(pool.thermal_offset_k, THERMAL_BETWEEN_VEHICLE_SD_K),
        cranking_log_factor: widen(pool.cranking_log_factor, CRANKING_BETWEEN_VEHICLE_SD),
        cooldown_time_constant_s: None,
        observations: 0,
    }
}

/// The pool after one vehicle update: the update's likelihood message (posterior ÷ prior, in
/// Gaussian natural parameters), widened by the between-vehicle spread, multiplied into the pool.
/// `observations` counts the attempts the pool has seen.
pub fn update_pool(
    pool: &VehicleCalibration,
    vehicle_update: &CalibrationUpdate,
) -> VehicleCalibration {
    let u = vehicle_update;
    VehicleCalibration {
        thermal_offset_k: fold(
            pool.thermal_offset_k,
            u.prior.thermal_offset_k,
            u.posterior.thermal_offset_k,
            THERMAL_BETWEEN_VEHICLE_SD_K,
        ),
        cranking_log_factor: fold(
            pool.cranking_log_factor,
            u.prior.cranking_log_factor,
            u.posterior.cranking_log_factor,
            CRANKING_BETWEEN_VEHICLE_SD,
        ),
        cooldown_time_constant_s: pool.cooldown_time_constant_s,
        observations: pool.observations.saturating_add(1),
    }
}

/// Deviation beyond which a vehicle's message is down-weighted, in standard deviations.
const OUTLIER_SIGMAS: f64 = 2.0;

/// Folds one message into a pool belief.
fn fold(pool: Belief, prior: Belief, posterior: Belief, between_sd: f64) -> Belief {
    let prior_precision = 1.0 / (prior.sd * prior.sd);
    let posterior_precision = 1.0 / (posterior.sd * posterior.sd);
    let message_precision = posterior_precision - prior_precision;
    // No information (or a floor that widened the posterior): the pool is unchanged.
    if !message_precision.is_finite() || message_precision <= 1e-12 {
        return pool;
    }
    let message_mean =
        (posterior.mean * posterior_precision - prior.mean * prior_precision) / message_precision;
    if !message_mean.is_finite() {
        return pool;
    }
    let mut message_var = 1.0 / message_precision + between_sd * between_sd;
    // Bounded influence (in the manner of Huber's M-estimators): a vehicle far outside its
    // archetype has a fault of its own (worn rings, a dead plug) and must not drag the prior of
    // its healthy siblings. Beyond 2 standard deviations of the pool's prediction the message is
    // widened so that it pulls no harder than a 2-sigma message would.
    let deviation = (message_mean - pool.mean).abs() / (message_var + pool.sd * pool.sd).sqrt();
    if deviation > OUTLIER_SIGMAS {
        message_var *= (deviation / OUTLIER_SIGMAS).powi(2);
    }
    let pool_precision = 1.0 / (pool.sd * pool.sd);
    let precision = pool_precision + 1.0 / message_var;
    let mean = (pool.mean * pool_precision + message_mean / message_var) / precision;
    Belief {
        mean,
        sd: (1.0 / precision)
            .sqrt()
            .max(POOL_SD_FLOOR_FRACTION * between_sd),
    }
}
