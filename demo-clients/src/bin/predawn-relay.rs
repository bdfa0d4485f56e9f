//! `predawn-relay`: plays an invented night at the invented Frostmere yard (fictional) into
//! `WatchFleet` at accelerated time, the way a telematics vendor's backend would relay it, and
//! prints each alert as one JSON line for a notification system.
//!
//! The night: the yard's vehicles key off around 17:30 local; every 20 minutes each reports its
//! coolant (cooling toward the air along an invented curve; the shuttle bus, plugged in all
//! night, stays warm) with the air temperature; at 22:00 the forecast is revised colder (the
//! front arrives faster); at 01:00 the first yard vehicle with a block heater is plugged in. The
//! readings are made up for the demo. By default an embedded server runs on 127.0.0.1; with
//! `--endpoint URL` the relay talks to a running `startmargind`.
//!
//! Plugging in a block heater: use a grounded outdoor-rated cord sized for the load, never a
//! light indoor extension cord, and follow the manufacturer and local electrical codes.

use std::time::{Duration, SystemTime, UNIX_EPOCH};

use anyhow::Context as _;
use clap::Parser;
use serde_json::json;
use startmargin_demo::scenario::{self, DEPOT_ID, ZONE_ID};
use startmargin_sdk::api;
use startmargin_sdk::{WatchBuilder, WatchEvent};

/// Plays an invented night into WatchFleet and prints each alert as a JSON line.
#[derive(Debug, Parser)]
#[command(name = "predawn-relay", version)]
struct Cli {
    /// A running server (e.g. http://127.0.0.1:50051); default: an embedded one on 127.0.0.1.
    #[arg(long, value_name = "URL")]
    endpoint: Option<String>,
    /// Real milliseconds per 20 simulated minutes.
    #[arg(long, default_value_t = 100)]
    step_ms: u64,
}

/// Minutes between two rounds of telemetry.
const STEP_MIN: i64 = 20;
/// Invented cool-down time constants of the yard's vehicles, hours (by position in the fleet).
const COOLDOWN_H: [f64; 6] = [2.2, 3.0, 2.6, 3.6, 1.8, 4.2];
/// Kelvin the revised forecast is colder after 22:00.
const REVISION_K: f64 = 3.0;

fn secs(t: SystemTime) -> i64 {
    t.duration_since(UNIX_EPOCH)
        .map_or(0, |d| i64::try_from(d.as_secs()).unwrap_or(i64::MAX))
}

/// Air temperature of the forecast at `at_s`, linear between its points.
fn air_at(f: &api::Forecast, at_s: i64) -> f64 {
    let start = f.start_time.map_or(0, |t| t.seconds);
    let step = f.step.map_or(3600, |d| d.seconds.max(1));
    let x = (at_s - start) as f64 / step as f64;
    let i = (x.floor().max(0.0) as usize).min(f.points.len().saturating_sub(1));
    let j = (i + 1).min(f.points.len().saturating_sub(1));
    let w = (x - i as f64).clamp(0.0, 1.0);
    match (f.points.get(i), f.points.get(j)) {
        (Some(a), Some(b)) => a.air_c + (b.air_c - a.air_c) * w,
        _ => 0.0,
    }
}

fn at(s: i64) -> SystemTime {
    UNIX_EPOCH + Duration::from_secs(u64::try_from(s).unwrap_or(0))
}

fn local_of(s: i64) -> String {
    scenario::local_hhmm(at(s))
}

fn alert_json(a: &api::Alert) -> serde_json::Value {
    let name = |k: i32, f: fn(i32) -> Option<&'static str>| f(k).unwrap_or("UNSPECIFIED");
    json!({
        "alert_id": a.alert_id,
        "state": name(a.state, |k| api::AlertState::try_from(k).ok().map(|s| s.as_str_name())),
        "kind": name(a.kind, |k| api::AlertKind::try_from(k).ok().map(|s| s.as_str_name())),
        "vehicle_id": a.vehicle_id,
        "depot_id": a.depot_id,
        "departure_local": a.departure_time.map(|t| local_of(t.seconds)),
        "outlook": name(a.outlook, |k| api::StartOutlook::try_from(k).ok().map(|s| s.as_str_name())),
        "no_start_pct": (a.no_start_pct * 10.0).round() / 10.0,
        "act_by_local": a.act_by.map(|t| local_of(t.seconds)),
        "reason": a.reason,
        "actions": a.actions.iter().map(|x| json!({
            "summary": x.summary,
            "act_by_local": x.act_by.map(|t| local_of(t.seconds)),
            "caution": x.caution,
        })).collect::<Vec<_>>(),
    })
}

