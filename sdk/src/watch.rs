//! The pre-dawn feed on the client side: a [`WatchHandle`] owns one `WatchFleet` stream, sends
//! the caller's updates, keeps the last known state (vehicle profiles, telemetry since each
//! key-off, zone forecasts), and when the stream breaks reconnects with backoff and replays that
//! state; the server then re-raises the alerts that still hold with the same ids, and the handle
//! drops those it has already delivered. The caller reads a plain stream of [`WatchEvent`]s
//! (or only alerts with [`WatchHandle::next_alert`]). No physics here.
//!
//! ```no_run
//! use startmargin_sdk::{WatchBuilder, WatchEvent};
//!
//! # async fn run(vehicle: startmargin_sdk::api::WatchedVehicle, forecast: startmargin_sdk::api::Forecast) -> Result<(), startmargin_sdk::Error> {
//! let mut watch = WatchBuilder::new(["http://127.0.0.1:50051"]).start()?;
//! watch.zone_forecast("north-yard", forecast).await?;
//! watch.upsert_vehicle(vehicle).await?;
//! while let Some(alert) = watch.next_alert().await {
//!     println!("{} {}: {}", alert.alert_id, alert.vehicle_id, alert.reason);
//! }
//! # Ok(()) }
//! ```

use std::collections::{BTreeMap, HashMap};
use std::pin::Pin;
use std::task::{Context, Poll};
use std::time::Duration;

use startmargin_proto::v1 as api;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_proto::v1::watch_fleet_request::Update;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio::sync::mpsc;
use tokio_stream::Stream;
use tokio_stream::wrappers::ReceiverStream;
use tonic::transport::Endpoint;

use crate::Error;
use crate::retry::{Backoff, default_jitter_key};

/// Telemetry reports kept per vehicle for the replay (since its last key-off: the first and the
/// latest ones), enough for the server to refit the cool-down.
pub const REPLAY_TELEMETRY_PER_VEHICLE: usize = 32;

/// What a watch stream delivers.
#[derive(Debug, Clone, PartialEq)]
pub enum WatchEvent {
    /// An alert raised or cleared (each id and state once, across reconnects).
    Alert(api::Alert),
    /// A vehicle's new outlook (coalesced by the server for a slow reader).
    Outlook(api::OutlookChange),
    /// An update the server refused; the stream goes on.
    Refused {
        /// The update's sequence number (returned by the sending method).
        sequence: u64,
        /// The vehicle concerned, when known.
        vehicle_id: String,
        /// Why, with field violations for bad input.
        error: Error,
    },
    /// The stream broke and the handle is reconnecting (attempt number, 0-based).
    Reconnecting {
        /// Reconnect attempt.
        attempt: u32,
        /// Why the stream broke.
        reason: String,
    },
}

/// Builder of a [`WatchHandle`].
#[derive(Debug, Clone)]
pub struct WatchBuilder {
    endpoints: Vec<String>,
    backoff: Backoff,
    jitter_key: Option<u64>,
    max_reconnects: Option<u32>,
    connect_timeout: Duration,
}

impl WatchBuilder {
    /// A watch on these endpoints (tried in turn on reconnect).
    pub fn new(endpoints: impl IntoIterator<Item = impl Into<String>>) -> Self {
        Self {
            endpoints: endpoints.into_iter().map(Into::into).collect(),
            backoff: Backoff {
                base: Duration::from_millis(100),
                max: Duration::from_secs(5),
            },
            jitter_key: None,
            max_reconnects: None,
            connect_timeout: Duration::from_secs(5),
        }
    }

    /// Backoff between reconnect attempts.
    pub fn backoff(mut self, base: Duration, max: Duration) -> Self {
        self.backoff = Backoff { base, max };
        self
    }

    /// Key of the deterministic jitter of the backoff.
    pub fn jitter_key(mut self, key: u64) -> Self {
        self.jitter_key = Some(key);
        self
    }

    /// Gives up after this many reconnect attempts in a row (default: never).
    pub fn max_reconnects(mut self, n: u32) -> Self {
        self.max_reconnects = Some(n);
        self
    }

    /// Timeout of each connection attempt.
    pub fn connect_timeout(mut self, t: Duration) -> Self {
        self.connect_timeout = t;
        self
    }

