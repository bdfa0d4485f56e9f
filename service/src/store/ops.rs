//! The store's queries, written once and expanded for each back-end by [`store_ops!`]. The
//! module that expands it defines `Db`, `Pool`, `begin` (a write transaction), `begin_migration`
//! (the same, holding the migration lock), and how a list of ids or of attempt keys is passed
//! as parameters (`ids_param`/`IDS_IN`, `keys_params`/`KEYS_IN`); the SQL is otherwise the same.
//! Every statement filters on `tenant_id`.

/// Columns of `start_attempts`, in the order of `bind_attempt` and `attempt_of`.
pub(crate) const ATTEMPT_COLUMNS: &str = "vehicle_id, attempted_at_ms, archetype_id, outcome, \
     cranking_s, peak_cranking_rpm, lowest_cranking_v, air_c, coolant_c, preheat_s, \
     block_heater_on, predicted_no_start_probability, uncalibrated_no_start_probability, \
     predicted_margin_k, calibrated_observations, received_at_ms";

/// Columns of a calibration table after the id, in the order of `bind_calibration`.
pub(crate) const CALIBRATION_COLUMNS: &str = "thermal_offset_mean_k, thermal_offset_sd_k, \
     cranking_log_factor_mean, cranking_log_factor_sd, cooldown_tau_mean_s, cooldown_tau_sd_s, \
     observations, updated_at_ms, version";

/// Table and id column of a calibration kind.
pub(crate) fn calibration_table(kind: super::CalibrationKind) -> (&'static str, &'static str) {
    match kind {
        super::CalibrationKind::Vehicle => ("vehicle_calibrations", "vehicle_id"),
        super::CalibrationKind::Archetype => ("archetype_calibrations", "archetype_id"),
    }
}

