//! The DescribeModel answer: model version, methods with sources, defaults, archetypes with their
//! computed unassisted start limits, and fuel grades. Computed once per process.

use std::sync::OnceLock;

use startmargin_model::archetypes::{ARCHETYPES, Archetype, CombustionSystem};
use startmargin_model::assess::outlook::{OutlookThresholds, StartOutlook};
use startmargin_model::assess::{self, calibration, unassisted, uncertainty};
use startmargin_model::constants::kelvin_to_celsius;
use startmargin_model::fuel;
use startmargin_proto::v1 as pb;

use super::grades::GRADES;
use super::{cached, combustion_to_pb};

const METHODS: &[(&str, &str, &str)] = &[
    (
        "air properties",
        "ideal-gas air, NASA 7-coefficient polynomials per species (N2, O2, Ar, CO2)",
        "Goos, Burcat & Ruscic, Extended Third Millennium Thermodynamic Database (2015 version)",
    ),
    (
        "engine kinematics",
        "slider-crank volume and area from intake valve closing to top dead centre",
        "Heywood, Internal Combustion Engine Fundamentals (1988), §2.2",
    ),
    (
        "in-cylinder heat transfer",
        "Hohenberg correlation (Woschni selectable) with a calibration factor",
        "Hohenberg, SAE 790825 (1979); Woschni, SAE 670931 (1967)",
    ),
    (
        "leakage",
        "compressible isentropic orifice flow to the crankcase",
        "Heywood (1988), Appendix C",
    ),
    (
        "ignition delay",
        "Arrhenius fit to detailed n-dodecane chemistry, cetane-shifted (Wolfer and Hardenberg–Hase selectable)",
        "Wang, Ra, Jia & Reitz, Fuel 136 (2014) mechanism via Cantera 3.2; Wolfer (1938); Hardenberg & Hase, SAE 790493",
    ),
    (
        "cold soak",
        "lumped thermal nodes, wind convection and night-sky radiation, exact per forecast step",
        "McAdams (1954) via Duffie & Beckman; Swinbank, Q.J.R. Meteorol. Soc. 89 (1963)",
    ),
    (
        "oil viscosity",
        "Walther relation through the SAE J300 grade points",
        "ASTM D341; SAE J300 (2015)",
    ),
    (
        "battery",
        "open-circuit voltage by state of charge, resistance bounded by the CCA definition",
        "SAE J537 / BCI cold cranking amps",
    ),
    (
        "fuel cold flow",
        "grade limits, blending and additive rules, tank and filter temperature paths",
        "EN 590; ASTM D975 (Appendix X5), D2500, D6371, D97",
    ),
];

fn archetype_info(a: &Archetype) -> pb::ArchetypeInfo {
    let g = &a.engine.geometry;
    let engine = pb::EngineSpec {
        archetype_id: a.id.to_string(),
        bore_mm: Some(g.bore_m * 1000.0),
        stroke_mm: Some(g.stroke_m * 1000.0),
        con_rod_mm: Some(g.con_rod_m * 1000.0),
        compression_ratio: Some(g.compression_ratio),
        cylinders: Some(g.cylinders),
        ivc_deg_abdc: Some(g.ivc_deg_abdc),
        combustion_system: combustion_to_pb(a.engine.combustion) as i32,
        min_start_speed_rpm: Some(a.engine.min_start_speed_rpm),
        measured_compression_kpa: None,
        starter_power_kw: Some(a.engine.starter_power_w / 1000.0),
        heat_capacity_kj_per_k: Some(a.engine.heat_capacity_j_per_k / 1000.0),
        cooldown_time_constant_h: None,
    };
    let aids = pb::StartAids {
        glow_plugs_fitted: a.aids.glow_plugs.is_some(),
        glow_preheat_s: a.aids.glow_plugs.map(|_| a.aids.glow_preheat_s),
        glow_plug_health: pb::GlowPlugHealth::Unspecified as i32,
        intake_heater_kw: (a.aids.intake_heater_w > 0.0).then_some(a.aids.intake_heater_w / 1000.0),
        block_heater_w: None,
    };
    let unassisted_limit_c = unassisted::unassisted_limit_k(&a.engine)
        .map(kelvin_to_celsius)
        .unwrap_or(f64::NAN);
    pb::ArchetypeInfo {
        id: a.id.to_string(),
        description: a.description.to_string(),
        engine: Some(engine),
        aids: Some(aids),
        unassisted_limit_c,
        aided_limit_c: assess::unassisted::aided_limit_k(a).map_or(f64::NAN, kelvin_to_celsius),
    }
}

