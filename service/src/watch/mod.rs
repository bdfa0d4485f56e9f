//! WatchFleet, the pre-dawn feed: a bidirectional stream that keeps per-stream state (vehicles by
//! id, zone forecasts shared by their vehicles, last telemetry, departures), re-scores only the
//! vehicles each update affects on the stream's own lane of the compute pool (one vehicle per
//! job, at most `in_flight` jobs at once, each within the concurrency budget), and sends alerts
//! (raised and cleared with hysteresis, deterministic ids) and outlook changes (coalesced per
//! vehicle for a slow reader). A refused update gets its own `RefusedUpdate` and never ends the
//! stream. No physics here: scoring is [`convert::decide`].
//!
//! Every update is validated on its own, at the field paths of the `WatchFleetRequest` it came
//! in (a vehicle's profile when it is sent, not when its zone forecast arrives later). Each
//! vehicle keeps its own clock, its latest telemetry time: an older report is refused, and a
//! report moves the act-by alerts of its own vehicle only.
//!
//! A cool-down that ends (the next key-off, or heat going in) with a fit from at least an hour
//! of coolant readings is stored and learned into the vehicle's calibration
//! ([`crate::learning::Learning::record_cooldown`]), so that later nights start from it.
//!
//! Bounds: at most `watch_max_vehicles_per_stream` vehicles, `watch_max_updates_per_s` updates
//! per second (faster input is read more slowly); the input is not read, and a re-score submits
//! no more work, while [`MAX_QUEUED_ALERTS`] alerts or [`MAX_QUEUED_REFUSALS`] refusals wait
//! unread (see [`outbox`]), so a reader that never reads holds bounded memory and no alert is
//! dropped; a stream that sends nothing and whose reader takes nothing for
//! `streams.watch_idle_timeout_s` is ended.

mod outbox;
pub mod settings;
mod vehicle;

use std::collections::HashMap;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::pin::Pin;
use std::sync::Arc;
use std::time::Duration;

use prost_types::Timestamp;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio::sync::mpsc;
use tokio::time::Instant;
use tokio_stream::Stream;
use tokio_util::sync::CancellationToken;
use tonic::{Request, Status};
use tracing::{Instrument, debug, info, info_span, warn};

use crate::api::pool::{Budget, ComputePool, Job, Lane, QuotaGuard};
use crate::codec::Inbound;
use crate::convert::{self, MAX_ID_LEN, ZoneForecasts};
use crate::error::{ApiError, FieldViolation, to_rpc_status};
use crate::learning::{CooldownLearned, FittedCooldown};
use crate::metrics;
use crate::tenant::{Tenant, tenant_of};

use self::outbox::{Outbox, Reader};
use self::vehicle::{EndedCooldown, Score, Vehicle, apply_score, clear_all};

pub use self::settings::WatchSettings;
pub use self::vehicle::{FIT_FROM_READINGS, HEATER_RISE_K, RING_LEN, alert_id, alert_id_hex};

/// The events of a WatchFleet stream.
pub type WatchResponses =
    Pin<Box<dyn Stream<Item = Result<pb::WatchFleetResponse, Status>> + Send>>;

/// Where a watch stream runs its re-scores: its lane of the server's compute pool, the budget it
/// draws from, and its place in its tenant's stream quota (held until the stream ends).
#[derive(Debug)]
pub struct Compute {
    /// The server's compute pool.
    pub pool: Arc<ComputePool>,
    /// This stream's lane.
    pub lane: Lane,
    /// The concurrency budget of streams.
    pub budget: Arc<Budget>,
    /// The stream's place in its tenant's quota.
    pub quota: QuotaGuard,
    /// The tenant's vehicle calibrations (re-scores assess with them).
    pub learning: Arc<crate::learning::Learning>,
}

/// Most alerts that wait unread before the stream stops reading input and submitting re-scores.
pub const MAX_QUEUED_ALERTS: usize = 256;
/// Most refusals that wait unread before the stream stops reading input.
pub const MAX_QUEUED_REFUSALS: usize = 64;

/// Field path prefix of the night a watched vehicle is scored as; violations under it are
/// renamed to the paths of the update they came from (see [`request_path`]).
const NIGHT: &str = "night";

/// Tag of `WatchFleetRequest.sequence`, read from an undecodable update to name it.
const SEQUENCE_TAG: u32 = 6;

