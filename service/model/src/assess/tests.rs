//! Tests of the assembled assessment (the checks of the issue "thermal start model"): the heat
//! budget sums exactly, the same night gives the same bits, the margin moves the way the trade
//! knows it moves (metamorphic laws over every archetype and the whole −40…+20 °C range), a stuck
//! glow-plug relay leaves the engine unassisted, bad inputs give errors and never a panic, the
//! margin path lines up with the assessment, and a frozen battery decides the outcome.
//!
//! The fixtures at the top are shared with `uncertainty_tests.rs` and `actions_tests.rs`.
//!
//! Defects found while writing these tests are kept as `defect_…` tests that say what was
//! expected and what was measured; a defect still open carries `#[ignore = "…"]` (run them with
//! `cargo test -- --ignored`), a fixed one stays as a regression test.

use super::*;
use crate::aids::GlowPlugs;
use crate::archetypes::{ARCHETYPES, AidConfig, Archetype};
use crate::constants::celsius_to_kelvin;
use crate::fuel::{AdditiveTreatment, FuelBase};
use proptest::prelude::*;
use std::panic::{AssertUnwindSafe, catch_unwind};

// ---------------------------------------------------------------------------------------------
// Fixtures (shared)
// ---------------------------------------------------------------------------------------------

/// Departure of [`service_night`], s: 12 h after the forecast start at 0 s.
pub(crate) const DEPARTURE_S: f64 = 43_200.0;

/// Hourly forecast steps of [`service_night`] (14 h, two past the departure).
pub(crate) const FORECAST_STEPS: usize = 14;

/// No aid fitted.
pub(crate) const NO_AIDS: AidConfig = AidConfig {
    glow_plugs: None,
    glow_preheat_s: 0.0,
    intake_heater_w: 0.0,
    block_heater_w: 0.0,
};

/// Rounding allowance of the budget sums, K.
const LAW_TOLERANCE_K: f64 = 1e-9;

/// Allowance of the random metamorphic laws on the charge margin, K: two real second-order effects
/// move it the "wrong" way by hundredths of a kelvin (measured up to 0.014 K): a colder charge is
/// denser, so ignition needs a hair less; and slower cranking lengthens the ignition window while
/// it adds heat loss (cranking speed has an optimum, reference.md §4.5, from memory). Neither
/// changes a verdict: the cranking mode carries the battery's effect.
const RANDOM_LAW_TOLERANCE_K: f64 = 0.05;

/// A vehicle in service parked warm in the open: the archetype's own aids, coolant at 80 °C
/// observed at the forecast start (0 s), 14 hourly steps of constant air at `air_c` with a light
/// breeze (3 m/s) under half cloud, departure 12 h later, a battery at 90 % charge and 90 %
/// health, 15W-40 oil and reference_night's No. 1 diesel.
///
/// The breeze and half cloud (instead of still, overcast air) make the soak a typical night rather
/// than the mildest one; the thresholds measured in `uncertainty_tests.rs` and `actions_tests.rs`
/// (probabilities of `INFORMATIVE`, margins of `AT_RISK`) were taken with these values.
pub(crate) fn service_night(a: &Archetype, air_c: f64) -> VehicleNight {
    let air_t_k = celsius_to_kelvin(air_c);
    let mut n = unassisted::reference_night(&a.engine, air_t_k);
    n.aids = a.aids;
    n.battery.state_of_charge = Some(0.9);
    n.battery.health_fraction = 0.9;
    n.oil = SaeGrade {
        winter: Some(15),
        hot: 40,
    };
    n.telemetry = Telemetry {
        observed_at_s: Some(0.0),
        coolant_t_k: Some(celsius_to_kelvin(80.0)),
        ..Telemetry::default()
    };
    n.forecast.hours = vec![
        ForecastHour {
            air_t_k,
            wind_mps: 3.0,
            cloud_fraction: 0.5,
        };
        FORECAST_STEPS
    ];
    n.departure_s = DEPARTURE_S;
    n.block_heater_plan = None;
    n
}

/// The archetype's aids with the intake heater taken out.
pub(crate) fn aids_without_intake_heater(a: &Archetype) -> AidConfig {
    AidConfig {
        intake_heater_w: 0.0,
        ..a.aids
    }
}

/// Archetypes whose aids include glow plugs.
pub(crate) fn glow_plug_archetypes() -> impl Iterator<Item = &'static Archetype> {
    ARCHETYPES.iter().filter(|a| a.aids.glow_plugs.is_some())
}

/// −40…+20 °C every 4 K (16 temperatures).
fn grid_temperatures_c() -> impl Iterator<Item = f64> {
    (0..16).map(|i| -40.0 + 4.0 * f64::from(i))
}

/// The budget identities of model.md §6, as absolute residuals in K: (sum of the terms −
/// predicted, predicted − required − margin).
fn budget_residuals_k(a: &Assessment) -> (f64, f64) {
    let b = &a.budget;
    let sum_k = b.ideal_end_t_k - b.wall_loss_k - b.leakage_loss_k - b.evaporation_loss_k
        + b.intake_heater_gain_k
        + b.glow_plug_gain_k;
    (
        (sum_k - b.predicted_end_t_k).abs(),
        (b.predicted_end_t_k - b.required_t_k - a.margin_k).abs(),
    )
}

