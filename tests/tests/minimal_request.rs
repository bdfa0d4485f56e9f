//! An integrator's first call, written from the proto comments alone: the smallest request the
//! comments call valid gets an answer (not a refusal), and the answer's `assumed` list names
//! every input the request left out that changes it, with the value taken and why.

use prost_types::Timestamp;
use startmargin_e2e::TestServer;
use startmargin_proto::v1 as pb;

/// 2027-01-15T02:00:00Z: 19:00 MST on the 14th at an America/Denver depot.
const FORECAST_START_S: i64 = 1_799_978_400;

/// The smallest valid night, each field following the rule its comment states.
fn minimal_night() -> pb::VehicleNight {
    pb::VehicleNight {
        // VehicleProfile: "The smallest valid profile: a vehicle_id, engine.archetype_id,
        // battery (capacity_cca, nominal_v), oil.sae_grade and fuel (grade, tank_capacity_l)."
        vehicle: Some(pb::VehicleProfile {
            // "Required, 1 to 128 bytes."
            vehicle_id: "yard-truck-1".into(),
            engine: Some(pb::EngineSpec {
                // "Built-in archetype id, e.g. "heavy-di-i6"."
                archetype_id: "heavy-di-i6".into(),
                ..Default::default()
            }),
            battery: Some(pb::BatterySpec {
                // "Required, 100 to 4000."
                capacity_cca: 900.0,
                // "Required: 12 or 24."
                nominal_v: 12.0,
                ..Default::default()
            }),
            oil: Some(pb::OilSpec {
                // "SAE J300 viscosity grade, e.g. "15W-40" ... Required, at most 16 bytes."
                sae_grade: "15W-40".into(),
            }),
            fuel: Some(pb::FuelSpec {
                // "Required unless measured is given."
                grade: pb::FuelGrade::UsWinterBlend as i32,
                // "Required, 10 to 3000."
                tank_capacity_l: 300.0,
                ..Default::default()
            }),
            ..Default::default()
        }),
        // Forecast: "Start of the first point ... Required." "step ... absent: one hour."
        // "The points ... Required, 1 to 168." It "must reach the departure".
        forecast: Some(pb::Forecast {
            start_time: Some(Timestamp {
                seconds: FORECAST_START_S,
                nanos: 0,
            }),
            points: [
                -8.0, -10.0, -12.0, -14.0, -15.0, -16.0, -17.0, -17.0, -16.0, -15.0, -14.0, -13.0,
            ]
            .into_iter()
            // air_c "Required, -70 to 50", wind_mps "Required, 0 to 60", cloud_cover_pct
            // "Required, 0 to 100".
            .map(|air_c| pb::ForecastPoint {
                air_c,
                wind_mps: 2.0,
                cloud_cover_pct: 10.0,
                air_spread_k: None,
            })
            .collect(),
            ..Default::default()
        }),
        // "Planned departure (UTC, 1970 to 2200, within the forecast). Required." 06:00 MST.
        departure_time: Some(Timestamp {
            seconds: FORECAST_START_S + 11 * 3600,
            nanos: 0,
        }),
        ..Default::default()
    }
}

async fn assess(server: &TestServer, night: pb::VehicleNight) -> pb::VehicleAssessment {
    server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await
        .expect("the minimal request is valid")
        .into_inner()
        .assessment
        .expect("an assessment")
}

#[tokio::test]
async fn the_minimal_request_is_answered_and_names_what_it_assumed() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let a = assess(&server, minimal_night()).await;
    assert_eq!(a.vehicle_id, "yard-truck-1");
    assert!(a.no_start_pct.is_finite() && (0.0..=100.0).contains(&a.no_start_pct));
    assert_eq!(a.time_zone, "UTC");

    let value_of = |field: &str| {
        a.assumed
            .iter()
            .find(|x| x.field == field)
            .map(|x| x.value.clone())
    };
    // Each absent input that changes the answer, at the cautious value the comments promise.
    assert_eq!(value_of("time_zone").as_deref(), Some("UTC"));
    assert_eq!(
        value_of("vehicle.fuel.filter_mount").as_deref(),
        Some("FILTER_MOUNT_FRAME")
    );
    assert_eq!(
        value_of("vehicle.battery.state_of_charge_pct").as_deref(),
        Some("75 %")
    );
    assert_eq!(
        value_of("vehicle.battery.health_pct").as_deref(),
        Some("80 %")
    );
    assert_eq!(
        value_of("telemetry.fuel_level_pct").as_deref(),
        Some("50 %")
    );
    assert!(value_of("telemetry").is_some());
    assert!(value_of("vehicle.fuel.cetane_number").is_some());
    for x in &a.assumed {
        assert!(!x.value.is_empty() && !x.reason.is_empty(), "{x:?}");
    }

    // Giving an input removes its assumption, and a frame-mounted filter given explicitly is
    // the answer the assumption gave (the default is that cautious value, not another).
    let mut night = minimal_night();
    let profile = night.vehicle.as_mut().expect("vehicle");
    profile.fuel.as_mut().expect("fuel").filter_mount = pb::FilterMount::Frame as i32;
    night.time_zone = "America/Denver".into();
    let b = assess(&server, night).await;
    assert!(
        b.assumed
            .iter()
            .all(|x| x.field != "vehicle.fuel.filter_mount")
    );
    assert!(b.assumed.iter().all(|x| x.field != "time_zone"));
    assert_eq!(b.time_zone, "America/Denver");
    assert_eq!(b.no_start_pct, a.no_start_pct);
    // Timed actions end with their deadline in local time with the offset.
    for action in b.actions.iter().filter(|x| x.act_by.is_some()) {
        assert!(
            action.summary.contains("Act by 2027-01-1") && action.summary.ends_with("-07:00."),
            "{}",
            action.summary
        );
    }
    server.shutdown().await
}

#[tokio::test]
async fn an_empty_measured_cold_flow_message_is_refused_not_read_as_zero() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = minimal_night();
    let fuel = night
        .vehicle
        .as_mut()
        .and_then(|v| v.fuel.as_mut())
        .expect("fuel");
    fuel.measured = Some(pb::MeasuredColdFlow::default());
    let status = server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await
        .expect_err("an empty measured message is refused");
    assert_eq!(status.code(), tonic::Code::InvalidArgument);
    let fields = startmargin_e2e::violated_fields(&status);
    assert!(
        fields.contains(&"night.vehicle.fuel.measured".to_string()),
        "{fields:?}"
    );
    server.shutdown().await
}
