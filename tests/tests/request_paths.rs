//! Every accepted value is checked, and every refusal names a real path of the request message
//! as the client sent it: AssessVehicle (`night.…`), AssessFleet (`vehicle.…`, `item_id`) and
//! WatchFleet (`vehicle.vehicle.…`, `telemetry.telemetry.…`, under the sequence number of the
//! update that carried the fault). Also: every request string has a length cap, and a too-long
//! value is never echoed back.

use startmargin_e2e::{
    TestServer, at_hour, sample_night, sample_night_in_zone, sample_vehicle, vehicle_item,
    violated_fields, violated_fields_in, zone_item,
};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio_stream::StreamExt as _;
use tonic::Code;

/// The violated paths of an AssessVehicle call that must fail with INVALID_ARGUMENT.
async fn paths(server: &TestServer, night: pb::VehicleNight) -> Vec<String> {
    match server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await
    {
        Ok(_) => panic!("expected INVALID_ARGUMENT"),
        Err(status) => {
            assert_eq!(status.code(), Code::InvalidArgument, "{status:?}");
            assert!(
                status.message().len() < 4096,
                "the message echoes no huge value ({} bytes)",
                status.message().len()
            );
            violated_fields(&status)
        }
    }
}

fn with(change: impl FnOnce(&mut pb::VehicleNight)) -> pb::VehicleNight {
    let mut night = sample_night("v");
    change(&mut night);
    night
}

fn profile(night: &mut pb::VehicleNight) -> &mut pb::VehicleProfile {
    night.vehicle.as_mut().expect("vehicle")
}

#[tokio::test]
async fn values_that_were_accepted_silently_are_refused_at_their_path() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let cases: Vec<(&str, pb::VehicleNight)> = vec![
        (
            "night.options.probability_method",
            with(|n| {
                n.options = Some(pb::AssessmentOptions {
                    probability_method: 99,
                    ..Default::default()
                })
            }),
        ),
        (
            "night.options.target_no_start_pct",
            with(|n| {
                n.options = Some(pb::AssessmentOptions {
                    target_no_start_pct: Some(0.0),
                    ..Default::default()
                })
            }),
        ),
        (
            "night.vehicle.aids.glow_plug_health",
            with(|n| {
                profile(n).aids = Some(pb::StartAids {
                    glow_plugs_fitted: false,
                    glow_plug_health: 77,
                    ..Default::default()
                })
            }),
        ),
        (
            "night.vehicle.aids.glow_preheat_s",
            with(|n| {
                profile(n).aids = Some(pb::StartAids {
                    glow_plugs_fitted: false,
                    glow_preheat_s: Some(10.0),
                    ..Default::default()
                })
            }),
        ),
        (
            "night.vehicle.aids.glow_plug_health",
            with(|n| {
                profile(n).aids = Some(pb::StartAids {
                    glow_plugs_fitted: true,
                    glow_plug_health: 77,
                    ..Default::default()
                })
            }),
        ),
        (
            "night.forecast.step.nanos",
            with(|n| {
                n.forecast.as_mut().expect("forecast").step = Some(prost_types::Duration {
                    seconds: 3599,
                    nanos: 1_000_000_000,
                })
            }),
        ),
        (
            "night.forecast.step.nanos",
            with(|n| {
                n.forecast.as_mut().expect("forecast").step = Some(prost_types::Duration {
                    seconds: 3600,
                    nanos: -1,
                })
            }),
        ),
        (
            "night.vehicle.fuel.no1_blend_pct",
            with(|n| {
                let f = profile(n).fuel.as_mut().expect("fuel");
                f.biodiesel_pct = 100.0;
                f.no1_blend_pct = 100.0;
            }),
        ),
        (
            "night.vehicle.fuel.biodiesel_feedstock",
            with(|n| {
                profile(n).fuel.as_mut().expect("fuel").biodiesel_feedstock =
                    pb::BiodieselFeedstock::Soy as i32
            }),
        ),
        (
            "night.vehicle.fuel.grade",
            with(|n| {
                let f = profile(n).fuel.as_mut().expect("fuel");
                f.grade = 99;
                f.measured = Some(pb::MeasuredColdFlow {
                    cloud_point_c: -10.0,
                    cfpp_c: -15.0,
                    pour_point_c: -20.0,
                });
            }),
        ),
    ];
    for (path, night) in cases {
        let found = paths(&server, night).await;
        assert!(found.iter().any(|f| f == path), "{path} not in {found:?}");
    }
    server.shutdown().await
}

