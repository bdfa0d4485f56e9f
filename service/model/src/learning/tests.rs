//! Tests of the calibration update: it moves the right way, monotonically, the pooled prior behaves,
//! hostile input gives errors, and an uncalibrated assessment is the assessment without calibration.

use super::*;
use crate::archetypes::ARCHETYPES;
use crate::assess::uncertainty::{Method, calibrated_model_sigma, no_start_probability_from};
use crate::assess::{FailureMode, VehicleNight, assess, unassisted};
use crate::constants::celsius_to_kelvin;

/// The reference night of the first archetype, moved to an attempt at 0 s in air at `air_c`.
fn attempt_night(air_c: f64) -> VehicleNight {
    let a = &ARCHETYPES[0];
    let n = unassisted::reference_night(&a.engine, celsius_to_kelvin(air_c));
    night_at_attempt(
        n.engine,
        a.aids,
        n.battery,
        n.oil,
        n.fuel,
        false,
        &AttemptConditions {
            at_s: 0.0,
            air_t_k: celsius_to_kelvin(air_c),
            coolant_t_k: None,
            oil_t_k: None,
            fuel_t_k: None,
            battery_rest_v: None,
            preheat_s: a.aids.glow_preheat_s,
            block_heater_on: false,
        },
    )
    .expect("valid attempt night")
}

fn attempt(outcome: AttemptOutcome) -> ObservedAttempt {
    ObservedAttempt {
        outcome,
        cranking_s: 2.0,
        peak_cranking_rpm: None,
        lowest_cranking_v: None,
    }
}

/// Uncalibrated is the identity: on a grid of archetypes and air temperatures, the default options
/// carry the uncalibrated state, every mode's model error is bit for bit the fixed one, the budget
/// carries a zero offset, and the cranking speed is the cranking model's own.
#[test]
fn uncalibrated_is_the_identity_on_a_grid() {
    assert_eq!(
        crate::assess::AssessOptions::default().calibration,
        VehicleCalibration::uncalibrated()
    );
    for a in ARCHETYPES.iter() {
        for air_c in [-40.0, -25.0, -10.0, 0.0, 15.0] {
            let n = unassisted::reference_night(&a.engine, celsius_to_kelvin(air_c));
            for mode in FailureMode::ALL {
                assert_eq!(
                    calibrated_model_sigma(&n, mode).to_bits(),
                    mode.model_sigma().to_bits()
                );
            }
            let r = assess(&n).unwrap();
            assert_eq!(r.budget.calibration_offset_k.to_bits(), 0.0_f64.to_bits());
            let mut moved = n.clone();
            moved.options.calibration.thermal_offset_k.mean = 1.0;
            let m = assess(&moved).unwrap();
            assert!((m.margin_k - r.margin_k - 1.0).abs() < 1e-9);
        }
    }
}

#[test]
fn a_start_raises_the_offset_and_a_failure_lowers_it() {
    let n = attempt_night(-15.0);
    let prior = VehicleCalibration::uncalibrated();
    let fired = update(&prior, &n, &attempt(AttemptOutcome::Fired)).unwrap();
    let failed = update(&prior, &n, &attempt(AttemptOutcome::DidNotFire)).unwrap();
    assert!(fired.thermal_informative && failed.thermal_informative);
    assert!(fired.posterior.thermal_offset_k.mean > 0.0);
    assert!(failed.posterior.thermal_offset_k.mean < 0.0);
    assert!(failed.posterior.thermal_offset_k.sd < prior.thermal_offset_k.sd);
    assert_eq!(fired.posterior.observations, 1);
    assert!((0.0..=1.0).contains(&fired.predicted_no_start_probability));
}

/// A failure at a colder night is less surprising, so it lowers the offset less (monotone).
#[test]
fn a_failure_teaches_less_the_colder_the_night() {
    let prior = VehicleCalibration::uncalibrated();
    let mut last = f64::NEG_INFINITY;
    for air_c in [10.0, 0.0, -10.0, -20.0, -30.0] {
        let u = update(
            &prior,
            &attempt_night(air_c),
            &attempt(AttemptOutcome::DidNotFire),
        )
        .unwrap();
        let mean = u.posterior.thermal_offset_k.mean;
        assert!(mean >= last - 1e-9, "{air_c} °C: {mean} after {last}");
        last = mean;
    }
}

