//! Start attempts the service must refuse, field by field, while the good attempts of the same
//! batch are recorded; tenants that cannot see each other's history; a flood of reports bounded
//! per tenant.

mod learning_common;

use learning_common::{DAY_S, attempt, now_s};
use startmargin_e2e::{TestServer, auth_config, violated_fields, violated_fields_in, with_token};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::attempt_result::Outcome;

fn refused_fields(r: &pb::AttemptResult) -> Vec<String> {
    match &r.outcome {
        Some(Outcome::Error(e)) => {
            assert_eq!(e.code, tonic::Code::InvalidArgument as i32, "{e:?}");
            violated_fields_in(e)
        }
        other => panic!("attempt {} was not refused: {other:?}", r.index),
    }
}

#[tokio::test]
async fn hostile_attempts_are_refused_with_their_field_paths_and_the_rest_is_recorded() {
    let t = TestServer::start().await.expect("server");
    let good = attempt("H-1", 1, -8.0, pb::AttemptOutcome::Fired);
    let mut bad = Vec::new();
    let mut expect = Vec::new();
    let mut push = |a: pb::StartAttempt, field: &str| {
        bad.push(a);
        expect.push(field.to_string());
    };
    let mut a = good.clone();
    a.attempted_at.as_mut().unwrap().seconds = now_s() + DAY_S;
    push(a, "attempted_at"); // in the future
    let mut a = good.clone();
    a.attempted_at.as_mut().unwrap().seconds = 100; // 1970: before any vehicle reported
    push(a, "attempted_at");
    let mut a = good.clone();
    a.in_service_since = Some(prost_types::Timestamp {
        seconds: now_s(),
        nanos: 0,
    });
    push(a, "attempted_at"); // before the vehicle existed
    let mut a = good.clone();
    a.cranking_duration = Some(prost_types::Duration {
        seconds: -3,
        nanos: 0,
    });
    push(a, "cranking_duration");
    let mut a = good.clone();
    a.cranking_duration = None;
    push(a, "cranking_duration");
    let mut a = good.clone();
    a.peak_cranking_rpm = Some(2_500.0); // a starter does not turn a diesel that fast
    push(a, "peak_cranking_rpm");
    let mut a = good.clone();
    a.peak_cranking_rpm = Some(f64::NAN);
    push(a, "peak_cranking_rpm");
    let mut a = good.clone();
    a.air_c = Some(f64::INFINITY);
    push(a, "air_c");
    let mut a = good.clone();
    a.air_c = None;
    push(a, "air_c");
    let mut a = good.clone();
    a.outcome = 0;
    push(a, "outcome");
    let mut a = good.clone();
    a.outcome = 42;
    push(a, "outcome");
    let mut a = good.clone();
    a.battery_rest_v = Some(12.4);
    a.lowest_cranking_v = Some(13.5); // higher while cranking than at rest
    push(a, "lowest_cranking_v");
    let mut a = good.clone();
    a.vehicle.as_mut().unwrap().vehicle_id = "x".repeat(129);
    push(a, "vehicle.vehicle_id");
    let mut a = good.clone();
    a.preheat = Some(prost_types::Duration {
        seconds: 3_600,
        nanos: 0,
    });
    push(a, "preheat");

    let mut attempts = vec![good.clone()];
    attempts.extend(bad);
    let results = t
        .client()
        .report_start_attempts(pb::ReportStartAttemptsRequest { attempts })
        .await
        .expect("a batch with bad attempts is answered per attempt")
        .into_inner()
        .results;
    assert_eq!(results.len(), expect.len() + 1);
    assert!(matches!(results[0].outcome, Some(Outcome::Recorded(_))));
    for (i, field) in expect.iter().enumerate() {
        let r = &results[i + 1];
        assert_eq!(r.index as usize, i + 1);
        let fields = refused_fields(r);
        let want = format!("attempts[{}].{field}", i + 1);
        assert!(
            fields.contains(&want),
            "attempt {}: {fields:?}, want {want}",
            i + 1
        );
    }

    // Whole-call refusals: nothing, or more than a call may carry.
    for (attempts, why) in [
        (Vec::new(), "empty"),
        (vec![good.clone(); 1001], "over 1000"),
    ] {
        let status = t
            .client()
            .report_start_attempts(pb::ReportStartAttemptsRequest { attempts })
            .await
            .expect_err(why);
        assert_eq!(status.code(), tonic::Code::InvalidArgument, "{why}");
        assert_eq!(violated_fields(&status), ["attempts"], "{why}");
    }
    // Only the one good attempt was stored.
    let r = t
        .client()
        .get_fleet_reliability(pb::GetFleetReliabilityRequest::default())
        .await
        .expect("reliability")
        .into_inner();
    assert_eq!(r.attempt_count, 1);
    for bins in [1, 21] {
        let status = t
            .client()
            .get_fleet_reliability(pb::GetFleetReliabilityRequest {
                since: None,
                bin_count: bins,
            })
            .await
            .expect_err("bin count out of range");
        assert_eq!(violated_fields(&status), ["bin_count"]);
    }
    let status = t
        .client()
        .get_vehicle_calibration(pb::GetVehicleCalibrationRequest {
            vehicle_id: String::new(),
            attempt_limit: 0,
        })
        .await
        .expect_err("no vehicle id");
    assert_eq!(violated_fields(&status), ["vehicle_id"]);
    t.shutdown().await.expect("shutdown");
}

