//! The `startmargin.v1.StartMarginService` implementation: transport only. Requests are validated,
//! converted and assessed by [`crate::convert`] on a small dedicated pool of compute threads
//! ([`pool`]), so the async runtime never runs physics. A global semaphore bounds the assessments
//! in flight: unary calls beyond it are refused at once with RESOURCE_EXHAUSTED; streams wait for
//! their share of it (never more than `streams.stream_share_pct`, so unary calls keep room), and
//! the pool serves unary calls before queued stream work and streams round-robin. Each tenant
//! holds at most `streams.max_streams_per_tenant` streams.
//!
//! A fleet stream keeps its zone forecasts and depot outlets, runs its vehicles concurrently (a
//! bounded number in flight, each holding a slot until the reader takes its result, so a slow
//! reader slows the stream instead of growing memory), answers each vehicle as soon as it is
//! computed, turns a bad item into a per-item `google.rpc.Status` without ending the stream, and
//! once the input has ended, computes each depot's plug-in plan on the compute pool as soon as
//! every vehicle of that depot has its result, the depots in parallel, each plan sent as it is
//! done (so a plan follows its own depot's vehicle results; its content depends only on what the
//! stream sent, never on timing). A vehicle
//! item needs an item id unique on its stream, so that every result and every planned plug-in can
//! be mapped back to what was sent, also after a broken stream; a duplicate is refused for that
//! item alone.

mod learning;
pub mod pool;

pub use self::learning::{ATTEMPT_PATH, ATTEMPTS_PATH};

use std::collections::{HashMap, HashSet};
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::pin::Pin;
use std::sync::{Arc, Mutex, OnceLock};
use std::time::Duration;

use startmargin_model::plug_in_plan::PlugInCandidate;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_request::Item;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use tokio::sync::{Notify, OwnedSemaphorePermit, Semaphore, mpsc};
use tokio::time::Instant;
use tokio_stream::wrappers::ReceiverStream;
use tokio_stream::{Stream, StreamExt as _};
use tokio_util::sync::CancellationToken;
use tonic::{Request, Response, Status};
use tracing::{Instrument, debug, info, info_span};

use crate::codec::{BadItem, Inbound};
use crate::config::Config;
use crate::convert::{self, MAX_ID_LEN, Policy, ZoneForecasts};
use crate::error::{ApiError, to_rpc_status};
use crate::tenant::{Tenant, tenant_of};

use self::pool::{Budget, ComputePool, Lane, QuotaGuard, StreamQuota};

/// Field path prefix of the night in an AssessVehicle request.
pub const NIGHT_PATH: &str = "night";
/// Field path prefix of a vehicle item in an AssessFleet request.
pub const FLEET_VEHICLE_PATH: &str = "vehicle";
/// Field path prefix of a zone forecast item in an AssessFleet request.
pub const FLEET_ZONE_PATH: &str = "zone_forecast";
/// Field path prefix of a depot outlets item in an AssessFleet request.
pub const FLEET_DEPOT_PATH: &str = "depot_outlets";
/// Field path of an AssessFleet item as a whole (its oneof), for items that cannot be decoded.
pub const FLEET_ITEM_PATH: &str = "item";
/// Field path of a WatchFleet update as a whole (its oneof), for updates that cannot be decoded.
pub const WATCH_UPDATE_PATH: &str = "update";
/// Tag of `AssessFleetRequest.item_id`, read from an undecodable item to name it.
const FLEET_ITEM_ID_TAG: u32 = 3;

/// Message of the status that ends open streams when the server shuts down.
pub const DRAINING_MESSAGE: &str = "server is draining";

/// Limits and policy of the service, taken from the configuration.
#[derive(Debug, Clone, Copy)]
struct Limits {
    request_timeout: Duration,
    stream_idle_timeout: Duration,
    max_fleet_items: u64,
    fleet_in_flight: usize,
    max_streams_per_tenant: usize,
    policy: Policy,
}

/// The StartMarginService: conversion and transport around the model, with limits and drain.
#[derive(Debug)]
pub struct StartMarginApi {
    pool: Arc<ComputePool>,
    in_flight: Arc<Semaphore>,
    budget: Arc<Budget>,
    quota: Arc<StreamQuota>,
    limits: Limits,
    draining: CancellationToken,
    watch: crate::watch::WatchSettings,
    learning: Arc<crate::learning::Learning>,
}

