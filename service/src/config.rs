//! The server's configuration: typed keys with safe defaults, layered defaults → TOML file →
//! `STARTMARGIN_*` environment variables (figment), unknown keys refused, and a `validate()` that
//! names every bad key at once. Every key is documented in `deploy/startmargin.example.toml`.

use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::time::Duration;

use figment::Figment;
use figment::providers::{Env, Format, Serialized, Toml};
use serde::{Deserialize, Serialize};

use crate::convert::Policy;

/// Prefix of the environment variables that override the file (`STARTMARGIN_LISTEN`, …).
pub const ENV_PREFIX: &str = "STARTMARGIN_";

/// The sections whose keys are also set as `STARTMARGIN_<SECTION>_<KEY>` (e.g.
/// `STARTMARGIN_STORE_URL` → `store.url`, `STARTMARGIN_STREAMS_STREAM_SHARE_PCT`).
const ENV_SECTIONS: [&str; 3] = ["store", "streams", "learning"];

/// Default listen address: loopback only, so an unconfigured server is not exposed.
pub const DEFAULT_LISTEN: &str = "127.0.0.1:50051";

/// Default address of the Prometheus metrics endpoint: loopback only.
pub const DEFAULT_METRICS_LISTEN: &str = "127.0.0.1:9464";

/// Largest accepted value of `max_decode_message_bytes` (64 MiB): fleets stream, they do not batch.
pub const MAX_DECODE_MESSAGE_BYTES_LIMIT: usize = 64 * 1024 * 1024;

/// Largest HTTP/2 flow-control window (RFC 9113 §6.9.1): 2^31 − 1 bytes.
pub const HTTP2_MAX_WINDOW_BYTES: u32 = (1 << 31) - 1;

/// Bytes h2 charges per buffered DATA frame at most (frames of 256 bytes or more are not
/// charged), over the payload of the smallest gRPC message frame (its 5-byte prefix): a frame of
/// `p` bytes costs `256 − p`, so at 5 bytes the charge is 251 per 5 buffered bytes, about 51
/// times the bytes buffered (rounded up).
pub const H2_WORST_FRAME_CHARGE_PER_BYTE: u64 = 51;

/// Vehicles a fleet or watch stream keeps in flight per compute thread. A result holds its place
/// until the reader takes it, so with 2 per thread the compute threads waited for the transport
/// between vehicles; 8 kept them busier (a 30,000-vehicle fleet stream on 2 cores: 6,280 against
/// 5,490 vehicles/s, means of 7 alternating runs), and the tenant's in-flight cap still bounds it.
pub const FLEET_IN_FLIGHT_PER_THREAD: usize = 8;

/// How log lines are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum LogFormat {
    /// One readable line per event, for a terminal.
    Human,
    /// One JSON object per line, for log collectors.
    Json,
}

