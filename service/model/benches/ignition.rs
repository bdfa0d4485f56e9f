//! Benchmarks of the ignition requirement, fuel evaporation cooling and start aids: the per-request
//! hot path (delay, closed-form required temperature) and the small aid balances.
#![allow(missing_docs)]

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::aids::{
    self, DEFAULT_GLOW_PLATEAU_GAIN_K, DEFAULT_GLOW_TIME_CONSTANT_S, GlowPlugs,
};
use startmargin_model::evaporation;
use startmargin_model::ignition::{self, DelayCorrelation};

const CORRELATIONS: [(&str, DelayCorrelation); 3] = [
    ("hardenberg_hase", DelayCorrelation::HardenbergHase),
    ("wolfer", DelayCorrelation::Wolfer),
    ("chemistry_fit", DelayCorrelation::DetailedChemistryFit),
];

fn bench_ignition(c: &mut Criterion) {
    let mut group = c.benchmark_group("ignition");
    for (name, corr) in CORRELATIONS {
        group.bench_function(format!("delay/{name}"), |b| {
            b.iter(|| {
                ignition::ignition_delay_s(
                    black_box(corr),
                    black_box(640.0),
                    black_box(35.0e5),
                    black_box(45.0),
                    black_box(0.8),
                    black_box(150.0),
                )
            })
        });
        group.bench_function(format!("required_t/{name}"), |b| {
            b.iter(|| {
                ignition::required_temperature_k(
                    black_box(corr),
                    black_box(35.0e5),
                    black_box(ignition::crank_window_s(30.0, 150.0)),
                    black_box(45.0),
                    black_box(0.8),
                    black_box(150.0),
                )
            })
        });
    }
    group.finish();
}

fn bench_evaporation_and_aids(c: &mut Criterion) {
    let mut group = c.benchmark_group("aids");
    group.bench_function("evaporation_cooling", |b| {
        b.iter(|| {
            evaporation::evaporation_cooling_k(
                black_box(30.0),
                black_box(253.15),
                black_box(650.0),
                black_box(776.0),
            )
        })
    });
    let plugs = GlowPlugs {
        plateau_gain_k: DEFAULT_GLOW_PLATEAU_GAIN_K,
        preheat_time_constant_s: DEFAULT_GLOW_TIME_CONSTANT_S,
        relay_ok: true,
        plugs_ok: true,
    };
    group.bench_function("glow_plug_gain", |b| {
        b.iter(|| aids::glow_plug_gain_k(black_box(&plugs), black_box(5.0)))
    });
    group.bench_function("intake_heater_chain", |b| {
        b.iter(|| {
            let flow = aids::cranking_air_mass_flow_kg_s(
                black_box(0.010),
                black_box(120.0),
                black_box(101_325.0),
                black_box(253.15),
                aids::DEFAULT_CRANKING_VOLUMETRIC_EFFICIENCY,
                287.05,
            )?;
            aids::intake_heater_rise_k(
                black_box(2000.0),
                aids::DEFAULT_INTAKE_HEATER_EFFICIENCY,
                flow,
                1003.0,
            )
        })
    });
    group.finish();
}

criterion_group!(benches, bench_ignition, bench_evaporation_and_aids);
criterion_main!(benches);
