//! A whole evening run over real gRPC on 127.0.0.1: one AssessFleet stream of 100,000 invented
//! vehicles in 67 depots of up to 1,500 (each depot with 100 outlets on a 1 MW circuit, a
//! quarter of its vehicles with a 1 kW block heater and No. 1 diesel, the rest on a winter
//! blend), timed from the first item sent to the last
//! depot plan received, with how long the plans took after the last vehicle's result, and the
//! process's peak RSS (`VmHWM`: the server plus a client that generates its items as it sends
//! them, so it holds few of them). A bench binary, not criterion: one run takes tens of seconds.
//! Not run in CI: `cargo bench -p startmargin-service --bench evening_run` (append `-- 20000`
//! for a smaller fleet). The fleet is invented: fictional depots, a made-up cold night.

use std::time::Instant;

use prost_types::Timestamp;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_request::Item;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use tokio_stream::StreamExt as _;

const DEFAULT_VEHICLES: usize = 100_000;
const DEPOT_VEHICLES: usize = 1_500;
const OUTLETS: u32 = 100;
const CIRCUIT_KW: f64 = 1_000.0;
const ZONE_ID: &str = "plains";
const START_S: i64 = 1_736_877_600;

fn forecast() -> pb::Forecast {
    let air_c = [
        -4.0, -6.5, -9.0, -11.5, -14.0, -16.5, -18.0, -19.0, -20.0, -20.5, -21.0, -20.0,
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
                wind_mps: (7.0 - i as f64 * 0.4).max(1.5),
                cloud_cover_pct: (60.0 - i as f64 * 10.0).max(0.0),
                air_spread_k: None,
            })
            .collect(),
        barometric_kpa: None,
    }
}

const ARCHETYPES: [&str; 7] = [
    "compact-di-i4",
    "light-di-v8",
    "medium-di-i6",
    "heavy-di-i6",
    "older-idi-v8",
    "swirl-idi-i4",
    "offroad-di-i4",
];

fn depot_of(i: usize) -> String {
    format!("depot-{:02}", i / DEPOT_VEHICLES)
}

/// Vehicle `i`: archetypes in turn, batteries and coolant varied, every fourth with a heater.
fn vehicle(i: usize) -> pb::AssessFleetRequest {
    let heater = i.is_multiple_of(4);
    let night = pb::VehicleNight {
        vehicle: Some(pb::VehicleProfile {
            vehicle_id: format!("unit-{i:06}"),
            engine: Some(pb::EngineSpec {
                archetype_id: ARCHETYPES[i % ARCHETYPES.len()].to_string(),
                ..Default::default()
            }),
            aids: heater.then(|| pb::StartAids {
                block_heater_w: Some(1_000.0),
                ..Default::default()
            }),
            battery: Some(pb::BatterySpec {
                capacity_cca: 650.0 + (i % 7) as f64 * 50.0,
                nominal_v: 12.0,
                state_of_charge_pct: Some(70.0 + (i % 6) as f64 * 5.0),
                ..Default::default()
            }),
            oil: Some(pb::OilSpec {
                sae_grade: "15W-40".to_string(),
            }),
            fuel: Some(pb::FuelSpec {
                // A winter fleet: No. 1 where the heater matters, a winter blend elsewhere.
                grade: if heater {
                    pb::FuelGrade::UsNo1 as i32
                } else {
                    pb::FuelGrade::UsWinterBlend as i32
                },
                tank_capacity_l: 300.0,
                ..Default::default()
            }),
            sheltered: i.is_multiple_of(5),
        }),
        telemetry: Some(pb::VehicleTelemetry {
            observed_at: Some(Timestamp {
                seconds: START_S,
                nanos: 0,
            }),
            coolant_c: Some(40.0 + (i % 45) as f64),
            ..Default::default()
        }),
        forecast: None,
        forecast_zone_id: ZONE_ID.to_string(),
        departure_time: Some(Timestamp {
            seconds: START_S + 10 * 3600,
            nanos: 0,
        }),
        depot_id: depot_of(i),
        ..Default::default()
    };
    pb::AssessFleetRequest {
        item_id: format!("v{i}"),
        item: Some(Item::Vehicle(night)),
    }
}

