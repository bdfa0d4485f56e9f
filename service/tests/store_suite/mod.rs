//! The store's behaviour suite, one function per behaviour taking a freshly opened [`Store`];
//! `store_sqlite.rs` and `store_postgres.rs` run every function against their back-end, so
//! both back-ends are held to the same behaviour.

#![allow(dead_code, unreachable_pub)]

pub mod fixtures;

use std::collections::HashSet;

use startmargin_service::store::{
    AttemptKey, AttemptResult, CalibrationWrite, CommitBatch, CooldownRecorded, MAX_BATCH_ATTEMPTS,
    MAX_BATCH_CALIBRATIONS, MAX_FLEET_ATTEMPTS, MAX_ID_BYTES, MAX_LOOKUP_KEYS, MAX_RECENT_ATTEMPTS,
    MAX_RECENT_COOLDOWN_FITS, MAX_TENANT_BYTES, Store, StoreConfig, StoreError, StoredAttempt,
    StoredCooldownFit, StoredOutcome,
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

/// A resend with the same content (received later) is a duplicate, never stored twice; the
/// same key twice within one batch too.
pub async fn idempotent_duplicates(store: Store) {
    let (t, _) = tenant_ids();
    let batch = CommitBatch {
        attempts: vec![attempt("truck-2", 10), attempt("truck-2", 20)],
        ..CommitBatch::default()
    };
    let first = store.commit(&t, &batch).await.expect("first");
    assert_eq!(first.inserted(), 2);
    let mut resend = batch.clone();
    for a in &mut resend.attempts {
        a.received_at_ms += 3_600_000;
    }
    resend.attempts.push(attempt("truck-2", 30));
    resend.attempts.push(attempt("truck-2", 30));
    let second = store.commit(&t, &resend).await.expect("resend");
    assert_eq!(
        second.attempts,
        [
            AttemptResult::Duplicate,
            AttemptResult::Duplicate,
            AttemptResult::Inserted,
            AttemptResult::Duplicate
        ]
    );
    let stored = store.fleet_attempts(&t, 0, 100).await.expect("fleet");
    assert_eq!(stored.len(), 3, "no attempt stored twice");
    // The first receive time is kept.
    assert_eq!(
        stored[2].received_at_ms,
        attempt("truck-2", 10).received_at_ms
    );
}

/// The same key with other content is a per-item conflict; the stored attempt is kept and
/// the rest of the batch is written.
pub async fn conflicts(store: Store) {
    let (t, _) = tenant_ids();
    let original = attempt("truck-3", 100);
    store
        .commit(&t, &one_attempt(original.clone()))
        .await
        .expect("first");
    let mut changed = original.clone();
    changed.outcome = StoredOutcome::DidNotFire;
    let mut changed_reading = original.clone();
    changed_reading.lowest_cranking_v = None;
    let batch = CommitBatch {
        attempts: vec![changed, attempt("truck-3", 200), changed_reading],
        ..CommitBatch::default()
    };
    let outcome = store.commit(&t, &batch).await.expect("commit");
    assert_eq!(
        outcome.attempts,
        [
            AttemptResult::Conflict,
            AttemptResult::Inserted,
            AttemptResult::Conflict
        ]
    );
    assert_eq!(outcome.conflicts(), 2);
    let stored = store
        .recent_attempts(&t, "truck-3", 10)
        .await
        .expect("recent");
    assert_eq!(stored, vec![attempt("truck-3", 200), original]);
}

fn one_attempt(a: StoredAttempt) -> CommitBatch {
    CommitBatch {
        attempts: vec![a],
        ..CommitBatch::default()
    }
}

fn vehicle_write(id: &str, expected: Option<i64>, offset_k: f64) -> CalibrationWrite {
    CalibrationWrite {
        id: id.to_string(),
        expected_version: expected,
        calibration: calibration(offset_k),
    }
}

/// Calibration writes need the version the caller loaded; a mismatch aborts the whole batch,
/// attempts included.
pub async fn version_check(store: Store) {
    let (t, _) = tenant_ids();
    let write = |expected, offset_k, at_ms| CommitBatch {
        attempts: vec![attempt("truck-4", at_ms)],
        vehicles: vec![vehicle_write("truck-4", expected, offset_k)],
        archetypes: vec![],
    };
    let v1 = store
        .commit(&t, &write(None, 1.0, 1))
        .await
        .expect("create");
    assert_eq!(v1.vehicle_versions["truck-4"], 1);
    let stale_create = store.commit(&t, &write(None, 2.0, 2)).await;
    assert!(
        matches!(stale_create, Err(StoreError::Concurrent(_))),
        "{stale_create:?}"
    );
    let v2 = store
        .commit(&t, &write(Some(1), 3.0, 3))
        .await
        .expect("update");
    assert_eq!(v2.vehicle_versions["truck-4"], 2);
    let stale_update = store.commit(&t, &write(Some(1), 4.0, 4)).await;
    assert!(
        matches!(stale_update, Err(StoreError::Concurrent(_))),
        "{stale_update:?}"
    );
    // An archetype mismatch after a good vehicle write rolls the vehicle write back too.
    let mixed = CommitBatch {
        attempts: vec![attempt("truck-4", 5)],
        vehicles: vec![vehicle_write("truck-4", Some(2), 5.0)],
        archetypes: vec![vehicle_write("arch-z", Some(7), 5.0)],
    };
    let aborted = store.commit(&t, &mixed).await;
    assert!(
        matches!(aborted, Err(StoreError::Concurrent(_))),
        "{aborted:?}"
    );

    let stored = store
        .vehicle_calibration(&t, "truck-4")
        .await
        .expect("read")
        .expect("present");
    assert_eq!((stored.version, stored.thermal_offset_mean_k), (2, 3.0));
    let times: Vec<i64> = store
        .recent_attempts(&t, "truck-4", 10)
        .await
        .expect("recent")
        .iter()
        .map(|a| a.key.attempted_at_ms)
        .collect();
    assert_eq!(times, [3, 1], "aborted batches wrote no attempt");
}

/// Tenant B neither reads nor overwrites tenant A's rows, with the same vehicle and
/// archetype ids in both.
pub async fn tenant_isolation(store: Store) {
    let (a, b) = tenant_ids();
    let batch = CommitBatch {
        attempts: vec![attempt("shared-id", 1_000)],
        vehicles: vec![vehicle_write("shared-id", None, 1.0)],
        archetypes: vec![vehicle_write("arch-a", None, 1.0)],
    };
    store.commit(&a, &batch).await.expect("tenant a");

    let key = [attempt("shared-id", 1_000).key];
    assert!(
        store
            .known_attempts(&b, &key)
            .await
            .expect("known")
            .is_empty()
    );
    assert!(
        store
            .recent_attempts(&b, "shared-id", 10)
            .await
            .expect("recent")
            .is_empty()
    );
    assert!(
        store
            .fleet_attempts(&b, 0, 10)
            .await
            .expect("fleet")
            .is_empty()
    );
    assert_eq!(
        store
            .vehicle_calibration(&b, "shared-id")
            .await
            .expect("cal"),
        None
    );
    let (v, p) = store
        .load(&b, &["shared-id".into()], &["arch-a".into()])
        .await
        .expect("load");
    assert!(v.is_empty() && p.is_empty());

    // B's writes of the same ids are B's own: new rows, no conflict, no version clash.
    let mut theirs = attempt("shared-id", 1_000);
    theirs.outcome = StoredOutcome::DidNotFire;
    let b_batch = CommitBatch {
        attempts: vec![theirs.clone()],
        vehicles: vec![vehicle_write("shared-id", None, -9.0)],
        archetypes: vec![vehicle_write("arch-a", None, -9.0)],
    };
    let outcome = store.commit(&b, &b_batch).await.expect("tenant b");
    assert_eq!(outcome.attempts, [AttemptResult::Inserted]);
    assert_eq!(outcome.vehicle_versions["shared-id"], 1);

    assert_eq!(
        store.recent_attempts(&a, "shared-id", 10).await.expect("a"),
        vec![attempt("shared-id", 1_000)]
    );
    assert_eq!(
        store.recent_attempts(&b, "shared-id", 10).await.expect("b"),
        vec![theirs]
    );
    let a_cal = store
        .vehicle_calibration(&a, "shared-id")
        .await
        .expect("a cal");
    assert_eq!(a_cal.map(|c| c.thermal_offset_mean_k), Some(1.0));
    let (_, a_pools) = store
        .load(&a, &[], &["arch-a".into()])
        .await
        .expect("load a");
    assert_eq!(a_pools["arch-a"].thermal_offset_mean_k, 1.0);
}

/// The field an invalid-argument error names, or a panic naming what came instead.
fn refused_field<T: std::fmt::Debug>(result: Result<T, StoreError>) -> String {
    match result {
        Err(StoreError::InvalidArgument { field, .. }) => field,
        other => panic!("expected InvalidArgument, got {other:?}"),
    }
}

/// Caps on batch sizes, lookups, returned rows and string lengths give typed errors.
pub async fn limits(store: Store) {
    let (t, _) = tenant_ids();
    let too_many = CommitBatch {
        attempts: (0..=MAX_BATCH_ATTEMPTS as i64)
            .map(|i| attempt("truck-5", i))
            .collect(),
        ..CommitBatch::default()
    };
    assert_eq!(
        refused_field(store.commit(&t, &too_many).await),
        "batch.attempts"
    );
    let at_cap = CommitBatch {
        attempts: too_many.attempts[..MAX_BATCH_ATTEMPTS].to_vec(),
        ..CommitBatch::default()
    };
    let outcome = store.commit(&t, &at_cap).await.expect("a full batch");
    assert_eq!(outcome.inserted(), MAX_BATCH_ATTEMPTS);
    let many_writes = CommitBatch {
        vehicles: (0..=MAX_BATCH_CALIBRATIONS)
            .map(|i| vehicle_write(&format!("v{i}"), None, 0.0))
            .collect(),
        ..CommitBatch::default()
    };
    assert_eq!(
        refused_field(store.commit(&t, &many_writes).await),
        "batch.vehicles"
    );

    let keys: Vec<AttemptKey> = (0..=MAX_LOOKUP_KEYS as i64)
        .map(|i| attempt("truck-5", i).key)
        .collect();
    assert_eq!(refused_field(store.known_attempts(&t, &keys).await), "keys");
    let known = store
        .known_attempts(&t, &keys[..MAX_LOOKUP_KEYS])
        .await
        .expect("keys at the cap");
    assert_eq!(known.len(), MAX_BATCH_ATTEMPTS);
    let ids: Vec<String> = (0..=MAX_LOOKUP_KEYS).map(|i| format!("v{i}")).collect();
    assert_eq!(
        refused_field(store.load(&t, &ids, &[]).await),
        "vehicle_ids"
    );

    for limit in [0, MAX_RECENT_ATTEMPTS + 1] {
        assert_eq!(
            refused_field(store.recent_attempts(&t, "truck-5", limit).await),
            "limit"
        );
    }
    for limit in [0, MAX_FLEET_ATTEMPTS + 1] {
        assert_eq!(
            refused_field(store.fleet_attempts(&t, 0, limit).await),
            "limit"
        );
    }
    let page = store
        .recent_attempts(&t, "truck-5", MAX_RECENT_ATTEMPTS)
        .await
        .expect("a full page");
    assert_eq!(page.len(), MAX_RECENT_ATTEMPTS);
    assert_eq!(page[0].key.attempted_at_ms, MAX_BATCH_ATTEMPTS as i64 - 1);

    let long_tenant = "t".repeat(MAX_TENANT_BYTES + 1);
    assert_eq!(
        refused_field(store.fleet_attempts(&long_tenant, 0, 1).await),
        "tenant"
    );
    let ok_tenant = "t".repeat(MAX_TENANT_BYTES);
    assert!(store.fleet_attempts(&ok_tenant, 0, 1).await.is_ok());
    let long_id = "é".repeat(MAX_ID_BYTES / 2 + 1);
    assert_eq!(
        refused_field(store.recent_attempts(&t, &long_id, 1).await),
        "vehicle_id"
    );
}

/// A change that spoils an attempt.
type Spoil = Box<dyn Fn(&mut StoredAttempt)>;

/// Values that must not be stored are refused before storage, and a batch with one bad item
/// writes nothing.
pub async fn hostile_values(store: Store) {
    let (t, _) = tenant_ids();
    let cases: Vec<(&str, Spoil)> = vec![
        ("cranking_s", Box::new(|a| a.cranking_s = f64::NAN)),
        ("cranking_s", Box::new(|a| a.cranking_s = -1.0)),
        ("air_c", Box::new(|a| a.air_c = f64::INFINITY)),
        (
            "coolant_c",
            Box::new(|a| a.coolant_c = Some(f64::NEG_INFINITY)),
        ),
        (
            "peak_cranking_rpm",
            Box::new(|a| a.peak_cranking_rpm = Some(f64::NAN)),
        ),
        (
            "lowest_cranking_v",
            Box::new(|a| a.lowest_cranking_v = Some(-0.5)),
        ),
        ("preheat_s", Box::new(|a| a.preheat_s = f64::NAN)),
        (
            "predicted_no_start_probability",
            Box::new(|a| a.predicted_no_start_probability = 1.5),
        ),
        (
            "predicted_margin_k",
            Box::new(|a| a.predicted_margin_k = f64::NAN),
        ),
        ("key.vehicle_id", Box::new(|a| a.key.vehicle_id.clear())),
        (
            "key.vehicle_id",
            Box::new(|a| a.key.vehicle_id = "x".repeat(129)),
        ),
        (
            "key.vehicle_id",
            Box::new(|a| a.key.vehicle_id = "a\0b".into()),
        ),
        ("archetype_id", Box::new(|a| a.archetype_id = "\n".into())),
    ];
    for (field, spoil) in &cases {
        let mut bad = attempt("truck-6", 7);
        spoil(&mut bad);
        let batch = CommitBatch {
            attempts: vec![attempt("truck-6", 1), bad],
            ..CommitBatch::default()
        };
        assert_eq!(
            refused_field(store.commit(&t, &batch).await),
            format!("batch.attempts[1].{field}")
        );
    }
    // A custom engine has no archetype: the empty id is stored.
    let mut custom = attempt("truck-6", 9);
    custom.archetype_id.clear();
    store
        .commit(&t, &one_attempt(custom))
        .await
        .expect("custom engine");

    let mut bad_cal = vehicle_write("truck-6", None, f64::NAN);
    let batch = |w: CalibrationWrite| CommitBatch {
        attempts: vec![attempt("truck-6", 2)],
        vehicles: vec![w],
        archetypes: vec![],
    };
    assert_eq!(
        refused_field(store.commit(&t, &batch(bad_cal.clone())).await),
        "batch.vehicles[0].calibration.thermal_offset_mean_k"
    );
    bad_cal.calibration.thermal_offset_mean_k = 0.0;
    bad_cal.calibration.cranking_log_factor_sd = -0.1;
    assert_eq!(
        refused_field(store.commit(&t, &batch(bad_cal.clone())).await),
        "batch.vehicles[0].calibration.cranking_log_factor_sd"
    );
    bad_cal.calibration.cranking_log_factor_sd = 0.1;
    bad_cal.calibration.cooldown_tau_sd_s = None;
    assert_eq!(
        refused_field(store.commit(&t, &batch(bad_cal.clone())).await),
        "batch.vehicles[0].calibration.cooldown_tau_sd_s"
    );
    bad_cal.calibration.cooldown_tau_sd_s = Some(1.0);
    bad_cal.expected_version = Some(0);
    assert_eq!(
        refused_field(store.commit(&t, &batch(bad_cal.clone())).await),
        "batch.vehicles[0].expected_version"
    );
    let twice = CommitBatch {
        vehicles: vec![
            vehicle_write("dup", None, 0.0),
            vehicle_write("dup", None, 0.0),
        ],
        ..CommitBatch::default()
    };
    assert_eq!(
        refused_field(store.commit(&t, &twice).await),
        "batch.vehicles[1].id"
    );
    assert_eq!(refused_field(store.commit("", &twice).await), "tenant");

    let stored = store
        .recent_attempts(&t, "truck-6", 10)
        .await
        .expect("recent");
    assert_eq!(
        stored
            .iter()
            .map(|a| a.key.attempted_at_ms)
            .collect::<Vec<_>>(),
        [9],
        "refused batches wrote nothing"
    );
    assert_eq!(
        store.vehicle_calibration(&t, "truck-6").await.expect("cal"),
        None
    );
}

/// Two handles (as two replicas) commit at once: disjoint work all lands; a race on one
/// calibration lets exactly one writer win and the other reload.
pub async fn concurrent_commits(first: Store, second: Store) {
    let (t, _) = tenant_ids();
    let work = |store: Store, vehicle: &'static str, t: String| async move {
        for i in 0..20 {
            let batch = CommitBatch {
                attempts: (0..10).map(|j| attempt(vehicle, i * 10 + j)).collect(),
                vehicles: vec![vehicle_write(vehicle, (i > 0).then_some(i), i as f64)],
                archetypes: vec![],
            };
            store.commit(&t, &batch).await.expect("disjoint commit");
        }
    };
    tokio::join!(
        work(first.clone(), "left", t.clone()),
        work(second.clone(), "right", t.clone())
    );
    for vehicle in ["left", "right"] {
        let all = first
            .recent_attempts(&t, vehicle, 1_000)
            .await
            .expect("read");
        assert_eq!(all.len(), 200);
        let cal = second.vehicle_calibration(&t, vehicle).await.expect("cal");
        assert_eq!(cal.map(|c| c.version), Some(20));
    }

    for round in 0..10 {
        let id = format!("raced-{round}");
        let race = |store: Store, offset_k: f64| {
            let (t, id) = (t.clone(), id.clone());
            async move {
                let batch = CommitBatch {
                    attempts: vec![attempt(&id, i64::from(offset_k as i32))],
                    vehicles: vec![vehicle_write(&id, None, offset_k)],
                    archetypes: vec![],
                };
                store.commit(&t, &batch).await
            }
        };
        let (a, b) = tokio::join!(race(first.clone(), 1.0), race(second.clone(), 2.0));
        let wins = [&a, &b].iter().filter(|r| r.is_ok()).count();
        assert_eq!(wins, 1, "round {round}: {a:?} / {b:?}");
        for r in [&a, &b] {
            if let Err(e) = r {
                assert!(matches!(e, StoreError::Concurrent(_)), "{e:?}");
            }
        }
        let stored = first.recent_attempts(&t, &id, 10).await.expect("read");
        assert_eq!(stored.len(), 1, "only the winner's attempt is stored");
        let cal = first
            .vehicle_calibration(&t, &id)
            .await
            .expect("cal")
            .expect("one");
        let winner = if a.is_ok() { 1.0 } else { 2.0 };
        assert_eq!(cal.thermal_offset_mean_k, winner);
    }
}

