//! Cooling of the charge by the evaporation of the injected fuel.
//!
//! **What it models.** Fuel injected at its own (tank/line) temperature is heated and vaporised by
//! the hot charge near TDC; the energy comes out of the air. For a closed charge, per kilogram of
//! air (model.md §4):
//!
//! `ΔT = (m_fuel/m_air) · (∫ c_liquid dT from T_fuel to T_evap + h_fg) / c_v,air`
//!
//! **Method and constants.** A lumped energy balance (no published correlation is needed). Diesel
//! liquid specific heat 1.9 kJ/(kg K) at 20 °C rising 0.004 kJ/(kg K) per K, latent heat of
//! vaporisation 250 kJ/kg (reference.md §10, Heywood App. D; from memory). The specific heat is
//! integrated exactly along that linear law, so heating to 270 °C uses its mean (2.4 kJ/(kg K)),
//! not the room-temperature value.
//!
//! **Which temperature the liquid is heated to (estimate).** `T_evap = min(charge T, 543.15 K)`:
//! the charge temperature, capped at 270 °C, a representative mid-distillation (T50) temperature of
//! No. 2 / EN 590 diesel (about 250–290 °C, from memory). The superheating of the vapour above that
//! temperature is deliberately left out: only the fuel that evaporates before ignition cools the
//! igniting charge, and the full equilibrium balance (fuel vapour brought to the charge
//! temperature, same c_p law as a proxy) would add about a third at a 650 K cranking charge and
//! more than double the figure at an 850 K idle charge, contradicting the trade's "a few kelvin at
//! lean idle". The balance assumes the fuel evaporates completely; at a cold charge it therefore
//! overstates the cooling (a conservative error for a start prediction).
//!
//! **Cranking air–fuel ratio (estimate).** Cranking fuelling is rich: a start quantity well above
//! the full-load quantity into a cylinder that fills no better than at full load, so the global
//! air–fuel ratio is about 25–35:1 ([`DEFAULT_CRANKING_AIR_FUEL_RATIO`] = 30, no published source);
//! compare about 106:1 at light-truck idle (common practice, no source) and stoichiometric 14.5
//! (reference.md §10). [`air_fuel_ratio`] computes it from masses when they are known.
//!
//! **Units.** Kelvin, J/(kg K), J/kg; mass ratios are dimensionless (kg air per kg fuel).
//!
//! **Validity.** Air–fuel ratio 5–10 000 (richer than 5:1 the fuel could not all evaporate), fuel
//! 200–400 K (liquid in the supply), charge 200–3000 K and not colder than the fuel, c_v of air
//! 500–1500 J/(kg K).

use crate::error::{ModelError, check_range};

/// Liquid properties of a fuel for the evaporation balance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FuelLiquidProperties {
    /// Liquid specific heat at 293.15 K, J/(kg K).
    pub cp_at_293k_j_per_kg_k: f64,
    /// Rise of the liquid specific heat with temperature, J/(kg K) per K.
    pub cp_slope_j_per_kg_k2: f64,
    /// Latent heat of vaporisation, J/kg.
    pub latent_heat_j_per_kg: f64,
    /// Temperature the liquid is heated to before it evaporates (cap), K.
    pub evaporation_t_k: f64,
}

/// Diesel (No. 2 / EN 590): 1.9 kJ/(kg K) at 20 °C + 4 J/(kg K²), h_fg 250 kJ/kg (reference.md §10,
/// from memory); evaporation at 270 °C, a representative T50 (estimate).
pub const DIESEL_LIQUID: FuelLiquidProperties = FuelLiquidProperties {
    cp_at_293k_j_per_kg_k: 1_900.0,
    cp_slope_j_per_kg_k2: 4.0,
    latent_heat_j_per_kg: 250_000.0,
    evaporation_t_k: 543.15,
};

/// Global air–fuel mass ratio while cranking: rich start fuelling, about 25–35:1 (estimate, no
/// published source).
pub const DEFAULT_CRANKING_AIR_FUEL_RATIO: f64 = 30.0;

/// Air–fuel mass ratio from the air trapped per cycle and the fuel injected per cycle (same units).
pub fn air_fuel_ratio(
    air_mass_per_cycle_kg: f64,
    fuel_mass_per_cycle_kg: f64,
) -> Result<f64, ModelError> {
    check_range(
        "air_mass_per_cycle_kg",
        air_mass_per_cycle_kg,
        1e-9,
        100.0,
        "trapped air must be 1 µg–100 kg",
    )?;
    check_range(
        "fuel_mass_per_cycle_kg",
        fuel_mass_per_cycle_kg,
        1e-12,
        10.0,
        "fuel per cycle must be positive",
    )?;
    let afr = air_mass_per_cycle_kg / fuel_mass_per_cycle_kg;
    check_range(
        "air_fuel_ratio",
        afr,
        5.0,
        10_000.0,
        "air–fuel ratio must be 5–10 000",
    )
}