/// Values no field may accept.
const HOSTILE_VALUES: [f64; 9] = [
    f64::NAN,
    f64::INFINITY,
    f64::NEG_INFINITY,
    f64::MAX,
    f64::MIN,
    1e300,
    -1e300,
    1e30,
    -1e30,
];

/// A named change of one numeric field.
type Setter = (&'static str, fn(&mut VehicleNight, f64));

/// A night in which every optional field is given and read: glow plugs, a measured compression,
/// a fitted cool-down, a planned block heater, every telemetry reading, a forecast spread, a
/// treated biodiesel blend and the margin path.
fn all_fields_night() -> VehicleNight {
    let a = crate::archetypes::find("compact-di-i4").unwrap();
    let mut n = service_night(a, -10.0);
    n.engine.measured_compression_abs_pa = Some(3.0e6);
    n.engine.cooldown_time_constant_s = Some(4.0 * 3600.0);
    n.aids.intake_heater_w = 800.0;
    n.aids.block_heater_w = 1_000.0;
    n.block_heater_plan = Some((8.0 * 3600.0, DEPARTURE_S));
    n.telemetry = Telemetry {
        observed_at_s: Some(1_800.0),
        coolant_t_k: Some(celsius_to_kelvin(70.0)),
        oil_t_k: Some(celsius_to_kelvin(72.0)),
        fuel_t_k: Some(celsius_to_kelvin(15.0)),
        ambient_t_k: Some(celsius_to_kelvin(-8.0)),
        battery_rest_v: Some(12.5),
        fuel_level_fraction: Some(0.6),
    };
    n.forecast.air_spread_k = (0..FORECAST_STEPS).map(|i| 1.0 + 0.25 * i as f64).collect();
    n.fuel.description.biodiesel_fraction = 0.05;
    n.fuel.description.no1_blend_fraction = 0.1;
    n.fuel.description.additive = Some(AdditiveTreatment {
        cfpp_improvement_k: 5.0,
        fuel_t_when_added_k: celsius_to_kelvin(10.0),
    });
    n.options.include_margin_path = true;
    n
}

/// Every numeric (f64) field of a [`VehicleNight`] built by [`all_fields_night`].
const SETTERS: &[Setter] = &[
    ("bore_m", |n, v| n.engine.geometry.bore_m = v),
    ("stroke_m", |n, v| n.engine.geometry.stroke_m = v),
    ("con_rod_m", |n, v| n.engine.geometry.con_rod_m = v),
    ("compression_ratio", |n, v| {
        n.engine.geometry.compression_ratio = v
    }),
    ("ivc_deg_abdc", |n, v| n.engine.geometry.ivc_deg_abdc = v),
    ("ignition_window_deg", |n, v| {
        n.engine.ignition_window_deg = v
    }),
    ("min_start_speed_rpm", |n, v| {
        n.engine.min_start_speed_rpm = v
    }),
    ("leak_area_m2", |n, v| n.engine.leak_area_m2 = v),
    ("measured_compression_abs_pa", |n, v| {
        n.engine.measured_compression_abs_pa = Some(v)
    }),
    ("starter_power_w", |n, v| n.engine.starter_power_w = v),
    ("starter_gear_ratio", |n, v| n.engine.starter_gear_ratio = v),
    ("heat_capacity_j_per_k", |n, v| {
        n.engine.heat_capacity_j_per_k = v
    }),
    ("cooldown_time_constant_s", |n, v| {
        n.engine.cooldown_time_constant_s = Some(v)
    }),
    ("plateau_gain_k", |n, v| {
        if let Some(g) = n.aids.glow_plugs.as_mut() {
            g.plateau_gain_k = v
        }
    }),
    ("preheat_time_constant_s", |n, v| {
        if let Some(g) = n.aids.glow_plugs.as_mut() {
            g.preheat_time_constant_s = v
        }
    }),
    ("glow_preheat_s", |n, v| n.aids.glow_preheat_s = v),
    ("intake_heater_w", |n, v| n.aids.intake_heater_w = v),
    ("block_heater_w", |n, v| n.aids.block_heater_w = v),
    ("rated_cca_a", |n, v| n.battery.rated_cca_a = v),
    ("nominal_v", |n, v| n.battery.nominal_v = v),
    ("state_of_charge", |n, v| {
        n.battery.state_of_charge = Some(v)
    }),
    ("health_fraction", |n, v| n.battery.health_fraction = v),
    ("biodiesel_fraction", |n, v| {
        n.fuel.description.biodiesel_fraction = v
    }),
    ("no1_blend_fraction", |n, v| {
        n.fuel.description.no1_blend_fraction = v
    }),
    ("cfpp_improvement_k", |n, v| {
        if let Some(t) = n.fuel.description.additive.as_mut() {
            t.cfpp_improvement_k = v
        }
    }),
    ("fuel_t_when_added_k", |n, v| {
        if let Some(t) = n.fuel.description.additive.as_mut() {
            t.fuel_t_when_added_k = v
        }
    }),
    ("cetane_number", |n, v| {
        n.fuel.description.cetane_number = Some(v)
    }),
    ("measured cloud_point_k", |n, v| {
        n.fuel.description.base = FuelBase::Measured(ColdFlowProperties {
            cloud_point_k: v,
            cfpp_k: 250.0,
            pour_point_k: 245.0,
        })
    }),
    ("measured cfpp_k", |n, v| {
        n.fuel.description.base = FuelBase::Measured(ColdFlowProperties {
            cloud_point_k: 255.0,
            cfpp_k: v,
            pour_point_k: 245.0,
        })
    }),
    ("measured pour_point_k", |n, v| {
        n.fuel.description.base = FuelBase::Measured(ColdFlowProperties {
            cloud_point_k: 255.0,
            cfpp_k: 250.0,
            pour_point_k: v,
        })
    }),
    ("tank_capacity_l", |n, v| n.fuel.tank_capacity_l = v),
    ("observed_at_s", |n, v| n.telemetry.observed_at_s = Some(v)),
    ("coolant_t_k", |n, v| n.telemetry.coolant_t_k = Some(v)),
    ("oil_t_k", |n, v| n.telemetry.oil_t_k = Some(v)),
    ("fuel_t_k", |n, v| n.telemetry.fuel_t_k = Some(v)),
    ("ambient_t_k", |n, v| n.telemetry.ambient_t_k = Some(v)),
    ("battery_rest_v", |n, v| {
        n.telemetry.battery_rest_v = Some(v)
    }),
    ("fuel_level_fraction", |n, v| {
        n.telemetry.fuel_level_fraction = Some(v)
    }),
    ("forecast start_s", |n, v| n.forecast.start_s = v),
    ("forecast step_s", |n, v| n.forecast.step_s = v),
    ("air_t_k (step 5)", |n, v| n.forecast.hours[5].air_t_k = v),
    ("wind_mps (step 5)", |n, v| n.forecast.hours[5].wind_mps = v),
    ("cloud_fraction (step 5)", |n, v| {
        n.forecast.hours[5].cloud_fraction = v
    }),
    ("air_spread_k (step 5)", |n, v| {
        n.forecast.air_spread_k[5] = v
    }),
    ("barometric_pa", |n, v| n.forecast.barometric_pa = v),
    ("departure_s", |n, v| n.departure_s = v),
    ("block heater on_from_s", |n, v| {
        n.block_heater_plan = Some((v, DEPARTURE_S))
    }),
    ("block heater on_until_s", |n, v| {
        n.block_heater_plan = Some((8.0 * 3600.0, v))
    }),
];

// ---------------------------------------------------------------------------------------------
// Heat budget and determinism
// ---------------------------------------------------------------------------------------------

#[test]
fn the_heat_budget_sums_exactly() {
    // model.md §6: intake → ideal − wall − leakage − evaporation + intake heater + glow plugs =
    // predicted, and predicted − required = margin, exactly (1e-9 K rounding allowance). Every
    // archetype × −40…+20 °C × aids as fitted / none × block heater planned / none.
    let mut checked = 0;
    for a in ARCHETYPES {
        for air_c in grid_temperatures_c() {
            for aids in [a.aids, NO_AIDS] {
                for heater in [false, true] {
                    let mut n = service_night(a, air_c);
                    n.aids = aids;
                    if heater {
                        n.aids.block_heater_w = 1_000.0;
                        n.block_heater_plan = Some((8.0 * 3600.0, DEPARTURE_S));
                    }
                    let r = assess(&n).unwrap();
                    let (sum_k, margin_k) = budget_residuals_k(&r);
                    assert!(
                        sum_k <= LAW_TOLERANCE_K && margin_k <= LAW_TOLERANCE_K,
                        "{} {air_c} °C heater {heater}: residuals {sum_k:e}, {margin_k:e} K",
                        a.id
                    );
                    // The terms are what the aids make them: none fitted, no gain.
                    if aids.glow_plugs.is_none() {
                        assert_eq!(r.budget.glow_plug_gain_k, 0.0);
                    }
                    if aids.intake_heater_w == 0.0 {
                        assert_eq!(r.budget.intake_heater_gain_k, 0.0);
                    }
                    checked += 1;
                }
            }
        }
    }
    assert_eq!(checked, ARCHETYPES.len() * 16 * 4);
}

#[test]
fn the_same_night_gives_the_same_bits() {
    // model.md §6 ("the same request always gives the same budget") and the module doc of
    // assess: deterministic bit for bit, the margin path included. Debug prints the shortest
    // round-trip form of each f64, so equal text means equal bits (no NaN in an answer).
    for a in ARCHETYPES {
        for air_c in [-30.0, -5.0, 15.0] {
            let mut n = all_fields_night();
            n.engine = a.engine;
            n.engine.cooldown_time_constant_s = Some(4.0 * 3600.0);
            n.engine.measured_compression_abs_pa = Some(3.0e6);
            n.aids = a.aids;
            n.aids.block_heater_w = 1_000.0;
            for h in &mut n.forecast.hours {
                h.air_t_k = celsius_to_kelvin(air_c);
            }
            let first = assess(&n).unwrap();
            let second = assess(&n.clone()).unwrap();
            assert_eq!(first.margin_k.to_bits(), second.margin_k.to_bits());
            assert_eq!(first.margin_path.len(), second.margin_path.len());
            assert!(!first.margin_path.is_empty());
            for (p, q) in first.margin_path.iter().zip(&second.margin_path) {
                assert_eq!(p.at_s.to_bits(), q.at_s.to_bits());
                assert_eq!(p.margin_k.to_bits(), q.margin_k.to_bits());
            }
            assert_eq!(
                format!("{first:?}"),
                format!("{second:?}"),
                "{} {air_c} °C",
                a.id
            );
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Metamorphic laws
// ---------------------------------------------------------------------------------------------

/// Which way a change may move the margin.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Direction {
    /// The margin falls or stays.
    Lowers,
    /// The margin rises or stays.
    Raises,
}

/// Every base night.
fn always(_: &Assessment) -> bool {
    true
}

/// Base nights whose unaided margin (the margin without the glow-plug gain; the intake heater is
/// taken out in these laws) is above −150 K.
fn unaided_above_minus_150_k(b: &Assessment) -> bool {
    b.margin_k - b.budget.glow_plug_gain_k > -150.0
}

/// Checks one law over every archetype × 16 temperatures × (glow plugs as fitted, no aids):
/// `prepare` sets up the base night, `change` makes the changed one, `applies` picks the bases.
fn check_law(
    law: &str,
    direction: Direction,
    prepare: impl Fn(&mut VehicleNight),
    change: impl Fn(&mut VehicleNight),
    applies: fn(&Assessment) -> bool,
) {
    let mut violations = Vec::new();
    let mut checked = 0;
    for a in ARCHETYPES {
        for air_c in grid_temperatures_c() {
            for aids in [aids_without_intake_heater(a), NO_AIDS] {
                let mut base = service_night(a, air_c);
                base.aids = aids;
                prepare(&mut base);
                let b = assess(&base).unwrap();
                if !applies(&b) {
                    continue;
                }
                let mut n = base.clone();
                change(&mut n);
                let c = assess(&n).unwrap();
                let rise_k = c.margin_k - b.margin_k;
                let broken = match direction {
                    Direction::Lowers => rise_k > LAW_TOLERANCE_K,
                    Direction::Raises => rise_k < -LAW_TOLERANCE_K,
                };
                if broken {
                    violations.push(format!(
                        "{} {air_c} °C glow {}: {:.3} -> {:.3} K",
                        a.id,
                        aids.glow_plugs.is_some(),
                        b.margin_k,
                        c.margin_k
                    ));
                }
                checked += 1;
            }
        }
    }
    assert!(checked > 0, "{law}: no base night applies");
    assert!(
        violations.is_empty(),
        "{law} ({direction:?}): {} violations:\n{}",
        violations.len(),
        violations.join("\n")
    );
}

fn unchanged(_: &mut VehicleNight) {}

fn with_block_heater(n: &mut VehicleNight) {
    n.aids.block_heater_w = 1_000.0;
}

#[test]
fn a_colder_night_lowers_the_margin() {
    // Common practice (no source): the colder the night, the harder the start.
    check_law(
        "1 K colder",
        Direction::Lowers,
        unchanged,
        |n| n.forecast.hours.iter_mut().for_each(|h| h.air_t_k -= 1.0),
        always,
    );
}

#[test]
fn colder_coolant_at_parking_lowers_the_margin() {
    // Common practice (no source): an engine parked cooler is colder in the morning.
    check_law(
        "coolant 80 → 60 °C at parking",
        Direction::Lowers,
        unchanged,
        |n| n.telemetry.coolant_t_k = Some(celsius_to_kelvin(60.0)),
        always,
    );
}

#[test]
fn a_smaller_emptier_or_older_battery_lowers_the_margin() {
    // Common practice (no source): a weaker battery cranks slower, which never helps a start.
    check_law(
        "CCA × 0.6",
        Direction::Lowers,
        unchanged,
        |n| n.battery.rated_cca_a *= 0.6,
        always,
    );
    check_law(
        "charge 0.9 → 0.6",
        Direction::Lowers,
        unchanged,
        |n| n.battery.state_of_charge = Some(0.6),
        always,
    );
    check_law(
        "health 0.9 → 0.6",
        Direction::Lowers,
        unchanged,
        |n| n.battery.health_fraction = 0.6,
        always,
    );
}

#[test]
fn more_leakage_lowers_the_margin() {
    // Common practice (no source): worn rings and valves lose compression and start harder.
    check_law(
        "leak area × 1.5",
        Direction::Lowers,
        unchanged,
        |n| n.engine.leak_area_m2 *= 1.5,
        always,
    );
}

#[test]
fn lower_compression_lowers_the_margin() {
    // Common practice (no source): a lower compression ratio starts harder. Checked where the
    // unaided margin is above −150 K; below that see the known limitation further down.
    check_law(
        "compression ratio − 0.5",
        Direction::Lowers,
        unchanged,
        |n| n.engine.geometry.compression_ratio -= 0.5,
        unaided_above_minus_150_k,
    );
}

#[test]
fn plugging_in_a_block_heater_earlier_or_at_all_raises_the_margin() {
    // Common practice (no source; reference.md §12 for the 1 kW size): heat put into the block
    // before the start never makes it colder.
    check_law(
        "block heater plugged in at 4 h instead of 8 h",
        Direction::Raises,
        |n| {
            with_block_heater(n);
            n.block_heater_plan = Some((8.0 * 3600.0, DEPARTURE_S));
        },
        |n| n.block_heater_plan = Some((4.0 * 3600.0, DEPARTURE_S)),
        always,
    );
    for from_h in [0.0, 6.0, 10.0, 11.5] {
        check_law(
            "block heater plugged in (none before)",
            Direction::Raises,
            with_block_heater,
            |n| n.block_heater_plan = Some((from_h * 3600.0, DEPARTURE_S)),
            always,
        );
    }
}

#[test]
fn a_charged_battery_raises_the_margin() {
    // Common practice (no source): charging the battery helps the start.
    check_law(
        "charge 0.9 → 1.0",
        Direction::Raises,
        unchanged,
        |n| n.battery.state_of_charge = Some(1.0),
        always,
    );
}

#[test]
fn a_thinner_winter_oil_raises_the_margin() {
    // Common practice (no source): 5W-30 cranks faster than 15W-40 in the cold.
    check_law(
        "5W-30 instead of 15W-40",
        Direction::Raises,
        unchanged,
        |n| {
            n.oil = SaeGrade {
                winter: Some(5),
                hot: 30,
            }
        },
        always,
    );
}

fixed_proptest! {
    #![proptest_config(ProptestConfig {
        cases: 48,
        failure_persistence: None,
        ..ProptestConfig::default()
    })]

    #[test]
    fn random_changes_obey_the_metamorphic_laws(
        index in 0..ARCHETYPES.len(),
        air_c in -40.0..20.0_f64,
        glow in any::<bool>(),
        colder_k in 0.0..10.0_f64,
        coolant_drop_k in 0.0..60.0_f64,
        weaker in (0.3..1.0_f64, 0.0..0.9_f64, 0.3..0.9_f64),
        leak_factor in 1.0..3.0_f64,
        compression_drop in 0.0..2.0_f64,
        plug_in_h in (0.0..12.0_f64, 0.0..12.0_f64),
    ) {
        // The same laws (common practice, no source) with random change sizes.
        let a = &ARCHETYPES[index];
        let mut base = service_night(a, air_c);
        base.aids = if glow { aids_without_intake_heater(a) } else { NO_AIDS };
        base.aids.block_heater_w = 1_000.0;
        let b = assess(&base).unwrap();
        let (cca_factor, soc, health) = weaker;
        let (early_h, late_h) = (plug_in_h.0.min(plug_in_h.1), plug_in_h.0.max(plug_in_h.1));
        type Change<'a> = Box<dyn Fn(&mut VehicleNight) + 'a>;
        let lowers: Vec<(&str, Change<'_>)> = vec![
            ("colder", Box::new(|n| n.forecast.hours.iter_mut().for_each(|h| h.air_t_k -= colder_k))),
            ("colder coolant", Box::new(|n| n.telemetry.coolant_t_k = Some(celsius_to_kelvin(80.0) - coolant_drop_k))),
            ("smaller battery", Box::new(|n| n.battery.rated_cca_a *= cca_factor)),
            ("emptier battery", Box::new(|n| n.battery.state_of_charge = Some(soc))),
            ("older battery", Box::new(|n| n.battery.health_fraction = health)),
            ("more leakage", Box::new(|n| n.engine.leak_area_m2 *= leak_factor)),
        ];
        let raises: Vec<(&str, Change<'_>)> = vec![
            ("charged", Box::new(|n| n.battery.state_of_charge = Some(1.0))),
            ("5W-30", Box::new(|n| n.oil = SaeGrade { winter: Some(5), hot: 30 })),
            ("plugged in", Box::new(|n| n.block_heater_plan = Some((late_h * 3600.0, DEPARTURE_S)))),
        ];
        for (law, change) in &lowers {
            let mut n = base.clone();
            change(&mut n);
            let c = assess(&n).unwrap().margin_k;
            prop_assert!(c <= b.margin_k + RANDOM_LAW_TOLERANCE_K, "{} {air_c} °C {law}: {} -> {c}", a.id, b.margin_k);
        }
        for (law, change) in &raises {
            let mut n = base.clone();
            change(&mut n);
            let c = assess(&n).unwrap().margin_k;
            prop_assert!(c >= b.margin_k - RANDOM_LAW_TOLERANCE_K, "{} {air_c} °C {law}: {} -> {c}", a.id, b.margin_k);
        }
        // Earlier plug-in against later plug-in.
        let mut later = base.clone();
        later.block_heater_plan = Some((late_h * 3600.0, DEPARTURE_S));
        let mut earlier = base.clone();
        earlier.block_heater_plan = Some((early_h * 3600.0, DEPARTURE_S));
        let (l, e) = (assess(&later).unwrap().margin_k, assess(&earlier).unwrap().margin_k);
        prop_assert!(e >= l - LAW_TOLERANCE_K, "{} {air_c} °C plug-in {early_h} h vs {late_h} h: {e} < {l}", a.id);
        // Lower compression, where the unaided margin is above −150 K.
        if unaided_above_minus_150_k(&b) {
            let mut n = base.clone();
            n.engine.geometry.compression_ratio -= compression_drop;
            let c = assess(&n).unwrap().margin_k;
            prop_assert!(c <= b.margin_k + LAW_TOLERANCE_K, "{} {air_c} °C compression − {compression_drop}: {} -> {c}", a.id, b.margin_k);
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Glow-plug faults
// ---------------------------------------------------------------------------------------------

#[test]
fn a_stuck_relay_or_failed_plugs_leave_the_engine_unassisted() {
    // Common practice (no source): with the relay stuck open or the plugs burnt out, no current
    // heats the chamber, so the start is the no-glow-plug start, bit for bit.
    let mut checked = 0;
    for a in glow_plug_archetypes() {
        for air_c in grid_temperatures_c() {
            let mut bare = service_night(a, air_c);
            bare.aids.glow_plugs = None;
            let bare_k = assess(&bare).unwrap().margin_k;
            let fitted = a.aids.glow_plugs.unwrap();
            for faulty in [
                GlowPlugs {
                    relay_ok: false,
                    ..fitted
                },
                GlowPlugs {
                    plugs_ok: false,
                    ..fitted
                },
                GlowPlugs {
                    relay_ok: false,
                    plugs_ok: false,
                    ..fitted
                },
            ] {
                let mut n = service_night(a, air_c);
                n.aids.glow_plugs = Some(faulty);
                let r = assess(&n).unwrap();
                assert_eq!(
                    r.margin_k.to_bits(),
                    bare_k.to_bits(),
                    "{} {air_c} °C",
                    a.id
                );
                assert_eq!(r.budget.glow_plug_gain_k, 0.0);
            }
            // And the working plugs do help (so the comparison above is not vacuous).
            assert!(assess(&service_night(a, air_c)).unwrap().margin_k > bare_k);
            checked += 1;
        }
    }
    assert!(checked >= 16 * 4);
}

// ---------------------------------------------------------------------------------------------
// Time axis
// ---------------------------------------------------------------------------------------------

#[test]
fn a_departure_outside_the_forecast_is_forecast_too_short() {
    // The module doc of assess: the forecast must cover the departure (its end is covered).
    let a = &ARCHETYPES[0];
    let end_s = FORECAST_STEPS as f64 * 3600.0;
    for departure_s in [end_s + 1.0, end_s + 3600.0, -1.0, -3600.0] {
        let mut n = service_night(a, -10.0);
        n.telemetry = Telemetry::default();
        n.departure_s = departure_s;
        assert!(
            matches!(
                assess(&n),
                Err(ModelError::ForecastTooShort { requested_s, .. }) if requested_s == departure_s
            ),
            "departure {departure_s} s: {:?}",
            assess(&n).map(|r| r.margin_k)
        );
    }
    // The last instant covered and the first are accepted.
    for departure_s in [end_s, 0.0] {
        let mut n = service_night(a, -10.0);
        n.departure_s = departure_s;
        assert!(assess(&n).is_ok(), "departure {departure_s} s");
    }
}

#[test]
fn telemetry_after_departure_or_before_the_forecast_is_inconsistent() {
    // The module doc of assess: the night starts from the readings, which must lie between the
    // forecast start and the departure.
    let a = &ARCHETYPES[0];
    for observed_s in [DEPARTURE_S + 60.0, DEPARTURE_S + 3600.0, -60.0, -3600.0] {
        let mut n = service_night(a, -10.0);
        n.telemetry.observed_at_s = Some(observed_s);
        assert!(
            matches!(assess(&n), Err(ModelError::Inconsistent(_))),
            "readings at {observed_s} s: {:?}",
            assess(&n).map(|r| r.margin_k)
        );
    }
}

// ---------------------------------------------------------------------------------------------
// Hostile input
// ---------------------------------------------------------------------------------------------

#[test]
fn hostile_values_in_every_field_are_errors_never_panics() {
    // The rule (common practice for a service library, no source): NaN, ±inf, ±f64::MAX
    // and ±1e300 in any numeric field give an error, never a panic and never an answer.
    let base = all_fields_night();
    assert!(assess(&base).is_ok(), "the base night itself is valid");
    let mut accepted = Vec::new();
    let mut panicked = Vec::new();
    for (field, set) in SETTERS {
        for v in HOSTILE_VALUES {
            let mut n = base.clone();
            set(&mut n, v);
            match catch_unwind(AssertUnwindSafe(|| assess(&n))) {
                Ok(Ok(_)) => accepted.push(format!("{field} = {v:e}")),
                Ok(Err(_)) => {}
                Err(_) => panicked.push(format!("{field} = {v:e}")),
            }
        }
    }
    assert!(panicked.is_empty(), "panicked:\n{}", panicked.join("\n"));
    assert!(accepted.is_empty(), "accepted:\n{}", accepted.join("\n"));
}

/// Any f64, the special values weighted up, and plausible magnitudes so that some nights pass.
fn any_value() -> impl Strategy<Value = f64> {
    prop_oneof![
        Just(f64::NAN),
        Just(f64::INFINITY),
        Just(f64::NEG_INFINITY),
        Just(f64::MAX),
        Just(f64::MIN),
        Just(0.0),
        Just(-0.0),
        Just(f64::MIN_POSITIVE),
        any::<f64>(),
        -1e6..1e6_f64,
        0.0..2.0_f64,
        180.0..430.0_f64,
    ]
}

fixed_proptest! {
    #![proptest_config(ProptestConfig {
        cases: 512,
        failure_persistence: None,
        ..ProptestConfig::default()
    })]

    #[test]
    fn random_hostile_fields_never_panic(
        changes in prop::collection::vec((0..SETTERS.len(), any_value()), 1..=3),
    ) {
        // The rule: never a panic; and an accepted night is a real answer: a finite
        // margin whose budget sums (model.md §6, 1e-9 K).
        let mut n = all_fields_night();
        for (i, v) in &changes {
            (SETTERS[*i].1)(&mut n, *v);
        }
        if let Ok(r) = assess(&n) {
            prop_assert!(r.margin_k.is_finite(), "{changes:?}: margin {}", r.margin_k);
            let (sum_k, margin_k) = budget_residuals_k(&r);
            prop_assert!(sum_k <= LAW_TOLERANCE_K && margin_k <= LAW_TOLERANCE_K,
                "{changes:?}: residuals {sum_k:e}, {margin_k:e} K");
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Margin path
// ---------------------------------------------------------------------------------------------

#[test]
fn the_margin_path_lines_up_with_the_assessment() {
    // The module doc of assess: one point per forecast step boundary from the first at or after
    // the readings; a departure at a point gives that point's margin (1e-9 K).
    for a in ARCHETYPES {
        for (air_c, observed_s) in [(-25.0, 0.0), (-5.0, 9_000.0), (10.0, 3_600.0)] {
            let mut n = service_night(a, air_c);
            n.telemetry.observed_at_s = Some(observed_s);
            n.options.include_margin_path = true;
            let r = assess(&n).unwrap();
            let first_k = (observed_s / 3600.0).ceil() as usize;
            let expected = FORECAST_STEPS + 1 - first_k;
            assert_eq!(
                r.margin_path.len(),
                expected,
                "{} readings at {observed_s} s",
                a.id
            );
            for (j, p) in r.margin_path.iter().enumerate() {
                assert_eq!(p.at_s, (first_k + j) as f64 * 3600.0);
            }
            assert!(r.margin_path[0].at_s >= observed_s);
            let at_departure = r
                .margin_path
                .iter()
                .find(|p| p.at_s == DEPARTURE_S)
                .expect("a point at the departure");
            assert!(
                (at_departure.margin_k - r.margin_k).abs() <= LAW_TOLERANCE_K,
                "{} {air_c} °C: path {} vs margin {}",
                a.id,
                at_departure.margin_k,
                r.margin_k
            );
            // Every other point is the margin of a departure at that time.
            for p in &r.margin_path {
                let mut m = n.clone();
                m.departure_s = p.at_s;
                m.options.include_margin_path = false;
                let k = assess(&m).unwrap().margin_k;
                assert!(
                    (p.margin_k - k).abs() <= LAW_TOLERANCE_K,
                    "{} at {} s",
                    a.id,
                    p.at_s
                );
            }
            // Not asked for, not computed.
            n.options.include_margin_path = false;
            assert!(assess(&n).unwrap().margin_path.is_empty());
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Frozen battery
// ---------------------------------------------------------------------------------------------

#[test]
fn a_frozen_battery_decides_the_outcome() {
    // reference.md §8.3 (from memory, battery makers): the electrolyte freezes at about −7 °C
    // discharged and −25 °C at 50 % charge, so at 10 % charge a battery soaked 12 h at −30 °C
    // is frozen, and no block heater on the engine changes that.
    for a in ARCHETYPES {
        for heater in [false, true] {
            let mut n = service_night(a, -30.0);
            n.battery.state_of_charge = Some(0.1);
            if heater {
                n.aids.block_heater_w = 1_000.0;
                n.block_heater_plan = Some((4.0 * 3600.0, DEPARTURE_S));
            }
            let r = assess(&n).unwrap();
            assert_eq!(
                r.limiting_factor,
                LimitingFactor::FrozenBattery,
                "{} heater {heater}",
                a.id
            );
            assert!(!r.start_expected, "{} heater {heater}", a.id);
            assert!(r.cranking.result.battery_frozen);
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Regression tests (defects found while writing these tests)
// ---------------------------------------------------------------------------------------------

#[test]
fn intake_heater_engines_obey_the_metamorphic_laws() {
    // The laws above with the intake heater fitted (common practice, no source). Was a defect,
    // fixed by taking the heater's air stream at a nominal cranking speed; measured before the
    // fix: 165 violations on 3 archetypes × 16 temperatures × 7 laws, e.g. heavy-di-i6 at −12 °C: 1 K
    // colder raises the margin 198.7 → 200.7 K, CCA × 0.6 raises it to 215.4 K, 5W-30 lowers it
    // to 165.3 K, a block heater from 8 h to 163.7 K; offroad-di-i4 at −16 °C: the block heater
    // lowers it 268.5 → 187.7 K.
    let mut violations = Vec::new();
    type Change = fn(&mut VehicleNight);
    let lowers: [(&str, Change); 4] = [
        ("1 K colder", |n| {
            n.forecast.hours.iter_mut().for_each(|h| h.air_t_k -= 1.0)
        }),
        ("CCA × 0.6", |n| n.battery.rated_cca_a *= 0.6),
        ("soc 0.9 → 0.6", |n| n.battery.state_of_charge = Some(0.6)),
        ("leak × 1.5", |n| n.engine.leak_area_m2 *= 1.5),
    ];
    let raises: [(&str, Change); 3] = [
        ("charged", |n| n.battery.state_of_charge = Some(1.0)),
        ("5W-30", |n| {
            n.oil = SaeGrade {
                winter: Some(5),
                hot: 30,
            }
        }),
        ("block heater from 8 h", |n| {
            n.aids.block_heater_w = 1_000.0;
            n.block_heater_plan = Some((8.0 * 3600.0, DEPARTURE_S));
        }),
    ];
    for a in ARCHETYPES.iter().filter(|a| a.aids.intake_heater_w > 0.0) {
        for air_c in grid_temperatures_c() {
            let base = service_night(a, air_c);
            let b = assess(&base).unwrap();
            for (sign, list) in [(1.0, &lowers[..]), (-1.0, &raises[..])] {
                for (law, change) in list {
                    let mut n = base.clone();
                    change(&mut n);
                    let c = assess(&n).unwrap();
                    if sign * (c.margin_k - b.margin_k) > LAW_TOLERANCE_K {
                        violations.push(format!(
                            "{} {air_c} °C {law}: {:.1} -> {:.1} K",
                            a.id, b.margin_k, c.margin_k
                        ));
                    }
                }
            }
        }
    }
    assert!(
        violations.is_empty(),
        "{} violations:\n{}",
        violations.len(),
        violations.join("\n")
    );
}

#[test]
#[ignore = "known limitation (no decision changes): divided-chamber engines at deep cold (unaided margin below about −190 K): a \
            LOWER compression ratio RAISES the margin (up to 0.66 K for 0.5 less, 2.5 K for 2 less)"]
fn defect_lower_compression_raises_a_deeply_negative_margin() {
    // Expected: lower compression never raises the margin (as above, but over the whole range).
    // Got (measured): older-idi-v8 at −12 °C, no aids, 21.5 → 21.0 raises −255.19 → −254.53 K
    // (the ideal end temperature falls 7.10 K but the wall loss falls 7.08 K and the leakage loss
    // 1.03 K; required +0.24 K); with its glow plugs at −40 °C: −165.32 → −165.03 K; swirl-idi-i4
    // at −40 °C: +0.30 K. No decision changes (a certain no-start either way).
    check_law(
        "compression ratio − 0.5 (whole range)",
        Direction::Lowers,
        |_| {},
        |n| n.engine.geometry.compression_ratio -= 0.5,
        always,
    );
}

#[test]
fn defect_min_start_speed_is_validated() {
    // Expected: OutOfRange (apply_overrides accepts 10–600 rpm). Got: Ok for NaN, −inf, −1e300,
    // f64::MIN, −1e30 (`crank_rpm.max(NaN)` keeps the cranking speed and `rpm < NaN` is false).
    let base = all_fields_night();
    let mut accepted = Vec::new();
    for v in HOSTILE_VALUES {
        let mut n = base.clone();
        n.engine.min_start_speed_rpm = v;
        if assess(&n).is_ok() {
            accepted.push(v);
        }
    }
    assert!(
        accepted.is_empty(),
        "min_start_speed_rpm accepted {accepted:?}"
    );
}

#[test]
fn defect_cooldown_time_constant_is_validated() {
    // Expected: OutOfRange (apply_overrides accepts 10 min – 48 h). Got: Ok for 1e30, 1e300 and
    // f64::MAX without a block heater (NaN, ±inf and negative values are rejected; with a heater
    // planned the node overheats and the soak model rejects it).
    let mut base = all_fields_night();
    base.aids.block_heater_w = 0.0;
    base.block_heater_plan = None;
    let mut accepted = Vec::new();
    for v in HOSTILE_VALUES {
        for with_heater in [false, true] {
            let mut n = if with_heater {
                all_fields_night()
            } else {
                base.clone()
            };
            n.engine.cooldown_time_constant_s = Some(v);
            if assess(&n).is_ok() {
                accepted.push(format!("{v:e} (heater {with_heater})"));
            }
        }
    }
    assert!(
        accepted.is_empty(),
        "cooldown_time_constant_s accepted {accepted:?}"
    );
}

#[test]
fn defect_hostile_values_in_unread_fields_are_errors() {
    // Expected (the rule): an error for NaN/±inf/huge in every numeric field of
    // VehicleNight. Got: Ok for every value in HOSTILE_VALUES in these five cases.
    const UNREAD: &[Setter] = &[
        ("measured_compression_abs_pa", |n, v| {
            n.engine.measured_compression_abs_pa = Some(v)
        }),
        ("air_spread_k", |n, v| n.forecast.air_spread_k[3] = v),
        ("oil_t_k (with coolant_t_k)", |n, v| {
            n.telemetry.oil_t_k = Some(v)
        }),
        ("state_of_charge (with battery_rest_v)", |n, v| {
            n.telemetry.battery_rest_v = Some(12.4);
            n.battery.state_of_charge = Some(v);
        }),
        ("observed_at_s (no temperature reading)", |n, v| {
            n.telemetry = Telemetry {
                observed_at_s: Some(v),
                ..Telemetry::default()
            };
        }),
    ];
    let base = all_fields_night();
    let mut accepted = Vec::new();
    for (field, set) in UNREAD {
        for v in HOSTILE_VALUES {
            let mut n = base.clone();
            set(&mut n, v);
            if assess(&n).is_ok() {
                accepted.push(format!("{field} = {v:e}"));
            }
        }
    }
    assert!(accepted.is_empty(), "accepted:\n{}", accepted.join("\n"));
}
