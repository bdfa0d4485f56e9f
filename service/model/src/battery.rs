//! Lead-acid starting battery: open-circuit voltage, internal resistance in the cold, electrolyte
//! freezing.
//!
//! **What it models.** A flooded or AGM lead-acid starting battery (or a 24 V string of two 12 V
//! blocks in series) as a voltage source behind an internal resistance, both depending on state of
//! charge and temperature, plus whether its electrolyte is frozen.
//!
//! **Published data and method** (reference.md §8):
//! - Open-circuit voltage against state of charge at 25 °C, rested (§8.3, *from memory*, commonly
//!   published by battery makers): 12.65 V = 100 %, 12.45 = 75 %, 12.24 = 50 %, 12.06 = 25 %,
//!   11.9 = 0 %. Interpolated linearly; scaled by `nominal_v / 12` for a 24 V string. The small
//!   temperature coefficient of the open-circuit voltage is neglected.
//! - Cold cranking amps (SAE J537 / BCI, §8.1, confirmed): a new, fully charged 12 V battery delivers
//!   its rated CCA for 30 s at −18 °C while holding ≥ 7.2 V. So its effective resistance at −18 °C is
//!   at most `(12.65 − 7.2) / CCA` (§8.4, computed here). We set the new, full battery's resistance
//!   *at* that bound: a battery that just meets its rating (conservative; real batteries often exceed
//!   it). This is an effective resistance including 30-s polarisation, the right one for cranking.
//! - Electrolyte freezing point (§8.3, *from memory*): about −57 °C full, −25 °C at 50 %, −7 °C
//!   discharged; interpolated linearly in state of charge.
//!
//! **Estimates** (documented, tunable):
//! - Temperature: resistance follows an Arrhenius law `exp(E/R (1/T − 1/T_ref))`, `T_ref` = −18 °C,
//!   with `E/R` set so the resistance doubles from 25 °C to −18 °C, the upper end of the 1.5–2× the
//!   reference sheet gives (§8.4, estimate). It then makes the available power at −18 °C about 49 %
//!   of that at 27 °C, near the widely quoted 40 % (§8.2, from memory).
//! - State of charge: resistance × `(1 + 0.6 (1 − SOC))` (the electrolyte thins and sulphate covers
//!   the plates as the battery discharges).
//! - Ageing: resistance ÷ `health_fraction` (1 = new).
//!
//! **Units.** Volts, amperes, ohms, kelvin; state of charge and health as fractions 0–1.
//!
//! **Validity.** 12 or 24 V nominal, 50–5,000 CCA per string, battery temperature 183.15–343.15 K
//! (−90 to +70 °C; below −57 °C even a full battery is frozen), health 0.01–1.

use crate::constants::ZERO_CELSIUS_K;
use crate::error::{ModelError, check_range};

/// Voltage a 12 V battery must hold while delivering its CCA at −18 °C, V (SAE J537 / BCI,
/// reference.md §8.1, confirmed).
pub const CCA_END_V_PER_12V: f64 = 7.2;

/// CCA rating temperature, K (−18 °C ≈ 0 °F; reference.md §8.1, confirmed).
pub const CCA_RATING_T_K: f64 = -18.0 + ZERO_CELSIUS_K;

/// Rise of internal resistance from 25 °C to −18 °C (**estimate**, upper end of reference.md §8.4's
/// 1.5–2×).
pub const RESISTANCE_RISE_25C_TO_M18C: f64 = 2.0;

/// Extra relative resistance of a fully discharged battery over a full one (**estimate**).
pub const RESISTANCE_RISE_WHEN_DISCHARGED: f64 = 0.6;

/// Open-circuit voltage of a 12 V battery against state of charge, 25 °C, rested
/// (reference.md §8.3, from memory).
const OCV_TABLE_12V: [(f64, f64); 5] = [
    (0.0, 11.9),
    (0.25, 12.06),
    (0.5, 12.24),
    (0.75, 12.45),
    (1.0, 12.65),
];

/// Electrolyte freezing point, °C, against state of charge (reference.md §8.3, from memory).
const FREEZE_TABLE_C: [(f64, f64); 3] = [(0.0, -7.0), (0.5, -25.0), (1.0, -57.0)];

/// A lead-acid starting battery (or a series string of 12 V blocks) as the starter sees it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Battery {
    /// SAE J537 cold cranking amps of the string (for 24 V: the CCA of each 12 V block, since the
    /// same current flows through both), A.
    pub rated_cca_a: f64,
    /// Nominal voltage: 12, or 24 for two 12 V blocks in series, V.
    pub nominal_v: f64,
    /// State of charge, 0 (flat) to 1 (full).
    pub state_of_charge: f64,
    /// Ageing, 1 = new; internal resistance is divided by it. Must be ≥ 0.01.
    pub health_fraction: f64,
    /// Electrolyte temperature, K.
    pub temperature_k: f64,
}

