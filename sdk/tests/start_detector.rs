//! The start detector on synthetic J1939 sample streams with known events: a clean start, a slow
//! cold crank, a failed attempt, a start after retries, noise, dropouts, sensor glitches and
//! out-of-order delivery. Streams sample at 10 Hz.

use startmargin_sdk::{
    DetectedOutcome, DetectorConfig, EngineSample, StartDetectorError, detect_start_attempts,
};

const DT_S: f64 = 0.1;

fn sample(at_s: f64, rpm: f64, v: f64) -> EngineSample {
    EngineSample {
        at_s,
        engine_speed_rpm: Some(rpm),
        battery_v: Some(v),
        coolant_c: Some(-18.0),
        air_c: Some(-20.0),
    }
}

/// `secs` of constant speed and voltage from `from_s`.
fn hold(out: &mut Vec<EngineSample>, from_s: f64, secs: f64, rpm: f64, v: f64) -> f64 {
    let n = (secs / DT_S).round() as usize;
    for k in 0..n {
        out.push(sample(from_s + k as f64 * DT_S, rpm, v));
    }
    from_s + n as f64 * DT_S
}

fn detect(s: &[EngineSample]) -> startmargin_sdk::DetectorReport {
    detect_start_attempts(s, &DetectorConfig::default()).unwrap()
}

#[test]
fn clean_start() {
    let mut s = Vec::new();
    let t = hold(&mut s, 0.0, 5.0, 0.0, 12.6);
    let t = hold(&mut s, t, 1.5, 180.0, 10.2);
    hold(&mut s, t, 5.0, 750.0, 14.2);
    let r = detect(&s);
    assert_eq!(r.attempts.len(), 1);
    let a = r.attempts[0];
    assert_eq!(a.outcome, DetectedOutcome::Fired);
    assert_eq!(a.bursts, 1);
    assert!((a.started_at_s - 5.0).abs() < 1e-9);
    assert!((a.cranking_s - 1.5).abs() < 0.15, "{}", a.cranking_s);
    assert_eq!(a.peak_cranking_rpm, Some(180.0));
    assert_eq!(a.lowest_cranking_v, Some(10.2));
    assert_eq!(a.battery_rest_v, Some(12.6));
    assert_eq!(a.coolant_c, Some(-18.0));
    assert_eq!(a.air_c, Some(-20.0));
}

#[test]
fn slow_cold_crank() {
    let mut s = Vec::new();
    let t = hold(&mut s, 0.0, 2.0, 0.0, 12.4);
    let t = hold(&mut s, t, 9.0, 85.0, 8.1);
    hold(&mut s, t, 4.0, 650.0, 13.9);
    let a = detect(&s).attempts[0];
    assert_eq!(a.outcome, DetectedOutcome::Fired);
    assert!((a.cranking_s - 9.0).abs() < 0.15);
    assert_eq!(a.peak_cranking_rpm, Some(85.0));
    assert_eq!(a.lowest_cranking_v, Some(8.1));
}

#[test]
fn failed_attempt() {
    let mut s = Vec::new();
    let t = hold(&mut s, 0.0, 2.0, 0.0, 12.2);
    let t = hold(&mut s, t, 12.0, 70.0, 7.5);
    hold(&mut s, t, 120.0, 0.0, 11.9);
    let r = detect(&s);
    assert_eq!(r.attempts.len(), 1);
    assert_eq!(r.attempts[0].outcome, DetectedOutcome::DidNotFire);
    assert!((r.attempts[0].cranking_s - 12.0).abs() < 0.15);
}

#[test]
fn retries_within_the_window_are_one_attempt() {
    let mut s = Vec::new();
    let mut t = hold(&mut s, 0.0, 2.0, 0.0, 12.5);
    for _ in 0..2 {
        t = hold(&mut s, t, 5.0, 120.0, 9.0);
        t = hold(&mut s, t, 10.0, 0.0, 12.1);
    }
    let t = hold(&mut s, t, 3.0, 130.0, 9.2);
    hold(&mut s, t, 3.0, 700.0, 14.0);
    let r = detect(&s);
    assert_eq!(r.attempts.len(), 1);
    let a = r.attempts[0];
    assert_eq!(a.outcome, DetectedOutcome::FiredAfterRetries);
    assert_eq!(a.bursts, 3);
    assert!((a.cranking_s - 13.0).abs() < 0.3, "{}", a.cranking_s);
    assert_eq!(a.peak_cranking_rpm, Some(130.0));
    // The rest voltage is the one before the first burst.
    assert_eq!(a.battery_rest_v, Some(12.5));
}

