//! The `startmargin.v1.StartMarginService` as a tower service: routes each RPC's HTTP/2 request
//! to [`StartMarginApi`], reading the request with [`Inbound`] (so that undecodable or over-size
//! input is refused with INVALID_ARGUMENT or RESOURCE_EXHAUSTED, per item in the streams) and
//! encoding the answers with prost. It replaces the generated server, whose codec ends a call at
//! the first message it cannot decode and reports it as INTERNAL or OUT_OF_RANGE.

use std::convert::Infallible;
use std::pin::Pin;
use std::sync::Arc;
use std::task::{Context, Poll};

use startmargin_proto::v1 as pb;
use tokio_stream::Stream;
use tonic::body::Body;
use tonic::codec::{BufferSettings, EncodeBody, SingleMessageCompressionOverride};
use tonic::server::NamedService;
use tonic::{Request, Response, Status};
use tonic_prost::ProstEncoder;

use super::decode::ItemKind;
use super::inbound::Inbound;
use crate::api::{
    ATTEMPT_PATH, ATTEMPTS_PATH, FLEET_ITEM_PATH, NIGHT_PATH, StartMarginApi, WATCH_UPDATE_PATH,
};

/// Fully qualified name of the API service.
pub const SERVICE_NAME: &str = "startmargin.v1.StartMarginService";

/// The API service on the router.
#[derive(Debug, Clone)]
pub struct ApiRoutes {
    api: Arc<StartMarginApi>,
    max_message_bytes: usize,
}

impl ApiRoutes {
    /// Serves `api`; request messages longer than `max_message_bytes` are refused.
    pub fn new(api: StartMarginApi, max_message_bytes: usize) -> Self {
        Self {
            api: Arc::new(api),
            max_message_bytes,
        }
    }
}

impl NamedService for ApiRoutes {
    const NAME: &'static str = SERVICE_NAME;
}

const UNARY: ItemKind = ItemKind {
    top_path: NIGHT_PATH,
    in_stream: false,
};
const DESCRIBE: ItemKind = ItemKind {
    top_path: "",
    in_stream: false,
};
const FLEET: ItemKind = ItemKind {
    top_path: FLEET_ITEM_PATH,
    in_stream: true,
};
const WATCH: ItemKind = ItemKind {
    top_path: WATCH_UPDATE_PATH,
    in_stream: true,
};
const REPORT: ItemKind = ItemKind {
    top_path: ATTEMPTS_PATH,
    in_stream: false,
};
const ATTEMPT_STREAM: ItemKind = ItemKind {
    top_path: ATTEMPT_PATH,
    in_stream: true,
};
const READ_OUT: ItemKind = ItemKind {
    top_path: "",
    in_stream: false,
};

type BoxFuture<T> = Pin<Box<dyn Future<Output = T> + Send>>;

impl tower::Service<http::Request<Body>> for ApiRoutes {
    type Response = http::Response<Body>;
    type Error = Infallible;
    type Future = BoxFuture<Result<Self::Response, Infallible>>;

    fn poll_ready(&mut self, _cx: &mut Context<'_>) -> Poll<Result<(), Infallible>> {
        Poll::Ready(Ok(()))
    }