/// The server's configuration. Field names are the TOML keys; each one can also be set with
/// `STARTMARGIN_<KEY>` in upper case (e.g. `STARTMARGIN_LISTEN=0.0.0.0:50051`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct Config {
    /// Address and port to listen on; port 0 picks a free port.
    pub listen: SocketAddr,
    /// Log line format.
    pub log_format: LogFormat,
    /// Log filter in `tracing` env-filter syntax, e.g. `info` or `info,startmargin_service=debug`.
    pub log_level: String,
    /// Largest request message the server decodes, bytes; larger ones are refused.
    pub max_decode_message_bytes: usize,
    /// HTTP/2 streams (calls) open at once on one connection.
    pub max_concurrent_streams: u32,
    /// Assessments in flight at once over the whole server; beyond it unary calls are refused at
    /// once with RESOURCE_EXHAUSTED and fleet streams wait (backpressure).
    pub concurrency_limit: usize,
    /// Deadline of one unary assessment on the server, seconds (the client's own deadline, when
    /// shorter, applies too).
    pub request_timeout_s: f64,
    /// A fleet stream with no request and no result for this long is ended, seconds.
    pub stream_idle_timeout_s: f64,
    /// Items (zone forecasts and vehicles) accepted on one fleet stream; one more ends the stream
    /// with RESOURCE_EXHAUSTED after the results in flight are delivered.
    pub max_fleet_items_per_stream: u64,
    /// Threads that run assessments; 0 means one per CPU core.
    pub compute_threads: usize,
    /// Longest graceful drain at shutdown, seconds: open streams end with UNAVAILABLE at once,
    /// unary calls in flight may finish within it, then the server stops regardless.
    pub drain_timeout_s: f64,
    /// Interval of HTTP/2 keepalive pings to idle clients, seconds; 0 turns them off.
    pub http2_keepalive_interval_s: f64,
    /// Time to wait for a keepalive ping's answer before closing the connection, seconds.
    pub http2_keepalive_timeout_s: f64,
    /// A new connection that has not sent its HTTP/2 preface (or, with TLS, completed the TLS
    /// handshake) within this time is closed, seconds.
    pub handshake_timeout_s: f64,
    /// HTTP/2 flow-control window of each call, bytes: what a client may send ahead of a
    /// server that reads it slowly. Memory per connection is at most `max_concurrent_streams`
    /// times this; the connection window is the HTTP/2 maximum.
    pub http2_stream_window_bytes: u32,
    /// No-start probability from which a vehicle's outlook is WATCH, percent.
    pub outlook_watch_from_pct: f64,
    /// No-start probability from which a vehicle's outlook is AT_RISK (act tonight), percent.
    pub outlook_at_risk_from_pct: f64,
    /// No-start probability from which a vehicle's outlook is NO_START_EXPECTED, percent.
    pub outlook_no_start_from_pct: f64,
    /// No-start probability the recommended actions aim for when a request names none, percent.
    pub action_target_no_start_pct: f64,
    /// Most vehicles one WatchFleet stream may watch.
    pub watch_max_vehicles_per_stream: usize,
    /// Most updates per second one WatchFleet stream may send; faster input is read more slowly.
    pub watch_max_updates_per_s: f64,
    /// An act-by alert goes out at the latest this many minutes before the action's deadline.
    pub watch_alert_lead_min: f64,
    /// Local hour (0–23) of the departure's night, in each watched vehicle's time zone
    /// (`WatchedVehicle.time_zone`, UTC when absent), from which act-by alerts may go out early;
    /// before it only the lead sends them. Unset = the lead alone.
    pub watch_quiet_until_hour: Option<u32>,
    /// A raised outlook alert clears only when the no-start probability falls this many percent
    /// below its level's threshold (hysteresis).
    pub watch_hysteresis_pct: f64,
    /// TLS certificate chain (PEM); with `tls_key_path` the server speaks TLS only. Unset = plain.
    pub tls_cert_path: Option<PathBuf>,
    /// TLS private key (PEM) of `tls_cert_path`.
    pub tls_key_path: Option<PathBuf>,
    /// CA certificates (PEM) for mutual TLS: when set, every client must present a certificate
    /// signed by one of them.
    pub tls_client_ca_path: Option<PathBuf>,
    /// File of bearer tokens, one `tenant-id:token` per line; unset with `auth_tokens_env` empty
    /// turns authentication off.
    pub auth_tokens_file: Option<PathBuf>,
    /// Name of an environment variable holding bearer tokens as `tenant-id:token` entries
    /// separated by commas or newlines; empty = none. Must not start with `STARTMARGIN_`.
    pub auth_tokens_env: String,
    /// Address of the Prometheus metrics endpoint (`GET /metrics`); empty turns it off. When
    /// `listen` uses port 0, a fixed metrics port is replaced by port 0 too (tests, demos).
    pub metrics_listen: String,
    /// Streaming calls (AssessFleet, WatchFleet) open at once over the whole server; one more is
    /// refused at once with RESOURCE_EXHAUSTED.
    pub max_open_streams: usize,
    /// Age after which a client connection is asked to reconnect (HTTP/2 GOAWAY; calls in flight
    /// finish), seconds, so that clients spread over replicas added later; 0 = never.
    pub max_connection_age_s: f64,
    /// The `[streams]` section: fair sharing, per-tenant quotas, watch idle timeout (also set
    /// as `STARTMARGIN_STREAMS_<KEY>`).
    pub streams: crate::watch::settings::StreamSettings,
    /// The `[learning]` section: the per-tenant rate of start-attempt reports and how long a
    /// replica trusts its in-memory calibrations (also set as `STARTMARGIN_LEARNING_<KEY>`).
    pub learning: crate::learning::settings::LearningSettings,
    /// The `[store]` section: the database of start history and calibrations. Its keys are
    /// also set as `STARTMARGIN_STORE_<KEY>` (e.g. `STARTMARGIN_STORE_URL`).
    pub store: crate::store::StoreConfig,
}

