//! Streams share the server fairly: unary calls keep answering quickly while a watch stream
//! re-scores a whole zone (the compute pool serves unary calls first), are not refused while a
//! big fleet stream runs (streams hold at most `streams.stream_share_pct` of the concurrency
//! limit), a tenant holds at most `streams.max_streams_per_tenant` streams, and a watch stream
//! that nobody feeds or reads ends after `streams.watch_idle_timeout_s`. The latency bound here
//! is generous; the figures are the `fairness` benchmark's.

mod watch_common;

use std::time::{Duration, Instant};

use startmargin_e2e::{TestServer, loopback_config, sample_night, sample_night_in_zone};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_response::Event;
use startmargin_service::Config;
use startmargin_service::watch::settings::StreamSettings;
use tokio_stream::StreamExt as _;
use tonic::Code;
use watch_common::*;

fn config(streams: StreamSettings) -> Config {
    Config {
        compute_threads: 2,
        streams,
        ..loopback_config()
    }
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn unary_calls_stay_quick_during_a_watch_rescore() {
    let server = TestServer::start_with(config(StreamSettings::default()))
        .await
        .expect("server");
    let vehicles = 300;
    let (tx, rx) = tokio::sync::mpsc::channel(16);
    let mut events = server
        .client()
        .watch_fleet(tokio_stream::wrappers::ReceiverStream::new(rx))
        .await
        .expect("stream opens")
        .into_inner();
    for i in 0..vehicles {
        tx.send(vehicle(i as u64 + 1, i, "hill"))
            .await
            .expect("send");
    }
    // The zone forecast re-scores every vehicle at once.
    tx.send(zone(10_000, "hill", -12.0)).await.expect("send");
    let reader = tokio::spawn(async move {
        let mut scored = 0;
        while let Some(Ok(r)) = events.next().await {
            if matches!(r.event, Some(Event::OutlookChange(_))) {
                scored += 1;
                if scored == vehicles {
                    return Instant::now();
                }
            }
        }
        panic!("the stream ended after {scored} outlook changes");
    });

    let mut client = server.client();
    let mut worst = Duration::ZERO;
    let mut last_done = Instant::now();
    for i in 0..15 {
        let started = Instant::now();
        client
            .assess_vehicle(pb::AssessVehicleRequest {
                night: Some(sample_night(&format!("unary-{i}"))),
            })
            .await
            .expect("a unary call is answered during the re-score");
        worst = worst.max(started.elapsed());
        last_done = Instant::now();
    }
    let rescored = reader.await.expect("reader");
    assert!(
        last_done < rescored,
        "the unary calls ran during the re-score (it ended first)"
    );
    println!("slowest unary call during a {vehicles}-vehicle re-score: {worst:?}");
    assert!(
        worst < Duration::from_secs(1),
        "slowest unary call {worst:?}"
    );
    drop(tx);
    server.shutdown().await.expect("shutdown");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn unary_calls_are_not_refused_during_a_big_fleet_run() {
    let server = TestServer::start_with(Config {
        concurrency_limit: 4,
        ..config(StreamSettings::default())
    })
    .await
    .expect("server");
    let mut items = vec![startmargin_e2e::zone_item("z", "yard")];
    for i in 0..150 {
        items.push(startmargin_e2e::vehicle_item(
            &format!("v{i}"),
            sample_night_in_zone(&format!("unit-{i}"), "yard"),
        ));
    }
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await
        .expect("stream opens")
        .into_inner();
    let fleet = tokio::spawn(async move {
        let mut n = 0;
        while let Some(r) = results.next().await {
            r.expect("a result");
            n += 1;
        }
        (n, Instant::now())
    });
    let mut client = server.client();
    let mut last_done = Instant::now();
    for i in 0..10 {
        client
            .assess_vehicle(pb::AssessVehicleRequest {
                night: Some(sample_night(&format!("unary-{i}"))),
            })
            .await
            .expect("not refused: the fleet holds at most half of the limit");
        last_done = Instant::now();
    }
    let (n, fleet_done) = fleet.await.expect("fleet");
    assert_eq!(n, 150);
    assert!(
        last_done < fleet_done,
        "the unary calls ran during the fleet"
    );
    server.shutdown().await.expect("shutdown");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn a_tenant_holds_at_most_its_quota_of_streams() {
    let server = TestServer::start_with(config(StreamSettings {
        max_streams_per_tenant: 3,
        ..StreamSettings::default()
    }))
    .await
    .expect("server");
    let open = || async {
        let (tx, rx) = tokio::sync::mpsc::channel::<pb::WatchFleetRequest>(1);
        let r = server
            .client()
            .watch_fleet(tokio_stream::wrappers::ReceiverStream::new(rx))
            .await;
        (tx, r)
    };
    let mut held = Vec::new();
    for _ in 0..3 {
        let (tx, r) = open().await;
        held.push((tx, r.expect("within the quota")));
    }
    let (_tx, refused) = open().await;
    assert_eq!(
        refused.expect_err("over the quota").code(),
        Code::ResourceExhausted
    );
    // Closing one gives its place back (the stream ends when its input closes).
    held.pop();
    let mut reopened = false;
    for _ in 0..100 {
        let (tx, r) = open().await;
        if let Ok(r) = r {
            held.push((tx, r));
            reopened = true;
            break;
        }
        tokio::time::sleep(Duration::from_millis(20)).await;
    }
    assert!(reopened, "a closed stream gives its place back");
    drop(held);
    server.shutdown().await.expect("shutdown");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn an_idle_watch_stream_is_ended() {
    let server = TestServer::start_with(config(StreamSettings {
        watch_idle_timeout_s: 1.0,
        ..StreamSettings::default()
    }))
    .await
    .expect("server");
    let (_tx, rx) = tokio::sync::mpsc::channel::<pb::WatchFleetRequest>(1);
    let started = Instant::now();
    let mut events = server
        .client()
        .watch_fleet(tokio_stream::wrappers::ReceiverStream::new(rx))
        .await
        .expect("stream opens")
        .into_inner();
    let end = tokio::time::timeout(Duration::from_secs(10), events.next())
        .await
        .expect("the idle stream ends within 10 s");
    let status = end.expect("an item").expect_err("ends with an error");
    assert_eq!(status.code(), Code::Unavailable);
    assert!(status.message().contains("idle"), "{}", status.message());
    assert!(started.elapsed() >= Duration::from_millis(900));
    server.shutdown().await.expect("shutdown");
}
