//! Learning from the fleet's own mornings: observed start attempts are validated, recorded
//! durably and idempotently (per vehicle and attempt time) in the store, and learned from by the
//! model's Bayesian update ([`startmargin_model::learning`]); assessments then use each vehicle's
//! calibration from the in-memory [`book::CalibrationBook`]. No physics here: prediction and
//! update are the model's pure functions, run on the compute pool.
//!
//! Order and concurrency: a batch's attempts are learned per vehicle in time order. A tenant's
//! reports are learned one batch at a time on a replica (a per-tenant lock); between replicas the
//! store's version check makes a batch that raced another one reload and learn again.
//!
//! Flood bound: each tenant may report at most `learning.max_attempts_per_minute_per_tenant`
//! attempts a minute (a token bucket). A unary report beyond it is refused with
//! RESOURCE_EXHAUSTED; a stream waits (it stops reading) until the bucket refills.

pub mod book;
mod cooldown;
pub mod ingest;
pub mod reliability;
pub mod settings;
mod storage;

use std::collections::{HashMap, HashSet};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use startmargin_model::learning::VehicleCalibration;
use startmargin_proto::v1 as pb;
use tokio::sync::Mutex as AsyncMutex;

use crate::api::pool::{ComputePool, Lane};
use crate::convert::attempts::{ConvertedAttempt, attempt_from_pb};
use crate::convert::timestamp;
use crate::error::{ApiError, to_rpc_status};
use crate::store::Store;

use self::book::{CalibrationBook, Looked};
use self::ingest::{Learned, States};

use self::storage::StoredRecord;
pub use cooldown::{CooldownLearned, FittedCooldown};

/// Most attempts in one ReportStartAttempts call.
pub const MAX_ATTEMPTS_PER_REPORT: usize = 1000;
/// Attempts learned together from a StreamStartAttempts stream.
pub const STREAM_BATCH: usize = 256;
/// Refusals a StreamStartAttempts summary lists.
pub const MAX_LISTED_REFUSALS: usize = 100;
/// Cool-down fits a GetVehicleCalibration lists (the newest).
pub const RECENT_COOLDOWN_FITS: usize = 10;
/// Most attempts a fleet reliability read-out scores (the newest ones).
pub const MAX_SCORED_ATTEMPTS: u32 = crate::store::MAX_FLEET_ATTEMPTS as u32;

/// Limits of the learning RPCs, from the configuration.
#[derive(Debug, Clone, Copy)]
pub struct LearningLimits {
    /// Attempts a tenant may report per minute.
    pub max_attempts_per_minute_per_tenant: u32,
    /// How long a tenant's in-memory calibrations are trusted before reloading from the store.
    pub book_refresh: Duration,
}

/// A tenant's token bucket and its learning lock.
#[derive(Debug)]
struct TenantGate {
    tokens: f64,
    refilled_at: Instant,
    learning: Arc<AsyncMutex<()>>,
}

/// The learning side of the service.
#[derive(Debug)]
pub struct Learning {
    store: Store,
    book: CalibrationBook,
    pool: Arc<ComputePool>,
    limits: LearningLimits,
    gates: Mutex<HashMap<String, TenantGate>>,
}

/// What one report batch did, per attempt (in the order given).
pub type BatchResults = Vec<pb::AttemptResult>;

impl Learning {
    /// The learning side on `store`, learning on `pool`.
    pub fn new(store: Store, pool: Arc<ComputePool>, limits: LearningLimits) -> Self {
        Self {
            store,
            book: CalibrationBook::new(limits.book_refresh),
            pool,
            limits,
            gates: Mutex::new(HashMap::new()),
        }
    }

    /// Loads `tenant`'s calibrations into the book when they are missing or stale.
    pub async fn ensure_loaded(&self, tenant: &str) -> Result<(), ApiError> {
        if self.book.needs_load(tenant) {
            let states = storage::load_states(&self.store, tenant).await?;
            self.book.install(tenant, states);
        }
        Ok(())
    }

    /// The calibration to assess a vehicle with (after [`Self::ensure_loaded`]).
    pub fn lookup(&self, tenant: &str, vehicle_id: &str, archetype_id: &str) -> Option<Looked> {
        self.book.lookup(tenant, vehicle_id, archetype_id)
    }

