//! Benchmarks of the overnight soak and the cranking balance: one node over a 14-hour forecast
//! (targets about 1 µs), the steady cranking speed (about 1 µs), the oil viscosity, and the
//! cool-down fit over a key-off log.

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::battery::Battery;
use startmargin_model::cranking::{
    CrankingInput, DEFAULT_CABLE_RESISTANCE_OHM, Starter, cranking_speed,
};
use startmargin_model::oil::{SaeGrade, dynamic_viscosity_pa_s};
use startmargin_model::soak::{
    FilterMount, Forecast, ForecastHour, HeaterSchedule, engine_node, fit_cooldown_time_constant_s,
    fuel_filter_node, fuel_tank_node, node_temperature_k,
};
use std::hint::black_box;

const HOUR_S: f64 = 3_600.0;
const START_S: f64 = 1_700_000_000.0;

/// A 14-hour winter night: air falling from −5 °C to −20 °C and back, gusty, clearing at midnight
/// (illustrative).
fn night() -> [ForecastHour; 14] {
    core::array::from_fn(|i| {
        let x = i as f64;
        ForecastHour {
            air_t_k: 268.15 - 15.0 * (x * core::f64::consts::PI / 13.0).sin(),
            wind_mps: 3.0 + 2.0 * x.cos(),
            cloud_fraction: if i < 6 { 0.8 } else { 0.0 },
        }
    })
}

fn car_at_minus_10() -> CrankingInput {
    CrankingInput {
        battery: Battery {
            rated_cca_a: 600.0,
            nominal_v: 12.0,
            state_of_charge: 0.9,
            health_fraction: 1.0,
            temperature_k: 263.15,
        },
        starter: Starter {
            rated_power_w: 2_000.0,
            nominal_v: 12.0,
            gear_ratio: 14.0,
            cable_resistance_ohm: DEFAULT_CABLE_RESISTANCE_OHM,
        },
        displacement_m3: 2.8e-3,
        cylinders: 4,
        compression_ratio: 17.5,
        oil: SaeGrade {
            winter: Some(5),
            hot: 30,
        },
        oil_t_k: 263.15,
    }
}

fn benches(c: &mut Criterion) {
    let hours = night();
    let forecast = Forecast {
        start_s: START_S,
        step_s: HOUR_S,
        hours: &hours,
    };
    let depart_s = START_S + 14.0 * HOUR_S;
    let engine = engine_node(2.8e-3);
    let tank = fuel_tank_node(400.0, 0.4);
    let filter = fuel_filter_node(FilterMount::Frame);
    let heater = HeaterSchedule {
        power_w: 1_000.0,
        on_from_s: depart_s - 3.0 * HOUR_S,
        on_until_s: depart_s,
    };

    c.bench_function("soak/engine_hot_14h", |b| {
        b.iter(|| {
            node_temperature_k(
                black_box(&engine),
                black_box(363.15),
                START_S,
                &forecast,
                None,
                black_box(depart_s),
            )
        })
    });
    c.bench_function("soak/engine_hot_14h_block_heater", |b| {
        b.iter(|| {
            node_temperature_k(
                black_box(&engine),
                black_box(363.15),
                START_S,
                &forecast,
                Some(black_box(&heater)),
                black_box(depart_s),
            )
        })
    });
    c.bench_function("soak/tank_14h", |b| {
        b.iter(|| {
            node_temperature_k(
                black_box(&tank),
                black_box(278.15),
                START_S,
                &forecast,
                None,
                black_box(depart_s),
            )
        })
    });
    c.bench_function("soak/frame_filter_14h", |b| {
        b.iter(|| {
            node_temperature_k(
                black_box(&filter),
                black_box(278.15),
                START_S,
                &forecast,
                None,
                black_box(depart_s),
            )
        })
    });

    let input = car_at_minus_10();
    c.bench_function("cranking/car_minus_10c", |b| {
        b.iter(|| cranking_speed(black_box(&input)))
    });
    let oil = SaeGrade {
        winter: Some(15),
        hot: 40,
    };
    c.bench_function("oil/dynamic_viscosity", |b| {
        b.iter(|| dynamic_viscosity_pa_s(black_box(oil), black_box(250.0)))
    });

    // A key-off log: every 5 min for 8 h (97 readings).
    let readings: [(f64, f64); 97] = core::array::from_fn(|i| {
        let t_s = 300.0 * i as f64;
        (START_S + t_s, 263.15 + 100.0 * (-t_s / 10_800.0).exp())
    });
    c.bench_function("soak/fit_cooldown_97_readings", |b| {
        b.iter(|| fit_cooldown_time_constant_s(black_box(&readings), black_box(263.15)))
    });
}

criterion_group!(soak_cranking, benches);
criterion_main!(soak_cranking);
