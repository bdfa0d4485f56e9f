//! Deadlines: every unary attempt carries grpc-timeout and ends with DeadlineExceeded when the
//! server does not answer; a stream deadline ends a fleet stream the same way.

mod support;

use std::time::Duration;

use startmargin_sdk::{Client, Error, FleetItem};
use support::Script;
use tokio_stream::StreamExt;

#[tokio::test]
async fn unary_call_sends_its_deadline_and_ends_at_it() {
    let server = support::start(Script::Hang).await;
    let c = Client::builder([server.uri()])
        .timeout(Duration::from_millis(200))
        .build()
        .await
        .unwrap();
    let e = c.assess_vehicle(support::night("a")).await.unwrap_err();
    assert!(matches!(e, Error::DeadlineExceeded(_)), "{e:?}");
    // A deadline is not retried.
    assert_eq!(server.calls(), 1);
    let header = server.seen.grpc_timeout.lock().unwrap().clone();
    let header = header.expect("grpc-timeout header sent");
    // 200 ms in the gRPC wire format: a number and a unit letter (tonic picks the most precise).
    assert!(
        ["200m", "200000u", "200000000n"].contains(&header.as_str()),
        "{header}"
    );
}

#[tokio::test]
async fn fleet_stream_deadline_ends_the_stream_with_an_error() {
    let server = support::start(Script::Hang).await;
    let c = Client::builder([server.uri()])
        .stream_timeout(Duration::from_millis(200))
        .build()
        .await
        .unwrap();
    let mut results = c.assess_fleet(tokio_stream::iter([FleetItem::vehicle(support::night(
        "a",
    ))]));
    let first = results.next().await.expect("one item");
    assert!(
        matches!(first, Err(Error::DeadlineExceeded(_))),
        "{first:?}"
    );
    assert!(
        results.next().await.is_none(),
        "the stream ends after its error"
    );
}
