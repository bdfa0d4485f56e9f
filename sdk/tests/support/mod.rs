//! A scripted stand-in server for the SDK's tests: a real tonic server on `127.0.0.1:0` that
//! answers from a script (fail with a status N times, then succeed; or hang) and counts calls.
//! It holds no model: assessments echo the vehicle id with a fixed margin.

#![allow(dead_code, unreachable_pub)]

use std::net::SocketAddr;
use std::sync::Arc;
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};

use startmargin_sdk::api::{self, start_margin_service_server as srv};
use tokio_stream::wrappers::TcpListenerStream;
use tokio_stream::{Stream, StreamExt};
use tonic::{Code, Request, Response, Status, Streaming};
use tonic_types::{ErrorDetails, StatusExt};

/// What the next unary calls answer.
#[derive(Clone, Copy, Debug)]
pub enum Script {
    /// Answer this code `n` times, then succeed.
    FailThenOk(Code, usize),
    /// Always answer this code.
    Always(Code),
    /// Never answer (the client's deadline must end the call).
    Hang,
}

/// Shared counters and the last request's metadata.
#[derive(Default)]
pub struct Seen {
    pub calls: AtomicUsize,
    pub grpc_timeout: Mutex<Option<String>>,
}

struct Mock {
    script: Script,
    seen: Arc<Seen>,
    margin_k: f64,
}

fn invalid(field: &str, description: &str) -> Status {
    let mut d = ErrorDetails::new();
    d.add_bad_request_violation(field, description);
    Status::with_error_details(Code::InvalidArgument, format!("{field}: {description}"), d)
}

fn assessment(vehicle_id: &str, margin_k: f64) -> api::VehicleAssessment {
    api::VehicleAssessment {
        vehicle_id: vehicle_id.to_string(),
        model_version: "mock".into(),
        start_margin_k: margin_k,
        start_expected: margin_k > 0.0,
        ..Default::default()
    }
}

impl Mock {
    /// Counts the call, records its deadline header and applies the script.
    async fn gate<T>(&self, req: &Request<T>) -> Result<(), Status> {
        let n = self.seen.calls.fetch_add(1, Ordering::SeqCst);
        *self.seen.grpc_timeout.lock().unwrap() = req
            .metadata()
            .get("grpc-timeout")
            .and_then(|v| v.to_str().ok())
            .map(str::to_string);
        match self.script {
            Script::FailThenOk(code, k) if n < k => Err(Status::new(code, format!("scripted {n}"))),
            Script::FailThenOk(..) => Ok(()),
            Script::Always(Code::InvalidArgument) => Err(invalid(
                "night.vehicle.battery.capacity_cca",
                "must be above 0",
            )),
            Script::Always(code) => Err(Status::new(code, "scripted")),
            Script::Hang => std::future::pending().await,
        }
    }
}

type FleetOut =
    std::pin::Pin<Box<dyn Stream<Item = Result<api::AssessFleetResponse, Status>> + Send>>;

#[tonic::async_trait]
impl srv::StartMarginService for Mock {
    async fn assess_vehicle(
        &self,
        request: Request<api::AssessVehicleRequest>,
    ) -> Result<Response<api::AssessVehicleResponse>, Status> {
        self.gate(&request).await?;
        let id = request
            .into_inner()
            .night
            .and_then(|n| n.vehicle)
            .map(|v| v.vehicle_id)
            .unwrap_or_default();
        Ok(Response::new(api::AssessVehicleResponse {
            assessment: Some(assessment(&id, self.margin_k)),
        }))
    }

    type AssessFleetStream = FleetOut;