#[test]
fn attempts_far_apart_are_separate() {
    let mut s = Vec::new();
    let t = hold(&mut s, 0.0, 1.0, 0.0, 12.5);
    let t = hold(&mut s, t, 5.0, 120.0, 9.0);
    let t = hold(&mut s, t, 300.0, 0.0, 12.1);
    let t = hold(&mut s, t, 2.0, 160.0, 9.8);
    hold(&mut s, t, 3.0, 700.0, 14.0);
    let r = detect(&s);
    let outcomes: Vec<_> = r.attempts.iter().map(|a| a.outcome).collect();
    assert_eq!(
        outcomes,
        [DetectedOutcome::DidNotFire, DetectedOutcome::Fired]
    );
}

#[test]
fn noise_does_not_split_or_invent_attempts() {
    let mut s = Vec::new();
    let mut x = 0x1234_5678_u64;
    let mut noise = || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x % 1000) as f64 / 1000.0 - 0.5
    };
    for k in 0..600 {
        let t = k as f64 * DT_S;
        let (rpm, v) = match t {
            t if t < 10.0 => (0.0 + 8.0 * noise().abs(), 12.5),
            t if t < 13.0 => (150.0 + 40.0 * noise(), 9.5),
            _ => (720.0 + 100.0 * noise(), 14.0),
        };
        s.push(sample(t, rpm, v + 0.3 * noise()));
    }
    let r = detect(&s);
    assert_eq!(r.attempts.len(), 1);
    assert_eq!(r.attempts[0].outcome, DetectedOutcome::Fired);
    assert!(r.attempts[0].peak_cranking_rpm.unwrap() <= 170.0);
}

#[test]
fn dropouts_do_not_count_as_cranking() {
    let mut s = Vec::new();
    let t = hold(&mut s, 0.0, 1.0, 0.0, 12.5);
    let t = hold(&mut s, t, 2.0, 120.0, 9.0);
    // Ten seconds without frames while cranking.
    let t = hold(&mut s, t + 10.0, 2.0, 120.0, 9.0);
    hold(&mut s, t, 3.0, 700.0, 14.0);
    let r = detect(&s);
    assert_eq!(r.dropouts, 1);
    assert!(
        (r.attempts[0].cranking_s - 4.0).abs() < 0.3,
        "{}",
        r.attempts[0].cranking_s
    );
}

#[test]
fn glitches_are_skipped_and_counted_and_order_is_restored() {
    let mut s = Vec::new();
    let t = hold(&mut s, 0.0, 1.0, 0.0, 12.5);
    let t = hold(&mut s, t, 2.0, 120.0, 9.0);
    hold(&mut s, t, 3.0, 700.0, 14.0);
    s[12].engine_speed_rpm = Some(f64::NAN);
    s[13].battery_v = Some(250.0);
    s[14].at_s = f64::INFINITY;
    s[15].coolant_c = Some(-300.0);
    s[16].engine_speed_rpm = Some(-5.0);
    s.swap(20, 25);
    s.swap(3, 30);
    let r = detect(&s);
    assert_eq!(r.rejected_readings, 5);
    assert!(r.out_of_order_samples >= 2);
    assert_eq!(r.attempts.len(), 1);
    let a = r.attempts[0];
    assert_eq!(a.outcome, DetectedOutcome::Fired);
    assert_eq!(a.lowest_cranking_v, Some(9.0));
    assert_eq!(a.peak_cranking_rpm, Some(120.0));
}

#[test]
fn an_unfinished_burst_and_empty_streams() {
    let mut s = Vec::new();
    let t = hold(&mut s, 0.0, 1.0, 0.0, 12.5);
    hold(&mut s, t, 2.0, 120.0, 9.0);
    let r = detect(&s);
    assert!(r.unfinished_attempt && r.attempts.is_empty());
    assert_eq!(detect(&[]), startmargin_sdk::DetectorReport::default());
}

#[test]
fn a_bad_configuration_is_an_error() {
    for c in [
        DetectorConfig {
            cranking_min_rpm: f64::NAN,
            ..DetectorConfig::default()
        },
        DetectorConfig {
            firing_rpm: 10.0,
            ..DetectorConfig::default()
        },
        DetectorConfig {
            max_gap_s: 0.0,
            ..DetectorConfig::default()
        },
        DetectorConfig {
            retry_window_s: -1.0,
            ..DetectorConfig::default()
        },
    ] {
        assert!(matches!(
            detect_start_attempts(&[], &c),
            Err(StartDetectorError::InvalidConfig { .. })
        ));
    }
}
