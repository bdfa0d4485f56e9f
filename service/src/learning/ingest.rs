//! Learning from a batch of observed start attempts: each vehicle's attempts in time order, each
//! one first predicted (with the calibration of the attempts before it, and without any) and then
//! learned from by the model's Bayesian update. CPU-bound, run on the compute pool; no I/O (the
//! caller loads the priors from the store and commits what this returns).

use std::collections::HashMap;

use startmargin_model::learning::{self, VehicleCalibration};

use crate::convert::attempts::ConvertedAttempt;
use crate::error::ApiError;

/// What learning from one attempt gave.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Learned {
    /// The calibrated no-start probability before this attempt was learned from, 0..1.
    pub predicted_p: f64,
    /// The uncalibrated (archetype defaults) no-start probability, 0..1.
    pub uncalibrated_p: f64,
    /// The calibrated charge-temperature margin predicted for the attempt, K.
    pub predicted_margin_k: f64,
    /// Observations behind the prediction.
    pub observations_before: u32,
    /// The vehicle's calibration after it.
    pub posterior: VehicleCalibration,
    /// The archetype pool after it.
    pub pool_after: VehicleCalibration,
}

/// Calibration states of one tenant's vehicles and archetype pools, as loaded and as updated.
#[derive(Debug, Clone, Default)]
pub struct States {
    /// By vehicle id.
    pub vehicles: HashMap<String, VehicleCalibration>,
    /// By archetype id ("" for custom engines, which pool together).
    pub pools: HashMap<String, VehicleCalibration>,
}

impl States {
    /// The prior of a vehicle: its own state once it has start attempts, else its archetype
    /// pool's prior (the archetype defaults without one) with its own cool-down belief, if a
    /// key-off was fitted.
    pub fn prior_of(&self, vehicle_id: &str, archetype_id: &str) -> VehicleCalibration {
        let own = self.vehicles.get(vehicle_id);
        match own {
            Some(own) if own.observations > 0 => *own,
            _ => VehicleCalibration {
                cooldown_time_constant_s: own.and_then(|o| o.cooldown_time_constant_s),
                ..self
                    .pools
                    .get(archetype_id)
                    .map_or_else(VehicleCalibration::uncalibrated, learning::vehicle_prior)
            },
        }
    }
}

/// Learns from `attempts` (already validated, new ones only) in order, updating `states`.
/// The result at `i` belongs to `attempts[i]`; a model failure refuses that attempt alone and
/// leaves the states as they were before it.
pub fn learn(
    attempts: &[&ConvertedAttempt],
    paths: &[String],
    states: &mut States,
) -> Vec<Result<Learned, ApiError>> {
    attempts
        .iter()
        .zip(paths)
        .map(|(a, path)| {
            let prior = states.prior_of(&a.vehicle_id, &a.archetype_id);
            let calibrated = learning::update(&prior, &a.night, &a.observed)
                .map_err(|e| ApiError::from_model(path, e))?;
            let uncalibrated =
                learning::update(&VehicleCalibration::uncalibrated(), &a.night, &a.observed)
                    .map_err(|e| ApiError::from_model(path, e))?;
            let pool = states
                .pools
                .get(&a.archetype_id)
                .copied()
                .unwrap_or_else(learning::uncalibrated_pool);
            let pool_after = learning::update_pool(&pool, &calibrated);
            states
                .vehicles
                .insert(a.vehicle_id.clone(), calibrated.posterior);
            states.pools.insert(a.archetype_id.clone(), pool_after);
            Ok(Learned {
                predicted_p: calibrated.predicted_no_start_probability,
                uncalibrated_p: uncalibrated.predicted_no_start_probability,
                predicted_margin_k: calibrated.predicted_charge_margin_k,
                observations_before: prior.observations,
                posterior: calibrated.posterior,
                pool_after,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use startmargin_model::learning::Belief;

    use super::*;

    #[test]
    fn a_vehicle_known_only_by_its_cool_downs_follows_its_pool_otherwise() {
        let mut pool = learning::uncalibrated_pool();
        pool.thermal_offset_k.mean = -4.0;
        pool.observations = 20;
        let tau = Belief {
            mean: 9_000.0,
            sd: 900.0,
        };
        let mut states = States::default();
        states.pools.insert("heavy-di-i6".into(), pool);
        states.vehicles.insert(
            "cooled".into(),
            VehicleCalibration {
                cooldown_time_constant_s: Some(tau),
                ..VehicleCalibration::uncalibrated()
            },
        );
        let prior = states.prior_of("cooled", "heavy-di-i6");
        assert_eq!(prior.cooldown_time_constant_s, Some(tau));
        assert_eq!(
            prior.thermal_offset_k,
            learning::vehicle_prior(&pool).thermal_offset_k
        );
        assert_eq!(prior.observations, 0);

        // With attempts of its own, its own state wins, cool-down included.
        let mut own = VehicleCalibration::uncalibrated();
        own.thermal_offset_k.mean = 2.0;
        own.observations = 3;
        own.cooldown_time_constant_s = Some(tau);
        states.vehicles.insert("seen".into(), own);
        assert_eq!(states.prior_of("seen", "heavy-di-i6"), own);
        // A vehicle never seen: the pool's prior, no cool-down.
        let fresh = states.prior_of("new", "heavy-di-i6");
        assert_eq!(fresh, learning::vehicle_prior(&pool));
        assert_eq!(fresh.cooldown_time_constant_s, None);
    }
}