    /// Echoes each vehicle; a vehicle whose battery has no capacity gets a per-item
    /// INVALID_ARGUMENT with a field violation; zone forecasts get no result; depot outlets get a
    /// plan listing every vehicle of the depot, once the input ends.
    async fn assess_fleet(
        &self,
        request: Request<Streaming<api::AssessFleetRequest>>,
    ) -> Result<Response<Self::AssessFleetStream>, Status> {
        use api::assess_fleet_request::Item;
        use api::assess_fleet_response::Outcome;
        self.gate(&request).await?;
        let margin_k = self.margin_k;
        let mut input = request.into_inner();
        let (tx, rx) = tokio::sync::mpsc::channel(16);
        tokio::spawn(async move {
            let mut depots: Vec<(String, String)> = Vec::new();
            let mut depot_vehicles: Vec<(String, String)> = Vec::new();
            while let Some(item) = input.next().await {
                let item = match item {
                    Ok(i) => i,
                    Err(s) => {
                        let _ = tx.send(Err(s)).await;
                        return;
                    }
                };
                let night = match item.item {
                    Some(Item::Vehicle(night)) => night,
                    Some(Item::DepotOutlets(d)) => {
                        depots.push((item.item_id, d.depot_id));
                        continue;
                    }
                    _ => continue,
                };
                let v = night.vehicle.unwrap_or_default();
                if !night.depot_id.is_empty() {
                    depot_vehicles.push((night.depot_id.clone(), v.vehicle_id.clone()));
                }
                let bad = v.battery.as_ref().is_none_or(|b| b.capacity_cca <= 0.0);
                let outcome = if bad {
                    let s = invalid("vehicle.battery.capacity_cca", "must be above 0");
                    Outcome::Error(rpc_status(&s))
                } else {
                    Outcome::Assessment(assessment(&v.vehicle_id, margin_k))
                };
                let r = api::AssessFleetResponse {
                    item_id: item.item_id,
                    vehicle_id: v.vehicle_id,
                    outcome: Some(outcome),
                };
                if tx.send(Ok(r)).await.is_err() {
                    return;
                }
            }
            for (item_id, depot_id) in depots {
                let plug_ins = depot_vehicles
                    .iter()
                    .filter(|(d, _)| *d == depot_id)
                    .map(|(_, v)| api::PlannedPlugIn {
                        vehicle_id: v.clone(),
                        ..Default::default()
                    })
                    .collect();
                let plan = api::PlugInPlan {
                    depot_id,
                    plug_ins,
                    ..Default::default()
                };
                let r = api::AssessFleetResponse {
                    item_id,
                    vehicle_id: String::new(),
                    outcome: Some(Outcome::PlugInPlan(plan)),
                };
                let _ = tx.send(Ok(r)).await;
            }
        });
        Ok(Response::new(Box::pin(
            tokio_stream::wrappers::ReceiverStream::new(rx),
        )))
    }

    type WatchFleetStream =
        std::pin::Pin<Box<dyn Stream<Item = Result<api::WatchFleetResponse, Status>> + Send>>;

    async fn watch_fleet(
        &self,
        request: Request<Streaming<api::WatchFleetRequest>>,
    ) -> Result<Response<Self::WatchFleetStream>, Status> {
        self.gate(&request).await?;
        Err(Status::unimplemented("the mock server does not watch"))
    }

    async fn describe_model(
        &self,
        request: Request<api::DescribeModelRequest>,
    ) -> Result<Response<api::DescribeModelResponse>, Status> {
        self.gate(&request).await?;
        Ok(Response::new(api::DescribeModelResponse {
            model_version: "mock 1".into(),
            ..Default::default()
        }))
    }
    /// Records every attempt; its `index` is its place in the request.
    async fn report_start_attempts(
        &self,
        request: Request<api::ReportStartAttemptsRequest>,
    ) -> Result<Response<api::ReportStartAttemptsResponse>, Status> {
        self.gate(&request).await?;
        let results = request
            .into_inner()
            .attempts
            .into_iter()
            .enumerate()
            .map(|(i, a)| api::AttemptResult {
                index: i as u32,
                outcome: Some(api::attempt_result::Outcome::Recorded(
                    api::RecordedAttempt {
                        vehicle_id: a.vehicle.map(|v| v.vehicle_id).unwrap_or_default(),
                        attempted_at: a.attempted_at,
                        ..Default::default()
                    },
                )),
            })
            .collect();
        Ok(Response::new(api::ReportStartAttemptsResponse { results }))
    }

    /// Counts the attempts of the stream.
    async fn stream_start_attempts(
        &self,
        request: Request<Streaming<api::StreamStartAttemptsRequest>>,
    ) -> Result<Response<api::StreamStartAttemptsResponse>, Status> {
        self.gate(&request).await?;
        let mut input = request.into_inner();
        let mut recorded_count = 0;
        while let Some(item) = input.next().await {
            item?;
            recorded_count += 1;
        }
        Ok(Response::new(api::StreamStartAttemptsResponse {
            recorded_count,
            ..Default::default()
        }))
    }