impl Default for Config {
    fn default() -> Self {
        let policy = Policy::default();
        Self {
            listen: DEFAULT_LISTEN
                .parse()
                .expect("the default listen address parses"),
            log_format: LogFormat::Human,
            log_level: "info".to_string(),
            max_decode_message_bytes: 4 * 1024 * 1024,
            max_concurrent_streams: 256,
            concurrency_limit: 512,
            request_timeout_s: 30.0,
            stream_idle_timeout_s: 300.0,
            max_fleet_items_per_stream: 1_000_000,
            compute_threads: 0,
            drain_timeout_s: 20.0,
            http2_keepalive_interval_s: 30.0,
            http2_keepalive_timeout_s: 10.0,
            handshake_timeout_s: 10.0,
            http2_stream_window_bytes: 64 * 1024,
            // The model's own defaults, so that an unconfigured server and the model agree.
            outlook_watch_from_pct: policy.thresholds.watch_from * 100.0,
            outlook_at_risk_from_pct: policy.thresholds.at_risk_from * 100.0,
            outlook_no_start_from_pct: policy.thresholds.no_start_from * 100.0,
            action_target_no_start_pct: policy.target_probability * 100.0,
            watch_max_vehicles_per_stream: 100_000,
            watch_max_updates_per_s: 5_000.0,
            watch_alert_lead_min: 60.0,
            watch_quiet_until_hour: None,
            watch_hysteresis_pct: 2.0,
            tls_cert_path: None,
            tls_key_path: None,
            tls_client_ca_path: None,
            auth_tokens_file: None,
            auth_tokens_env: String::new(),
            metrics_listen: DEFAULT_METRICS_LISTEN.to_string(),
            max_open_streams: 1024,
            max_connection_age_s: 0.0,
            streams: Default::default(),
            store: Default::default(),
            learning: Default::default(),
        }
    }
}

/// The names among `names` shaped like the variables Kubernetes injects for a Service named
/// `startmargin` or `startmargin-…` (`STARTMARGIN_PORT=tcp://…`, `STARTMARGIN_PORT_50051_TCP…`,
/// `STARTMARGIN_SERVICE_HOST`, `STARTMARGIN_SERVICE_PORT…`, and the same after a name infix such as
/// `STARTMARGIN_GRPC_`), sorted. No configuration key has these shapes.
pub fn service_link_vars(names: impl IntoIterator<Item = String>) -> Vec<String> {
    let is_link = |rest: &str| {
        // Parts after the prefix; a link's marker (SERVICE_HOST, SERVICE_PORT, PORT) may follow
        // a Service-name infix of any number of parts.
        let parts: Vec<&str> = rest.split('_').collect();
        parts.iter().enumerate().any(|(i, part)| {
            let after = &parts[i + 1..];
            match *part {
                "SERVICE" => {
                    matches!(after.first(), Some(&"HOST") if after.len() == 1)
                        || after.first() == Some(&"PORT")
                }
                // PORT alone, or PORT_<number>_<protocol>[_PROTO|_PORT|_ADDR].
                "PORT" => {
                    after.is_empty()
                        || (after.len() >= 2
                            && !after[0].is_empty()
                            && after[0].bytes().all(|b| b.is_ascii_digit())
                            && matches!(after[1], "TCP" | "UDP" | "SCTP")
                            && (after.len() == 2
                                || (after.len() == 3
                                    && matches!(after[2], "PROTO" | "PORT" | "ADDR"))))
                }
                _ => false,
            }
        })
    };
    let mut links: Vec<String> = names
        .into_iter()
        .filter(|name| name.strip_prefix(ENV_PREFIX).is_some_and(is_link))
        .collect();
    links.sort();
    links
}

/// Why the configuration could not be loaded or is not valid.
#[derive(Debug, thiserror::Error)]
pub enum ConfigError {
    /// The file named with `--config` does not exist.
    #[error("config file {0} not found")]
    FileNotFound(PathBuf),
    /// A layer could not be read or has a key of the wrong type or an unknown key.
    #[error("cannot load the configuration: {0}")]
    Load(#[from] Box<figment::Error>),
    /// Variables that Kubernetes injects for a Service whose name starts with `startmargin`
    /// (service links) share our prefix but are no configuration keys.
    #[error(
        "environment variables {} look like Kubernetes service links of a Service named \
         `startmargin…` (they are not configuration keys); set `enableServiceLinks: false` in the \
         pod spec or give the Service another name",
        .0.join(", ")
    )]
    ServiceLinks(Vec<String>),
    /// Values that parse but make no sense; one message per key.
    #[error("invalid configuration: {}", .0.join("; "))]
    Invalid(Vec<String>),
    /// The effective configuration could not be written as TOML (a defect).
    #[error("cannot write the configuration as TOML: {0}")]
    Serialize(#[from] toml::ser::Error),
}

