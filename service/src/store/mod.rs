//! The start-history and calibration store: observed start attempts and the calibration state
//! of each vehicle and archetype pool, per tenant, in an embedded SQLite file (the default, no
//! setup) or in PostgreSQL (several replicas sharing one database), chosen by `store.url`.
//!
//! One interface, [`Store`], over both back-ends; plain Rust records ([`types`]), no protocol
//! types and no physics. Every operation takes the tenant id, checks its arguments against the
//! documented caps ([`MAX_BATCH_ATTEMPTS`] and the other constants) before touching the
//! database, and reads or writes only that tenant's rows (the tenant is the first column of
//! every key and index). The schema is migrated at [`Store::open`] ([`migrate`]).
//!
//! A [`Store::commit`] is one transaction: attempts are inserted idempotently by
//! ([`AttemptKey`]) — a resend with the same content is a duplicate, the same key with other
//! content a per-item conflict — and calibrations are written only if their stored version is
//! still the one the caller loaded, else the whole batch rolls back with
//! [`StoreError::Concurrent`]. When it returns `Ok` the batch is durable (SQLite WAL with
//! `synchronous = FULL`; a PostgreSQL commit). [`Store::record_cooldown`] keeps cool-down fits
//! the same way, one per vehicle and key-off.

mod config;
mod error;
pub mod migrate;
mod ops;
mod postgres;
mod sqlite;
pub mod types;
mod validate;

use std::collections::{HashMap, HashSet};

use config::StoreLocation;
pub use config::{DEFAULT_STORE_URL, StoreConfig};
pub use error::{CalibrationKind, StoreError};
pub use types::*;

/// Which database a [`Store`] uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Backend {
    /// An embedded SQLite file.
    Sqlite,
    /// A PostgreSQL server.
    Postgres,
}

#[derive(Debug, Clone)]
enum Pool {
    Sqlite(sqlx::SqlitePool),
    Postgres(sqlx::PgPool),
}

/// A handle on the store; cheap to clone (clones share one connection pool).
#[derive(Debug, Clone)]
pub struct Store {
    pool: Pool,
}

/// Runs the same operation on whichever back-end the store uses.
macro_rules! dispatch {
    ($self:ident, $op:ident ( $($arg:expr),* )) => {
        match &$self.pool {
            Pool::Sqlite(pool) => sqlite::$op(pool, $($arg),*).await,
            Pool::Postgres(pool) => postgres::$op(pool, $($arg),*).await,
        }
    };
}

impl Store {
    /// Connects to the configured database, creating an SQLite file (and its directory) when
    /// missing, and migrates it to the newest schema.
    pub async fn open(config: &StoreConfig) -> Result<Store, StoreError> {
        Self::open_at_schema(config, migrate::LATEST_SCHEMA_VERSION).await
    }

    /// Like [`Store::open`], but migrates only up to schema `version` (an older schema, for
    /// upgrade tests and staged roll-outs). Operations that need a newer schema fail.
    pub async fn open_at_schema(config: &StoreConfig, version: i64) -> Result<Store, StoreError> {
        let problems = config.problems();
        if !problems.is_empty() {
            return Err(StoreError::Config(problems.join("; ")));
        }
        let (max, timeout) = (config.max_connections, config.acquire_timeout());
        let store = match config.location().map_err(StoreError::Config)? {
            StoreLocation::Sqlite(path) => {
                let pool = sqlite::connect(&path, max, timeout).await?;
                sqlite::migrate(&pool, migrate::SQLITE_MIGRATIONS, version).await?;
                Store {
                    pool: Pool::Sqlite(pool),
                }
            }
            StoreLocation::Postgres(options) => {
                let pool = postgres::connect(*options, max, timeout).await?;
                postgres::migrate(&pool, migrate::POSTGRES_MIGRATIONS, version).await?;
                Store {
                    pool: Pool::Postgres(pool),
                }
            }
        };
        Ok(store)
    }

    /// The back-end in use.
    pub fn backend(&self) -> Backend {
        match self.pool {
            Pool::Sqlite(_) => Backend::Sqlite,
            Pool::Postgres(_) => Backend::Postgres,
        }
    }

    /// The database's schema version (the newest migration applied).
    pub async fn schema_version(&self) -> Result<i64, StoreError> {
        dispatch!(self, schema_version())
    }

    /// Closes the pool; later calls fail with [`StoreError::Unavailable`].
    pub async fn close(&self) {
        match &self.pool {
            Pool::Sqlite(pool) => pool.close().await,
            Pool::Postgres(pool) => pool.close().await,
        }
    }

    /// Which of `keys` (at most [`MAX_LOOKUP_KEYS`]) the tenant has stored already: the
    /// idempotency pre-check before computing an update.
    pub async fn known_attempts(
        &self,
        tenant: &str,
        keys: &[AttemptKey],
    ) -> Result<HashSet<AttemptKey>, StoreError> {
        validate::tenant(tenant)?;
        validate::keys(keys)?;
        dispatch!(self, known_attempts(tenant, keys))
    }

