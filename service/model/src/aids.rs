//! Cold-start aids: glow plugs and the intake-air heater (the block heater acts through the soak
//! model).
//!
//! **Glow plugs** (named, documented parameter; no first-principles form fits). A hot surface in
//! the chamber lowers the temperature the charge needs near the plug. It is expressed as an
//! equivalent gain of charge temperature that grows with preheat time to a plateau,
//! `gain = plateau · (1 − exp(−t/τ))`, and is zero when the relay is stuck or the plugs have failed
//! (a stuck relay leaves the engine unassisted: common practice, no source).
//! - Time constant: plug tips reach > 1000 °C within a few seconds (reference.md §12, confirmed);
//!   modern fast plugs pre-glow 2–5 s, older metal plugs 5–30 s (§12, common practice). Hence
//!   τ = 2 s for modern plugs ([`DEFAULT_GLOW_TIME_CONSTANT_S`]: 3τ = 6 s reaches 95 %) and 10 s
//!   for older ones ([`OLDER_GLOW_TIME_CONSTANT_S`]). Estimates.
//! - Plateau: fitted per combustion system on the aided start limit (with working glow plugs and
//!   the factory preheat, passenger-car diesels start down to about −25 °C: common practice, from
//!   memory), through the full model (`assess::calibration` lists the fit and what it predicts).
//!   The order DI < swirl chamber < prechamber follows from the no-aid limits (0, 20, 40 °C; Reif
//!   2014, reference.md §13, confirmed): the more heat the chamber takes, the more the plug must
//!   make up.
//!
//! **Intake-air heater.** Energy balance over the air stream at cranking speed:
//! `ΔT = η P / (ṁ c_p)` with `ṁ = ρ V_d (N/120) η_v` for a four-stroke engine (textbook, from
//! memory, certain). `η` is the share of electrical power that reaches the cylinder as air enthalpy
//! before the cylinder head: 0.5 (estimate: the grid also heats its housing and the manifold
//! between it and the head). What the cold port and cylinder then take back is computed by
//! `induction`, so a cold-soaked engine keeps only part of the rise and a warm one more. The rise is capped at [`INTAKE_HEATER_MAX_RISE_K`]: at a near-zero flow the
//! balance would run away, while the air cannot leave the grid hotter than its elements.
//!
//! **Units.** K, s, W, kg/s, m³, Pa, J/(kg K), rpm.
//!
//! **Validity.** Glow: plateau 0–500 K, τ 0.05–600 s, preheat 0–3600 s. Heater: 0–100 kW,
//! fraction 0–1, flow 10 mg/s–100 kg/s, c_p 900–1300 J/(kg K). Air flow: displacement 10 cm³–200 L,
//! 1–10 000 rpm, intake 0.1–10 bar and 150–500 K, volumetric efficiency 0.05–1.5, R 200–500.

use crate::error::{ModelError, check_range};

/// Glow-plug system of an engine.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GlowPlugs {
    /// Equivalent charge-temperature gain after a long preheat, K.
    pub plateau_gain_k: f64,
    /// Time constant of the approach to the plateau, s.
    pub preheat_time_constant_s: f64,
    /// False when the glow-plug relay is stuck open (no current reaches the plugs).
    pub relay_ok: bool,
    /// False when the plugs have failed.
    pub plugs_ok: bool,
}

/// Glow-plug plateau for direct-injection engines, K (fitted on the aided limit, see module doc).
pub const GLOW_PLATEAU_GAIN_DI_K: f64 = 90.0;
/// Glow-plug plateau for swirl-chamber engines, K (fitted on the aided limit).
pub const GLOW_PLATEAU_GAIN_SWIRL_CHAMBER_K: f64 = 260.0;
/// Glow-plug plateau for prechamber engines, K (fitted on the aided limit).
pub const GLOW_PLATEAU_GAIN_PRECHAMBER_K: f64 = 350.0;
/// Default glow-plug plateau, K: the direct-injection estimate. Divided-chamber engines need the
/// larger per-system values above.
pub const DEFAULT_GLOW_PLATEAU_GAIN_K: f64 = GLOW_PLATEAU_GAIN_DI_K;
/// Preheat time constant of modern fast plugs, s (estimate from reference.md §12).
pub const DEFAULT_GLOW_TIME_CONSTANT_S: f64 = 2.0;
/// Preheat time constant of older metal plugs, s (common practice, no source).
pub const OLDER_GLOW_TIME_CONSTANT_S: f64 = 10.0;