impl Config {
    /// The figment layers: defaults, then the TOML file when given, then `STARTMARGIN_*`.
    pub fn figment(file: Option<&Path>) -> Figment {
        let mut figment = Figment::from(Serialized::defaults(Config::default()));
        if let Some(path) = file {
            figment = figment.merge(Toml::file_exact(path));
        }
        figment.merge(Env::prefixed(ENV_PREFIX).map(|key| {
            // `STARTMARGIN_STORE_URL` → `store.url`: a section's keys as flat variables.
            let k = key.as_str();
            for section in ENV_SECTIONS {
                if let Some(rest) = k
                    .get(..section.len() + 1)
                    .filter(|head| head.eq_ignore_ascii_case(&format!("{section}_")))
                    .map(|_| &k[section.len() + 1..])
                {
                    return format!("{section}.{rest}").into();
                }
            }
            key.into()
        }))
    }

    /// Loads the layered configuration and validates it.
    pub fn load(file: Option<&Path>) -> Result<Self, ConfigError> {
        if let Some(path) = file
            && !path.is_file()
        {
            return Err(ConfigError::FileNotFound(path.to_path_buf()));
        }
        // Before figment, which would only say "unknown field: port".
        let links =
            service_link_vars(std::env::vars_os().filter_map(|(k, _)| k.into_string().ok()));
        if !links.is_empty() {
            return Err(ConfigError::ServiceLinks(links));
        }
        let config: Config = Self::figment(file).extract().map_err(Box::new)?;
        config.validate()?;
        Ok(config)
    }

    /// Checks every key and reports all problems at once.
    pub fn validate(&self) -> Result<(), ConfigError> {
        let mut problems = Vec::new();
        if let Err(e) = tracing_subscriber::EnvFilter::try_new(&self.log_level) {
            problems.push(format!(
                "log_level {:?} is not a valid filter: {e}",
                self.log_level
            ));
        }
        if self.max_decode_message_bytes < 1024
            || self.max_decode_message_bytes > MAX_DECODE_MESSAGE_BYTES_LIMIT
        {
            problems.push(format!(
                "max_decode_message_bytes = {} must be between 1024 and {MAX_DECODE_MESSAGE_BYTES_LIMIT}",
                self.max_decode_message_bytes
            ));
        }
        if self.max_concurrent_streams == 0 {
            problems.push("max_concurrent_streams must be at least 1".to_string());
        }
        if self.concurrency_limit == 0 || self.concurrency_limit > 1_000_000 {
            problems.push(format!(
                "concurrency_limit = {} must be between 1 and 1000000",
                self.concurrency_limit
            ));
        }
        if self.max_fleet_items_per_stream == 0 {
            problems.push("max_fleet_items_per_stream must be at least 1".to_string());
        }
        if self.compute_threads > 1024 {
            problems.push(format!(
                "compute_threads = {} must be at most 1024 (0 = one per core)",
                self.compute_threads
            ));
        }
        let seconds = [
            ("request_timeout_s", self.request_timeout_s, false),
            ("stream_idle_timeout_s", self.stream_idle_timeout_s, false),
            ("drain_timeout_s", self.drain_timeout_s, false),
            (
                "http2_keepalive_interval_s",
                self.http2_keepalive_interval_s,
                true,
            ),
            (
                "http2_keepalive_timeout_s",
                self.http2_keepalive_timeout_s,
                false,
            ),
            ("handshake_timeout_s", self.handshake_timeout_s, false),
        ];
        for (key, value, zero_allowed) in seconds {
            let low_ok = if zero_allowed {
                value >= 0.0
            } else {
                value > 0.0
            };
            if !value.is_finite() || !low_ok || value > 86_400.0 {
                let low = if zero_allowed {
                    "0 (off)"
                } else {
                    "more than 0"
                };
                problems.push(format!(
                    "{key} = {value} must be {low} and at most 86400 seconds"
                ));
            }
        }
        let (watch, at_risk, no_start) = (
            self.outlook_watch_from_pct,
            self.outlook_at_risk_from_pct,
            self.outlook_no_start_from_pct,
        );
        if !(watch > 0.0 && watch < at_risk && at_risk < no_start && no_start <= 100.0) {
            problems.push(format!(
                "outlook thresholds must satisfy 0 < outlook_watch_from_pct ({watch}) < \
                 outlook_at_risk_from_pct ({at_risk}) < outlook_no_start_from_pct ({no_start}) <= 100"
            ));
        }
        let target = self.action_target_no_start_pct;
        if !(target > 0.0 && target < 100.0) {
            problems.push(format!(
                "action_target_no_start_pct = {target} must be between 0 and 100 (exclusive)"
            ));
        }
        problems.extend(self.window_problems());
        problems.extend(self.security_problems());
        if self.watch_max_vehicles_per_stream == 0
            || self.watch_max_vehicles_per_stream > 10_000_000
        {
            problems.push(format!(
                "watch_max_vehicles_per_stream = {} must be between 1 and 10000000",
                self.watch_max_vehicles_per_stream
            ));
        }
        let rate = self.watch_max_updates_per_s;
        if !(rate.is_finite() && (1.0..=1_000_000.0).contains(&rate)) {
            problems.push(format!(
                "watch_max_updates_per_s = {rate} must be between 1 and 1000000"
            ));
        }
        let lead = self.watch_alert_lead_min;
        if !(lead.is_finite() && (0.0..=1440.0).contains(&lead)) {
            problems.push(format!(
                "watch_alert_lead_min = {lead} must be between 0 and 1440 minutes"
            ));
        }
        if let Some(hour) = self.watch_quiet_until_hour
            && hour > 23
        {
            problems.push(format!(
                "watch_quiet_until_hour = {hour} must be a local hour 0 to 23"
            ));
        }
        let hysteresis = self.watch_hysteresis_pct;
        if !(hysteresis.is_finite()
            && hysteresis >= 0.0
            && hysteresis < self.outlook_at_risk_from_pct)
        {
            problems.push(format!(
                "watch_hysteresis_pct = {hysteresis} must be at least 0 and below \
                 outlook_at_risk_from_pct ({})",
                self.outlook_at_risk_from_pct
            ));
        }
        if problems.is_empty() {
            Ok(())
        } else {
            Err(ConfigError::Invalid(problems))
        }
    }

