//! Limits of a fleet stream: too many items end it with RESOURCE_EXHAUSTED after the results in
//! flight are delivered; an idle stream is ended with UNAVAILABLE.

use std::collections::HashSet;

use startmargin_e2e::{TestServer, loopback_config, sample_night_in_zone, vehicle_item, zone_item};
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_service::Config;
use tokio::sync::mpsc;
use tokio_stream::StreamExt as _;
use tokio_stream::wrappers::ReceiverStream;
use tonic::Code;

#[tokio::test]
async fn more_items_than_allowed_ends_the_stream_resource_exhausted() -> anyhow::Result<()> {
    let config = Config {
        max_fleet_items_per_stream: 21,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await?;
    // One zone and 20 vehicles fit; the 22nd item does not.
    let mut items = vec![zone_item("z", "depot-south")];
    items.extend((0..40).map(|i| {
        vehicle_item(
            &format!("v{i}"),
            sample_night_in_zone(&format!("t{i}"), "depot-south"),
        )
    }));
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();

    let mut answered = HashSet::new();
    let end = loop {
        match results.next().await {
            Some(Ok(r)) => {
                assert!(matches!(r.outcome, Some(Outcome::Assessment(_))), "{r:?}");
                answered.insert(r.item_id);
            }
            Some(Err(status)) => break status,
            None => panic!("the stream must end with RESOURCE_EXHAUSTED"),
        }
    };
    assert_eq!(end.code(), Code::ResourceExhausted, "{end:?}");
    let expected: HashSet<String> = (0..20).map(|i| format!("v{i}")).collect();
    assert_eq!(
        answered, expected,
        "every accepted vehicle is answered before the stream ends"
    );
    server.shutdown().await
}

#[tokio::test]
async fn an_idle_stream_is_ended_unavailable() -> anyhow::Result<()> {
    let config = Config {
        stream_idle_timeout_s: 0.3,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await?;
    let (tx, rx) = mpsc::channel(4);
    let mut results = server
        .client()
        .assess_fleet(ReceiverStream::new(rx))
        .await?
        .into_inner();
    tx.send(zone_item("z", "depot-south")).await?;
    tx.send(vehicle_item("v", sample_night_in_zone("t", "depot-south")))
        .await?;
    let first = results.next().await.expect("the vehicle's result")?;
    assert_eq!(first.item_id, "v");
    // Then nothing is sent, with the sending side still open.
    let end = results.next().await.expect("the stream ends with a status");
    let status = end.expect_err("an idle stream ends with an error");
    assert_eq!(status.code(), Code::Unavailable, "{status:?}");
    assert!(status.message().contains("idle"), "{status:?}");
    drop(tx);
    server.shutdown().await
}

#[tokio::test]
async fn a_client_that_half_closes_gets_every_result_then_ok() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut items = vec![zone_item("z", "depot-south")];
    items.extend((0..50).map(|i| {
        vehicle_item(
            &format!("v{i}"),
            sample_night_in_zone(&format!("t{i}"), "depot-south"),
        )
    }));
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let mut n = 0;
    while let Some(r) = results.next().await {
        r?;
        n += 1;
    }
    assert_eq!(n, 50);
    server.shutdown().await
}
