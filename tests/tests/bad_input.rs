//! Bad input through real gRPC: every class gets its documented code and, for INVALID_ARGUMENT,
//! a `google.rpc.BadRequest` naming the field. Never UNKNOWN, never a silent default.

use startmargin_e2e::{TestServer, at_hour, loopback_config, sample_night, violated_fields};
use startmargin_proto::v1 as pb;
use tonic::Code;

/// Sends `night` and returns the error the server answers with.
async fn refused(server: &TestServer, night: Option<pb::VehicleNight>) -> tonic::Status {
    match server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night })
        .await
    {
        Ok(r) => panic!("expected an error, got {:?}", r.into_inner()),
        Err(status) => status,
    }
}

/// Asserts INVALID_ARGUMENT naming `field` among its violations.
async fn assert_invalid(server: &TestServer, night: pb::VehicleNight, field: &str) {
    let status = refused(server, Some(night)).await;
    assert_eq!(status.code(), Code::InvalidArgument, "{field}: {status:?}");
    let fields = violated_fields(&status);
    assert!(
        fields.iter().any(|f| f == field),
        "{field} not in {fields:?}"
    );
}

fn vehicle(night: &mut pb::VehicleNight) -> &mut pb::VehicleProfile {
    night.vehicle.as_mut().expect("the sample has a vehicle")
}

#[tokio::test]
async fn not_a_number() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night("v");
    night.forecast.as_mut().expect("forecast").points[3].air_c = f64::NAN;
    assert_invalid(&server, night, "night.forecast.points[3].air_c").await;
    server.shutdown().await
}

#[tokio::test]
async fn plus_and_minus_infinity() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night("v");
    vehicle(&mut night)
        .battery
        .as_mut()
        .expect("battery")
        .capacity_cca = f64::INFINITY;
    assert_invalid(&server, night, "night.vehicle.battery.capacity_cca").await;

    let mut night = sample_night("v");
    night.telemetry.as_mut().expect("telemetry").coolant_c = Some(f64::NEG_INFINITY);
    assert_invalid(&server, night, "night.telemetry.coolant_c").await;
    server.shutdown().await
}

#[tokio::test]
async fn out_of_physical_range() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night("v");
    night.forecast.as_mut().expect("forecast").points[0].wind_mps = 500.0;
    assert_invalid(&server, night, "night.forecast.points[0].wind_mps").await;

    let mut night = sample_night("v");
    vehicle(&mut night)
        .battery
        .as_mut()
        .expect("battery")
        .nominal_v = 48.0;
    assert_invalid(&server, night, "night.vehicle.battery.nominal_v").await;

    let mut night = sample_night("v");
    vehicle(&mut night)
        .fuel
        .as_mut()
        .expect("fuel")
        .tank_capacity_l = -1.0;
    assert_invalid(&server, night, "night.vehicle.fuel.tank_capacity_l").await;
    server.shutdown().await
}

#[tokio::test]
async fn missing_required_fields() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let status = refused(&server, None).await;
    assert_eq!(status.code(), Code::InvalidArgument);
    assert_eq!(violated_fields(&status), vec!["night".to_string()]);

    let mut night = sample_night("v");
    night.departure_time = None;
    assert_invalid(&server, night, "night.departure_time").await;

    let mut night = sample_night("v");
    night.vehicle = None;
    assert_invalid(&server, night, "night.vehicle").await;

    let mut night = sample_night("v");
    night.forecast = None;
    assert_invalid(&server, night, "night.forecast").await;

    let mut night = sample_night("v");
    vehicle(&mut night).vehicle_id.clear();
    assert_invalid(&server, night, "night.vehicle.vehicle_id").await;
    server.shutdown().await
}

#[tokio::test]
async fn every_bad_field_is_reported_at_once() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night("v");
    night.forecast.as_mut().expect("forecast").points[1].cloud_cover_pct = 140.0;
    vehicle(&mut night).oil.as_mut().expect("oil").sae_grade = "thick".to_string();
    let status = refused(&server, Some(night)).await;
    assert_eq!(status.code(), Code::InvalidArgument);
    let fields = violated_fields(&status);
    for field in [
        "night.forecast.points[1].cloud_cover_pct",
        "night.vehicle.oil.sae_grade",
    ] {
        assert!(
            fields.iter().any(|f| f == field),
            "{field} not in {fields:?}"
        );
    }
    server.shutdown().await
}