/// Expands the store's operations for one back-end (see the module doc).
macro_rules! store_ops {
    () => {
        use std::collections::{HashMap, HashSet};

        use sqlx::Row;

        use super::error::{CalibrationKind, StoreError};
        use super::migrate::{self, Migration};
        use super::ops::{ATTEMPT_COLUMNS, CALIBRATION_COLUMNS, calibration_table};
        use super::types::*;

        type Tx = sqlx::Transaction<'static, Db>;

        fn internal(what: &str) -> StoreError {
            StoreError::Internal(format!("stored {what} is out of range"))
        }

        fn attempt_of(row: &<Db as sqlx::Database>::Row) -> Result<StoredAttempt, StoreError> {
            let outcome: String = row.try_get("outcome")?;
            let observations: i64 = row.try_get("calibrated_observations")?;
            Ok(StoredAttempt {
                key: AttemptKey {
                    vehicle_id: row.try_get("vehicle_id")?,
                    attempted_at_ms: row.try_get("attempted_at_ms")?,
                },
                archetype_id: row.try_get("archetype_id")?,
                outcome: StoredOutcome::from_db(&outcome).ok_or_else(|| internal("outcome"))?,
                cranking_s: row.try_get("cranking_s")?,
                peak_cranking_rpm: row.try_get("peak_cranking_rpm")?,
                lowest_cranking_v: row.try_get("lowest_cranking_v")?,
                air_c: row.try_get("air_c")?,
                coolant_c: row.try_get("coolant_c")?,
                preheat_s: row.try_get("preheat_s")?,
                block_heater_on: row.try_get("block_heater_on")?,
                predicted_no_start_probability: row.try_get("predicted_no_start_probability")?,
                uncalibrated_no_start_probability: row
                    .try_get("uncalibrated_no_start_probability")?,
                predicted_margin_k: row.try_get("predicted_margin_k")?,
                calibrated_observations: u32::try_from(observations)
                    .map_err(|_| internal("observation count"))?,
                received_at_ms: row.try_get("received_at_ms")?,
            })
        }

        fn calibration_of(
            row: &<Db as sqlx::Database>::Row,
        ) -> Result<StoredCalibration, StoreError> {
            let observations: i64 = row.try_get("observations")?;
            Ok(StoredCalibration {
                thermal_offset_mean_k: row.try_get("thermal_offset_mean_k")?,
                thermal_offset_sd_k: row.try_get("thermal_offset_sd_k")?,
                cranking_log_factor_mean: row.try_get("cranking_log_factor_mean")?,
                cranking_log_factor_sd: row.try_get("cranking_log_factor_sd")?,
                cooldown_tau_mean_s: row.try_get("cooldown_tau_mean_s")?,
                cooldown_tau_sd_s: row.try_get("cooldown_tau_sd_s")?,
                observations: u32::try_from(observations)
                    .map_err(|_| internal("observation count"))?,
                updated_at_ms: row.try_get("updated_at_ms")?,
                version: row.try_get("version")?,
            })
        }

        /// Applies the migrations up to `target` in one locked transaction.
        pub(super) async fn migrate(
            pool: &Pool,
            migrations: &[Migration],
            target: i64,
        ) -> Result<(), StoreError> {
            let mut tx = begin_migration(pool).await?;
            sqlx::raw_sql(migrate::SCHEMA_TABLE_DDL)
                .execute(&mut *tx)
                .await?;
            let rows = sqlx::query("SELECT version, checksum FROM startmargin_schema")
                .fetch_all(&mut *tx)
                .await?;
            let mut applied = Vec::with_capacity(rows.len());
            for row in &rows {
                applied.push((row.try_get::<i64, _>(0)?, row.try_get::<String, _>(1)?));
            }
            let now_ms = std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map_or(0, |d| i64::try_from(d.as_millis()).unwrap_or(i64::MAX));
            for m in migrate::plan(migrations, &applied, target)? {
                sqlx::raw_sql(m.sql).execute(&mut *tx).await?;
                sqlx::query(
                    "INSERT INTO startmargin_schema (version, name, checksum, applied_at_ms) \
                     VALUES ($1, $2, $3, $4)",
                )
                .bind(m.version)
                .bind(m.name)
                .bind(migrate::checksum(m.sql))
                .bind(now_ms)
                .execute(&mut *tx)
                .await?;
            }
            tx.commit().await?;
            Ok(())
        }

        /// The highest applied schema version (0 for an empty database).
        pub(super) async fn schema_version(pool: &Pool) -> Result<i64, StoreError> {
            let row = sqlx::query("SELECT COALESCE(MAX(version), 0) FROM startmargin_schema")
                .fetch_one(pool)
                .await?;
            Ok(row.try_get::<i64, _>(0)?)
        }

        pub(super) async fn known_attempts(
            pool: &Pool,
            tenant: &str,
            keys: &[AttemptKey],
        ) -> Result<HashSet<AttemptKey>, StoreError> {
            if keys.is_empty() {
                return Ok(HashSet::new());
            }
            let (vehicles, times) = keys_params(keys);
            let sql = format!(
                "SELECT vehicle_id, attempted_at_ms FROM start_attempts \
                 WHERE tenant_id = $1 AND (vehicle_id, attempted_at_ms) IN ({KEYS_IN})"
            );
            let rows = sqlx::query(&sql)
                .bind(tenant)
                .bind(vehicles)
                .bind(times)
                .fetch_all(pool)
                .await?;
            let mut known = HashSet::with_capacity(rows.len());
            for row in &rows {
                known.insert(AttemptKey {
                    vehicle_id: row.try_get(0)?,
                    attempted_at_ms: row.try_get(1)?,
                });
            }
            Ok(known)
        }

        pub(super) async fn calibrations(
            pool: &Pool,
            tenant: &str,
            kind: CalibrationKind,
            ids: &[String],
        ) -> Result<HashMap<String, StoredCalibration>, StoreError> {
            if ids.is_empty() {
                return Ok(HashMap::new());
            }
            let (table, id) = calibration_table(kind);
            let sql = format!(
                "SELECT {id}, {CALIBRATION_COLUMNS} FROM {table} \
                 WHERE tenant_id = $1 AND {id} IN ({IDS_IN})"
            );
            let rows = sqlx::query(&sql)
                .bind(tenant)
                .bind(ids_param(ids))
                .fetch_all(pool)
                .await?;
            let mut found = HashMap::with_capacity(rows.len());
            for row in &rows {
                found.insert(row.try_get::<String, _>(0)?, calibration_of(row)?);
            }
            Ok(found)
        }

        pub(super) async fn all_calibrations(
            pool: &Pool,
            tenant: &str,
            kind: CalibrationKind,
            limit: usize,
        ) -> Result<HashMap<String, StoredCalibration>, StoreError> {
            let (table, id) = calibration_table(kind);
            let sql = format!(
                "SELECT {id}, {CALIBRATION_COLUMNS} FROM {table} \
                 WHERE tenant_id = $1 ORDER BY {id} LIMIT $2"
            );
            let rows = sqlx::query(&sql)
                .bind(tenant)
                .bind(limit as i64)
                .fetch_all(pool)
                .await?;
            let mut found = HashMap::with_capacity(rows.len());
            for row in &rows {
                found.insert(row.try_get::<String, _>(0)?, calibration_of(row)?);
            }
            Ok(found)
        }

        async fn insert_attempt(
            tx: &mut Tx,
            tenant: &str,
            a: &StoredAttempt,
        ) -> Result<AttemptResult, StoreError> {
            let sql = format!(
                "INSERT INTO start_attempts (tenant_id, {ATTEMPT_COLUMNS}) VALUES \
                 ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17) \
                 ON CONFLICT (tenant_id, vehicle_id, attempted_at_ms) DO NOTHING"
            );
            let inserted = sqlx::query(&sql)
                .bind(tenant)
                .bind(&a.key.vehicle_id)
                .bind(a.key.attempted_at_ms)
                .bind(&a.archetype_id)
                .bind(a.outcome.as_db())
                .bind(a.cranking_s)
                .bind(a.peak_cranking_rpm)
                .bind(a.lowest_cranking_v)
                .bind(a.air_c)
                .bind(a.coolant_c)
                .bind(a.preheat_s)
                .bind(a.block_heater_on)
                .bind(a.predicted_no_start_probability)
                .bind(a.uncalibrated_no_start_probability)
                .bind(a.predicted_margin_k)
                .bind(i64::from(a.calibrated_observations))
                .bind(a.received_at_ms)
                .execute(&mut **tx)
                .await?
                .rows_affected();
            if inserted == 1 {
                return Ok(AttemptResult::Inserted);
            }
            let sql = format!(
                "SELECT {ATTEMPT_COLUMNS} FROM start_attempts \
                 WHERE tenant_id = $1 AND vehicle_id = $2 AND attempted_at_ms = $3"
            );
            let row = sqlx::query(&sql)
                .bind(tenant)
                .bind(&a.key.vehicle_id)
                .bind(a.key.attempted_at_ms)
                .fetch_one(&mut **tx)
                .await?;
            Ok(if attempt_of(&row)?.same_content(a) {
                AttemptResult::Duplicate
            } else {
                AttemptResult::Conflict
            })
        }

        async fn write_calibration(
            tx: &mut Tx,
            tenant: &str,
            kind: CalibrationKind,
            w: &CalibrationWrite,
        ) -> Result<i64, StoreError> {
            let (table, id) = calibration_table(kind);
            let c = &w.calibration;
            let new_version = w.expected_version.map_or(1, |v| v + 1);
            let sql = match w.expected_version {
                None => format!(
                    "INSERT INTO {table} (tenant_id, {id}, {CALIBRATION_COLUMNS}) VALUES \
                     ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11) \
                     ON CONFLICT (tenant_id, {id}) DO NOTHING"
                ),
                Some(_) => format!(
                    "UPDATE {table} SET thermal_offset_mean_k = $3, thermal_offset_sd_k = $4, \
                     cranking_log_factor_mean = $5, cranking_log_factor_sd = $6, \
                     cooldown_tau_mean_s = $7, cooldown_tau_sd_s = $8, observations = $9, \
                     updated_at_ms = $10, version = $11 \
                     WHERE tenant_id = $1 AND {id} = $2 AND version = $12"
                ),
            };
            let mut query = sqlx::query(&sql)
                .bind(tenant)
                .bind(&w.id)
                .bind(c.thermal_offset_mean_k)
                .bind(c.thermal_offset_sd_k)
                .bind(c.cranking_log_factor_mean)
                .bind(c.cranking_log_factor_sd)
                .bind(c.cooldown_tau_mean_s)
                .bind(c.cooldown_tau_sd_s)
                .bind(i64::from(c.observations))
                .bind(c.updated_at_ms)
                .bind(new_version);
            if let Some(expected) = w.expected_version {
                query = query.bind(expected);
            }
            let written = query.execute(&mut **tx).await?.rows_affected();
            if written != 1 {
                return Err(StoreError::concurrent(kind, &w.id));
            }
            Ok(new_version)
        }

        pub(super) async fn commit(
            pool: &Pool,
            tenant: &str,
            batch: &CommitBatch,
        ) -> Result<CommitOutcome, StoreError> {
            let mut outcome = CommitOutcome {
                attempts: vec![AttemptResult::Inserted; batch.attempts.len()],
                ..Default::default()
            };
            if batch.attempts.is_empty() && batch.vehicles.is_empty() && batch.archetypes.is_empty()
            {
                return Ok(outcome);
            }
            // Rows are written in key order so that two batches over the same rows lock them
            // in the same order (no deadlock between PostgreSQL transactions).
            let mut order: Vec<usize> = (0..batch.attempts.len()).collect();
            order.sort_by(|&i, &j| batch.attempts[i].key.cmp(&batch.attempts[j].key));
            let mut tx = begin(pool).await?;
            for i in order {
                outcome.attempts[i] = insert_attempt(&mut tx, tenant, &batch.attempts[i]).await?;
            }
            for (kind, writes, versions) in [
                (
                    CalibrationKind::Vehicle,
                    &batch.vehicles,
                    &mut outcome.vehicle_versions,
                ),
                (
                    CalibrationKind::Archetype,
                    &batch.archetypes,
                    &mut outcome.archetype_versions,
                ),
            ] {
                let mut sorted: Vec<&CalibrationWrite> = writes.iter().collect();
                sorted.sort_by(|a, b| a.id.cmp(&b.id));
                for w in sorted {
                    let version = write_calibration(&mut tx, tenant, kind, w).await?;
                    versions.insert(w.id.clone(), version);
                }
            }
            tx.commit().await?;
            Ok(outcome)
        }

        pub(super) async fn record_cooldown(
            pool: &Pool,
            tenant: &str,
            fit: &StoredCooldownFit,
            vehicle: &CalibrationWrite,
        ) -> Result<CooldownRecorded, StoreError> {
            let mut tx = begin(pool).await?;
            let inserted = sqlx::query(
                "INSERT INTO cooldown_fits (tenant_id, vehicle_id, keyed_off_at_ms, \
                 time_constant_s, readings, recorded_at_ms) VALUES ($1, $2, $3, $4, $5, $6) \
                 ON CONFLICT (tenant_id, vehicle_id, keyed_off_at_ms) DO NOTHING",
            )
            .bind(tenant)
            .bind(&fit.vehicle_id)
            .bind(fit.keyed_off_at_ms)
            .bind(fit.time_constant_s)
            .bind(i64::from(fit.readings))
            .bind(fit.recorded_at_ms)
            .execute(&mut *tx)
            .await?
            .rows_affected();
            if inserted != 1 {
                // Rolled back on drop: a replayed cool-down changes nothing.
                return Ok(CooldownRecorded::Duplicate);
            }
            let vehicle_version =
                write_calibration(&mut tx, tenant, CalibrationKind::Vehicle, vehicle).await?;
            tx.commit().await?;
            Ok(CooldownRecorded::Inserted { vehicle_version })
        }

        pub(super) async fn recent_cooldown_fits(
            pool: &Pool,
            tenant: &str,
            vehicle_id: &str,
            limit: usize,
        ) -> Result<Vec<StoredCooldownFit>, StoreError> {
            let rows = sqlx::query(
                "SELECT vehicle_id, keyed_off_at_ms, time_constant_s, readings, recorded_at_ms \
                 FROM cooldown_fits WHERE tenant_id = $1 AND vehicle_id = $2 \
                 ORDER BY keyed_off_at_ms DESC LIMIT $3",
            )
            .bind(tenant)
            .bind(vehicle_id)
            .bind(limit as i64)
            .fetch_all(pool)
            .await?;
            let mut fits = Vec::with_capacity(rows.len());
            for row in &rows {
                let readings: i64 = row.try_get("readings")?;
                fits.push(StoredCooldownFit {
                    vehicle_id: row.try_get("vehicle_id")?,
                    keyed_off_at_ms: row.try_get("keyed_off_at_ms")?,
                    time_constant_s: row.try_get("time_constant_s")?,
                    readings: u32::try_from(readings).map_err(|_| internal("reading count"))?,
                    recorded_at_ms: row.try_get("recorded_at_ms")?,
                });
            }
            Ok(fits)
        }

        pub(super) async fn recent_attempts(
            pool: &Pool,
            tenant: &str,
            vehicle_id: &str,
            limit: usize,
        ) -> Result<Vec<StoredAttempt>, StoreError> {
            let sql = format!(
                "SELECT {ATTEMPT_COLUMNS} FROM start_attempts \
                 WHERE tenant_id = $1 AND vehicle_id = $2 \
                 ORDER BY attempted_at_ms DESC LIMIT $3"
            );
            let rows = sqlx::query(&sql)
                .bind(tenant)
                .bind(vehicle_id)
                .bind(limit as i64)
                .fetch_all(pool)
                .await?;
            rows.iter().map(attempt_of).collect()
        }

        pub(super) async fn fleet_attempts(
            pool: &Pool,
            tenant: &str,
            since_ms: i64,
            limit: usize,
        ) -> Result<Vec<StoredAttempt>, StoreError> {
            let sql = format!(
                "SELECT {ATTEMPT_COLUMNS} FROM start_attempts \
                 WHERE tenant_id = $1 AND attempted_at_ms >= $2 \
                 ORDER BY attempted_at_ms DESC, vehicle_id LIMIT $3"
            );
            let rows = sqlx::query(&sql)
                .bind(tenant)
                .bind(since_ms)
                .bind(limit as i64)
                .fetch_all(pool)
                .await?;
            rows.iter().map(attempt_of).collect()
        }
    };
}

pub(crate) use store_ops;
