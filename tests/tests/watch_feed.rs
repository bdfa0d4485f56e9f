//! WatchFleet through real gRPC on loopback: the cool-down fit recovers a known time constant
//! from noisy coolant readings sent as telemetry; replaying the same inputs gives the same alerts
//! with the same ids, and a replay of the last known state on a new stream raises exactly the
//! alerts that hold at the end of the uninterrupted run; bad updates are refused with field
//! paths and the stream goes on; a stream watches at most `watch_max_vehicles_per_stream`.

mod watch_common;

use startmargin_e2e::{TestServer, violated_fields_in};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use tonic::Code;
use watch_common::*;

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn cooldown_fit_recovers_a_known_time_constant_from_noisy_readings() {
    let server = TestServer::start().await.expect("server");
    let tau_h = 2.5;
    let ambient_c = -8.0;
    let mut updates = vec![zone(1, "hill", ambient_c), vehicle(2, 1, "hill")];
    // Readings every 15 min for 2.75 h after key-off, with ±0.4 K of deterministic noise.
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut noise = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        ((state >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 0.8
    };
    for k in 0..12_i64 {
        let t_h = k as f64 * 0.25;
        let coolant_c = ambient_c + (85.0 - ambient_c) * (-t_h / tau_h).exp() + noise();
        updates.push(telemetry(
            10 + k as u64,
            "unit-001",
            NIGHT_START_S + k * 900,
            coolant_c,
            ambient_c,
            k == 0,
        ));
    }
    // One update at a time, so that no outlook change is coalesced with the next.
    let events = run_lockstep(&server, updates).await;
    let changes = outlook_changes(&events, "unit-001");
    // No fit before the 4th reading; one from then on.
    assert!(changes.len() >= 12, "{} outlook changes", changes.len());
    assert!(
        changes[..4]
            .iter()
            .all(|c| c.fitted_cooldown_time_constant_h.is_none())
    );
    let fitted_h = changes
        .last()
        .and_then(|c| c.fitted_cooldown_time_constant_h)
        .expect("a fitted time constant");
    let error = (fitted_h - tau_h) / tau_h;
    println!(
        "fitted tau {fitted_h:.3} h for a true {tau_h} h: error {:.2} %",
        error * 100.0
    );
    assert!(error.abs() < 0.05, "fitted {fitted_h} h, true {tau_h} h");
    server.shutdown().await.expect("shutdown");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn replays_give_the_same_alerts_with_the_same_ids() {
    let server = TestServer::start().await.expect("server");
    let script = night_script();
    let first = alerts(&run(&server, script.clone()).await);
    let second = alerts(&run(&server, script.clone()).await);
    assert!(!first.is_empty());
    assert!(
        first
            .iter()
            .any(|a| a.state == pb::AlertState::Cleared as i32)
    );
    assert!(
        first
            .iter()
            .any(|a| a.kind == pb::AlertKind::ActByNear as i32)
    );
    assert_eq!(
        keys(&first),
        keys(&second),
        "same inputs, same alerts, same ids, same order"
    );
    assert_eq!(first, second, "same alerts down to reasons and actions");

    // A new stream fed the last known state raises exactly the alerts that still hold.
    let replayed = alerts(&run(&server, replay_of(&script)).await);
    assert!(
        replayed
            .iter()
            .all(|a| a.state == pb::AlertState::Raised as i32)
    );
    let at_end = held(&first);
    let raised: std::collections::BTreeSet<String> =
        replayed.iter().map(|a| a.alert_id.clone()).collect();
    assert_eq!(raised.len(), replayed.len(), "each alert once");
    assert!(!at_end.is_empty());
    assert_eq!(
        raised, at_end,
        "the replay re-raises what holds, with the same ids"
    );
    server.shutdown().await.expect("shutdown");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn bad_updates_are_refused_with_field_paths_and_the_stream_goes_on() {
    let server = TestServer::start().await.expect("server");
    let mut no_id = vehicle(3, 7, "hill");
    if let Some(Update::Vehicle(w)) = no_id.update.as_mut() {
        w.vehicle.as_mut().expect("profile").vehicle_id.clear();
        w.departure_time = None;
    }
    let mut bad_battery = vehicle(4, 8, "hill");
    if let Some(Update::Vehicle(w)) = bad_battery.update.as_mut() {
        w.vehicle
            .as_mut()
            .and_then(|v| v.battery.as_mut())
            .expect("battery")
            .capacity_cca = f64::NAN;
    }
    let updates = vec![
        zone(1, "hill", -10.0),
        vehicle(2, 1, "hill"),
        no_id,
        bad_battery,
        telemetry(5, "unit-999", NIGHT_START_S, 80.0, -10.0, true),
        pb::WatchFleetRequest {
            update: None,
            sequence: 6,
        },
        telemetry(7, "unit-001", NIGHT_START_S, 80.0, -10.0, true),
    ];
    let events = run_lockstep(&server, updates).await;
    let refused: Vec<&pb::RefusedUpdate> = events
        .iter()
        .filter_map(|e| match e {
            Event::Refused(r) => Some(r),
            _ => None,
        })
        .collect();
    let by_seq = |seq: u64| {
        let r = refused.iter().find(|r| r.sequence == seq).expect("refused");
        let status = r.error.as_ref().expect("status");
        assert_eq!(status.code, Code::InvalidArgument as i32);
        violated_fields_in(status)
    };
    assert_eq!(refused.len(), 4, "{refused:?}");
    let f = by_seq(3);
    assert!(
        f.contains(&"vehicle.vehicle.vehicle_id".to_string()),
        "{f:?}"
    );
    assert!(f.contains(&"vehicle.departure_time".to_string()), "{f:?}");
    assert_eq!(by_seq(4), ["vehicle.vehicle.battery.capacity_cca"]);
    assert_eq!(by_seq(5), ["telemetry.vehicle_id"]);
    assert_eq!(by_seq(6), ["update"]);
    // The good vehicle was scored after its vehicle update and again after its telemetry; the
    // refused one is not watched.
    assert_eq!(outlook_changes(&events, "unit-001").len(), 2);
    assert!(outlook_changes(&events, "unit-008").is_empty());
    server.shutdown().await.expect("shutdown");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn a_stream_watches_at_most_the_configured_number_of_vehicles() {
    let config = startmargin_service::Config {
        watch_max_vehicles_per_stream: 2,
        ..startmargin_e2e::loopback_config()
    };
    let server = TestServer::start_with(config).await.expect("server");
    let updates = vec![
        zone(1, "hill", -10.0),
        vehicle(2, 1, "hill"),
        vehicle(3, 2, "hill"),
        vehicle(4, 3, "hill"),
        // Replacing a watched vehicle is not a new one.
        vehicle(5, 1, "hill"),
        pb::WatchFleetRequest {
            update: Some(Update::Removal(pb::VehicleRemoval {
                vehicle_id: "unit-002".to_string(),
            })),
            sequence: 6,
        },
        vehicle(7, 3, "hill"),
    ];
    let events = run_lockstep(&server, updates).await;
    let refused: Vec<(u64, i32)> = events
        .iter()
        .filter_map(|e| match e {
            Event::Refused(r) => Some((r.sequence, r.error.as_ref().map_or(0, |s| s.code))),
            _ => None,
        })
        .collect();
    assert_eq!(refused, [(4, Code::ResourceExhausted as i32)]);
    assert_eq!(
        outlook_changes(&events, "unit-003").len(),
        1,
        "watched once removed room"
    );
    server.shutdown().await.expect("shutdown");
}