fn parameters() -> Vec<pb::ModelParameter> {
    let p = |name: &str, value: f64, origin: &str| pb::ModelParameter {
        name: name.to_string(),
        value,
        origin: origin.to_string(),
    };
    let di = CombustionSystem::DirectInjection;
    let divided = CombustionSystem::Prechamber;
    vec![
        p(
            "di_wall_multiplier",
            calibration::DI_WALL_MULTIPLIER,
            "published correlation as it stands (not fitted)",
        ),
        p(
            "swirl_chamber_wall_multiplier",
            calibration::SWIRL_WALL_MULTIPLIER,
            "calibrated on the 20 °C swirl-chamber no-aid limit",
        ),
        p(
            "prechamber_wall_multiplier",
            calibration::PRECHAMBER_WALL_MULTIPLIER,
            "calibrated on the 40 °C prechamber no-aid limit",
        ),
        p(
            "di_core_weight",
            calibration::core_weight(di),
            "modelling principle: the adiabatic core ignites",
        ),
        p(
            "divided_chamber_core_weight",
            calibration::core_weight(divided),
            "modelling principle: the mass-averaged charge ignites",
        ),
        p(
            "leak_area_m2_per_m_bore",
            calibration::DEFAULT_LEAK_AREA_M2_PER_M_BORE,
            "estimate, checked against workshop compression pressures",
        ),
        p(
            "cranking_air_fuel_ratio",
            calibration::CRANKING_AIR_FUEL_RATIO,
            "estimate",
        ),
        p(
            "default_state_of_charge",
            assess::DEFAULT_STATE_OF_CHARGE,
            "estimate",
        ),
        p("comfort_margin_k", assess::COMFORT_MARGIN_K, "estimate"),
        p(
            "model_margin_sigma_k",
            uncertainty::MODEL_MARGIN_SIGMA_K,
            "estimate",
        ),
        p(
            "forecast_sigma_at_zero_lead_k",
            uncertainty::FORECAST_SIGMA_AT_ZERO_LEAD_K,
            "estimate",
        ),
        p(
            "forecast_sigma_growth_k_per_h",
            uncertainty::FORECAST_SIGMA_GROWTH_K_PER_H,
            "estimate",
        ),
    ]
}

fn fuel_grades() -> Vec<pb::FuelGradeInfo> {
    GRADES
        .iter()
        .map(|(pbg, g)| {
            let props = fuel::grade_properties(*g);
            pb::FuelGradeInfo {
                grade: *pbg as i32,
                description: fuel::grade_id(*g).to_string(),
                cloud_point_c: kelvin_to_celsius(props.cloud_point_k),
                cfpp_c: kelvin_to_celsius(props.cfpp_k),
                pour_point_c: kelvin_to_celsius(props.pour_point_k),
                origin: fuel::grade_origin(*g).to_string(),
            }
        })
        .collect()
}

/// The outlook thresholds as API messages.
pub fn thresholds(t: &OutlookThresholds) -> Vec<pb::OutlookThreshold> {
    let level = |o| super::outlook_to_pb(o) as i32;
    let gel = |g| super::grades::gel_level_to_pb(g) as i32;
    vec![
        pb::OutlookThreshold {
            outlook: level(StartOutlook::Watch),
            from_no_start_pct: t.watch_from * 100.0,
            from_gel_level: gel(t.gel_watch),
        },
        pb::OutlookThreshold {
            outlook: level(StartOutlook::AtRisk),
            from_no_start_pct: t.at_risk_from * 100.0,
            from_gel_level: gel(t.gel_at_risk),
        },
        pb::OutlookThreshold {
            outlook: level(StartOutlook::NoStartExpected),
            from_no_start_pct: t.no_start_from * 100.0,
            from_gel_level: gel(t.gel_no_start),
        },
    ]
}

/// The DescribeModel answer (computed on first use, then cached).
/// The calibration anchors as computed by this model (a model error is shown in the row, not
/// hidden: the built-in archetypes always compute).
fn anchors() -> Vec<pb::CalibrationAnchor> {
    match assess::unassisted::anchor_rows() {
        Ok(rows) => rows
            .into_iter()
            .map(|r| pb::CalibrationAnchor {
                anchor: r.anchor.to_string(),
                published: r.published.to_string(),
                source: r.source.to_string(),
                role: r.role.to_string(),
                model: r.model,
            })
            .collect(),
        Err(e) => vec![pb::CalibrationAnchor {
            anchor: "anchor table".into(),
            model: format!("not computed: {e}"),
            ..Default::default()
        }],
    }
}

/// The DescribeModel answer (computed once).
pub fn describe_model() -> pb::DescribeModelResponse {
    static CELL: OnceLock<pb::DescribeModelResponse> = OnceLock::new();
    cached(&CELL, || pb::DescribeModelResponse {
        model_version: assess::MODEL_VERSION.to_string(),
        methods: METHODS
            .iter()
            .map(|(topic, method, source)| pb::MethodReference {
                topic: topic.to_string(),
                method: method.to_string(),
                source: source.to_string(),
            })
            .collect(),
        parameters: parameters(),
        archetypes: ARCHETYPES.iter().map(archetype_info).collect(),
        fuel_grades: fuel_grades(),
        default_delay_correlation: pb::DelayCorrelation::ChemistryFit as i32,
        outlook_thresholds: thresholds(&OutlookThresholds::default()),
        anchors: anchors(),
    })
}
