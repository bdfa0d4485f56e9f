//! The SQLite back-end: one database file in WAL mode with `synchronous = FULL`, so a commit
//! that returned is on disk; writes take the lock at `BEGIN IMMEDIATE` and wait for another
//! writer up to the acquire timeout. sqlx runs each connection on its own thread, so no call
//! blocks the async runtime.

use std::path::Path;
use std::time::Duration;

use sqlx::sqlite::{
    SqliteConnectOptions, SqliteJournalMode, SqlitePool, SqlitePoolOptions, SqliteSynchronous,
};

type Db = sqlx::Sqlite;
type Pool = SqlitePool;

/// Opens (creating file and directory when missing) the pool of the database at `path`.
pub(super) async fn connect(
    path: &Path,
    max_connections: u32,
    timeout: Duration,
) -> Result<Pool, super::StoreError> {
    if let Some(dir) = path.parent()
        && !dir.as_os_str().is_empty()
    {
        tokio::fs::create_dir_all(dir).await.map_err(|e| {
            super::StoreError::Config(format!(
                "cannot create the store directory {} ({})",
                dir.display(),
                e.kind()
            ))
        })?;
    }
    let options = SqliteConnectOptions::new()
        .filename(path)
        .create_if_missing(true)
        .journal_mode(SqliteJournalMode::Wal)
        .synchronous(SqliteSynchronous::Full)
        .busy_timeout(timeout);
    Ok(SqlitePoolOptions::new()
        .max_connections(max_connections)
        .acquire_timeout(timeout)
        .connect_with(options)
        .await?)
}

async fn begin(pool: &Pool) -> Result<sqlx::Transaction<'static, Db>, sqlx::Error> {
    pool.begin_with("BEGIN IMMEDIATE").await
}

async fn begin_migration(pool: &Pool) -> Result<sqlx::Transaction<'static, Db>, sqlx::Error> {
    begin(pool).await
}

/// Ids pass as one JSON array.
const IDS_IN: &str = "SELECT value FROM json_each($2)";

fn ids_param(ids: &[String]) -> String {
    serde_json::Value::from(ids.to_vec()).to_string()
}

/// Attempt keys pass as two JSON arrays of the same length, joined by position.
const KEYS_IN: &str = "SELECT v.value, t.value FROM json_each($2) AS v \
     JOIN json_each($3) AS t ON v.key = t.key";

fn keys_params(keys: &[super::AttemptKey]) -> (String, String) {
    let vehicles: Vec<&str> = keys.iter().map(|k| k.vehicle_id.as_str()).collect();
    let times: Vec<i64> = keys.iter().map(|k| k.attempted_at_ms).collect();
    (
        serde_json::json!(vehicles).to_string(),
        serde_json::json!(times).to_string(),
    )
}

super::ops::store_ops!();