#[test]
fn retries_pull_the_margin_towards_zero() {
    let n = attempt_night(0.0);
    let prior = VehicleCalibration::uncalibrated();
    let quick = update(&prior, &n, &attempt(AttemptOutcome::Fired)).unwrap();
    let retries = update(&prior, &n, &attempt(AttemptOutcome::FiredAfterRetries)).unwrap();
    assert!(retries.posterior.thermal_offset_k.mean < quick.posterior.thermal_offset_k.mean);
    assert!(retries.posterior.thermal_offset_k.sd < quick.posterior.thermal_offset_k.sd);
}

#[test]
fn slow_cranking_lowers_the_cranking_factor() {
    let n = attempt_night(-10.0);
    let prior = VehicleCalibration::uncalibrated();
    let base = update(&prior, &n, &attempt(AttemptOutcome::Fired)).unwrap();
    let modelled_rpm = base.predicted_cranking_rpm;
    let slow = ObservedAttempt {
        peak_cranking_rpm: Some(0.7 * modelled_rpm),
        ..attempt(AttemptOutcome::Fired)
    };
    let u = update(&prior, &n, &slow).unwrap();
    let f = u.posterior.cranking_log_factor;
    assert!(f.mean < 0.0 && f.mean > 0.7_f64.ln());
    assert!(f.sd < prior.cranking_log_factor.sd);
    // The calibrated assessment cranks slower.
    let mut calibrated = n.clone();
    calibrated.options.calibration = u.posterior;
    let r = assess(&calibrated).unwrap();
    assert!(r.cranking.result.crank_rpm < modelled_rpm);
}

/// A failure with a starter that could not reach the starting speed says nothing about the charge.
#[test]
fn a_failure_explained_by_cranking_leaves_the_offset() {
    let n = attempt_night(-20.0);
    let stalled = ObservedAttempt {
        peak_cranking_rpm: Some(0.5 * n.engine.min_start_speed_rpm),
        ..attempt(AttemptOutcome::DidNotFire)
    };
    let prior = VehicleCalibration::uncalibrated();
    let u = update(&prior, &n, &stalled).unwrap();
    assert!(!u.thermal_informative);
    assert_eq!(u.posterior.thermal_offset_k, prior.thermal_offset_k);
}

#[test]
fn calibrated_spread_narrows_the_probability() {
    let n = attempt_night(-25.0);
    let centre = assess(&n).unwrap();
    let wide = no_start_probability_from(&n, &centre, Method::SigmaPoints).unwrap();
    let mut sure = n.clone();
    sure.options.calibration.thermal_offset_k.sd = 1.0;
    let sure_centre = assess(&sure).unwrap();
    let narrow = no_start_probability_from(&sure, &sure_centre, Method::SigmaPoints).unwrap();
    assert!(narrow.margin_spread_k < wide.margin_spread_k);
}

#[test]
fn the_pool_learns_and_widens_into_a_vehicle_prior() {
    let empty = uncalibrated_pool();
    assert_eq!(vehicle_prior(&empty), VehicleCalibration::uncalibrated());
    let mut pool = empty;
    let n = attempt_night(5.0);
    for _ in 0..20 {
        let prior = vehicle_prior(&pool);
        let u = update(&prior, &n, &attempt(AttemptOutcome::DidNotFire)).unwrap();
        pool = update_pool(&pool, &u);
    }
    assert_eq!(pool.observations, 20);
    assert!(pool.thermal_offset_k.mean < 0.0);
    assert!(pool.thermal_offset_k.sd < empty.thermal_offset_k.sd);
    let v = vehicle_prior(&pool);
    assert!(v.thermal_offset_k.sd > pool.thermal_offset_k.sd);
    assert_eq!(v.observations, 0);
}