/// `config` names an empty database. Two handles opening it at once both migrate safely;
/// opening again changes nothing; a database left at schema 1 with data upgrades in place.
pub async fn migrations(config: StoreConfig, older: StoreConfig) {
    let latest = startmargin_service::store::migrate::LATEST_SCHEMA_VERSION;
    let (a, b) = tokio::join!(Store::open(&config), Store::open(&config));
    let (a, b) = (a.expect("first open"), b.expect("concurrent open"));
    assert_eq!(a.schema_version().await.expect("version"), latest);
    let (t, _) = tenant_ids();
    b.commit(&t, &one_attempt(attempt("truck-7", 1)))
        .await
        .expect("commit");
    a.close().await;
    b.close().await;
    let again = Store::open(&config).await.expect("open twice");
    assert_eq!(again.schema_version().await.expect("version"), latest);
    assert_eq!(
        again
            .recent_attempts(&t, "truck-7", 5)
            .await
            .expect("kept")
            .len(),
        1
    );
    again.close().await;

    let old = Store::open_at_schema(&older, 1)
        .await
        .expect("open at schema 1");
    assert_eq!(old.schema_version().await.expect("version"), 1);
    old.commit(&t, &one_attempt(attempt("truck-8", 1)))
        .await
        .expect("schema 1 holds attempts");
    assert!(
        old.vehicle_calibration(&t, "truck-8").await.is_err(),
        "schema 1 has no calibration tables"
    );
    old.close().await;
    let upgraded = Store::open(&older).await.expect("upgrade");
    assert_eq!(upgraded.schema_version().await.expect("version"), latest);
    assert_eq!(
        upgraded
            .recent_attempts(&t, "truck-8", 5)
            .await
            .expect("kept"),
        vec![attempt("truck-8", 1)]
    );
    let write = CommitBatch {
        vehicles: vec![vehicle_write("truck-8", None, 0.5)],
        ..CommitBatch::default()
    };
    upgraded
        .commit(&t, &write)
        .await
        .expect("calibrations after upgrade");
    upgraded.close().await;
}