/// The zone, then each depot's outlets before its first vehicle, then the vehicles.
fn items(vehicles: usize) -> impl Iterator<Item = pb::AssessFleetRequest> {
    let zone = pb::AssessFleetRequest {
        item_id: "zone".to_string(),
        item: Some(Item::ZoneForecast(pb::ZoneForecast {
            zone_id: ZONE_ID.to_string(),
            forecast: Some(forecast()),
        })),
    };
    std::iter::once(zone).chain((0..vehicles).flat_map(|i| {
        let outlets = i
            .is_multiple_of(DEPOT_VEHICLES)
            .then(|| pb::AssessFleetRequest {
                item_id: format!("outlets-{}", depot_of(i)),
                item: Some(Item::DepotOutlets(pb::DepotOutlets {
                    depot_id: depot_of(i),
                    outlet_count: OUTLETS,
                    circuit_limit_kw: Some(CIRCUIT_KW),
                    time_zone: String::new(),
                })),
            });
        outlets.into_iter().chain(std::iter::once(vehicle(i)))
    }))
}

/// Peak resident set of this process, bytes (`VmHWM` of /proc/self/status).
fn peak_rss_bytes() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|kb| kb.parse::<u64>().ok())
        })
        .map_or(0, |kb| kb * 1024)
}

fn main() {
    // `cargo bench` passes `--bench`; a number among the arguments sets the fleet size.
    let vehicles = std::env::args()
        .skip(1)
        .find_map(|a| a.parse::<usize>().ok())
        .unwrap_or(DEFAULT_VEHICLES);
    let depots = vehicles.div_ceil(DEPOT_VEHICLES);
    let runtime = tokio::runtime::Runtime::new().expect("tokio runtime");
    runtime.block_on(async {
        let rss_before = peak_rss_bytes();
        let server = startmargin_service::spawn_on_loopback()
            .await
            .expect("the server starts");
        let mut client = StartMarginServiceClient::connect(format!("http://{}", server.addr))
            .await
            .expect("connects");
        let started = Instant::now();
        let mut results = client
            .assess_fleet(tokio_stream::iter(items(vehicles)))
            .await
            .expect("the fleet stream opens")
            .into_inner();
        let (mut assessed, mut failed, mut plans, mut planned_plug_ins) = (0usize, 0usize, 0, 0);
        let mut last_vehicle_s = 0.0;
        let mut not_exact = 0;
        while let Some(r) = results.next().await {
            match r.expect("the stream does not fail").outcome {
                Some(Outcome::Assessment(_)) => {
                    assessed += 1;
                    last_vehicle_s = started.elapsed().as_secs_f64();
                }
                Some(Outcome::Error(e)) => {
                    failed += 1;
                    eprintln!("a vehicle failed: {}", e.message);
                }
                Some(Outcome::PlugInPlan(p)) => {
                    plans += 1;
                    planned_plug_ins += p.plug_ins.len();
                    if !p.exact {
                        not_exact += 1;
                    }
                }
                None => {}
            }
        }
        let total_s = started.elapsed().as_secs_f64();
        let peak = peak_rss_bytes();
        server.shutdown().await.expect("the server drains");
        println!("evening run: {vehicles} vehicles, {depots} depots of up to {DEPOT_VEHICLES}, {OUTLETS} outlets and {CIRCUIT_KW} kW each");
        println!("  assessed {assessed}, failed {failed}, depot plans {plans} ({planned_plug_ins} plug-ins; {not_exact} by the heuristic)");
        println!(
            "  wall {total_s:.1} s: last vehicle at {last_vehicle_s:.1} s, plans {:.1} s after it; {:.0} vehicles/s",
            total_s - last_vehicle_s,
            vehicles as f64 / total_s
        );
        println!(
            "  process peak RSS {:.0} MiB (server + streaming client; {:.0} MiB before the server started)",
            peak as f64 / (1024.0 * 1024.0),
            rss_before as f64 / (1024.0 * 1024.0)
        );
        assert_eq!(assessed + failed, vehicles, "one result per vehicle");
        assert_eq!(plans, depots, "one plan per depot");
    });
}
