//! Time per vehicle on a WatchFleet stream: a telemetry report older than the one held for its
//! vehicle is refused (at `telemetry.telemetry.observed_at`) and changes nothing, so a late
//! evening report cannot clear a no-start alert; and one vehicle's report, however late its
//! stamp, never makes another vehicle's act-by alert due.

mod watch_common;

use startmargin_e2e::{TestServer, at_hour, sample_vehicle, violated_fields_in};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use watch_common::*;

fn hours(h: f64) -> i64 {
    NIGHT_START_S + (h * 3600.0).round() as i64
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn an_older_report_is_refused_and_clears_nothing() {
    let server = TestServer::start().await.expect("server");
    let updates = vec![
        zone(1, "hill", -30.0),
        vehicle(2, 1, "hill"),
        // 22:00: the engine has soaked to the cold.
        telemetry(3, "unit-001", hours(4.0), -27.0, -30.0, false),
        // Sent after it, observed at 18:30: warm coolant that would read as "heater on".
        telemetry(4, "unit-001", hours(0.5), 70.0, -30.0, false),
        // The same time again is not newer either.
        telemetry(5, "unit-001", hours(4.0), -27.0, -30.0, false),
    ];
    let events = run_lockstep(&server, updates).await;
    let raised: Vec<&pb::Alert> = events
        .iter()
        .filter_map(|e| match e {
            Event::Alert(a) => Some(a),
            _ => None,
        })
        .collect();
    assert!(
        raised
            .iter()
            .any(|a| a.kind == pb::AlertKind::OutlookRise as i32
                && a.state == pb::AlertState::Raised as i32),
        "the cold night raises an outlook alert: {raised:?}"
    );
    assert!(
        raised
            .iter()
            .all(|a| a.state == pb::AlertState::Raised as i32),
        "nothing is cleared by the old report: {raised:?}"
    );
    let refusals: Vec<(u64, Vec<String>)> = events
        .iter()
        .filter_map(|e| match e {
            Event::Refused(r) => Some((
                r.sequence,
                violated_fields_in(r.error.as_ref().expect("an error")),
            )),
            _ => None,
        })
        .collect();
    let path = vec!["telemetry.telemetry.observed_at".to_string()];
    assert_eq!(refusals, [(4, path.clone()), (5, path)]);
    let last = outlook_changes(&events, "unit-001")
        .pop()
        .expect("an outlook");
    assert!(!last.block_heater_on, "the old warm reading was not taken");
    server.shutdown().await.expect("shutdown");
}

fn act_by_alerts<'a>(events: &'a [Event], vehicle_id: &str) -> Vec<&'a pb::Alert> {
    events
        .iter()
        .filter_map(|e| match e {
            Event::Alert(a)
                if a.vehicle_id == vehicle_id && a.kind == pb::AlertKind::ActByNear as i32 =>
            {
                Some(a)
            }
            _ => None,
        })
        .collect()
}

/// A vehicle on arctic fuel with a block heater: on a -10 °C night its plug-in deadline is
/// around midnight (the engine, not the fuel, decides).
fn heated(seq: u64, vehicle_id: &str) -> pb::WatchFleetRequest {
    let mut p = sample_vehicle(vehicle_id);
    p.fuel.as_mut().expect("fuel").grade = pb::FuelGrade::En590Arctic1 as i32;
    p.aids = Some(pb::StartAids {
        block_heater_w: Some(1000.0),
        ..Default::default()
    });
    pb::WatchFleetRequest {
        update: Some(Update::Vehicle(pb::WatchedVehicle {
            vehicle: Some(p),
            forecast_zone_id: "hill".to_string(),
            depot_id: "north-yard".to_string(),
            departure_time: Some(at_hour(DEPARTURE_H)),
            time_zone: String::new(),
        })),
        sequence: seq,
    }
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn one_vehicles_late_clock_does_not_alert_the_others() {
    let server = TestServer::start().await.expect("server");
    let mut updates = vec![
        zone(1, "hill", -10.0),
        heated(2, "early"),
        heated(3, "quiet"),
        // One report stamped minutes before the departure.
        telemetry(4, "early", hours(DEPARTURE_H - 0.1), -9.0, -10.0, false),
        // A new forecast re-scores both.
        zone(5, "hill", -10.5),
    ];
    let first_part = run_lockstep(&server, updates.clone()).await;
    // The other vehicle reports the same late time itself.
    updates.push(telemetry(
        6,
        "quiet",
        hours(DEPARTURE_H - 0.1),
        -9.0,
        -10.5,
        false,
    ));
    let events = run_lockstep(&server, updates).await;

    let outlook = |events: &[Event], id: &str| {
        events.iter().any(|e| {
            matches!(e, Event::Alert(a) if a.vehicle_id == id
                && a.kind == pb::AlertKind::OutlookRise as i32
                && a.act_by.is_some())
        })
    };
    assert!(
        outlook(&first_part, "quiet"),
        "the quiet vehicle has a deadline tonight"
    );
    assert!(
        !act_by_alerts(&first_part, "early").is_empty(),
        "the late report makes its own vehicle's act-by alert due"
    );
    assert!(
        act_by_alerts(&first_part, "quiet").is_empty(),
        "another vehicle's clock made this one's alert due: {:?}",
        act_by_alerts(&first_part, "quiet")
    );
    assert!(
        !act_by_alerts(&events, "quiet").is_empty(),
        "its own late report makes the quiet vehicle's act-by alert due"
    );
    server.shutdown().await.expect("shutdown");
}