    /// Starts the watch (connects in the background; needs a tokio runtime).
    pub fn start(self) -> Result<WatchHandle, Error> {
        if self.endpoints.is_empty() {
            return Err(Error::Transport("no endpoint given".into()));
        }
        let mut endpoints = Vec::new();
        for uri in &self.endpoints {
            let e = Endpoint::from_shared(uri.clone())
                .map_err(|e| Error::Transport(format!("endpoint {uri:?}: {e}")))?
                .connect_timeout(self.connect_timeout)
                .tcp_nodelay(true)
                .http2_keep_alive_interval(Duration::from_secs(30))
                .keep_alive_timeout(Duration::from_secs(10))
                .keep_alive_while_idle(true);
            endpoints.push(e);
        }
        let (commands, rx) = mpsc::channel(256);
        let (events_tx, events) = mpsc::channel(1024);
        let task = Task {
            endpoints,
            backoff: self.backoff,
            jitter_key: self.jitter_key.unwrap_or_else(default_jitter_key),
            max_reconnects: self.max_reconnects,
            state: State::default(),
            delivered: HashMap::new(),
            events: events_tx,
        };
        tokio::spawn(task.run(rx));
        Ok(WatchHandle {
            sender: WatchSender {
                commands: Some(commands),
                sequence: 0,
            },
            events: WatchEvents {
                events: ReceiverStream::new(events),
            },
        })
    }
}

/// A running watch: send updates, read events. Dropping it ends the stream. [`split`] it to
/// send from one task and read from another.
///
/// [`split`]: WatchHandle::split
#[derive(Debug)]
pub struct WatchHandle {
    sender: WatchSender,
    events: WatchEvents,
}

/// The sending half of a watch.
#[derive(Debug)]
pub struct WatchSender {
    commands: Option<mpsc::Sender<api::WatchFleetRequest>>,
    sequence: u64,
}

/// The receiving half of a watch: a stream of [`WatchEvent`]s.
#[derive(Debug)]
pub struct WatchEvents {
    events: ReceiverStream<WatchEvent>,
}

impl WatchSender {
    /// Sends one update; returns its sequence number.
    pub async fn send(&mut self, update: Update) -> Result<u64, Error> {
        self.sequence += 1;
        let request = api::WatchFleetRequest {
            update: Some(update),
            sequence: self.sequence,
        };
        let Some(commands) = self.commands.as_ref() else {
            return Err(Error::Unavailable("the watch is closed".into()));
        };
        commands
            .send(request)
            .await
            .map_err(|_| Error::Unavailable("the watch stopped".into()))?;
        Ok(self.sequence)
    }

    /// Adds or replaces a vehicle.
    pub async fn upsert_vehicle(&mut self, vehicle: api::WatchedVehicle) -> Result<u64, Error> {
        self.send(Update::Vehicle(vehicle)).await
    }

    /// Sends a telemetry report.
    pub async fn telemetry(&mut self, update: api::TelemetryUpdate) -> Result<u64, Error> {
        self.send(Update::Telemetry(update)).await
    }

    /// Sends a zone's forecast (replaces its earlier one).
    pub async fn zone_forecast(
        &mut self,
        zone_id: impl Into<String>,
        forecast: api::Forecast,
    ) -> Result<u64, Error> {
        self.send(Update::ZoneForecast(api::WatchZoneForecast {
            zone_id: zone_id.into(),
            forecast: Some(forecast),
        }))
        .await
    }

    /// Changes a vehicle's departure.
    pub async fn departure(
        &mut self,
        vehicle_id: impl Into<String>,
        departure: prost_types::Timestamp,
    ) -> Result<u64, Error> {
        self.send(Update::Departure(api::DepartureChange {
            vehicle_id: vehicle_id.into(),
            departure_time: Some(departure),
        }))
        .await
    }

    /// Stops watching a vehicle.
    pub async fn remove(&mut self, vehicle_id: impl Into<String>) -> Result<u64, Error> {
        self.send(Update::Removal(api::VehicleRemoval {
            vehicle_id: vehicle_id.into(),
        }))
        .await
    }

    /// Closes the input side: the events already on their way still arrive, then the stream ends.
    pub fn close(&mut self) {
        self.commands = None;
    }
}

impl WatchEvents {
    /// The next event, `None` when the watch has ended.
    pub async fn next_event(&mut self) -> Option<WatchEvent> {
        tokio_stream::StreamExt::next(&mut self.events).await
    }

    /// The next alert (other events are skipped), `None` when the watch has ended.
    pub async fn next_alert(&mut self) -> Option<api::Alert> {
        while let Some(e) = self.next_event().await {
            if let WatchEvent::Alert(a) = e {
                return Some(a);
            }
        }
        None
    }
}

impl Stream for WatchEvents {
    type Item = WatchEvent;

