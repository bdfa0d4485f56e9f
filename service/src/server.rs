//! The gRPC server: the StartMarginService, the standard `grpc.health.v1.Health` and server
//! reflection (v1 and v1alpha) on one port, with the limits of the configuration (decode size,
//! assessments in flight, HTTP/2 streams per connection, keepalive, deadlines).
//!
//! Graceful drain, bounded in time (tonic's `serve_with_shutdown` alone waits for every
//! connection forever): health turns NOT_SERVING first, a cancellation token then ends every open
//! stream (fleet streams and health watches) with UNAVAILABLE "server is draining", half a
//! second later (so that peers read those statuses) the listener closes, unary calls in flight
//! finish, and after `drain_timeout_s` the server stops regardless.
//!
//! Production layers: TLS (optionally mutual) from [`crate::tls`]; bearer-token authentication
//! from [`crate::auth`] (health and reflection stay open); a [`CallLayer`] that records every API
//! call's status code and latency in [`crate::metrics`] and refuses streams beyond
//! `max_open_streams` at once with RESOURCE_EXHAUSTED; the Prometheus endpoint of
//! [`crate::metrics_http`] on `metrics_listen`.
//!
//! Transport: every accepted connection must send its HTTP/2 preface (or TLS ClientHello) within
//! `handshake_timeout_s` ([`handshake`]). Flow control is set so that a stream the server reads
//! slowly (back-pressure) can never trip h2's small-DATA-frame budget: h2 charges each buffered
//! DATA frame under 256 bytes up to 256 bytes against a per-connection budget of half the
//! connection window, so with hyper's default 1 MiB windows a client streaming items under
//! ~170 bytes (one frame each) into a paused reader is cut off with GOAWAY ENHANCE_YOUR_CALM
//! "too_many_data_frames", killing every call on the connection. The server therefore opens the
//! connection window to its maximum (budget ≈ 1 GiB) and bounds what is really buffered with the
//! per-stream window `http2_stream_window_bytes` (memory per connection ≤
//! `max_concurrent_streams` × that window); `Config::validate` checks that even 5-byte frames
//! (an empty gRPC message) filling every stream window stay under the budget.

pub mod handshake;

use std::net::SocketAddr;
use std::pin::Pin;
use std::sync::Arc;
use std::task::{Context, Poll};
use std::time::{Duration, Instant};

use anyhow::Context as _;
use tokio::net::TcpListener;
use tokio::sync::{OwnedSemaphorePermit, Semaphore, mpsc, oneshot};
use tokio::task::JoinHandle;
use tokio_stream::StreamExt as _;
use tokio_stream::wrappers::ReceiverStream;
use tokio_util::sync::CancellationToken;
use tonic::transport::Server;
use tonic::transport::server::TcpIncoming;
use tonic::{Request, Response, Status};
use tonic_health::ServingStatus;
use tonic_health::pb::health_server::{Health, HealthServer};
use tonic_health::pb::{HealthCheckRequest, HealthCheckResponse, health_check_response};
use tonic_health::server::{HealthReporter, HealthService};
use tracing::{info, warn};

use crate::api::{DRAINING_MESSAGE, StartMarginApi};
use crate::auth::{AuthLayer, TokenTable};
use crate::codec::ApiRoutes;
use crate::config::Config;
use crate::metrics;

/// Fully qualified name of the API service, as health checks and reflection name it.
pub const SERVICE_NAME: &str = crate::codec::SERVICE_NAME;

/// A server running on the current tokio runtime.
#[derive(Debug)]
pub struct RunningServer {
    /// The bound address (with the real port when the configuration asked for port 0).
    pub addr: SocketAddr,
    /// The bound address of the metrics endpoint, `None` when it is off.
    pub metrics_addr: Option<SocketAddr>,
    shutdown: CancellationToken,
    task: JoinHandle<anyhow::Result<()>>,
}

impl RunningServer {
    /// Drains and stops the server, returning once it has stopped (within `drain_timeout_s`).
    pub async fn shutdown(self) -> anyhow::Result<()> {
        self.shutdown.cancel();
        self.task.await.context("the server task failed")?
    }

    /// A token that starts the drain when cancelled (e.g. from a signal handler); `shutdown`
    /// then waits for the end.
    pub fn shutdown_token(&self) -> CancellationToken {
        self.shutdown.clone()
    }

