//! Helpers of the WatchFleet end-to-end tests: an invented zone's forecasts, a test fleet, the
//! telemetry of a night, and running a stream to its end.
#![allow(dead_code, unreachable_pub)]

use startmargin_e2e::{FORECAST_START_S, TestServer, at_hour, sample_vehicle};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio_stream::StreamExt as _;

/// Departure of every test vehicle: 10 h after the forecast start (04:00 UTC).
pub const DEPARTURE_H: f64 = 10.0;

/// A forecast of 12 hourly points: `air_c` everywhere, light wind, clear sky.
pub fn forecast(air_c: f64) -> pb::Forecast {
    pb::Forecast {
        start_time: Some(at_hour(0.0)),
        step: Some(prost_types::Duration {
            seconds: 3600,
            nanos: 0,
        }),
        points: (0..12)
            .map(|_| pb::ForecastPoint {
                air_c,
                wind_mps: 2.0,
                cloud_cover_pct: 10.0,
                air_spread_k: None,
            })
            .collect(),
        barometric_kpa: None,
    }
}

pub fn zone(seq: u64, zone_id: &str, air_c: f64) -> pb::WatchFleetRequest {
    pb::WatchFleetRequest {
        update: Some(Update::ZoneForecast(pb::WatchZoneForecast {
            zone_id: zone_id.to_string(),
            forecast: Some(forecast(air_c)),
        })),
        sequence: seq,
    }
}

/// Vehicle `i` of the test fleet: batteries from weak to strong, every third with a block heater.
pub fn vehicle(seq: u64, i: usize, zone_id: &str) -> pb::WatchFleetRequest {
    let mut profile = sample_vehicle(&format!("unit-{i:03}"));
    if let Some(b) = profile.battery.as_mut() {
        b.capacity_cca = 450.0 + 60.0 * (i % 10) as f64;
        b.state_of_charge_pct = Some(55.0 + 4.0 * (i % 10) as f64);
    }
    if i.is_multiple_of(3) {
        profile.aids = Some(pb::StartAids {
            block_heater_w: Some(1000.0),
            ..Default::default()
        });
    }
    pb::WatchFleetRequest {
        update: Some(Update::Vehicle(pb::WatchedVehicle {
            vehicle: Some(profile),
            forecast_zone_id: zone_id.to_string(),
            depot_id: "north-yard".to_string(),
            departure_time: Some(at_hour(DEPARTURE_H)),
            time_zone: String::new(),
        })),
        sequence: seq,
    }
}

pub fn telemetry(
    seq: u64,
    vehicle_id: &str,
    at_s: i64,
    coolant_c: f64,
    ambient_c: f64,
    key_off: bool,
) -> pb::WatchFleetRequest {
    pb::WatchFleetRequest {
        update: Some(Update::Telemetry(pb::TelemetryUpdate {
            vehicle_id: vehicle_id.to_string(),
            telemetry: Some(pb::VehicleTelemetry {
                observed_at: Some(prost_types::Timestamp {
                    seconds: at_s,
                    nanos: 0,
                }),
                coolant_c: Some(coolant_c),
                ambient_c: Some(ambient_c),
                ..Default::default()
            }),
            block_heater_on: None,
            key_off,
        })),
        sequence: seq,
    }
}

/// Sends `updates` on a new stream, closes the input and collects every event.
pub async fn run(server: &TestServer, updates: Vec<pb::WatchFleetRequest>) -> Vec<Event> {
    let mut client = server.client();
    let responses = client
        .watch_fleet(tokio_stream::iter(updates))
        .await
        .expect("stream opens")
        .into_inner();
    responses
        .map(|r| r.expect("no stream error").event.expect("an event"))
        .collect()
        .await
}

pub fn alerts(events: &[Event]) -> Vec<pb::Alert> {
    events
        .iter()
        .filter_map(|e| match e {
            Event::Alert(a) => Some(a.clone()),
            _ => None,
        })
        .collect()
}

/// (id, vehicle, kind, state) of each alert, in order.
pub fn keys(alerts: &[pb::Alert]) -> Vec<(String, String, i32, i32)> {
    alerts
        .iter()
        .map(|a| (a.alert_id.clone(), a.vehicle_id.clone(), a.kind, a.state))
        .collect()
}