    /// Takes `n` attempts from `tenant`'s bucket, or says how long until they are there.
    fn take_tokens(&self, tenant: &str, n: usize) -> Result<(), Duration> {
        let per_minute = f64::from(self.limits.max_attempts_per_minute_per_tenant);
        let mut gates = self.gates.lock().unwrap_or_else(|e| e.into_inner());
        let gate = gates
            .entry(tenant.to_string())
            .or_insert_with(|| TenantGate {
                tokens: per_minute,
                refilled_at: Instant::now(),
                learning: Arc::new(AsyncMutex::new(())),
            });
        let now = Instant::now();
        gate.tokens = (gate.tokens
            + now.duration_since(gate.refilled_at).as_secs_f64() * per_minute / 60.0)
            .min(per_minute);
        gate.refilled_at = now;
        let n = n as f64;
        if gate.tokens >= n {
            gate.tokens -= n;
            Ok(())
        } else {
            Err(Duration::from_secs_f64(
                (n - gate.tokens) * 60.0 / per_minute,
            ))
        }
    }

    fn learning_lock(&self, tenant: &str) -> Arc<AsyncMutex<()>> {
        let gates = self.gates.lock().unwrap_or_else(|e| e.into_inner());
        gates
            .get(tenant)
            .map(|g| Arc::clone(&g.learning))
            .unwrap_or_default()
    }

    /// ReportStartAttempts: refuses the whole call when it exceeds the tenant's rate.
    pub async fn report(
        &self,
        tenant: &str,
        attempts: &[pb::StartAttempt],
    ) -> Result<BatchResults, ApiError> {
        if attempts.is_empty() {
            return Err(ApiError::field(
                "attempts",
                "must hold at least one attempt",
            ));
        }
        if attempts.len() > MAX_ATTEMPTS_PER_REPORT {
            return Err(ApiError::field(
                "attempts",
                format!(
                    "holds {} attempts, more than {MAX_ATTEMPTS_PER_REPORT} per call (use StreamStartAttempts)",
                    attempts.len()
                ),
            ));
        }
        if let Err(wait) = self.take_tokens(tenant, attempts.len()) {
            return Err(ApiError::ResourceExhausted(format!(
                "this tenant reports more than {} attempts a minute; retry in {:.1} s",
                self.limits.max_attempts_per_minute_per_tenant,
                wait.as_secs_f64()
            )));
        }
        self.learn_batch(tenant, attempts, 0, |i| format!("attempts[{i}]"))
            .await
    }

    /// One batch of a StreamStartAttempts stream, starting at stream index `offset`; waits for
    /// the tenant's bucket instead of refusing.
    pub async fn report_streamed(
        &self,
        tenant: &str,
        attempts: &[pb::StartAttempt],
        offset: usize,
    ) -> Result<BatchResults, ApiError> {
        while let Err(wait) = self.take_tokens(tenant, attempts.len()) {
            tokio::time::sleep(wait.min(Duration::from_secs(5))).await;
        }
        self.learn_batch(tenant, attempts, offset, |_| "attempt".to_string())
            .await
    }

