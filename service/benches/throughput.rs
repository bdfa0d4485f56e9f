//! Server throughput against no-transport baselines, in one run, over real gRPC on 127.0.0.1:
//!
//! - AssessFleet: vehicles per second of a 2,000-vehicle stream (one shared zone forecast)
//!   against the same requests run in-process through `convert::assess_pb` on as many threads as
//!   the server has compute threads (the same thread count). Target: fleet ≥ 0.9 × in-process.
//! - AssessVehicle: sequential unary calls per second against sequential `grpc.health.v1` Check
//!   calls on the same connection (the transport's floor). Target: unary ≥ 0.5 × health check.
//! - Server CPU per AssessVehicle beyond its model time: the server runs on its own runtime with
//!   named threads, so the CPU its threads and the compute threads use over a fixed number of
//!   calls (read from `/proc/self/task/*/schedstat`) is its own, not the client's; the model time
//!   is the thread CPU of the same call's `convert::assess_pb` in-process. Target: ≤ 30 µs.
//!
//! Criterion measures each case; a short fixed-count pass at the end prints the ratios and the
//! server CPU.
//! The vehicles are invented: a fictional depot, a made-up cold night.

use std::collections::HashMap;
use std::hint::black_box;
use std::sync::Arc;
use std::time::{Duration, Instant};

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use prost_types::Timestamp;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_service::convert::{self, ZoneForecasts};
use tokio::runtime::Runtime;
use tokio_stream::StreamExt as _;
use tonic::transport::Channel;
use tonic_health::pb::HealthCheckRequest;
use tonic_health::pb::health_client::HealthClient;

const FLEET_VEHICLES: usize = 2_000;
const ZONE_ID: &str = "bench-depot";
const START_S: i64 = 1_736_877_600;

fn forecast() -> pb::Forecast {
    let air_c = [
        1.0, -1.5, -4.0, -7.5, -10.0, -12.5, -14.0, -15.0, -16.0, -16.5, -17.0, -16.0,
    ];
    pb::Forecast {
        start_time: Some(Timestamp {
            seconds: START_S,
            nanos: 0,
        }),
        step: None,
        points: air_c
            .iter()
            .enumerate()
            .map(|(i, &air_c)| pb::ForecastPoint {
                air_c,
                wind_mps: (9.0 - i as f64 * 0.6).max(1.5),
                cloud_cover_pct: (90.0 - i as f64 * 15.0).max(0.0),
                air_spread_k: None,
            })
            .collect(),
        barometric_kpa: None,
    }
}

