//! The machine-readable outputs are canonical proto3 JSON of the API's own messages:
//! - every line of the evening run's `--json` (the real fleet against the embedded server) parses
//!   back into the same `AssessFleetResponse`, and printing that again gives the same line;
//! - assessment and plan lines parse with the pbjson-generated serde impls directly;
//! - fixed messages give exactly the lines in `tests/data/*.jsonl`, which CI also parses with
//!   Google's Python protobuf library (`proto/tests/python_client.py`): the reference
//!   implementation of the mapping reads our lines into the same messages.

use std::path::PathBuf;
use std::time::Duration;

use prost_types::Timestamp;
use serde_json::Value;
use startmargin_demo::{report, run, scenario};
use startmargin_proto::json;
use startmargin_sdk::api::{self, assess_fleet_response::Outcome};
use startmargin_sdk::{Client, Error, FieldViolation};

fn data(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(name)
}

fn at(seconds: i64) -> Option<Timestamp> {
    Some(Timestamp { seconds, nanos: 0 })
}

#[tokio::test]
async fn every_evening_run_line_round_trips() {
    let server = startmargin_service::server::spawn_on_loopback()
        .await
        .unwrap();
    let client = Client::builder([format!("http://{}", server.addr)])
        .timeout(Duration::from_secs(10))
        .build()
        .await
        .unwrap();
    let s = scenario::evening_cold_front().unwrap();
    let fleet = run::assess_fleet(&client, &s).await.unwrap();
    let mut responses: Vec<api::AssessFleetResponse> = s
        .vehicles
        .iter()
        .zip(&fleet.vehicles)
        .map(|(v, o)| report::vehicle_response(v, o))
        .collect();
    responses.extend(
        fleet
            .plan_item_ids
            .iter()
            .zip(&fleet.plans)
            .map(|(id, p)| report::plan_response(id, p)),
    );
    assert_eq!(responses.len(), 13, "twelve vehicles and one plan");

    for response in &responses {
        let line = report::json_line(response).unwrap();
        assert!(!line.contains('\n'));
        let back = report::parse_line(&line).unwrap();
        assert_eq!(&back, response, "{line}");
        assert_eq!(report::json_line(&back).unwrap(), line);
        // Without Any in it, the generated serde impls alone read it.
        let twin: json::v1::AssessFleetResponse = serde_json::from_str(&line).unwrap();
        let direct: api::AssessFleetResponse = json::from_message(&twin).unwrap();
        assert_eq!(&direct, response);

        let v: Value = serde_json::from_str(&line).unwrap();
        if let Some(a) = v.get("assessment") {
            // The mapping's marks: camelCase names, enums by name, RFC 3339 times, actions
            // with their kind.
            assert!(a["startMarginK"].is_number(), "{line}");
            assert!(
                a["outlook"].as_str().unwrap().starts_with("START_OUTLOOK_"),
                "{line}"
            );
            let departure = a["departureTime"].as_str().unwrap();
            assert!(
                departure.ends_with('Z') && departure.contains('T'),
                "{line}"
            );
            for action in a["actions"].as_array().into_iter().flatten() {
                assert!(
                    action["kind"].as_str().unwrap().starts_with("ACTION_KIND_"),
                    "{line}"
                );
            }
            assert!(a.get("start_margin_k").is_none(), "{line}");
        }
    }
    server.shutdown().await.unwrap();
}

