//! The human-readable report of the evening run: header, table, notes, first actions with their
//! cautions, and the yard's plug-in plan.

use std::fmt::Write as _;

use startmargin_sdk::PlugInPlan;
use startmargin_sdk::time::to_system_time;

use crate::scenario::{Scenario, YARD_CIRCUIT_KW, YARD_OUTLETS, local_hhmm};
use crate::table::{self, Row};

/// The evening table with its header, notes and first actions, as printed.
pub fn evening_text(s: &Scenario, rows: &[Row<'_>]) -> String {
    let mut out = String::new();
    let version = rows
        .iter()
        .find_map(|r| r.outcome.as_ref().ok().map(|a| a.model_version.clone()))
        .unwrap_or_default();
    let _ = writeln!(out, "{} — evening run (invented scenario)", s.depot);
    let _ = writeln!(
        out,
        "Forecast {}–{} local: +2 °C falling to −17.5 °C, wind dropping, skies clearing. Model: {version}",
        local_hhmm(s.forecast_start),
        local_hhmm(s.forecast_end()),
    );
    let _ = writeln!(out);
    out.push_str(&table::render(rows, &table::default_columns()));
    if s.vehicles
        .iter()
        .any(|v| v.night.as_pb().block_heater_plan.is_some())
    {
        let _ = writeln!(
            out,
            "\nBlock heaters: use a cord rated for the heater's load and for outdoor cold, inspect \
             it before plugging in, and follow the heater maker's instructions and local \
             electrical codes."
        );
    }
    let firsts: Vec<_> = rows
        .iter()
        .filter_map(|r| Some((r.vehicle.id(), r.outcome.as_ref().ok()?.actions.first()?)))
        .collect();
    if !firsts.is_empty() {
        let _ = writeln!(
            out,
            "\nFirst actions (safety: follow the manufacturers' instructions, local codes and \
             licensed practice):"
        );
        for (id, a) in firsts {
            let _ = writeln!(out, "  {id}: {}", a.summary);
            if !a.caution.is_empty() {
                let _ = writeln!(out, "      caution: {}", a.caution);
            }
        }
    }
    out
}

/// A depot's plug-in plan, as printed. `yard_no_starts` is the sum of the table's no-start
/// probabilities over the depot's vehicles, so the totals printed here add up with the table.
pub fn plan_text(plan: &PlugInPlan, yard_no_starts: f64) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "\nYard outlets tonight: {} free on a {} kW circuit. Plug-in plan{}:",
        YARD_OUTLETS,
        YARD_CIRCUIT_KW,
        if plan.exact {
            " (optimal)"
        } else {
            " (heuristic)"
        }
    );
    if plan.plug_ins.is_empty() {
        let _ = writeln!(out, "  nobody needs an outlet");
    }
    for p in &plan.plug_ins {
        let at = p
            .plug_in_at
            .as_ref()
            .and_then(to_system_time)
            .map_or_else(|| "?".to_string(), local_hhmm);
        let _ = writeln!(
            out,
            "  {:<7} plug in by {at} ({:.0} W): no-start {:.1} % -> {:.1} %",
            p.vehicle_id, p.heater_w, p.no_start_without_pct, p.no_start_with_pct
        );
    }
    if !plan.plug_ins.is_empty() {
        let _ = writeln!(
            out,
            "  (outdoor-rated cords sized for the heater's current, fully uncoiled, on ground-fault \
             protected outlets; follow the heater maker's instructions and local electrical codes)"
        );
    }
    // The plan's own figures cover only the vehicles with a heater; the yard's are the table's
    // sum less what the plan (or coldest-first) takes off it.
    let unplugged = plan.expected_no_starts_without;
    let _ = writeln!(
        out,
        "  expected no-starts in the yard (the table's no-start % summed): {:.2} unplugged, {:.2} with this plan, {:.2} plugging the coldest first",
        yard_no_starts,
        yard_no_starts - (unplugged - plan.expected_no_starts_with),
        yard_no_starts - (unplugged - plan.expected_no_starts_coldest_first)
    );
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{evening_cold_front, local};
    use startmargin_sdk::time::to_timestamp;
    use startmargin_sdk::{Error, VehicleAssessment, api};

    #[test]
    fn first_actions_carry_their_cautions_and_the_plan_its_numbers() {
        let s = evening_cold_front().unwrap();
        let with_action: Result<VehicleAssessment, Error> = Ok(VehicleAssessment {
            vehicle_id: "PL-01".into(),
            model_version: "m 1".into(),
            actions: vec![api::Action {
                summary: "Charge the battery tonight.".into(),
                caution: "Check the battery is not frozen before charging.".into(),
                ..Default::default()
            }],
            ..Default::default()
        });
        let rows = [Row {
            vehicle: &s.vehicles[0],
            outcome: &with_action,
        }];
        let text = evening_text(&s, &rows);
        assert!(text.starts_with("Frostmere Municipal Works Yard (fictional)"));
        assert!(text.contains("Model: m 1"));
        assert!(
            text.contains("  PL-01: Charge the battery tonight.\n      caution: Check the battery")
        );
        // The bus's overnight plug-in brings the cord caution.
        assert!(text.contains("Block heaters: use a cord rated"));

        let plan = PlugInPlan {
            depot_id: "frostmere-yard".into(),
            plug_ins: vec![api::PlannedPlugIn {
                vehicle_id: "PU-11".into(),
                plug_in_at: Some(to_timestamp(local(1, 30, true))),
                heater_w: 750.0,
                no_start_without_pct: 100.0,
                no_start_with_pct: 38.2,
                item_id: "PU-11".into(),
                summary: String::new(),
            }],
            expected_no_starts_without: 1.83,
            expected_no_starts_with: 1.22,
            expected_no_starts_coldest_first: 1.5,
            exact: true,
            gap_bound: 0.0,
            time_zone: String::new(),
        };
        let text = plan_text(&plan, 3.0);
        assert!(text.contains("1 free on a 2.6 kW circuit. Plug-in plan (optimal):"));
        assert!(
            text.contains("PU-11   plug in by 01:30 -06:00 (750 W): no-start 100.0 % -> 38.2 %")
        );
        assert!(text.contains("outdoor-rated cords"));
        assert!(
            text.contains("3.00 unplugged, 2.39 with this plan, 2.67 plugging the coldest first")
        );
    }
}
