//! Benchmark of the whole answer for one vehicle, `decide()`, per built-in archetype: the central
//! assessment with its margin path, the no-start probability, the block-heater plug-in search and
//! the other actions. Each archetype is fitted with a 1 kW block heater, parked warm at −20 °C on
//! 15W-40 and No. 2 diesel, so every part of the decision runs (a vehicle at risk at a depot).
//!
//! The nights are illustrative: coolant at 80 °C at the start, 14 hourly forecast steps at a
//! constant air temperature with a 3 m/s breeze and half cloud, departure after 12 h. On No. 2
//! diesel the fuel's cold flow binds at −20 °C, so the heater cannot meet the target and its
//! search stops early; the second group fills No. 1 diesel, where the charge binds and the
//! plug-in search runs in full (a heater vehicle at a depot).

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::archetypes::ARCHETYPES;
use startmargin_model::assess::decision::{DecisionPolicy, decide};
use startmargin_model::assess::unassisted::reference_night;
use startmargin_model::assess::{Telemetry, VehicleNight};
use startmargin_model::fuel::{FuelBase, FuelGrade};
use startmargin_model::oil::SaeGrade;
use startmargin_model::soak::ForecastHour;
use std::hint::black_box;

const HOUR_S: f64 = 3_600.0;

/// Archetype `a` with a 1 kW block heater, parked warm, soaked 12 h at `air_c`.
fn night(a: &startmargin_model::archetypes::Archetype, air_c: f64) -> VehicleNight {
    let air_t_k = air_c + 273.15;
    let mut n = reference_night(&a.engine, air_t_k);
    n.aids = a.aids;
    n.aids.block_heater_w = 1_000.0;
    n.forecast.hours = vec![
        ForecastHour {
            air_t_k,
            wind_mps: 3.0,
            cloud_fraction: 0.5
        };
        14
    ];
    n.telemetry = Telemetry {
        observed_at_s: Some(0.0),
        coolant_t_k: Some(353.15),
        ..Telemetry::default()
    };
    n.departure_s = 12.0 * HOUR_S;
    n.battery.state_of_charge = Some(0.9);
    n.battery.health_fraction = 0.9;
    n.oil = SaeGrade {
        winter: Some(15),
        hot: 40,
    };
    n.fuel.description.base = FuelBase::Grade(FuelGrade::UsNo2);
    n.options.include_margin_path = true;
    n
}

fn bench_decide(c: &mut Criterion) {
    for (group, grade) in [
        ("decide −20 °C, 1 kW block heater", FuelGrade::UsNo2),
        (
            "decide −20 °C, 1 kW block heater, No. 1 diesel (full plug-in search)",
            FuelGrade::UsNo1,
        ),
    ] {
        bench_group(c, group, grade);
    }
}

fn bench_group(c: &mut Criterion, group: &str, grade: FuelGrade) {
    let policy = DecisionPolicy::default();
    let nights: Vec<_> = ARCHETYPES
        .iter()
        .map(|a| {
            let mut n = night(a, -20.0);
            n.fuel.description.base = FuelBase::Grade(grade);
            (a.id, n)
        })
        .collect();
    let mut g = c.benchmark_group(group);
    for (id, n) in &nights {
        let d = decide(n, &policy).expect("valid night");
        eprintln!(
            "{id}: {:.1} % no-start, {} actions, heater plan {}",
            d.probability.probability * 100.0,
            d.actions.len(),
            d.heater.is_some()
        );
        g.bench_function(*id, |b| b.iter(|| decide(black_box(n), &policy)));
    }
    g.bench_function("mix of all archetypes (per vehicle = this / 7)", |b| {
        b.iter(|| {
            for (_, n) in &nights {
                let _ = black_box(decide(black_box(n), &policy));
            }
        })
    });
    g.finish();
}

criterion_group!(benches, bench_decide);
criterion_main!(benches);
