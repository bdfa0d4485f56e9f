//! The lowest air temperature at which an engine starts with no aid, found by root finding on the
//! full model: the vehicle fully soaked to still, overcast air (no sky loss, so every node sits at
//! the air temperature), a new fully charged battery, the engine's reference oil, no glow plugs,
//! no intake heater, no block heater. This is what the published no-aid start limits describe
//! (reference.md §13), so it is where the model is calibrated and validated.

use super::{
    AssessOptions, BatteryConfig, ForecastSeries, FuelConfig, Telemetry, VehicleNight, assess,
};
use crate::archetypes::{AidConfig, EngineConfig};
use crate::constants::STANDARD_ATMOSPHERE_PA;
use crate::error::ModelError;
use crate::fuel::{BiodieselFeedstock, FuelBase, FuelDescription, FuelGrade};
use crate::oil::SaeGrade;
use crate::soak::{FilterMount, ForecastHour};

/// Reference battery for the limit: new, full, generously sized for the engine (estimate: about
/// 150 CCA per litre of displacement, at least 600 CCA).
fn reference_battery(engine: &EngineConfig) -> BatteryConfig {
    let litres = engine.geometry.displacement_m3() * 1000.0;
    BatteryConfig {
        rated_cca_a: (150.0 * litres).max(600.0),
        nominal_v: 12.0,
        state_of_charge: Some(1.0),
        health_fraction: 1.0,
    }
}

/// Start margin of an unaided, fully soaked engine at `air_t_k`, K.
pub fn unassisted_margin_k(engine: &EngineConfig, air_t_k: f64) -> Result<f64, ModelError> {
    Ok(assess(&reference_night(engine, air_t_k))?.margin_k)
}

/// The reference night of the no-aid limit at `air_t_k`.
pub fn reference_night(engine: &EngineConfig, air_t_k: f64) -> VehicleNight {
    let hours = vec![
        ForecastHour {
            air_t_k,
            wind_mps: 0.0,
            cloud_fraction: 1.0
        };
        2
    ];
    VehicleNight {
        engine: *engine,
        aids: AidConfig {
            glow_plugs: None,
            glow_preheat_s: 0.0,
            intake_heater_w: 0.0,
            block_heater_w: 0.0,
        },
        battery: reference_battery(engine),
        oil: SaeGrade {
            winter: Some(5),
            hot: 30,
        },
        fuel: FuelConfig {
            description: FuelDescription {
                base: FuelBase::Grade(FuelGrade::UsNo1),
                biodiesel_fraction: 0.0,
                feedstock: BiodieselFeedstock::Unknown,
                no1_blend_fraction: 0.0,
                additive: None,
                // A cetane number in the middle of road diesel (EN 590 51 min, D975 40 min).
                cetane_number: Some(48.0),
            },
            tank_capacity_l: 60.0,
            filter_mount: FilterMount::EngineBay,
        },
        sheltered: false,
        telemetry: Telemetry::default(),
        forecast: ForecastSeries {
            start_s: 0.0,
            step_s: 3600.0,
            hours,
            air_spread_k: Vec::new(),
            barometric_pa: STANDARD_ATMOSPHERE_PA,
        },
        departure_s: 3600.0,
        block_heater_plan: None,
        options: AssessOptions::default(),
    }
}

/// Lowest air temperature at which the margin is zero, K (bisection over −60…+80 °C).
pub fn unassisted_limit_k(engine: &EngineConfig) -> Result<f64, ModelError> {
    let (mut lo, mut hi) = (223.15, 333.15);
    let m_lo = unassisted_margin_k(engine, lo)?;
    let m_hi = unassisted_margin_k(engine, hi)?;
    if m_lo >= 0.0 {
        return Ok(lo);
    }
    if m_hi < 0.0 {
        return Ok(hi);
    }
    for _ in 0..40 {
        let mid = 0.5 * (lo + hi);
        if unassisted_margin_k(engine, mid)? >= 0.0 {
            hi = mid;
        } else {
            lo = mid;
        }
        if hi - lo < 0.05 {
            break;
        }
    }
    Ok(0.5 * (lo + hi))
}

#[cfg(test)]
mod tests {
    //! The calibration and validation anchors of `assess::calibration`, through the full model.
    use super::*;
    use crate::archetypes::find;
    use crate::assess::calibration;
    use crate::compression::{self, CompressionInput};
    use crate::constants::{STANDARD_ATMOSPHERE_PA, celsius_to_kelvin, kelvin_to_celsius};

    fn limit_c(id: &str) -> f64 {
        kelvin_to_celsius(unassisted_limit_k(&find(id).unwrap().engine).unwrap())
    }

    #[test]
    fn direct_injection_limit_is_predicted_near_zero_celsius() {
        // Reif (ed.), Diesel Engine Management (Springer 2014) p. 136, via reference.md §13
        // (confirmed as quoted): passenger-car DI engines start without pre-heating down to about
        // 0 °C. Nothing is fitted for DI (multiplier 1, adiabatic core), so this is a prediction.
        // Band ±5 K: the published figure is a round number for a class of engines.
        let t = limit_c("compact-di-i4");
        assert!(
            (-5.0..=5.0).contains(&t),
            "compact DI no-aid limit {t:.1} °C"
        );
    }

