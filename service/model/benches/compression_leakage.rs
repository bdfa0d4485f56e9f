//! Benchmarks of the production compression integrator on the leakage path as the assessment
//! drives it: the crankcase at the intake (barometric) pressure, so the charge starts at crankcase
//! pressure at intake valve closing, with each archetype's default leak area. These are the calls
//! whose first step used to be redone in substeps because the IVC pressure rounded a hair above the
//! crankcase pressure. A charge that a large leak really holds near crankcase pressure (slow
//! cranking, worn engine) is timed beside them: there the substeps are needed and kept.

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::archetypes::find;
use startmargin_model::assess::calibration::WALL_HEAT_TRANSFER;
use startmargin_model::compression::{self, CompressionInput};
use startmargin_model::geometry::EngineGeometry;
use std::hint::black_box;

/// Archetype `id` cranking at 150 rpm, soaked at `air_c` (intake = wall), crankcase = intake =
/// 101.325 kPa, its default leak area, the calibrated wall correlation at multiplier 1.
fn archetype_crank(id: &str, air_c: f64) -> CompressionInput {
    let engine = find(id).expect("built-in archetype").engine;
    CompressionInput {
        geometry: engine.geometry,
        crank_rpm: 150.0,
        intake_t_k: air_c + 273.15,
        intake_p_pa: 101_325.0,
        wall_t_k: air_c + 273.15,
        heat_transfer: WALL_HEAT_TRANSFER,
        heat_transfer_multiplier: 1.0,
        leak_area_m2: engine.leak_area_m2,
        crankcase_p_pa: 101_325.0,
    }
}

fn benches(c: &mut Criterion) {
    let mut g = c.benchmark_group("compress_leakage");
    for (id, air_c) in [
        ("light-di-v8", -20.0),
        ("compact-di-i4", 0.0),
        ("medium-di-i6", -40.0),
        ("compact-di-i4", -20.0),
    ] {
        let input = archetype_crank(id, air_c);
        g.bench_function(format!("{id} {air_c} °C 150 rpm"), |b| {
            b.iter(|| compression::compress(black_box(&input)))
        });
    }
    // A 70 mm bore at 30 rpm with a 4.4 mm² leak: the charge never builds pressure.
    let held = CompressionInput {
        geometry: EngineGeometry {
            bore_m: 0.07,
            stroke_m: 0.077,
            con_rod_m: 3.0 * 0.0385,
            compression_ratio: 12.0,
            cylinders: 4,
            ivc_deg_abdc: 0.0,
        },
        crank_rpm: 30.0,
        intake_t_k: 273.15,
        intake_p_pa: 101_325.0,
        wall_t_k: 273.15,
        heat_transfer: WALL_HEAT_TRANSFER,
        heat_transfer_multiplier: 0.0,
        leak_area_m2: 4.42e-6,
        crankcase_p_pa: 101_325.0,
    };
    g.bench_function("held at crankcase pressure 30 rpm 4.4 mm²", |b| {
        b.iter(|| compression::compress(black_box(&held)))
    });
    g.finish();
}

criterion_group!(compression_leakage_benches, benches);
criterion_main!(compression_leakage_benches);