    async fn get_vehicle_calibration(
        &self,
        request: Request<api::GetVehicleCalibrationRequest>,
    ) -> Result<Response<api::GetVehicleCalibrationResponse>, Status> {
        self.gate(&request).await?;
        Ok(Response::new(api::GetVehicleCalibrationResponse {
            vehicle_id: request.into_inner().vehicle_id,
            ..Default::default()
        }))
    }

    async fn get_fleet_reliability(
        &self,
        request: Request<api::GetFleetReliabilityRequest>,
    ) -> Result<Response<api::GetFleetReliabilityResponse>, Status> {
        self.gate(&request).await?;
        Ok(Response::new(api::GetFleetReliabilityResponse::default()))
    }
}

/// The per-item `google.rpc.Status` the real server puts in a fleet result: the call status's
/// encoded details.
fn rpc_status(s: &Status) -> startmargin_proto::google::rpc::Status {
    use prost::Message;
    startmargin_proto::google::rpc::Status::decode(s.details()).expect("encoded google.rpc.Status")
}

/// A running scripted server.
pub struct Server {
    pub addr: SocketAddr,
    pub seen: Arc<Seen>,
    task: tokio::task::JoinHandle<()>,
}

impl Server {
    /// `http://127.0.0.1:PORT`.
    pub fn uri(&self) -> String {
        format!("http://{}", self.addr)
    }

    /// Calls received so far.
    pub fn calls(&self) -> usize {
        self.seen.calls.load(Ordering::SeqCst)
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        self.task.abort();
    }
}

/// Starts a scripted server on an ephemeral loopback port.
pub async fn start(script: Script) -> Server {
    start_with_margin(script, 3.5).await
}

/// Starts a scripted server whose assessments carry `margin_k`.
pub async fn start_with_margin(script: Script, margin_k: f64) -> Server {
    let listener = tokio::net::TcpListener::bind("127.0.0.1:0").await.unwrap();
    let addr = listener.local_addr().unwrap();
    let seen = Arc::new(Seen::default());
    let mock = Mock {
        script,
        seen: seen.clone(),
        margin_k,
    };
    let task = tokio::spawn(async move {
        tonic::transport::Server::builder()
            .add_service(srv::StartMarginServiceServer::new(mock))
            .serve_with_incoming(TcpListenerStream::new(listener))
            .await
            .unwrap();
    });
    Server { addr, seen, task }
}

/// A loopback port that refuses connections: bound but never listening, so the port stays
/// reserved (no other test's server can take it) while connects get "connection refused".
pub struct DeadEndpoint {
    _socket: tokio::net::TcpSocket,
    pub uri: String,
}

/// A reserved, refusing loopback endpoint; keep it alive for the test's duration.
pub fn dead_endpoint() -> DeadEndpoint {
    let socket = tokio::net::TcpSocket::new_v4().unwrap();
    socket.bind("127.0.0.1:0".parse().unwrap()).unwrap();
    let addr = socket.local_addr().unwrap();
    DeadEndpoint {
        _socket: socket,
        uri: format!("http://{addr}"),
    }
}

/// A valid night for vehicle `id` (the scripted server does not look past the id).
pub fn night(id: &str) -> startmargin_sdk::VehicleNight {
    use startmargin_sdk::{Forecast, FuelGrade, VehicleNight, VehicleProfile};
    use std::time::{Duration, UNIX_EPOCH};
    let t0 = UNIX_EPOCH + Duration::from_secs(1_736_899_200);
    let profile = VehicleProfile::builder(id)
        .archetype("compact-di-i4")
        .battery(650.0, 12.0)
        .oil("5W-40")
        .fuel_grade(FuelGrade::En590ClassD)
        .tank_l(60.0)
        .build()
        .unwrap();
    let forecast = Forecast::hourly(t0)
        .points([(0.0, 3.0, 50.0), (-2.0, 2.0, 30.0)])
        .build()
        .unwrap();
    VehicleNight::new(profile, forecast, t0 + Duration::from_secs(7200))
}
