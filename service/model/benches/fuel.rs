//! Benchmarks of the fuel cold-flow chain: the gel outlook over a night of 14 hourly samples, the
//! fuel properties of a blended description, and the advice built from both.

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::fuel::{
    AdditiveTreatment, BiodieselFeedstock, FuelDescription, FuelGrade, TemperateClass,
    cold_flow_properties,
};
use startmargin_model::gel_risk::{FuelTemperatureSample, fuel_advice, gel_outlook};
use std::hint::black_box;

/// 14 hourly samples of a clear night falling from +5 °C to −18 °C (illustrative path).
fn night() -> [FuelTemperatureSample; 14] {
    core::array::from_fn(|i| {
        let h = i as f64;
        let fall = (h / 10.0).min(1.0);
        let air_k = 278.15 - 23.0 * fall;
        FuelTemperatureSample {
            at_s: h * 3600.0,
            tank_t_k: air_k + 4.0 * (1.0 - fall) + 1.5,
            line_t_k: air_k + 0.3,
            filter_t_k: air_k + 0.5,
        }
    })
}

fn fuel() -> FuelDescription {
    FuelDescription {
        biodiesel_fraction: 0.2,
        feedstock: BiodieselFeedstock::Soy,
        no1_blend_fraction: 0.2,
        additive: Some(AdditiveTreatment::typical(283.15)),
        ..FuelDescription::of_grade(FuelGrade::En590Temperate(TemperateClass::D))
    }
}

fn benches(c: &mut Criterion) {
    let samples = night();
    let f = fuel();
    let props = cold_flow_properties(&f).expect("valid fuel");
    let departure_s = 13.0 * 3600.0;

    c.bench_function("gel_outlook_14_hourly_samples", |b| {
        b.iter(|| {
            gel_outlook(
                black_box(&props),
                black_box(&samples),
                black_box(departure_s),
            )
        })
    });
    c.bench_function("cold_flow_properties_blend", |b| {
        b.iter(|| cold_flow_properties(black_box(&f)))
    });
    let outlook = gel_outlook(&props, &samples, departure_s).expect("valid outlook");
    let mut out = Vec::with_capacity(8);
    c.bench_function("fuel_advice_gelling_night", |b| {
        b.iter(|| {
            fuel_advice(
                black_box(&f),
                &props,
                black_box(&outlook),
                Some(248.15),
                &mut out,
            )
            .map(|()| out.len())
        })
    });
}

criterion_group!(fuel_benches, benches);
criterion_main!(fuel_benches);