    fn poll_next(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<Option<WatchEvent>> {
        Pin::new(&mut self.events).poll_next(cx)
    }
}

impl WatchHandle {
    /// The two halves, to send and read from different tasks.
    pub fn split(self) -> (WatchSender, WatchEvents) {
        (self.sender, self.events)
    }

    /// Sends one update; returns its sequence number. Keep reading events meanwhile (or
    /// [`split`](WatchHandle::split) the handle): the server pauses a reader that falls far behind.
    pub async fn send(&mut self, update: Update) -> Result<u64, Error> {
        self.sender.send(update).await
    }

    /// Adds or replaces a vehicle.
    pub async fn upsert_vehicle(&mut self, vehicle: api::WatchedVehicle) -> Result<u64, Error> {
        self.sender.upsert_vehicle(vehicle).await
    }

    /// Sends a telemetry report.
    pub async fn telemetry(&mut self, update: api::TelemetryUpdate) -> Result<u64, Error> {
        self.sender.telemetry(update).await
    }

    /// Sends a zone's forecast (replaces its earlier one).
    pub async fn zone_forecast(
        &mut self,
        zone_id: impl Into<String>,
        forecast: api::Forecast,
    ) -> Result<u64, Error> {
        self.sender.zone_forecast(zone_id, forecast).await
    }

    /// Changes a vehicle's departure.
    pub async fn departure(
        &mut self,
        vehicle_id: impl Into<String>,
        departure: prost_types::Timestamp,
    ) -> Result<u64, Error> {
        self.sender.departure(vehicle_id, departure).await
    }

    /// Stops watching a vehicle.
    pub async fn remove(&mut self, vehicle_id: impl Into<String>) -> Result<u64, Error> {
        self.sender.remove(vehicle_id).await
    }

    /// Closes the input side: the events already on their way still arrive, then the stream ends.
    pub fn close(&mut self) {
        self.sender.close();
    }

    /// The next event, `None` when the watch has ended.
    pub async fn next_event(&mut self) -> Option<WatchEvent> {
        self.events.next_event().await
    }

    /// The next alert (other events are skipped), `None` when the watch has ended.
    pub async fn next_alert(&mut self) -> Option<api::Alert> {
        self.events.next_alert().await
    }
}

impl Stream for WatchHandle {
    type Item = WatchEvent;

    fn poll_next(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<Option<WatchEvent>> {
        Pin::new(&mut self.events).poll_next(cx)
    }
}

/// The last known state, replayed on every new stream.
#[derive(Debug, Default)]
struct State {
    vehicles: BTreeMap<String, api::WatchedVehicle>,
    telemetry: BTreeMap<String, Vec<api::TelemetryUpdate>>,
    zones: BTreeMap<String, api::Forecast>,
}

impl State {
    fn apply(&mut self, update: &Update) {
        match update {
            Update::Vehicle(w) => {
                if let Some(v) = &w.vehicle {
                    self.vehicles.insert(v.vehicle_id.clone(), w.clone());
                }
            }
            Update::Telemetry(t) => {
                let list = self.telemetry.entry(t.vehicle_id.clone()).or_default();
                // The server refuses a report not newer than the one it holds for the vehicle:
                // keep only what it accepts, so that the replay rebuilds the same state in order.
                let at = |u: &api::TelemetryUpdate| {
                    u.telemetry
                        .as_ref()
                        .and_then(|x| x.observed_at)
                        .map(|o| (o.seconds, o.nanos))
                };
                if at(t).is_none() || list.last().is_some_and(|last| at(t) <= at(last)) {
                    return;
                }
                if t.key_off {
                    list.clear();
                }
                if list.len() == REPLAY_TELEMETRY_PER_VEHICLE {
                    list.remove(1);
                }
                list.push(t.clone());
            }
            Update::ZoneForecast(z) => {
                if let Some(f) = &z.forecast {
                    self.zones.insert(z.zone_id.clone(), f.clone());
                }
            }
            Update::Departure(d) => {
                if let Some(w) = self.vehicles.get_mut(&d.vehicle_id) {
                    w.departure_time = d.departure_time;
                }
            }
            Update::Removal(r) => {
                self.vehicles.remove(&r.vehicle_id);
                self.telemetry.remove(&r.vehicle_id);
            }
        }
    }

