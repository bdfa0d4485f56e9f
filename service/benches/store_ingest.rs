//! Ingestion rate of the store (attempts per second) for each back-end, at batch sizes of 1,
//! 100 and 1000 attempts per commit, each commit also writing the vehicle's calibration with
//! its version check (what a report batch does). SQLite on a temporary file (WAL,
//! `synchronous = FULL`: every commit is on disk); PostgreSQL at
//! `TEST_POSTGRES_URL_FOR_STARTMARGIN` when set (`. .ci/postgres.sh && start_test_postgres`),
//! skipped with a line otherwise. Not run in CI: `cargo bench -p startmargin-service --bench
//! store_ingest`.

use std::sync::atomic::{AtomicI64, Ordering};

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use startmargin_service::store::{
    AttemptKey, CalibrationWrite, CommitBatch, Store, StoreConfig, StoredAttempt,
    StoredCalibration, StoredOutcome,
};

/// Batch sizes measured: one attempt per report, a depot's morning, a large fleet's morning.
const BATCH_SIZES: [usize; 3] = [1, 100, 1000];

/// Attempt times never repeat across iterations, so every commit inserts new rows.
static NEXT_MS: AtomicI64 = AtomicI64::new(1_700_000_000_000);

fn attempt(vehicle_id: String, attempted_at_ms: i64) -> StoredAttempt {
    StoredAttempt {
        key: AttemptKey {
            vehicle_id,
            attempted_at_ms,
        },
        archetype_id: "bench-archetype".to_string(),
        outcome: StoredOutcome::FiredAfterRetries,
        cranking_s: 4.2,
        peak_cranking_rpm: Some(170.0),
        lowest_cranking_v: Some(9.4),
        air_c: -24.0,
        coolant_c: Some(-23.5),
        preheat_s: 15.0,
        block_heater_on: false,
        predicted_no_start_probability: 0.21,
        uncalibrated_no_start_probability: 0.18,
        predicted_margin_k: 2.5,
        calibrated_observations: 12,
        received_at_ms: attempted_at_ms + 30_000,
    }
}

fn calibration() -> StoredCalibration {
    StoredCalibration {
        thermal_offset_mean_k: 0.4,
        thermal_offset_sd_k: 1.1,
        cranking_log_factor_mean: -0.05,
        cranking_log_factor_sd: 0.15,
        cooldown_tau_mean_s: Some(15_000.0),
        cooldown_tau_sd_s: Some(2_000.0),
        observations: 12,
        updated_at_ms: 0,
        version: 0,
    }
}

/// Measures one back-end: each iteration commits one batch of `size` attempts spread over
/// up to 100 vehicles, plus the first vehicle's calibration.
fn bench_backend(c: &mut Criterion, name: &str, config: StoreConfig) {
    let rt = tokio::runtime::Runtime::new().expect("runtime");
    let store = rt.block_on(Store::open(&config)).expect("open the store");
    let tenant = format!("bench-{}", std::process::id());
    let mut group = c.benchmark_group(format!("store_ingest/{name}"));
    group.sample_size(10);
    for size in BATCH_SIZES {
        group.throughput(Throughput::Elements(size as u64));
        let mut version: Option<i64> = None;
        let vehicle = format!("cal-{size}");
        group.bench_with_input(BenchmarkId::from_parameter(size), &size, |b, &size| {
            b.iter(|| {
                let base = NEXT_MS.fetch_add(size as i64, Ordering::Relaxed);
                let batch = CommitBatch {
                    attempts: (0..size)
                        .map(|i| attempt(format!("veh-{}", i % 100), base + i as i64))
                        .collect(),
                    vehicles: vec![CalibrationWrite {
                        id: vehicle.clone(),
                        expected_version: version,
                        calibration: calibration(),
                    }],
                    archetypes: vec![],
                };
                let outcome = rt.block_on(store.commit(&tenant, &batch)).expect("commit");
                assert_eq!(outcome.inserted(), size);
                version = outcome.vehicle_versions.get(&vehicle).copied();
            });
        });
    }
    group.finish();
    rt.block_on(store.close());
}

fn store_ingest(c: &mut Criterion) {
    let dir = std::env::temp_dir().join(format!("startmargin-bench-{}", std::process::id()));
    let sqlite = StoreConfig {
        url: format!("sqlite://{}", dir.join("starts.db").display()),
        ..StoreConfig::default()
    };
    bench_backend(c, "sqlite", sqlite);
    let _ = std::fs::remove_dir_all(&dir);
    match std::env::var("TEST_POSTGRES_URL_FOR_STARTMARGIN") {
        Ok(url) if !url.is_empty() => {
            let postgres = StoreConfig {
                url,
                ..StoreConfig::default()
            };
            bench_backend(c, "postgres", postgres);
        }
        _ => eprintln!(
            "store_ingest/postgres not run: TEST_POSTGRES_URL_FOR_STARTMARGIN is not set \
             (`. .ci/postgres.sh && start_test_postgres`)"
        ),
    }
}

criterion_group!(benches, store_ingest);
criterion_main!(benches);