    /// The decision policy (outlook thresholds, action target) the assessments use.
    pub fn policy(&self) -> Policy {
        let mut policy = Policy::default();
        policy.thresholds.watch_from = self.outlook_watch_from_pct / 100.0;
        policy.thresholds.at_risk_from = self.outlook_at_risk_from_pct / 100.0;
        policy.thresholds.no_start_from = self.outlook_no_start_from_pct / 100.0;
        policy.target_probability = self.action_target_no_start_pct / 100.0;
        policy
    }

    /// The configuration as a TOML document (what `startmargind check-config` prints).
    pub fn to_toml(&self) -> Result<String, ConfigError> {
        Ok(toml::to_string(self)?)
    }

    /// Threads that run assessments: `compute_threads`, or the number of CPU cores when 0.
    pub fn effective_compute_threads(&self) -> usize {
        if self.compute_threads > 0 {
            self.compute_threads
        } else {
            std::thread::available_parallelism().map_or(2, |n| n.get())
        }
    }

    /// Vehicles of one fleet (or watch) stream in flight at once: [`FLEET_IN_FLIGHT_PER_THREAD`]
    /// per compute thread, within the global concurrency limit.
    pub fn fleet_in_flight_per_stream(&self) -> usize {
        (self.effective_compute_threads() * FLEET_IN_FLIGHT_PER_THREAD)
            .clamp(1, self.concurrency_limit)
    }

    /// Problems of the flow-control window: it must let a normal call flow (at least one
    /// 16 KiB frame) and keep h2's small-DATA-frame budget (half the maximum connection window)
    /// out of reach even when every stream's window is filled with 5-byte frames.
    fn window_problems(&self) -> Vec<String> {
        let window = u64::from(self.http2_stream_window_bytes);
        let streams = u64::from(self.max_concurrent_streams);
        let budget = u64::from(HTTP2_MAX_WINDOW_BYTES) / 2;
        let mut problems = Vec::new();
        if window < 16 * 1024 {
            problems.push(format!(
                "http2_stream_window_bytes = {window} must be at least 16384"
            ));
        } else if streams * window * H2_WORST_FRAME_CHARGE_PER_BYTE > budget {
            problems.push(format!(
                "max_concurrent_streams ({streams}) × http2_stream_window_bytes ({window}) must be \
                 at most {}: beyond it a client streaming small messages to a busy server could \
                 exhaust HTTP/2's small-frame budget and lose its connection",
                budget / H2_WORST_FRAME_CHARGE_PER_BYTE
            ));
        }
        problems
    }

