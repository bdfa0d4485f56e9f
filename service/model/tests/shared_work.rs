//! The work shared across one vehicle's runs (`assess::shared`) changes no answer: over a fixed grid
//! of every archetype × five nights × four heater set-ups (none, a heater without a plan, a heater
//! planned from 4 h before departure, a heater with telemetry taken mid-night), the whole decision
//! (margins, margin path, fuel path, mode probabilities, actions with their probabilities, times
//! and energies, the heater plan) is compared
//! - with the unshared reference path (`NightContext::unshared`, every run from scratch): equal
//!   within 1e-9 (the sharing reuses exact intermediate results, so in practice bit for bit);
//! - with the values the model gave before the sharing existed, recorded once from that code in
//!   `data/decide_before_sharing.txt` (one line per grid point): within the tolerances below.

use startmargin_model::archetypes::{ARCHETYPES, Archetype};
use startmargin_model::assess::decision::{Decision, DecisionPolicy, decide, decide_in};
use startmargin_model::assess::shared::NightContext;
use startmargin_model::assess::unassisted::reference_night;
use startmargin_model::assess::{Telemetry, VehicleNight};
use startmargin_model::fuel::{FuelBase, FuelGrade};
use startmargin_model::oil::SaeGrade;
use startmargin_model::soak::ForecastHour;

const HOUR_S: f64 = 3_600.0;
const NIGHTS_C: [f64; 5] = [-32.0, -22.0, -14.0, -6.0, 4.0];

/// Heater set-ups of the grid.
const HEATERS: [&str; 4] = ["none", "unplanned", "planned", "mid-night telemetry"];

/// One grid point: archetype, night air temperature, heater set-up.
fn night(a: &Archetype, air_c: f64, heater: &str) -> VehicleNight {
    let air_t_k = air_c + 273.15;
    let mut n = reference_night(&a.engine, air_t_k);
    n.aids = a.aids;
    // A night that cools through the small hours, with wind and some cloud.
    n.forecast.hours = (0..16)
        .map(|h| ForecastHour {
            air_t_k: air_t_k + 3.0 - 0.4 * f64::from(h),
            wind_mps: 2.0 + 0.25 * f64::from(h % 5),
            cloud_fraction: 0.4,
        })
        .collect();
    n.telemetry = Telemetry {
        observed_at_s: Some(0.0),
        coolant_t_k: Some(353.15),
        ..Telemetry::default()
    };
    n.departure_s = 12.5 * HOUR_S;
    n.battery.state_of_charge = Some(0.75);
    n.battery.health_fraction = 0.85;
    n.oil = SaeGrade {
        winter: Some(15),
        hot: 40,
    };
    n.fuel.description.base = FuelBase::Grade(FuelGrade::UsNo2);
    n.options.include_margin_path = true;
    match heater {
        "none" => {}
        "unplanned" => n.aids.block_heater_w = 1_000.0,
        "planned" => {
            n.aids.block_heater_w = 750.0;
            n.block_heater_plan = Some((n.departure_s - 4.0 * HOUR_S, n.departure_s));
        }
        _ => {
            n.aids.block_heater_w = 1_500.0;
            n.telemetry = Telemetry {
                observed_at_s: Some(5_000.0),
                coolant_t_k: Some(300.0),
                fuel_t_k: Some(air_t_k + 2.0),
                ..Telemetry::default()
            };
        }
    }
    n
}

/// Every number of a decision, with a name, in a fixed order.
fn numbers(d: &Decision) -> Vec<(String, f64)> {
    let a = &d.assessment;
    let p = &d.probability;
    let mut v = vec![
        ("margin_k".to_string(), a.margin_k),
        ("charge_k".into(), a.modes.charge_k),
        ("cranking_rpm".into(), a.modes.cranking_rpm),
        ("battery_freeze_k".into(), a.modes.battery_freeze_k),
        ("fuel_flow_k".into(), a.modes.fuel_flow_k),
        ("engine_t_k".into(), a.soaked.engine_t_k),
        ("probability".into(), p.probability),
        ("binding_spread".into(), p.binding_spread),
        ("outlook".into(), d.outlook as u8 as f64),
        ("limiting".into(), d.limiting_factor as u8 as f64),
    ];
    for (i, m) in p.mode_probabilities.iter().enumerate() {
        v.push((format!("mode_p{i}"), *m));
    }
    for (i, m) in a.margin_path.iter().enumerate() {
        v.push((format!("path{i}_at_s"), m.at_s));
        v.push((format!("path{i}_margin_k"), m.margin_k));
    }
    for (i, s) in a.fuel_path.iter().enumerate() {
        v.push((format!("fuel{i}_filter_t_k"), s.filter_t_k));
    }
    v.push(("actions".into(), d.actions.len() as f64));
    for (i, x) in d.actions.iter().enumerate() {
        v.push((format!("action{i}_kind"), x.kind as u8 as f64));
        v.push((format!("action{i}_p"), x.no_start_after));
        v.push((format!("action{i}_gain_k"), x.expected_margin_gain_k));
        v.push((format!("action{i}_act_by_s"), x.act_by_s.unwrap_or(-1.0)));
        v.push((format!("action{i}_energy_j"), x.energy_j));
    }
    if let Some(h) = d.heater {
        v.push(("plug_in_s".into(), h.plug_in_s));
        v.push(("p_without".into(), h.p_without));
        v.push(("p_with".into(), h.p_with));
        v.push(("margin_with_k".into(), h.margin_with_k));
        v.push(("meets_target".into(), f64::from(u8::from(h.meets_target))));
    }
    v
}