static DESCRIBE: OnceLock<pb::DescribeModelResponse> = OnceLock::new();

impl StartMarginApi {
    /// Builds the service from the configuration on an open `store`; cancelling `draining` ends
    /// every open stream with UNAVAILABLE.
    pub fn new(
        config: &Config,
        draining: CancellationToken,
        store: crate::store::Store,
    ) -> std::io::Result<Self> {
        let in_flight = Arc::new(Semaphore::new(config.concurrency_limit));
        let streams = &config.streams;
        let pool = Arc::new(ComputePool::new(config.effective_compute_threads())?);
        Ok(Self {
            learning: Arc::new(crate::learning::Learning::new(
                store,
                Arc::clone(&pool),
                config.learning.limits(),
            )),
            pool,
            budget: Arc::new(Budget::new(
                Arc::clone(&in_flight),
                streams.stream_permits(config.concurrency_limit),
                streams.max_in_flight_per_tenant,
            )),
            quota: Arc::new(StreamQuota::default()),
            in_flight,
            limits: Limits {
                request_timeout: config.request_timeout(),
                stream_idle_timeout: config.stream_idle_timeout(),
                max_fleet_items: config.max_fleet_items_per_stream,
                fleet_in_flight: config.fleet_in_flight_per_stream(),
                max_streams_per_tenant: streams.max_streams_per_tenant,
                policy: config.policy(),
            },
            draining,
            watch: crate::watch::WatchSettings::from_config(config),
        })
    }
}

/// The RPCs, called by [`crate::codec::ApiRoutes`] with the request already read.
impl StartMarginApi {
    /// AssessVehicle: one vehicle night.
    pub async fn assess_vehicle(
        &self,
        request: Request<pb::AssessVehicleRequest>,
    ) -> Result<Response<pb::AssessVehicleResponse>, Status> {
        let span = info_span!("assess_vehicle");
        let tenant = tenant_of(&request);
        async move {
            let night = request.into_inner().night.ok_or_else(|| {
                ApiError::field(
                    NIGHT_PATH,
                    "is required: the vehicle, its forecast and its departure",
                )
            })?;
            let permit = Arc::clone(&self.in_flight)
                .try_acquire_owned()
                .map_err(|_| {
                    ApiError::ResourceExhausted(
                        "too many assessments in flight; retry with backoff".to_string(),
                    )
                })?;
            debug!(
                vehicle_id = night.vehicle.as_ref().map_or("", |v| v.vehicle_id.as_str()),
                "assessing"
            );
            let policy = self.limits.policy;
            self.learning.ensure_loaded(tenant.as_str()).await?;
            let vehicle_id = night.vehicle.as_ref().map_or("", |v| v.vehicle_id.as_str());
            let calibration =
                self.learning
                    .lookup(tenant.as_str(), vehicle_id, convert::archetype_of(&night));
            // A sampling request runs the model hundreds of times: always on the compute pool,
            // where the request timeout can give up on it.
            let may_run_inline = night
                .options
                .as_ref()
                .is_none_or(|o| o.probability_method() != pb::ProbabilityMethod::Sampling);
            let started = std::time::Instant::now();
            let job = self.pool.run_unary(may_run_inline, move || {
                let _permit = permit;
                convert::decide_calibrated(
                    &night,
                    NIGHT_PATH,
                    &ZoneForecasts::new(),
                    &policy,
                    calibration,
                )
                .map(|d| d.message)
            });
            let deadline_exceeded = || {
                Status::deadline_exceeded(format!(
                    "the assessment took longer than the server's {} s request timeout",
                    self.limits.request_timeout.as_secs_f64()
                ))
            };
            let assessment = match tokio::time::timeout(self.limits.request_timeout, job).await {
                // An inline run cannot be given up on while it runs: judged when it ends.
                Ok(_) if started.elapsed() > self.limits.request_timeout => {
                    return Err(deadline_exceeded());
                }
                Ok(result) => result?,
                Err(_) => return Err(deadline_exceeded()),
            };
            Ok(Response::new(pb::AssessVehicleResponse {
                assessment: Some(assessment),
            }))
        }
        .instrument(span)
        .await
        .inspect_err(|status| debug!(code = ?status.code(), "assess_vehicle refused"))
    }

