//! Tests of the actions: a later block-heater plug-in never raises the margin, the latest plug-in
//! time meets its target and ten minutes later would not, every action carries the caution its
//! hazard calls for, and a stuck glow-plug relay is met with a repair worth its plateau gain.
//!
//! Nights come from `assess::tests::service_night` (a vehicle parked warm, soaked 12 h) with a
//! 1 kW block heater fitted (reference.md §12: 400–1500 W typical, common practice).

use super::*;
use crate::archetypes::{ARCHETYPES, find};
use crate::assess::tests::{DEPARTURE_S, aids_without_intake_heater, service_night};
use crate::fuel::{FuelBase, FuelGrade};

const BLOCK_HEATER_W: f64 = 1_000.0;

/// A vehicle at risk tonight with a 1 kW block heater (its intake heater, if any, taken out: see
/// the intake-heater defects in `assess::tests`).
fn at_risk(id: &str, air_c: f64) -> VehicleNight {
    let a = find(id).unwrap();
    let mut n = service_night(a, air_c);
    n.aids = aids_without_intake_heater(a);
    n.aids.block_heater_w = BLOCK_HEATER_W;
    n
}

/// Nights at or near risk, from a large deficit to a modest margin (margins without the heater
/// measured from −108 K to +25 K).
const AT_RISK: [(&str, f64); 10] = [
    ("compact-di-i4", -20.0),
    ("compact-di-i4", -10.0),
    ("compact-di-i4", -5.0),
    ("light-di-v8", -15.0),
    ("light-di-v8", -10.0),
    ("older-idi-v8", -10.0),
    ("older-idi-v8", 0.0),
    ("swirl-idi-i4", -10.0),
    ("swirl-idi-i4", 0.0),
    ("offroad-di-i4", -25.0),
];

fn margin_with_plug_in_k(n: &VehicleNight, from_s: f64) -> f64 {
    let mut n = n.clone();
    n.block_heater_plan = Some((from_s, n.departure_s));
    assess(&n).unwrap().margin_k
}

#[test]
fn a_later_plug_in_never_raises_the_margin() {
    // reference.md §12 (common practice): plug in ahead of the start; plugging in later can only
    // leave the engine colder. Every 10 minutes of the night, exactly (1e-9 K rounding allowance).
    for (id, air_c) in AT_RISK {
        let n = at_risk(id, air_c);
        let unplugged = assess(&n).unwrap().margin_k;
        let mut earlier_k = f64::INFINITY;
        for step in 0..=72 {
            let from_s = f64::from(step) * 600.0;
            let m = margin_with_plug_in_k(&n, from_s);
            assert!(
                m <= earlier_k + 1e-9,
                "{id} {air_c}: plug-in at {from_s} s raised {earlier_k} -> {m}"
            );
            assert!(
                m >= unplugged - 1e-9,
                "{id} {air_c}: plugged {m} < unplugged {unplugged}"
            );
            earlier_k = m;
        }
        // Not vacuous: all night helps a lot more than the last ten minutes.
        assert!(
            margin_with_plug_in_k(&n, 0.0) > earlier_k + 5.0,
            "{id} {air_c}"
        );
    }
}

#[test]
fn a_later_plug_in_never_raises_the_margin_with_an_intake_heater() {
    // Regression: before the intake heater was evaluated at a reference cranking speed, heavy-di-i6
    // at −12 °C with its own 2.5 kW intake heater gave
    // unplugged 198.7 K, plugged from 8 h 163.7 K.
    for id in ["medium-di-i6", "heavy-di-i6"] {
        let a = find(id).unwrap();
        let mut n = service_night(a, -12.0);
        n.aids.block_heater_w = BLOCK_HEATER_W;
        let Ok(unplugged) = assess(&n) else { continue };
        let mut earlier_k = f64::INFINITY;
        for step in 0..=72 {
            let m = margin_with_plug_in_k(&n, f64::from(step) * 600.0);
            assert!(
                m <= earlier_k + 1e-9 && m >= unplugged.margin_k - 1e-9,
                "{id}: {m}"
            );
            earlier_k = m;
        }
    }
}

