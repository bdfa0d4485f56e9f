//! The client: endpoints, deadlines, retries and round-robin balancing, written above the
//! generated tonic client.
//!
//! - Deadlines: every unary attempt carries `grpc-timeout` and is also bounded locally; a fleet
//!   stream gets its own (optional) deadline.
//! - Retries: only the idempotent unary calls (`AssessVehicle`, `DescribeModel`: deterministic, no
//!   side effects; `ReportStartAttempts`: recorded once per vehicle and attempt time, so a resend
//!   is a no-op; the calibration read-outs), only on `UNAVAILABLE`, with jittered exponential backoff ([`Backoff`]).
//!   Streams are never retried: the caller owns their items.
//! - Balancing: one channel per endpoint, picked round-robin per call; a retry goes to the next
//!   endpoint, so a dead endpoint costs one backoff, not the call. (tonic's `balance_list` waits
//!   for a ready endpoint instead of failing over, which hides a dead fleet behind the deadline.)

use std::future::Future;
use std::pin::Pin;
use std::sync::Arc;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::task::{Context, Poll, ready};
use std::time::Duration;

use startmargin_proto::v1 as api;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use tokio_stream::{Stream, StreamExt};
use tonic::Code;
use tonic::transport::{Channel, Endpoint};

use crate::fleet::{FleetItem, FleetResult, FleetResults};
use crate::retry::{Backoff, default_jitter_key};
use crate::{Error, ModelDescription, VehicleAssessment, VehicleNight};

/// A connection to one or more startmargin servers. Cheap to clone; clones share the channels.
#[derive(Debug, Clone)]
pub struct Client {
    channels: Arc<[StartMarginServiceClient<Channel>]>,
    next: Arc<AtomicUsize>,
    timeout: Option<Duration>,
    stream_timeout: Option<Duration>,
    max_retries: u32,
    backoff: Backoff,
    jitter_key: u64,
}

/// Builder of a [`Client`].
///
/// ```no_run
/// use std::time::Duration;
/// use startmargin_sdk::Client;
///
/// # async fn run() -> Result<(), startmargin_sdk::Error> {
/// let client = Client::builder(["http://10.0.0.5:50051", "http://10.0.0.6:50051"])
///     .timeout(Duration::from_secs(5))
///     .connect_timeout(Duration::from_secs(2))
///     .max_retries(3)
///     .backoff(Duration::from_millis(100), Duration::from_secs(2))
///     .build()
///     .await?;
/// let model = client.describe_model().await?;
/// println!("{}", model.model_version);
/// # Ok(()) }
/// ```
#[derive(Debug, Clone)]
pub struct ClientBuilder {
    endpoints: Vec<String>,
    timeout: Option<Duration>,
    stream_timeout: Option<Duration>,
    connect_timeout: Duration,
    max_retries: u32,
    backoff: Backoff,
    jitter_key: Option<u64>,
    lazy: bool,
}

impl Client {
    /// Starts a client for these endpoints (URIs such as `http://127.0.0.1:50051`).
    pub fn builder(endpoints: impl IntoIterator<Item = impl Into<String>>) -> ClientBuilder {
        ClientBuilder {
            endpoints: endpoints.into_iter().map(Into::into).collect(),
            timeout: Some(Duration::from_secs(10)),
            stream_timeout: None,
            connect_timeout: Duration::from_secs(5),
            max_retries: 3,
            backoff: Backoff::default(),
            jitter_key: None,
            lazy: false,
        }
    }

    /// Assesses one vehicle for one planned departure (retried on `UNAVAILABLE`).
    ///
    /// ```no_run
    /// # use startmargin_sdk::{Client, VehicleNight};
    /// # async fn run(client: Client, night: VehicleNight) -> Result<(), startmargin_sdk::Error> {
    /// let a = client.assess_vehicle(night).await?;
    /// println!("{}: margin {:+.1} K, start expected: {}", a.vehicle_id, a.start_margin_k, a.start_expected);
    /// # Ok(()) }
    /// ```
    pub async fn assess_vehicle(&self, night: VehicleNight) -> Result<VehicleAssessment, Error> {
        let request = api::AssessVehicleRequest {
            night: Some(night.into_pb()),
        };
        let response = self
            .unary(request, |mut c, r| async move { c.assess_vehicle(r).await })
            .await?;
        response
            .assessment
            .ok_or_else(|| Error::Other(Code::Internal, "response carries no assessment".into()))
    }