    /// Validates, deduplicates, learns and commits one batch; `path_of(i)` names attempt `i`'s
    /// field path in the request.
    async fn learn_batch(
        &self,
        tenant: &str,
        attempts: &[pb::StartAttempt],
        offset: usize,
        path_of: impl Fn(usize) -> String,
    ) -> Result<BatchResults, ApiError> {
        let now_s = SystemTime::now()
            .duration_since(UNIX_EPOCH)
            .map_or(0.0, |d| d.as_secs_f64());
        let mut results: Vec<Option<pb::AttemptResult>> = vec![None; attempts.len()];
        let index = |i: usize| (offset + i) as u32;

        // Validate and convert (cheap: no model run yet).
        let mut valid: Vec<(usize, ConvertedAttempt)> = Vec::with_capacity(attempts.len());
        for (i, a) in attempts.iter().enumerate() {
            match attempt_from_pb(a, &path_of(i), now_s) {
                Ok(c) => valid.push((i, c)),
                Err(e) => results[i] = Some(refused(index(i), e)),
            }
        }

        let lock = self.learning_lock(tenant);
        let _learning = lock.lock().await;
        // The same attempt twice in one batch counts once.
        let mut seen = HashSet::new();
        let mut repeats = Vec::new();
        valid.retain(|(i, c)| {
            let fresh = seen.insert(storage::key_of(c));
            if !fresh {
                repeats.push(*i);
            }
            fresh
        });
        valid.sort_by(|(_, a), (_, b)| {
            (a.vehicle_id.as_str(), a.attempted_at_s)
                .partial_cmp(&(b.vehicle_id.as_str(), b.attempted_at_s))
                .unwrap_or(std::cmp::Ordering::Equal)
        });

        let mut tries = 0;
        let committed = loop {
            tries += 1;
            let keys: Vec<_> = valid.iter().map(|(_, c)| storage::key_of(c)).collect();
            let known = storage::known(&self.store, tenant, &keys).await?;
            let loaded =
                storage::load_for(&self.store, tenant, valid.iter().map(|(_, c)| c)).await?;
            let new: Vec<(usize, ConvertedAttempt)> = valid
                .iter()
                .filter(|(_, c)| !known.contains(&storage::key_of(c)))
                .cloned()
                .collect();
            let duplicates: Vec<usize> = valid
                .iter()
                .filter(|(_, c)| known.contains(&storage::key_of(c)))
                .map(|(i, _)| *i)
                .collect();
            let mut states = loaded.states.clone();
            let to_learn = new.clone();
            let paths: Vec<String> = new.iter().map(|(i, _)| path_of(*i)).collect();
            let learned = self
                .pool
                .run(Lane::Unary, move || {
                    let refs: Vec<&ConvertedAttempt> = to_learn.iter().map(|(_, c)| c).collect();
                    let out = ingest::learn(&refs, &paths, &mut states);
                    Ok((out, states))
                })
                .await?;
            let (learned, states) = learned;
            match storage::commit(&self.store, tenant, &new, &learned, &states, &loaded).await {
                Ok(()) => break (new, learned, states, duplicates),
                Err(storage::CommitError::Concurrent) if tries < 3 => continue,
                Err(storage::CommitError::Concurrent) => {
                    return Err(ApiError::Aborted(
                        "another replica updated these vehicles at the same time; retry".into(),
                    ));
                }
                Err(storage::CommitError::Store(e)) => return Err(e),
            }
        };
        let (new, learned, states, duplicates) = committed;
        let mut updated = States::default();
        for (c, l) in new.iter().map(|(_, c)| c).zip(&learned) {
            if l.is_ok() {
                updated.vehicles.insert(
                    c.vehicle_id.clone(),
                    states.prior_of(&c.vehicle_id, &c.archetype_id),
                );
                if let Some(p) = states.pools.get(&c.archetype_id) {
                    updated.pools.insert(c.archetype_id.clone(), *p);
                }
            }
        }
        self.book.apply(tenant, &updated);

        for ((i, c), l) in new.iter().zip(learned) {
            results[*i] = Some(match l {
                Ok(l) => recorded(index(*i), c, &l, false),
                Err(e) => refused(index(*i), e),
            });
        }
        for i in duplicates.into_iter().chain(repeats) {
            let c = &attempts[i];
            let vehicle_id = c.vehicle.as_ref().map_or("", |v| v.vehicle_id.as_str());
            let archetype = c
                .vehicle
                .as_ref()
                .and_then(|v| v.engine.as_ref())
                .map_or("", |e| e.archetype_id.as_str());
            let current = self
                .book
                .lookup(tenant, vehicle_id, archetype)
                .map_or_else(VehicleCalibration::uncalibrated, |l| l.calibration);
            results[i] = Some(pb::AttemptResult {
                index: index(i),
                outcome: Some(pb::attempt_result::Outcome::Recorded(pb::RecordedAttempt {
                    vehicle_id: vehicle_id.to_string(),
                    attempted_at: c.attempted_at,
                    duplicate: true,
                    calibration: Some(calibration_to_pb(&current, 0, None)),
                    ..Default::default()
                })),
            });
        }
        Ok(results
            .into_iter()
            .enumerate()
            .map(|(i, r)| {
                r.unwrap_or_else(|| {
                    refused(
                        index(i),
                        ApiError::Internal("an attempt was left without a result".into()),
                    )
                })
            })
            .collect())
    }

    /// GetVehicleCalibration.
    pub async fn vehicle_calibration(
        &self,
        tenant: &str,
        request: &pb::GetVehicleCalibrationRequest,
    ) -> Result<pb::GetVehicleCalibrationResponse, ApiError> {
        crate::convert::check_id("vehicle_id", &request.vehicle_id, true)?;
        let limit = match request.attempt_limit {
            0 => 10,
            n if n <= 100 => n,
            n => {
                return Err(ApiError::field(
                    "attempt_limit",
                    format!("{n} is more than 100"),
                ));
            }
        };
        self.ensure_loaded(tenant).await?;
        let recent = storage::recent(&self.store, tenant, &request.vehicle_id, limit).await?;
        let archetype = recent.first().map_or("", |r| r.archetype_id.as_str());
        let fits = self
            .store
            .recent_cooldown_fits(tenant, &request.vehicle_id, RECENT_COOLDOWN_FITS)
            .await?;
        let states = self.book.states(tenant);
        let calibration = states.prior_of(&request.vehicle_id, archetype);
        let pooled = states.pools.get(archetype).map_or(0, |p| p.observations);
        let updated_at = recent
            .first()
            .map(|r| r.received_at_s)
            .into_iter()
            .chain(fits.first().map(|f| f.recorded_at_ms as f64 / 1000.0))
            .reduce(f64::max);
        Ok(pb::GetVehicleCalibrationResponse {
            vehicle_id: request.vehicle_id.clone(),
            calibration: Some(calibration_to_pb(&calibration, pooled, updated_at)),
            attempts: recent.iter().map(StoredRecord::to_pb).collect(),
            cooldown_fits: fits
                .iter()
                .map(|f| pb::CooldownFit {
                    keyed_off_at: Some(timestamp(f.keyed_off_at_ms as f64 / 1000.0)),
                    time_constant_h: f.time_constant_s / 3600.0,
                    readings: f.readings,
                })
                .collect(),
        })
    }

