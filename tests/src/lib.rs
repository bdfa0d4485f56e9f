//! Shared helpers of the end-to-end tests: a real startmargin server on `127.0.0.1:0` with a
//! connected client, a valid sample vehicle night in a fictional depot, and readers of the
//! `google.rpc.BadRequest` field violations that the server returns.

use std::net::SocketAddr;

use prost::Message as _;
use prost_types::{Duration, Timestamp};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_service::{Config, RunningServer};
use tonic::transport::Channel;
use tonic_health::pb::health_client::HealthClient;
use tonic_types::StatusExt as _;

pub use startmargin_service::api::DRAINING_MESSAGE;
pub use startmargin_service::server::SERVICE_NAME;

/// Start of the sample forecast: 2025-01-14 18:00 UTC, an evening in our fictional depot.
pub const FORECAST_START_S: i64 = 1_736_877_600;
/// Hours from the forecast start to the sample departure.
pub const DEPARTURE_AFTER_H: i64 = 10;
/// Hourly air temperatures of the sample forecast: a cold front passes in the evening.
pub const FRONT_AIR_C: [f64; 12] = [
    2.0, 0.5, -2.5, -6.0, -9.5, -12.0, -14.0, -15.5, -16.5, -17.0, -17.5, -16.0,
];
/// Hourly wind speeds of the sample forecast: gusty with the front, calming behind it.
pub const FRONT_WIND_MPS: [f64; 12] = [9.0, 10.0, 8.5, 7.0, 5.0, 4.0, 3.0, 2.5, 2.0, 1.5, 1.5, 2.0];
/// Hourly cloud cover of the sample forecast: overcast clearing to a starry sky.
pub const FRONT_CLOUD_PCT: [f64; 12] = [
    95.0, 90.0, 70.0, 40.0, 15.0, 5.0, 0.0, 0.0, 0.0, 5.0, 10.0, 20.0,
];

/// A server running on loopback and a channel connected to it.
#[derive(Debug)]
pub struct TestServer {
    /// The server; `shutdown` drains it.
    pub server: RunningServer,
    /// A channel connected to the server.
    pub channel: Channel,
}

impl TestServer {
    /// Starts a server with default settings on `127.0.0.1:0` and connects to it.
    pub async fn start() -> anyhow::Result<Self> {
        Self::start_with(loopback_config()).await
    }

    /// Starts a server with `config` (its `listen` should be `127.0.0.1:0`) and connects to it.
    pub async fn start_with(config: Config) -> anyhow::Result<Self> {
        let server = startmargin_service::spawn(config).await?;
        let channel = connect(server.addr).await?;
        Ok(Self { server, channel })
    }

    /// The API client.
    pub fn client(&self) -> StartMarginServiceClient<Channel> {
        StartMarginServiceClient::new(self.channel.clone())
    }

    /// The standard health client.
    pub fn health(&self) -> HealthClient<Channel> {
        HealthClient::new(self.channel.clone())
    }

    /// Drains and stops the server.
    pub async fn shutdown(self) -> anyhow::Result<()> {
        self.server.shutdown().await
    }
}

/// The default configuration on `127.0.0.1:0` (a free port) with a fresh SQLite store of its own
/// under the temporary folder, so that no two test servers share a history.
pub fn loopback_config() -> Config {
    startmargin_service::server::loopback_config()
}

/// The URL of a fresh SQLite store under the temporary folder, for a server process of a test
/// (no two processes share a store file).
pub fn fresh_store_url() -> String {
    static NEXT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
    let n = NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let dir = std::env::temp_dir().join(format!("startmargin-e2e-{}-{n}", std::process::id()));
    format!("sqlite://{}", dir.join("starts.db").display())
}

/// A channel to a server on `addr`.
pub async fn connect(addr: SocketAddr) -> anyhow::Result<Channel> {
    Ok(Channel::from_shared(format!("http://{addr}"))?
        .connect()
        .await?)
}

/// The sample forecast's start plus `hours`.
pub fn at_hour(hours: f64) -> Timestamp {
    let seconds = (hours * 3600.0).round() as i64;
    Timestamp {
        seconds: FORECAST_START_S + seconds,
        nanos: 0,
    }
}

/// The sample forecast: 12 hourly points from [`FORECAST_START_S`] with a cold front.
pub fn sample_forecast() -> pb::Forecast {
    let points = (0..12)
        .map(|i| pb::ForecastPoint {
            air_c: FRONT_AIR_C[i],
            wind_mps: FRONT_WIND_MPS[i],
            cloud_cover_pct: FRONT_CLOUD_PCT[i],
            air_spread_k: None,
        })
        .collect();
    pb::Forecast {
        start_time: Some(at_hour(0.0)),
        step: Some(Duration {
            seconds: 3600,
            nanos: 0,
        }),
        points,
        barometric_kpa: None,
    }
}

