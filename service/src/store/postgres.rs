//! The PostgreSQL back-end, for several replicas sharing one database: each commit is one
//! transaction at READ COMMITTED whose version checks are single conditional statements, so
//! a concurrent writer of the same calibration makes the later one fail the check; migrations
//! run under a transaction-scoped advisory lock.

use std::time::Duration;

use sqlx::postgres::{PgConnectOptions, PgPool, PgPoolOptions};

type Db = sqlx::Postgres;
type Pool = PgPool;

/// Connects the pool.
pub(super) async fn connect(
    options: PgConnectOptions,
    max_connections: u32,
    timeout: Duration,
) -> Result<Pool, super::StoreError> {
    Ok(PgPoolOptions::new()
        .max_connections(max_connections)
        .acquire_timeout(timeout)
        .connect_with(options)
        .await?)
}

async fn begin(pool: &Pool) -> Result<sqlx::Transaction<'static, Db>, sqlx::Error> {
    pool.begin().await
}

async fn begin_migration(pool: &Pool) -> Result<sqlx::Transaction<'static, Db>, sqlx::Error> {
    let mut tx = pool.begin().await?;
    sqlx::query("SELECT pg_advisory_xact_lock($1)")
        .bind(super::migrate::PG_MIGRATION_LOCK_KEY)
        .execute(&mut *tx)
        .await?;
    Ok(tx)
}

/// Ids pass as one text array.
const IDS_IN: &str = "SELECT UNNEST($2::text[])";

fn ids_param(ids: &[String]) -> Vec<String> {
    ids.to_vec()
}

/// Attempt keys pass as two arrays of the same length, unnested side by side.
const KEYS_IN: &str = "SELECT * FROM UNNEST($2::text[], $3::int8[])";

fn keys_params(keys: &[super::AttemptKey]) -> (Vec<String>, Vec<i64>) {
    (
        keys.iter().map(|k| k.vehicle_id.clone()).collect(),
        keys.iter().map(|k| k.attempted_at_ms).collect(),
    )
}

super::ops::store_ops!();