/// A vehicle night of the invented fleet; `i` varies battery and coolant a little.
fn night(i: usize, inline_forecast: bool) -> pb::VehicleNight {
    pb::VehicleNight {
        vehicle: Some(pb::VehicleProfile {
            vehicle_id: format!("bench-truck-{i:05}"),
            engine: Some(pb::EngineSpec {
                archetype_id: "heavy-di-i6".to_string(),
                ..Default::default()
            }),
            aids: None,
            battery: Some(pb::BatterySpec {
                capacity_cca: 800.0 + (i % 5) as f64 * 50.0,
                nominal_v: 12.0,
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
            sheltered: i.is_multiple_of(3),
        }),
        telemetry: Some(pb::VehicleTelemetry {
            observed_at: Some(Timestamp {
                seconds: START_S,
                nanos: 0,
            }),
            coolant_c: Some(60.0 + (i % 30) as f64),
            ..Default::default()
        }),
        forecast: inline_forecast.then(forecast),
        forecast_zone_id: if inline_forecast {
            String::new()
        } else {
            ZONE_ID.to_string()
        },
        departure_time: Some(Timestamp {
            seconds: START_S + 10 * 3600,
            nanos: 0,
        }),
        block_heater_plan: None,
        options: None,
        ..Default::default()
    }
}

fn fleet_requests() -> Vec<pb::AssessFleetRequest> {
    let mut items = vec![pb::AssessFleetRequest {
        item_id: "zone".to_string(),
        item: Some(pb::assess_fleet_request::Item::ZoneForecast(
            pb::ZoneForecast {
                zone_id: ZONE_ID.to_string(),
                forecast: Some(forecast()),
            },
        )),
    }];
    items.extend((0..FLEET_VEHICLES).map(|i| pb::AssessFleetRequest {
        item_id: i.to_string(),
        item: Some(pb::assess_fleet_request::Item::Vehicle(night(i, false))),
    }));
    items
}

/// One fleet stream of every request; checks that every vehicle got an assessment.
/// One fleet run; returns the encoded bytes of its answers.
async fn fleet_once(
    client: &mut StartMarginServiceClient<Channel>,
    requests: &[pb::AssessFleetRequest],
) -> usize {
    let mut results = client
        .assess_fleet(tokio_stream::iter(requests.to_vec()))
        .await
        .expect("the fleet stream opens")
        .into_inner();
    let mut assessed = 0;
    let mut bytes = 0;
    while let Some(r) = results.next().await {
        let r = r.expect("the stream does not fail");
        bytes += prost::Message::encoded_len(&r);
        assert!(
            matches!(r.outcome, Some(Outcome::Assessment(_))),
            "item {} failed: {:?}",
            r.item_id,
            r.outcome
        );
        assessed += 1;
    }
    assert_eq!(assessed, FLEET_VEHICLES);
    bytes
}

/// The same vehicles in-process, split over `threads` threads (the server's compute threads);
/// returns the CPU those threads used, s.
fn in_process_once(nights: &[pb::VehicleNight], zones: &ZoneForecasts, threads: usize) -> f64 {
    let chunk = nights.len().div_ceil(threads.max(1));
    std::thread::scope(|s| {
        let workers: Vec<_> = nights
            .chunks(chunk)
            .map(|part| {
                s.spawn(move || {
                    let before_s = this_thread_cpu_s();
                    for n in part {
                        black_box(
                            convert::assess_pb(black_box(n), "vehicle", zones)
                                .expect("the bench night is valid"),
                        );
                    }
                    this_thread_cpu_s() - before_s
                })
            })
            .collect();
        workers
            .into_iter()
            .map(|w| w.join().expect("an in-process thread"))
            .sum()
    })
}

/// Name of the server runtime's threads.
const SERVER_THREAD: &str = "bench-server";
/// Prefix of the compute pool's thread names as the kernel keeps them (15 bytes).
const COMPUTE_THREAD: &str = "startmargin-com";

/// CPU time used so far by this process's threads whose name starts with one of `prefixes`, s
/// (`schedstat`'s first field: nanoseconds on the CPU).
fn threads_cpu_s(prefixes: &[&str]) -> f64 {
    let mut ns: u64 = 0;
    let Ok(tasks) = std::fs::read_dir("/proc/self/task") else {
        return f64::NAN;
    };
    for t in tasks.flatten() {
        let dir = t.path();
        let name = std::fs::read_to_string(dir.join("comm")).unwrap_or_default();
        if prefixes.iter().any(|p| name.trim_end().starts_with(p)) {
            let stat = std::fs::read_to_string(dir.join("schedstat")).unwrap_or_default();
            ns += stat
                .split_whitespace()
                .next()
                .and_then(|x| x.parse::<u64>().ok())
                .unwrap_or(0);
        }
    }
    ns as f64 * 1e-9
}

/// CPU time used so far by the calling thread, s.
fn this_thread_cpu_s() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next()?.parse::<u64>().ok())
        .map_or(f64::NAN, |ns| ns as f64 * 1e-9)
}

struct Setup {
    runtime: Runtime,
    /// The server's own runtime (threads named `bench-server`), so its CPU can be told apart.
    server_runtime: Runtime,
    threads: usize,
    server: Option<startmargin_service::RunningServer>,
    client: StartMarginServiceClient<Channel>,
    health: HealthClient<Channel>,
    requests: Arc<Vec<pb::AssessFleetRequest>>,
    nights: Vec<pb::VehicleNight>,
    zones: ZoneForecasts,
    unary: pb::AssessVehicleRequest,
}