/// Message of the status that ends a watch stream when the server shuts down.
pub const DRAINING_MESSAGE: &str = "server is draining";

/// Starts a WatchFleet stream: its state lives in a task that reads the input; the returned
/// stream carries the events.
pub fn start(
    request: Request<Inbound<pb::WatchFleetRequest>>,
    compute: Compute,
    settings: WatchSettings,
    draining: CancellationToken,
) -> WatchResponses {
    let tenant = tenant_of(&request);
    let inbound = request.into_inner();
    let outbox = Arc::new(Outbox::default());
    let span = info_span!("watch_fleet", tenant = tenant.as_str());
    let stream = WatchStream {
        tenant,
        compute,
        settings,
        vehicles: HashMap::new(),
        zones: Arc::new(HashMap::new()),
        outbox: Arc::clone(&outbox),
        draining,
        idle_at: Instant::now() + settings.idle_timeout,
        taken_seen: 0,
    };
    tokio::spawn(stream.run(inbound).instrument(span));
    Box::pin(Reader(outbox))
}

/// Measures the memory one watched vehicle takes on a stream: the state of `vehicles` (each with
/// one telemetry report and a full ring of coolant readings), its table entry and key, divided by
/// their number, bytes.
pub fn bytes_per_vehicle(vehicles: &[pb::WatchedVehicle]) -> usize {
    let mut table: HashMap<Box<str>, Vehicle> = HashMap::with_capacity(vehicles.len());
    for w in vehicles {
        let Some(profile) = w.vehicle.as_ref() else {
            continue;
        };
        let mut v = Vehicle::new(w, profile);
        for i in 0..RING_LEN as i64 {
            let update = pb::TelemetryUpdate {
                vehicle_id: profile.vehicle_id.clone(),
                telemetry: Some(pb::VehicleTelemetry {
                    observed_at: Some(Timestamp {
                        seconds: 1_800_000_000 + i * 600,
                        nanos: 0,
                    }),
                    coolant_c: Some(80.0 - 3.0 * i as f64),
                    ambient_c: Some(-15.0),
                    battery_rest_v: Some(12.5),
                    ..Default::default()
                }),
                block_heater_on: None,
                key_off: i == 0,
            };
            v.observe(&update, 1_800_000_000 + i * 600);
        }
        table.insert(profile.vehicle_id.as_str().into(), v);
    }
    if table.is_empty() {
        return 0;
    }
    let entry = std::mem::size_of::<(Box<str>, Vehicle)>() + 1; // + the table's control byte
    let table_bytes = table.capacity() * entry;
    let heap: usize = table.iter().map(|(k, v)| k.len() + v.heap_bytes()).sum();
    (table_bytes + heap) / table.len()
}

/// Bytes of the per-vehicle struct alone (without its heap).
pub fn vehicle_struct_bytes() -> usize {
    std::mem::size_of::<Vehicle>()
}

/// Refills one update per `1 / rate` seconds, up to one second's worth.
#[derive(Debug)]
struct Bucket {
    rate: f64,
    tokens: f64,
    at: Instant,
}

impl Bucket {
    fn new(rate: f64) -> Self {
        Self {
            rate,
            tokens: rate.max(1.0),
            at: Instant::now(),
        }
    }

    /// Takes one update; `Some(wait)` when the caller must wait first.
    fn take(&mut self) -> Option<Duration> {
        let now = Instant::now();
        self.tokens =
            (self.tokens + (now - self.at).as_secs_f64() * self.rate).min(self.rate.max(1.0));
        self.at = now;
        if self.tokens >= 1.0 {
            self.tokens -= 1.0;
            None
        } else {
            let wait = (1.0 - self.tokens) / self.rate;
            self.tokens = 0.0;
            self.at = now + Duration::from_secs_f64(wait);
            Some(Duration::from_secs_f64(wait))
        }
    }
}

/// One WatchFleet stream's state.
struct WatchStream {
    tenant: Tenant,
    compute: Compute,
    settings: WatchSettings,
    vehicles: HashMap<Box<str>, Vehicle>,
    /// Zone forecasts; copy-on-write, so jobs computing keep the ones they started with.
    zones: Arc<ZoneForecasts>,
    outbox: Arc<Outbox>,
    draining: CancellationToken,
    /// When the stream counts as idle, unless an update comes or the reader takes an event.
    idle_at: Instant,
    /// Events the reader had taken when `idle_at` was last set.
    taken_seen: u64,
}