/// Share of intake-heater power that reaches the air stream before the head (estimate).
pub const DEFAULT_INTAKE_HEATER_EFFICIENCY: f64 = 0.5;
/// Volumetric efficiency at cranking speed: no ram effect, some backflow before a late intake-valve
/// closing (V at 30° ABDC is 95 % of V at BDC, reference.md §2). Estimate.
pub const DEFAULT_CRANKING_VOLUMETRIC_EFFICIENCY: f64 = 0.85;
/// Upper bound on the intake-heater rise, K: grid elements glow at several hundred °C, which bounds
/// the air leaving them (estimate). Realistic balances give of order 100 K.
pub const INTAKE_HEATER_MAX_RISE_K: f64 = 500.0;

/// Equivalent charge-temperature gain of glow plugs after `preheat_s`, K: zero when the relay is
/// stuck or the plugs have failed, else `plateau · (1 − exp(−preheat/τ))`.
pub fn glow_plug_gain_k(g: &GlowPlugs, preheat_s: f64) -> Result<f64, ModelError> {
    check_range(
        "plateau_gain_k",
        g.plateau_gain_k,
        0.0,
        500.0,
        "glow plateau gain must be 0–500 K",
    )?;
    check_range(
        "preheat_time_constant_s",
        g.preheat_time_constant_s,
        0.05,
        600.0,
        "glow time constant must be 0.05–600 s",
    )?;
    check_range(
        "preheat_s",
        preheat_s,
        0.0,
        3600.0,
        "preheat time must be 0–3600 s",
    )?;
    if !(g.relay_ok && g.plugs_ok) {
        return Ok(0.0);
    }
    // −expm1(−x) = 1 − exp(−x), accurate for short preheats.
    Ok(-g.plateau_gain_k * (-preheat_s / g.preheat_time_constant_s).exp_m1())
}

/// Temperature rise of the intake air stream, K, from a heater of `power_w`: energy balance
/// `η P / (ṁ c_p)`, capped at [`INTAKE_HEATER_MAX_RISE_K`].
pub fn intake_heater_rise_k(
    power_w: f64,
    heat_to_air_fraction: f64,
    air_mass_flow_kg_s: f64,
    cp_air_j_per_kg_k: f64,
) -> Result<f64, ModelError> {
    check_range(
        "power_w",
        power_w,
        0.0,
        1.0e5,
        "heater power must be 0–100 kW",
    )?;
    check_range(
        "heat_to_air_fraction",
        heat_to_air_fraction,
        0.0,
        1.0,
        "a fraction must be 0–1",
    )?;
    check_range(
        "air_mass_flow_kg_s",
        air_mass_flow_kg_s,
        1.0e-5,
        100.0,
        "air mass flow must be 10 mg/s–100 kg/s",
    )?;
    check_range(
        "cp_air_j_per_kg_k",
        cp_air_j_per_kg_k,
        900.0,
        1300.0,
        "c_p of air must be 900–1300 J/(kg K)",
    )?;
    let rise_k = heat_to_air_fraction * power_w / (air_mass_flow_kg_s * cp_air_j_per_kg_k);
    Ok(rise_k.min(INTAKE_HEATER_MAX_RISE_K))
}

