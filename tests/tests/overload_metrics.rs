//! Overload with figures: far more concurrent calls than the limit. Accepted calls are answered,
//! the rest get RESOURCE_EXHAUSTED at once (never UNKNOWN, never a hang), streams beyond
//! `max_open_streams` are refused the same way, the metrics count the refusals by code, and the
//! process's resident memory does not grow round after round. Latency figures are printed for the
//! report (timing is measured, not asserted: it belongs in benchmarks).

use std::time::{Duration, Instant};

use startmargin_e2e::{TestServer, connect, loopback_config, sample_night};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_service::Config;
use tokio::sync::mpsc;
use tokio_stream::wrappers::ReceiverStream;
use tonic::Code;

const LIMIT: usize = 4;
const CONCURRENT: usize = 400;
const ROUNDS: usize = 5;

/// Resident set size of this process, KiB (Linux), or 0 where unknown.
fn rss_kib() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmRSS:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse().ok())
        })
        .unwrap_or(0)
}

/// The value of a sample line `series value` in the exposition, 0 when absent.
fn sample(text: &str, series: &str) -> f64 {
    text.lines()
        .find_map(|l| l.strip_prefix(series)?.trim().parse().ok())
        .unwrap_or(0.0)
}

fn percentile(sorted: &[Duration], p: f64) -> Duration {
    if sorted.is_empty() {
        return Duration::ZERO;
    }
    sorted[((sorted.len() - 1) as f64 * p).round() as usize]
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn far_beyond_the_limit_calls_are_shed_and_memory_stays_bounded() {
    let config = Config {
        concurrency_limit: LIMIT,
        compute_threads: 2,
        ..loopback_config()
    };
    let t = TestServer::start_with(config).await.expect("server");
    let night = sample_night("truck-0001");

    // Baseline: calls one at a time.
    let mut client = t.client();
    let mut alone = Vec::new();
    for _ in 0..10 {
        let started = Instant::now();
        client
            .assess_vehicle(pb::AssessVehicleRequest {
                night: Some(night.clone()),
            })
            .await
            .expect("assessed");
        alone.push(started.elapsed());
    }
    alone.sort();

    // Several connections, so that the client's per-connection stream limit does not queue.
    let mut channels = Vec::new();
    for _ in 0..8 {
        channels.push(connect(t.server.addr).await.expect("connect"));
    }

    let before = startmargin_service::metrics::render();
    let mut rss = Vec::new();
    let (mut accepted, mut shed) = (Vec::new(), Vec::new());
    for _ in 0..ROUNDS {
        let calls: Vec<_> = (0..CONCURRENT)
            .map(|i| {
                let mut client =
                    StartMarginServiceClient::new(channels[i % channels.len()].clone());
                let request = pb::AssessVehicleRequest {
                    night: Some(night.clone()),
                };
                tokio::spawn(async move {
                    let started = Instant::now();
                    let outcome = client.assess_vehicle(request).await;
                    (outcome.map(|_| ()).map_err(|s| s.code()), started.elapsed())
                })
            })
            .collect();
        for call in calls {
            let (outcome, took) = call.await.expect("call task");
            match outcome {
                Ok(()) => accepted.push(took),
                Err(Code::ResourceExhausted) => shed.push(took),
                Err(code) => panic!("overload must answer OK or RESOURCE_EXHAUSTED, got {code:?}"),
            }
        }
        rss.push(rss_kib());
    }
    let after = startmargin_service::metrics::render();
    let server_mean_ms = {
        let sum = "startmargin_call_duration_seconds_sum{rpc=\"AssessVehicle\"}";
        let count = "startmargin_call_duration_seconds_count{rpc=\"AssessVehicle\"}";
        let calls = sample(&after, count) - sample(&before, count);
        (sample(&after, sum) - sample(&before, sum)) / calls.max(1.0) * 1e3
    };
    assert_eq!(accepted.len() + shed.len(), CONCURRENT * ROUNDS);
    assert!(
        !shed.is_empty(),
        "{CONCURRENT} calls against a limit of {LIMIT} must shed"
    );
    assert!(accepted.len() >= LIMIT, "at least the limit is served");

    // Memory: after the first round, later rounds do not keep growing (bounded queues).
    if rss[0] > 0 {
        let growth_kib = rss[ROUNDS - 1].saturating_sub(rss[0]);
        assert!(
            growth_kib < 64 * 1024,
            "RSS grew {growth_kib} KiB over {ROUNDS} rounds: {rss:?}"
        );
    }

    // Streams beyond max_open_streams are refused at once as well (a separate small server).
    let config = Config {
        max_open_streams: 2,
        ..loopback_config()
    };
    let s = TestServer::start_with(config).await.expect("server");
    let mut open = Vec::new();
    for _ in 0..2 {
        let (tx, rx) = mpsc::channel::<pb::AssessFleetRequest>(1);
        let stream = s
            .client()
            .assess_fleet(ReceiverStream::new(rx))
            .await
            .expect("within the limit");
        open.push((tx, stream));
    }
    let refused = s
        .client()
        .assess_fleet(tokio_stream::iter(Vec::<pb::AssessFleetRequest>::new()))
        .await
        .expect_err("a third stream is refused");
    assert_eq!(refused.code(), Code::ResourceExhausted, "{refused:?}");
    // Closing one frees its slot.
    drop(open.pop());
    let mut reopened = None;
    for _ in 0..100 {
        let (tx, rx) = mpsc::channel::<pb::AssessFleetRequest>(1);
        if let Ok(stream) = s.client().assess_fleet(ReceiverStream::new(rx)).await {
            reopened = Some((tx, stream));
            break;
        }
        tokio::time::sleep(Duration::from_millis(10)).await;
    }
    assert!(reopened.is_some(), "a closed stream must free its slot");
    let text = startmargin_service::metrics::render();
    assert!(
        text.contains("startmargin_calls_total{rpc=\"AssessVehicle\",code=\"ResourceExhausted\"}"),
        "{text}"
    );
    assert!(
        text.contains("startmargin_calls_total{rpc=\"AssessFleet\",code=\"ResourceExhausted\"}"),
        "{text}"
    );

    accepted.sort();
    shed.sort();
    eprintln!(
        "overload: limit {LIMIT}, {CONCURRENT} concurrent x {ROUNDS} rounds: {} accepted, {} shed; \
         alone p50 {:?} p99 {:?}; accepted p50 {:?} p99 {:?}; shed p50 {:?} p99 {:?}; server-side mean over all calls {server_mean_ms:.3} ms; \
         RSS KiB per round {rss:?}",
        accepted.len(),
        shed.len(),
        percentile(&alone, 0.5),
        percentile(&alone, 0.99),
        percentile(&accepted, 0.5),
        percentile(&accepted, 0.99),
        percentile(&shed, 0.5),
        percentile(&shed, 0.99),
    );
    drop(open);
    drop(reopened);
    s.shutdown().await.expect("drains");
    t.shutdown().await.expect("drains");
}