/// Why a stream stops: `None` ends it with OK (input closed, reader gone).
type Stop = Option<Status>;

/// The vehicle an update changed directly, with its state before (None when new), restored if
/// the update is refused.
type Undo = Option<(Box<str>, Option<Vehicle>)>;
/// An applied update: the vehicles to re-score, and how to undo it.
type Applied = (Vec<Box<str>>, Undo);
/// A refused update: the vehicle concerned (may be empty) and why.
type Refusal = (String, ApiError);

impl WatchStream {
    async fn run(mut self, mut inbound: Inbound<pb::WatchFleetRequest>) {
        let mut bucket = Bucket::new(self.settings.max_updates_per_s);
        let mut updates: u64 = 0;
        let status = loop {
            // Read no more input while the reader is behind: bounded, and no alert dropped.
            if let Err(stop) = self.wait_for_room().await {
                break stop;
            }
            if let Some(wait) = bucket.take() {
                tokio::select! {
                    biased;
                    () = self.draining.cancelled() => break Some(draining_status()),
                    () = tokio::time::sleep(wait) => {}
                }
            }
            let message = loop {
                tokio::select! {
                    biased;
                    () = self.draining.cancelled() => break Err(Some(draining_status())),
                    m = inbound.message() => break Ok(m),
                    () = tokio::time::sleep_until(self.idle_at) => {
                        if let Err(stop) = self.check_idle() {
                            break Err(stop);
                        }
                    }
                }
            };
            match message {
                Ok(Ok(Some(Ok(request)))) => {
                    updates += 1;
                    self.idle_at = Instant::now() + self.settings.idle_timeout;
                    if let Err(stop) = self.handle(request).await {
                        break stop;
                    }
                }
                Ok(Ok(Some(Err(bad)))) => {
                    // Undecodable or over-size: refused under the sequence it carries, if readable.
                    updates += 1;
                    self.idle_at = Instant::now() + self.settings.idle_timeout;
                    let seq = bad.varint_field(SEQUENCE_TAG).unwrap_or_default();
                    if let Err(stop) = self.refuse(seq, String::new(), bad.error, Vec::new()) {
                        break stop;
                    }
                }
                Ok(Ok(None)) => break None,
                Ok(Err(status)) => break Some(status),
                Err(stop) => break stop,
            }
        };
        info!(
            tenant = self.tenant.as_str(),
            updates,
            vehicles = self.vehicles.len(),
            code = ?status.as_ref().map(Status::code),
            "watch stream ended"
        );
        metrics::add_vehicles_watched(-(self.vehicles.len() as i64));
        if !self.outbox.reader_gone() {
            self.outbox.finish(status);
        }
    }

    /// `Err` when the stream has been idle (no update, no event taken) for the idle timeout;
    /// otherwise moves the idle deadline on.
    fn check_idle(&mut self) -> Result<(), Stop> {
        let taken = self.outbox.taken();
        if taken != self.taken_seen {
            self.taken_seen = taken;
            self.idle_at = Instant::now() + self.settings.idle_timeout;
            return Ok(());
        }
        Err(Some(
            ApiError::Unavailable(format!(
                "watch stream idle for {} s (no update sent, no event read); open a new stream",
                self.settings.idle_timeout.as_secs_f64()
            ))
            .into(),
        ))
    }

    /// Waits until the unread alerts and refusals are below their bounds.
    async fn wait_for_room(&mut self) -> Result<(), Stop> {
        loop {
            tokio::select! {
                biased;
                () = self.draining.cancelled() => return Err(Some(draining_status())),
                open = self.outbox.wait_below(MAX_QUEUED_ALERTS, MAX_QUEUED_REFUSALS) => {
                    return if open { Ok(()) } else { Err(None) };
                }
                () = tokio::time::sleep_until(self.idle_at) => self.check_idle()?,
            }
        }
    }