impl Battery {
    /// Checks every field is finite and within the model's range.
    pub fn validate(&self) -> Result<(), ModelError> {
        check_range(
            "rated_cca_a",
            self.rated_cca_a,
            50.0,
            5_000.0,
            "cold cranking amps must be 50–5,000 A per string",
        )?;
        if self.nominal_v != 12.0 && self.nominal_v != 24.0 {
            return Err(ModelError::OutOfRange {
                quantity: "nominal_v",
                value: self.nominal_v,
                reason: "battery nominal voltage must be 12 or 24 V",
            });
        }
        check_range(
            "state_of_charge",
            self.state_of_charge,
            0.0,
            1.0,
            "state of charge is a fraction 0–1",
        )?;
        check_range(
            "health_fraction",
            self.health_fraction,
            0.01,
            1.0,
            "battery health is a fraction 0.01–1 (1 = new)",
        )?;
        check_range(
            "battery_t_k",
            self.temperature_k,
            183.15,
            343.15,
            "battery model covers −90 to +70 °C (below about −57 °C every battery is frozen)",
        )?;
        Ok(())
    }

    /// Number of 12 V blocks in series.
    fn blocks(&self) -> f64 {
        self.nominal_v / 12.0
    }
}

/// Piecewise-linear interpolation in a table sorted by x, clamped at both ends. NaN gives NaN.
fn interpolate(table: &[(f64, f64)], x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    let (x_first, y_first) = table[0];
    if x <= x_first {
        return y_first;
    }
    for pair in table.windows(2) {
        let ((x0, y0), (x1, y1)) = (pair[0], pair[1]);
        if x <= x1 {
            return y0 + (y1 - y0) * (x - x0) / (x1 - x0);
        }
    }
    table[table.len() - 1].1
}

/// Open-circuit (rested) voltage, V: the §8.3 table at the state of charge, × `nominal_v / 12`.
/// State of charge outside 0–1 is clamped; call [`Battery::validate`] first.
pub fn open_circuit_v(b: &Battery) -> f64 {
    interpolate(&OCV_TABLE_12V, b.state_of_charge) * b.blocks()
}

/// Arrhenius exponent `E/R` of the internal resistance, K, from [`RESISTANCE_RISE_25C_TO_M18C`].
fn resistance_activation_k() -> f64 {
    RESISTANCE_RISE_25C_TO_M18C.ln() / (1.0 / CCA_RATING_T_K - 1.0 / (25.0 + ZERO_CELSIUS_K))
}

/// Effective internal resistance under cranking load, Ω: at −18 °C, full and new, exactly the CCA
/// bound `(12.65 − 7.2) V / CCA` per 12 V block; rising in the cold (Arrhenius, estimate), as charge
/// falls (estimate) and as health falls (÷ health). Unchecked: call [`Battery::validate`] first.
pub fn internal_resistance_ohm(b: &Battery) -> f64 {
    let ocv_full_v = OCV_TABLE_12V[OCV_TABLE_12V.len() - 1].1;
    let r_rated_ohm = (ocv_full_v - CCA_END_V_PER_12V) / b.rated_cca_a * b.blocks();
    let cold = (resistance_activation_k() * (1.0 / b.temperature_k - 1.0 / CCA_RATING_T_K)).exp();
    let soc = b.state_of_charge.clamp(0.0, 1.0);
    let charge = 1.0 + RESISTANCE_RISE_WHEN_DISCHARGED * (1.0 - soc);
    r_rated_ohm * cold * charge / b.health_fraction
}

/// Electrolyte freezing point, K, at a state of charge (§8.3 table, linear; clamped to 0–1; NaN
/// gives NaN).
pub fn electrolyte_freezing_point_k(state_of_charge: f64) -> f64 {
    interpolate(&FREEZE_TABLE_C, state_of_charge) + ZERO_CELSIUS_K
}

/// True when the electrolyte is at or below its freezing point: such a battery cannot crank, and must
/// never be charged or jump-started before it has thawed.
pub fn is_frozen(b: &Battery) -> bool {
    b.temperature_k <= electrolyte_freezing_point_k(b.state_of_charge)
}

