//! Unary latency against a watch re-score, over real gRPC on 127.0.0.1: the p50 and p99 of
//! AssessVehicle on an idle server, then while one WatchFleet stream re-scores a 5,000-vehicle
//! zone (one zone forecast update), and their ratio. The compute pool serves unary calls before
//! queued stream work, so a unary call waits at most for the jobs already running.
//!
//! A bench binary (`cargo bench -p startmargin-service --bench fairness`): it prints the figures
//! rather than fitting a model, since the second phase lasts only as long as the re-score.
//! The vehicles are invented: a fictional depot on a made-up cold night.

use std::time::{Duration, Instant};

use prost_types::Timestamp;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio::sync::mpsc;
use tokio_stream::wrappers::ReceiverStream;
use tonic::transport::Channel;

/// Start of the invented night, UTC seconds.
const NIGHT_START_S: i64 = 1_736_877_600;
/// Vehicles in the re-scored zone.
const ZONE_VEHICLES: usize = 5_000;
/// Unary calls of the idle phase.
const IDLE_CALLS: usize = 300;

fn at_hour(h: i64) -> Timestamp {
    Timestamp {
        seconds: NIGHT_START_S + h * 3600,
        nanos: 0,
    }
}

fn forecast(air_c: f64) -> pb::Forecast {
    pb::Forecast {
        start_time: Some(at_hour(0)),
        step: Some(prost_types::Duration {
            seconds: 3600,
            nanos: 0,
        }),
        points: (0..12)
            .map(|i| pb::ForecastPoint {
                air_c: air_c - i as f64 * 0.5,
                wind_mps: 3.0,
                cloud_cover_pct: 20.0,
                air_spread_k: None,
            })
            .collect(),
        barometric_kpa: None,
    }
}

fn profile(vehicle_id: String, i: usize) -> pb::VehicleProfile {
    pb::VehicleProfile {
        vehicle_id,
        engine: Some(pb::EngineSpec {
            archetype_id: "heavy-di-i6".to_string(),
            ..Default::default()
        }),
        aids: None,
        battery: Some(pb::BatterySpec {
            capacity_cca: 500.0 + (i % 10) as f64 * 50.0,
            nominal_v: 12.0,
            state_of_charge_pct: Some(60.0 + (i % 8) as f64 * 5.0),
            ..Default::default()
        }),
        oil: Some(pb::OilSpec {
            sae_grade: "15W-40".to_string(),
        }),
        fuel: Some(pb::FuelSpec {
            grade: pb::FuelGrade::En590Arctic1 as i32,
            tank_capacity_l: 400.0,
            ..Default::default()
        }),
        sheltered: false,
    }
}

fn unary_request(i: usize) -> pb::AssessVehicleRequest {
    pb::AssessVehicleRequest {
        night: Some(pb::VehicleNight {
            vehicle: Some(profile(format!("gate-unit-{i}"), i)),
            forecast: Some(forecast(-12.0)),
            departure_time: Some(at_hour(10)),
            ..Default::default()
        }),
    }
}

fn request(update: Update) -> pb::WatchFleetRequest {
    pb::WatchFleetRequest {
        update: Some(update),
        sequence: 0,
    }
}

/// (p50, p99) of `samples`.
fn percentiles(samples: &mut [Duration]) -> (Duration, Duration) {
    samples.sort();
    let at = |q: f64| samples[((samples.len() - 1) as f64 * q).round() as usize];
    (at(0.50), at(0.99))
}

async fn unary(client: &mut StartMarginServiceClient<Channel>, i: usize) -> Duration {
    let started = Instant::now();
    client
        .assess_vehicle(unary_request(i))
        .await
        .expect("a unary call is answered");
    started.elapsed()
}

fn main() {
    // `cargo bench` passes `--bench`; `cargo test --benches` passes nothing: run either way.
    let rt = tokio::runtime::Runtime::new().expect("runtime");
    rt.block_on(async {
        let server = startmargin_service::spawn_on_loopback()
            .await
            .expect("server");
        let channel = Channel::from_shared(format!("http://{}", server.addr))
            .expect("uri")
            .connect()
            .await
            .expect("connect");
        let mut client = StartMarginServiceClient::new(channel.clone());

        for i in 0..20 {
            unary(&mut client, i).await; // warm-up
        }
        let mut idle: Vec<Duration> = Vec::with_capacity(IDLE_CALLS);
        for i in 0..IDLE_CALLS {
            idle.push(unary(&mut client, i).await);
        }

        // The watch stream: 5,000 vehicles, then one zone forecast that re-scores them all.
        let (tx, input) = mpsc::channel(1024);
        let mut events = StartMarginServiceClient::new(channel)
            .watch_fleet(ReceiverStream::new(input))
            .await
            .expect("watch opens")
            .into_inner();
        for i in 0..ZONE_VEHICLES {
            tx.send(request(Update::Vehicle(pb::WatchedVehicle {
                vehicle: Some(profile(format!("ridge-unit-{i:05}"), i)),
                forecast_zone_id: "ridge".to_string(),
                depot_id: "ridge-depot".to_string(),
                time_zone: String::new(),
                departure_time: Some(at_hour(10)),
            })))
            .await
            .expect("send");
        }
        let rescore_started = Instant::now();
        tx.send(request(Update::ZoneForecast(pb::WatchZoneForecast {
            zone_id: "ridge".to_string(),
            forecast: Some(forecast(-12.0)),
        })))
        .await
        .expect("send");
        let reader = tokio::spawn(async move {
            let mut changes = 0;
            while changes < ZONE_VEHICLES {
                let r = events.message().await.expect("no error").expect("open");
                if matches!(r.event, Some(Event::OutlookChange(_))) {
                    changes += 1;
                }
            }
            rescore_started.elapsed()
        });
        let mut during: Vec<Duration> = Vec::new();
        let mut i = 0;
        while !reader.is_finished() {
            during.push(unary(&mut client, i).await);
            i += 1;
        }
        let rescore = reader.await.expect("reader");

        let (idle_p50, idle_p99) = percentiles(&mut idle);
        let (p50, p99) = percentiles(&mut during);
        println!(
            "fairness: unary AssessVehicle idle p50 {:.1} ms, p99 {:.1} ms ({IDLE_CALLS} calls)",
            idle_p50.as_secs_f64() * 1e3,
            idle_p99.as_secs_f64() * 1e3
        );
        println!(
            "fairness: during a {ZONE_VEHICLES}-vehicle watch re-score ({:.1} s): p50 {:.1} ms, \
             p99 {:.1} ms ({} calls); p99 ratio {:.2}",
            rescore.as_secs_f64(),
            p50.as_secs_f64() * 1e3,
            p99.as_secs_f64() * 1e3,
            during.len(),
            p99.as_secs_f64() / idle_p99.as_secs_f64()
        );
        drop(tx);
        server.shutdown().await.expect("shutdown");
    });
}
