//! WatchFleet, the pre-dawn feed: a bidirectional stream that keeps per-stream state (vehicles by
//! id, zone forecasts shared by their vehicles, last telemetry, departures), re-scores only the
//! vehicles each update affects on the compute pool (a zone forecast re-scores its vehicles in
//! parallel parts), and sends alerts (raised and cleared with hysteresis, deterministic ids) and
//! outlook changes (coalesced per vehicle for a slow reader). A refused update gets its own
//! `RefusedUpdate` and never ends the stream. No physics here: scoring is [`convert::decide`].
//!
//! Bounds: at most `watch_max_vehicles_per_stream` vehicles, `watch_max_updates_per_s` updates
//! per second (faster input is read more slowly), and the input is not read while more than two
//! unread alerts per vehicle wait (see [`outbox`]), so a slow reader cannot grow memory without
//! bound and no alert is ever dropped.

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
use tokio::sync::oneshot;
use tokio::time::Instant;
use tokio_stream::Stream;
use tokio_util::sync::CancellationToken;
use tonic::{Request, Status};
use tracing::{Instrument, debug, info, info_span};

use crate::codec::Inbound;
use crate::convert::{self, MAX_ID_LEN, ZoneForecasts};
use crate::error::{ApiError, FieldViolation, to_rpc_status};
use crate::metrics;
use crate::tenant::{Tenant, tenant_of};

use self::outbox::{Outbox, Reader};
use self::vehicle::{Score, Vehicle, apply_score, clear_all};

pub use self::settings::WatchSettings;
pub use self::vehicle::{FIT_FROM_READINGS, HEATER_RISE_K, RING_LEN, alert_id, alert_id_hex};

/// Work for a compute thread; it must catch its own panics.
pub type Job = Box<dyn FnOnce() + Send + 'static>;
/// Queues a job on the server's compute pool.
pub type Submit = Arc<dyn Fn(Job) -> Result<(), ApiError> + Send + Sync>;
/// The events of a WatchFleet stream.
pub type WatchResponses =
    Pin<Box<dyn Stream<Item = Result<pb::WatchFleetResponse, Status>> + Send>>;

/// Alert kinds a vehicle can hold at once.
const KINDS: usize = 2;
/// Tag of `WatchFleetRequest.sequence`, read from an undecodable update to name it.
const SEQUENCE_TAG: u32 = 6;
/// Fewest vehicles per part of a parallel re-score.
const MIN_PART: usize = 16;

/// Message of the status that ends a watch stream when the server shuts down.
pub const DRAINING_MESSAGE: &str = "server is draining";

/// Starts a WatchFleet stream: its state lives in a task that reads the input; the returned
/// stream carries the events.
pub fn start(
    request: Request<Inbound<pb::WatchFleetRequest>>,
    submit: Submit,
    settings: WatchSettings,
    draining: CancellationToken,
) -> WatchResponses {
    let tenant = tenant_of(&request);
    let inbound = request.into_inner();
    let outbox = Arc::new(Outbox::default());
    let span = info_span!("watch_fleet", tenant = tenant.as_str());
    let stream = WatchStream {
        tenant,
        submit,
        settings,
        vehicles: HashMap::new(),
        zones: Arc::new(HashMap::new()),
        now_s: None,
        outbox: Arc::clone(&outbox),
    };
    tokio::spawn(stream.run(inbound, draining).instrument(span));
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
    submit: Submit,
    settings: WatchSettings,
    vehicles: HashMap<Box<str>, Vehicle>,
    /// Zone forecasts; copy-on-write, so parts computing keep the ones they started with.
    zones: Arc<ZoneForecasts>,
    /// Stream time: the latest telemetry time seen (UTC seconds); act-by alerts follow it.
    now_s: Option<i64>,
    outbox: Arc<Outbox>,
}

/// The vehicle an update changed directly, with its state before (None when new), restored if
/// the update is refused.
type Undo = Option<(Box<str>, Option<Vehicle>)>;
/// An applied update: the vehicles to re-score, and how to undo it.
type Applied = (Vec<Box<str>>, Undo);
/// A refused update: the vehicle concerned (may be empty) and why.
type Refusal = (String, ApiError);