    /// Problems of the TLS, authentication, metrics and stream-limit keys.
    fn security_problems(&self) -> Vec<String> {
        let mut problems = Vec::new();
        if self.tls_cert_path.is_some() != self.tls_key_path.is_some() {
            problems.push("tls_cert_path and tls_key_path must be set together".to_string());
        }
        if self.tls_client_ca_path.is_some() && self.tls_cert_path.is_none() {
            problems.push("tls_client_ca_path needs tls_cert_path and tls_key_path".to_string());
        }
        if self.auth_tokens_env.starts_with(ENV_PREFIX) {
            problems.push(format!(
                "auth_tokens_env must not start with {ENV_PREFIX} (those variables are configuration keys)"
            ));
        }
        if !self.metrics_listen.is_empty() && self.metrics_listen.parse::<SocketAddr>().is_err() {
            problems.push(format!(
                "metrics_listen {:?} must be an address:port or empty (off)",
                self.metrics_listen
            ));
        }
        if self.max_open_streams == 0 {
            problems.push("max_open_streams must be at least 1".to_string());
        }
        problems.extend(self.streams.problems());
        problems.extend(self.store.problems());
        problems.extend(self.learning.problems());
        let age = self.max_connection_age_s;
        if !age.is_finite() || !(0.0..=604_800.0).contains(&age) {
            problems.push(format!(
                "max_connection_age_s = {age} must be 0 (never) to 604800 seconds"
            ));
        }
        problems
    }

    /// The metrics endpoint address, `None` when off (or not parsable; `validate` reports it).
    /// A fixed port becomes port 0 when `listen` itself uses port 0.
    pub fn metrics_addr(&self) -> Option<SocketAddr> {
        let mut addr: SocketAddr = self.metrics_listen.parse().ok()?;
        if self.listen.port() == 0 {
            addr.set_port(0);
        }
        Some(addr)
    }

    /// `max_connection_age_s` as a duration, `None` when connections never age out.
    pub fn max_connection_age(&self) -> Option<Duration> {
        (self.max_connection_age_s > 0.0)
            .then(|| Duration::from_secs_f64(self.max_connection_age_s))
    }

    /// Whether authentication is on (a token file or a token variable is configured).
    pub fn auth_enabled(&self) -> bool {
        self.auth_tokens_file.is_some() || !self.auth_tokens_env.is_empty()
    }

    /// `request_timeout_s` as a duration.
    pub fn request_timeout(&self) -> Duration {
        Duration::from_secs_f64(self.request_timeout_s)
    }

    /// `stream_idle_timeout_s` as a duration.
    pub fn stream_idle_timeout(&self) -> Duration {
        Duration::from_secs_f64(self.stream_idle_timeout_s)
    }

    /// `drain_timeout_s` as a duration.
    pub fn drain_timeout(&self) -> Duration {
        Duration::from_secs_f64(self.drain_timeout_s)
    }

    /// `http2_keepalive_interval_s` as a duration, `None` when keepalive pings are off.
    pub fn http2_keepalive_interval(&self) -> Option<Duration> {
        (self.http2_keepalive_interval_s > 0.0)
            .then(|| Duration::from_secs_f64(self.http2_keepalive_interval_s))
    }

    /// `handshake_timeout_s` as a duration.
    pub fn handshake_timeout(&self) -> Duration {
        Duration::from_secs_f64(self.handshake_timeout_s)
    }

