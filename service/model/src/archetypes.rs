//! Built-in engine archetypes: generic engine types of our own naming, each a full set of the
//! model's engine inputs, and the rule that applies a caller's overrides on top of one.
//!
//! Geometry values are typical of each class (bore, stroke and compression ratio bands from
//! reference.md §13, *from memory*; rod ratio ≈ 3.5 typical of small and medium engines, Heywood
//! §2.2 *from memory*). Thermal masses follow the rule of thumb of reference.md §11 (≈ 50 kJ/K per
//! litre, *estimate*). Starter power and gearing follow reference.md §8.5 (*estimate*). Ignition
//! windows and minimum starting speeds follow reference.md §8.6 and model.md §4 (*estimate*).
//! Leak areas are the calibrated cold-cranking defaults of [`crate::assess::calibration`].
//! Every field can be overridden by the caller.

use crate::aids::{
    DEFAULT_GLOW_TIME_CONSTANT_S, GLOW_PLATEAU_GAIN_DI_K, GLOW_PLATEAU_GAIN_PRECHAMBER_K,
    GLOW_PLATEAU_GAIN_SWIRL_CHAMBER_K, GlowPlugs, OLDER_GLOW_TIME_CONSTANT_S,
};
use crate::error::{ModelError, check_range};
use crate::geometry::EngineGeometry;

/// How the engine burns its fuel. It sets how much heat the charge loses in the chamber.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CombustionSystem {
    /// Direct injection into a bowl in the piston.
    DirectInjection,
    /// Indirect injection into a swirl chamber in the head.
    SwirlChamber,
    /// Indirect injection into a prechamber in the head.
    Prechamber,
}

impl CombustionSystem {
    /// Stable id used in reports.
    pub fn id(self) -> &'static str {
        match self {
            Self::DirectInjection => "direct-injection",
            Self::SwirlChamber => "swirl-chamber",
            Self::Prechamber => "prechamber",
        }
    }
}

/// Every engine input of the model, resolved (archetype plus overrides).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EngineConfig {
    /// Cylinder geometry and valve timing.
    pub geometry: EngineGeometry,
    /// Combustion system.
    pub combustion: CombustionSystem,
    /// Crank-angle window near TDC in which the charge must ignite at cranking, degrees.
    pub ignition_window_deg: f64,
    /// Lowest cranking speed at which the engine can start, rpm.
    pub min_start_speed_rpm: f64,
    /// Effective leak area (discharge coefficient × area) per cylinder, m².
    pub leak_area_m2: f64,
    /// Measured cranking compression (gauge peak, absolute pressure), Pa; when set,
    /// [`apply_overrides`] fits `leak_area_m2` to it once.
    pub measured_compression_abs_pa: Option<f64>,
    /// Rated starter power, W.
    pub starter_power_w: f64,
    /// Pinion to ring-gear ratio (motor turns per engine turn).
    pub starter_gear_ratio: f64,
    /// Engine heat capacity (metal, coolant, oil), J/K.
    pub heat_capacity_j_per_k: f64,
    /// Cool-down time constant fitted from the vehicle's own log, s (overrides the default node).
    pub cooldown_time_constant_s: Option<f64>,
}

/// Start aids fitted to a vehicle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AidConfig {
    /// Glow plugs, when fitted.
    pub glow_plugs: Option<GlowPlugs>,
    /// Preheat time given before cranking, s.
    pub glow_preheat_s: f64,
    /// Intake-air heater electrical power, W (0 = none).
    pub intake_heater_w: f64,
    /// Block heater electrical power, W (0 = none).
    pub block_heater_w: f64,
}

/// A built-in archetype.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Archetype {
    /// Id used by callers.
    pub id: &'static str,
    /// One-line description.
    pub description: &'static str,
    /// The engine.
    pub engine: EngineConfig,
    /// The aids it comes with.
    pub aids: AidConfig,
}

/// Caller's overrides of an archetype; every `None` keeps the archetype's value.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct EngineOverrides {
    /// Bore, m.
    pub bore_m: Option<f64>,
    /// Stroke, m.
    pub stroke_m: Option<f64>,
    /// Connecting rod, m.
    pub con_rod_m: Option<f64>,
    /// Geometric compression ratio.
    pub compression_ratio: Option<f64>,
    /// Cylinders.
    pub cylinders: Option<u32>,
    /// Intake valve closing after BDC, degrees.
    pub ivc_deg_abdc: Option<f64>,
    /// Combustion system.
    pub combustion: Option<CombustionSystem>,
    /// Minimum starting speed, rpm.
    pub min_start_speed_rpm: Option<f64>,
    /// Measured cranking compression, gauge, Pa.
    pub measured_compression_gauge_pa: Option<f64>,
    /// Starter rated power, W.
    pub starter_power_w: Option<f64>,
    /// Engine heat capacity, J/K.
    pub heat_capacity_j_per_k: Option<f64>,
    /// Fitted cool-down time constant, s.
    pub cooldown_time_constant_s: Option<f64>,
}

