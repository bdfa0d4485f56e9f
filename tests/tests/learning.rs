//! Observed start attempts through real gRPC on loopback: what failures teach a vehicle, how the
//! archetype's pool passes it on to a vehicle with no history, how later assessments use it, that
//! reports are idempotent, what the reliability read-out counts, and the client stream.

mod learning_common;

use learning_common::{attempt, truck};
use startmargin_e2e::{TestServer, at_hour, sample_forecast};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::attempt_result::Outcome;

/// The sample forecast (a cold front to −17.5 °C) for `truck(vehicle_id)`, cold-soaked.
fn cold_night(vehicle_id: &str, ignore_calibration: bool) -> pb::VehicleNight {
    pb::VehicleNight {
        vehicle: Some(truck(vehicle_id)),
        forecast: Some(sample_forecast()),
        departure_time: Some(at_hour(10.0)),
        options: Some(pb::AssessmentOptions {
            ignore_calibration,
            ..Default::default()
        }),
        ..Default::default()
    }
}

fn recorded(r: &pb::AttemptResult) -> &pb::RecordedAttempt {
    match &r.outcome {
        Some(Outcome::Recorded(rec)) => rec,
        other => panic!("attempt {} not recorded: {other:?}", r.index),
    }
}

async fn assess(t: &TestServer, night: pb::VehicleNight) -> pb::VehicleAssessment {
    t.client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await
        .expect("assessed")
        .into_inner()
        .assessment
        .expect("an assessment")
}

#[tokio::test]
async fn failures_teach_the_vehicle_its_pool_and_later_assessments() {
    let t = TestServer::start().await.expect("server");
    let before = assess(&t, cold_night("TRK-1", false)).await;
    assert_eq!(before.calibration.as_ref().map(|c| c.observations), Some(0));

    // Five cold-soaked mornings at −14 °C on which the defaults expect an easy start, and the
    // truck did not fire (a worn engine the records do not know about).
    let attempts: Vec<_> = (1..=5)
        .map(|d| attempt("TRK-1", d, -14.0, pb::AttemptOutcome::DidNotFire))
        .collect();
    let results = t
        .client()
        .report_start_attempts(pb::ReportStartAttemptsRequest {
            attempts: attempts.clone(),
        })
        .await
        .expect("reported")
        .into_inner()
        .results;
    assert_eq!(results.len(), 5);
    // Attempts are learned in time order: the oldest (five days ago, index 4) first.
    let first = recorded(&results[4]);
    assert!(!first.duplicate);
    assert!(
        first.predicted_no_start_pct < 50.0,
        "the defaults expected a start: {:.1} %",
        first.predicted_no_start_pct
    );
    let last = recorded(&results[0]);
    let cal = last.calibration.expect("a calibration");
    assert_eq!(cal.observations, 5);
    let offset = cal.thermal_offset_k.expect("offset");
    assert!(
        offset.mean < -5.0,
        "five surprises move the offset down: {offset:?}"
    );
    assert!(
        last.predicted_no_start_pct > first.predicted_no_start_pct,
        "each failure raises the next prediction: {:.1} → {:.1} %",
        first.predicted_no_start_pct,
        last.predicted_no_start_pct
    );
    assert!(
        (last.uncalibrated_no_start_pct - first.uncalibrated_no_start_pct).abs() < 1e-9,
        "the uncalibrated prediction of the same conditions does not move"
    );

    // The read-out names the same state and the five attempts, newest first.
    let read = t
        .client()
        .get_vehicle_calibration(pb::GetVehicleCalibrationRequest {
            vehicle_id: "TRK-1".into(),
            attempt_limit: 0,
        })
        .await
        .expect("read")
        .into_inner();
    assert_eq!(read.calibration.as_ref().map(|c| c.observations), Some(5));
    assert_eq!(read.attempts.len(), 5);
    let times: Vec<i64> = read
        .attempts
        .iter()
        .map(|a| a.attempted_at.as_ref().unwrap().seconds)
        .collect();
    assert!(times.windows(2).all(|w| w[0] > w[1]), "newest first");

    // Later assessments of the vehicle use it and say so; ignoring it gives the defaults back.
    let after = assess(&t, cold_night("TRK-1", false)).await;
    let defaults = assess(&t, cold_night("TRK-1", true)).await;
    assert_eq!(after.calibration.as_ref().map(|c| c.observations), Some(5));
    assert_eq!(
        defaults.calibration.as_ref().map(|c| c.observations),
        Some(0)
    );
    assert!(
        after.no_start_pct > defaults.no_start_pct + 5.0,
        "calibrated {:.1} % vs defaults {:.1} %",
        after.no_start_pct,
        defaults.no_start_pct
    );
    assert!((defaults.no_start_pct - before.no_start_pct).abs() < 1e-9);

    // A vehicle of the same archetype with no history starts from the pool.
    let sibling = assess(&t, cold_night("TRK-2", false)).await;
    let sc = sibling.calibration.expect("calibration");
    assert_eq!(sc.observations, 0);
    assert_eq!(sc.pooled_observations, 5);
    assert!(sc.thermal_offset_k.unwrap().mean < 0.0);
    // One vehicle's own fault moves its siblings' prior only a little (the pool bounds the pull
    // of a vehicle far outside its archetype): towards failure, never past the vehicle itself.
    let sibling_offset = sc.thermal_offset_k.unwrap().mean;
    assert!(
        sibling_offset > offset.mean,
        "{sibling_offset} vs {}",
        offset.mean
    );
    assert!(
        sibling.no_start_pct >= defaults.no_start_pct,
        "sibling {:.2} % vs defaults {:.2} %",
        sibling.no_start_pct,
        defaults.no_start_pct
    );

    // Sending the same attempts again changes nothing.
    let again = t
        .client()
        .report_start_attempts(pb::ReportStartAttemptsRequest { attempts })
        .await
        .expect("resent")
        .into_inner()
        .results;
    assert!(again.iter().all(|r| recorded(r).duplicate));
    let read = t
        .client()
        .get_vehicle_calibration(pb::GetVehicleCalibrationRequest {
            vehicle_id: "TRK-1".into(),
            attempt_limit: 100,
        })
        .await
        .expect("read")
        .into_inner();
    assert_eq!(read.calibration.map(|c| c.observations), Some(5));
    assert_eq!(read.attempts.len(), 5);

    let reliability = t
        .client()
        .get_fleet_reliability(pb::GetFleetReliabilityRequest::default())
        .await
        .expect("reliability")
        .into_inner();
    assert_eq!(reliability.attempt_count, 5);
    assert_eq!(reliability.no_start_count, 5);
    let cal = reliability.calibrated.expect("calibrated scores");
    let uncal = reliability.uncalibrated.expect("uncalibrated scores");
    assert_eq!(cal.bins.len(), 10);
    assert!(
        cal.brier_score < uncal.brier_score,
        "learning from each failure predicts the next ones better: {} vs {}",
        cal.brier_score,
        uncal.brier_score
    );
    t.shutdown().await.expect("shutdown");
}

