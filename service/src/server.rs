//! The gRPC server: the StartMarginService, the standard `grpc.health.v1.Health` and server
//! reflection (v1 and v1alpha) on one port, with the limits of the configuration (decode size,
//! assessments in flight, HTTP/2 streams per connection, keepalive, deadlines).
//!
//! Graceful drain, bounded in time (tonic's `serve_with_shutdown` alone waits for every
//! connection forever): health turns NOT_SERVING first, a cancellation token then ends every open
//! stream (fleet streams and health watches) with UNAVAILABLE "server is draining", the listener
//! closes, unary calls in flight finish, and after `drain_timeout_s` the server stops regardless.

use std::net::SocketAddr;
use std::time::Duration;

use anyhow::Context as _;
use startmargin_proto::v1::start_margin_service_server::StartMarginServiceServer;
use tokio::net::TcpListener;
use tokio::sync::{mpsc, oneshot};
use tokio::task::JoinHandle;
use tokio_stream::StreamExt as _;
use tokio_stream::wrappers::ReceiverStream;
use tokio_util::sync::CancellationToken;
use tonic::server::NamedService;
use tonic::transport::Server;
use tonic::transport::server::TcpIncoming;
use tonic::{Request, Response, Status};
use tonic_health::ServingStatus;
use tonic_health::pb::health_server::{Health, HealthServer};
use tonic_health::pb::{HealthCheckRequest, HealthCheckResponse, health_check_response};
use tonic_health::server::{HealthReporter, HealthService};
use tracing::{info, warn};

use crate::api::{DRAINING_MESSAGE, StartMarginApi};
use crate::config::Config;

/// Fully qualified name of the API service, as health checks and reflection name it.
pub const SERVICE_NAME: &str = <StartMarginServiceServer<StartMarginApi> as NamedService>::NAME;

/// A server running on the current tokio runtime.
#[derive(Debug)]
pub struct RunningServer {
    /// The bound address (with the real port when the configuration asked for port 0).
    pub addr: SocketAddr,
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

/// Binds `config.listen` (use port 0 for a free port), starts the server and returns at once.
pub async fn spawn(config: Config) -> anyhow::Result<RunningServer> {
    config.validate()?;
    let listener = TcpListener::bind(config.listen)
        .await
        .with_context(|| format!("cannot listen on {}", config.listen))?;
    let addr = listener.local_addr()?;
    let incoming = TcpIncoming::from(listener).with_nodelay(Some(true));

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

    let api =
        StartMarginApi::new(&config, draining.clone()).context("cannot start compute threads")?;
    let api = StartMarginServiceServer::new(api)
        .max_decoding_message_size(config.max_decode_message_bytes);
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

    let router = Server::builder()
        .max_concurrent_streams(config.max_concurrent_streams)
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

    let drain_timeout = config.drain_timeout();
    let token = shutdown.clone();
    let task = tokio::spawn(async move {
        tokio::select! {
            () = token.cancelled() => {}
            ended = &mut serve => {
                // The server ended without being asked to: a listener error.
                return ended.context("the server task failed")?.context("the server failed");
            }
        }
        drain(&reporter, &draining, stop_tx, serve, drain_timeout).await
    });
    info!(%addr, "startmargin listening");
    Ok(RunningServer {
        addr,
        shutdown,
        task,
    })
}

/// Defaults on `127.0.0.1:0`: what tests, benchmarks and demos use.
pub async fn spawn_on_loopback() -> anyhow::Result<RunningServer> {
    spawn(Config {
        listen: SocketAddr::from(([127, 0, 0, 1], 0)),
        ..Config::default()
    })
    .await
}

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
    let _ = stop.send(());
    match tokio::time::timeout(timeout, &mut serve).await {
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