fn setup() -> Setup {
    let runtime = Runtime::new().expect("tokio runtime");
    let server_runtime = tokio::runtime::Builder::new_multi_thread()
        .thread_name(SERVER_THREAD)
        .enable_all()
        .build()
        .expect("server runtime");
    let server = server_runtime.block_on(async {
        startmargin_service::spawn_on_loopback()
            .await
            .expect("the server starts")
    });
    let channel = runtime.block_on(async {
        Channel::from_shared(format!("http://{}", server.addr))
            .expect("uri")
            .connect()
            .await
            .expect("connects")
    });
    let zone = pb::ZoneForecast {
        zone_id: ZONE_ID.to_string(),
        forecast: Some(forecast()),
    };
    let (id, series) =
        convert::zone_forecast_from_pb(&zone, "zone_forecast").expect("the bench zone is valid");
    Setup {
        runtime,
        server_runtime,
        threads: startmargin_service::Config::default().effective_compute_threads(),
        server: Some(server),
        client: StartMarginServiceClient::new(channel.clone()),
        health: HealthClient::new(channel),
        requests: Arc::new(fleet_requests()),
        nights: (0..FLEET_VEHICLES).map(|i| night(i, false)).collect(),
        zones: HashMap::from([(id, series)]),
        unary: pb::AssessVehicleRequest {
            night: Some(night(7, true)),
        },
    }
}

fn bench(c: &mut Criterion) {
    let mut s = setup();

    let mut group = c.benchmark_group("fleet_2000_vehicles");
    group.throughput(Throughput::Elements(FLEET_VEHICLES as u64));
    group.sample_size(10);
    group.measurement_time(Duration::from_secs(8));
    group.bench_function("grpc_assess_fleet", |b| {
        b.iter(|| s.runtime.block_on(fleet_once(&mut s.client, &s.requests)));
    });
    group.bench_function("in_process_assess_pb", |b| {
        b.iter(|| in_process_once(&s.nights, &s.zones, s.threads))
    });
    group.finish();

    let mut group = c.benchmark_group("unary_sequential");
    group.throughput(Throughput::Elements(1));
    group.bench_function("assess_vehicle", |b| {
        b.iter(|| {
            s.runtime
                .block_on(s.client.assess_vehicle(s.unary.clone()))
                .expect("assessed")
        });
    });
    group.bench_function("health_check", |b| {
        b.iter(|| {
            s.runtime
                .block_on(s.health.check(HealthCheckRequest::default()))
                .expect("checked")
        });
    });
    group.finish();

    ratios(&mut s);
    if let Some(server) = s.server.take() {
        s.server_runtime
            .block_on(server.shutdown())
            .expect("the server drains");
    }
}

/// Runs `f` `n` times after one warm-up and returns the mean seconds per run.
fn mean_s(n: u32, mut f: impl FnMut()) -> f64 {
    f();
    let started = Instant::now();
    for _ in 0..n {
        f();
    }
    started.elapsed().as_secs_f64() / f64::from(n)
}