/// Air mass flow through a four-stroke engine at cranking, kg/s: `ρ V_d (N/120) η_v` with
/// `ρ = p/(R T)` at the intake.
pub fn cranking_air_mass_flow_kg_s(
    displacement_m3: f64,
    crank_rpm: f64,
    intake_p_pa: f64,
    intake_t_k: f64,
    volumetric_efficiency: f64,
    r_air_j_per_kg_k: f64,
) -> Result<f64, ModelError> {
    check_range(
        "displacement_m3",
        displacement_m3,
        1.0e-5,
        0.2,
        "displacement must be 10 cm³–200 L",
    )?;
    check_range(
        "crank_rpm",
        crank_rpm,
        1.0,
        10_000.0,
        "crank speed must be 1–10 000 rpm",
    )?;
    check_range(
        "intake_p_pa",
        intake_p_pa,
        1.0e4,
        1.0e6,
        "intake pressure must be 0.1–10 bar",
    )?;
    check_range(
        "intake_t_k",
        intake_t_k,
        150.0,
        500.0,
        "intake temperature must be 150–500 K",
    )?;
    check_range(
        "volumetric_efficiency",
        volumetric_efficiency,
        0.05,
        1.5,
        "volumetric efficiency must be 0.05–1.5",
    )?;
    check_range(
        "r_air_j_per_kg_k",
        r_air_j_per_kg_k,
        200.0,
        500.0,
        "gas constant must be 200–500 J/(kg K)",
    )?;
    let density_kg_m3 = intake_p_pa / (r_air_j_per_kg_k * intake_t_k);
    // One intake stroke per cylinder every two revolutions.
    Ok(density_kg_m3 * displacement_m3 * crank_rpm / 120.0 * volumetric_efficiency)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn modern() -> GlowPlugs {
        GlowPlugs {
            plateau_gain_k: DEFAULT_GLOW_PLATEAU_GAIN_K,
            preheat_time_constant_s: DEFAULT_GLOW_TIME_CONSTANT_S,
            relay_ok: true,
            plugs_ok: true,
        }
    }

    #[test]
    fn stuck_relay_or_failed_plugs_leave_the_engine_unassisted() {
        // Fact of the trade, common practice (no source): a stuck glow-plug relay leaves the engine
        // unassisted; so do failed plugs.
        let stuck = GlowPlugs {
            relay_ok: false,
            ..modern()
        };
        let failed = GlowPlugs {
            plugs_ok: false,
            ..modern()
        };
        for t in [0.0, 5.0, 60.0, 600.0] {
            assert_eq!(glow_plug_gain_k(&stuck, t).unwrap(), 0.0);
            assert_eq!(glow_plug_gain_k(&failed, t).unwrap(), 0.0);
        }
        assert!(glow_plug_gain_k(&modern(), 5.0).unwrap() > 0.0);
    }

    #[test]
    fn glow_gain_hand_values() {
        // Computed here: plateau · (1 − e^−t/τ). t = τ → 63.21 %; modern plugs (τ 2 s) after a 5 s
        // preheat → 1 − e^−2.5 = 91.79 %, consistent with tips > 1000 °C "within a few seconds"
        // (reference.md §12, confirmed); older plugs (τ 10 s) after 5 s → 39.35 %, which is why
        // they pre-glow 5–30 s (§12, common practice).
        let g = modern();
        assert_eq!(glow_plug_gain_k(&g, 0.0).unwrap(), 0.0);
        let at_tau = glow_plug_gain_k(&g, DEFAULT_GLOW_TIME_CONSTANT_S).unwrap();
        assert!((at_tau / g.plateau_gain_k - 0.632_12).abs() < 1e-5);
        assert!((glow_plug_gain_k(&g, 5.0).unwrap() / g.plateau_gain_k - 0.917_92).abs() < 1e-5);
        let older = GlowPlugs {
            preheat_time_constant_s: OLDER_GLOW_TIME_CONSTANT_S,
            ..g
        };
        assert!(
            (glow_plug_gain_k(&older, 5.0).unwrap() / g.plateau_gain_k - 0.393_47).abs() < 1e-5
        );
        assert!(glow_plug_gain_k(&older, 30.0).unwrap() / g.plateau_gain_k > 0.95);
    }

    #[test]
    fn glow_plateaus_are_ordered_by_how_much_the_chamber_needs() {
        // The plateaus are fitted on the aided limit (about −25 °C, common practice, from memory;
        // see `assess::calibration`). Whatever the fit, a divided chamber loses more of its charge
        // heat to its walls (no-aid limits 20 and 40 °C against 0 °C, Reif 2014, reference.md §13),
        // so its plug must make up more: DI < swirl chamber < prechamber, all within the 0–500 K
        // the model accepts.
        const { assert!(GLOW_PLATEAU_GAIN_DI_K < GLOW_PLATEAU_GAIN_SWIRL_CHAMBER_K) };
        const { assert!(GLOW_PLATEAU_GAIN_SWIRL_CHAMBER_K < GLOW_PLATEAU_GAIN_PRECHAMBER_K) };
        const { assert!(GLOW_PLATEAU_GAIN_PRECHAMBER_K < 500.0) };
    }

    #[test]
    fn intake_heater_on_a_10_litre_engine_at_120_rpm() {
        // Computed here: −20 °C air, 101 325 Pa, R 287.05 J/(kg K) (reference.md §1.4, computed
        // there): ρ = 101 325/(287.05 · 253.15) = 1.39438 kg/m³; ṁ = ρ · 0.010 m³ · 120/120 · 0.85
        // = 0.011852 kg/s (≈ 12 g/s). c_p(250 K) = 1.003 kJ/(kg K) (reference.md §1.5, NBS Circular
        // 564, confirmed). 2 kW all into the air: 2000/(0.011852 · 1003) = 168.2 K; with the 0.5
        // default share: 84.1 K (hand-computed: 0.5 · 168.2).
        let flow =
            cranking_air_mass_flow_kg_s(0.010, 120.0, 101_325.0, 253.15, 0.85, 287.05).unwrap();
        assert!((flow - 0.011_852).abs() < 1e-6, "{flow}");
        let all = intake_heater_rise_k(2000.0, 1.0, flow, 1003.0).unwrap();
        assert!((all - 168.2).abs() < 0.1, "{all}");
        let share =
            intake_heater_rise_k(2000.0, DEFAULT_INTAKE_HEATER_EFFICIENCY, flow, 1003.0).unwrap();
        assert!((share - 84.1).abs() < 0.1, "{share}");
    }

    #[test]
    fn intake_heater_rise_is_bounded_at_vanishing_flow() {
        let r = intake_heater_rise_k(100_000.0, 1.0, 1.0e-5, 1000.0).unwrap();
        assert_eq!(r, INTAKE_HEATER_MAX_RISE_K);
        assert_eq!(intake_heater_rise_k(0.0, 1.0, 0.01, 1000.0).unwrap(), 0.0);
    }

    #[test]
    fn hostile_inputs_are_rejected() {
        for v in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY, -1.0, 1e300] {
            assert!(glow_plug_gain_k(&modern(), v).is_err());
            assert!(
                glow_plug_gain_k(
                    &GlowPlugs {
                        plateau_gain_k: v,
                        ..modern()
                    },
                    5.0
                )
                .is_err()
            );
            assert!(
                glow_plug_gain_k(
                    &GlowPlugs {
                        preheat_time_constant_s: v,
                        ..modern()
                    },
                    5.0
                )
                .is_err()
            );
            // A failed relay does not hide invalid input.
            let stuck = GlowPlugs {
                relay_ok: false,
                ..modern()
            };
            assert!(glow_plug_gain_k(&stuck, v).is_err());
            assert!(intake_heater_rise_k(v, 0.6, 0.01, 1003.0).is_err());
            assert!(intake_heater_rise_k(2000.0, v, 0.01, 1003.0).is_err());
            assert!(intake_heater_rise_k(2000.0, 0.6, v, 1003.0).is_err());
            assert!(intake_heater_rise_k(2000.0, 0.6, 0.01, v).is_err());
            for i in 0..6 {
                let mut a = [0.010, 120.0, 101_325.0, 253.15, 0.85, 287.05];
                a[i] = v;
                assert!(cranking_air_mass_flow_kg_s(a[0], a[1], a[2], a[3], a[4], a[5]).is_err());
            }
        }
        // A zero time constant or zero flow would divide by zero.
        assert!(
            glow_plug_gain_k(
                &GlowPlugs {
                    preheat_time_constant_s: 0.0,
                    ..modern()
                },
                5.0
            )
            .is_err()
        );
        assert!(intake_heater_rise_k(2000.0, 0.6, 0.0, 1003.0).is_err());
        assert!(cranking_air_mass_flow_kg_s(0.010, 0.0, 101_325.0, 253.15, 0.85, 287.05).is_err());
    }

    fixed_proptest! {
        #[test]
        fn glow_gain_grows_with_preheat_to_its_plateau(
            plateau in 0.0..500.0_f64, tau in 0.05..60.0_f64,
            t1 in 0.0..600.0_f64, dt in 0.0..600.0_f64,
        ) {
            let g = GlowPlugs {
                plateau_gain_k: plateau,
                preheat_time_constant_s: tau,
                relay_ok: true,
                plugs_ok: true,
            };
            let a = glow_plug_gain_k(&g, t1).unwrap();
            let b = glow_plug_gain_k(&g, t1 + dt).unwrap();
            prop_assert!(0.0 <= a && a <= b && b <= plateau);
            // After five time constants the plateau is reached within 0.7 %.
            if t1 >= 5.0 * tau {
                prop_assert!(a >= 0.993 * plateau);
            }
        }

        #[test]
        fn heater_rise_falls_with_flow_and_grows_with_power(
            p in 100.0..5000.0_f64, flow in 0.005..1.0_f64, cp in 1000.0..1100.0_f64,
        ) {
            let r = intake_heater_rise_k(p, 0.6, flow, cp).unwrap();
            prop_assert!(intake_heater_rise_k(p, 0.6, flow * 1.5, cp).unwrap() <= r);
            prop_assert!(intake_heater_rise_k(p * 1.5, 0.6, flow, cp).unwrap() >= r);
        }

        #[test]
        fn air_flow_scales_with_speed_and_density(
            vd in 0.001..0.02_f64, rpm in 50.0..300.0_f64, t in 230.0..320.0_f64,
        ) {
            let flow = |rpm, t| cranking_air_mass_flow_kg_s(vd, rpm, 101_325.0, t, 0.85, 287.05);
            let f = flow(rpm, t).unwrap();
            let f2 = flow(2.0 * rpm, t).unwrap();
            prop_assert!((f2 / f - 2.0).abs() < 1e-12);
            // Colder air is denser.
            prop_assert!(flow(rpm, t - 20.0).unwrap() > f);
        }
    }
}