/// Fixed messages covering enums, times, nested messages, repeated fields, an error with a
/// BadRequest detail and a plan.
fn fixed_responses() -> Vec<api::AssessFleetResponse> {
    let s = scenario::evening_cold_front().unwrap();
    let assessment = api::VehicleAssessment {
        vehicle_id: "PL-01".into(),
        model_version: "demo".into(),
        departure_time: at(1_736_915_400),
        start_margin_k: -3.25,
        start_expected: false,
        limiting_factor: api::LimitingFactor::ColdCharge as i32,
        explanation: "cold charge at top dead centre".into(),
        gel: Some(api::GelOutlook {
            level: api::GelLevel::WaxForming as i32,
            blocks_start: false,
            cloud_point_c: -6.0,
            cfpp_c: -15.0,
            lowest_fuel_c: -11.5,
            lowest_at: at(1_736_910_000),
            cloud_point_crossed_at: at(1_736_895_600),
            ..Default::default()
        }),
        actions: vec![api::Action {
            kind: api::ActionKind::PlugInBlockHeater as i32,
            summary: "Plug in the block heater by 01:10".into(),
            expected_margin_gain_k: 9.5,
            act_by: at(1_736_903_400),
            energy_kwh: 4.0,
            caution: "Outdoor-rated cord, fully uncoiled, ground-fault protected.".into(),
            ..Default::default()
        }],
        margin_path: vec![
            api::MarginPoint {
                at: at(1_736_877_600),
                margin_k: 12.0,
            },
            api::MarginPoint {
                at: at(1_736_915_400),
                margin_k: -3.25,
            },
        ],
        no_start_pct: 71.5,
        outlook: api::StartOutlook::NoStartExpected as i32,
        depot_id: "frostmere-yard".into(),
        ..Default::default()
    };
    let error = Error::InvalidArgument {
        message: "invalid vehicle".into(),
        violations: vec![FieldViolation {
            field: "night.vehicle.battery.capacity_cca".into(),
            description: "must be in 100..=3000 CCA".into(),
        }],
    };
    let plan = api::PlugInPlan {
        depot_id: "frostmere-yard".into(),
        plug_ins: vec![api::PlannedPlugIn {
            vehicle_id: "PL-01".into(),
            plug_in_at: at(1_736_903_400),
            heater_w: 1500.0,
            no_start_without_pct: 71.5,
            no_start_with_pct: 2.0,
            item_id: String::new(),
            summary: String::new(),
        }],
        expected_no_starts_without: 1.4,
        expected_no_starts_with: 0.3,
        expected_no_starts_coldest_first: 0.6,
        exact: true,
        gap_bound: 0.0,
        time_zone: String::new(),
    };
    vec![
        report::vehicle_response(&s.vehicles[0], &Ok(assessment)),
        report::vehicle_response(&s.vehicles[1], &Err(error)),
        report::plan_response("depot:frostmere-yard", &plan),
    ]
}

fn fixed_alert() -> api::Alert {
    api::Alert {
        alert_id: "a-PL-01-1736915400-1".into(),
        vehicle_id: "PL-01".into(),
        depot_id: "frostmere-yard".into(),
        departure_time: at(1_736_915_400),
        kind: api::AlertKind::OutlookRise as i32,
        outlook: api::StartOutlook::AtRisk as i32,
        state: api::AlertState::Raised as i32,
        reason: "no-start probability rose to 38 %".into(),
        actions: vec![api::Action {
            kind: api::ActionKind::ChargeBattery as i32,
            summary: "Charge the battery".into(),
            caution: "Never charge a frozen battery.".into(),
            ..Default::default()
        }],
        act_by: at(1_736_903_400),
        no_start_pct: 38.0,
    }
}

/// The lines `messages` print as, one per message, each ending in a newline.
fn lines<T>(messages: &[T], line: impl Fn(&T) -> String) -> String {
    messages.iter().map(|m| line(m) + "\n").collect()
}

#[test]
fn fixed_messages_give_the_reference_lines() {
    let fleet = lines(&fixed_responses(), |r| report::json_line(r).unwrap());
    let alerts = lines(&[fixed_alert()], |a| {
        let twin: json::v1::Alert = json::from_message(a).unwrap();
        serde_json::to_string(&twin).unwrap()
    });
    for (name, text) in [("fleet_responses.jsonl", &fleet), ("alerts.jsonl", &alerts)] {
        let expected = std::fs::read_to_string(data(name)).unwrap_or_default();
        assert_eq!(
            &expected, text,
            "tests/data/{name} differs from what the messages print; if the API changed on \
             purpose, write this text to it:\n{text}"
        );
    }
    // And back.
    for (line, response) in fleet.lines().zip(fixed_responses()) {
        assert_eq!(report::parse_line(line).unwrap(), response);
    }
    let twin: json::v1::Alert = serde_json::from_str(alerts.trim_end()).unwrap();
    let alert: api::Alert = json::from_message(&twin).unwrap();
    assert_eq!(alert, fixed_alert());
    // Spot checks of the mapping in the reference text.
    let error: Value = serde_json::from_str(fleet.lines().nth(1).unwrap()).unwrap();
    assert_eq!(
        error["error"]["details"][0]["@type"],
        "type.googleapis.com/google.rpc.BadRequest"
    );
    assert!(matches!(
        report::parse_line(fleet.lines().nth(1).unwrap())
            .unwrap()
            .outcome,
        Some(Outcome::Error(_))
    ));
    assert!(alerts.contains("\"state\":\"ALERT_STATE_RAISED\""));
    assert!(alerts.contains("\"actBy\":\"2025-01-15T01:10:00Z\""));
}