#[tokio::test]
async fn a_stream_of_attempts_is_learned_in_batches_and_summarised() {
    let t = TestServer::start().await.expect("server");
    let mut items: Vec<pb::StreamStartAttemptsRequest> = (0..600)
        .map(|i| pb::StreamStartAttemptsRequest {
            attempt: Some(attempt(
                &format!("S-{}", i % 60),
                1 + i64::from(i / 60),
                -5.0 - f64::from(i % 7),
                pb::AttemptOutcome::Fired,
            )),
        })
        .collect();
    // Three bad items: no attempt, a negative air temperature beyond the range, no outcome.
    items[10].attempt = None;
    items[300].attempt.as_mut().unwrap().air_c = Some(-200.0);
    items[599].attempt.as_mut().unwrap().outcome = 0;
    let summary = t
        .client()
        .stream_start_attempts(tokio_stream::iter(items.clone()))
        .await
        .expect("streamed")
        .into_inner();
    assert_eq!(summary.recorded_count, 597);
    assert_eq!(summary.refused_count, 3);
    let mut indices: Vec<u32> = summary.refusals.iter().map(|r| r.index).collect();
    indices.sort_unstable();
    assert_eq!(indices, [10, 300, 599]);
    let again = t
        .client()
        .stream_start_attempts(tokio_stream::iter(items))
        .await
        .expect("streamed again")
        .into_inner();
    assert_eq!((again.recorded_count, again.duplicate_count), (0, 597));
    t.shutdown().await.expect("shutdown");
}