#[test]
fn the_target_margin_is_the_model_error_quantile() {
    // Standard normal quantiles (Abramowitz & Stegun Table 26.1, from memory): z(0.95) =
    // 1.6448536, z(0.975) = 1.9599640, z(0.5) = 0. The target margin for a 5 % no-start
    // probability is then 10 K × 1.6448536 = 16.448536 K. Tolerance 1e-6: Φ is good to ~1e-7
    // and its slope near these points is 0.06–0.4, so the inverse is good to a few 1e-7.
    assert!((normal_quantile(0.95) - 1.644_853_6).abs() < 1e-6);
    assert!((normal_quantile(0.975) - 1.959_964).abs() < 1e-6);
    assert!(normal_quantile(0.5).abs() < 1e-6);
    let target_k = target_margin_k(&ActionPolicy::default());
    assert!((target_k - 16.448_536).abs() < 1e-5, "{target_k}");
    // A stricter policy asks for more margin.
    assert!(
        target_margin_k(&ActionPolicy {
            target_probability: 0.01
        }) > target_k
    );
}

#[test]
fn the_latest_plug_in_meets_the_target_and_ten_minutes_later_would_not() {
    let default_target_k = target_margin_k(&ActionPolicy::default());
    let mut bisected = 0;
    let mut now = 0;
    let mut not_needed = 0;
    for (id, air_c) in AT_RISK {
        let n = at_risk(id, air_c);
        let unplugged = assess(&n).unwrap().margin_k;
        let all_night = margin_with_plug_in_k(&n, 0.0);
        for target_k in [0.0, default_target_k, 30.0] {
            let Some((plug_s, margin_k)) = latest_plug_in_s(&n, target_k).unwrap() else {
                // No plug-in time only when the heater is not needed for this target.
                assert!(
                    unplugged >= target_k,
                    "{id} {air_c}: no time for target {target_k}"
                );
                not_needed += 1;
                continue;
            };
            // The margin reported is the margin of that plan.
            assert!(
                (margin_with_plug_in_k(&n, plug_s) - margin_k).abs() < 1e-9,
                "{id} {air_c}"
            );
            if all_night < target_k {
                // Even all night is not enough: plug in now, for the most it can give.
                assert_eq!(plug_s, 0.0, "{id} {air_c} target {target_k}");
                assert_eq!(margin_k, all_night);
                now += 1;
                continue;
            }
            assert!(
                margin_k >= target_k,
                "{id} {air_c}: {margin_k} < {target_k}"
            );
            assert!((0.0..=DEPARTURE_S).contains(&plug_s));
            let later_s = plug_s + 600.0;
            if unplugged < target_k && later_s <= DEPARTURE_S {
                let later_k = margin_with_plug_in_k(&n, later_s);
                assert!(
                    later_k < target_k,
                    "{id} {air_c}: 10 min later still {later_k} ≥ {target_k} (plug-in {plug_s} s)"
                );
            }
            bisected += 1;
        }
    }
    // Not vacuous: every branch runs (measured: 24 bisections, 4 plug-in-now, 2 not needed).
    assert!(
        bisected >= 10 && now >= 2 && not_needed >= 1,
        "{bisected}, {now}, {not_needed}"
    );
    // No block heater, no plug-in time.
    let mut n = at_risk("compact-di-i4", -10.0);
    n.aids.block_heater_w = 0.0;
    assert_eq!(latest_plug_in_s(&n, default_target_k), Ok(None));
}