    /// Applies one update, re-scores what it affects and queues the events.
    async fn handle(&mut self, request: pb::WatchFleetRequest) -> Result<(), Stop> {
        let seq = request.sequence;
        let mut events = Vec::new();
        let (source, affected, undo) = match request.update {
            Some(Update::Vehicle(w)) => match self.upsert(w, &mut events) {
                Ok((ids, undo)) => (Source::Vehicle, ids, undo),
                Err((id, e)) => return self.refuse(seq, id, e, events),
            },
            Some(Update::Telemetry(t)) => match self.telemetry(t) {
                Ok((ids, undo)) => (Source::Telemetry, ids, undo),
                Err((id, e)) => return self.refuse(seq, id, e, events),
            },
            Some(Update::ZoneForecast(z)) => match self.zone(z) {
                Ok(ids) => (Source::ZoneForecast, ids, None),
                Err(e) => return self.refuse(seq, String::new(), e, events),
            },
            Some(Update::Departure(d)) => match self.departure(d, &mut events) {
                Ok((ids, undo)) => (Source::Departure, ids, undo),
                Err((id, e)) => return self.refuse(seq, id, e, events),
            },
            Some(Update::Removal(r)) => {
                if let Err(e) = convert::check_id("removal.vehicle_id", &r.vehicle_id, true) {
                    return self.refuse(seq, r.vehicle_id, e, events);
                }
                self.remove(&r.vehicle_id, &mut events);
                (Source::Removal, Vec::new(), None)
            }
            None => {
                let e = ApiError::field(
                    "update",
                    "one of vehicle, telemetry, zone_forecast, departure or removal is required",
                );
                return self.refuse(seq, String::new(), e, events);
            }
        };
        self.outbox.push(events);
        self.score(seq, source, affected, undo).await
    }

    /// Queues the refusal of an update (after `events`); the stream goes on.
    fn refuse(
        &self,
        seq: u64,
        vehicle_id: String,
        e: ApiError,
        mut events: Vec<Event>,
    ) -> Result<(), Stop> {
        debug!(seq, code = ?e.code(), "update refused");
        events.push(refused(seq, &vehicle_id, e));
        self.outbox.push(events);
        Ok(())
    }

    fn upsert(
        &mut self,
        w: pb::WatchedVehicle,
        events: &mut Vec<Event>,
    ) -> Result<Applied, Refusal> {
        let mut bad = Vec::new();
        let mut violation = |field: &str, description: String| {
            bad.push(FieldViolation {
                field: field.to_string(),
                description,
            })
        };
        let id = w
            .vehicle
            .as_ref()
            .map(|v| v.vehicle_id.clone())
            .unwrap_or_default();
        match w.vehicle.as_ref() {
            None => violation("vehicle.vehicle", "is required".to_string()),
            Some(v) if v.vehicle_id.is_empty() => violation(
                "vehicle.vehicle.vehicle_id",
                "must not be empty".to_string(),
            ),
            Some(_) => {}
        }
        if w.forecast_zone_id.is_empty() || w.forecast_zone_id.len() > MAX_ID_LEN {
            violation(
                "vehicle.forecast_zone_id",
                format!("must name a zone forecast of this stream (1 to {MAX_ID_LEN} bytes)"),
            );
        }
        if w.depot_id.len() > MAX_ID_LEN {
            violation(
                "vehicle.depot_id",
                format!("is {} bytes, longer than {MAX_ID_LEN}", w.depot_id.len()),
            );
        }
        if let Err(e) = check_time(w.departure_time.as_ref()) {
            violation("vehicle.departure_time", e.to_string());
        }
        if let Err(why) = crate::local_time::Zone::from_name(&w.time_zone) {
            violation("vehicle.time_zone", why);
        }
        // The whole profile now, at this update's paths: later updates must not carry its faults.
        if let Some(profile) = w.vehicle.as_ref()
            && let Err(ApiError::InvalidArgument(found)) =
                convert::check_profile(profile, "vehicle.vehicle")
        {
            for f in found {
                if !bad.iter().any(|b| b.field == f.field) {
                    bad.push(f);
                }
            }
        }
        if !bad.is_empty() {
            return Err((id, ApiError::InvalidArgument(bad)));
        }
        let Some(profile) = w.vehicle.as_ref() else {
            return Err((
                id,
                ApiError::Internal("vehicle lost after validation".into()),
            ));
        };
        let key: Box<str> = id.as_str().into();
        let before = self.vehicles.get(&key).cloned();
        let mut v = Vehicle::new(&w, profile);
        match &before {
            None => {
                if self.vehicles.len() >= self.settings.max_vehicles {
                    return Err((
                        id,
                        ApiError::ResourceExhausted(format!(
                            "this stream already watches {} vehicles (watch_max_vehicles_per_stream); \
                             open another stream for the rest",
                            self.settings.max_vehicles
                        )),
                    ));
                }
                metrics::add_vehicles_watched(1);
            }
            Some(old) => {
                // What the vehicle reported stays; alerts of another departure end.
                let mut old = old.clone();
                if old.departure != v.departure {
                    let mut cleared = Vec::new();
                    clear_all(&id, &mut old, "the departure changed", &mut cleared);
                    push_cleared(events, cleared);
                }
                v.telemetry = old.telemetry;
                v.ring = old.ring;
                v.tau_h = old.tau_h;
                v.heater_from_s = old.heater_from_s.filter(|_| v.has_heater);
                v.last = old.last;
                v.outlook_alert = old.outlook_alert;
                v.act_alert = old.act_alert;
            }
        }
        self.vehicles.insert(key.clone(), v);
        Ok((vec![key.clone()], Some((key, before))))
    }

