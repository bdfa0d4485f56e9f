//! Graceful drain while a fleet stream runs: health turns NOT_SERVING, the open stream ends with
//! UNAVAILABLE "server is draining", the server stops within its drain deadline and then refuses
//! new connections; a client that never closes its stream cannot hold the drain past the deadline.

use std::time::{Duration, Instant};

use startmargin_e2e::{
    DRAINING_MESSAGE, SERVICE_NAME, TestServer, connect, loopback_config, sample_night_in_zone,
    vehicle_item, zone_item,
};
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_service::Config;
use tokio::sync::mpsc;
use tokio_stream::StreamExt as _;
use tokio_stream::wrappers::ReceiverStream;
use tonic::Code;
use tonic_health::pb::HealthCheckRequest;
use tonic_health::pb::health_check_response::ServingStatus;

const DRAIN_TIMEOUT_S: f64 = 5.0;

#[tokio::test]
async fn drain_while_a_fleet_stream_runs() -> anyhow::Result<()> {
    let config = Config {
        drain_timeout_s: DRAIN_TIMEOUT_S,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await?;
    let addr = server.server.addr;

    // A health watch, as a load balancer would keep.
    let mut health = server
        .health()
        .watch(HealthCheckRequest {
            service: SERVICE_NAME.to_string(),
        })
        .await?
        .into_inner();
    assert_eq!(
        health.next().await.expect("first status")?.status,
        ServingStatus::Serving as i32
    );

    // A fleet stream that stays open: the client keeps its sending side open.
    let (tx, rx) = mpsc::channel(16);
    let mut results = server
        .client()
        .assess_fleet(ReceiverStream::new(rx))
        .await?
        .into_inner();
    tx.send(zone_item("z", "depot-west")).await?;
    tx.send(vehicle_item(
        "v1",
        sample_night_in_zone("truck-1", "depot-west"),
    ))
    .await?;
    let first = results.next().await.expect("a first result")?;
    assert!(
        matches!(first.outcome, Some(Outcome::Assessment(_))),
        "{first:?}"
    );

    let started = Instant::now();
    let stopping = tokio::spawn(server.shutdown());

    // Health flips to NOT_SERVING before the server goes away.
    let mut statuses = Vec::new();
    while let Some(update) = health.next().await {
        match update {
            Ok(r) => statuses.push(r.status),
            Err(_) => break,
        }
    }
    assert!(
        statuses.contains(&(ServingStatus::NotServing as i32)),
        "statuses seen: {statuses:?}"
    );

    // The open stream ends with UNAVAILABLE "server is draining" (results already computed may
    // still arrive first). It cannot complete: the client never closed its side.
    let end = loop {
        match results.next().await {
            Some(Ok(_)) => continue,
            Some(Err(status)) => break status,
            None => panic!("the stream ended without a status while the client still had it open"),
        }
    };
    assert_eq!(end.code(), Code::Unavailable, "{end:?}");
    assert!(end.message().contains(DRAINING_MESSAGE), "{end:?}");

    stopping.await??;
    let took = started.elapsed();
    assert!(
        took < Duration::from_secs_f64(DRAIN_TIMEOUT_S + 2.0),
        "the drain is bounded by its deadline: took {took:?}"
    );
    drop(tx);

    // Stopped: the port no longer accepts connections.
    assert!(
        connect(addr).await.is_err(),
        "a stopped server refuses new connections"
    );
    Ok(())
}

#[tokio::test]
async fn drain_with_a_stuck_client_still_stops_by_the_deadline() -> anyhow::Result<()> {
    let config = Config {
        drain_timeout_s: 1.0,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await?;
    // A reflection stream that the client never closes: only the deadline can end it.
    let mut reflection =
        tonic_reflection::pb::v1::server_reflection_client::ServerReflectionClient::new(
            server.channel.clone(),
        );
    let (tx, rx) = mpsc::channel::<tonic_reflection::pb::v1::ServerReflectionRequest>(1);
    let _open = reflection
        .server_reflection_info(ReceiverStream::new(rx))
        .await?;

    let started = Instant::now();
    server.shutdown().await?;
    let took = started.elapsed();
    assert!(
        took < Duration::from_secs(4),
        "stopped by the drain deadline: took {took:?}"
    );
    drop(tx);
    Ok(())
}