    /// Describes the model: version, methods and sources, defaults, archetypes, fuel grades
    /// (retried on `UNAVAILABLE`).
    pub async fn describe_model(&self) -> Result<ModelDescription, Error> {
        self.unary(api::DescribeModelRequest {}, |mut c, r| async move {
            c.describe_model(r).await
        })
        .await
    }

    /// Assesses a fleet over one bidirectional stream. Items are sent as the input stream yields
    /// them; results come back as they are computed. A bad vehicle gets its own error in its
    /// result and the stream goes on. Not retried.
    ///
    /// ```no_run
    /// # use startmargin_sdk::{Client, FleetItem, FleetOutcome, VehicleNight};
    /// use tokio_stream::StreamExt;
    /// # async fn run(client: Client, nights: Vec<VehicleNight>) -> Result<(), startmargin_sdk::Error> {
    /// let mut results = client.assess_fleet(tokio_stream::iter(nights.into_iter().map(FleetItem::vehicle)));
    /// while let Some(result) = results.next().await {
    ///     let result = result?; // the stream itself failed
    ///     match result.outcome {
    ///         Ok(FleetOutcome::Assessment(a)) => println!("{}: {:+.1} K", a.vehicle_id, a.start_margin_k),
    ///         Ok(FleetOutcome::PlugInPlan(p)) => println!("plan for {}", p.depot_id),
    ///         Err(e) => println!("{}: {e}", result.vehicle_id),
    ///     }
    /// }
    /// # Ok(()) }
    /// ```
    pub fn assess_fleet<S>(&self, items: S) -> FleetResults
    where
        S: Stream<Item = FleetItem> + Send + 'static,
    {
        let mut client = self.pick();
        let timeout = self.stream_timeout;
        let open = async move {
            let mut request = tonic::Request::new(items.map(FleetItem::into_pb));
            if let Some(t) = timeout {
                request.set_timeout(t);
            }
            client.assess_fleet(request).await
        };
        FleetResults::new(FleetStream::Opening(Box::pin(open)))
    }

    /// The deadline of streams, when one is set.
    pub(crate) fn stream_timeout(&self) -> Option<Duration> {
        self.stream_timeout
    }

    /// The next channel, round-robin.
    pub(crate) fn pick(&self) -> StartMarginServiceClient<Channel> {
        self.pick_from(self.next.fetch_add(1, Ordering::Relaxed), 0)
    }

    /// The channel of a call's `attempt`: a retry always moves on from the channel its call
    /// started on, whatever other calls do meanwhile, so a dead endpoint is not tried twice in a row.
    fn pick_from(&self, start: usize, attempt: u32) -> StartMarginServiceClient<Channel> {
        self.channels[(start + attempt as usize) % self.channels.len()].clone()
    }

    /// One idempotent unary call with deadline and retries while the endpoint is going away
    /// ([`retryable`]).
    pub(crate) async fn unary<Req, Resp, F, Fut>(
        &self,
        request: Req,
        call: F,
    ) -> Result<Resp, Error>
    where
        Req: Clone,
        F: Fn(StartMarginServiceClient<Channel>, tonic::Request<Req>) -> Fut,
        Fut: Future<Output = Result<tonic::Response<Resp>, tonic::Status>>,
    {
        let mut attempt = 0u32;
        let start = self.next.fetch_add(1, Ordering::Relaxed);
        loop {
            let mut r = tonic::Request::new(request.clone());
            let channel = self.pick_from(start, attempt);
            let outcome = match self.timeout {
                Some(t) => {
                    r.set_timeout(t);
                    match tokio::time::timeout(t, call(channel, r)).await {
                        Ok(outcome) => outcome,
                        Err(_) => return Err(deadline_exceeded(t)),
                    }
                }
                None => call(channel, r).await,
            };
            match outcome {
                Ok(response) => return Ok(response.into_inner()),
                Err(s) if retryable(&s) && attempt < self.max_retries => {
                    tokio::time::sleep(self.backoff.delay(attempt, self.jitter_key)).await;
                    attempt += 1;
                }
                Err(s) => return Err(map_status(s)),
            }
        }
    }
}