    /// Waits until the server stops, by drain or by a fatal error of the listener.
    pub async fn wait(self) -> anyhow::Result<()> {
        self.task.await.context("the server task failed")?
    }
}

/// Checks everything [`spawn`] would refuse before it binds: the keys ([`Config::validate`]),
/// the TLS files (readable, parsable, key matching the certificate, client CA usable) and the
/// token sources (files readable, variables set, entries well formed). `check-config` runs it,
/// and `serve` exits 64 when it fails.
pub fn check_startup(config: &Config) -> anyhow::Result<()> {
    config.validate()?;
    crate::tls::server_tls_config(config)?;
    TokenTable::from_config(config)?;
    Ok(())
}

/// Binds `config.listen` (use port 0 for a free port), starts the server and returns at once.
pub async fn spawn(config: Config) -> anyhow::Result<RunningServer> {
    config.validate()?;
    let tls = crate::tls::server_tls_config(&config)?;
    let tokens = TokenTable::from_config(&config)?;
    let listener = TcpListener::bind(config.listen)
        .await
        .with_context(|| format!("cannot listen on {}", config.listen))?;
    let addr = listener.local_addr()?;
    let handshake_timeout = config.handshake_timeout();
    let incoming = TcpIncoming::from(listener)
        .with_nodelay(Some(true))
        .map(move |accepted| {
            accepted.map(|tcp| handshake::HandshakeDeadline::new(tcp, handshake_timeout))
        });

    let shutdown = CancellationToken::new();
    let draining = CancellationToken::new();
    let reporter = HealthReporter::new();
    reporter
        .set_service_status("", ServingStatus::Serving)
        .await;
    reporter
        .set_service_status(SERVICE_NAME, ServingStatus::Serving)
        .await;
    let health = HealthServer::new(DrainAwareHealth {
        inner: HealthService::from_health_reporter(reporter.clone()),
        draining: draining.clone(),
    });

    let store = crate::store::Store::open(&config.store)
        .await
        .context("cannot open the store")?;
    let api = StartMarginApi::new(&config, draining.clone(), store)
        .context("cannot start compute threads")?;
    let api = ApiRoutes::new(api, config.max_decode_message_bytes);
    let reflection_v1 = tonic_reflection::server::Builder::configure()
        .register_encoded_file_descriptor_set(startmargin_proto::FILE_DESCRIPTOR_SET)
        .register_encoded_file_descriptor_set(tonic_health::pb::FILE_DESCRIPTOR_SET)
        .build_v1()
        .context("cannot build reflection v1")?;
    let reflection_v1alpha = tonic_reflection::server::Builder::configure()
        .register_encoded_file_descriptor_set(startmargin_proto::FILE_DESCRIPTOR_SET)
        .register_encoded_file_descriptor_set(tonic_health::pb::FILE_DESCRIPTOR_SET)
        .build_v1alpha()
        .context("cannot build reflection v1alpha")?;

    let mut builder = Server::builder();
    if let Some(age) = config.max_connection_age() {
        // GOAWAY at that age; calls in flight get the drain deadline to finish.
        builder = builder
            .max_connection_age(age)
            .max_connection_age_grace(config.drain_timeout());
    }
    if let Some(tls) = tls {
        builder = builder
            .tls_config(tls)
            .context("invalid TLS certificate or key")?;
    }
    let auth_on = tokens.is_some();
    let router = builder
        .layer(CallLayer::new(config.max_open_streams))
        .layer(AuthLayer::new(tokens))
        .max_concurrent_streams(config.max_concurrent_streams)
        .initial_connection_window_size(crate::config::HTTP2_MAX_WINDOW_BYTES)
        .initial_stream_window_size(config.http2_stream_window_bytes)
        // A measured (adaptive) window would shrink the connection window and with it h2's
        // small-frame budget; fixed windows keep the bound above.
        .http2_adaptive_window(Some(false))
        .http2_keepalive_interval(config.http2_keepalive_interval())
        .http2_keepalive_timeout(Some(config.http2_keepalive_timeout()))
        .add_service(health)
        .add_service(api)
        .add_service(reflection_v1)
        .add_service(reflection_v1alpha);

    let (stop_tx, stop_rx) = oneshot::channel::<()>();
    let mut serve = tokio::spawn(router.serve_with_incoming_shutdown(incoming, async {
        let _ = stop_rx.await;
    }));

    let stop_metrics = CancellationToken::new();
    let metrics_server = match config.metrics_addr() {
        Some(metrics_addr) => Some(
            crate::metrics_http::spawn(metrics_addr, draining.clone(), stop_metrics.clone())
                .await
                .with_context(|| format!("cannot listen for metrics on {metrics_addr}"))?,
        ),
        None => None,
    };
    let metrics_addr = metrics_server.as_ref().map(|m| m.addr);

    let drain_timeout = config.drain_timeout();
    let token = shutdown.clone();
    let task = tokio::spawn(async move {
        // The metrics endpoint lives as long as the server, through the drain.
        let _stop_metrics = stop_metrics.drop_guard();
        tokio::select! {
            () = token.cancelled() => {}
            ended = &mut serve => {
                // The server ended without being asked to: a listener error.
                return ended.context("the server task failed")?.context("the server failed");
            }
        }
        drain(&reporter, &draining, stop_tx, serve, drain_timeout).await
    });
    info!(%addr, ?metrics_addr, tls = config.tls_cert_path.is_some(), mutual_tls = config.tls_client_ca_path.is_some(), auth = auth_on, "startmargin listening");
    Ok(RunningServer {
        addr,
        metrics_addr,
        shutdown,
        task,
    })
}

