//! The `[store]` section of the configuration: which database holds the start history and the
//! calibrations, and how many connections the server keeps to it.

use std::path::PathBuf;
use std::str::FromStr;
use std::time::Duration;

use serde::{Deserialize, Serialize};

/// Default store: an embedded SQLite file under the working directory, created on first use.
pub const DEFAULT_STORE_URL: &str = "sqlite://startmargin-data/starts.db";

/// The `[store]` section. Every key can be set as `STARTMARGIN_STORE_<KEY>` too
/// (e.g. `STARTMARGIN_STORE_URL`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct StoreConfig {
    /// `sqlite://PATH` (a file, created with its directory on first use; `sqlite:///abs/path`
    /// for an absolute path) or `postgres://user@host:port/database` (several replicas may
    /// share one database). Keep the PostgreSQL password out of the URL: `PGPASSWORD` or a
    /// pgpass file are read at connect.
    pub url: String,
    /// Connections the server keeps open to the database at most.
    pub max_connections: u32,
    /// Longest wait for a free connection, or (SQLite) for another writer's lock, seconds.
    pub acquire_timeout_s: f64,
}

impl Default for StoreConfig {
    fn default() -> Self {
        Self {
            url: DEFAULT_STORE_URL.to_string(),
            max_connections: 8,
            acquire_timeout_s: 10.0,
        }
    }
}

/// Where a store URL points.
#[derive(Debug, Clone)]
pub(crate) enum StoreLocation {
    /// An SQLite database file.
    Sqlite(PathBuf),
    /// A PostgreSQL server and database.
    Postgres(Box<sqlx::postgres::PgConnectOptions>),
}

impl StoreConfig {
    /// Every problem of these keys, one message each (empty when valid). Messages name the
    /// scheme only, never the URL (it may carry credentials).
    pub fn problems(&self) -> Vec<String> {
        let mut problems = Vec::new();
        if let Err(e) = self.location() {
            problems.push(format!("store.url: {e}"));
        }
        if self.max_connections == 0 || self.max_connections > 1_000 {
            problems.push(format!(
                "store.max_connections = {} must be between 1 and 1000",
                self.max_connections
            ));
        }
        let t = self.acquire_timeout_s;
        if !(t.is_finite() && t > 0.0 && t <= 3_600.0) {
            problems.push(format!(
                "store.acquire_timeout_s = {t} must be more than 0 and at most 3600 seconds"
            ));
        }
        problems
    }

    /// The acquire timeout as a duration (call after `problems()` found none).
    pub fn acquire_timeout(&self) -> Duration {
        Duration::from_secs_f64(self.acquire_timeout_s)
    }

    /// Parses `url` into a location; the error never repeats the URL.
    pub(crate) fn location(&self) -> Result<StoreLocation, String> {
        let url = self.url.trim();
        if let Some(path) = url.strip_prefix("sqlite://") {
            if path.is_empty() {
                return Err(
                    "a sqlite:// URL needs a file path, e.g. sqlite://data/starts.db".into(),
                );
            }
            if path.contains('?') || path.contains('#') {
                return Err(
                    "a sqlite:// URL takes no query or fragment; name the file only".into(),
                );
            }
            if path == ":memory:" || path.ends_with('/') {
                return Err(
                    "a sqlite:// URL must name a file (an in-memory database is not durable)"
                        .into(),
                );
            }
            return Ok(StoreLocation::Sqlite(PathBuf::from(path)));
        }
        if url.starts_with("postgres://") || url.starts_with("postgresql://") {
            return sqlx::postgres::PgConnectOptions::from_str(url)
                .map(|o| StoreLocation::Postgres(Box::new(o)))
                .map_err(|e| format!("the postgres:// URL does not parse ({e})"));
        }
        Err("must start with sqlite:// or postgres://".into())
    }
}