/// Whether a unary call may be sent again, to the next endpoint: `UNAVAILABLE` (the server
/// drains, or cannot be reached), or `CANCELLED` not from our own deadline (the connection was
/// torn down under the call, as when a draining server exits). Every unary RPC is idempotent
/// (assessments are pure; a resent start attempt is a duplicate), so a retry never counts twice.
fn retryable(s: &tonic::Status) -> bool {
    match s.code() {
        Code::Unavailable => true,
        Code::Cancelled => !matches!(map_status(s.clone()), Error::DeadlineExceeded(_)),
        _ => false,
    }
}

fn deadline_exceeded(t: Duration) -> Error {
    Error::DeadlineExceeded(format!("no answer within {t:?}"))
}

/// tonic reports its own client-side deadline as `CANCELLED` "Timeout expired"; callers see
/// `DeadlineExceeded` either way.
pub(crate) fn map_status(s: tonic::Status) -> Error {
    if s.code() == Code::Cancelled && s.message() == "Timeout expired" {
        Error::DeadlineExceeded(s.message().to_string())
    } else {
        Error::from(s)
    }
}

impl ClientBuilder {
    /// Deadline of each unary attempt (default 10 s); sent as `grpc-timeout` and enforced locally.
    pub fn timeout(mut self, timeout: Duration) -> Self {
        self.timeout = Some(timeout);
        self
    }

    /// No deadline on unary calls (not recommended).
    pub fn no_timeout(mut self) -> Self {
        self.timeout = None;
        self
    }

    /// Deadline of a whole fleet stream (default none: a large fleet takes as long as it takes).
    pub fn stream_timeout(mut self, timeout: Duration) -> Self {
        self.stream_timeout = Some(timeout);
        self
    }

    /// Time allowed to open a connection (default 5 s).
    pub fn connect_timeout(mut self, timeout: Duration) -> Self {
        self.connect_timeout = timeout;
        self
    }

    /// Retries of an idempotent unary call after `UNAVAILABLE`, or `CANCELLED` by a connection torn
    /// down under it (default 3; 0 disables retries).
    pub fn max_retries(mut self, n: u32) -> Self {
        self.max_retries = n;
        self
    }

    /// Backoff before retry n: `min(max, base·2ⁿ)`, jittered into its upper half (default 100 ms, 2 s).
    pub fn backoff(mut self, base: Duration, max: Duration) -> Self {
        self.backoff = Backoff { base, max };
        self
    }

    /// Key of the deterministic backoff jitter (default: differs per client and process).
    pub fn jitter_key(mut self, key: u64) -> Self {
        self.jitter_key = Some(key);
        self
    }

    /// Do not connect in `build`; connect on first use instead (and never fail `build` on the network).
    pub fn lazy(mut self) -> Self {
        self.lazy = true;
        self
    }

    /// Builds the client. Unless [`ClientBuilder::lazy`], connects to every endpoint and fails
    /// with [`Error::Transport`] when none is reachable; endpoints that fail now are retried on use.
    pub async fn build(self) -> Result<Client, Error> {
        if self.endpoints.is_empty() {
            return Err(Error::Transport("no endpoint given".into()));
        }
        if self.backoff.base > self.backoff.max {
            return Err(Error::Transport(format!(
                "backoff base {:?} exceeds its max {:?}",
                self.backoff.base, self.backoff.max
            )));
        }
        let mut endpoints = Vec::with_capacity(self.endpoints.len());
        for uri in &self.endpoints {
            let e = Endpoint::from_shared(uri.clone())
                .map_err(|e| Error::Transport(format!("endpoint {uri:?}: {}", chain(&e))))?
                .connect_timeout(self.connect_timeout)
                .tcp_nodelay(true)
                .http2_keep_alive_interval(Duration::from_secs(30))
                .keep_alive_timeout(Duration::from_secs(10))
                .keep_alive_while_idle(true);
            endpoints.push(e);
        }
        let channels: Vec<Channel> = if self.lazy {
            endpoints.iter().map(Endpoint::connect_lazy).collect()
        } else {
            connect_all(&endpoints).await?
        };
        Ok(Client {
            channels: channels
                .into_iter()
                .map(StartMarginServiceClient::new)
                .collect(),
            next: Arc::new(AtomicUsize::new(0)),
            timeout: self.timeout,
            stream_timeout: self.stream_timeout,
            max_retries: self.max_retries,
            backoff: self.backoff,
            jitter_key: self.jitter_key.unwrap_or_else(default_jitter_key),
        })
    }
}

