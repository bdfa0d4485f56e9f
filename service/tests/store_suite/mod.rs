//! The store's behaviour suite, one function per behaviour taking a freshly opened [`Store`];
//! `store_sqlite.rs` and `store_postgres.rs` run every function against their back-end, so
//! both back-ends are held to the same behaviour.

#![allow(dead_code, unreachable_pub)]

pub mod fixtures;

use std::collections::HashSet;

use startmargin_service::store::{
    AttemptKey, AttemptResult, CalibrationWrite, CommitBatch, Store, StoredOutcome,
};

use fixtures::{attempt, calibration, tenant_ids};

/// Attempts and calibrations read back exactly as written, newest first.
pub async fn round_trip(store: Store) {
    let (t, _) = tenant_ids();
    let a1 = attempt("truck-1", 1_000);
    let mut a2 = attempt("truck-1", 2_000);
    a2.outcome = StoredOutcome::DidNotFire;
    a2.peak_cranking_rpm = None;
    a2.coolant_c = Some(-21.25);
    let batch = CommitBatch {
        attempts: vec![a1.clone(), a2.clone()],
        vehicles: vec![CalibrationWrite {
            id: "truck-1".into(),
            expected_version: None,
            calibration: calibration(0.5),
        }],
        archetypes: vec![CalibrationWrite {
            id: "arch-a".into(),
            expected_version: None,
            calibration: calibration(-0.25),
        }],
    };
    let outcome = store.commit(&t, &batch).await.expect("commit");
    assert_eq!(outcome.attempts, [AttemptResult::Inserted; 2]);
    assert_eq!(outcome.vehicle_versions["truck-1"], 1);
    assert_eq!(outcome.archetype_versions["arch-a"], 1);

    let recent = store
        .recent_attempts(&t, "truck-1", 10)
        .await
        .expect("recent");
    assert_eq!(recent, vec![a2.clone(), a1.clone()]);
    let fleet = store.fleet_attempts(&t, 1_500, 10).await.expect("fleet");
    assert_eq!(fleet, vec![a2]);

    let (vehicles, archetypes) = store
        .load(
            &t,
            &["truck-1".into(), "truck-9".into()],
            &["arch-a".into()],
        )
        .await
        .expect("load");
    let mut want = calibration(0.5);
    want.version = 1;
    assert_eq!(vehicles.len(), 1);
    assert_eq!(vehicles["truck-1"], want);
    assert_eq!(archetypes["arch-a"].thermal_offset_mean_k, -0.25);
    assert_eq!(
        store.vehicle_calibration(&t, "truck-1").await.expect("one"),
        Some(want)
    );
    assert_eq!(
        store
            .vehicle_calibration(&t, "truck-9")
            .await
            .expect("none"),
        None
    );

    let known = store
        .known_attempts(
            &t,
            &[
                a1.key.clone(),
                AttemptKey {
                    vehicle_id: "truck-1".into(),
                    attempted_at_ms: 1_001,
                },
            ],
        )
        .await
        .expect("known");
    assert_eq!(known, HashSet::from([a1.key.clone()]));
}