    /// AssessFleet: a fleet stream, answered item by item.
    pub async fn assess_fleet(
        &self,
        request: Request<Inbound<pb::AssessFleetRequest>>,
    ) -> Result<Response<FleetResponses>, Status> {
        let tenant = tenant_of(&request);
        let quota = self
            .quota
            .enter(&tenant, self.limits.max_streams_per_tenant)?;
        let slots = self.limits.fleet_in_flight;
        // Every result holds a slot until the reader takes it, so the channel never holds more
        // than `slots` results; the one extra place is for the stream's final status.
        let (tx, rx) = mpsc::channel(slots + 1);
        let stream = FleetStream {
            pool: Arc::clone(&self.pool),
            lane: pool::new_stream_lane(),
            budget: Arc::clone(&self.budget),
            tenant,
            _quota: quota,
            seen_items: HashSet::new(),
            stream_slots: Arc::new(Semaphore::new(slots)),
            slots,
            limits: self.limits,
            draining: self.draining.clone(),
            tx,
            zones: Arc::new(HashMap::new()),
            depots: HashMap::new(),
            candidates: Arc::new(Mutex::new(HashMap::new())),
            progress: Arc::new(DepotProgress::default()),
            learning: Arc::clone(&self.learning),
        };
        tokio::spawn(
            stream
                .run(request.into_inner())
                .instrument(info_span!("assess_fleet")),
        );
        let responses = ReceiverStream::new(rx).map(|(result, slot)| {
            drop(slot);
            result
        });
        Ok(Response::new(Box::pin(responses)))
    }

    /// WatchFleet: the pre-dawn feed.
    pub async fn watch_fleet(
        &self,
        request: Request<Inbound<pb::WatchFleetRequest>>,
    ) -> Result<Response<crate::watch::WatchResponses>, Status> {
        let tenant = tenant_of(&request);
        let quota = self
            .quota
            .enter(&tenant, self.limits.max_streams_per_tenant)?;
        // The watch runs its re-scores on its own lane of the compute pool, within the budget.
        self.learning.ensure_loaded(tenant.as_str()).await?;
        let compute = crate::watch::Compute {
            pool: Arc::clone(&self.pool),
            lane: pool::new_stream_lane(),
            budget: Arc::clone(&self.budget),
            quota,
            learning: Arc::clone(&self.learning),
        };
        Ok(Response::new(crate::watch::start(
            request,
            compute,
            self.watch,
            self.draining.clone(),
        )))
    }

    /// DescribeModel: the model's methods, parameters and archetypes.
    pub async fn describe_model(
        &self,
        _request: Request<pb::DescribeModelRequest>,
    ) -> Result<Response<pb::DescribeModelResponse>, Status> {
        if let Some(cached) = DESCRIBE.get() {
            return Ok(Response::new(cached.clone()));
        }
        // The first call computes the archetypes' limits: physics, so on the compute pool.
        let answer = self
            .pool
            .run(Lane::Unary, || {
                Ok(DESCRIBE.get_or_init(convert::describe_model).clone())
            })
            .instrument(info_span!("describe_model"))
            .await?;
        Ok(Response::new(answer))
    }
}

/// The results of a fleet stream, in the order they are computed.
pub type FleetResponses =
    Pin<Box<dyn Stream<Item = Result<pb::AssessFleetResponse, Status>> + Send>>;

/// A result on its way to the reader, with the stream slot it holds until the reader takes it.
type Sent = (
    Result<pb::AssessFleetResponse, Status>,
    Option<OwnedSemaphorePermit>,
);

/// Plug-in candidates of a stream's vehicles by depot id: (item id, vehicle id, candidate).
type Candidates = Arc<Mutex<HashMap<String, Vec<(String, String, PlugInCandidate)>>>>;

/// Vehicles of each depot still computing, and a wake-up each time one finishes.
#[derive(Debug, Default)]
struct DepotProgress {
    pending: Mutex<HashMap<String, usize>>,
    finished: Notify,
}