/// Defaults on `127.0.0.1:0` with a fresh SQLite store of its own in the system's temporary
/// folder (so that runs neither share history nor leave files in the working directory): what
/// tests, benchmarks and demos use.
pub async fn spawn_on_loopback() -> anyhow::Result<RunningServer> {
    spawn(loopback_config()).await
}

/// [`spawn_on_loopback`] with the SQLite store at `path` (created with its folder on first use).
pub async fn spawn_on_loopback_with_store(path: &std::path::Path) -> anyhow::Result<RunningServer> {
    let mut config = loopback_config();
    config.store.url = format!("sqlite://{}", path.display());
    spawn(config).await
}

/// The default configuration on `127.0.0.1:0` with a fresh SQLite store under the system's
/// temporary folder (`startmargin-<pid>-<n>/starts.db`).
pub fn loopback_config() -> Config {
    static NEXT: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);
    let n = NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let dir = std::env::temp_dir().join(format!("startmargin-{}-{n}", std::process::id()));
    let mut config = Config {
        listen: SocketAddr::from(([127, 0, 0, 1], 0)),
        ..Config::default()
    };
    config.store.url = format!("sqlite://{}", dir.join("starts.db").display());
    config
}

/// How long a drain lets ended streams deliver their final status before connections close.
const STREAM_END_GRACE: Duration = Duration::from_millis(500);

/// Health → NOT_SERVING, streams end, listener closes, unary calls finish, all within `timeout`.
async fn drain(
    reporter: &HealthReporter,
    draining: &CancellationToken,
    stop: oneshot::Sender<()>,
    mut serve: JoinHandle<Result<(), tonic::transport::Error>>,
    timeout: Duration,
) -> anyhow::Result<()> {
    info!(timeout_s = timeout.as_secs_f64(), "draining");
    reporter
        .set_service_status("", ServingStatus::NotServing)
        .await;
    reporter
        .set_service_status(SERVICE_NAME, ServingStatus::NotServing)
        .await;
    draining.cancel();
    // Streams have just been told to end with "server is draining": let their last results and
    // that status reach the peers before connections start closing. Closed at once, a peer still
    // sending on its stream could see its connection fail before it read them.
    let grace = STREAM_END_GRACE.min(timeout / 2);
    tokio::time::sleep(grace).await;
    let _ = stop.send(());
    match tokio::time::timeout(timeout.saturating_sub(grace), &mut serve).await {
        Ok(ended) => {
            ended
                .context("the server task failed")?
                .context("the server failed")?;
            info!("drained");
        }
        Err(_) => {
            serve.abort();
            warn!(
                timeout_s = timeout.as_secs_f64(),
                "drain deadline reached; stopped with calls still open"
            );
        }
    }
    Ok(())
}

/// The standard health service, with watches that end when the server drains (after telling
/// the watcher NOT_SERVING), so that a watching client does not hold the drain open.
#[derive(Debug)]
struct DrainAwareHealth {
    inner: HealthService,
    draining: CancellationToken,
}

#[tonic::async_trait]
impl Health for DrainAwareHealth {
    async fn check(
        &self,
        request: Request<HealthCheckRequest>,
    ) -> Result<Response<HealthCheckResponse>, Status> {
        self.inner.check(request).await
    }

