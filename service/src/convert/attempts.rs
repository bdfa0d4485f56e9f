//! Observed start attempts: validates a `StartAttempt` (every bad field with its request path)
//! and converts it to the model's attempt, the conditions at the attempt and the model input for
//! that moment. No physics: the ranges are the physical validity ranges the API documents.

use startmargin_model::assess::VehicleNight;
use startmargin_model::constants::celsius_to_kelvin;
use startmargin_model::learning::{self, AttemptConditions, AttemptOutcome, ObservedAttempt};
use startmargin_proto::v1 as pb;

use super::{ProfileParts, Violations, profile_parts};
use crate::error::ApiError;

/// Earliest attempt time accepted, s since 1970 (2000-01-01T00:00:00Z): telematics start logs
/// older than that are a clock or unit mistake.
pub const EARLIEST_ATTEMPT_S: f64 = 946_684_800.0;
/// How far an attempt may lie ahead of the server's clock, s (clock skew of the telematics unit).
pub const FUTURE_TOLERANCE_S: f64 = 300.0;
/// Longest cranking accepted, s (a starter is not cranked for longer; its duty cycle forbids it).
pub const MAX_CRANKING_S: f64 = 600.0;
/// Longest preheat accepted, s.
pub const MAX_PREHEAT_S: f64 = 600.0;

/// A validated start attempt, ready for the model and the store.
#[derive(Debug, Clone)]
pub struct ConvertedAttempt {
    /// The caller's vehicle id.
    pub vehicle_id: String,
    /// The engine's archetype id, the key of its pooled prior ("" for a custom engine).
    pub archetype_id: String,
    /// When cranking began, s since 1970.
    pub attempted_at_s: f64,
    /// What was observed.
    pub observed: ObservedAttempt,
    /// The conditions at the attempt, SI.
    pub conditions: AttemptConditions,
    /// The model's input for the attempt moment.
    pub night: VehicleNight,
    /// Air temperature at the attempt, °C (as sent, for the store).
    pub air_c: f64,
    /// Coolant temperature at the attempt, °C, when sent.
    pub coolant_c: Option<f64>,
}