const NORTH_TOKEN: &str = "north-depot-5b0c4a7f2e9631d1";
const SOUTH_TOKEN: &str = "south-depot-a47e1f05b9d368c2";

#[tokio::test]
async fn a_tenant_cannot_read_or_change_another_tenants_history() {
    let config = auth_config(
        "learning-tenants",
        &[("depot-north", NORTH_TOKEN), ("depot-south", SOUTH_TOKEN)],
    );
    let t = TestServer::start_with(config).await.expect("server");
    let attempts: Vec<_> = (1..=3)
        .map(|d| attempt("TRK-7", d, -15.0, pb::AttemptOutcome::DidNotFire))
        .collect();
    let north = t
        .client()
        .report_start_attempts(with_token(
            pb::ReportStartAttemptsRequest {
                attempts: attempts.clone(),
            },
            NORTH_TOKEN,
        ))
        .await
        .expect("north reports")
        .into_inner();
    assert_eq!(north.results.len(), 3);

    // South asks about the same vehicle id: nothing is there for it.
    let south_read = t
        .client()
        .get_vehicle_calibration(with_token(
            pb::GetVehicleCalibrationRequest {
                vehicle_id: "TRK-7".into(),
                attempt_limit: 100,
            },
            SOUTH_TOKEN,
        ))
        .await
        .expect("south reads")
        .into_inner();
    assert!(south_read.attempts.is_empty());
    let c = south_read.calibration.expect("calibration");
    assert_eq!((c.observations, c.pooled_observations), (0, 0));
    let south_reliability = t
        .client()
        .get_fleet_reliability(with_token(
            pb::GetFleetReliabilityRequest::default(),
            SOUTH_TOKEN,
        ))
        .await
        .expect("south reliability")
        .into_inner();
    assert_eq!(south_reliability.attempt_count, 0);

    // South reporting the very same attempts records them for south, not as north's duplicates.
    let south = t
        .client()
        .report_start_attempts(with_token(
            pb::ReportStartAttemptsRequest { attempts },
            SOUTH_TOKEN,
        ))
        .await
        .expect("south reports")
        .into_inner();
    for r in &south.results {
        match &r.outcome {
            Some(Outcome::Recorded(rec)) => assert!(!rec.duplicate),
            other => panic!("{other:?}"),
        }
    }
    let north_read = t
        .client()
        .get_vehicle_calibration(with_token(
            pb::GetVehicleCalibrationRequest {
                vehicle_id: "TRK-7".into(),
                attempt_limit: 100,
            },
            NORTH_TOKEN,
        ))
        .await
        .expect("north reads")
        .into_inner();
    assert_eq!(north_read.attempts.len(), 3);
    assert_eq!(north_read.calibration.map(|c| c.observations), Some(3));
    t.shutdown().await.expect("shutdown");
}

#[tokio::test]
async fn a_flood_of_reports_is_bounded_per_tenant() {
    let mut config = startmargin_e2e::loopback_config();
    config.learning.max_attempts_per_minute_per_tenant = 50;
    let t = TestServer::start_with(config).await.expect("server");
    let batch = |from: i64, n: i64| pb::ReportStartAttemptsRequest {
        attempts: (from..from + n)
            .map(|d| attempt("F-1", d, -3.0, pb::AttemptOutcome::Fired))
            .collect(),
    };
    t.client()
        .report_start_attempts(batch(1, 40))
        .await
        .expect("within the rate");
    let status = t
        .client()
        .report_start_attempts(batch(41, 20))
        .await
        .expect_err("beyond the rate");
    assert_eq!(status.code(), tonic::Code::ResourceExhausted);
    assert!(
        status.message().contains("50 attempts a minute"),
        "{}",
        status.message()
    );
    // Nothing of the refused call was stored.
    let r = t
        .client()
        .get_fleet_reliability(pb::GetFleetReliabilityRequest::default())
        .await
        .expect("reliability")
        .into_inner();
    assert_eq!(r.attempt_count, 40);
    t.shutdown().await.expect("shutdown");
}