    /// GetFleetReliability.
    pub async fn fleet_reliability(
        &self,
        tenant: &str,
        request: &pb::GetFleetReliabilityRequest,
    ) -> Result<pb::GetFleetReliabilityResponse, ApiError> {
        let bins = match request.bin_count {
            0 => 10,
            n @ 2..=20 => n as usize,
            n => {
                return Err(ApiError::field(
                    "bin_count",
                    format!("{n} is outside 2 to 20"),
                ));
            }
        };
        let since_s = match request.since.as_ref() {
            None => 0.0,
            Some(t) if (0..1_000_000_000).contains(&t.nanos) && t.seconds >= 0 => {
                t.seconds as f64 + f64::from(t.nanos) * 1e-9
            }
            Some(_) => {
                return Err(ApiError::field(
                    "since",
                    "must be a UTC time after 1970 with nanos in 0..1e9",
                ));
            }
        };
        let records = storage::fleet(&self.store, tenant, since_s, MAX_SCORED_ATTEMPTS).await?;
        let scored = |calibrated: bool| -> Vec<reliability::Scored> {
            records
                .iter()
                .map(|r| reliability::Scored {
                    probability: if calibrated {
                        r.predicted_p
                    } else {
                        r.uncalibrated_p
                    },
                    failed: r.failed(),
                })
                .collect()
        };
        let no_start_count = records.iter().filter(|r| r.failed()).count() as u64;
        Ok(pb::GetFleetReliabilityResponse {
            attempt_count: records.len() as u64,
            no_start_count,
            calibrated: Some(score_to_pb(&reliability::score(&scored(true), bins))),
            uncalibrated: Some(score_to_pb(&reliability::score(&scored(false), bins))),
        })
    }
}

fn refused(index: u32, e: ApiError) -> pb::AttemptResult {
    pb::AttemptResult {
        index,
        outcome: Some(pb::attempt_result::Outcome::Error(to_rpc_status(e))),
    }
}

fn recorded(index: u32, c: &ConvertedAttempt, l: &Learned, duplicate: bool) -> pb::AttemptResult {
    pb::AttemptResult {
        index,
        outcome: Some(pb::attempt_result::Outcome::Recorded(pb::RecordedAttempt {
            vehicle_id: c.vehicle_id.clone(),
            attempted_at: Some(timestamp(c.attempted_at_s)),
            duplicate,
            predicted_no_start_pct: l.predicted_p * 100.0,
            uncalibrated_no_start_pct: l.uncalibrated_p * 100.0,
            calibration: Some(calibration_to_pb(
                &l.posterior,
                l.pool_after.observations,
                None,
            )),
        })),
    }
}

/// A model calibration as the API message.
pub fn calibration_to_pb(
    c: &VehicleCalibration,
    pooled_observations: u32,
    updated_at_s: Option<f64>,
) -> pb::VehicleCalibration {
    pb::VehicleCalibration {
        thermal_offset_k: Some(pb::FactorBelief {
            mean: c.thermal_offset_k.mean,
            sd: c.thermal_offset_k.sd,
        }),
        cranking_log_factor: Some(pb::FactorBelief {
            mean: c.cranking_log_factor.mean,
            sd: c.cranking_log_factor.sd,
        }),
        observations: c.observations,
        pooled_observations,
        updated_at: updated_at_s.map(timestamp),
        cooldown_time_constant_h: c.cooldown_time_constant_s.map(|b| pb::FactorBelief {
            mean: b.mean / 3600.0,
            sd: b.sd / 3600.0,
        }),
    }
}

fn score_to_pb(r: &reliability::Reliability) -> pb::ReliabilityScore {
    pb::ReliabilityScore {
        bins: r
            .bins
            .iter()
            .map(|b| pb::ReliabilityBin {
                from_pct: b.from * 100.0,
                to_pct: b.to * 100.0,
                attempt_count: b.count,
                mean_predicted_pct: b.mean_predicted * 100.0,
                observed_no_start_pct: b.observed_rate * 100.0,
            })
            .collect(),
        brier_score: r.brier_score,
        log_loss: r.log_loss,
        largest_bin_gap_pct: r.largest_bin_gap * 100.0,
    }
}
