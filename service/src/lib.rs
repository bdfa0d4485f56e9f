//! # startmargin-service
//!
//! The startmargin gRPC server as a library, so that the binary (`startmargind`), the end-to-end
//! tests, the benchmarks and the demo all drive the same real server in-process.
//!
//! - [`config`]: typed configuration, layered defaults → TOML → `STARTMARGIN_*` environment.
//! - [`server`]: the tonic router (API, health, reflection), limits and the bounded drain.
//! - [`api`]: the `startmargin.v1.StartMarginService` implementation (transport only).
//! - [`convert`]: validation and conversion between the API's messages and the model.
//! - [`error`]: the API errors and their one mapping to gRPC status codes.
//! - [`local_time`]: the depot time zone, and times for people in it with their offset.
//! - [`store`]: start history and calibration state in SQLite (default) or PostgreSQL.
//!
//! The service holds no physics: it validates, converts, runs the model off the async runtime
//! and transports the answer.
#![forbid(unsafe_code)]

pub mod api;
pub mod auth;
pub mod codec;
pub mod config;
pub mod convert;
pub mod error;
pub mod learning;
pub mod local_time;
pub mod metrics;
pub mod metrics_http;
pub mod server;
pub mod store;
pub mod tenant;
pub mod tls;
pub mod watch;

pub use config::Config;
pub use server::{RunningServer, spawn, spawn_on_loopback};