impl DepotProgress {
    fn started(&self, depot_id: &str) {
        if let Ok(mut p) = self.pending.lock() {
            *p.entry(depot_id.to_string()).or_default() += 1;
        }
    }

    fn finished(&self, depot_id: &str) {
        if let Ok(mut p) = self.pending.lock()
            && let Some(n) = p.get_mut(depot_id)
        {
            *n = n.saturating_sub(1);
        }
        // Stores a wake-up when nobody waits yet: none is lost.
        self.finished.notify_one();
    }

    /// Whether every vehicle of the depot sent so far has its result.
    fn done(&self, depot_id: &str) -> bool {
        self.pending
            .lock()
            .map(|p| p.get(depot_id).is_none_or(|n| *n == 0))
            .unwrap_or(true)
    }
}

/// A depot's plug-in plan from its candidates: in item order, not completion order, so the same
/// stream gives the same plan. The plan names each vehicle by its index, then gets its item id
/// and vehicle id back: item ids are unique, vehicle ids need not be.
fn depot_plan(
    depot: &convert::Depot,
    mut found: Vec<(String, String, PlugInCandidate)>,
) -> pb::PlugInPlan {
    found.sort_by(|a, b| a.0.cmp(&b.0));
    let index: Vec<String> = (0..found.len()).map(|i| i.to_string()).collect();
    let chosen: Vec<PlugInCandidate> = found.iter().map(|(_, _, c)| *c).collect();
    let mut plan = convert::plan_to_pb(depot, &index, &chosen);
    for p in &mut plan.plug_ins {
        if let Some((item, vehicle, _)) = p
            .vehicle_id
            .parse::<usize>()
            .ok()
            .and_then(|i| found.get(i))
        {
            p.item_id = item.clone();
            p.vehicle_id = vehicle.clone();
        }
    }
    plan
}

/// How a fleet stream's input loop ends.
enum End {
    /// The client closed its side: the last results, then the depots' plans, then OK.
    Completed,
    /// End now with this status (results still computing are dropped).
    Abort(Status),
    /// Deliver the results in flight, then end with this status.
    AfterInFlight(Status),
}

/// One AssessFleet call: its zone forecasts, depots, vehicles in flight and output channel.
struct FleetStream {
    pool: Arc<ComputePool>,
    lane: Lane,
    budget: Arc<Budget>,
    tenant: Tenant,
    /// The stream's place in its tenant's quota, given back when the stream ends.
    _quota: QuotaGuard,
    /// Keys of the vehicle item ids seen (see [`id_key`]): a duplicate is refused.
    seen_items: HashSet<u128>,
    stream_slots: Arc<Semaphore>,
    slots: usize,
    limits: Limits,
    draining: CancellationToken,
    tx: mpsc::Sender<Sent>,
    /// Zone forecasts; copy-on-write, so vehicles in flight keep the ones they were sent against.
    zones: Arc<ZoneForecasts>,
    /// Depot outlets by depot id, with the item id the plan answers.
    depots: HashMap<String, (String, convert::Depot)>,
    /// Plug-in candidates, filled by the compute threads.
    candidates: Candidates,
    /// Vehicles of each depot still computing.
    progress: Arc<DepotProgress>,
    /// The tenant's vehicle calibrations.
    learning: Arc<crate::learning::Learning>,
}