#[tokio::main]
async fn main() -> anyhow::Result<()> {
    let cli = Cli::parse();
    let scenario = scenario::evening_cold_front().map_err(|e| anyhow::anyhow!("{e:?}"))?;
    let (endpoint, server) = match cli.endpoint {
        Some(url) => (url, None),
        None => {
            let server = startmargin_service::spawn_on_loopback()
                .await
                .context("embedded server")?;
            (format!("http://{}", server.addr), Some(server))
        }
    };
    let watch = WatchBuilder::new([endpoint]).start()?;
    let (mut tx, mut events) = watch.split();

    // Alerts as JSON lines, as they come.
    let printer = tokio::spawn(async move {
        let mut alerts = 0usize;
        while let Some(e) = events.next_event().await {
            match e {
                WatchEvent::Alert(a) => {
                    alerts += 1;
                    println!("{}", alert_json(&a));
                }
                WatchEvent::Refused {
                    sequence,
                    vehicle_id,
                    error,
                } => {
                    eprintln!("update {sequence} ({vehicle_id}) refused: {error}");
                }
                WatchEvent::Reconnecting { attempt, reason } => {
                    eprintln!("reconnecting (attempt {attempt}): {reason}");
                }
                WatchEvent::Outlook(_) => {}
            }
        }
        alerts
    });

    let forecast: api::Forecast = scenario.forecast.clone().into_pb();
    struct Parked {
        id: String,
        key_off_s: i64,
        coolant0_c: f64,
        tau_h: f64,
        plugged_from_s: Option<i64>,
        has_heater: bool,
        departure_s: i64,
    }
    let mut parked = Vec::new();
    for (i, v) in scenario.vehicles.iter().enumerate() {
        let night = v.night.clone().into_pb();
        let profile = night.vehicle.clone().context("profile")?;
        let has_heater = profile
            .aids
            .as_ref()
            .and_then(|a| a.block_heater_w)
            .is_some_and(|w| w > 0.0);
        let key_off = night.telemetry.unwrap_or_default();
        parked.push(Parked {
            id: profile.vehicle_id.clone(),
            key_off_s: key_off
                .observed_at
                .map_or(secs(scenario.forecast_start), |t| t.seconds),
            coolant0_c: key_off.coolant_c.unwrap_or(85.0),
            tau_h: COOLDOWN_H[i % COOLDOWN_H.len()],
            plugged_from_s: night
                .block_heater_plan
                .as_ref()
                .and_then(|p| p.on_from)
                .map(|t| t.seconds),
            has_heater,
            departure_s: secs(v.departure),
        });
        tx.upsert_vehicle(api::WatchedVehicle {
            vehicle: Some(profile),
            forecast_zone_id: ZONE_ID.to_string(),
            depot_id: DEPOT_ID.to_string(),
            departure_time: night.departure_time,
        })
        .await?;
        tx.telemetry(api::TelemetryUpdate {
            vehicle_id: v.id().to_string(),
            telemetry: Some(key_off),
            block_heater_on: None,
            key_off: true,
        })
        .await?;
    }
    tx.zone_forecast(ZONE_ID, forecast.clone()).await?;

    let start_s = secs(scenario::local(17, 30, false));
    let revise_s = secs(scenario::local(22, 0, false));
    let plug_s = secs(scenario::local(1, 0, true));
    let last_s = parked
        .iter()
        .map(|p| p.departure_s)
        .min()
        .unwrap_or(start_s)
        - 600;
    let mut current = forecast.clone();
    let mut revised = false;
    let mut plugged_one = false;
    let mut now_s = start_s + STEP_MIN * 60;
    while now_s <= last_s {
        tokio::time::sleep(Duration::from_millis(cli.step_ms)).await;
        if !revised && now_s >= revise_s {
            revised = true;
            let start = current.start_time.map_or(0, |t| t.seconds);
            let step = current.step.map_or(3600, |d| d.seconds);
            for (k, p) in current.points.iter_mut().enumerate() {
                if start + k as i64 * step >= revise_s {
                    p.air_c -= REVISION_K;
                }
            }
            eprintln!("{} forecast revised {REVISION_K} K colder", local_of(now_s));
            tx.zone_forecast(ZONE_ID, current.clone()).await?;
        }
        if !plugged_one
            && now_s >= plug_s
            && let Some(p) = parked
                .iter_mut()
                .find(|p| p.has_heater && p.plugged_from_s.is_none())
        {
            plugged_one = true;
            p.plugged_from_s = Some(now_s);
            eprintln!("{} {} plugged in", local_of(now_s), p.id);
        }
        for p in &parked {
            if now_s >= p.departure_s {
                continue;
            }
            let air_c = air_at(&current, now_s);
            let hours = (now_s - p.key_off_s) as f64 / 3600.0;
            let heater_on = p.plugged_from_s.is_some_and(|from| now_s >= from);
            // Invented readings: cooling toward the air; a plugged-in heater holds it warm.
            let coolant_c = if heater_on {
                air_c.max(-40.0) + 30.0
            } else {
                air_c + (p.coolant0_c - air_c) * (-hours / p.tau_h).exp()
            };
            tx.telemetry(api::TelemetryUpdate {
                vehicle_id: p.id.clone(),
                telemetry: Some(api::VehicleTelemetry {
                    observed_at: Some(at(now_s).into()),
                    coolant_c: Some((coolant_c * 10.0).round() / 10.0),
                    ambient_c: Some((air_c * 10.0).round() / 10.0),
                    ..Default::default()
                }),
                block_heater_on: heater_on.then_some(true),
                key_off: false,
            })
            .await?;
        }
        now_s += STEP_MIN * 60;
    }
    tx.close();
    let alerts = printer.await.context("printer")?;
    eprintln!(
        "{}: {} vehicles watched through the night, {alerts} alert events",
        scenario.depot,
        parked.len()
    );
    if let Some(server) = server {
        server.shutdown().await?;
    }
    Ok(())
}