    fn telemetry(&mut self, t: pb::TelemetryUpdate) -> Result<Applied, Refusal> {
        let id = t.vehicle_id.clone();
        convert::check_id("telemetry.vehicle_id", &id, true).map_err(|e| (id.clone(), e))?;
        let Some(v) = self.vehicles.get_mut(t.vehicle_id.as_str()) else {
            return Err((
                id,
                ApiError::field(
                    "telemetry.vehicle_id",
                    "no such vehicle on this stream: send the vehicle first",
                ),
            ));
        };
        let Some(tel) = t.telemetry.as_ref() else {
            return Err((id, ApiError::field("telemetry.telemetry", "is required")));
        };
        let observed = match check_time(tel.observed_at.as_ref()) {
            Ok(_) => tel.observed_at.unwrap_or_default(),
            Err(e) => return Err((id, ApiError::field("telemetry.telemetry.observed_at", e))),
        };
        convert::check_telemetry(tel, "telemetry.telemetry").map_err(|e| (id.clone(), e))?;
        // One clock per vehicle: a report older than the one held would undo what is known.
        if let Some(held) = v.telemetry.as_ref().and_then(|h| h.observed_at)
            && (observed.seconds, observed.nanos) <= (held.seconds, held.nanos)
        {
            let zone = crate::local_time::Zone::from_name(&v.time_zone).unwrap_or_default();
            return Err((
                id,
                ApiError::field(
                    "telemetry.telemetry.observed_at",
                    format!(
                        "{} is not newer than the report held for this vehicle ({}): \
                         send a vehicle's reports in time order",
                        zone.rfc3339(observed.seconds as f64),
                        zone.rfc3339(held.seconds as f64)
                    ),
                ),
            ));
        }
        let key: Box<str> = id.as_str().into();
        let before = v.clone();
        if let Some(ended) = v.observe(&t, observed.seconds) {
            self.learn_cooldown(&id, ended);
        }
        Ok((vec![key.clone()], Some((key, Some(before)))))
    }

    /// Stores a cool-down that ended and updates the vehicle's calibration with it, off the
    /// stream's path (a slow store never holds up alerts). Idempotent per vehicle and key-off,
    /// so a replayed or undone-and-resent update is not learned from twice.
    fn learn_cooldown(&self, vehicle_id: &str, ended: EndedCooldown) {
        let learning = Arc::clone(&self.compute.learning);
        let tenant = self.tenant.as_str().to_string();
        let fit = FittedCooldown {
            vehicle_id: vehicle_id.to_string(),
            keyed_off_at_s: ended.keyed_off_at_s,
            time_constant_s: ended.time_constant_s,
            readings: ended.readings,
        };
        tokio::spawn(
            async move {
                match learning.record_cooldown(&tenant, &fit).await {
                    Ok(CooldownLearned::Updated(belief)) => debug!(
                        vehicle_id = fit.vehicle_id,
                        tau_h = belief.mean / 3600.0,
                        sd_h = belief.sd / 3600.0,
                        "cool-down learned"
                    ),
                    Ok(CooldownLearned::Duplicate) => {
                        debug!(vehicle_id = fit.vehicle_id, "cool-down known already");
                    }
                    Err(e) => warn!(
                        vehicle_id = fit.vehicle_id,
                        error = %e,
                        "cool-down not learned"
                    ),
                }
            }
            .in_current_span(),
        );
    }