impl FleetStream {
    async fn run(mut self, mut inbound: Inbound<pb::AssessFleetRequest>) {
        let mut items: u64 = 0;
        // A slot is taken before reading the next item, so an item is only read when it can run
        // and its result has a place in the output channel.
        let mut slot: Option<OwnedSemaphorePermit> = None;
        let idle = tokio::time::sleep(self.limits.stream_idle_timeout);
        tokio::pin!(idle);

        let end = loop {
            tokio::select! {
                biased;
                () = self.draining.cancelled() => break End::Abort(draining_status()),
                permit = Arc::clone(&self.stream_slots).acquire_owned(), if slot.is_none() => match permit {
                    Ok(p) => slot = Some(p),
                    Err(_) => break End::Abort(Status::internal("fleet stream slots closed")),
                },
                message = inbound.message(), if slot.is_some() => {
                    idle.as_mut().reset(Instant::now() + self.limits.stream_idle_timeout);
                    match message {
                        Ok(Some(Err(bad))) => {
                            // Undecodable or over-size: answered on its own; counts as an item.
                            items += 1;
                            let Some(permit) = slot.take() else {
                                break End::Abort(Status::internal("fleet item read without a slot"));
                            };
                            self.send_bad_item(permit, bad);
                        }
                        Ok(Some(Ok(request))) => {
                            items += 1;
                            if items > self.limits.max_fleet_items {
                                break End::AfterInFlight(ApiError::ResourceExhausted(format!(
                                    "more than {} items on one stream; open a new stream for the rest",
                                    self.limits.max_fleet_items
                                )).into());
                            }
                            let Some(permit) = slot.take() else {
                                break End::Abort(Status::internal("fleet item read without a slot"));
                            };
                            if let Err(end) = self.handle(request, permit).await {
                                break end;
                            }
                        }
                        Ok(None) => break End::Completed,
                        // The call itself failed (the client reset it or went away).
                        Err(status) => break End::Abort(status),
                    }
                }
                () = &mut idle => {
                    // Idle means no request and nothing in flight or unread for the whole period.
                    if self.stream_slots.available_permits() + usize::from(slot.is_some()) < self.slots {
                        idle.as_mut().reset(Instant::now() + self.limits.stream_idle_timeout);
                    } else {
                        break End::Abort(ApiError::Unavailable(format!(
                            "stream idle for {} s; open a new stream",
                            self.limits.stream_idle_timeout.as_secs_f64()
                        )).into());
                    }
                }
            }
        };
        drop(slot);

        let status = match end {
            End::Completed if self.depots.is_empty() => None,
            End::Completed => self.send_plans().await.err(),
            End::Abort(status) => Some(status),
            End::AfterInFlight(status) => match self.wait_for_results().await {
                Ok(()) => Some(status),
                Err(drained) => drained.or(Some(status)),
            },
        };
        match &status {
            None => info!(items, "fleet stream input ended"),
            Some(s) => info!(items, code = ?s.code(), message = s.message(), "fleet stream ended"),
        }
        if let Some(status) = status {
            // There is always room: results hold at most `slots` places and the channel has one
            // more. Results still computing land after the status and are dropped with it.
            let _ = self.tx.try_send((Err(status), None));
        }
        // Dropping `tx` here (and in each job as it finishes) closes the stream.
    }

    /// Waits until the reader has taken every result (every slot is back). `Err(Some(status))`
    /// when the server drains meanwhile, `Err(None)` when the reader stops reading for the idle
    /// timeout.
    async fn wait_for_results(&self) -> Result<(), Option<Status>> {
        let all = u32::try_from(self.slots).unwrap_or(u32::MAX);
        tokio::select! {
            biased;
            () = self.draining.cancelled() => Err(Some(draining_status())),
            taken = self.stream_slots.acquire_many(all) => {
                taken.map(drop).map_err(|_| Some(Status::internal("fleet stream slots closed")))
            }
            () = tokio::time::sleep(self.limits.stream_idle_timeout) => Err(None),
        }
    }

