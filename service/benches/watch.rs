//! WatchFleet benchmarks, over real gRPC on 127.0.0.1:
//!
//! - memory per watched vehicle at 100,000 vehicles: the per-vehicle state (struct, encoded
//!   profile, ids, a full ring of coolant readings, last telemetry) with its table entry, printed
//!   (target below 2 KiB);
//! - the same measured as process RSS: `/proc/self/statm` read before 100,000 vehicles are
//!   watched and after every one has been scored, the difference divided by 100,000 (the client
//!   runs in the same process; its sent messages are gone and every answer read by then);
//! - re-score throughput of a zone forecast update for a 10,000-vehicle zone: one update sent,
//!   timed until the 10,000 outlook changes are back (vehicles re-scored per second).
//!
//! The vehicles are invented: a fictional depot with a made-up cold night.

use std::time::{Duration, Instant};

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use prost_types::Timestamp;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio::runtime::Runtime;
use tokio::sync::mpsc;
use tokio_stream::wrappers::ReceiverStream;

/// Start of the invented night, UTC seconds.
const NIGHT_START_S: i64 = 1_736_877_600;
/// Vehicles in the benchmarked zone.
const ZONE_VEHICLES: usize = 10_000;

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

fn watched(i: usize) -> pb::WatchedVehicle {
    pb::WatchedVehicle {
        vehicle: Some(pb::VehicleProfile {
            vehicle_id: format!("ridge-depot-unit-{i:06}"),
            engine: Some(pb::EngineSpec {
                archetype_id: "heavy-di-i6".to_string(),
                ..Default::default()
            }),
            aids: i.is_multiple_of(3).then(|| pb::StartAids {
                block_heater_w: Some(1000.0),
                ..Default::default()
            }),
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
                grade: pb::FuelGrade::UsNo2 as i32,
                tank_capacity_l: 400.0,
                ..Default::default()
            }),
            sheltered: false,
        }),
        forecast_zone_id: "ridge".to_string(),
        depot_id: "ridge-depot".to_string(),
        departure_time: Some(at_hour(10)),
        time_zone: String::new(),
    }
}

fn request(update: Update) -> pb::WatchFleetRequest {
    pb::WatchFleetRequest {
        update: Some(update),
        sequence: 0,
    }
}

fn memory_per_vehicle(_c: &mut Criterion) {
    let vehicles: Vec<pb::WatchedVehicle> = (0..100_000).map(watched).collect();
    let bytes = startmargin_service::watch::bytes_per_vehicle(&vehicles);
    println!(
        "watch memory: {bytes} bytes per watched vehicle at 100,000 vehicles \
         (struct {} bytes; target < 2048)",
        startmargin_service::watch::vehicle_struct_bytes()
    );
}

/// Resident set size of this process, bytes (`/proc/self/statm`, pages of 4 KiB).
fn rss_bytes() -> u64 {
    std::fs::read_to_string("/proc/self/statm")
        .ok()
        .and_then(|s| s.split_whitespace().nth(1)?.parse::<u64>().ok())
        .map_or(0, |pages| pages * 4096)
}

/// Vehicles of the RSS measurement.
const RSS_VEHICLES: usize = 100_000;

fn memory_rss_per_vehicle(_c: &mut Criterion) {
    let rt = Runtime::new().expect("runtime");
    let server = rt
        .block_on(startmargin_service::spawn_on_loopback())
        .expect("server");
    let (before, after) = rt.block_on(async {
        let channel = tonic::transport::Channel::from_shared(format!("http://{}", server.addr))
            .expect("uri")
            .connect()
            .await
            .expect("connect");
        let (tx, input) = mpsc::channel(1024);
        let mut client = StartMarginServiceClient::new(channel);
        let mut rx = client
            .watch_fleet(ReceiverStream::new(input))
            .await
            .expect("open")
            .into_inner();
        let before = rss_bytes();
        let sender = tokio::spawn(async move {
            for i in 0..RSS_VEHICLES {
                tx.send(request(Update::Vehicle(watched(i))))
                    .await
                    .expect("send");
            }
            tx.send(request(Update::ZoneForecast(pb::WatchZoneForecast {
                zone_id: "ridge".to_string(),
                forecast: Some(forecast(-10.0)),
            })))
            .await
            .expect("send");
            tx
        });
        let mut changes = 0;
        while changes < RSS_VEHICLES {
            let r = rx.message().await.expect("no error").expect("open");
            if matches!(r.event, Some(Event::OutlookChange(_))) {
                changes += 1;
            }
        }
        let tx = sender.await.expect("sender");
        let after = rss_bytes();
        drop(tx);
        (before, after)
    });
    println!(
        "watch memory as RSS: {:.0} bytes per watched vehicle at 100,000 vehicles \
         (RSS {:.1} MiB before, {:.1} MiB after scoring; target <= 1024)",
        after.saturating_sub(before) as f64 / RSS_VEHICLES as f64,
        before as f64 / 1_048_576.0,
        after as f64 / 1_048_576.0
    );
    rt.block_on(server.shutdown()).expect("shutdown");
}

/// An open watch stream with the zone's vehicles scored once.
struct Stream {
    tx: mpsc::Sender<pb::WatchFleetRequest>,
    rx: tonic::Streaming<pb::WatchFleetResponse>,
}

impl Stream {
    /// Sends a zone forecast and waits for every vehicle's outlook change.
    async fn zone_update(&mut self, air_c: f64) {
        self.tx
            .send(request(Update::ZoneForecast(pb::WatchZoneForecast {
                zone_id: "ridge".to_string(),
                forecast: Some(forecast(air_c)),
            })))
            .await
            .expect("send");
        let mut changes = 0;
        while changes < ZONE_VEHICLES {
            let r = self.rx.message().await.expect("no error").expect("open");
            if matches!(r.event, Some(Event::OutlookChange(_))) {
                changes += 1;
            }
        }
    }
}

fn zone_rescore(c: &mut Criterion) {
    let rt = Runtime::new().expect("runtime");
    let server = rt
        .block_on(startmargin_service::spawn_on_loopback())
        .expect("server");
    let mut stream = rt.block_on(async {
        let channel = tonic::transport::Channel::from_shared(format!("http://{}", server.addr))
            .expect("uri")
            .connect()
            .await
            .expect("connect");
        let (tx, input) = mpsc::channel(1024);
        let mut client = StartMarginServiceClient::new(channel);
        let rx = client
            .watch_fleet(ReceiverStream::new(input))
            .await
            .expect("open")
            .into_inner();
        for i in 0..ZONE_VEHICLES {
            tx.send(request(Update::Vehicle(watched(i))))
                .await
                .expect("send");
        }
        let mut s = Stream { tx, rx };
        s.zone_update(-10.0).await;
        s
    });
    let mut group = c.benchmark_group("watch");
    group.sample_size(10);
    group.measurement_time(Duration::from_secs(20));
    group.throughput(Throughput::Elements(ZONE_VEHICLES as u64));
    let mut flip = false;
    group.bench_function("zone_update_10000_vehicles", |b| {
        b.iter_custom(|iters| {
            rt.block_on(async {
                let start = Instant::now();
                for _ in 0..iters {
                    flip = !flip;
                    stream.zone_update(if flip { -25.0 } else { -5.0 }).await;
                }
                start.elapsed()
            })
        })
    });
    group.finish();
    drop(stream);
    rt.block_on(server.shutdown()).expect("shutdown");
}

criterion_group!(
    benches,
    memory_per_vehicle,
    memory_rss_per_vehicle,
    zone_rescore
);
criterion_main!(benches);
