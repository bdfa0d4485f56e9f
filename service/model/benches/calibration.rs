//! Benchmarks of calibration: one assessment and one no-start probability with and without a
//! calibrated state (the calibration should add little), and one calibration update.

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::archetypes::ARCHETYPES;
use startmargin_model::assess::uncertainty::{Method, no_start_probability_from};
use startmargin_model::assess::{VehicleNight, assess, unassisted};
use startmargin_model::constants::celsius_to_kelvin;
use startmargin_model::learning::{
    AttemptOutcome, Belief, ObservedAttempt, VehicleCalibration, update,
};
use std::hint::black_box;

/// The first archetype's reference night at −15 °C (illustrative).
fn night(calibration: VehicleCalibration) -> VehicleNight {
    let mut n = unassisted::reference_night(&ARCHETYPES[0].engine, celsius_to_kelvin(-15.0));
    n.options.calibration = calibration;
    n
}

fn calibrated() -> VehicleCalibration {
    VehicleCalibration {
        thermal_offset_k: Belief {
            mean: -6.0,
            sd: 2.5,
        },
        cranking_log_factor: Belief {
            mean: -0.12,
            sd: 0.03,
        },
        cooldown_time_constant_s: Some(Belief {
            mean: 14_400.0,
            sd: 900.0,
        }),
        observations: 30,
    }
}

fn benches(c: &mut Criterion) {
    for (name, cal) in [
        ("uncalibrated", VehicleCalibration::uncalibrated()),
        ("calibrated", calibrated()),
    ] {
        let n = night(cal);
        c.bench_function(&format!("assess_{name}"), |b| {
            b.iter(|| assess(black_box(&n)).unwrap())
        });
        let centre = assess(&n).unwrap();
        c.bench_function(&format!("no_start_probability_{name}"), |b| {
            b.iter(|| {
                no_start_probability_from(black_box(&n), &centre, Method::SigmaPoints).unwrap()
            })
        });
    }
    let n = night(VehicleCalibration::uncalibrated());
    let attempt = ObservedAttempt {
        outcome: AttemptOutcome::Fired,
        cranking_s: 2.0,
        peak_cranking_rpm: Some(120.0),
        lowest_cranking_v: Some(9.5),
    };
    c.bench_function("calibration_update", |b| {
        b.iter(|| update(&calibrated(), black_box(&n), &attempt).unwrap())
    });
}

criterion_group!(calibration, benches);
criterion_main!(calibration);