    /// Vehicles, then their telemetry, then the zones last, so that the server scores each
    /// vehicle once with its whole state.
    fn replay(&self) -> Vec<api::WatchFleetRequest> {
        let mut out: Vec<api::WatchFleetRequest> = Vec::new();
        let wrap = |u: Update| api::WatchFleetRequest {
            update: Some(u),
            sequence: 0,
        };
        out.extend(
            self.vehicles
                .values()
                .cloned()
                .map(|w| wrap(Update::Vehicle(w))),
        );
        for (id, list) in &self.telemetry {
            if self.vehicles.contains_key(id) {
                out.extend(list.iter().cloned().map(|t| wrap(Update::Telemetry(t))));
            }
        }
        out.extend(self.zones.iter().map(|(id, f)| {
            wrap(Update::ZoneForecast(api::WatchZoneForecast {
                zone_id: id.clone(),
                forecast: Some(f.clone()),
            }))
        }));
        out
    }
}

/// Room for one request in the stream's input; `None` when it is closed.
async fn reserve(
    sender: Option<&mpsc::Sender<api::WatchFleetRequest>>,
) -> Option<mpsc::Permit<'_, api::WatchFleetRequest>> {
    sender?.reserve().await.ok()
}

/// How one stream ended.
enum Ended {
    /// The caller closed the watch and the server finished.
    Done,
    /// The caller went away (handle dropped).
    Dropped,
    /// The stream broke: reconnect.
    Broken(String),
}

struct Task {
    endpoints: Vec<Endpoint>,
    backoff: Backoff,
    jitter_key: u64,
    max_reconnects: Option<u32>,
    state: State,
    /// Last state delivered per alert id.
    delivered: HashMap<String, i32>,
    events: mpsc::Sender<WatchEvent>,
}

impl Task {
    async fn run(mut self, mut commands: mpsc::Receiver<api::WatchFleetRequest>) {
        let mut attempt: u32 = 0;
        let mut endpoint = 0usize;
        let mut closed = false;
        loop {
            let e = &self.endpoints[endpoint % self.endpoints.len()];
            let (ended, progressed) = match e.connect().await {
                Ok(channel) => self.stream(channel, &mut commands, &mut closed).await,
                Err(err) => (Ended::Broken(format!("connect: {err}")), false),
            };
            match ended {
                Ended::Done | Ended::Dropped => return,
                Ended::Broken(reason) => {
                    if progressed {
                        attempt = 0;
                    }
                    if self.max_reconnects.is_some_and(|m| attempt >= m) {
                        let _ = self
                            .events
                            .send(WatchEvent::Refused {
                                sequence: 0,
                                vehicle_id: String::new(),
                                error: Error::Unavailable(format!(
                                    "gave up reconnecting: {reason}"
                                )),
                            })
                            .await;
                        return;
                    }
                    if self
                        .events
                        .send(WatchEvent::Reconnecting { attempt, reason })
                        .await
                        .is_err()
                    {
                        return;
                    }
                    tokio::time::sleep(self.backoff.delay(attempt, self.jitter_key)).await;
                    attempt = attempt.saturating_add(1);
                    endpoint += 1;
                }
            }
        }
    }

    /// Runs one stream: replays the state, then forwards commands and events. Returns how it
    /// ended and whether it received anything (which resets the backoff).
    async fn stream(
        &mut self,
        channel: tonic::transport::Channel,
        commands: &mut mpsc::Receiver<api::WatchFleetRequest>,
        closed: &mut bool,
    ) -> (Ended, bool) {
        let (tx, rx) = mpsc::channel::<api::WatchFleetRequest>(64);
        let mut client = StartMarginServiceClient::new(channel);
        // The replay goes first, queued before the call opens (the channel holds it).
        let replay = self.state.replay();
        let feeder_tx = tx.clone();
        let feeder = tokio::spawn(async move {
            for r in replay {
                if feeder_tx.send(r).await.is_err() {
                    break;
                }
            }
        });
        let opened = client.watch_fleet(ReceiverStream::new(rx)).await;
        let mut responses = match opened {
            Ok(r) => r.into_inner(),
            Err(s) => {
                feeder.abort();
                return (Ended::Broken(format!("open: {s}")), false);
            }
        };
        let mut tx = if *closed { None } else { Some(tx) };
        // A command taken from the caller, waiting for room in the stream: the responses are read
        // meanwhile, so a server that waits for its reader never waits for us.
        let mut pending: Option<api::WatchFleetRequest> = None;
        let mut progressed = false;
        loop {
            let sender = tx.clone();
            tokio::select! {
                command = commands.recv(), if sender.is_some() && pending.is_none() => match command {
                    Some(request) => {
                        if let Some(update) = &request.update {
                            // Applied now: if this stream breaks, the replay carries it.
                            self.state.apply(update);
                        }
                        pending = Some(request);
                    }
                    None => {
                        *closed = true;
                        tx = None;
                    }
                },
                permit = reserve(sender.as_ref()), if pending.is_some() => match permit {
                    Some(permit) => {
                        if let Some(request) = pending.take() {
                            permit.send(request);
                        }
                    }
                    None => return (Ended::Broken("input closed".into()), progressed),
                },
                response = responses.message() => match response {
                    Ok(Some(r)) => {
                        progressed = true;
                        if let Some(event) = r.event
                            && !self.deliver(event).await
                        {
                            return (Ended::Dropped, progressed);
                        }
                    }
                    Ok(None) if *closed => {
                        let _ = feeder.await;
                        return (Ended::Done, progressed);
                    }
                    Ok(None) => return (Ended::Broken("the server ended the stream".into()), progressed),
                    Err(s) => return (Ended::Broken(s.to_string()), progressed),
                },
            }
        }
    }