/// State of charge from a rested open-circuit voltage (inverse of the §8.3 table). Readings above the
/// full value (surface charge) give 1, below the flat value give 0. Accepts 10–13.5 V per 12 V block;
/// outside that the reading is not a rested battery voltage.
pub fn state_of_charge_from_rest_v(rest_v: f64, nominal_v: f64) -> Result<f64, ModelError> {
    if nominal_v != 12.0 && nominal_v != 24.0 {
        return Err(ModelError::OutOfRange {
            quantity: "nominal_v",
            value: nominal_v,
            reason: "battery nominal voltage must be 12 or 24 V",
        });
    }
    let per_block_v = rest_v / (nominal_v / 12.0);
    check_range(
        "rest_v",
        per_block_v,
        10.0,
        13.5,
        "a rested battery reads 10–13.5 V per 12 V block",
    )?;
    let swapped: [(f64, f64); 5] = OCV_TABLE_12V.map(|(soc, v)| (v, soc));
    Ok(interpolate(&swapped, per_block_v))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn battery(cca: f64, soc: f64, t_c: f64) -> Battery {
        Battery {
            rated_cca_a: cca,
            nominal_v: 12.0,
            state_of_charge: soc,
            health_fraction: 1.0,
            temperature_k: t_c + ZERO_CELSIUS_K,
        }
    }

    #[test]
    fn open_circuit_voltage_table() {
        // reference.md §8.3, open-circuit voltage vs state of charge at 25 °C, from memory.
        for (soc, v) in [
            (1.0, 12.65),
            (0.75, 12.45),
            (0.5, 12.24),
            (0.25, 12.06),
            (0.0, 11.9),
        ] {
            assert!((open_circuit_v(&battery(600.0, soc, 25.0)) - v).abs() < 1e-12);
            let b24 = Battery {
                nominal_v: 24.0,
                ..battery(600.0, soc, 25.0)
            };
            assert!((open_circuit_v(&b24) - 2.0 * v).abs() < 1e-12);
            assert!((state_of_charge_from_rest_v(v, 12.0).unwrap() - soc).abs() < 1e-12);
            assert!((state_of_charge_from_rest_v(2.0 * v, 24.0).unwrap() - soc).abs() < 1e-12);
        }
        // Between table points: linear (our interpolation).
        assert!((open_circuit_v(&battery(600.0, 0.875, 25.0)) - 12.55).abs() < 1e-12);
        // Surface charge after charging reads high: still "full". Common practice (no source).
        assert_eq!(state_of_charge_from_rest_v(12.9, 12.0), Ok(1.0));
        assert_eq!(state_of_charge_from_rest_v(11.5, 12.0), Ok(0.0));
    }

    #[test]
    fn cca_definition_holds_by_construction() {
        // reference.md §8.1 (SAE J537 / BCI, confirmed): a new, full battery delivers its CCA at
        // −18 °C holding ≥ 7.2 V per 12 V; §8.4 (computed here): 600 CCA → R ≤ 9 mΩ, 1000 → ≤ 5.4 mΩ.
        for cca in [300.0, 600.0, 1_000.0, 1_500.0] {
            for nominal_v in [12.0, 24.0] {
                let b = Battery {
                    nominal_v,
                    ..battery(cca, 1.0, -18.0)
                };
                let terminal_v = open_circuit_v(&b) - cca * internal_resistance_ohm(&b);
                assert!(
                    terminal_v >= CCA_END_V_PER_12V * nominal_v / 12.0 - 1e-9,
                    "{cca} A: {terminal_v} V"
                );
                assert!(
                    terminal_v < CCA_END_V_PER_12V * nominal_v / 12.0 + 1e-9,
                    "at the bound"
                );
            }
        }
        let r600 = internal_resistance_ohm(&battery(600.0, 1.0, -18.0));
        let r1000 = internal_resistance_ohm(&battery(1_000.0, 1.0, -18.0));
        assert!(r600 <= 9.1e-3 && r600 > 8.9e-3, "{r600}");
        assert!(r1000 <= 5.46e-3 && r1000 > 5.3e-3, "{r1000}");
    }

    #[test]
    fn room_temperature_resistance_is_typical() {
        // reference.md §8.4, estimate: room-temperature resistance of 12 V automotive batteries is
        // about 3–8 mΩ. A new 600-CCA battery at 25 °C should fall in that band.
        let r = internal_resistance_ohm(&battery(600.0, 1.0, 25.0));
        assert!((3e-3..8e-3).contains(&r), "{r}");
        // And the cold rise we chose: exactly 2× from 25 °C to −18 °C (estimate, §8.4 says 1.5–2×).
        let rise = internal_resistance_ohm(&battery(600.0, 1.0, -18.0)) / r;
        assert!((rise - 2.0).abs() < 1e-9);
    }

    #[test]
    fn available_power_in_the_cold_follows_the_chart_qualitatively() {
        // reference.md §8.2 (from memory, widely published chart): available battery power 100 % at
        // 27 °C, 65 % at 0 °C, 40 % at −18 °C. Matched-load power V²/(4R) in our model.
        let p = |t_c: f64| {
            let b = battery(600.0, 1.0, t_c);
            open_circuit_v(&b).powi(2) / (4.0 * internal_resistance_ohm(&b))
        };
        let at_0 = p(0.0) / p(27.0);
        let at_m18 = p(-18.0) / p(27.0);
        assert!((0.55..0.75).contains(&at_0), "0 °C: {at_0}");
        assert!((0.30..0.60).contains(&at_m18), "−18 °C: {at_m18}");
        assert!(at_m18 < at_0);
    }

    #[test]
    fn freezing_points() {
        // reference.md §8.3, from memory: −57 °C full, −25 °C at 50 %, −7 °C discharged.
        for (soc, t_c) in [(1.0, -57.0), (0.5, -25.0), (0.0, -7.0)] {
            assert!((electrolyte_freezing_point_k(soc) - (t_c + ZERO_CELSIUS_K)).abs() < 1e-12);
        }
        assert!(is_frozen(&battery(600.0, 0.0, -10.0)));
        assert!(!is_frozen(&battery(600.0, 1.0, -40.0)));
        assert!(is_frozen(&battery(600.0, 0.5, -30.0)));
        assert!(!is_frozen(&battery(600.0, 0.5, -20.0)));
        assert!(electrolyte_freezing_point_k(f64::NAN).is_nan());
    }

    #[test]
    fn hostile_inputs_are_rejected() {
        let good = battery(600.0, 0.8, -10.0);
        assert!(good.validate().is_ok());
        let bad = [
            Battery {
                rated_cca_a: f64::NAN,
                ..good
            },
            Battery {
                rated_cca_a: -600.0,
                ..good
            },
            Battery {
                rated_cca_a: f64::INFINITY,
                ..good
            },
            Battery {
                nominal_v: 13.0,
                ..good
            },
            Battery {
                nominal_v: f64::NAN,
                ..good
            },
            Battery {
                state_of_charge: 1.01,
                ..good
            },
            Battery {
                state_of_charge: -0.1,
                ..good
            },
            Battery {
                health_fraction: 0.0,
                ..good
            },
            Battery {
                health_fraction: f64::NAN,
                ..good
            },
            Battery {
                temperature_k: 0.0,
                ..good
            },
            Battery {
                temperature_k: -5.0,
                ..good
            },
            Battery {
                temperature_k: f64::NEG_INFINITY,
                ..good
            },
            Battery {
                temperature_k: 1e9,
                ..good
            },
        ];
        for b in bad {
            assert!(b.validate().is_err(), "{b:?}");
        }
        for (v, nominal) in [
            (f64::NAN, 12.0),
            (5.0, 12.0),
            (14.0, 12.0),
            (12.5, 6.0),
            (12.5, f64::NAN),
            (-12.5, 12.0),
        ] {
            assert!(
                state_of_charge_from_rest_v(v, nominal).is_err(),
                "{v} V on {nominal} V"
            );
        }
    }

    fixed_proptest! {
        #[test]
        fn colder_or_emptier_or_older_means_more_resistance(
            cca in 50.0f64..5000.0, soc in 0.0f64..1.0, t in 213.15f64..343.15,
            dt in 0.1f64..30.0, dsoc in 0.01f64..0.5, health in 0.01f64..1.0
        ) {
            // Laws of the model: R rises as temperature, state of charge or health fall.
            let b = Battery { rated_cca_a: cca, nominal_v: 12.0, state_of_charge: soc, health_fraction: health, temperature_k: t };
            let r = internal_resistance_ohm(&b);
            prop_assert!(r > 0.0 && r.is_finite());
            let warmer = Battery { temperature_k: (t + dt).min(343.15), ..b };
            prop_assert!(internal_resistance_ohm(&warmer) <= r);
            let fuller = Battery { state_of_charge: (soc + dsoc).min(1.0), ..b };
            prop_assert!(internal_resistance_ohm(&fuller) <= r);
            prop_assert!(open_circuit_v(&fuller) >= open_circuit_v(&b));
            let newer = Battery { health_fraction: (health * 1.5).min(1.0), ..b };
            prop_assert!(internal_resistance_ohm(&newer) <= r);
            let bigger = Battery { rated_cca_a: cca * 1.2, ..b };
            prop_assert!(internal_resistance_ohm(&bigger) < r);
        }

        #[test]
        fn fuller_freezes_lower_and_rest_voltage_round_trips(soc in 0.0f64..1.0, dsoc in 0.001f64..0.5) {
            // §8.3 tables are monotonic; the inverse reproduces the state of charge.
            let hi = (soc + dsoc).min(1.0);
            prop_assert!(electrolyte_freezing_point_k(hi) < electrolyte_freezing_point_k(soc));
            let b = Battery { rated_cca_a: 600.0, nominal_v: 24.0, state_of_charge: soc, health_fraction: 1.0, temperature_k: 270.0 };
            let back = state_of_charge_from_rest_v(open_circuit_v(&b), 24.0).unwrap();
            prop_assert!((back - soc).abs() < 1e-9);
        }
    }
}
