//! Process metrics: calls and their latencies by RPC and status code, vehicles watched, alerts
//! raised and cleared, and model time, held in a `prometheus-client` registry (the Prometheus
//! project's own Rust client) and written by [`render`] in the Prometheus text format 0.0.4 that
//! the metrics endpoint serves. Recording is an atomic add (plus a read lock to find a labelled
//! series), so it never blocks a call for long.

use std::sync::LazyLock;
use std::time::Duration;

use prometheus_client::encoding::EncodeLabelSet;
use prometheus_client::metrics::counter::Counter;
use prometheus_client::metrics::family::Family;
use prometheus_client::metrics::gauge::Gauge;
use prometheus_client::metrics::histogram::Histogram;
use prometheus_client::registry::{Registry, Unit};

/// RPCs we count.
pub const RPCS: [&str; 4] = [
    "AssessVehicle",
    "AssessFleet",
    "WatchFleet",
    "DescribeModel",
];
/// Latency histogram bucket upper bounds, seconds.
pub const LATENCY_BUCKETS_S: [f64; 10] = [
    0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.5, 2.5,
];
/// Content type of [`render`]'s output.
pub const CONTENT_TYPE: &str = prometheus_client::encoding::prometheus_text::CONTENT_TYPE;

/// Labels of a finished call.
#[derive(Clone, Debug, Hash, PartialEq, Eq, EncodeLabelSet)]
struct CallLabels {
    rpc: &'static str,
    code: &'static str,
}

/// Labels of a latency series.
#[derive(Clone, Debug, Hash, PartialEq, Eq, EncodeLabelSet)]
struct RpcLabels {
    rpc: &'static str,
}

type LatencyFamily = Family<RpcLabels, Histogram, fn() -> Histogram>;

struct Metrics {
    registry: Registry,
    calls: Family<CallLabels, Counter>,
    latency: LatencyFamily,
    vehicles_watched: Gauge,
    alerts_raised: Counter,
    alerts_cleared: Counter,
    assessments: Counter,
    model_seconds: Counter<f64, std::sync::atomic::AtomicU64>,
}

fn latency_histogram() -> Histogram {
    Histogram::new(LATENCY_BUCKETS_S)
}

static METRICS: LazyLock<Metrics> = LazyLock::new(|| {
    let mut registry = Registry::with_prefix("startmargin");
    let calls = Family::<CallLabels, Counter>::default();
    registry.register(
        "calls",
        "Finished calls by RPC and status code",
        calls.clone(),
    );
    let latency = LatencyFamily::new_with_constructor(latency_histogram);
    registry.register_with_unit(
        "call_duration",
        "Call latency by RPC",
        Unit::Seconds,
        latency.clone(),
    );
    let vehicles_watched = Gauge::default();
    registry.register(
        "vehicles_watched",
        "Vehicles held by open WatchFleet streams",
        vehicles_watched.clone(),
    );
    let alerts_raised = Counter::default();
    registry.register(
        "alerts_raised",
        "Alerts raised by WatchFleet",
        alerts_raised.clone(),
    );
    let alerts_cleared = Counter::default();
    registry.register(
        "alerts_cleared",
        "Alerts cleared by WatchFleet",
        alerts_cleared.clone(),
    );
    let assessments = Counter::default();
    registry.register("assessments", "Model assessments run", assessments.clone());
    let model_seconds = Counter::<f64, std::sync::atomic::AtomicU64>::default();
    registry.register_with_unit(
        "model",
        "Time spent in the model",
        Unit::Seconds,
        model_seconds.clone(),
    );
    Metrics {
        registry,
        calls,
        latency,
        vehicles_watched,
        alerts_raised,
        alerts_cleared,
        assessments,
        model_seconds,
    }
});

/// The label value of a status code: its Rust name (`Ok`, `InvalidArgument`, …), as the
/// dashboards and README use.
fn code_name(code: tonic::Code) -> &'static str {
    use tonic::Code as C;
    match code {
        C::Ok => "Ok",
        C::Cancelled => "Cancelled",
        C::Unknown => "Unknown",
        C::InvalidArgument => "InvalidArgument",
        C::DeadlineExceeded => "DeadlineExceeded",
        C::NotFound => "NotFound",
        C::AlreadyExists => "AlreadyExists",
        C::PermissionDenied => "PermissionDenied",
        C::ResourceExhausted => "ResourceExhausted",
        C::FailedPrecondition => "FailedPrecondition",
        C::Aborted => "Aborted",
        C::OutOfRange => "OutOfRange",
        C::Unimplemented => "Unimplemented",
        C::Internal => "Internal",
        C::Unavailable => "Unavailable",
        C::DataLoss => "DataLoss",
        C::Unauthenticated => "Unauthenticated",
    }
}

