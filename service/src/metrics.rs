//! Process metrics in the Prometheus text exposition format: calls and their latencies by RPC and
//! status code, vehicles watched, alerts raised, and model time. Plain atomics so that recording
//! costs a few nanoseconds and never blocks; [`render`] writes the exposition text that the
//! metrics endpoint serves.

use std::fmt::Write as _;
use std::sync::atomic::{AtomicI64, AtomicU64, Ordering};
use std::time::Duration;

/// RPCs we count.
pub const RPCS: [&str; 4] = [
    "AssessVehicle",
    "AssessFleet",
    "WatchFleet",
    "DescribeModel",
];
/// Status codes we count (tonic::Code as i32 indexes this table, 0..=16).
const CODES: usize = 17;
/// Latency histogram bucket upper bounds, seconds.
pub const LATENCY_BUCKETS_S: [f64; 10] = [
    0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.5, 2.5,
];

struct Rpc {
    calls_by_code: [AtomicU64; CODES],
    latency_buckets: [AtomicU64; LATENCY_BUCKETS_S.len()],
    latency_count: AtomicU64,
    latency_sum_ns: AtomicU64,
}

#[allow(clippy::declare_interior_mutable_const)]
const ZERO: AtomicU64 = AtomicU64::new(0);
#[allow(clippy::declare_interior_mutable_const)]
const RPC: Rpc = Rpc {
    calls_by_code: [ZERO; CODES],
    latency_buckets: [ZERO; LATENCY_BUCKETS_S.len()],
    latency_count: ZERO,
    latency_sum_ns: ZERO,
};

static CALLS: [Rpc; 4] = [RPC, RPC, RPC, RPC];
static VEHICLES_WATCHED: AtomicI64 = AtomicI64::new(0);
static ALERTS_RAISED: AtomicU64 = AtomicU64::new(0);
static ALERTS_CLEARED: AtomicU64 = AtomicU64::new(0);
static ASSESSMENTS: AtomicU64 = AtomicU64::new(0);
static MODEL_TIME_NS: AtomicU64 = AtomicU64::new(0);

/// Records one finished call of `rpc` with its status code and latency.
pub fn record_call(rpc: &str, code: tonic::Code, latency: Duration) {
    let Some(i) = RPCS.iter().position(|r| *r == rpc) else {
        return;
    };
    let r = &CALLS[i];
    r.calls_by_code[(code as usize).min(CODES - 1)].fetch_add(1, Ordering::Relaxed);
    let s = latency.as_secs_f64();
    for (b, bound) in r.latency_buckets.iter().zip(LATENCY_BUCKETS_S) {
        if s <= bound {
            b.fetch_add(1, Ordering::Relaxed);
        }
    }
    r.latency_count.fetch_add(1, Ordering::Relaxed);
    r.latency_sum_ns.fetch_add(
        latency.as_nanos().min(u128::from(u64::MAX)) as u64,
        Ordering::Relaxed,
    );
}

/// Records one model assessment and the time it took.
pub fn record_model_time(elapsed: Duration) {
    ASSESSMENTS.fetch_add(1, Ordering::Relaxed);
    MODEL_TIME_NS.fetch_add(
        elapsed.as_nanos().min(u128::from(u64::MAX)) as u64,
        Ordering::Relaxed,
    );
}

/// Changes the number of vehicles watched by `delta`.
pub fn add_vehicles_watched(delta: i64) {
    VEHICLES_WATCHED.fetch_add(delta, Ordering::Relaxed);
}

/// Counts a raised alert.
pub fn alert_raised() {
    ALERTS_RAISED.fetch_add(1, Ordering::Relaxed);
}

/// Counts a cleared alert.
pub fn alert_cleared() {
    ALERTS_CLEARED.fetch_add(1, Ordering::Relaxed);
}

/// Vehicles watched right now.
pub fn vehicles_watched() -> i64 {
    VEHICLES_WATCHED.load(Ordering::Relaxed)
}