    /// The stored calibrations of `vehicle_ids` and of `archetype_ids` (each at most
    /// [`MAX_LOOKUP_KEYS`]), by id; ids with none are absent from the maps.
    pub async fn load(
        &self,
        tenant: &str,
        vehicle_ids: &[String],
        archetype_ids: &[String],
    ) -> Result<
        (
            HashMap<String, StoredCalibration>,
            HashMap<String, StoredCalibration>,
        ),
        StoreError,
    > {
        validate::tenant(tenant)?;
        validate::ids("vehicle_ids", vehicle_ids)?;
        validate::ids("archetype_ids", archetype_ids)?;
        let vehicles = dispatch!(
            self,
            calibrations(tenant, CalibrationKind::Vehicle, vehicle_ids)
        )?;
        let archetypes = dispatch!(
            self,
            calibrations(tenant, CalibrationKind::Archetype, archetype_ids)
        )?;
        Ok((vehicles, archetypes))
    }

    /// Every stored calibration of the tenant, vehicles and archetype pools (each at most
    /// [`MAX_TENANT_CALIBRATIONS`], in id order): what a replica holds in memory to assess with.
    pub async fn tenant_calibrations(
        &self,
        tenant: &str,
    ) -> Result<
        (
            HashMap<String, StoredCalibration>,
            HashMap<String, StoredCalibration>,
        ),
        StoreError,
    > {
        validate::tenant(tenant)?;
        let vehicles = dispatch!(
            self,
            all_calibrations(tenant, CalibrationKind::Vehicle, MAX_TENANT_CALIBRATIONS)
        )?;
        let archetypes = dispatch!(
            self,
            all_calibrations(tenant, CalibrationKind::Archetype, MAX_TENANT_CALIBRATIONS)
        )?;
        Ok((vehicles, archetypes))
    }

    /// One vehicle's stored calibration, if any.
    pub async fn vehicle_calibration(
        &self,
        tenant: &str,
        vehicle_id: &str,
    ) -> Result<Option<StoredCalibration>, StoreError> {
        validate::tenant(tenant)?;
        validate::id("vehicle_id", vehicle_id, false)?;
        let ids = [vehicle_id.to_string()];
        let mut found = dispatch!(self, calibrations(tenant, CalibrationKind::Vehicle, &ids))?;
        Ok(found.remove(vehicle_id))
    }

    /// Writes `batch` in one transaction (see the module doc); durable when it returns `Ok`.
    /// Refuses the whole batch, writing nothing, on any invalid item.
    pub async fn commit(
        &self,
        tenant: &str,
        batch: &CommitBatch,
    ) -> Result<CommitOutcome, StoreError> {
        validate::tenant(tenant)?;
        validate::batch(batch)?;
        dispatch!(self, commit(tenant, batch))
    }

    /// Records a cool-down fit and the vehicle calibration it leaves, in one transaction: a
    /// key-off recorded before is a [`CooldownRecorded::Duplicate`] and writes nothing; a
    /// vehicle calibration changed since the caller loaded it aborts with
    /// [`StoreError::Concurrent`].
    pub async fn record_cooldown(
        &self,
        tenant: &str,
        fit: &StoredCooldownFit,
        vehicle: &CalibrationWrite,
    ) -> Result<CooldownRecorded, StoreError> {
        validate::tenant(tenant)?;
        validate::cooldown(fit, vehicle)?;
        dispatch!(self, record_cooldown(tenant, fit, vehicle))
    }

    /// A vehicle's cool-down fits, newest key-off first, at most `limit` (1 to
    /// [`MAX_RECENT_COOLDOWN_FITS`]).
    pub async fn recent_cooldown_fits(
        &self,
        tenant: &str,
        vehicle_id: &str,
        limit: usize,
    ) -> Result<Vec<StoredCooldownFit>, StoreError> {
        validate::tenant(tenant)?;
        validate::id("vehicle_id", vehicle_id, false)?;
        validate::limit(limit, MAX_RECENT_COOLDOWN_FITS)?;
        dispatch!(self, recent_cooldown_fits(tenant, vehicle_id, limit))
    }

    /// A vehicle's attempts, newest first, at most `limit` (1 to [`MAX_RECENT_ATTEMPTS`]).
    pub async fn recent_attempts(
        &self,
        tenant: &str,
        vehicle_id: &str,
        limit: usize,
    ) -> Result<Vec<StoredAttempt>, StoreError> {
        validate::tenant(tenant)?;
        validate::id("vehicle_id", vehicle_id, false)?;
        validate::limit(limit, MAX_RECENT_ATTEMPTS)?;
        dispatch!(self, recent_attempts(tenant, vehicle_id, limit))
    }

    /// The tenant's attempts at or after `since_ms` (UTC epoch ms), newest first, at most
    /// `limit` (1 to [`MAX_FLEET_ATTEMPTS`]); a full page means older ones were left out.
    pub async fn fleet_attempts(
        &self,
        tenant: &str,
        since_ms: i64,
        limit: usize,
    ) -> Result<Vec<StoredAttempt>, StoreError> {
        validate::tenant(tenant)?;
        validate::limit(limit, MAX_FLEET_ATTEMPTS)?;
        dispatch!(self, fleet_attempts(tenant, since_ms, limit))
    }
}