    type WatchStream = ReceiverStream<Result<HealthCheckResponse, Status>>;

    async fn watch(
        &self,
        request: Request<HealthCheckRequest>,
    ) -> Result<Response<Self::WatchStream>, Status> {
        let mut updates = self.inner.watch(request).await?.into_inner();
        let draining = self.draining.clone();
        let (tx, rx) = mpsc::channel(4);
        tokio::spawn(async move {
            let not_serving = health_check_response::ServingStatus::NotServing as i32;
            let mut last = None;
            loop {
                tokio::select! {
                    biased;
                    update = updates.next() => match update {
                        Some(update) => {
                            last = update.as_ref().ok().map(|r| r.status);
                            if tx.send(update).await.is_err() {
                                return;
                            }
                        }
                        None => return,
                    },
                    () = draining.cancelled() => break,
                    () = tx.closed() => return,
                }
            }
            if last != Some(not_serving) {
                let _ = tx
                    .send(Ok(HealthCheckResponse {
                        status: not_serving,
                    }))
                    .await;
            }
            let _ = tx.send(Err(Status::unavailable(DRAINING_MESSAGE))).await;
        });
        Ok(Response::new(ReceiverStream::new(rx)))
    }
}

/// Path prefix of the API's RPCs.
const API_PATH_PREFIX: &str = "/startmargin.v1.StartMarginService/";
/// RPCs that are long-lived streams, limited by `max_open_streams`.
const STREAMING_RPCS: [&str; 2] = ["AssessFleet", "WatchFleet"];

/// Tower layer, outermost: records each API call's status code and latency (for streams, the
/// stream's lifetime) in [`crate::metrics`], and refuses a streaming call at once with
/// RESOURCE_EXHAUSTED when `max_open_streams` streams are already open.
#[derive(Debug, Clone)]
pub struct CallLayer {
    open_streams: Arc<Semaphore>,
}

impl CallLayer {
    /// A layer allowing `max_open_streams` streams at once.
    pub fn new(max_open_streams: usize) -> Self {
        Self {
            open_streams: Arc::new(Semaphore::new(max_open_streams)),
        }
    }
}

impl<S> tower::Layer<S> for CallLayer {
    type Service = Call<S>;

    fn layer(&self, inner: S) -> Self::Service {
        Call {
            inner,
            open_streams: self.open_streams.clone(),
        }
    }
}

/// The service of [`CallLayer`].
#[derive(Debug, Clone)]
pub struct Call<S> {
    inner: S,
    open_streams: Arc<Semaphore>,
}

type BoxFuture<T> = Pin<Box<dyn Future<Output = T> + Send>>;

impl<S, B> tower::Service<http::Request<B>> for Call<S>
where
    S: tower::Service<http::Request<B>, Response = http::Response<tonic::body::Body>>,
    S::Future: Send + 'static,
{
    type Response = http::Response<tonic::body::Body>;
    type Error = S::Error;
    type Future = BoxFuture<Result<Self::Response, Self::Error>>;

    fn poll_ready(&mut self, cx: &mut Context<'_>) -> Poll<Result<(), Self::Error>> {
        self.inner.poll_ready(cx)
    }

    fn call(&mut self, request: http::Request<B>) -> Self::Future {
        let start = Instant::now();
        let rpc = request
            .uri()
            .path()
            .strip_prefix(API_PATH_PREFIX)
            .and_then(|name| metrics::RPCS.iter().copied().find(|r| *r == name));
        let Some(rpc) = rpc else {
            // Health, reflection and unknown paths: not counted.
            return Box::pin(self.inner.call(request));
        };
        let mut permit = None;
        if STREAMING_RPCS.contains(&rpc) {
            match self.open_streams.clone().try_acquire_owned() {
                Ok(p) => permit = Some(p),
                Err(_) => {
                    metrics::record_call(rpc, tonic::Code::ResourceExhausted, start.elapsed());
                    let response = tonic::Status::resource_exhausted(
                        "too many streams open on this server; retry later or elsewhere",
                    )
                    .into_http();
                    return Box::pin(async move { Ok(response) });
                }
            }
        }
        let future = self.inner.call(request);
        Box::pin(async move {
            let response = future.await?;
            let header_code = response
                .headers()
                .get("grpc-status")
                .map(|v| tonic::Code::from_bytes(v.as_bytes()));
            Ok(response.map(|inner| {
                tonic::body::Body::new(RecordedBody {
                    inner,
                    rpc,
                    start,
                    code: header_code,
                    recorded: false,
                    _permit: permit,
                })
            }))
        })
    }
}

