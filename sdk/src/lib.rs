//! A thin, typed Rust client for the `startmargin.v1` gRPC API, which predicts whether parked
//! diesel vehicles will start on a cold morning.
//!
//! The SDK converts, validates and transports; it holds no physics. It offers:
//! - builders that produce the API's messages, checked before sending ([`VehicleProfile`],
//!   [`Forecast`], [`Telemetry`], [`VehicleNight`], [`FleetItem`]);
//! - a [`Client`] with per-call deadlines, retries with jittered backoff on `UNAVAILABLE` for the
//!   idempotent unary calls, and round-robin balancing over several endpoints;
//! - one [`Error`] type whose `InvalidArgument` carries the server's field violations, for calls
//!   and for each item of a fleet stream alike;
//! - SAE J1939 adapters ([`j1939`]) from raw parameter values to the API's telemetry fields;
//! - observed start attempts in and the calibration they teach out
//!   ([`Client::report_start_attempts`], [`Client::vehicle_calibration`],
//!   [`Client::fleet_reliability`]).
//!
//! The generated messages are re-exported as [`api`] for everything the builders do not cover
//! (reading an assessment's heat budget, gel outlook, actions…).
//!
//! ```
//! use std::time::{Duration, UNIX_EPOCH};
//! use startmargin_sdk::{Forecast, FuelGrade, VehicleNight, VehicleProfile};
//!
//! let six_pm = UNIX_EPOCH + Duration::from_secs(1_736_899_200);
//! let profile = VehicleProfile::builder("loader-3")
//!     .archetype("offroad-di-i4")
//!     .battery(950.0, 12.0)
//!     .oil("15W-40")
//!     .fuel_grade(FuelGrade::UsWinterBlend)
//!     .tank_l(140.0)
//!     .build()?;
//! let forecast = Forecast::hourly(six_pm)
//!     .points([(0.0, 5.0, 80.0), (-4.0, 3.0, 40.0), (-8.0, 2.0, 10.0)])
//!     .build()?;
//! let night = VehicleNight::new(profile, forecast, six_pm + Duration::from_secs(3 * 3600));
//! let message: startmargin_sdk::api::VehicleNight = night.into();
//! assert_eq!(message.vehicle.unwrap().engine.unwrap().archetype_id, "offroad-di-i4");
//! # Ok::<(), startmargin_sdk::BuildError>(())
//! ```
#![forbid(unsafe_code)]

mod client;
mod error;
mod fleet;
mod forecast;
pub mod j1939;
mod learning;
mod night;
mod profile;
mod retry;
mod start_detector;
mod telemetry;
pub mod time;
mod validate;
mod watch;

/// The generated API messages, client and server of `startmargin.v1`.
pub use startmargin_proto::v1 as api;

pub use start_detector::{
    DetectedAttempt, DetectedOutcome, DetectorConfig, DetectorReport, EngineSample,
    StartDetectorError, detect_start_attempts,
};

pub use api::{
    BiodieselFeedstock, CombustionSystem, DelayCorrelation, FailureMode, FilterMount, FuelGrade,
    GelLevel, GlowPlugHealth, LimitingFactor, PlugInPlan, ProbabilityMethod, StartOutlook,
    UncertaintySource, VehicleAssessment,
};
pub use client::{Client, ClientBuilder};
pub use error::Error;
pub use fleet::{FleetItem, FleetOutcome, FleetProgress, FleetResult, FleetResults, FleetRun};
pub use forecast::{Forecast, ForecastBuilder};
pub use learning::MAX_ATTEMPTS_PER_REPORT;
pub use night::VehicleNight;
pub use profile::{VehicleProfile, VehicleProfileBuilder};
pub use retry::Backoff;
pub use telemetry::{Telemetry, TelemetryBuilder};
pub use validate::{BuildError, FieldViolation};
pub use watch::{
    REPLAY_TELEMETRY_PER_VEHICLE, WatchBuilder, WatchEvent, WatchEvents, WatchHandle, WatchSender,
};

/// The answer of `DescribeModel`.
pub type ModelDescription = api::DescribeModelResponse;