#[test]
fn cooldown_fits_combine() {
    let c = update_cooldown(&VehicleCalibration::uncalibrated(), 14_400.0, None).unwrap();
    let b = c.cooldown_time_constant_s.unwrap();
    assert_eq!(b.mean, 14_400.0);
    let c2 = update_cooldown(&c, 18_000.0, None).unwrap();
    let b2 = c2.cooldown_time_constant_s.unwrap();
    assert!(b2.mean > 14_400.0 && b2.mean < 18_000.0 && b2.sd < b.sd);
    assert!(update_cooldown(&c, f64::NAN, None).is_err());
    assert!(update_cooldown(&c, 10.0, None).is_err());
}

#[test]
fn hostile_input_is_an_error_never_a_panic() {
    let n = attempt_night(-5.0);
    let prior = VehicleCalibration::uncalibrated();
    let bad_attempts = [
        ObservedAttempt {
            cranking_s: -1.0,
            ..attempt(AttemptOutcome::Fired)
        },
        ObservedAttempt {
            cranking_s: f64::NAN,
            ..attempt(AttemptOutcome::Fired)
        },
        ObservedAttempt {
            cranking_s: f64::INFINITY,
            ..attempt(AttemptOutcome::Fired)
        },
        ObservedAttempt {
            cranking_s: 0.0,
            ..attempt(AttemptOutcome::Fired)
        },
        ObservedAttempt {
            peak_cranking_rpm: Some(1_500.0),
            ..attempt(AttemptOutcome::Fired)
        },
        ObservedAttempt {
            peak_cranking_rpm: Some(-3.0),
            ..attempt(AttemptOutcome::Fired)
        },
        ObservedAttempt {
            lowest_cranking_v: Some(40.0),
            ..attempt(AttemptOutcome::Fired)
        },
        ObservedAttempt {
            lowest_cranking_v: Some(f64::NEG_INFINITY),
            ..attempt(AttemptOutcome::Fired)
        },
    ];
    for a in bad_attempts {
        assert!(update(&prior, &n, &a).is_err(), "{a:?}");
    }
    let mut bad_prior = prior;
    bad_prior.thermal_offset_k.sd = 0.0;
    assert!(update(&bad_prior, &n, &attempt(AttemptOutcome::Fired)).is_err());
    bad_prior = prior;
    bad_prior.cranking_log_factor.mean = f64::NAN;
    assert!(update(&bad_prior, &n, &attempt(AttemptOutcome::Fired)).is_err());
    let a = &ARCHETYPES[0];
    let good = AttemptConditions {
        at_s: 0.0,
        air_t_k: 260.0,
        coolant_t_k: None,
        oil_t_k: None,
        fuel_t_k: None,
        battery_rest_v: None,
        preheat_s: 0.0,
        block_heater_on: false,
    };
    let bad_conditions = [
        AttemptConditions {
            at_s: f64::NAN,
            ..good
        },
        AttemptConditions {
            air_t_k: 10.0,
            ..good
        },
        AttemptConditions {
            coolant_t_k: Some(f64::INFINITY),
            ..good
        },
        AttemptConditions {
            battery_rest_v: Some(33.0),
            ..good
        },
        AttemptConditions {
            preheat_s: -1.0,
            ..good
        },
    ];
    for c in bad_conditions {
        assert!(
            night_at_attempt(
                n.engine,
                a.aids,
                n.battery,
                n.oil,
                n.fuel.clone(),
                false,
                &c
            )
            .is_err(),
            "{c:?}"
        );
    }
    // Extreme but valid readings stay finite.
    let extreme = ObservedAttempt {
        peak_cranking_rpm: Some(1_000.0),
        lowest_cranking_v: Some(0.0),
        cranking_s: 600.0,
        ..attempt(AttemptOutcome::DidNotFire)
    };
    let u = update(&prior, &attempt_night(40.0), &extreme).unwrap();
    assert!(u.posterior.validate().is_ok());
}