    #[test]
    fn divided_chamber_limits_match_their_fitted_anchors() {
        // Same source: prechamber about 40 °C, swirl chamber about 20 °C (fitted, so ±2 K).
        let pre = limit_c("older-idi-v8");
        let swirl = limit_c("swirl-idi-i4");
        assert!((38.0..=42.0).contains(&pre), "prechamber {pre:.1} °C");
        assert!(
            (18.0..=22.0).contains(&swirl),
            "swirl chamber {swirl:.1} °C"
        );
    }

    #[test]
    fn heavy_duty_di_starts_unaided_well_below_freezing() {
        // reference.md §13: heavy-duty DI engines are generally quoted as starting unaided down to
        // roughly −10 to −20 °C with good batteries and suitable oil (estimate, no primary source).
        // Predicted, not fitted; band widened by 5 K either side for the estimate's looseness.
        let t = limit_c("heavy-di-i6");
        assert!(
            (-25.0..=-5.0).contains(&t),
            "heavy DI no-aid limit {t:.1} °C"
        );
    }

    /// The 17.5:1 light-truck engine in service: 15W-40, a battery at 75 % charge and 80 % health.
    fn light_truck_margin_k(air_c: f64) -> f64 {
        let a = find("light-di-v8").unwrap();
        assert_eq!(a.engine.geometry.compression_ratio, 17.5);
        let mut night = reference_night(&a.engine, celsius_to_kelvin(air_c));
        night.oil = SaeGrade {
            winter: Some(15),
            hot: 40,
        };
        night.battery = BatteryConfig {
            rated_cca_a: 750.0,
            nominal_v: 12.0,
            state_of_charge: Some(0.75),
            health_fraction: 0.8,
        };
        assess(&night).unwrap().margin_k
    }

    #[test]
    fn light_truck_without_glow_plugs_starts_hard_around_ten_celsius() {
        // Fact of the trade (common practice, no source): a 17.5:1 light-truck diesel without glow
        // plugs begins to start hard around 10 °C (50 °F). "Starts hard" = still starts but with
        // little margin: at 10 °C the margin must be positive and below twice the comfort margin,
        // and the zero crossing must lie in 0–15 °C (the band allows for the truck's battery and oil).
        let at_10 = light_truck_margin_k(10.0);
        assert!(
            at_10 > 0.0 && at_10 < 2.0 * crate::assess::COMFORT_MARGIN_K,
            "margin at 10 °C {at_10:.1} K"
        );
        let (mut lo, mut hi) = (-10.0, 20.0);
        for _ in 0..30 {
            let mid = 0.5 * (lo + hi);
            if light_truck_margin_k(mid) >= 0.0 {
                hi = mid
            } else {
                lo = mid
            }
        }
        assert!(
            (0.0..=15.0).contains(&hi),
            "light-truck zero crossing {hi:.1} °C"
        );
    }

    #[test]
    fn default_leak_area_gives_workshop_compression_pressures() {
        // reference.md §6.3 (estimate / common workshop practice): warm diesels at cranking speed
        // read about 2.4–3.4 MPa. Predicted from the default leak area per bore for every archetype.
        for a in crate::archetypes::ARCHETYPES {
            let r = compression::compress(&CompressionInput {
                geometry: a.engine.geometry,
                crank_rpm: calibration::COMPRESSION_TEST_RPM,
                intake_t_k: calibration::COMPRESSION_TEST_INTAKE_T_K,
                intake_p_pa: STANDARD_ATMOSPHERE_PA,
                wall_t_k: calibration::COMPRESSION_TEST_WALL_T_K,
                heat_transfer: calibration::WALL_HEAT_TRANSFER,
                heat_transfer_multiplier: crate::assess::wall_multiplier(a.engine.combustion),
                leak_area_m2: a.engine.leak_area_m2,
                crankcase_p_pa: STANDARD_ATMOSPHERE_PA,
            })
            .unwrap();
            let gauge_mpa = (r.peak_p_pa - STANDARD_ATMOSPHERE_PA) / 1e6;
            // "About" 2.4–3.4 MPa: ±0.1 MPa for the looseness of a workshop range.
            assert!(
                (2.3..=3.5).contains(&gauge_mpa),
                "{}: {gauge_mpa:.2} MPa",
                a.id
            );
        }
    }

    #[test]
    fn core_at_the_di_limit_sits_above_what_n_dodecane_needs() {
        // model.md (orders of magnitude): the core temperature a DI engine reaches near its no-aid
        // limit sits some tens of kelvin above what n-dodecane chemistry needs (road diesel, CN
        // 40–55, is less reactive than n-dodecane, CN ≈ 77 from memory).
        let engine = find("compact-di-i4").unwrap().engine;
        let limit_k = unassisted_limit_k(&engine).unwrap();
        let a = assess(&reference_night(&engine, limit_k)).unwrap();
        let rpm = a.cranking.result.crank_rpm;
        let dodecane_k = crate::ignition::required_temperature_k(
            crate::ignition::DelayCorrelation::DetailedChemistryFit,
            a.budget.end_p_pa,
            crate::ignition::crank_window_s(engine.ignition_window_deg, rpm),
            crate::ignition::N_DODECANE_CETANE,
            engine.geometry.mean_piston_speed_mps(rpm),
            rpm,
        )
        .unwrap();
        let above_k = a.budget.predicted_end_t_k + a.budget.evaporation_loss_k - dodecane_k;
        assert!(
            (5.0..=80.0).contains(&above_k),
            "core above n-dodecane need: {above_k:.1} K"
        );
    }
}