/// Records one finished call of `rpc` with its status code and latency; names outside
/// [`RPCS`] are ignored (a label set must stay bounded).
pub fn record_call(rpc: &str, code: tonic::Code, latency: Duration) {
    let Some(rpc) = RPCS.iter().copied().find(|r| *r == rpc) else {
        return;
    };
    let m = &*METRICS;
    m.calls
        .get_or_create(&CallLabels {
            rpc,
            code: code_name(code),
        })
        .inc();
    m.latency
        .get_or_create(&RpcLabels { rpc })
        .observe(latency.as_secs_f64());
}

/// Records one model assessment and the time it took.
pub fn record_model_time(elapsed: Duration) {
    METRICS.assessments.inc();
    METRICS.model_seconds.inc_by(elapsed.as_secs_f64());
}

/// Changes the number of vehicles watched by `delta`.
pub fn add_vehicles_watched(delta: i64) {
    METRICS.vehicles_watched.inc_by(delta);
}

/// Counts a raised alert.
pub fn alert_raised() {
    METRICS.alerts_raised.inc();
}

/// Counts a cleared alert.
pub fn alert_cleared() {
    METRICS.alerts_cleared.inc();
}

/// Vehicles watched right now.
pub fn vehicles_watched() -> i64 {
    METRICS.vehicles_watched.get()
}

/// The exposition text of every metric (Prometheus text format 0.0.4, [`CONTENT_TYPE`]).
pub fn render() -> String {
    let mut out = String::new();
    // Writing into a String cannot fail; the encoder's error type is fmt::Error for other writers.
    let _ = prometheus_client::encoding::prometheus_text::encode(&mut out, &METRICS.registry);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> prometheus_parse::Scrape {
        prometheus_parse::Scrape::parse(text.lines().map(|l| Ok(l.to_owned()))).expect("parses")
    }

    #[test]
    fn recorded_calls_parse_back_with_their_labels_and_types() {
        record_call("DescribeModel", tonic::Code::Ok, Duration::from_micros(700));
        record_call(
            "DescribeModel",
            tonic::Code::InvalidArgument,
            Duration::from_millis(3),
        );
        alert_raised();
        record_model_time(Duration::from_millis(2));
        let text = render();
        let scrape = parse(&text);

        let calls = |code: &str| {
            scrape
                .samples
                .iter()
                .find(|s| {
                    s.metric == "startmargin_calls_total"
                        && s.labels.get("rpc") == Some("DescribeModel")
                        && s.labels.get("code") == Some(code)
                })
                .map(|s| s.value.clone())
        };
        // Counters are process-wide and other tests in this binary may add to them: at least ours.
        let Some(prometheus_parse::Value::Counter(ok)) = calls("Ok") else {
            panic!("no Ok counter in {text}");
        };
        assert!(ok >= 1.0);
        assert!(matches!(
            calls("InvalidArgument"),
            Some(prometheus_parse::Value::Counter(n)) if n >= 1.0
        ));

        let latency = scrape
            .samples
            .iter()
            .find(|s| {
                s.metric == "startmargin_call_duration_seconds"
                    && s.labels.get("rpc") == Some("DescribeModel")
            })
            .expect("a latency histogram");
        let prometheus_parse::Value::Histogram(buckets) = &latency.value else {
            panic!("latency is not a histogram: {:?}", latency.value);
        };
        // Every configured bound plus +Inf, cumulative counts.
        assert_eq!(buckets.len(), LATENCY_BUCKETS_S.len() + 1);
        assert!(buckets.windows(2).all(|w| w[0].count <= w[1].count));
        let le_1ms = buckets
            .iter()
            .find(|b| b.less_than == 0.001)
            .expect("a 1 ms bucket");
        assert!(le_1ms.count >= 1.0, "the 0.7 ms call is at or below 1 ms");

        for (name, kind) in [
            ("startmargin_alerts_raised_total", "counter"),
            ("startmargin_alerts_cleared_total", "counter"),
            ("startmargin_assessments_total", "counter"),
            ("startmargin_model_seconds_total", "counter"),
            ("startmargin_vehicles_watched", "gauge"),
        ] {
            assert!(
                text.contains(&format!("# TYPE {name} {kind}\n")),
                "{name} {kind} in {text}"
            );
        }
        assert!(
            scrape
                .samples
                .iter()
                .any(|s| s.metric == "startmargin_model_seconds_total"
                    && matches!(s.value, prometheus_parse::Value::Counter(v) if v >= 0.002))
        );
    }

    #[test]
    fn unknown_rpc_names_are_ignored() {
        record_call("NoSuchRpc", tonic::Code::Ok, Duration::ZERO);
        assert!(!render().contains("NoSuchRpc"));
    }
}