#[test]
fn the_plug_in_advice_agrees_with_common_practice_around_minus_fifteen() {
    // reference.md §12 (common practice, no standard): plug in when it will be colder than about
    // −15 °C, about 2–4 h before the start. At −15 °C a light-truck diesel on 15W-40 needs its
    // heater and the latest plug-in lies within 1–6 h before departure (band widened by 1 h each
    // side for the looseness of a rule of thumb); at +10 °C no plug-in is advised.
    let n = at_risk("light-di-v8", -15.0);
    let a = assess(&n).unwrap();
    let mut out = Vec::new();
    recommend(&n, &a, &ActionPolicy::default(), &mut out).unwrap();
    let plug = out
        .iter()
        .find(|x| x.kind == ActionKind::PlugInBlockHeater)
        .expect("plug-in advised");
    let lead_h = (DEPARTURE_S - plug.act_by_s.unwrap()) / 3600.0;
    assert!((1.0..=6.0).contains(&lead_h), "plug in {lead_h:.2} h ahead");
    let warm = at_risk("light-di-v8", 10.0);
    let a = assess(&warm).unwrap();
    let mut out = Vec::new();
    recommend(&warm, &a, &ActionPolicy::default(), &mut out).unwrap();
    assert!(
        out.iter().all(|x| x.kind != ActionKind::PlugInBlockHeater),
        "{out:?}"
    );
}

#[test]
fn every_action_carries_the_caution_its_hazard_calls_for() {
    // Common practice (no source), as the module states: mains power outdoors → cord caution;
    // charging → charge caution; a frozen battery → never charge it; glow plugs or intake heaters →
    // never use starting fluid. A frozen battery is never offered a charge.
    let mut seen = std::collections::HashSet::new();
    let mut nights = 0;
    for a in ARCHETYPES {
        for air_c in [-30.0, -20.0, -10.0, 0.0] {
            for soc in [0.9, 0.5, 0.1] {
                for relay_ok in [true, false] {
                    for grade in [FuelGrade::UsNo1, FuelGrade::UsNo2] {
                        let mut n = service_night(a, air_c);
                        n.aids.block_heater_w = BLOCK_HEATER_W;
                        n.battery.state_of_charge = Some(soc);
                        n.fuel.description.base = FuelBase::Grade(grade);
                        if let Some(g) = n.aids.glow_plugs.as_mut() {
                            g.relay_ok = relay_ok;
                        }
                        let assessed = assess(&n).unwrap();
                        let mut out = Vec::new();
                        recommend(&n, &assessed, &ActionPolicy::default(), &mut out).unwrap();
                        nights += 1;
                        let frozen = assessed.cranking.result.battery_frozen;
                        for x in &out {
                            let expected = match x.kind {
                                ActionKind::PlugInBlockHeater | ActionKind::WarmFuel => {
                                    CORD_CAUTION
                                }
                                ActionKind::ChargeBattery => CHARGE_CAUTION,
                                ActionKind::ThawBattery => FROZEN_BATTERY_CAUTION,
                                ActionKind::RepairGlowPlugs | ActionKind::ExtendPreheat => {
                                    STARTING_FLUID_CAUTION
                                }
                                ActionKind::LighterOil => OIL_CAUTION,
                                ActionKind::TreatFuel
                                | ActionKind::BlendNo1
                                | ActionKind::WinterFuel => FUEL_CAUTION,
                                ActionKind::ParkSheltered => IDLING_CAUTION,
                            };
                            assert_eq!(
                                x.caution,
                                Some(expected),
                                "{:?} on {} {air_c}",
                                x.kind,
                                a.id
                            );
                            seen.insert(format!("{:?}", x.kind));
                            assert!(
                                !(frozen && x.kind == ActionKind::ChargeBattery),
                                "charge offered for a frozen battery: {} {air_c}",
                                a.id
                            );
                        }
                        if frozen {
                            assert!(out.iter().any(|x| x.kind == ActionKind::ThawBattery));
                        }
                        // Most useful first: hard-failure fixes, then by expected gain.
                        for w in out.windows(2) {
                            assert!(
                                (w[0].fixes_hard_failure && !w[1].fixes_hard_failure)
                                    || (w[0].fixes_hard_failure == w[1].fixes_hard_failure
                                        && w[0].expected_margin_gain_k
                                            >= w[1].expected_margin_gain_k),
                                "order {:?} before {:?}",
                                w[0].kind,
                                w[1].kind
                            );
                        }
                    }
                }
            }
        }
    }
    // Not vacuous: every hazardous kind was produced on the grid.
    for kind in [
        "PlugInBlockHeater",
        "WarmFuel",
        "ChargeBattery",
        "ThawBattery",
        "RepairGlowPlugs",
        "ExtendPreheat",
    ] {
        assert!(
            seen.contains(kind),
            "{kind} never produced on {nights} nights: {seen:?}"
        );
    }
}