/// A response body that records the call when its trailers (or its end, or its drop) come.
struct RecordedBody {
    inner: tonic::body::Body,
    rpc: &'static str,
    start: Instant,
    code: Option<tonic::Code>,
    recorded: bool,
    _permit: Option<OwnedSemaphorePermit>,
}

impl RecordedBody {
    fn record(&mut self, fallback: tonic::Code) {
        if !self.recorded {
            self.recorded = true;
            metrics::record_call(
                self.rpc,
                self.code.unwrap_or(fallback),
                self.start.elapsed(),
            );
        }
    }
}

impl http_body::Body for RecordedBody {
    type Data = <tonic::body::Body as http_body::Body>::Data;
    type Error = <tonic::body::Body as http_body::Body>::Error;

    fn poll_frame(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
    ) -> Poll<Option<Result<http_body::Frame<Self::Data>, Self::Error>>> {
        let polled = Pin::new(&mut self.inner).poll_frame(cx);
        match &polled {
            Poll::Ready(Some(Ok(frame))) => {
                if let Some(code) = frame
                    .trailers_ref()
                    .and_then(|t| t.get("grpc-status"))
                    .map(|v| tonic::Code::from_bytes(v.as_bytes()))
                {
                    self.code = Some(code);
                    self.record(code);
                }
            }
            Poll::Ready(Some(Err(status))) => {
                let code = status.code();
                self.code.get_or_insert(code);
                self.record(code);
            }
            Poll::Ready(None) => self.record(tonic::Code::Ok),
            Poll::Pending => {}
        }
        polled
    }

    fn is_end_stream(&self) -> bool {
        self.inner.is_end_stream()
    }

    fn size_hint(&self) -> http_body::SizeHint {
        self.inner.size_hint()
    }
}

impl Drop for RecordedBody {
    fn drop(&mut self) {
        // Dropped before its end: the client went away.
        self.record(tonic::Code::Cancelled);
    }
}

/// The container health check (`startmargind health-check`): asks the server named by `config`
/// on the loopback interface whether it serves. Without TLS it uses the gRPC health protocol on
/// `listen`; with TLS it asks `GET /healthz` on the metrics endpoint (which must then be on).
pub async fn probe(config: &Config, timeout: Duration) -> anyhow::Result<()> {
    let loopback = |mut addr: SocketAddr| {
        if addr.ip().is_unspecified() {
            addr.set_ip(std::net::Ipv4Addr::LOCALHOST.into());
        }
        addr
    };
    let check = async {
        if config.tls_cert_path.is_none() {
            let addr = loopback(config.listen);
            let channel = tonic::transport::Channel::from_shared(format!("http://{addr}"))?
                .connect()
                .await
                .with_context(|| format!("cannot connect to {addr}"))?;
            let status = tonic_health::pb::health_client::HealthClient::new(channel)
                .check(HealthCheckRequest {
                    service: SERVICE_NAME.to_string(),
                })
                .await?
                .into_inner()
                .status;
            anyhow::ensure!(
                status == health_check_response::ServingStatus::Serving as i32,
                "not serving (status {status})"
            );
            Ok(())
        } else {
            use tokio::io::{AsyncReadExt as _, AsyncWriteExt as _};
            let addr = loopback(config.metrics_listen.parse().context(
                "with TLS on, the health check needs the metrics endpoint (metrics_listen)",
            )?);
            let mut stream = tokio::net::TcpStream::connect(addr)
                .await
                .with_context(|| format!("cannot connect to {addr}"))?;
            stream
                .write_all(b"GET /healthz HTTP/1.1\r\nhost: localhost\r\n\r\n")
                .await?;
            let mut response = Vec::new();
            stream.read_to_end(&mut response).await?;
            anyhow::ensure!(
                response.starts_with(b"HTTP/1.1 200"),
                "not serving: {}",
                String::from_utf8_lossy(response.split(|&b| b == b'\r').next().unwrap_or_default())
            );
            Ok(())
        }
    };
    tokio::time::timeout(timeout, check)
        .await
        .context("the health check timed out")?
}