    fn zone(&mut self, z: pb::WatchZoneForecast) -> Result<Vec<Box<str>>, ApiError> {
        let zone = pb::ZoneForecast {
            zone_id: z.zone_id,
            forecast: z.forecast,
        };
        let (zone_id, series) = convert::zone_forecast_from_pb(&zone, "zone_forecast")?;
        Arc::make_mut(&mut self.zones).insert(zone_id.clone(), series);
        let mut ids: Vec<Box<str>> = self
            .vehicles
            .iter()
            .filter(|(_, v)| *v.zone == *zone_id)
            .map(|(k, _)| k.clone())
            .collect();
        ids.sort();
        debug!(zone_id, vehicles = ids.len(), "zone forecast");
        Ok(ids)
    }

    fn departure(
        &mut self,
        d: pb::DepartureChange,
        events: &mut Vec<Event>,
    ) -> Result<Applied, Refusal> {
        let id = d.vehicle_id.clone();
        convert::check_id("departure.vehicle_id", &id, true).map_err(|e| (id.clone(), e))?;
        let departure = match check_time(d.departure_time.as_ref()) {
            Ok(_) => d.departure_time.unwrap_or_default(),
            Err(e) => return Err((id, ApiError::field("departure.departure_time", e))),
        };
        let Some(v) = self.vehicles.get_mut(d.vehicle_id.as_str()) else {
            return Err((
                id,
                ApiError::field(
                    "departure.vehicle_id",
                    "no such vehicle on this stream: send the vehicle first",
                ),
            ));
        };
        let before = v.clone();
        if v.departure != departure {
            let mut cleared = Vec::new();
            clear_all(&id, v, "the departure changed", &mut cleared);
            push_cleared(events, cleared);
            v.departure = departure;
        }
        let key: Box<str> = id.as_str().into();
        Ok((vec![key.clone()], Some((key, Some(before)))))
    }

    fn remove(&mut self, vehicle_id: &str, events: &mut Vec<Event>) {
        if let Some(mut v) = self.vehicles.remove(vehicle_id) {
            let mut cleared = Vec::new();
            clear_all(
                vehicle_id,
                &mut v,
                "the vehicle is no longer watched",
                &mut cleared,
            );
            push_cleared(events, cleared);
            metrics::add_vehicles_watched(-1);
        }
    }

