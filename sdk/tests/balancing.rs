//! Several endpoints: calls go round-robin, a dead endpoint is skipped by the retry, and build
//! fails only when no endpoint is reachable.

mod support;

use std::time::Duration;

use startmargin_sdk::{Client, Error};
use support::Script;
use tonic::Code;

#[tokio::test]
async fn calls_alternate_between_endpoints() {
    let a = support::start(Script::FailThenOk(Code::Ok, 0)).await;
    let b = support::start(Script::FailThenOk(Code::Ok, 0)).await;
    let c = Client::builder([a.uri(), b.uri()]).build().await.unwrap();
    for i in 0..6 {
        c.assess_vehicle(support::night(&format!("v{i}")))
            .await
            .unwrap();
    }
    assert_eq!((a.calls(), b.calls()), (3, 3));
}

#[tokio::test]
async fn a_dead_endpoint_fails_over_to_a_live_one() {
    let live = support::start(Script::FailThenOk(Code::Ok, 0)).await;
    let dead = support::dead_endpoint();
    let c = Client::builder([dead.uri.clone(), live.uri()])
        .max_retries(1)
        .backoff(Duration::from_millis(5), Duration::from_millis(5))
        .build()
        .await
        .expect("one endpoint reachable is enough");
    for i in 0..4 {
        let a = c
            .assess_vehicle(support::night(&format!("v{i}")))
            .await
            .unwrap();
        assert_eq!(a.vehicle_id, format!("v{i}"));
    }
    assert_eq!(live.calls(), 4);
}

#[tokio::test]
async fn build_fails_when_no_endpoint_is_reachable() {
    let (d1, d2) = (support::dead_endpoint(), support::dead_endpoint());
    let e = Client::builder([d1.uri.clone(), d2.uri.clone()])
        .connect_timeout(Duration::from_secs(2))
        .build()
        .await
        .unwrap_err();
    assert!(matches!(e, Error::Transport(_)), "{e:?}");
}

#[tokio::test]
async fn lazy_build_defers_to_the_call_which_reports_unavailable() {
    let dead = support::dead_endpoint();
    let c = Client::builder([dead.uri.clone()])
        .lazy()
        .max_retries(1)
        .backoff(Duration::from_millis(5), Duration::from_millis(5))
        .build()
        .await
        .expect("lazy build does not touch the network");
    let e = c.describe_model().await.unwrap_err();
    assert!(matches!(e, Error::Unavailable(_)), "{e:?}");
}

#[tokio::test]
async fn bad_endpoints_and_settings_are_rejected_at_build() {
    let none: [&str; 0] = [];
    assert!(matches!(
        Client::builder(none).build().await,
        Err(Error::Transport(_))
    ));
    assert!(matches!(
        Client::builder(["not a uri"]).lazy().build().await,
        Err(Error::Transport(_))
    ));
    assert!(matches!(
        Client::builder(["http://127.0.0.1:1"])
            .lazy()
            .backoff(Duration::from_secs(2), Duration::from_secs(1))
            .build()
            .await,
        Err(Error::Transport(_))
    ));
}
