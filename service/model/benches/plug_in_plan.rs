//! Benchmarks of the depot plug-in plan on large invented depots: 1,500 candidates with 100
//! outlets on a 1 MW circuit (the circuit cannot bind: 100 heaters draw at most 150 kW), the same
//! depot on a 100 kW circuit (binding: the exact solver's case), and 500 candidates with 100
//! outlets on 1,000 kW.

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::plug_in_plan::{DepotLimits, PlugInCandidate, plan};
use std::hint::black_box;

/// A deterministic pseudo-random depot (LCG; invented data): no-start probabilities uniform in
/// [0, 1), the heater taking off a uniform share of it, heaters of 400–1,500 W.
fn depot(n: usize, key: u64) -> Vec<PlugInCandidate> {
    let mut s = key;
    let mut next = || {
        s = s
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|_| {
            let p_without = next();
            PlugInCandidate {
                p_without,
                p_with: p_without * next(),
                heater_w: [400.0, 750.0, 1000.0, 1500.0][(next() * 4.0) as usize % 4],
                plug_in_s: 0.0,
                margin_without_k: 40.0 * (0.5 - p_without) + 10.0 * (next() - 0.5),
            }
        })
        .collect()
}

fn benches(c: &mut Criterion) {
    let mut g = c.benchmark_group("plug_in_plan");
    g.sample_size(10);
    for (n, outlets, limit_w) in [(1_500, 100, 1.0e6), (1_500, 100, 1.0e5), (500, 100, 1.0e6)] {
        let candidates = depot(n, 11);
        let limits = DepotLimits {
            outlets,
            circuit_limit_w: Some(limit_w),
        };
        g.bench_function(
            format!("{n} candidates {outlets} outlets {} kW", limit_w / 1e3),
            |b| b.iter(|| plan(black_box(&candidates), black_box(&limits))),
        );
    }
    g.finish();
}

criterion_group!(plug_in_plan_benches, benches);
criterion_main!(plug_in_plan_benches);