/// Validates and converts one start attempt at field path `path` (e.g. `attempts[3]`); `now_s`
/// is the server's clock, to refuse attempts from the future.
pub fn attempt_from_pb(
    attempt: &pb::StartAttempt,
    path: &str,
    now_s: f64,
) -> Result<ConvertedAttempt, ApiError> {
    let mut v = Violations::default();
    let p = |name: &str| format!("{path}.{name}");
    let Some(vehicle) = attempt.vehicle.as_ref() else {
        return Err(ApiError::field(
            p("vehicle"),
            "is required: the vehicle profile",
        ));
    };
    let ProfileParts {
        engine_aids,
        battery,
        oil,
        fuel,
    } = profile_parts(&mut v, vehicle, &p("vehicle"));

    let attempted_at_s = v.timestamp(&p("attempted_at"), attempt.attempted_at.as_ref());
    if let Some(at) = attempted_at_s {
        if at < EARLIEST_ATTEMPT_S {
            v.add(p("attempted_at"), "is before 2000-01-01T00:00:00Z");
        } else if at > now_s + FUTURE_TOLERANCE_S {
            v.add(
                p("attempted_at"),
                format!(
                    "is {:.0} s in the future of the server's clock (at most {FUTURE_TOLERANCE_S:.0} s allowed)",
                    at - now_s
                ),
            );
        }
    }
    if let Some(since) = attempt.in_service_since.as_ref() {
        let since_s = v.timestamp_value(&p("in_service_since"), since);
        if let (Some(since_s), Some(at)) = (since_s, attempted_at_s)
            && at < since_s
        {
            v.add(
                p("attempted_at"),
                "is before the vehicle entered service (in_service_since)",
            );
        }
    }
    let outcome = match pb::AttemptOutcome::try_from(attempt.outcome) {
        Ok(pb::AttemptOutcome::Fired) => Some(AttemptOutcome::Fired),
        Ok(pb::AttemptOutcome::FiredAfterRetries) => Some(AttemptOutcome::FiredAfterRetries),
        Ok(pb::AttemptOutcome::DidNotFire) => Some(AttemptOutcome::DidNotFire),
        Ok(pb::AttemptOutcome::Unspecified) => {
            v.add(
                p("outcome"),
                "is required (fired, fired after retries, did not fire)",
            );
            None
        }
        Err(_) => {
            v.known_enum(&p("outcome"), attempt.outcome, false);
            None
        }
    };
    let cranking_s = match attempt.cranking_duration.as_ref() {
        None => {
            v.add(p("cranking_duration"), "is required");
            None
        }
        Some(d) => duration_value(&mut v, &p("cranking_duration"), d, 0.1, MAX_CRANKING_S),
    };
    let preheat_s = match attempt.preheat.as_ref() {
        None => Some(0.0),
        Some(d) => duration_value(&mut v, &p("preheat"), d, 0.0, MAX_PREHEAT_S),
    };
    let peak_cranking_rpm = v.opt_range(
        &p("peak_cranking_rpm"),
        attempt.peak_cranking_rpm,
        1.0,
        1000.0,
        "rpm",
    );
    let lowest_cranking_v = v.opt_range(
        &p("lowest_cranking_v"),
        attempt.lowest_cranking_v,
        1.0,
        32.0,
        "V",
    );
    let air_c = match attempt.air_c {
        None => {
            v.add(
                p("air_c"),
                "is required: the outdoor air temperature at the attempt",
            );
            None
        }
        Some(t) => Some(v.range(&p("air_c"), t, -70.0, 60.0, "°C")),
    };
    let coolant_c = v.opt_range(&p("coolant_c"), attempt.coolant_c, -70.0, 130.0, "°C");
    let battery_rest_v = v.opt_range(&p("battery_rest_v"), attempt.battery_rest_v, 0.0, 32.0, "V");
    if let (Some(rest), Some(low)) = (battery_rest_v, lowest_cranking_v)
        && low > rest + 0.5
    {
        v.add(
            p("lowest_cranking_v"),
            format!("{low} V while cranking is above the {rest} V at rest"),
        );
    }
    v.finish(())?;

    let (
        Some((engine, aids)),
        Some(oil),
        Some(attempted_at_s),
        Some(outcome),
        Some(cranking_s),
        Some(preheat_s),
        Some(air_c),
    ) = (
        engine_aids,
        oil,
        attempted_at_s,
        outcome,
        cranking_s,
        preheat_s,
        air_c,
    )
    else {
        return Err(ApiError::Internal(
            "conversion lost a value without a violation".into(),
        ));
    };
    let conditions = AttemptConditions {
        at_s: attempted_at_s,
        air_t_k: celsius_to_kelvin(air_c),
        coolant_t_k: coolant_c.map(celsius_to_kelvin),
        oil_t_k: None,
        fuel_t_k: None,
        battery_rest_v,
        preheat_s,
        block_heater_on: attempt.block_heater_on,
    };
    let observed = ObservedAttempt {
        outcome,
        cranking_s,
        peak_cranking_rpm,
        lowest_cranking_v,
    };
    let archetype_id = vehicle
        .engine
        .as_ref()
        .map(|e| e.archetype_id.clone())
        .unwrap_or_default();
    let night = learning::night_at_attempt(
        engine,
        aids,
        battery,
        oil,
        fuel,
        vehicle.sheltered,
        &conditions,
    )
    .map_err(|e| ApiError::field(path.to_string(), format!("cannot be modelled: {e}")))?;
    Ok(ConvertedAttempt {
        vehicle_id: vehicle.vehicle_id.clone(),
        archetype_id,
        attempted_at_s,
        observed,
        conditions,
        night,
        air_c,
        coolant_c,
    })
}

/// A duration within [min_s, max_s], or `None` with a violation.
fn duration_value(
    v: &mut Violations,
    field: &str,
    d: &prost_types::Duration,
    min_s: f64,
    max_s: f64,
) -> Option<f64> {
    if !(0..1_000_000_000).contains(&d.nanos) || d.seconds < 0 {
        v.add(
            field.to_string(),
            "must be a positive duration (seconds ≥ 0, nanos in 0..1e9)",
        );
        return None;
    }
    let s = d.seconds as f64 + f64::from(d.nanos) * 1e-9;
    if s < min_s || s > max_s {
        v.add(
            field.to_string(),
            format!("{s} s is outside the valid range {min_s} to {max_s} s"),
        );
        return None;
    }
    Some(s)
}