#[test]
fn a_stuck_relay_is_met_with_a_repair_worth_the_glow_plug_gain() {
    // Fact of the trade (common practice, no source): a stuck relay leaves the engine unassisted;
    // repairing it gives back exactly the glow-plug gain (the only term the plugs touch).
    let mut checked = 0;
    for a in ARCHETYPES.iter().filter(|a| a.aids.glow_plugs.is_some()) {
        for air_c in [-15.0, -5.0, 0.0] {
            let mut n = service_night(a, air_c);
            n.aids.block_heater_w = BLOCK_HEATER_W;
            let working = n.aids.glow_plugs.unwrap();
            n.aids.glow_plugs = Some(crate::aids::GlowPlugs {
                relay_ok: false,
                ..working
            });
            let assessed = assess(&n).unwrap();
            assert!(
                assessed.margin_k < COMFORT_MARGIN_K,
                "{} {air_c}: not at risk",
                a.id
            );
            let mut out = Vec::new();
            recommend(&n, &assessed, &ActionPolicy::default(), &mut out).unwrap();
            let repair = out
                .iter()
                .find(|x| x.kind == ActionKind::RepairGlowPlugs)
                .unwrap();
            let gain_k = crate::aids::glow_plug_gain_k(&working, n.aids.glow_preheat_s).unwrap();
            assert!(repair.expected_margin_gain_k > 0.0);
            assert!(
                (repair.expected_margin_gain_k - gain_k).abs() < 1e-9,
                "{} {air_c}",
                a.id
            );
            assert_eq!(repair.act_by_s, Some(DEPARTURE_S));
            assert_eq!(repair.caution, Some(STARTING_FLUID_CAUTION));
            // Preheating longer does nothing while the relay is stuck: not offered.
            assert!(out.iter().all(|x| x.kind != ActionKind::ExtendPreheat));
            checked += 1;
        }
    }
    assert_eq!(checked, 12);
}

#[test]
fn a_plug_in_that_claims_to_fix_slow_cranking_does() {
    // Expected: fixes_hard_failure only when the plan it advises gives start_expected. Got
    // (measured): light-di-v8, battery at 50 % charge and 20 % health, 1 kW heater: at +5 °C,
    // 51 rpm < 100 rpm, margin 14.8 K: "plug in by 11.19 h" claims the fix, and with that plan it
    // cranks at 65 rpm (SlowCranking, start not expected); at −5 °C, "plug in now" claims it with
    // a margin of 1.8 K and leaves 52 rpm. (Before actions.rs changed during this work, the same
    // vehicle at +10 °C was told to plug in at the departure with zero gain as a "fix".)
    let mut claims = 0;
    let mut false_claims = Vec::new();
    for (air_c, health) in [
        (10.0, 0.2),
        (5.0, 0.2),
        (-5.0, 0.2),
        (-10.0, 0.3),
        (-20.0, 0.9),
    ] {
        let mut n = at_risk("light-di-v8", air_c);
        n.battery.state_of_charge = Some(0.5);
        n.battery.health_fraction = health;
        let assessed = assess(&n).unwrap();
        let mut out = Vec::new();
        recommend(&n, &assessed, &ActionPolicy::default(), &mut out).unwrap();
        for x in out
            .iter()
            .filter(|x| x.kind == ActionKind::PlugInBlockHeater && x.fixes_hard_failure)
        {
            let mut planned = n.clone();
            planned.block_heater_plan = Some((x.act_by_s.unwrap(), DEPARTURE_S));
            let after = assess(&planned).unwrap();
            if !after.start_expected {
                false_claims.push(format!(
                    "{air_c} °C, health {health}: plug in by {:.2} h leaves {:?} at {:.0} rpm",
                    x.act_by_s.unwrap() / 3600.0,
                    after.limiting_factor,
                    after.cranking.result.crank_rpm
                ));
            }
            claims += 1;
        }
    }
    assert!(claims > 0);
    assert!(false_claims.is_empty(), "{}", false_claims.join("\n"));
}