    /// `http2_keepalive_timeout_s` as a duration.
    pub fn http2_keepalive_timeout(&self) -> Duration {
        Duration::from_secs_f64(self.http2_keepalive_timeout_s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_valid_and_loopback() {
        let c = Config::default();
        c.validate().expect("defaults are valid");
        assert_eq!(c.listen.to_string(), DEFAULT_LISTEN);
        assert_eq!(c.max_decode_message_bytes, 4 * 1024 * 1024);
    }

    #[test]
    fn toml_file_overrides_defaults_and_unknown_keys_fail() {
        let c: Config = Figment::from(Serialized::defaults(Config::default()))
            .merge(Toml::string(
                "listen = \"0.0.0.0:6000\"\nlog_format = \"json\"\ncompute_threads = 3",
            ))
            .extract()
            .expect("valid file");
        assert_eq!(c.listen.port(), 6000);
        assert_eq!(c.log_format, LogFormat::Json);
        assert_eq!(c.effective_compute_threads(), 3);
        assert_eq!(c.fleet_in_flight_per_stream(), 24);

        let bad = Figment::from(Serialized::defaults(Config::default()))
            .merge(Toml::string("listne = \"0.0.0.0:6000\""))
            .extract::<Config>();
        let message = bad.expect_err("unknown key refused").to_string();
        assert!(message.contains("listne"), "{message}");
    }

    #[test]
    fn integer_seconds_are_accepted() {
        let c: Config = Figment::from(Serialized::defaults(Config::default()))
            .merge(Toml::string("request_timeout_s = 5"))
            .extract()
            .expect("an integer number of seconds is a valid f64");
        assert_eq!(c.request_timeout(), Duration::from_secs(5));
    }

    #[test]
    fn validate_names_every_bad_key() {
        let c = Config {
            log_level: "info,=[".to_string(),
            concurrency_limit: 0,
            drain_timeout_s: f64::NAN,
            http2_keepalive_interval_s: 0.0,
            max_decode_message_bytes: 10,
            ..Config::default()
        };
        let Err(ConfigError::Invalid(problems)) = c.validate() else {
            panic!("expected invalid")
        };
        let all = problems.join("\n");
        for key in [
            "log_level",
            "concurrency_limit",
            "drain_timeout_s",
            "max_decode_message_bytes",
        ] {
            assert!(all.contains(key), "{key} missing from {all}");
        }
        assert!(
            !all.contains("http2_keepalive_interval_s"),
            "0 turns keepalive off: {all}"
        );
    }

    #[test]
    fn effective_config_round_trips_through_toml() {
        let c = Config {
            compute_threads: 2,
            ..Config::default()
        };
        let text = c.to_toml().expect("serializes");
        let back: Config = Figment::from(Toml::string(&text))
            .extract()
            .expect("parses back");
        assert_eq!(back, c);
    }

    #[test]
    fn default_policy_is_the_models_and_thresholds_must_be_ordered() {
        assert_eq!(Config::default().policy(), Policy::default());
        let c = Config {
            outlook_watch_from_pct: 20.0,
            outlook_at_risk_from_pct: 10.0,
            ..Config::default()
        };
        let Err(ConfigError::Invalid(problems)) = c.validate() else {
            panic!("expected invalid")
        };
        assert!(
            problems[0].contains("outlook_watch_from_pct"),
            "{problems:?}"
        );
        let c = Config {
            action_target_no_start_pct: 0.0,
            ..Config::default()
        };
        assert!(c.validate().is_err());
    }

    #[test]
    fn security_keys_are_validated_together() {
        let c = Config {
            tls_cert_path: Some("/etc/startmargin/tls.crt".into()),
            tls_client_ca_path: None,
            auth_tokens_env: format!("{ENV_PREFIX}TOKENS"),
            metrics_listen: "not an address".to_string(),
            max_open_streams: 0,
            max_connection_age_s: -1.0,
            ..Config::default()
        };
        let Err(ConfigError::Invalid(problems)) = c.validate() else {
            panic!("expected invalid")
        };
        let all = problems.join("\n");
        for key in [
            "tls_key_path",
            "auth_tokens_env",
            "metrics_listen",
            "max_open_streams",
            "max_connection_age_s",
        ] {
            assert!(all.contains(key), "{key} missing from {all}");
        }
        let c = Config {
            tls_client_ca_path: Some("/etc/startmargin/ca.crt".into()),
            ..Config::default()
        };
        assert!(
            c.validate().is_err(),
            "mutual TLS needs a server certificate"
        );
    }

    #[test]
    fn metrics_address_follows_an_ephemeral_api_port() {
        let c = Config::default();
        assert_eq!(c.metrics_addr(), DEFAULT_METRICS_LISTEN.parse().ok());
        let c = Config {
            listen: "127.0.0.1:0".parse().expect("addr"),
            ..Config::default()
        };
        assert_eq!(c.metrics_addr().map(|a| a.port()), Some(0));
        let c = Config {
            metrics_listen: String::new(),
            ..Config::default()
        };
        assert_eq!(c.metrics_addr(), None);
        assert!(!Config::default().auth_enabled());
    }

    #[test]
    fn kubernetes_service_link_variables_are_recognised() {
        // The variables Kubernetes injects for a Service `startmargin` with ports 50051 and 9464
        // (named `grpc` and `metrics`), and for a Service `startmargin-grpc`.
        let injected = [
            "STARTMARGIN_PORT",
            "STARTMARGIN_PORT_50051_TCP",
            "STARTMARGIN_PORT_50051_TCP_PROTO",
            "STARTMARGIN_PORT_50051_TCP_PORT",
            "STARTMARGIN_PORT_50051_TCP_ADDR",
            "STARTMARGIN_PORT_9464_TCP",
            "STARTMARGIN_SERVICE_HOST",
            "STARTMARGIN_SERVICE_PORT",
            "STARTMARGIN_SERVICE_PORT_GRPC",
            "STARTMARGIN_SERVICE_PORT_METRICS",
            "STARTMARGIN_GRPC_SERVICE_HOST",
            "STARTMARGIN_GRPC_PORT_50051_TCP_ADDR",
            "STARTMARGIN_GRPC_PORT",
        ];
        let keys = [
            "STARTMARGIN_LISTEN",
            "STARTMARGIN_METRICS_LISTEN",
            "STARTMARGIN_MAX_OPEN_STREAMS",
            "STARTMARGIN_AUTH_TOKENS_ENV",
            "STARTMARGIN_PORTS",
            "STARTMARGIN_PORT_X_TCP",
            "STARTMARGIN_PORT_50051_HTTP",
            "STARTMARGIND_SERVICE_HOST",
            "OTHER_SERVICE_HOST",
        ];
        let names = injected.iter().chain(&keys).map(|s| s.to_string());
        let mut expected: Vec<String> = injected.iter().map(|s| s.to_string()).collect();
        expected.sort();
        assert_eq!(service_link_vars(names), expected);
        // No configuration key has a service-link shape.
        let config_keys = toml::Value::try_from(Config::default()).expect("as TOML");
        let config_keys = config_keys.as_table().expect("a table").keys().cloned();
        let as_env = config_keys.map(|k| format!("{ENV_PREFIX}{}", k.to_ascii_uppercase()));
        assert!(service_link_vars(as_env).is_empty());
        let e = ConfigError::ServiceLinks(vec!["STARTMARGIN_PORT".into()]).to_string();
        assert!(
            e.contains("STARTMARGIN_PORT") && e.contains("enableServiceLinks: false"),
            "{e}"
        );
    }

    #[test]
    fn every_key_is_documented_in_the_example() {
        let example = include_str!("../../deploy/startmargin.example.toml");
        let keys = serde_json::to_value(Config::default()).expect("serializes");
        for key in keys.as_object().expect("an object").keys() {
            assert!(
                example.contains(&format!("#{key} ="))
                    || example.contains(&format!("\n{key} ="))
                    || example.contains(&format!("\n[{key}]")),
                "{key} is not in deploy/startmargin.example.toml"
            );
        }
    }

    #[test]
    fn stream_window_is_checked_against_the_small_frame_budget() {
        Config::default().validate().expect("the defaults fit");
        let c = Config {
            max_concurrent_streams: 1024,
            ..Config::default()
        };
        let Err(ConfigError::Invalid(problems)) = c.validate() else {
            panic!("1024 streams of 64 KiB exceed the budget")
        };
        assert!(
            problems[0].contains("http2_stream_window_bytes"),
            "{problems:?}"
        );
        let c = Config {
            max_concurrent_streams: 1024,
            http2_stream_window_bytes: 16 * 1024,
            handshake_timeout_s: 0.0,
            ..Config::default()
        };
        let Err(ConfigError::Invalid(problems)) = c.validate() else {
            panic!("a zero handshake timeout is refused")
        };
        assert_eq!(problems.len(), 1, "{problems:?}");
        assert!(problems[0].contains("handshake_timeout_s"), "{problems:?}");
    }

    #[test]
    fn missing_file_is_reported() {
        let e =
            Config::load(Some(Path::new("/nonexistent/startmargin.toml"))).expect_err("missing");
        assert!(matches!(e, ConfigError::FileNotFound(_)));
    }
}