    fn call(&mut self, request: http::Request<Body>) -> Self::Future {
        let api = Arc::clone(&self.api);
        let limit = self.max_message_bytes;
        Box::pin(async move {
            let (parts, body) = request.into_parts();
            let rpc = parts
                .uri
                .path()
                .strip_prefix('/')
                .and_then(|p| p.strip_prefix(SERVICE_NAME))
                .and_then(|p| p.strip_prefix('/'))
                .unwrap_or_default()
                .to_string();
            let response = match rpc.as_str() {
                "AssessVehicle" => {
                    match single(Inbound::<pb::AssessVehicleRequest>::new(body, limit, UNARY)).await
                    {
                        Ok(message) => unary(api.assess_vehicle(rebuild(parts, message)).await),
                        Err(status) => status.into_http(),
                    }
                }
                "DescribeModel" => {
                    match single(Inbound::<pb::DescribeModelRequest>::new(
                        body, limit, DESCRIBE,
                    ))
                    .await
                    {
                        Ok(message) => unary(api.describe_model(rebuild(parts, message)).await),
                        Err(status) => status.into_http(),
                    }
                }
                "AssessFleet" => {
                    let inbound = Inbound::new(body, limit, FLEET);
                    streaming(api.assess_fleet(rebuild(parts, inbound)).await)
                }
                "WatchFleet" => {
                    let inbound = Inbound::new(body, limit, WATCH);
                    streaming(api.watch_fleet(rebuild(parts, inbound)).await)
                }
                "ReportStartAttempts" => {
                    match single(Inbound::<pb::ReportStartAttemptsRequest>::new(
                        body, limit, REPORT,
                    ))
                    .await
                    {
                        Ok(message) => {
                            unary(api.report_start_attempts(rebuild(parts, message)).await)
                        }
                        Err(status) => status.into_http(),
                    }
                }
                "StreamStartAttempts" => {
                    let inbound = Inbound::new(body, limit, ATTEMPT_STREAM);
                    unary(api.stream_start_attempts(rebuild(parts, inbound)).await)
                }
                "GetVehicleCalibration" => {
                    match single(Inbound::<pb::GetVehicleCalibrationRequest>::new(
                        body, limit, READ_OUT,
                    ))
                    .await
                    {
                        Ok(message) => {
                            unary(api.get_vehicle_calibration(rebuild(parts, message)).await)
                        }
                        Err(status) => status.into_http(),
                    }
                }
                "GetFleetReliability" => {
                    match single(Inbound::<pb::GetFleetReliabilityRequest>::new(
                        body, limit, READ_OUT,
                    ))
                    .await
                    {
                        Ok(message) => {
                            unary(api.get_fleet_reliability(rebuild(parts, message)).await)
                        }
                        Err(status) => status.into_http(),
                    }
                }
                _ => Status::unimplemented(format!("no method {rpc:?} in {SERVICE_NAME}"))
                    .into_http(),
            };
            Ok(response)
        })
    }
}

/// The one request message of a unary call.
async fn single<T: prost::Message + Default>(mut inbound: Inbound<T>) -> Result<T, Status> {
    match inbound.message().await? {
        Some(Ok(message)) => Ok(message),
        Some(Err(bad)) => Err(bad.error.into()),
        None => Err(Status::invalid_argument(
            "the call carries no request message",
        )),
    }
}

/// The gRPC request for a handler, with the HTTP request's metadata and extensions (tenant,
/// connection info).
fn rebuild<T>(parts: http::request::Parts, message: T) -> Request<T> {
    Request::from_http(http::Request::from_parts(parts, message))
}

fn unary<M>(response: Result<Response<M>, Status>) -> http::Response<Body>
where
    M: prost::Message + Send + 'static,
{
    streaming(response.map(|r| r.map(|m| tokio_stream::once(Ok(m)))))
}

fn streaming<M, S>(response: Result<Response<S>, Status>) -> http::Response<Body>
where
    M: prost::Message + Send + 'static,
    S: Stream<Item = Result<M, Status>> + Send + 'static,
{
    let response = match response {
        Ok(response) => response,
        Err(status) => return status.into_http(),
    };
    let (metadata, messages, extensions) = response.into_parts();
    let body = EncodeBody::new_server(
        ProstEncoder::<M>::new(BufferSettings::default()),
        messages,
        None,
        SingleMessageCompressionOverride::default(),
        None,
    );
    let mut http = http::Response::new(Body::new(body));
    *http.version_mut() = http::Version::HTTP_2;
    *http.headers_mut() = metadata.into_headers();
    *http.extensions_mut() = extensions;
    http.headers_mut().insert(
        http::header::CONTENT_TYPE,
        http::HeaderValue::from_static("application/grpc"),
    );
    http
}
