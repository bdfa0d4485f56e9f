//! Start attempts from a raw J1939 sample stream: engine speed (SPN 190), battery potential
//! (SPN 168), coolant (SPN 110) and ambient air temperatures, with timestamps. No physics: a state
//! machine over the samples.
//!
//! Cranking begins when the speed rises from rest into the cranking band ([`DetectorConfig::cranking_min_rpm`]
//! and up); a burst ends on firing (speed at or above [`DetectorConfig::firing_rpm`] held for
//! [`DetectorConfig::firing_hold_s`]) or on giving up (back below the cranking band). Bursts that
//! follow each other within [`DetectorConfig::retry_window_s`] are one attempt: "fired after
//! retries" when it finally fires, "did not fire" otherwise. Samples are sorted by time first
//! (out-of-order delivery is normal on a telematics link); non-finite or out-of-range readings are
//! skipped and counted; time between two samples longer than [`DetectorConfig::max_gap_s`] is a
//! dropout and does not count as cranking time.
//!
//! ```
//! use startmargin_sdk::{DetectedOutcome, DetectorConfig, EngineSample, detect_start_attempts};
//!
//! let at = |t: f64, rpm: f64, v: f64| EngineSample {
//!     at_s: t, engine_speed_rpm: Some(rpm), battery_v: Some(v), coolant_c: Some(-12.0), air_c: Some(-15.0),
//! };
//! let mut samples = vec![at(0.0, 0.0, 12.6)];
//! samples.extend((1..=4).map(|k| at(f64::from(k) * 0.5, 140.0, 9.8)));
//! samples.extend((0..=6).map(|k| at(2.5 + f64::from(k) * 0.5, 800.0, 14.1)));
//! let report = detect_start_attempts(&samples, &DetectorConfig::default())?;
//! let a = &report.attempts[0];
//! assert_eq!(a.outcome, DetectedOutcome::Fired);
//! assert_eq!(a.peak_cranking_rpm, Some(140.0));
//! assert_eq!(a.lowest_cranking_v, Some(9.8));
//! # Ok::<(), startmargin_sdk::StartDetectorError>(())
//! ```

/// One sample of the stream; every reading optional (a J1939 "not available" is `None`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EngineSample {
    /// When the sample was taken, s on the caller's axis (e.g. Unix seconds).
    pub at_s: f64,
    /// Engine speed (SPN 190), rpm.
    pub engine_speed_rpm: Option<f64>,
    /// Battery potential (SPN 168), V.
    pub battery_v: Option<f64>,
    /// Coolant temperature (SPN 110), °C.
    pub coolant_c: Option<f64>,
    /// Ambient or intake air temperature, °C.
    pub air_c: Option<f64>,
}

/// Thresholds of the detector.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DetectorConfig {
    /// Lowest speed counted as cranking, rpm (below: at rest).
    pub cranking_min_rpm: f64,
    /// Speed at which the engine counts as running, rpm.
    pub firing_rpm: f64,
    /// How long the running speed must hold to count as fired, s.
    pub firing_hold_s: f64,
    /// Bursts starting within this time after the previous burst ended are one attempt, s.
    pub retry_window_s: f64,
    /// Longer time between samples is a dropout, s.
    pub max_gap_s: f64,
}

impl Default for DetectorConfig {
    /// 30 rpm, 500 rpm held 1 s, 60 s retry window, 2 s dropout (common practice (no source):
    /// diesels crank at 100–250 rpm and idle at 600–800 rpm).
    fn default() -> Self {
        DetectorConfig {
            cranking_min_rpm: 30.0,
            firing_rpm: 500.0,
            firing_hold_s: 1.0,
            retry_window_s: 60.0,
            max_gap_s: 2.0,
        }
    }
}

/// How an attempt ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DetectedOutcome {
    /// Fired on the first burst.
    Fired,
    /// Fired after several bursts.
    FiredAfterRetries,
    /// Did not fire.
    DidNotFire,
}

/// One detected start attempt.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DetectedAttempt {
    /// When the first burst began, s.
    pub started_at_s: f64,
    /// How it ended.
    pub outcome: DetectedOutcome,
    /// Cranking bursts.
    pub bursts: u32,
    /// Total cranking time of every burst (dropouts excluded), s.
    pub cranking_s: f64,
    /// Highest speed while cranking (below the firing speed), rpm.
    pub peak_cranking_rpm: Option<f64>,
    /// Lowest battery voltage while cranking, V.
    pub lowest_cranking_v: Option<f64>,
    /// Battery voltage at rest just before the first burst, V.
    pub battery_rest_v: Option<f64>,
    /// Coolant temperature at the attempt (last reading before or during the first burst), °C.
    pub coolant_c: Option<f64>,
    /// Air temperature at the attempt, °C.
    pub air_c: Option<f64>,
}