#[tokio::test]
async fn every_request_string_has_a_cap_and_is_not_echoed() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let huge = "x".repeat(3 << 20);
    let cases: Vec<(&str, pb::VehicleNight)> = vec![
        ("night.depot_id", with(|n| n.depot_id = huge.clone())),
        (
            "night.vehicle.vehicle_id",
            with(|n| profile(n).vehicle_id = huge.clone()),
        ),
        (
            "night.vehicle.engine.archetype_id",
            with(|n| profile(n).engine.as_mut().expect("engine").archetype_id = huge.clone()),
        ),
        (
            "night.vehicle.oil.sae_grade",
            with(|n| profile(n).oil.as_mut().expect("oil").sae_grade = huge.clone()),
        ),
        (
            "night.forecast_zone_id",
            with(|n| {
                n.forecast = None;
                n.forecast_zone_id = huge.clone();
            }),
        ),
    ];
    for (path, night) in cases {
        let found = paths(&server, night).await;
        assert_eq!(found, [path]);
    }

    // Fleet: an over-long item id is refused and not echoed; so is a zone id.
    let items = vec![
        pb::AssessFleetRequest {
            item_id: huge.clone(),
            ..vehicle_item("", sample_night("a"))
        },
        zone_item("z", &huge),
    ];
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let mut refused = Vec::new();
    while let Some(r) = results.next().await {
        let r = r?;
        let Some(Outcome::Error(e)) = r.outcome else {
            panic!("expected a refusal")
        };
        refused.push((r.item_id, violated_fields_in(&e)));
    }
    assert_eq!(
        refused,
        [
            (String::new(), vec!["item_id".to_string()]),
            ("z".to_string(), vec!["zone_forecast.zone_id".to_string()]),
        ]
    );
    server.shutdown().await
}

#[tokio::test]
async fn fleet_paths_name_the_fleet_request() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut bad = sample_night_in_zone("b", "yard");
    profile(&mut bad)
        .battery
        .as_mut()
        .expect("battery")
        .capacity_cca = -5.0;
    let items = vec![zone_item("z", "yard"), vehicle_item("b", bad)];
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let r = results.next().await.expect("a result")?;
    let Some(Outcome::Error(e)) = r.outcome else {
        panic!("expected a refusal")
    };
    assert_eq!(r.item_id, "b");
    assert_eq!(
        violated_fields_in(&e),
        ["vehicle.vehicle.battery.capacity_cca"]
    );
    server.shutdown().await
}

fn watched(vehicle: pb::VehicleProfile) -> Update {
    Update::Vehicle(pb::WatchedVehicle {
        vehicle: Some(vehicle),
        forecast_zone_id: "yard".to_string(),
        depot_id: "north".to_string(),
        departure_time: Some(at_hour(10.0)),
        time_zone: String::new(),
    })
}

#[tokio::test]
async fn watch_faults_are_refused_under_the_update_that_carried_them() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut bad_battery = sample_vehicle("weak");
    bad_battery.battery.as_mut().expect("battery").capacity_cca = 5.0;
    let mut glow_without_plugs = sample_vehicle("odd");
    glow_without_plugs.aids = Some(pb::StartAids {
        glow_plug_health: 77,
        ..Default::default()
    });
    let mut unknown_zone = watched(sample_vehicle("far"));
    if let Update::Vehicle(w) = &mut unknown_zone {
        w.time_zone = "Mountain/Nowhere".to_string();
    }
    let updates = vec![
        // The zone comes last: the faults must be found when each vehicle is sent.
        (1, watched(bad_battery)),
        (2, watched(glow_without_plugs)),
        (6, unknown_zone),
        (3, watched(sample_vehicle("good"))),
        (
            4,
            Update::Telemetry(pb::TelemetryUpdate {
                vehicle_id: "good".to_string(),
                telemetry: Some(pb::VehicleTelemetry {
                    observed_at: Some(at_hour(1.0)),
                    coolant_c: Some(400.0),
                    ..Default::default()
                }),
                block_heater_on: None,
                key_off: false,
            }),
        ),
        (
            5,
            Update::ZoneForecast(pb::WatchZoneForecast {
                zone_id: "yard".to_string(),
                forecast: Some(startmargin_e2e::sample_forecast()),
            }),
        ),
    ];
    let requests: Vec<_> = updates
        .into_iter()
        .map(|(sequence, u)| pb::WatchFleetRequest {
            update: Some(u),
            sequence,
        })
        .collect();
    let mut events = server
        .client()
        .watch_fleet(tokio_stream::iter(requests))
        .await?
        .into_inner();
    let mut refusals = Vec::new();
    let mut scored = Vec::new();
    while let Some(e) = events.next().await {
        match e?.event {
            Some(Event::Refused(r)) => refusals.push((
                r.sequence,
                r.vehicle_id,
                violated_fields_in(&r.error.expect("an error")),
            )),
            Some(Event::OutlookChange(c)) => scored.push(c.vehicle_id),
            _ => {}
        }
    }
    assert_eq!(
        refusals,
        [
            (
                1,
                "weak".to_string(),
                vec!["vehicle.vehicle.battery.capacity_cca".to_string()]
            ),
            (
                2,
                "odd".to_string(),
                vec!["vehicle.vehicle.aids.glow_plug_health".to_string()]
            ),
            (6, "far".to_string(), vec!["vehicle.time_zone".to_string()]),
            (
                4,
                "good".to_string(),
                vec!["telemetry.telemetry.coolant_c".to_string()]
            ),
        ]
    );
    assert_eq!(
        scored,
        ["good"],
        "only the good vehicle is watched and scored"
    );
    server.shutdown().await
}
