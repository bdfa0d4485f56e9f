//! Shared helpers of the start-attempt tests: a heavy truck profile and observed attempts.
#![allow(dead_code, unreachable_pub)] // each test file uses a part

use std::time::{SystemTime, UNIX_EPOCH};

use startmargin_proto::v1 as pb;

/// Seconds in a day.
pub const DAY_S: i64 = 86_400;

/// The clock, s since 1970.
pub fn now_s() -> i64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .expect("clock after 1970")
        .as_secs() as i64
}

/// A heavy truck with an intake heater on winter fuel: the archetype's defaults start it at
/// −14 °C with a wide margin (its aided limit is near −27 °C, see DescribeModel's anchors).
pub fn truck(vehicle_id: &str) -> pb::VehicleProfile {
    pb::VehicleProfile {
        vehicle_id: vehicle_id.to_string(),
        engine: Some(pb::EngineSpec {
            archetype_id: "heavy-di-i6".to_string(),
            ..Default::default()
        }),
        aids: Some(pb::StartAids {
            intake_heater_kw: Some(2.5),
            ..Default::default()
        }),
        battery: Some(pb::BatterySpec {
            capacity_cca: 1_900.0,
            nominal_v: 24.0,
            ..Default::default()
        }),
        oil: Some(pb::OilSpec {
            sae_grade: "15W-40".to_string(),
        }),
        fuel: Some(pb::FuelSpec {
            grade: pb::FuelGrade::UsWinterBlend as i32,
            tank_capacity_l: 300.0,
            ..Default::default()
        }),
        sheltered: false,
    }
}

/// An attempt `days_ago` days back at `air_c`, cold-soaked, with `outcome`.
pub fn attempt(
    vehicle_id: &str,
    days_ago: i64,
    air_c: f64,
    outcome: pb::AttemptOutcome,
) -> pb::StartAttempt {
    attempt_at(vehicle_id, now_s() - days_ago * DAY_S, air_c, outcome)
}

/// An attempt at `at_s` (s since 1970) at `air_c`, cold-soaked, with `outcome`.
pub fn attempt_at(
    vehicle_id: &str,
    at_s: i64,
    air_c: f64,
    outcome: pb::AttemptOutcome,
) -> pb::StartAttempt {
    pb::StartAttempt {
        vehicle: Some(truck(vehicle_id)),
        attempted_at: Some(prost_types::Timestamp {
            seconds: at_s,
            nanos: 0,
        }),
        outcome: outcome as i32,
        cranking_duration: Some(prost_types::Duration {
            seconds: if outcome == pb::AttemptOutcome::DidNotFire {
                30
            } else {
                3
            },
            nanos: 0,
        }),
        peak_cranking_rpm: None,
        lowest_cranking_v: None,
        air_c: Some(air_c),
        coolant_c: Some(air_c),
        battery_rest_v: None,
        preheat: Some(prost_types::Duration {
            seconds: 30,
            nanos: 0,
        }),
        block_heater_on: false,
        in_service_since: None,
    }
}