fn cooldown_fit(vehicle_id: &str, keyed_off_at_ms: i64, tau_s: f64) -> StoredCooldownFit {
    StoredCooldownFit {
        vehicle_id: vehicle_id.to_string(),
        keyed_off_at_ms,
        time_constant_s: tau_s,
        readings: 12,
        recorded_at_ms: 1_700_000_100_000,
    }
}

/// A cool-down fit is stored with its vehicle calibration in one transaction, once per vehicle
/// and key-off: a replay writes nothing, a stale version writes neither, another tenant sees
/// none of it, and hostile values are refused before the database.
pub async fn cooldown_fits(store: Store) {
    let (a, b) = tenant_ids();
    let first = store
        .record_cooldown(
            &a,
            &cooldown_fit("van-2", 1_000, 9_000.0),
            &vehicle_write("van-2", None, 0.0),
        )
        .await
        .expect("first fit");
    assert_eq!(first, CooldownRecorded::Inserted { vehicle_version: 1 });
    // The same key-off again, even with another value: nothing changes.
    let replay = store
        .record_cooldown(
            &a,
            &cooldown_fit("van-2", 1_000, 5_000.0),
            &vehicle_write("van-2", Some(1), 9.0),
        )
        .await
        .expect("replay");
    assert_eq!(replay, CooldownRecorded::Duplicate);
    let stored = store
        .vehicle_calibration(&a, "van-2")
        .await
        .expect("read")
        .expect("present");
    assert_eq!((stored.version, stored.thermal_offset_mean_k), (1, 0.0));
    // A stale version writes neither the fit nor the calibration.
    let stale = store
        .record_cooldown(
            &a,
            &cooldown_fit("van-2", 2_000, 9_500.0),
            &vehicle_write("van-2", None, 1.0),
        )
        .await;
    assert!(matches!(stale, Err(StoreError::Concurrent(_))), "{stale:?}");
    let next = store
        .record_cooldown(
            &a,
            &cooldown_fit("van-2", 3_000, 9_200.0),
            &vehicle_write("van-2", Some(1), 2.0),
        )
        .await
        .expect("next key-off");
    assert_eq!(next, CooldownRecorded::Inserted { vehicle_version: 2 });
    let fits = store
        .recent_cooldown_fits(&a, "van-2", 10)
        .await
        .expect("fits");
    assert_eq!(
        fits.iter()
            .map(|f| (f.keyed_off_at_ms, f.time_constant_s, f.readings))
            .collect::<Vec<_>>(),
        [(3_000, 9_200.0, 12), (1_000, 9_000.0, 12)],
        "newest first; the replay and the stale write left no row"
    );
    assert_eq!(fits[0], cooldown_fit("van-2", 3_000, 9_200.0));

    // Another tenant: none of it, and its own key-off of the same id is its own.
    assert!(
        store
            .recent_cooldown_fits(&b, "van-2", 10)
            .await
            .expect("fits")
            .is_empty()
    );
    assert!(
        store
            .vehicle_calibration(&b, "van-2")
            .await
            .expect("read")
            .is_none()
    );
    assert_eq!(
        store
            .record_cooldown(
                &b,
                &cooldown_fit("van-2", 1_000, 7_000.0),
                &vehicle_write("van-2", None, 0.0),
            )
            .await
            .expect("tenant b"),
        CooldownRecorded::Inserted { vehicle_version: 1 }
    );

    // Hostile values: refused with the field, nothing written.
    let mut no_tau = vehicle_write("van-3", None, 0.0);
    no_tau.calibration.cooldown_tau_mean_s = None;
    no_tau.calibration.cooldown_tau_sd_s = None;
    let cases = [
        (
            cooldown_fit("van-3", 1, f64::NAN),
            vehicle_write("van-3", None, 0.0),
            "fit.time_constant_s",
        ),
        (
            cooldown_fit("van-3", 1, f64::INFINITY),
            vehicle_write("van-3", None, 0.0),
            "fit.time_constant_s",
        ),
        (
            cooldown_fit("van-3", 1, -5.0),
            vehicle_write("van-3", None, 0.0),
            "fit.time_constant_s",
        ),
        (
            StoredCooldownFit {
                readings: 0,
                ..cooldown_fit("van-3", 1, 9_000.0)
            },
            vehicle_write("van-3", None, 0.0),
            "fit.readings",
        ),
        (
            cooldown_fit("", 1, 9_000.0),
            vehicle_write("", None, 0.0),
            "fit.vehicle_id",
        ),
        (
            cooldown_fit("van-3", 1, 9_000.0),
            vehicle_write("van-4", None, 0.0),
            "vehicle.id",
        ),
        (
            cooldown_fit("van-3", 1, 9_000.0),
            no_tau,
            "vehicle.calibration.cooldown_tau_mean_s",
        ),
        (
            cooldown_fit(&"x".repeat(MAX_ID_BYTES + 1), 1, 9_000.0),
            vehicle_write("van-3", None, 0.0),
            "fit.vehicle_id",
        ),
    ];
    for (fit, write, field) in cases {
        match store.record_cooldown(&a, &fit, &write).await {
            Err(StoreError::InvalidArgument { field: f, .. }) => assert_eq!(f, field),
            other => panic!("{field}: {other:?}"),
        }
    }
    assert!(
        store
            .recent_cooldown_fits(&a, "van-3", 10)
            .await
            .expect("fits")
            .is_empty()
    );
    for limit in [0, MAX_RECENT_COOLDOWN_FITS + 1] {
        assert!(matches!(
            store.recent_cooldown_fits(&a, "van-2", limit).await,
            Err(StoreError::InvalidArgument { .. })
        ));
    }
}