/// Glow plugs with the plateau gain of the combustion system (see `aids` for the constants' origin).
const fn glow_plugs(plateau_gain_k: f64, preheat_time_constant_s: f64) -> Option<GlowPlugs> {
    Some(GlowPlugs {
        plateau_gain_k,
        preheat_time_constant_s,
        relay_ok: true,
        plugs_ok: true,
    })
}

const NO_AIDS: AidConfig = AidConfig {
    glow_plugs: None,
    glow_preheat_s: 0.0,
    intake_heater_w: 0.0,
    block_heater_w: 0.0,
};

#[allow(clippy::too_many_arguments)]
const fn engine(
    bore_mm: f64,
    stroke_mm: f64,
    compression_ratio: f64,
    cylinders: u32,
    combustion: CombustionSystem,
    starter_power_w: f64,
    min_start_speed_rpm: f64,
    window_deg: f64,
) -> EngineConfig {
    let bore_m = bore_mm / 1000.0;
    let stroke_m = stroke_mm / 1000.0;
    // Displacement in litres, for the thermal-mass rule of thumb (≈ 50 kJ/K per litre, estimate).
    let litres =
        std::f64::consts::FRAC_PI_4 * bore_m * bore_m * stroke_m * cylinders as f64 * 1000.0;
    EngineConfig {
        geometry: EngineGeometry {
            bore_m,
            stroke_m,
            // l/a ≈ 3.5 (reference.md §3, typical small and medium engines, from memory).
            con_rod_m: 1.75 * stroke_m,
            compression_ratio,
            cylinders,
            // IVC ≈ 20–40° ABDC typical (reference.md §2, estimate).
            ivc_deg_abdc: 30.0,
        },
        combustion,
        ignition_window_deg: window_deg,
        min_start_speed_rpm,
        leak_area_m2: crate::assess::calibration::DEFAULT_LEAK_AREA_M2_PER_M_BORE * bore_m,
        measured_compression_abs_pa: None,
        starter_power_w,
        // Pinion/ring-gear ratio typically 10–17 (reference.md §8.5, estimate).
        starter_gear_ratio: 13.0,
        heat_capacity_j_per_k: 50_000.0 * litres,
        cooldown_time_constant_s: None,
    }
}

use CombustionSystem::{DirectInjection, Prechamber, SwirlChamber};

/// The built-in catalog. Windows: ≈ 30 °CA for DI, 35 °CA for divided chambers whose hot throat
/// keeps the mixture hot longer (estimates); minimum starting speeds from reference.md §8.6.
pub const ARCHETYPES: &[Archetype] = &[
    Archetype {
        id: "compact-di-i4",
        description: "Small direct-injection engine, 2 L class",
        engine: engine(84.0, 90.0, 16.5, 4, DirectInjection, 1_800.0, 80.0, 30.0),
        aids: AidConfig {
            glow_plugs: glow_plugs(GLOW_PLATEAU_GAIN_DI_K, DEFAULT_GLOW_TIME_CONSTANT_S),
            glow_preheat_s: 5.0,
            ..NO_AIDS
        },
    },
    Archetype {
        id: "light-di-v8",
        description: "Large light-duty direct-injection engine, 6 to 7 L class",
        engine: engine(103.0, 99.0, 17.5, 8, DirectInjection, 2_800.0, 100.0, 30.0),
        aids: AidConfig {
            glow_plugs: glow_plugs(GLOW_PLATEAU_GAIN_DI_K, DEFAULT_GLOW_TIME_CONSTANT_S),
            glow_preheat_s: 5.0,
            ..NO_AIDS
        },
    },
    Archetype {
        id: "medium-di-i6",
        description: "Medium-duty direct-injection engine, 7 L class",
        engine: engine(107.0, 127.0, 17.3, 6, DirectInjection, 5_500.0, 100.0, 30.0),
        aids: AidConfig {
            intake_heater_w: 1_800.0,
            ..NO_AIDS
        },
    },
    Archetype {
        id: "heavy-di-i6",
        description: "Heavy-duty direct-injection engine, 13 L class",
        engine: engine(131.0, 160.0, 16.8, 6, DirectInjection, 7_500.0, 100.0, 30.0),
        aids: AidConfig {
            intake_heater_w: 2_500.0,
            ..NO_AIDS
        },
    },
    Archetype {
        id: "older-idi-v8",
        description: "Large prechamber (indirect-injection) engine, 7 to 8 L class",
        engine: engine(104.0, 106.0, 21.5, 8, Prechamber, 2_500.0, 80.0, 35.0),
        aids: AidConfig {
            glow_plugs: glow_plugs(GLOW_PLATEAU_GAIN_PRECHAMBER_K, OLDER_GLOW_TIME_CONSTANT_S),
            glow_preheat_s: 10.0,
            ..NO_AIDS
        },
    },
    Archetype {
        id: "swirl-idi-i4",
        description: "Small swirl-chamber (indirect-injection) engine, 2.5 L class",
        engine: engine(91.0, 96.0, 21.0, 4, SwirlChamber, 1_800.0, 80.0, 35.0),
        aids: AidConfig {
            glow_plugs: glow_plugs(
                GLOW_PLATEAU_GAIN_SWIRL_CHAMBER_K,
                OLDER_GLOW_TIME_CONSTANT_S,
            ),
            glow_preheat_s: 8.0,
            ..NO_AIDS
        },
    },
    Archetype {
        id: "offroad-di-i4",
        description: "Mid-size direct-injection engine, 4.5 L class",
        engine: engine(106.0, 127.0, 17.0, 4, DirectInjection, 3_000.0, 100.0, 30.0),
        aids: AidConfig {
            intake_heater_w: 1_500.0,
            ..NO_AIDS
        },
    },
];