    /// Delivers an event, dropping alerts already delivered in that state. `false` when the
    /// caller has gone.
    async fn deliver(&mut self, event: Event) -> bool {
        let out = match event {
            Event::Alert(a) => {
                let previous = self.delivered.insert(a.alert_id.clone(), a.state);
                let fresh = match previous {
                    Some(s) => s != a.state,
                    // A clear of an alert never seen raised is news only if it was raised here.
                    None => a.state == api::AlertState::Raised as i32,
                };
                if !fresh {
                    return true;
                }
                WatchEvent::Alert(a)
            }
            Event::OutlookChange(c) => WatchEvent::Outlook(c),
            Event::Refused(r) => WatchEvent::Refused {
                sequence: r.sequence,
                vehicle_id: r.vehicle_id,
                error: r.error.as_ref().map_or(
                    Error::Other(tonic::Code::Unknown, String::new()),
                    Error::from_rpc_status,
                ),
            },
        };
        self.events.send(out).await.is_ok()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn telemetry(id: &str, key_off: bool, s: i64) -> Update {
        Update::Telemetry(api::TelemetryUpdate {
            vehicle_id: id.into(),
            telemetry: Some(api::VehicleTelemetry {
                observed_at: Some(prost_types::Timestamp {
                    seconds: s,
                    nanos: 0,
                }),
                ..Default::default()
            }),
            block_heater_on: None,
            key_off,
        })
    }

    #[test]
    fn replay_sends_vehicles_then_telemetry_since_key_off_then_zones() {
        let mut st = State::default();
        st.apply(&Update::ZoneForecast(api::WatchZoneForecast {
            zone_id: "z".into(),
            forecast: Some(api::Forecast::default()),
        }));
        st.apply(&Update::Vehicle(api::WatchedVehicle {
            vehicle: Some(api::VehicleProfile {
                vehicle_id: "a".into(),
                ..Default::default()
            }),
            ..Default::default()
        }));
        st.apply(&telemetry("a", false, 1));
        st.apply(&telemetry("a", true, 2));
        for s in 3..(3 + REPLAY_TELEMETRY_PER_VEHICLE as i64 + 5) {
            st.apply(&telemetry("a", false, s));
        }
        let replay = st.replay();
        assert!(matches!(replay[0].update, Some(Update::Vehicle(_))));
        assert!(matches!(
            replay.last().and_then(|r| r.update.as_ref()),
            Some(Update::ZoneForecast(_))
        ));
        let times: Vec<i64> = replay
            .iter()
            .filter_map(|r| match &r.update {
                Some(Update::Telemetry(t)) => t.telemetry.as_ref()?.observed_at.map(|o| o.seconds),
                _ => None,
            })
            .collect();
        assert_eq!(times.len(), REPLAY_TELEMETRY_PER_VEHICLE);
        assert_eq!(times[0], 2, "the key-off reading is kept");
        assert_eq!(
            *times.last().expect("some"),
            3 + REPLAY_TELEMETRY_PER_VEHICLE as i64 + 4
        );
        st.apply(&Update::Removal(api::VehicleRemoval {
            vehicle_id: "a".into(),
        }));
        assert_eq!(st.replay().len(), 1);
    }

    #[test]
    fn an_older_report_is_not_kept_for_the_replay() {
        let mut st = State::default();
        st.apply(&telemetry("a", true, 100));
        st.apply(&telemetry("a", false, 200));
        // Sent late (the server refuses it): it must not reorder or reset the replay.
        st.apply(&telemetry("a", true, 150));
        st.apply(&telemetry("a", false, 200));
        let kept: Vec<(i64, bool)> = st.telemetry["a"]
            .iter()
            .map(|t| (t.telemetry.unwrap().observed_at.unwrap().seconds, t.key_off))
            .collect();
        assert_eq!(kept, [(100, true), (200, false)]);
    }
}