/// Temperature drop of the charge, K, from evaporating diesel injected at `fuel_t_k` into a charge
/// at `charge_t_k` with air–fuel mass ratio `air_fuel_ratio` ([`DIESEL_LIQUID`] properties).
pub fn evaporation_cooling_k(
    air_fuel_ratio: f64,
    fuel_t_k: f64,
    charge_t_k: f64,
    cv_air_j_per_kg_k: f64,
) -> Result<f64, ModelError> {
    evaporation_cooling_with_k(
        &DIESEL_LIQUID,
        air_fuel_ratio,
        fuel_t_k,
        charge_t_k,
        cv_air_j_per_kg_k,
    )
}

/// As [`evaporation_cooling_k`] for a fuel with liquid properties `fuel`.
pub fn evaporation_cooling_with_k(
    fuel: &FuelLiquidProperties,
    air_fuel_ratio: f64,
    fuel_t_k: f64,
    charge_t_k: f64,
    cv_air_j_per_kg_k: f64,
) -> Result<f64, ModelError> {
    check_range(
        "cp_at_293k_j_per_kg_k",
        fuel.cp_at_293k_j_per_kg_k,
        500.0,
        5_000.0,
        "liquid cp must be 0.5–5 kJ/(kg K)",
    )?;
    check_range(
        "cp_slope_j_per_kg_k2",
        fuel.cp_slope_j_per_kg_k2,
        0.0,
        20.0,
        "liquid cp slope must be 0–20 J/(kg K²)",
    )?;
    check_range(
        "latent_heat_j_per_kg",
        fuel.latent_heat_j_per_kg,
        0.0,
        2.0e6,
        "latent heat must be 0–2 MJ/kg",
    )?;
    check_range(
        "evaporation_t_k",
        fuel.evaporation_t_k,
        300.0,
        900.0,
        "evaporation temperature must be 300–900 K",
    )?;
    check_range(
        "air_fuel_ratio",
        air_fuel_ratio,
        5.0,
        10_000.0,
        "air–fuel ratio must be 5–10 000 (full evaporation)",
    )?;
    check_range(
        "fuel_t_k",
        fuel_t_k,
        200.0,
        400.0,
        "liquid fuel temperature must be 200–400 K",
    )?;
    check_range(
        "charge_t_k",
        charge_t_k,
        200.0,
        3_000.0,
        "charge temperature must be 200–3000 K",
    )?;
    check_range(
        "cv_air_j_per_kg_k",
        cv_air_j_per_kg_k,
        500.0,
        1_500.0,
        "c_v of air must be 500–1500 J/(kg K)",
    )?;
    if charge_t_k < fuel_t_k {
        return Err(ModelError::Inconsistent(
            "charge colder than the fuel: the fuel would not evaporate",
        ));
    }
    // Heated to the charge temperature, but no further than the evaporation temperature; if the
    // fuel is already above that (a hot supply), only the latent heat is drawn.
    let evap_t_k = charge_t_k.min(fuel.evaporation_t_k).max(fuel_t_k);
    // ∫ (c0 + s (T − 293.15)) dT from T_fuel to T_evap, exactly.
    let sensible_j_per_kg = fuel.cp_at_293k_j_per_kg_k * (evap_t_k - fuel_t_k)
        + 0.5
            * fuel.cp_slope_j_per_kg_k2
            * ((evap_t_k - 293.15).powi(2) - (fuel_t_k - 293.15).powi(2));
    Ok((sensible_j_per_kg + fuel.latent_heat_j_per_kg) / (air_fuel_ratio * cv_air_j_per_kg_k))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn hand_computed_cranking_point() {
        // Computed here from reference.md §10 values (1.9 kJ/(kg K) at 20 °C + 0.004/K, h_fg 250
        // kJ/kg, from memory) and the 270 °C cap (estimate): AFR 30, fuel −20 °C (253.15 K), charge
        // 650 K → heated to 543.15 K: ∫c dT = 1900·290 + 2·(250² − (−40)²) = 551 000 + 121 800
        // = 672 800 J/kg; + 250 000 = 922 800 J/kg; / (30 · 776) = 39.639 K. c_v of air at 650 K
        // = 0.776 kJ/(kg K): reference.md §1.5, NBS Circular 564 via Cengel & Boles Table A-2(b),
        // confirmed.
        let dt = evaporation_cooling_k(30.0, 253.15, 650.0, 776.0).unwrap();
        assert!((dt - 39.639).abs() < 0.01, "{dt}");
    }

    #[test]
    fn below_the_cap_the_liquid_is_heated_only_to_the_charge() {
        // Computed here: AFR 50, fuel 293.15 K, charge 450 K (< 543.15 K): ∫c dT = 1900·156.85
        // + 2·156.85² = 298 015 + 49 204.2 = 347 219.2 J/kg; + 250 000 → / (50 · 733) = 16.295 K
        // (c_v at 450 K = 0.733 kJ/(kg K), reference.md §1.5, NBS Circular 564, confirmed).
        let dt = evaporation_cooling_k(50.0, 293.15, 450.0, 733.0).unwrap();
        assert!((dt - 16.295).abs() < 0.01, "{dt}");
    }

    #[test]
    fn lean_idle_cools_only_a_few_kelvin() {
        // Fact of the trade, common practice (no source): a light-truck diesel idles near 106:1,
        // and evaporation then cools the charge by only a few kelvin. Band asserted 2–12 K over
        // warm idle (fuel 20–60 °C, charge 700–900 K; c_v of air there 0.788, 0.812, 0.834 kJ/(kg
        // K), reference.md §1.5, NBS Circular 564, confirmed). Lower end: the latent heat alone
        // gives 250 000/(106 · 834) = 2.8 K. Largest case, computed here: fuel 293.15 K heated to
        // 543.15 K, ∫c dT = 1900·250 + 2·250² = 600 000 J/kg, (600 000 + 250 000)/(106 · 788)
        // = 10.2 K; 12 K leaves room for c_p at the top of reference.md §10's range, and is still a
        // quarter of the cranking figure below.
        for fuel_t_k in [293.15, 313.15, 333.15] {
            for (charge_t_k, cv) in [(700.0, 788.0), (800.0, 812.0), (900.0, 834.0)] {
                let dt = evaporation_cooling_k(106.0, fuel_t_k, charge_t_k, cv).unwrap();
                assert!(
                    (2.0..12.0).contains(&dt),
                    "{fuel_t_k} K fuel, {charge_t_k} K: {dt}"
                );
            }
        }
        // Cranking fuelling at the default ratio cools several times more (model.md §4).
        let idle = evaporation_cooling_k(106.0, 253.15, 650.0, 760.0).unwrap();
        let crank =
            evaporation_cooling_k(DEFAULT_CRANKING_AIR_FUEL_RATIO, 253.15, 650.0, 760.0).unwrap();
        assert!((crank / idle - 106.0 / 30.0).abs() < 1e-9);
    }

    #[test]
    fn air_fuel_ratio_from_masses() {
        // Stoichiometric 14.5 (reference.md §10, computed there): 1 g air per 1/14.5 g fuel.
        assert!((air_fuel_ratio(1.0e-3, 1.0e-3 / 14.5).unwrap() - 14.5).abs() < 1e-9);
        assert!(air_fuel_ratio(1.0e-3, 1.0e-3).is_err()); // 1:1 is below the 5:1 floor
    }

    #[test]
    fn hostile_inputs_are_rejected() {
        for v in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY, -1.0, 0.0, 1e300] {
            assert!(evaporation_cooling_k(v, 253.0, 650.0, 760.0).is_err());
            assert!(evaporation_cooling_k(30.0, v, 650.0, 760.0).is_err());
            assert!(evaporation_cooling_k(30.0, 253.0, v, 760.0).is_err());
            assert!(evaporation_cooling_k(30.0, 253.0, 650.0, v).is_err());
            assert!(air_fuel_ratio(v, 1e-3).is_err());
            assert!(air_fuel_ratio(1e-3, v).is_err());
            let bad = FuelLiquidProperties {
                latent_heat_j_per_kg: v,
                ..DIESEL_LIQUID
            };
            if v != 0.0 {
                assert!(evaporation_cooling_with_k(&bad, 30.0, 253.0, 650.0, 760.0).is_err());
            }
        }
        assert!(matches!(
            evaporation_cooling_k(30.0, 300.0, 250.0, 760.0),
            Err(ModelError::Inconsistent(_))
        ));
    }

    fixed_proptest! {
        #[test]
        fn richer_and_colder_fuel_cool_more(
            afr in 10.0..200.0_f64, fuel_t_k in 220.0..340.0_f64, charge_t_k in 400.0..1000.0_f64,
            cv in 700.0..900.0_f64,
        ) {
            let dt = evaporation_cooling_k(afr, fuel_t_k, charge_t_k, cv).unwrap();
            prop_assert!(dt > 0.0);
            prop_assert!(evaporation_cooling_k(afr * 0.8, fuel_t_k, charge_t_k, cv).unwrap() > dt);
            prop_assert!(evaporation_cooling_k(afr, fuel_t_k - 10.0, charge_t_k, cv).unwrap() > dt);
            // A hotter charge heats the liquid further, up to the cap: never less cooling.
            let hotter = evaporation_cooling_k(afr, fuel_t_k, charge_t_k + 50.0, cv).unwrap();
            prop_assert!(hotter >= dt);
        }

        #[test]
        fn arbitrary_inputs_never_panic(
            a in any::<f64>(), f in any::<f64>(), c in any::<f64>(), v in any::<f64>(),
        ) {
            if let Ok(dt) = evaporation_cooling_k(a, f, c, v) {
                prop_assert!(dt.is_finite() && dt >= 0.0);
            }
        }
    }
}