    /// Re-scores `ids` on the stream's lane, one vehicle per job and at most `in_flight` jobs
    /// at once, each within the concurrency budget; queues each vehicle's events as its score
    /// comes back, and submits no more while the reader is behind.
    async fn score(
        &mut self,
        seq: u64,
        source: Source,
        ids: Vec<Box<str>>,
        mut undo: Undo,
    ) -> Result<(), Stop> {
        // A vehicle without its zone forecast is scored when the forecast arrives.
        let ready: Vec<Box<str>> = ids
            .into_iter()
            .filter(|id| {
                self.vehicles
                    .get(id)
                    .is_some_and(|v| self.zones.contains_key(&*v.zone))
            })
            .collect();
        let mut waiting = ready.into_iter();
        let window = self.settings.in_flight.max(1);
        type Done = (usize, Box<str>, Result<Score, ApiError>);
        let (done_tx, mut done) = mpsc::channel::<Done>(window);
        // Scores are applied in submission order (the same input gives the same event order
        // whichever thread finishes first); at most `window` wait here.
        let mut finished: std::collections::BTreeMap<usize, (Box<str>, Result<Score, ApiError>)> =
            std::collections::BTreeMap::new();
        let (mut submitted, mut applied) = (0usize, 0usize);
        let mut more = true;
        loop {
            while more && submitted - applied < window {
                let Some(id) = waiting.next() else {
                    more = false;
                    break;
                };
                let night = match self.vehicles.get(&id).map(Vehicle::night) {
                    Some(Ok(night)) => night,
                    Some(Err(e)) => {
                        debug!(%e, "stored profile does not decode");
                        continue;
                    }
                    None => continue,
                };
                self.wait_for_room().await?;
                let permit = tokio::select! {
                    biased;
                    () = self.draining.cancelled() => return Err(Some(draining_status())),
                    p = self.compute.budget.acquire(&self.tenant) => p,
                };
                let permit = match permit {
                    Ok(p) => p,
                    Err(e) => {
                        self.outbox.push(vec![refused(seq, &id, e)]);
                        continue;
                    }
                };
                let zones = Arc::clone(&self.zones);
                let policy = self.settings.policy;
                // A calibration that cannot be refreshed now stays as it was (logged).
                if let Err(e) = self
                    .compute
                    .learning
                    .ensure_loaded(self.tenant.as_str())
                    .await
                {
                    debug!(error = %e, "calibrations not refreshed");
                }
                let calibration = self.compute.learning.lookup(
                    self.tenant.as_str(),
                    &id,
                    convert::archetype_of(&night),
                );
                let tx = done_tx.clone();
                let job_id = id.clone();
                let n = submitted;
                let job: Job = Box::new(move || {
                    let scored = catch_unwind(AssertUnwindSafe(|| {
                        convert::decide_calibrated(&night, NIGHT, &zones, &policy, calibration)
                    }))
                    .unwrap_or_else(|_| {
                        Err(ApiError::Internal("the assessment panicked".to_string()))
                    })
                    .map(|d| Score {
                        outlook: d.message.outlook,
                        no_start_pct: d.message.no_start_pct,
                        margin_k: d.message.start_margin_k,
                        explanation: d.message.explanation,
                        actions: d.message.actions,
                    });
                    drop(permit);
                    // Capacity `window` and at most `window` jobs unapplied: never full.
                    let _ = tx.try_send((n, job_id, scored));
                });
                match self.compute.pool.submit(self.compute.lane, job) {
                    Ok(()) => submitted += 1,
                    Err(e) => self.outbox.push(vec![refused(seq, &id, e)]),
                }
            }
            if submitted == applied {
                return Ok(());
            }
            let (id, result) = match finished.remove(&applied) {
                Some(next) => next,
                None => {
                    let Some((n, id, result)) = done.recv().await else {
                        return Ok(());
                    };
                    finished.insert(n, (id, result));
                    continue;
                }
            };
            applied += 1;
            let mut events = Vec::new();
            match result {
                Ok(score) => {
                    let Some(v) = self.vehicles.get_mut(&id) else {
                        continue;
                    };
                    let mut alerts = Vec::new();
                    let clock_s = v.clock_s();
                    let change = apply_score(&id, v, score, clock_s, &self.settings, &mut alerts);
                    for a in &alerts {
                        if a.state == pb::AlertState::Raised as i32 {
                            metrics::alert_raised();
                        } else {
                            metrics::alert_cleared();
                        }
                    }
                    events.extend(alerts.into_iter().map(Event::Alert));
                    events.push(Event::OutlookChange(change));
                }
                Err(e) => {
                    // The update that caused it is undone for its own vehicle.
                    if let Some((undo_id, before)) = undo.take_if(|(u, _)| *u == id) {
                        match before {
                            Some(before) => {
                                self.vehicles.insert(undo_id, before);
                            }
                            None => {
                                self.vehicles.remove(&undo_id);
                                metrics::add_vehicles_watched(-1);
                            }
                        }
                    }
                    events.push(refused(seq, &id, request_error(e, source)));
                }
            }
            self.outbox.push(events);
        }
    }
}

/// The kind of update being applied: where the parts of a scored night came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Source {
    Vehicle,
    Telemetry,
    ZoneForecast,
    Departure,
    Removal,
}

impl Source {
    /// The update's field name in `WatchFleetRequest`.
    fn field(self) -> &'static str {
        match self {
            Source::Vehicle => "vehicle",
            Source::Telemetry => "telemetry",
            Source::ZoneForecast => "zone_forecast",
            Source::Departure => "departure",
            Source::Removal => "removal",
        }
    }
}

/// The `WatchFleetRequest` path of a field of the night a watched vehicle is scored as: each
/// part of it came in its own update (the profile, zone and depot in `vehicle`, the readings in
/// `telemetry`, the forecast in `zone_forecast`, the departure in `vehicle` or `departure`).
fn request_path(night_path: &str, source: Source) -> String {
    let Some(rest) = night_path
        .strip_prefix(NIGHT)
        .and_then(|r| r.strip_prefix('.'))
    else {
        return source.field().to_string();
    };
    let (head, tail) = rest.split_once('.').unwrap_or((rest, ""));
    let join = |prefix: &str| {
        if tail.is_empty() {
            prefix.to_string()
        } else {
            format!("{prefix}.{tail}")
        }
    };
    match head {
        "vehicle" => join("vehicle.vehicle"),
        "telemetry" => join("telemetry.telemetry"),
        "forecast" => join("zone_forecast.forecast"),
        "forecast_zone_id" => "vehicle.forecast_zone_id".to_string(),
        "depot_id" => "vehicle.depot_id".to_string(),
        "departure_time" if source == Source::Departure => "departure.departure_time".to_string(),
        "departure_time" => "vehicle.departure_time".to_string(),
        // The heater plan is inferred from the reports' block_heater_on.
        "block_heater_plan" => "telemetry.block_heater_on".to_string(),
        _ => source.field().to_string(),
    }
}