    /// Computes and sends each depot's plug-in plan: on the compute pool as soon as every vehicle
    /// of that depot has its result, the depots in parallel, each sent as it is done. `Err` holds
    /// the status that ends the stream.
    async fn send_plans(&mut self) -> Result<(), Status> {
        let mut waiting = std::mem::take(&mut self.depots);
        let (plan_tx, mut plan_rx) =
            mpsc::unbounded_channel::<(String, Result<pb::PlugInPlan, ApiError>)>();
        let mut running = 0usize;
        loop {
            let ready: Vec<String> = waiting
                .keys()
                .filter(|d| self.progress.done(d))
                .cloned()
                .collect();
            for depot_id in ready {
                let Some((item_id, depot)) = waiting.remove(&depot_id) else {
                    continue;
                };
                let found = self
                    .candidates
                    .lock()
                    .map_err(|_| Status::internal("candidates lost"))?
                    .remove(&depot_id)
                    .unwrap_or_default();
                let tx = plan_tx.clone();
                self.pool.submit(
                    self.lane,
                    Box::new(move || {
                        let plan = catch_unwind(AssertUnwindSafe(|| depot_plan(&depot, found)))
                            .map_err(|_| {
                                ApiError::Internal("the plug-in plan panicked".to_string())
                            });
                        let _ = tx.send((item_id, plan));
                    }),
                )?;
                running += 1;
            }
            if running == 0 && waiting.is_empty() {
                return Ok(());
            }
            tokio::select! {
                biased;
                () = self.draining.cancelled() => return Err(draining_status()),
                done = plan_rx.recv(), if running > 0 => {
                    let Some((item_id, plan)) = done else {
                        return Err(Status::internal("plug-in plans lost"));
                    };
                    running -= 1;
                    let plan = plan?;
                    debug!(
                        depot_id = plan.depot_id,
                        chosen = plan.plug_ins.len(),
                        "plug-in plan"
                    );
                    let response = pb::AssessFleetResponse {
                        item_id,
                        vehicle_id: String::new(),
                        outcome: Some(Outcome::PlugInPlan(plan)),
                    };
                    tokio::select! {
                        biased;
                        () = self.draining.cancelled() => return Err(draining_status()),
                        sent = self.tx.send((Ok(response), None)) => if sent.is_err() { return Ok(()) },
                        // A reader that stops reading ends the stream, as during the input.
                        () = tokio::time::sleep(self.limits.stream_idle_timeout) => return Ok(()),
                    }
                }
                () = self.progress.finished.notified(), if !waiting.is_empty() => {}
            }
        }
    }

    /// Starts the work of one item; `permit` travels with its result (if any) to the reader.
    /// Returns `Err` when the stream must end instead.
    async fn handle(
        &mut self,
        request: pb::AssessFleetRequest,
        permit: OwnedSemaphorePermit,
    ) -> Result<(), End> {
        let mut item_id = request.item_id;
        if item_id.len() > MAX_ID_LEN {
            // Never echoed: the result carries an empty item id and says why.
            let e = convert::check_id("item_id", &item_id, false).err();
            item_id.clear();
            if let Some(e) = e {
                self.send_error(permit, item_id, e);
                return Ok(());
            }
        }
        match request.item {
            Some(Item::ZoneForecast(zone)) => {
                match convert::zone_forecast_from_pb(&zone, FLEET_ZONE_PATH) {
                    Ok((zone_id, series)) => {
                        debug!(zone_id, "zone forecast");
                        Arc::make_mut(&mut self.zones).insert(zone_id, series);
                    }
                    Err(e) => self.send_error(permit, item_id, e),
                }
            }
            Some(Item::DepotOutlets(depot)) => {
                match convert::depot_from_pb(&depot, FLEET_DEPOT_PATH) {
                    Ok(depot) => {
                        debug!(
                            depot.depot_id,
                            outlets = depot.limits.outlets,
                            "depot outlets"
                        );
                        self.depots.insert(depot.depot_id.clone(), (item_id, depot));
                    }
                    Err(e) => self.send_error(permit, item_id, e),
                }
            }
            Some(Item::Vehicle(mut night)) => {
                // A vehicle without its own zone takes its depot's, when the depot came first.
                if night.time_zone.is_empty()
                    && let Some((_, depot)) = self.depots.get(&night.depot_id)
                    && !depot.zone.assumed
                {
                    night.time_zone = depot.zone.name.clone();
                }
                let vehicle_id = night
                    .vehicle
                    .as_ref()
                    .map(|v| v.vehicle_id.clone())
                    .unwrap_or_default();
                if let Err(e) = self.check_unique(&item_id) {
                    self.send_error(permit, item_id, e);
                    return Ok(());
                }
                let budget = Arc::clone(&self.budget);
                let global = tokio::select! {
                    biased;
                    () = self.draining.cancelled() => return Err(End::Abort(draining_status())),
                    global = budget.acquire(&self.tenant) => global
                        .map_err(|e| End::Abort(e.into()))?,
                };
                debug!(item_id, vehicle_id, "vehicle");
                let tenant = self.tenant.as_str();
                if let Err(e) = self.learning.ensure_loaded(tenant).await {
                    self.send_error(permit, item_id, e);
                    return Ok(());
                }
                let calibration =
                    self.learning
                        .lookup(tenant, &vehicle_id, convert::archetype_of(&night));
                let zones = Arc::clone(&self.zones);
                let candidates = Arc::clone(&self.candidates);
                let policy = self.limits.policy;
                let tx = self.tx.clone();
                let answer_item = item_id.clone();
                let progress = Arc::clone(&self.progress);
                let depot_id = night.depot_id.clone();
                let night_depot = depot_id.clone();
                progress.started(&depot_id);
                let submitted = self.pool.submit(
                    self.lane,
                    Box::new(move || {
                        let decided = catch_unwind(AssertUnwindSafe(|| {
                            convert::decide_calibrated(
                                &night,
                                FLEET_VEHICLE_PATH,
                                &zones,
                                &policy,
                                calibration,
                            )
                        }))
                        .unwrap_or_else(|_| {
                            Err(ApiError::Internal("the assessment panicked".to_string()))
                        });
                        drop(global);
                        let outcome = match decided {
                            Ok(decided) => {
                                if let Some(candidate) = decided.plug_in
                                    && let Ok(mut by_depot) = candidates.lock()
                                {
                                    by_depot.entry(night.depot_id.clone()).or_default().push((
                                        answer_item,
                                        vehicle_id.clone(),
                                        candidate,
                                    ));
                                }
                                Outcome::Assessment(decided.message)
                            }
                            Err(e) => Outcome::Error(to_rpc_status(e)),
                        };
                        let response = pb::AssessFleetResponse {
                            item_id,
                            vehicle_id,
                            outcome: Some(outcome),
                        };
                        // Never full (the slot reserves the place); closed only when the reader left.
                        let _ = tx.try_send((Ok(response), Some(permit)));
                        // After the result: a depot's plan follows its vehicles' results.
                        progress.finished(&depot_id);
                    }),
                );
                if let Err(e) = submitted {
                    self.progress.finished(&night_depot);
                    return Err(End::Abort(e.into()));
                }
            }
            None => self.send_error(
                permit,
                item_id,
                ApiError::field(
                    "item",
                    "one of zone_forecast, vehicle or depot_outlets is required",
                ),
            ),
        }
        Ok(())
    }