/// Finds an archetype by id.
pub fn find(id: &str) -> Option<&'static Archetype> {
    ARCHETYPES.iter().find(|a| a.id == id)
}

/// Applies `overrides` to `base` and validates the result.
pub fn apply_overrides(
    base: &EngineConfig,
    overrides: &EngineOverrides,
) -> Result<EngineConfig, ModelError> {
    let mut e = *base;
    let g = &mut e.geometry;
    if let Some(v) = overrides.bore_m {
        g.bore_m = v;
    }
    if let Some(v) = overrides.stroke_m {
        g.stroke_m = v;
        if overrides.con_rod_m.is_none() {
            g.con_rod_m = 1.75 * v;
        }
    }
    if let Some(v) = overrides.con_rod_m {
        g.con_rod_m = v;
    }
    if let Some(v) = overrides.compression_ratio {
        g.compression_ratio = v;
    }
    if let Some(v) = overrides.cylinders {
        g.cylinders = v;
    }
    if let Some(v) = overrides.ivc_deg_abdc {
        g.ivc_deg_abdc = v;
    }
    if let Some(v) = overrides.combustion {
        e.combustion = v;
    }
    if let Some(v) = overrides.min_start_speed_rpm {
        e.min_start_speed_rpm = check_range("min_start_speed_rpm", v, 10.0, 600.0, "10–600 rpm")?;
    }
    if let Some(v) = overrides.measured_compression_gauge_pa {
        let gauge_pa = check_range(
            "measured_compression_pa",
            v,
            300_000.0,
            8_000_000.0,
            "0.3–8 MPa gauge",
        )?;
        e.measured_compression_abs_pa = Some(gauge_pa + crate::constants::STANDARD_ATMOSPHERE_PA);
    }
    if let Some(v) = overrides.starter_power_w {
        e.starter_power_w = check_range("starter_power_w", v, 300.0, 20_000.0, "0.3–20 kW")?;
    }
    if let Some(v) = overrides.heat_capacity_j_per_k {
        e.heat_capacity_j_per_k = check_range(
            "heat_capacity_j_per_k",
            v,
            5_000.0,
            5_000_000.0,
            "5 kJ/K – 5 MJ/K",
        )?;
    }
    if let Some(v) = overrides.cooldown_time_constant_s {
        e.cooldown_time_constant_s = Some(check_range(
            "cooldown_time_constant_s",
            v,
            600.0,
            172_800.0,
            "10 min – 48 h",
        )?);
    }
    if overrides.bore_m.is_some() || overrides.stroke_m.is_some() || overrides.cylinders.is_some() {
        // Keep the leak area proportional to the ring circumference and the mass to displacement.
        e.leak_area_m2 = crate::assess::calibration::DEFAULT_LEAK_AREA_M2_PER_M_BORE * g.bore_m;
        if overrides.heat_capacity_j_per_k.is_none() {
            e.heat_capacity_j_per_k = 50_000.0 * g_displacement_l(g);
        }
    }
    e.geometry.validate()?;
    if e.measured_compression_abs_pa.is_some() {
        // Fitted once here, not on every assessment (the root finding costs ~30 µs).
        e.leak_area_m2 = crate::assess::leak_area_m2(&e)?;
    }
    Ok(e)
}

