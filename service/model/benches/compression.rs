//! Benchmarks of the compression chain: the production integrator (target ≤ 3 µs per call), the
//! leak-area inversion, the isentropic reference and, for scale, the fine-step reference integrator.

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::air;
use startmargin_model::compression::{self, CompressionInput};
use startmargin_model::geometry::EngineGeometry;
use startmargin_model::heat_transfer::WallHeatTransfer;
use std::hint::black_box;

/// A small-bore direct-injection cylinder cranking at 150 rpm at −20 °C, 1.5 mm² leak.
fn cold_crank(heat_transfer: WallHeatTransfer) -> CompressionInput {
    CompressionInput {
        geometry: EngineGeometry {
            bore_m: 0.084,
            stroke_m: 0.090,
            con_rod_m: 0.1575,
            compression_ratio: 16.5,
            cylinders: 4,
            ivc_deg_abdc: 30.0,
        },
        crank_rpm: 150.0,
        intake_t_k: 253.15,
        intake_p_pa: 101_325.0,
        wall_t_k: 253.15,
        heat_transfer,
        heat_transfer_multiplier: 1.0,
        leak_area_m2: 1.5e-6,
        crankcase_p_pa: 101_325.0,
    }
}

fn benches(c: &mut Criterion) {
    let hohenberg = cold_crank(WallHeatTransfer::Hohenberg);
    let woschni = cold_crank(WallHeatTransfer::Woschni);
    let sealed_adiabatic = CompressionInput {
        heat_transfer_multiplier: 0.0,
        leak_area_m2: 0.0,
        ..hohenberg
    };
    c.bench_function("compress/hohenberg_leak", |b| {
        b.iter(|| compression::compress(black_box(&hohenberg)))
    });
    c.bench_function("compress/woschni_leak", |b| {
        b.iter(|| compression::compress(black_box(&woschni)))
    });
    c.bench_function("compress/adiabatic_sealed", |b| {
        b.iter(|| compression::compress(black_box(&sealed_adiabatic)))
    });
    c.bench_function("air/isentropic_compression", |b| {
        b.iter(|| {
            air::isentropic_compression(black_box(253.15), black_box(101_325.0), black_box(16.2))
        })
    });
    let peak = compression::compress(&hohenberg)
        .map(|r| r.peak_p_pa)
        .unwrap_or(2.5e6);
    let template = CompressionInput {
        leak_area_m2: 0.0,
        ..hohenberg
    };
    c.bench_function("compress/leak_area_for_peak_pressure", |b| {
        b.iter(|| {
            compression::leak_area_for_peak_pressure_m2(black_box(&template), black_box(peak))
        })
    });
    let mut slow = c.benchmark_group("reference");
    slow.sample_size(10);
    slow.bench_function("compress_reference/hohenberg_leak", |b| {
        b.iter(|| compression::compress_reference(black_box(&hohenberg)))
    });
    slow.finish();
}

criterion_group!(compression_benches, benches);
criterion_main!(compression_benches);