    /// Refuses a vehicle item without an item id, or whose item id was already sent on this
    /// stream (its result or plug-in could not be told apart); records it otherwise.
    fn check_unique(&mut self, item_id: &str) -> Result<(), ApiError> {
        convert::check_id("item_id", item_id, true)?;
        if !self.seen_items.insert(id_key(item_id)) {
            return Err(ApiError::field(
                "item_id",
                "was already sent on this stream: every vehicle item needs its own item id",
            ));
        }
        Ok(())
    }

    /// Answers an item that could not be decoded, under the item id it carries when that can
    /// be read from its bytes (and is within the id cap: a longer one is never echoed).
    fn send_bad_item(&self, permit: OwnedSemaphorePermit, bad: BadItem) {
        let item_id = bad
            .string_field(FLEET_ITEM_ID_TAG)
            .filter(|id| id.len() <= MAX_ID_LEN)
            .unwrap_or_default();
        self.send_error(permit, item_id, bad.error);
    }

    /// Answers an item with its error.
    fn send_error(&self, permit: OwnedSemaphorePermit, item_id: String, e: ApiError) {
        debug!(item_id, code = ?e.code(), "item refused");
        let response = pb::AssessFleetResponse {
            item_id,
            vehicle_id: String::new(),
            outcome: Some(Outcome::Error(to_rpc_status(e))),
        };
        let _ = self.tx.try_send((Ok(response), Some(permit)));
    }
}

/// A 128-bit key of an id (SipHash under two fixed keys): 16 bytes per id seen instead of the id
/// itself, with a collision chance near 2^-128 per pair.
fn id_key(id: &str) -> u128 {
    use std::hash::{DefaultHasher, Hash, Hasher};
    let half = |salt: u8| {
        let mut h = DefaultHasher::new();
        salt.hash(&mut h);
        id.hash(&mut h);
        h.finish()
    };
    (u128::from(half(0)) << 64) | u128::from(half(1))
}

fn draining_status() -> Status {
    ApiError::Unavailable(DRAINING_MESSAGE.to_string()).into()
}
