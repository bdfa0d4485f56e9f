//! Cool-downs watched on WatchFleet streams teach the vehicle's calibration, through real gRPC
//! on loopback: a key-off's noisy coolant readings (a known time constant) end with the engine
//! warming again; the fit is stored once per key-off (a replayed stream adds nothing), a second
//! key-off narrows the belief, GetVehicleCalibration shows both, and a later AssessVehicle of the
//! vehicle uses the learned constant exactly as if the profile had given it.

mod watch_common;

use std::time::Duration;

use startmargin_e2e::{TestServer, sample_night};
use startmargin_proto::v1 as pb;
use watch_common::*;

/// The true time constant of the coolant readings, hours.
const TAU_H: f64 = 2.5;
const AMBIENT_C: f64 = -8.0;

/// One key-off at `start_s`: `readings` coolant readings every 15 min cooling from 85 °C with
/// [`TAU_H`] and ±0.4 K of deterministic noise, then a reading 20 K warmer than the last (the
/// engine ran), which ends the cool-down.
fn key_off(
    first_seq: u64,
    start_s: i64,
    readings: i64,
    noise_state: u64,
) -> Vec<pb::WatchFleetRequest> {
    let mut state = noise_state;
    let mut noise = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        ((state >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 0.8
    };
    let cooling_c =
        |t_s: i64| AMBIENT_C + (85.0 - AMBIENT_C) * (-(t_s as f64) / (TAU_H * 3600.0)).exp();
    let mut updates: Vec<_> = (0..readings)
        .map(|k| {
            telemetry(
                first_seq + k as u64,
                "unit-001",
                start_s + k * 900,
                cooling_c(k * 900) + noise(),
                AMBIENT_C,
                k == 0,
            )
        })
        .collect();
    let end_s = start_s + readings * 900;
    updates.push(telemetry(
        first_seq + readings as u64,
        "unit-001",
        end_s,
        cooling_c(end_s - start_s) + 20.0,
        AMBIENT_C,
        false,
    ));
    updates
}

fn stream(key_offs: Vec<pb::WatchFleetRequest>) -> Vec<pb::WatchFleetRequest> {
    let mut updates = vec![zone(1, "hill", AMBIENT_C), vehicle(2, 1, "hill")];
    updates.extend(key_offs);
    updates
}

async fn read(server: &TestServer) -> pb::GetVehicleCalibrationResponse {
    server
        .client()
        .get_vehicle_calibration(pb::GetVehicleCalibrationRequest {
            vehicle_id: "unit-001".into(),
            attempt_limit: 0,
        })
        .await
        .expect("read")
        .into_inner()
}

/// Reads until `fits` cool-down fits are stored (they are learned off the stream's path).
async fn wait_for_fits(server: &TestServer, fits: usize) -> pb::GetVehicleCalibrationResponse {
    for _ in 0..300 {
        let r = read(server).await;
        if r.cooldown_fits.len() >= fits {
            return r;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    panic!("{fits} cool-down fits were not stored within 15 s");
}

async fn assess(server: &TestServer, night: pb::VehicleNight) -> pb::VehicleAssessment {
    server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await
        .expect("assessed")
        .into_inner()
        .assessment
        .expect("an assessment")
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn watched_cool_downs_are_learned_once_each_and_used_by_later_assessments() {
    let server = TestServer::start().await.expect("server");
    let untaught = assess(&server, sample_night("unit-001")).await;
    assert!(
        untaught
            .calibration
            .as_ref()
            .is_some_and(|c| c.cooldown_time_constant_h.is_none())
    );

    // First key-off: 12 readings over 2.75 h.
    let first = key_off(10, NIGHT_START_S, 12, 0x2545_f491_4f6c_dd1d);
    run_lockstep(&server, stream(first.clone())).await;
    let after_one = wait_for_fits(&server, 1).await;
    let fit = &after_one.cooldown_fits[0];
    assert_eq!(
        fit.keyed_off_at.as_ref().map(|t| t.seconds),
        Some(NIGHT_START_S)
    );
    assert_eq!(fit.readings, 12);
    let belief_one = after_one
        .calibration
        .as_ref()
        .and_then(|c| c.cooldown_time_constant_h)
        .expect("a cool-down belief");
    println!(
        "one key-off: fitted {:.3} h, belief {:.3} ± {:.3} h (true {TAU_H} h)",
        fit.time_constant_h, belief_one.mean, belief_one.sd
    );
    assert!((fit.time_constant_h - TAU_H).abs() / TAU_H < 0.05);
    assert_eq!(
        belief_one.mean, fit.time_constant_h,
        "the first fit sets it"
    );
    assert!(belief_one.sd > 0.0);
    assert_eq!(
        after_one.calibration.as_ref().map(|c| c.observations),
        Some(0),
        "a cool-down is not a start attempt"
    );

    // The same stream replayed (a reconnect), then a second key-off later in the night: the
    // replay is recognised; the second narrows the belief. Learning is serialised per tenant
    // in arrival order, so once the second is stored the replay has been handled.
    run_lockstep(&server, stream(first)).await;
    let second = key_off(40, NIGHT_START_S + 4 * 3600, 7, 0x9e37_79b9_7f4a_7c15);
    run_lockstep(&server, stream(second)).await;
    let after_two = wait_for_fits(&server, 2).await;
    assert_eq!(
        after_two.cooldown_fits.len(),
        2,
        "the replayed key-off was not stored again"
    );
    assert_eq!(
        after_two.cooldown_fits[0]
            .keyed_off_at
            .as_ref()
            .map(|t| t.seconds),
        Some(NIGHT_START_S + 4 * 3600),
        "newest first"
    );
    let belief_two = after_two
        .calibration
        .as_ref()
        .and_then(|c| c.cooldown_time_constant_h)
        .expect("a cool-down belief");
    println!(
        "two key-offs: belief {:.3} ± {:.3} h",
        belief_two.mean, belief_two.sd
    );
    assert!(belief_two.sd < belief_one.sd, "a second fit narrows it");
    assert!((belief_two.mean - TAU_H).abs() / TAU_H < 0.05);

    // A later assessment of the vehicle uses the learned constant: the same answer as the
    // defaults with that constant in the profile, another than the defaults without it.
    let taught = assess(&server, sample_night("unit-001")).await;
    assert_eq!(
        taught
            .calibration
            .as_ref()
            .and_then(|c| c.cooldown_time_constant_h),
        Some(belief_two)
    );
    let mut given = sample_night("unit-001");
    if let Some(e) = given.vehicle.as_mut().and_then(|v| v.engine.as_mut()) {
        e.cooldown_time_constant_h = Some(belief_two.mean);
    }
    given.options = Some(pb::AssessmentOptions {
        ignore_calibration: true,
        ..Default::default()
    });
    let given = assess(&server, given).await;
    println!(
        "margin at departure: {:.2} K learned, {:.2} K given, {:.2} K archetype default",
        taught.start_margin_k, given.start_margin_k, untaught.start_margin_k
    );
    assert!((taught.start_margin_k - given.start_margin_k).abs() < 1e-6);
    assert!((taught.no_start_pct - given.no_start_pct).abs() < 1e-6);
    let engine = |a: &pb::VehicleAssessment| a.soaked.as_ref().map_or(f64::NAN, |s| s.engine_c);
    assert!(
        (engine(&taught) - engine(&untaught)).abs() > 0.5,
        "the learned constant changes the soak: {:.2} vs {:.2} °C",
        engine(&taught),
        engine(&untaught)
    );
    server.shutdown().await.expect("shutdown");
}