/// A scoring error with its field paths renamed to the request's (see [`request_path`]).
fn request_error(e: ApiError, source: Source) -> ApiError {
    match e {
        ApiError::InvalidArgument(found) => ApiError::InvalidArgument(
            found
                .into_iter()
                .map(|f| FieldViolation {
                    field: request_path(&f.field, source),
                    description: f.description,
                })
                .collect(),
        ),
        ApiError::FailedPrecondition(m) => ApiError::FailedPrecondition(
            m.strip_prefix(NIGHT)
                .and_then(|r| r.strip_prefix(": "))
                .map_or(m.clone(), |r| format!("{}: {r}", source.field())),
        ),
        ApiError::ForecastShort {
            message,
            subject,
            covered_until_s,
            requested_s,
        } => ApiError::ForecastShort {
            message: message
                .strip_prefix(NIGHT)
                .and_then(|r| r.strip_prefix(": "))
                .map_or(message.clone(), |r| format!("{}: {r}", source.field())),
            subject: request_path(&subject, source),
            covered_until_s,
            requested_s,
        },
        other => other,
    }
}

/// Queues cleared alerts as events, counting them.
fn push_cleared(events: &mut Vec<Event>, alerts: Vec<pb::Alert>) {
    for a in alerts {
        metrics::alert_cleared();
        events.push(Event::Alert(a));
    }
}

/// A refusal; a vehicle id longer than [`MAX_ID_LEN`] is not echoed (it is the fault).
fn refused(seq: u64, vehicle_id: &str, e: ApiError) -> Event {
    let vehicle_id = if vehicle_id.len() > MAX_ID_LEN {
        ""
    } else {
        vehicle_id
    };
    Event::Refused(pb::RefusedUpdate {
        sequence: seq,
        vehicle_id: vehicle_id.to_string(),
        error: Some(to_rpc_status(e)),
    })
}

/// Checks a required UTC time (1970 to 2200); returns its seconds.
fn check_time(t: Option<&Timestamp>) -> Result<i64, &'static str> {
    match t {
        None => Err("is required"),
        Some(t)
            if (0..=7_258_118_400).contains(&t.seconds)
                && (0..1_000_000_000).contains(&t.nanos) =>
        {
            Ok(t.seconds)
        }
        Some(_) => Err("must be a UTC time between 1970 and 2200 with nanos in 0..1e9"),
    }
}

fn draining_status() -> Status {
    ApiError::Unavailable(DRAINING_MESSAGE.to_string()).into()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scored_night_paths_become_the_paths_of_the_update_they_came_in() {
        for (night, source, request) in [
            (
                "night.vehicle.battery.capacity_cca",
                Source::ZoneForecast,
                "vehicle.vehicle.battery.capacity_cca",
            ),
            (
                "night.telemetry.observed_at",
                Source::Departure,
                "telemetry.telemetry.observed_at",
            ),
            (
                "night.forecast.points[3].air_c",
                Source::Telemetry,
                "zone_forecast.forecast.points[3].air_c",
            ),
            (
                "night.departure_time",
                Source::Departure,
                "departure.departure_time",
            ),
            (
                "night.departure_time",
                Source::Vehicle,
                "vehicle.departure_time",
            ),
            (
                "night.block_heater_plan",
                Source::Telemetry,
                "telemetry.block_heater_on",
            ),
            ("night", Source::ZoneForecast, "zone_forecast"),
        ] {
            assert_eq!(request_path(night, source), request, "{night}");
        }
        let e = request_error(
            ApiError::FailedPrecondition("night: the forecast does not cover it".into()),
            Source::ZoneForecast,
        );
        assert_eq!(
            e,
            ApiError::FailedPrecondition("zone_forecast: the forecast does not cover it".into())
        );
    }
}