/// Starter power of a fully specified engine when the caller gives none, W per litre of
/// displacement (estimate from reference.md §8.5: 1.4–2.5 kW passenger cars, 4–9 kW heavy duty).
pub const CUSTOM_STARTER_W_PER_L: f64 = 600.0;

/// The generic direct-injection engine a fully specified engine starts from.
pub const GENERIC_ARCHETYPE_ID: &str = "medium-di-i6";

/// A fully specified engine (no archetype): the caller's geometry on a generic direct-injection
/// engine, with the size-dependent defaults (leak area, heat capacity, starter power) scaled to it.
pub fn custom_engine(overrides: &EngineOverrides) -> Result<EngineConfig, ModelError> {
    let generic =
        find(GENERIC_ARCHETYPE_ID).ok_or(ModelError::Inconsistent("generic archetype missing"))?;
    let mut e = apply_overrides(&generic.engine, overrides)?;
    if overrides.starter_power_w.is_none() {
        e.starter_power_w =
            (CUSTOM_STARTER_W_PER_L * g_displacement_l(&e.geometry)).clamp(1_000.0, 9_000.0);
    }
    Ok(e)
}

fn g_displacement_l(g: &EngineGeometry) -> f64 {
    g.displacement_m3() * 1000.0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_archetype_is_valid_and_ids_are_unique() {
        for (i, a) in ARCHETYPES.iter().enumerate() {
            a.engine.geometry.validate().unwrap();
            assert!(
                ARCHETYPES[i + 1..].iter().all(|b| b.id != a.id),
                "duplicate id {}",
                a.id
            );
            // Brand-free ids of our own: lowercase words and digits only.
            assert!(
                a.id.chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-')
            );
        }
    }

    #[test]
    fn displacement_matches_class() {
        // Class sizes named in the descriptions (litres), within 10 %.
        for (id, litres) in [
            ("compact-di-i4", 2.0),
            ("light-di-v8", 6.6),
            ("heavy-di-i6", 12.9),
        ] {
            let d = find(id).unwrap().engine.geometry.displacement_m3() * 1000.0;
            assert!((d - litres).abs() / litres < 0.1, "{id}: {d} L");
        }
    }

    #[test]
    fn overrides_apply_and_are_validated() {
        let base = find("heavy-di-i6").unwrap().engine;
        let o = EngineOverrides {
            compression_ratio: Some(18.0),
            ..Default::default()
        };
        assert_eq!(
            apply_overrides(&base, &o)
                .unwrap()
                .geometry
                .compression_ratio,
            18.0
        );
        let bad = EngineOverrides {
            compression_ratio: Some(f64::NAN),
            ..Default::default()
        };
        assert!(apply_overrides(&base, &bad).is_err());
        let bad = EngineOverrides {
            starter_power_w: Some(-1.0),
            ..Default::default()
        };
        assert!(apply_overrides(&base, &bad).is_err());
    }

    #[test]
    fn custom_engines_scale_their_starter_with_displacement() {
        // 0.6 kW per litre, clamped to 1–9 kW (estimate inside reference.md §8.5's bands:
        // 1.4–2.5 kW passenger cars, 4–9 kW heavy duty). 2.0 L → 1.2 kW; 12.9 L → 7.76 kW.
        let small = EngineOverrides {
            bore_m: Some(0.084),
            stroke_m: Some(0.090),
            compression_ratio: Some(16.5),
            cylinders: Some(4),
            ..Default::default()
        };
        let s = custom_engine(&small).unwrap();
        assert!(
            (s.starter_power_w - 1_200.0).abs() < 30.0,
            "{}",
            s.starter_power_w
        );
        let big = EngineOverrides {
            bore_m: Some(0.131),
            stroke_m: Some(0.160),
            cylinders: Some(6),
            ..small
        };
        let b = custom_engine(&big).unwrap();
        assert!(
            (b.starter_power_w - 7_760.0).abs() < 50.0,
            "{}",
            b.starter_power_w
        );
        let given = EngineOverrides {
            starter_power_w: Some(3_000.0),
            ..small
        };
        assert_eq!(custom_engine(&given).unwrap().starter_power_w, 3_000.0);
    }
}