/// Connects every endpoint concurrently; unreachable ones get a lazy channel, unless none is reachable.
async fn connect_all(endpoints: &[Endpoint]) -> Result<Vec<Channel>, Error> {
    let mut tasks = tokio::task::JoinSet::new();
    for (i, e) in endpoints.iter().enumerate() {
        let e = e.clone();
        tasks.spawn(async move { (i, e.connect().await) });
    }
    let mut connected: Vec<Option<Channel>> = vec![None; endpoints.len()];
    let mut last_error = String::new();
    while let Some(joined) = tasks.join_next().await {
        match joined {
            Ok((i, Ok(channel))) => connected[i] = Some(channel),
            Ok((i, Err(e))) => last_error = format!("{}: {}", endpoints[i].uri(), chain(&e)),
            Err(e) => last_error = format!("connect task failed: {e}"),
        }
    }
    if connected.iter().all(Option::is_none) {
        return Err(Error::Transport(format!(
            "no endpoint reachable ({last_error})"
        )));
    }
    Ok(connected
        .into_iter()
        .zip(endpoints)
        .map(|(c, e)| c.unwrap_or_else(|| e.connect_lazy()))
        .collect())
}

/// An error and its sources, one line.
fn chain(e: &dyn std::error::Error) -> String {
    let mut s = e.to_string();
    let mut source = e.source();
    while let Some(inner) = source {
        s.push_str(": ");
        s.push_str(&inner.to_string());
        source = inner.source();
    }
    s
}

type OpenFuture = Pin<
    Box<
        dyn Future<
                Output = Result<
                    tonic::Response<tonic::Streaming<api::AssessFleetResponse>>,
                    tonic::Status,
                >,
            > + Send,
    >,
>;

/// The fleet call: opening, then streaming results, then done.
pub(crate) enum FleetStream {
    Opening(OpenFuture),
    Streaming(Box<tonic::Streaming<api::AssessFleetResponse>>),
    Done,
}

impl Stream for FleetStream {
    type Item = Result<FleetResult, Error>;

    fn poll_next(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<Option<Self::Item>> {
        loop {
            match &mut *self {
                FleetStream::Opening(open) => match ready!(open.as_mut().poll(cx)) {
                    Ok(response) => *self = FleetStream::Streaming(Box::new(response.into_inner())),
                    Err(s) => {
                        *self = FleetStream::Done;
                        return Poll::Ready(Some(Err(map_status(s))));
                    }
                },
                FleetStream::Streaming(results) => {
                    let next = ready!(Pin::new(&mut **results).poll_next(cx));
                    return Poll::Ready(match next {
                        Some(Ok(r)) => Some(Ok(FleetResult::from(r))),
                        Some(Err(s)) => {
                            *self = FleetStream::Done;
                            Some(Err(map_status(s)))
                        }
                        None => {
                            *self = FleetStream::Done;
                            None
                        }
                    });
                }
                FleetStream::Done => return Poll::Ready(None),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_a_going_away_endpoint_is_retried_never_our_own_deadline() {
        assert!(retryable(&tonic::Status::unavailable("server is draining")));
        assert!(retryable(&tonic::Status::cancelled(
            "operation was canceled"
        )));
        assert!(!retryable(&tonic::Status::cancelled("Timeout expired")));
        for status in [
            tonic::Status::invalid_argument("night.vehicle.battery.capacity_cca"),
            tonic::Status::deadline_exceeded("late"),
            tonic::Status::resource_exhausted("busy"),
            tonic::Status::internal("bug"),
        ] {
            assert!(!retryable(&status), "{status:?}");
        }
    }
}