impl WatchStream {
    async fn run(
        mut self,
        mut inbound: Inbound<pb::WatchFleetRequest>,
        draining: CancellationToken,
    ) {
        let mut bucket = Bucket::new(self.settings.max_updates_per_s);
        let mut updates: u64 = 0;
        let status = loop {
            // Read no more input while the reader is behind on alerts: bounded, and none dropped.
            let limit = self.vehicles.len().max(1) * KINDS;
            tokio::select! {
                biased;
                () = draining.cancelled() => break Some(draining_status()),
                open = self.outbox.wait_below(limit) => if !open { break None },
            }
            if let Some(wait) = bucket.take() {
                tokio::select! {
                    biased;
                    () = draining.cancelled() => break Some(draining_status()),
                    () = tokio::time::sleep(wait) => {}
                }
            }
            let message = tokio::select! {
                biased;
                () = draining.cancelled() => break Some(draining_status()),
                m = inbound.message() => m,
            };
            match message {
                Ok(Some(Ok(request))) => {
                    updates += 1;
                    self.handle(request).await;
                }
                Ok(Some(Err(bad))) => {
                    // Undecodable or over-size: refused under the sequence it carries, if readable.
                    updates += 1;
                    let seq = bad.varint_field(SEQUENCE_TAG).unwrap_or_default();
                    self.refuse(seq, String::new(), bad.error, Vec::new());
                }
                Ok(None) => break None,
                Err(status) => break Some(status),
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

    /// Applies one update, re-scores what it affects and queues the events.
    async fn handle(&mut self, request: pb::WatchFleetRequest) {
        let seq = request.sequence;
        let mut events = Vec::new();
        let (path, affected, undo) = match request.update {
            Some(Update::Vehicle(w)) => match self.upsert(w, &mut events) {
                Ok((ids, undo)) => ("vehicle", ids, undo),
                Err((id, e)) => return self.refuse(seq, id, e, events),
            },
            Some(Update::Telemetry(t)) => match self.telemetry(t) {
                Ok((ids, undo)) => ("telemetry", ids, undo),
                Err((id, e)) => return self.refuse(seq, id, e, events),
            },
            Some(Update::ZoneForecast(z)) => match self.zone(z) {
                Ok(ids) => ("zone_forecast", ids, None),
                Err(e) => return self.refuse(seq, String::new(), e, events),
            },
            Some(Update::Departure(d)) => match self.departure(d, &mut events) {
                Ok((ids, undo)) => ("departure", ids, undo),
                Err((id, e)) => return self.refuse(seq, id, e, events),
            },
            Some(Update::Removal(r)) => {
                self.remove(&r.vehicle_id, &mut events);
                ("removal", Vec::new(), None)
            }
            None => {
                let e = ApiError::field(
                    "update",
                    "one of vehicle, telemetry, zone_forecast, departure or removal is required",
                );
                return self.refuse(seq, String::new(), e, events);
            }
        };
        self.score(seq, path, affected, undo, &mut events).await;
        self.outbox.push(events);
    }

    fn refuse(&self, seq: u64, vehicle_id: String, e: ApiError, mut events: Vec<Event>) {
        debug!(seq, vehicle_id, code = ?e.code(), "update refused");
        events.push(Event::Refused(pb::RefusedUpdate {
            sequence: seq,
            vehicle_id,
            error: Some(to_rpc_status(e)),
        }));
        self.outbox.push(events);
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
            Some(v) if v.vehicle_id.len() > MAX_ID_LEN => violation(
                "vehicle.vehicle.vehicle_id",
                format!("longer than {MAX_ID_LEN} bytes"),
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
                format!("longer than {MAX_ID_LEN} bytes"),
            );
        }
        if let Err(e) = check_time(w.departure_time.as_ref()) {
            violation("vehicle.departure_time", e.to_string());
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
        let Some(v) = self.vehicles.get_mut(t.vehicle_id.as_str()) else {
            return Err((
                id,
                ApiError::field(
                    "telemetry.vehicle_id",
                    "no such vehicle on this stream: send the vehicle first",
                ),
            ));
        };
        let at_s = match t.telemetry.as_ref() {
            None => return Err((id, ApiError::field("telemetry.telemetry", "is required"))),
            Some(tel) => match check_time(tel.observed_at.as_ref()) {
                Ok(s) => s,
                Err(e) => return Err((id, ApiError::field("telemetry.telemetry.observed_at", e))),
            },
        };
        let key: Box<str> = id.as_str().into();
        let before = v.clone();
        v.observe(&t, at_s);
        let mut ids = vec![key.clone()];
        if self.now_s.is_none_or(|now| at_s > now) {
            self.now_s = Some(at_s);
            // Time moved on: vehicles whose act-by alert is now due are affected too.
            let mut due: Vec<Box<str>> = self
                .vehicles
                .iter()
                .filter(|(k, v)| {
                    **k != key && v.act_alert.is_none() && v.act_due_s.is_some_and(|d| d <= at_s)
                })
                .map(|(k, _)| k.clone())
                .collect();
            due.sort();
            ids.extend(due);
        }
        Ok((ids, Some((key, Some(before)))))
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

    /// Re-scores `ids` on the compute pool (in parallel parts) and turns the scores into events.
    async fn score(
        &mut self,
        seq: u64,
        path: &'static str,
        ids: Vec<Box<str>>,
        mut undo: Undo,
        events: &mut Vec<Event>,
    ) {
        let mut nights = Vec::with_capacity(ids.len());
        for id in ids {
            let Some(v) = self.vehicles.get(&id) else {
                continue;
            };
            if !self.zones.contains_key(&*v.zone) {
                // Scored when its zone forecast arrives.
                continue;
            }
            match v.night() {
                Ok(night) => nights.push((id, night)),
                Err(e) => debug!(%e, "stored profile does not decode"),
            }
        }
        if nights.is_empty() {
            return;
        }
        let parts = self
            .settings
            .threads
            .max(1)
            .min(nights.len().div_ceil(MIN_PART))
            .max(1);
        let per_part = nights.len().div_ceil(parts);
        let mut waiting = Vec::with_capacity(parts);
        let mut rest = nights;
        while !rest.is_empty() {
            let part: Vec<_> = rest.drain(..per_part.min(rest.len())).collect();
            let (tx, rx) = oneshot::channel();
            let zones = Arc::clone(&self.zones);
            let policy = self.settings.policy;
            let ids: Vec<Box<str>> = part.iter().map(|(id, _)| id.clone()).collect();
            let job: Job = Box::new(move || {
                let out: Vec<(Box<str>, Result<Score, ApiError>)> = part
                    .into_iter()
                    .map(|(id, night)| {
                        let scored = catch_unwind(AssertUnwindSafe(|| {
                            convert::decide(&night, path, &zones, &policy)
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
                        (id, scored)
                    })
                    .collect();
                let _ = tx.send(out);
            });
            match (self.submit)(job) {
                Ok(()) => waiting.push((ids, Some(rx))),
                Err(_) => waiting.push((ids, None)),
            }
        }
        for (ids, rx) in waiting {
            let results = match rx {
                Some(rx) => rx.await.unwrap_or_default(),
                None => Vec::new(),
            };
            if results.is_empty() {
                for id in ids {
                    let e = ApiError::Unavailable("compute pool unavailable".to_string());
                    events.push(refused(seq, &id, e));
                }
                continue;
            }
            for (id, result) in results {
                match result {
                    Ok(score) => {
                        let Some(v) = self.vehicles.get_mut(&id) else {
                            continue;
                        };
                        let mut alerts = Vec::new();
                        let change =
                            apply_score(&id, v, score, self.now_s, &self.settings, &mut alerts);
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
                        events.push(refused(seq, &id, e));
                    }
                }
            }
        }
    }
}

/// Queues cleared alerts as events, counting them.
fn push_cleared(events: &mut Vec<Event>, alerts: Vec<pb::Alert>) {
    for a in alerts {
        metrics::alert_cleared();
        events.push(Event::Alert(a));
    }
}

fn refused(seq: u64, vehicle_id: &str, e: ApiError) -> Event {
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