/// A sample vehicle profile: archetype `heavy-di-i6`, battery 900 CCA 12 V, oil 15W-40, fuel
/// US No. 2 in a 400 L tank.
pub fn sample_vehicle(vehicle_id: &str) -> pb::VehicleProfile {
    pb::VehicleProfile {
        vehicle_id: vehicle_id.to_string(),
        engine: Some(pb::EngineSpec {
            archetype_id: "heavy-di-i6".to_string(),
            ..Default::default()
        }),
        aids: None,
        battery: Some(pb::BatterySpec {
            capacity_cca: 900.0,
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
        sheltered: false,
    }
}

/// A valid vehicle night: [`sample_vehicle`], [`sample_forecast`], coolant 85 °C at the
/// forecast start (parked warm after the last run), departure [`DEPARTURE_AFTER_H`] h later.
pub fn sample_night(vehicle_id: &str) -> pb::VehicleNight {
    pb::VehicleNight {
        vehicle: Some(sample_vehicle(vehicle_id)),
        telemetry: Some(pb::VehicleTelemetry {
            observed_at: Some(at_hour(0.0)),
            coolant_c: Some(85.0),
            ..Default::default()
        }),
        forecast: Some(sample_forecast()),
        forecast_zone_id: String::new(),
        departure_time: Some(at_hour(DEPARTURE_AFTER_H as f64)),
        block_heater_plan: None,
        options: None,
        ..Default::default()
    }
}

/// The sample night for a fleet stream: the forecast comes from zone `zone_id` sent earlier.
pub fn sample_night_in_zone(vehicle_id: &str, zone_id: &str) -> pb::VehicleNight {
    pb::VehicleNight {
        forecast: None,
        forecast_zone_id: zone_id.to_string(),
        ..sample_night(vehicle_id)
    }
}

/// A fleet item carrying the sample forecast as zone `zone_id`.
pub fn zone_item(item_id: &str, zone_id: &str) -> pb::AssessFleetRequest {
    pb::AssessFleetRequest {
        item_id: item_id.to_string(),
        item: Some(pb::assess_fleet_request::Item::ZoneForecast(
            pb::ZoneForecast {
                zone_id: zone_id.to_string(),
                forecast: Some(sample_forecast()),
            },
        )),
    }
}

/// A fleet item carrying a vehicle night.
pub fn vehicle_item(item_id: &str, night: pb::VehicleNight) -> pb::AssessFleetRequest {
    pb::AssessFleetRequest {
        item_id: item_id.to_string(),
        item: Some(pb::assess_fleet_request::Item::Vehicle(night)),
    }
}

/// The field paths of the `google.rpc.BadRequest` violations in a call's status.
pub fn violated_fields(status: &tonic::Status) -> Vec<String> {
    status
        .get_error_details()
        .bad_request()
        .map(|br| {
            br.field_violations
                .iter()
                .map(|v| v.field.clone())
                .collect()
        })
        .unwrap_or_default()
}

/// The field paths of the `google.rpc.BadRequest` violations in a per-item error.
pub fn violated_fields_in(status: &startmargin_proto::google::rpc::Status) -> Vec<String> {
    status
        .details
        .iter()
        .filter(|any| any.type_url.ends_with("google.rpc.BadRequest"))
        .filter_map(|any| tonic_types::pb::BadRequest::decode(any.value.as_slice()).ok())
        .flat_map(|br| br.field_violations.into_iter().map(|v| v.field))
        .collect()
}

/// Asserts that a heat budget sums exactly (within `tolerance_k`), as the API documents:
/// intake → ideal − losses + gains = predicted, and predicted − required = margin.
pub fn assert_budget_sums(assessment: &pb::VehicleAssessment, tolerance_k: f64) {
    let b = assessment
        .budget
        .as_ref()
        .expect("every assessment carries its heat budget");
    let predicted = b.ideal_end_c - b.wall_loss_k - b.leakage_loss_k - b.evaporation_loss_k
        + b.intake_heater_gain_k
        + b.glow_plug_gain_k;
    assert!(
        (predicted - b.predicted_end_c).abs() <= tolerance_k,
        "ideal − losses + gains = {predicted} but predicted_end_c = {}",
        b.predicted_end_c
    );
    let margin = b.predicted_end_c - b.required_c;
    assert!(
        (margin - assessment.start_margin_k).abs() <= tolerance_k,
        "predicted − required = {margin} but start_margin_k = {}",
        assessment.start_margin_k
    );
}

/// `message` as a request carrying `authorization: Bearer <token>`.
pub fn with_token<T>(message: T, token: &str) -> tonic::Request<T> {
    let mut request = tonic::Request::new(message);
    let value = format!("Bearer {token}")
        .parse()
        .expect("a token is valid header text");
    request.metadata_mut().insert("authorization", value);
    request
}

/// The loopback configuration with bearer-token authentication: `tokens` (tenant id, token) are
/// written to a token file in a fresh temporary folder named after `name`.
pub fn auth_config(name: &str, tokens: &[(&str, &str)]) -> Config {
    let dir = std::env::temp_dir().join(format!("startmargin-auth-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let path = dir.join("tokens");
    let text: String = tokens
        .iter()
        .map(|(tenant, token)| format!("{tenant}:{token}\n"))
        .collect();
    std::fs::write(&path, format!("# test tokens\n{text}")).expect("write the token file");
    Config {
        auth_tokens_file: Some(path),
        ..loopback_config()
    }
}

/// The `startmargind` binary of this build, built if needed next to the calling test's executable
/// (tests that run real server processes: drain, restart).
pub fn startmargind_binary() -> std::path::PathBuf {
    let exe = std::env::current_exe().expect("test executable path");
    // <target>/<profile>/deps/<test>-… → <target>/<profile>/startmargind
    let profile_dir = exe
        .parent()
        .and_then(|d| d.parent())
        .expect("target/<profile>/deps");
    let target_dir = profile_dir.parent().expect("target folder");
    let release = profile_dir.file_name().is_some_and(|n| n == "release");
    let manifest = std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../Cargo.toml");
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".to_string());
    let mut build = std::process::Command::new(cargo);
    build
        .args([
            "build",
            "-q",
            "-p",
            "startmargin-service",
            "--bin",
            "startmargind",
        ])
        .arg("--manifest-path")
        .arg(&manifest)
        .arg("--target-dir")
        .arg(target_dir);
    if release {
        build.arg("--release");
    }
    let status = build.status().expect("run cargo build");
    assert!(status.success(), "cannot build startmargind");
    profile_dir.join("startmargind")
}