#[tokio::test]
async fn inconsistent_inputs() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    // Telemetry read after the departure it should predict.
    let mut night = sample_night("v");
    night.telemetry.as_mut().expect("telemetry").observed_at = Some(at_hour(11.0));
    assert_invalid(&server, night, "night.telemetry.observed_at").await;

    // A block heater switched off before it is switched on.
    let mut night = sample_night("v");
    vehicle(&mut night).aids = Some(pb::StartAids {
        block_heater_w: Some(1_000.0),
        ..Default::default()
    });
    night.block_heater_plan = Some(pb::BlockHeaterPlan {
        on_from: Some(at_hour(6.0)),
        on_until: Some(at_hour(4.0)),
    });
    assert_invalid(&server, night, "night.block_heater_plan.on_until").await;

    // A forecast both inline and by zone.
    let mut night = sample_night("v");
    night.forecast_zone_id = "depot-east".to_string();
    assert_invalid(&server, night, "night.forecast_zone_id").await;
    server.shutdown().await
}

#[tokio::test]
async fn forecast_not_covering_the_departure_is_failed_precondition() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night("v");
    night.departure_time = Some(at_hour(20.0)); // the forecast covers 12 h
    let status = refused(&server, Some(night)).await;
    assert_eq!(status.code(), Code::FailedPrecondition, "{status:?}");
    assert!(
        violated_fields(&status).is_empty(),
        "a precondition, not a bad field"
    );
    server.shutdown().await
}

#[tokio::test]
async fn forecast_not_covering_gives_local_times_and_machine_details() -> anyhow::Result<()> {
    use tonic_types::StatusExt;
    let server = TestServer::start().await?;
    let mut night = sample_night("v");
    // 2025-01-15T14:00:00Z, 07:00 MST; the forecast covers 12 h from 2025-01-14T18:00:00Z.
    night.departure_time = Some(at_hour(20.0));
    night.time_zone = "America/Denver".to_string();
    let status = refused(&server, Some(night)).await;
    assert_eq!(status.code(), Code::FailedPrecondition, "{status:?}");
    // The last of the 12 hourly points plus one step: 2025-01-15T06:00:00Z, 23:00 MST the evening
    // before.
    assert_eq!(
        status.message(),
        "night: the forecast covers up to 2025-01-14T23:00:00-07:00 but 2025-01-15T07:00:00-07:00 was requested"
    );
    let details = status.get_error_details();
    let info = details.error_info().expect("ErrorInfo details");
    assert_eq!(info.reason, "FORECAST_TOO_SHORT");
    assert_eq!(info.metadata["requested"], "2025-01-15T14:00:00Z");
    assert_eq!(info.metadata["requested_unix_s"], "1736949600");
    assert_eq!(info.metadata["covered_until"], "2025-01-15T06:00:00Z");
    let pf = details.precondition_failure().expect("PreconditionFailure");
    assert_eq!(pf.violations[0].subject, "night.forecast");
    server.shutdown().await
}

#[tokio::test]
async fn unknown_time_zone_is_refused_at_its_field() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    for bad in [
        "Mountain Time",
        "America/Nowhere",
        "-07:00",
        &"x".repeat(65),
    ] {
        let mut night = sample_night("v");
        night.time_zone = bad.to_string();
        assert_invalid(&server, night, "night.time_zone").await;
    }
    // With another bad field, both are named at once.
    let mut night = sample_night("v");
    night.time_zone = "Nowhere/Else".to_string();
    night.forecast.as_mut().expect("forecast").points[0].air_c = f64::NAN;
    let fields = violated_fields(&refused(&server, Some(night)).await);
    assert!(
        fields.contains(&"night.time_zone".to_string()),
        "{fields:?}"
    );
    assert!(
        fields.contains(&"night.forecast.points[0].air_c".to_string()),
        "{fields:?}"
    );
    server.shutdown().await
}

#[tokio::test]
async fn unknown_archetype() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night("v");
    vehicle(&mut night)
        .engine
        .as_mut()
        .expect("engine")
        .archetype_id = "no-such-engine".to_string();
    let status = refused(&server, Some(night)).await;
    assert_eq!(status.code(), Code::InvalidArgument);
    assert!(violated_fields(&status).contains(&"night.vehicle.engine.archetype_id".to_string()));
    assert!(
        status.message().contains("heavy-di-i6"),
        "the known archetypes are listed: {}",
        status.message()
    );
    server.shutdown().await
}

#[tokio::test]
async fn oversized_message_is_refused_before_decoding() -> anyhow::Result<()> {
    let config = startmargin_service::Config {
        max_decode_message_bytes: 64 * 1024,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await?;
    let mut night = sample_night("v");
    vehicle(&mut night).vehicle_id = "x".repeat(100 * 1024);
    let status = refused(&server, Some(night)).await;
    assert!(
        matches!(status.code(), Code::ResourceExhausted | Code::OutOfRange),
        "tonic refuses an oversized message with RESOURCE_EXHAUSTED or OUT_OF_RANGE: {status:?}"
    );

    // The server is unharmed: a normal request still works on the same connection.
    let ok = server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest {
            night: Some(sample_night("v")),
        })
        .await;
    assert!(ok.is_ok(), "{ok:?}");
    server.shutdown().await
}