fn grid() -> Vec<(String, VehicleNight)> {
    let mut out = Vec::new();
    for a in ARCHETYPES {
        for air_c in NIGHTS_C {
            for h in HEATERS {
                out.push((format!("{} {air_c} {h}", a.id), night(a, air_c, h)));
            }
        }
    }
    out
}

fn line(d: &Decision) -> String {
    numbers(d)
        .iter()
        .map(|(k, x)| format!("{k}={x:e}"))
        .collect::<Vec<_>>()
        .join(" ")
}

/// Agreement of the shared path with the unshared reference.
const SAME_TOLERANCE: f64 = 1e-9;

/// Parses one recorded line into its named numbers.
fn parse(line: &str) -> (String, Vec<(String, f64)>) {
    let (name, rest) = line.split_once('|').expect("name|numbers");
    let values = rest
        .split(' ')
        .map(|kv| {
            let (k, v) = kv.split_once('=').expect("key=value");
            (k.to_string(), v.parse().expect("a number"))
        })
        .collect();
    (name.to_string(), values)
}

/// Compares two lists of named numbers; `tolerance(name)` is the allowed absolute difference.
fn compare(
    point: &str,
    got: &[(String, f64)],
    want: &[(String, f64)],
    tolerance: impl Fn(&str) -> f64,
) -> f64 {
    let names = |v: &[(String, f64)]| v.iter().map(|(k, _)| k.clone()).collect::<Vec<_>>();
    assert_eq!(names(got), names(want), "{point}: the same outputs");
    let mut worst: f64 = 0.0;
    for ((k, g), (_, w)) in got.iter().zip(want) {
        let d = (g - w).abs();
        assert!(
            d <= tolerance(k) || (g.is_nan() && w.is_nan()),
            "{point}: {k} is {g}, expected {w}"
        );
        worst = worst.max(d);
    }
    worst
}

#[test]
fn shared_work_gives_the_unshared_answers() {
    let policy = DecisionPolicy::default();
    let (mut worst, mut with_heater_plan) = (0.0_f64, 0);
    for (name, n) in grid() {
        let shared = decide(&n, &policy).expect("valid grid night");
        let reference =
            decide_in(&n, &policy, &mut NightContext::unshared()).expect("valid grid night");
        worst = worst.max(compare(
            &name,
            &numbers(&shared),
            &numbers(&reference),
            |_| SAME_TOLERANCE,
        ));
        with_heater_plan += usize::from(shared.heater.is_some());
    }
    // Not vacuous: the heater search ran on many points.
    assert!(with_heater_plan >= 40, "{with_heater_plan}");
    eprintln!("worst difference shared − unshared: {worst:e}");
}

#[test]
fn answers_match_those_recorded_before_the_sharing() {
    let policy = DecisionPolicy::default();
    // The record was written with `RECORD_DECISIONS=path` by the code before the sharing.
    if let Ok(path) = std::env::var("RECORD_DECISIONS") {
        let mut text = String::new();
        for (name, n) in grid() {
            let d = decide(&n, &policy).expect("valid grid night");
            text.push_str(&format!("{name}|{}\n", line(&d)));
        }
        std::fs::write(path, text).expect("record written");
    }
    let recorded = include_str!("data/decide_before_sharing.txt");
    let grid = grid();
    assert_eq!(recorded.lines().count(), grid.len());
    let mut worst: f64 = 0.0;
    for (line, (name, n)) in recorded.lines().zip(grid) {
        let (recorded_name, want) = parse(line);
        assert_eq!(recorded_name, name);
        let d = decide(&n, &policy).expect("valid grid night");
        worst = worst.max(compare(&name, &numbers(&d), &want, |_| SAME_TOLERANCE));
    }
    eprintln!("worst difference against the record: {worst:e}");
}
