//! The results as JSON lines (one object per vehicle) for scripts and dashboards. Times are Unix
//! seconds (UTC) plus the local wall-clock time for people.

use serde_json::{Value, json};
use startmargin_sdk::time::{Timestamp, to_system_time, unix_s};
use startmargin_sdk::{Error, PlugInPlan, VehicleAssessment};

use crate::scenario::{DepotVehicle, local_hhmm};
use crate::table::{gel_words, limiting_words, words};

fn ts(t: Option<&Timestamp>) -> Value {
    t.map_or(Value::Null, |t| json!(unix_s(t)))
}

/// One vehicle's result as a JSON object.
pub fn json_line(v: &DepotVehicle, outcome: &Result<VehicleAssessment, Error>) -> Value {
    let base = json!({
        "vehicle_id": v.id(),
        "archetype": v.archetype,
        "role": v.role,
        "departure_local": local_hhmm(v.departure),
    });
    let extra = match outcome {
        Err(e) => json!({
            "error": {
                "code": format!("{:?}", e.code()),
                "message": e.to_string(),
                "field_violations": e.field_violations().iter()
                    .map(|f| json!({"field": f.field, "description": f.description}))
                    .collect::<Vec<_>>(),
            }
        }),
        Ok(a) => {
            let gel = a.gel.clone().unwrap_or_default();
            json!({
                "model_version": a.model_version,
                "departure_s": ts(a.departure_time.as_ref()),
                "start_margin_k": a.start_margin_k,
                "start_expected": a.start_expected,
                "no_start_pct": a.no_start_pct,
                "outlook": words(a.outlook().as_str_name(), "START_OUTLOOK_"),
                "limiting_factor": limiting_words(a),
                "explanation": a.explanation,
                "gel": {
                    "level": gel_words(a),
                    "blocks_start": gel.blocks_start,
                    "cloud_point_c": gel.cloud_point_c,
                    "cfpp_c": gel.cfpp_c,
                    "lowest_fuel_c": gel.lowest_fuel_c,
                    "margin_to_cfpp_k": gel.margin_to_cfpp_k,
                },
                "actions": a.actions.iter().map(|x| json!({
                    "summary": x.summary,
                    "expected_margin_gain_k": x.expected_margin_gain_k,
                    "act_by_s": ts(x.act_by.as_ref()),
                    "caution": x.caution,
                })).collect::<Vec<_>>(),
                "margin_path": a.margin_path.iter()
                    .map(|m| json!({"at_s": ts(m.at.as_ref()), "margin_k": m.margin_k}))
                    .collect::<Vec<_>>(),
            })
        }
    };
    let mut obj = base;
    if let (Some(o), Value::Object(e)) = (obj.as_object_mut(), extra) {
        o.extend(e);
    }
    obj
}

/// A depot's plug-in plan as a JSON object (one line after the vehicles).
pub fn plan_line(plan: &PlugInPlan) -> Value {
    json!({
        "plug_in_plan": {
            "depot_id": plan.depot_id,
            "plug_ins": plan.plug_ins.iter().map(|p| json!({
                "vehicle_id": p.vehicle_id,
                "plug_in_at_s": ts(p.plug_in_at.as_ref()),
                "plug_in_local": p.plug_in_at.as_ref().and_then(to_system_time).map(local_hhmm),
                "heater_w": p.heater_w,
                "no_start_without_pct": p.no_start_without_pct,
                "no_start_with_pct": p.no_start_with_pct,
            })).collect::<Vec<_>>(),
            "expected_no_starts_without": plan.expected_no_starts_without,
            "expected_no_starts_with": plan.expected_no_starts_with,
            "expected_no_starts_coldest_first": plan.expected_no_starts_coldest_first,
            "exact": plan.exact,
            "gap_bound": plan.gap_bound,
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::evening_cold_front;

    #[test]
    fn ok_and_error_lines() {
        let s = evening_cold_front().unwrap();
        let ok = Ok(VehicleAssessment {
            vehicle_id: "PL-01".into(),
            start_margin_k: 4.5,
            start_expected: true,
            ..Default::default()
        });
        let line = json_line(&s.vehicles[0], &ok);
        assert_eq!(line["vehicle_id"], "PL-01");
        assert_eq!(line["departure_local"], "04:30");
        assert_eq!(line["start_margin_k"], 4.5);
        assert_eq!(line["start_expected"], true);
        assert!(line.get("error").is_none());

        let err = Err(Error::InvalidArgument {
            message: "bad".into(),
            violations: vec![startmargin_sdk::FieldViolation {
                field: "vehicle.fuel.tank_capacity_l".into(),
                description: "must be in 10..=3000 L".into(),
            }],
        });
        let line = json_line(&s.vehicles[1], &err);
        assert_eq!(line["error"]["code"], "InvalidArgument");
        assert_eq!(
            line["error"]["field_violations"][0]["field"],
            "vehicle.fuel.tank_capacity_l"
        );
        // One line of text per vehicle.
        assert!(!line.to_string().contains('\n'));
    }
}
