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

/// Default listen address: loopback only, so an unconfigured server is not exposed.
pub const DEFAULT_LISTEN: &str = "127.0.0.1:50051";

/// Largest accepted value of `max_decode_message_bytes` (64 MiB): fleets stream, they do not batch.
pub const MAX_DECODE_MESSAGE_BYTES_LIMIT: usize = 64 * 1024 * 1024;

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
    /// No-start probability from which a vehicle's outlook is WATCH, percent.
    pub outlook_watch_from_pct: f64,
    /// No-start probability from which a vehicle's outlook is AT_RISK (act tonight), percent.
    pub outlook_at_risk_from_pct: f64,
    /// No-start probability from which a vehicle's outlook is NO_START_EXPECTED, percent.
    pub outlook_no_start_from_pct: f64,
    /// No-start probability the recommended actions aim for when a request names none, percent.
    pub action_target_no_start_pct: f64,
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
            // The model's own defaults, so that an unconfigured server and the model agree.
            outlook_watch_from_pct: policy.thresholds.watch_from * 100.0,
            outlook_at_risk_from_pct: policy.thresholds.at_risk_from * 100.0,
            outlook_no_start_from_pct: policy.thresholds.no_start_from * 100.0,
            action_target_no_start_pct: policy.target_probability * 100.0,
        }
    }
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
        figment.merge(Env::prefixed(ENV_PREFIX))
    }

    /// Loads the layered configuration and validates it.
    pub fn load(file: Option<&Path>) -> Result<Self, ConfigError> {
        if let Some(path) = file
            && !path.is_file()
        {
            return Err(ConfigError::FileNotFound(path.to_path_buf()));
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

    /// Vehicles of one fleet stream in flight at once: twice the compute threads, within the
    /// global concurrency limit.
    pub fn fleet_in_flight_per_stream(&self) -> usize {
        (self.effective_compute_threads() * 2).clamp(1, self.concurrency_limit)
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
        assert_eq!(c.fleet_in_flight_per_stream(), 6);

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
    fn missing_file_is_reported() {
        let e =
            Config::load(Some(Path::new("/nonexistent/startmargin.toml"))).expect_err("missing");
        assert!(matches!(e, ConfigError::FileNotFound(_)));
    }
}
