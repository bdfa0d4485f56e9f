//! A WatchFleet client that stops reading: the server stops reading its input once two unread
//! alerts per vehicle wait (so what it holds for the stream is bounded, whatever the client
//! sends), and when the client reads again it gets every alert of a fast reader, in the same
//! order, while outlook changes are coalesced (latest wins). Alone in its test binary, because
//! it watches the server's global alert counters.

mod watch_common;

use std::collections::HashMap;
use std::sync::Arc;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Duration;

use prost::Message as _;
use startmargin_e2e::TestServer;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio_stream::StreamExt as _;
use watch_common::*;

const VEHICLES: usize = 40;
const FLIPS: u64 = 120;
const WINDOW_BYTES: u32 = 65_535;

/// The vehicles, then the zone forecast flipping between a deep cold and a mild night.
fn flipping_night() -> Vec<pb::WatchFleetRequest> {
    let mut u = vec![zone(1, "hill", -2.0)];
    for i in 0..VEHICLES {
        u.push(vehicle(10 + i as u64, i, "hill"));
    }
    for k in 0..FLIPS {
        let air_c = if k % 2 == 0 { -30.0 } else { -2.0 };
        u.push(zone(1000 + k, "hill", air_c));
    }
    u
}

/// Alerts raised plus cleared by the whole server so far.
fn alert_counter() -> u64 {
    let text = startmargin_service::metrics::render();
    [
        "startmargin_alerts_raised_total ",
        "startmargin_alerts_cleared_total ",
    ]
    .iter()
    .map(|name| {
        text.lines()
            .find_map(|l| l.strip_prefix(name))
            .and_then(|v| v.trim().parse::<u64>().ok())
            .unwrap_or(0)
    })
    .sum()
}

fn last_outlooks(events: &[Event]) -> HashMap<String, (i32, u64)> {
    let mut last = HashMap::new();
    for e in events {
        if let Event::OutlookChange(c) = e {
            last.insert(c.vehicle_id.clone(), (c.outlook, c.no_start_pct.to_bits()));
        }
    }
    last
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn a_slow_reader_bounds_the_server_and_loses_no_alert() {
    let server = TestServer::start().await.expect("server");

    // Reference: a reader that keeps up.
    let reference = run(&server, flipping_night()).await;
    let reference_alerts = alerts(&reference);
    assert!(
        reference_alerts.len() > 8 * VEHICLES,
        "the flips raise and clear many alerts: {}",
        reference_alerts.len()
    );

    // The slow reader: open the stream, read nothing until the server stops making alerts.
    let before = alert_counter();
    let taken = Arc::new(AtomicUsize::new(0));
    let counted = Arc::clone(&taken);
    let input = tokio_stream::iter(flipping_night()).map(move |u| {
        counted.fetch_add(1, Ordering::Relaxed);
        u
    });
    // A client with a small HTTP/2 window, so that the transport's own buffering stays small.
    let channel = tonic::transport::Endpoint::from_shared(format!("http://{}", server.server.addr))
        .expect("uri")
        .initial_stream_window_size(Some(WINDOW_BYTES))
        .initial_connection_window_size(Some(WINDOW_BYTES))
        .connect()
        .await
        .expect("connect");
    let mut client = pb::start_margin_service_client::StartMarginServiceClient::new(channel);
    let mut responses = client
        .watch_fleet(input)
        .await
        .expect("stream opens")
        .into_inner();
    let mut stable = 0;
    let mut last = alert_counter();
    for _ in 0..400 {
        tokio::time::sleep(Duration::from_millis(25)).await;
        let now = alert_counter();
        stable = if now == last { stable + 1 } else { 0 };
        last = now;
        if stable >= 12 {
            break;
        }
    }
    assert!(
        stable >= 12,
        "the server kept producing alerts for an idle reader"
    );
    let produced = last - before;
    // Two unread alerts per vehicle and kind may wait, plus what one update adds (each vehicle
    // may clear and raise each of its two kinds).
    // may clear and raise each of its two kinds); beyond that only what the transport buffers:
    // the client's window and tonic's encoding chunk (32 KiB), counted in the smallest alert.
    let smallest = reference_alerts
        .iter()
        .map(|a| a.encoded_len())
        .min()
        .unwrap_or(1) as u64;
    let transport = (u64::from(WINDOW_BYTES) + 32 * 1024) / smallest;
    let bound = (VEHICLES * 2 * 2 + VEHICLES * 2 * 2) as u64 + transport;
    println!(
        "while not reading: {produced} alerts made (bound {bound}, a full run makes {}), \
         {} of {} updates taken from the client",
        reference_alerts.len(),
        taken.load(Ordering::Relaxed),
        flipping_night().len()
    );
    assert!(
        produced <= bound,
        "{produced} alerts held for a reader that does not read"
    );
    assert!((produced as usize) < reference_alerts.len());

    // Reading again: every alert, in the reference's order; outlook changes coalesced.
    let mut events = Vec::new();
    while let Some(r) = responses.message().await.expect("no stream error") {
        events.extend(r.event);
    }
    let slow_alerts = alerts(&events);
    assert_eq!(
        keys(&slow_alerts),
        keys(&reference_alerts),
        "no alert lost, none added"
    );
    assert_eq!(
        last_outlooks(&events),
        last_outlooks(&reference),
        "latest outlook wins"
    );
    let changes = |ev: &[Event]| {
        ev.iter()
            .filter(|e| matches!(e, Event::OutlookChange(_)))
            .count()
    };
    println!(
        "outlook changes: {} for the slow reader, {} for the fast one",
        changes(&events),
        changes(&reference)
    );
    server.shutdown().await.expect("shutdown");
}