fn ratios(s: &mut Setup) {
    let fleet_s = mean_s(5, || {
        s.runtime.block_on(fleet_once(&mut s.client, &s.requests));
    });
    let threads = s.threads;
    let local_s = mean_s(5, || {
        in_process_once(&s.nights, &s.zones, threads);
    });
    let unary_s = mean_s(1_000, || {
        s.runtime
            .block_on(s.client.assess_vehicle(s.unary.clone()))
            .expect("assessed");
    });
    let health_s = mean_s(2_000, || {
        s.runtime
            .block_on(s.health.check(HealthCheckRequest::default()))
            .expect("checked");
    });
    let night = s.unary.night.clone().expect("night");
    let empty = ZoneForecasts::new();
    let unary_local_s = mean_s(1_000, || {
        black_box(convert::assess_pb(black_box(&night), "night", &empty).expect("valid"));
    });
    // Where a fleet run's CPU goes, per vehicle: compute threads, the server's runtime, and
    // everything else in the process (the client and its runtime), against the model's thread
    // CPU in-process.
    let server_threads = [SERVER_THREAD, COMPUTE_THREAD];
    let (compute0, runtime0, all0) = (
        threads_cpu_s(&[COMPUTE_THREAD]),
        threads_cpu_s(&[SERVER_THREAD]),
        threads_cpu_s(&[""]),
    );
    let answer_bytes = s.runtime.block_on(fleet_once(&mut s.client, &s.requests));
    let per_vehicle = |x: f64| x / FLEET_VEHICLES as f64;
    let fleet_compute_s = per_vehicle(threads_cpu_s(&[COMPUTE_THREAD]) - compute0);
    let fleet_runtime_s = per_vehicle(threads_cpu_s(&[SERVER_THREAD]) - runtime0);
    let fleet_all_s = per_vehicle(threads_cpu_s(&[""]) - all0);
    let local_all_s = per_vehicle(in_process_once(&s.nights, &s.zones, threads));
    // Server CPU per call against the same call's model time, both as thread CPU.
    const CPU_CALLS: u32 = 2_000;
    let before_s = threads_cpu_s(&server_threads);
    for _ in 0..CPU_CALLS {
        s.runtime
            .block_on(s.client.assess_vehicle(s.unary.clone()))
            .expect("assessed");
    }
    let server_cpu_s = (threads_cpu_s(&server_threads) - before_s) / f64::from(CPU_CALLS);
    let before_s = this_thread_cpu_s();
    for _ in 0..CPU_CALLS {
        black_box(convert::assess_pb(black_box(&night), "night", &empty).expect("valid"));
    }
    let model_cpu_s = (this_thread_cpu_s() - before_s) / f64::from(CPU_CALLS);
    // The transport's own floor: server CPU of a health check.
    let before_s = threads_cpu_s(&server_threads);
    for _ in 0..CPU_CALLS {
        s.runtime
            .block_on(s.health.check(HealthCheckRequest::default()))
            .expect("checked");
    }
    let health_cpu_s = (threads_cpu_s(&server_threads) - before_s) / f64::from(CPU_CALLS);
    let fleet_vps = FLEET_VEHICLES as f64 / fleet_s;
    let local_vps = FLEET_VEHICLES as f64 / local_s;
    let us = |x: f64| x * 1e6;
    println!();
    println!("throughput summary (compute threads = {threads}, in-process threads = {threads}):");
    println!("  AssessFleet over gRPC        {fleet_vps:>9.0} vehicles/s");
    println!("  assess_pb in-process loop    {local_vps:>9.0} vehicles/s");
    println!(
        "  ratio fleet / in-process     {:>9.2}  (same thread count; target >= 0.90)",
        fleet_vps / local_vps
    );
    println!(
        "  fleet CPU per vehicle        {:>9.1} µs compute threads, {:.1} µs server runtime, {:.1} µs client and the rest; in-process {:.1} µs",
        us(fleet_compute_s),
        us(fleet_runtime_s),
        us(fleet_all_s - fleet_compute_s - fleet_runtime_s),
        us(local_all_s)
    );
    println!(
        "  fleet answer size            {:>9.0} bytes per vehicle (encoded)",
        answer_bytes as f64 / FLEET_VEHICLES as f64
    );
    println!(
        "  AssessVehicle sequential     {:>9.0} calls/s ({:.0} µs)",
        1.0 / unary_s,
        us(unary_s)
    );
    println!(
        "  Health Check sequential      {:>9.0} calls/s ({:.0} µs)",
        1.0 / health_s,
        us(health_s)
    );
    println!(
        "  ratio unary / health         {:>9.2}  (target >= 0.50)",
        health_s / unary_s
    );
    println!(
        "  same night in-process        {:>9.0} µs of model time per call",
        us(unary_local_s)
    );
    println!(
        "  transport added to a call    {:>9.0} µs (unary − in-process − health RTT)",
        us(unary_s - unary_local_s - health_s)
    );
    println!(
        "  ratio (health + in-process) / unary {:.2}  (1.00 = no cost beyond the bare RTT)",
        (health_s + unary_local_s) / unary_s
    );
    println!(
        "  server CPU per AssessVehicle {:>9.1} µs, model thread CPU {:.1} µs: {:.1} µs beyond the model (target <= 30)",
        us(server_cpu_s),
        us(model_cpu_s),
        us(server_cpu_s - model_cpu_s)
    );
    println!(
        "  server CPU per Health Check  {:>9.1} µs: AssessVehicle costs {:.1} µs beyond model + health",
        us(health_cpu_s),
        us(server_cpu_s - model_cpu_s - health_cpu_s)
    );
}

criterion_group!(benches, bench);
criterion_main!(benches);
