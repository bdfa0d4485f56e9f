//! Retries: only on UNAVAILABLE, only for the idempotent unary calls, bounded by max_retries.

mod support;

use std::time::Duration;

use startmargin_sdk::{Client, Error};
use support::Script;
use tonic::Code;

async fn client(uri: String, retries: u32) -> Client {
    Client::builder([uri])
        .max_retries(retries)
        .backoff(Duration::from_millis(5), Duration::from_millis(20))
        .jitter_key(1)
        .build()
        .await
        .unwrap()
}

#[tokio::test]
async fn unavailable_twice_then_ok_succeeds_on_the_third_attempt() {
    let server = support::start(Script::FailThenOk(Code::Unavailable, 2)).await;
    let c = client(server.uri(), 3).await;
    let a = c.assess_vehicle(support::night("tow-1")).await.unwrap();
    assert_eq!(a.vehicle_id, "tow-1");
    assert_eq!(server.calls(), 3);
}

#[tokio::test]
async fn describe_model_is_retried_too() {
    let server = support::start(Script::FailThenOk(Code::Unavailable, 1)).await;
    let c = client(server.uri(), 1).await;
    assert_eq!(c.describe_model().await.unwrap().model_version, "mock 1");
    assert_eq!(server.calls(), 2);
}

#[tokio::test]
async fn gives_up_after_max_retries_with_unavailable() {
    let server = support::start(Script::Always(Code::Unavailable)).await;
    let c = client(server.uri(), 2).await;
    let e = c.assess_vehicle(support::night("tow-1")).await.unwrap_err();
    assert!(matches!(e, Error::Unavailable(_)), "{e:?}");
    assert_eq!(server.calls(), 3, "one call plus two retries");
}

#[tokio::test]
async fn zero_retries_means_one_attempt() {
    let server = support::start(Script::FailThenOk(Code::Unavailable, 1)).await;
    let c = client(server.uri(), 0).await;
    assert!(c.assess_vehicle(support::night("a")).await.is_err());
    assert_eq!(server.calls(), 1);
}

#[tokio::test]
async fn invalid_argument_is_not_retried_and_carries_field_violations() {
    let server = support::start(Script::Always(Code::InvalidArgument)).await;
    let c = client(server.uri(), 3).await;
    let e = c.assess_vehicle(support::night("a")).await.unwrap_err();
    assert_eq!(server.calls(), 1);
    assert_eq!(e.code(), Code::InvalidArgument);
    assert_eq!(e.field_violations().len(), 1);
    assert_eq!(
        e.field_violations()[0].field,
        "night.vehicle.battery.capacity_cca"
    );
    assert_eq!(e.field_violations()[0].description, "must be above 0");
}

#[tokio::test]
async fn other_codes_are_not_retried() {
    for (code, check) in [
        (
            Code::ResourceExhausted,
            (|e: &Error| matches!(e, Error::ResourceExhausted(_))) as fn(&Error) -> bool,
        ),
        (Code::FailedPrecondition, |e| {
            matches!(e, Error::FailedPrecondition(_))
        }),
        (Code::Internal, |e| {
            matches!(e, Error::Other(Code::Internal, _))
        }),
    ] {
        let server = support::start(Script::Always(code)).await;
        let c = client(server.uri(), 3).await;
        let e = c.assess_vehicle(support::night("a")).await.unwrap_err();
        assert!(check(&e), "{code:?} → {e:?}");
        assert_eq!(server.calls(), 1, "{code:?} must not be retried");
    }
}