/// A night of a 30-vehicle zone: mild evening, telemetry every 30 min, then the forecast turns
/// much colder, then milder again.
pub fn night_script() -> Vec<pb::WatchFleetRequest> {
    let mut seq = 0;
    let mut next = || {
        seq += 1;
        seq
    };
    let mut u = vec![zone(next(), "hill", -2.0)];
    for i in 0..30 {
        u.push(vehicle(next(), i, "hill"));
    }
    for step in 0..6_i64 {
        let at_s = FORECAST_START_S + step * 1800;
        for i in 0..30 {
            let coolant_c = -2.0 + 85.0 * (-(step as f64) * 0.5 / 3.0).exp();
            u.push(telemetry(
                next(),
                &format!("unit-{i:03}"),
                at_s,
                coolant_c,
                -2.0,
                step == 0,
            ));
        }
        if step == 2 {
            u.push(zone(next(), "hill", -30.0));
        }
        if step == 4 {
            u.push(zone(next(), "hill", -12.0));
        }
    }
    u
}

/// The last known state of `script`, replayed the way a reconnecting client does: each vehicle's
/// latest profile, then its telemetry since its last key-off, then each zone's latest forecast
/// (last, so that every vehicle is scored once with its whole state).
pub fn replay_of(script: &[pb::WatchFleetRequest]) -> Vec<pb::WatchFleetRequest> {
    use std::collections::BTreeMap;
    let mut vehicles: BTreeMap<String, pb::WatchFleetRequest> = BTreeMap::new();
    let mut telemetry: BTreeMap<String, Vec<pb::WatchFleetRequest>> = BTreeMap::new();
    let mut zones: BTreeMap<String, pb::WatchFleetRequest> = BTreeMap::new();
    for u in script {
        match &u.update {
            Some(Update::Vehicle(w)) => {
                let id = w
                    .vehicle
                    .as_ref()
                    .map(|v| v.vehicle_id.clone())
                    .unwrap_or_default();
                vehicles.insert(id, u.clone());
            }
            Some(Update::Telemetry(t)) => {
                let list = telemetry.entry(t.vehicle_id.clone()).or_default();
                if t.key_off {
                    list.clear();
                }
                list.push(u.clone());
            }
            Some(Update::ZoneForecast(z)) => {
                zones.insert(z.zone_id.clone(), u.clone());
            }
            _ => {}
        }
    }
    let mut out: Vec<_> = vehicles.into_values().collect();
    out.extend(telemetry.into_values().flatten());
    out.extend(zones.into_values());
    out
}

/// The alerts that hold after `alerts` (raised and not cleared since), by id.
pub fn held(alerts: &[pb::Alert]) -> std::collections::BTreeSet<String> {
    let mut held = std::collections::BTreeSet::new();
    for a in alerts {
        if a.state == pb::AlertState::Raised as i32 {
            held.insert(a.alert_id.clone());
        } else {
            held.remove(&a.alert_id);
        }
    }
    held
}

/// Every OutlookChange of `vehicle_id`, in order.
pub fn outlook_changes(events: &[Event], vehicle_id: &str) -> Vec<pb::OutlookChange> {
    events
        .iter()
        .filter_map(|e| match e {
            Event::OutlookChange(c) if c.vehicle_id == vehicle_id => Some(c.clone()),
            _ => None,
        })
        .collect()
}

/// Start of the test night, UTC seconds.
pub const NIGHT_START_S: i64 = FORECAST_START_S;

/// Sends `updates` one at a time, each after the previous one's outlook change or refusal came
/// back (updates that score nothing, like a zone without vehicles, are sent straight on).
pub async fn run_lockstep(server: &TestServer, updates: Vec<pb::WatchFleetRequest>) -> Vec<Event> {
    let (tx, rx) = tokio::sync::mpsc::channel(1);
    let mut client = server.client();
    let mut responses = client
        .watch_fleet(tokio_stream::wrappers::ReceiverStream::new(rx))
        .await
        .expect("stream opens")
        .into_inner();
    let mut events = Vec::new();
    let mut zone_sent = false;
    for u in updates {
        let answers = match &u.update {
            Some(Update::ZoneForecast(_)) => {
                zone_sent = true;
                false
            }
            Some(Update::Removal(_)) => false,
            _ => zone_sent,
        };
        tx.send(u).await.expect("send");
        if !answers {
            continue;
        }
        loop {
            let event = responses
                .message()
                .await
                .expect("no stream error")
                .and_then(|r| r.event)
                .expect("an event");
            let done = matches!(event, Event::OutlookChange(_) | Event::Refused(_));
            events.push(event);
            if done {
                break;
            }
        }
    }
    drop(tx);
    while let Some(r) = responses.message().await.expect("no stream error") {
        events.extend(r.event);
    }
    events
}