/// The attempts found and what was set aside.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct DetectorReport {
    /// The attempts, in time order.
    pub attempts: Vec<DetectedAttempt>,
    /// Samples with a non-finite time, or readings out of range (each bad reading counts once).
    pub rejected_readings: u32,
    /// Samples that arrived out of time order (sorted before detection).
    pub out_of_order_samples: u32,
    /// Dropouts: gaps longer than `max_gap_s` while cranking or firing.
    pub dropouts: u32,
    /// A burst was still in progress at the end of the stream (not reported as an attempt).
    pub unfinished_attempt: bool,
}

/// A configuration the detector cannot work with.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StartDetectorError {
    /// A threshold is not finite or out of order.
    #[error("detector configuration {field} = {value} is invalid: {reason}")]
    InvalidConfig {
        /// Field name, with its unit.
        field: &'static str,
        /// The value.
        value: f64,
        /// Why.
        reason: &'static str,
    },
}

fn check(
    field: &'static str,
    value: f64,
    ok: bool,
    reason: &'static str,
) -> Result<(), StartDetectorError> {
    if value.is_finite() && ok {
        Ok(())
    } else {
        Err(StartDetectorError::InvalidConfig {
            field,
            value,
            reason,
        })
    }
}

/// Valid ranges of the readings: SPN 190 is 0–8031.875 rpm, battery 0–32 V here (a 24 V system at
/// most), temperatures −40…210 °C (SPN 110's range).
fn clean(s: &EngineSample, rejected: &mut u32) -> Option<EngineSample> {
    if !s.at_s.is_finite() {
        *rejected += 1;
        return None;
    }
    let mut keep = |v: Option<f64>, lo: f64, hi: f64| match v {
        Some(x) if x.is_finite() && (lo..=hi).contains(&x) => Some(x),
        Some(_) => {
            *rejected += 1;
            None
        }
        None => None,
    };
    Some(EngineSample {
        at_s: s.at_s,
        engine_speed_rpm: keep(s.engine_speed_rpm, 0.0, 8_031.875),
        battery_v: keep(s.battery_v, 0.0, 32.0),
        coolant_c: keep(s.coolant_c, -40.0, 210.0),
        air_c: keep(s.air_c, -40.0, 210.0),
    })
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Phase {
    Rest,
    Cranking,
    /// Running speed seen since this time, not yet held long enough.
    FiringSince(f64),
    Running,
}

/// Finds the start attempts in a sample stream (module doc). Never panics; only an invalid
/// configuration is an error.
pub fn detect_start_attempts(
    samples: &[EngineSample],
    config: &DetectorConfig,
) -> Result<DetectorReport, StartDetectorError> {
    let c = config;
    check(
        "cranking_min_rpm",
        c.cranking_min_rpm,
        c.cranking_min_rpm > 0.0,
        "above 0 rpm",
    )?;
    check(
        "firing_rpm",
        c.firing_rpm,
        c.firing_rpm > c.cranking_min_rpm,
        "above the cranking minimum",
    )?;
    check(
        "firing_hold_s",
        c.firing_hold_s,
        c.firing_hold_s >= 0.0,
        "0 s or more",
    )?;
    check(
        "retry_window_s",
        c.retry_window_s,
        c.retry_window_s >= 0.0,
        "0 s or more",
    )?;
    check("max_gap_s", c.max_gap_s, c.max_gap_s > 0.0, "above 0 s")?;

    let mut report = DetectorReport::default();
    let mut sorted: Vec<EngineSample> = Vec::with_capacity(samples.len());
    let mut last_s = f64::NEG_INFINITY;
    for s in samples {
        if let Some(s) = clean(s, &mut report.rejected_readings) {
            if s.at_s < last_s {
                report.out_of_order_samples += 1;
            }
            last_s = last_s.max(s.at_s);
            sorted.push(s);
        }
    }
    sorted.sort_by(|a, b| a.at_s.total_cmp(&b.at_s));

    let mut phase = Phase::Rest;
    let mut pending: Option<DetectedAttempt> = None;
    let mut burst_ended_s = f64::NEG_INFINITY;
    let (mut rest_v, mut coolant_c, mut air_c) = (None, None, None);
    let mut prev_s: Option<f64> = None;
    let mut speed = 0.0;
    for s in &sorted {
        let dt = prev_s.map_or(0.0, |p| s.at_s - p);
        let gap = dt > c.max_gap_s;
        prev_s = Some(s.at_s);
        coolant_c = s.coolant_c.or(coolant_c);
        air_c = s.air_c.or(air_c);
        // A missing speed holds the last one (SPN 190 comes at 10–100 Hz; a lost frame is normal).
        speed = s.engine_speed_rpm.unwrap_or(speed);
        if gap && phase != Phase::Rest {
            report.dropouts += 1;
        }
        // A burst that gave up long enough ago closes its attempt.
        if phase == Phase::Rest
            && let Some(p) = pending
            && s.at_s - burst_ended_s > c.retry_window_s
        {
            report.attempts.push(DetectedAttempt {
                outcome: DetectedOutcome::DidNotFire,
                ..p
            });
            pending = None;
        }
        let cranking_time = if gap { 0.0 } else { dt };
        match phase {
            Phase::Rest => {
                if speed >= c.cranking_min_rpm {
                    let a = pending.get_or_insert(DetectedAttempt {
                        started_at_s: s.at_s,
                        outcome: DetectedOutcome::DidNotFire,
                        bursts: 0,
                        cranking_s: 0.0,
                        peak_cranking_rpm: None,
                        lowest_cranking_v: None,
                        battery_rest_v: rest_v,
                        coolant_c,
                        air_c,
                    });
                    a.bursts += 1;
                    phase = if speed >= c.firing_rpm {
                        Phase::FiringSince(s.at_s)
                    } else {
                        Phase::Cranking
                    };
                    if phase == Phase::Cranking {
                        record_cranking(a, speed, s.battery_v);
                    }
                } else if let Some(v) = s.battery_v {
                    rest_v = Some(v);
                }
            }
            Phase::Cranking => {
                if let Some(a) = pending.as_mut() {
                    a.cranking_s += cranking_time;
                    if speed >= c.cranking_min_rpm && speed < c.firing_rpm {
                        record_cranking(a, speed, s.battery_v);
                    }
                }
                if speed >= c.firing_rpm {
                    phase = Phase::FiringSince(s.at_s);
                } else if speed < c.cranking_min_rpm {
                    phase = Phase::Rest;
                    burst_ended_s = s.at_s;
                }
            }
            Phase::FiringSince(since_s) => {
                if speed < c.firing_rpm {
                    // It did not catch: back to cranking, or to rest.
                    if speed >= c.cranking_min_rpm {
                        phase = Phase::Cranking;
                        if let Some(a) = pending.as_mut() {
                            a.cranking_s += s.at_s - since_s;
                            record_cranking(a, speed, s.battery_v);
                        }
                    } else {
                        phase = Phase::Rest;
                        burst_ended_s = s.at_s;
                    }
                } else if s.at_s - since_s >= c.firing_hold_s
                    && let Some(a) = pending.take()
                {
                    let outcome = if a.bursts > 1 {
                        DetectedOutcome::FiredAfterRetries
                    } else {
                        DetectedOutcome::Fired
                    };
                    report.attempts.push(DetectedAttempt { outcome, ..a });
                    phase = Phase::Running;
                }
            }
            Phase::Running => {
                if speed < c.cranking_min_rpm {
                    phase = Phase::Rest;
                    rest_v = None;
                }
            }
        }
    }
    match phase {
        Phase::Cranking | Phase::FiringSince(_) => report.unfinished_attempt = true,
        Phase::Rest | Phase::Running => {
            if let Some(p) = pending {
                report.attempts.push(DetectedAttempt {
                    outcome: DetectedOutcome::DidNotFire,
                    ..p
                });
            }
        }
    }
    Ok(report)
}

/// Peak speed and lowest voltage of the cranking so far.
fn record_cranking(a: &mut DetectedAttempt, speed_rpm: f64, battery_v: Option<f64>) {
    a.peak_cranking_rpm = Some(a.peak_cranking_rpm.map_or(speed_rpm, |p| p.max(speed_rpm)));
    if let Some(v) = battery_v {
        a.lowest_cranking_v = Some(a.lowest_cranking_v.map_or(v, |l| l.min(v)));
    }
}