fn code_name(i: usize) -> String {
    format!("{:?}", tonic::Code::from_i32(i as i32))
}

/// The exposition text of every metric.
pub fn render() -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "# HELP startmargin_calls_total Finished calls by RPC and status code."
    );
    let _ = writeln!(out, "# TYPE startmargin_calls_total counter");
    for (rpc, r) in RPCS.iter().zip(&CALLS) {
        for (i, c) in r.calls_by_code.iter().enumerate() {
            let n = c.load(Ordering::Relaxed);
            if n > 0 {
                let _ = writeln!(
                    out,
                    "startmargin_calls_total{{rpc=\"{rpc}\",code=\"{}\"}} {n}",
                    code_name(i)
                );
            }
        }
    }
    let _ = writeln!(
        out,
        "# HELP startmargin_call_duration_seconds Call latency by RPC."
    );
    let _ = writeln!(out, "# TYPE startmargin_call_duration_seconds histogram");
    for (rpc, r) in RPCS.iter().zip(&CALLS) {
        for (b, bound) in r.latency_buckets.iter().zip(LATENCY_BUCKETS_S) {
            let _ = writeln!(
                out,
                "startmargin_call_duration_seconds_bucket{{rpc=\"{rpc}\",le=\"{bound}\"}} {}",
                b.load(Ordering::Relaxed)
            );
        }
        let count = r.latency_count.load(Ordering::Relaxed);
        let _ = writeln!(
            out,
            "startmargin_call_duration_seconds_bucket{{rpc=\"{rpc}\",le=\"+Inf\"}} {count}"
        );
        let _ = writeln!(
            out,
            "startmargin_call_duration_seconds_sum{{rpc=\"{rpc}\"}} {}",
            r.latency_sum_ns.load(Ordering::Relaxed) as f64 * 1e-9
        );
        let _ = writeln!(
            out,
            "startmargin_call_duration_seconds_count{{rpc=\"{rpc}\"}} {count}"
        );
    }
    let gauge = |out: &mut String, name: &str, help: &str, kind: &str, v: String| {
        let _ = writeln!(
            out,
            "# HELP {name} {help}\n# TYPE {name} {kind}\n{name} {v}"
        );
    };
    gauge(
        &mut out,
        "startmargin_vehicles_watched",
        "Vehicles held by open WatchFleet streams.",
        "gauge",
        VEHICLES_WATCHED.load(Ordering::Relaxed).to_string(),
    );
    gauge(
        &mut out,
        "startmargin_alerts_raised_total",
        "Alerts raised by WatchFleet.",
        "counter",
        ALERTS_RAISED.load(Ordering::Relaxed).to_string(),
    );
    gauge(
        &mut out,
        "startmargin_alerts_cleared_total",
        "Alerts cleared by WatchFleet.",
        "counter",
        ALERTS_CLEARED.load(Ordering::Relaxed).to_string(),
    );
    gauge(
        &mut out,
        "startmargin_assessments_total",
        "Model assessments run.",
        "counter",
        ASSESSMENTS.load(Ordering::Relaxed).to_string(),
    );
    gauge(
        &mut out,
        "startmargin_model_seconds_total",
        "Time spent in the model.",
        "counter",
        (MODEL_TIME_NS.load(Ordering::Relaxed) as f64 * 1e-9).to_string(),
    );
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recorded_calls_appear_in_the_exposition() {
        record_call("DescribeModel", tonic::Code::Ok, Duration::from_micros(700));
        alert_raised();
        let text = render();
        assert!(text.contains("startmargin_calls_total{rpc=\"DescribeModel\",code=\"Ok\"}"));
        assert!(text.contains(
            "startmargin_call_duration_seconds_bucket{rpc=\"DescribeModel\",le=\"0.001\"}"
        ));
        assert!(text.contains("# TYPE startmargin_alerts_raised_total counter"));
        // Unknown RPC names are ignored rather than panicking.
        record_call("NoSuchRpc", tonic::Code::Ok, Duration::ZERO);
    }
}
