//! The start-attempt calls against a scripted server: long reports are split into batches of
//! the server's limit with indices counted across batches, and reports are retried on
//! UNAVAILABLE (a report is idempotent per vehicle and attempt time).

mod support;

use startmargin_sdk::{Client, MAX_ATTEMPTS_PER_REPORT, api};
use support::Script;
use tonic::Code;

fn attempt(i: usize) -> api::StartAttempt {
    api::StartAttempt {
        vehicle: Some(api::VehicleProfile {
            vehicle_id: format!("v{i}"),
            ..Default::default()
        }),
        attempted_at: Some(prost_types::Timestamp {
            seconds: 1_767_254_400 + i as i64,
            nanos: 0,
        }),
        ..Default::default()
    }
}

#[tokio::test]
async fn a_long_report_is_split_and_indexed_across_batches() {
    let server = support::start(Script::FailThenOk(Code::Ok, 0)).await;
    let client = Client::builder([server.uri()]).build().await.unwrap();
    let n = 2 * MAX_ATTEMPTS_PER_REPORT + 7;
    let results = client
        .report_start_attempts((0..n).map(attempt).collect())
        .await
        .unwrap();
    assert_eq!(results.len(), n);
    assert_eq!(server.calls(), 3, "1000 + 1000 + 7");
    for (i, r) in results.iter().enumerate() {
        assert_eq!(r.index as usize, i);
        let Some(api::attempt_result::Outcome::Recorded(rec)) = &r.outcome else {
            panic!("attempt {i} not recorded: {r:?}");
        };
        assert_eq!(rec.vehicle_id, format!("v{i}"));
    }
}

#[tokio::test]
async fn a_report_is_retried_on_unavailable() {
    let server = support::start(Script::FailThenOk(Code::Unavailable, 2)).await;
    let client = Client::builder([server.uri()])
        .backoff(
            std::time::Duration::from_millis(1),
            std::time::Duration::from_millis(5),
        )
        .build()
        .await
        .unwrap();
    let results = client
        .report_start_attempts(vec![attempt(0)])
        .await
        .unwrap();
    assert_eq!(results.len(), 1);
    assert_eq!(server.calls(), 3, "two refusals, then recorded");
}

#[tokio::test]
async fn a_stream_of_attempts_is_summarised() {
    let server = support::start(Script::FailThenOk(Code::Ok, 0)).await;
    let client = Client::builder([server.uri()]).build().await.unwrap();
    let summary = client
        .stream_start_attempts(tokio_stream::iter((0..250).map(attempt)))
        .await
        .unwrap();
    assert_eq!(summary.recorded_count, 250);
    let calibration = client.vehicle_calibration("v1", 5).await.unwrap();
    assert_eq!(calibration.vehicle_id, "v1");
}
