//! The API boundary: validates protobuf requests and converts them to the model's plain Rust types
//! (with the field path of every bad value), runs the model, and converts the answer back.
//! The API speaks the trade's units (°C, kPa, volts, litres, percent); the model speaks SI.
//! No physics here: ranges checked are the physical validity ranges the model documents.

use std::collections::HashMap;
use std::sync::{Arc, OnceLock};

use prost_types::{Duration, Timestamp};
use startmargin_model::aids::GlowPlugs;
use startmargin_model::archetypes::{self, AidConfig, CombustionSystem, EngineOverrides};
use startmargin_model::assess::actions::{Action, ActionKind, ActionPolicy};
use startmargin_model::assess::decision::{self, DecisionPolicy};
use startmargin_model::assess::outlook::{OutlookThresholds, StartOutlook};
use startmargin_model::assess::uncertainty::{Method, UncertaintySource};
use startmargin_model::assess::{
    self, AssessOptions, Assessment, BatteryConfig, FailureMode, ForecastSeries, FuelConfig,
    LimitingFactor, Telemetry, VehicleNight,
};
use startmargin_model::constants::{STANDARD_ATMOSPHERE_PA, celsius_to_kelvin, kelvin_to_celsius};
use startmargin_model::fuel::{
    AdditiveTreatment, BiodieselFeedstock, ColdFlowProperties, FuelBase, FuelDescription,
};
use startmargin_model::gel_risk::{FuelPoint, GelRiskLevel};
use startmargin_model::ignition::DelayCorrelation;
use startmargin_model::oil::SaeGrade;
use startmargin_model::plug_in_plan::{self, DepotLimits, PlanMethod, PlugInCandidate};
use startmargin_model::soak::{FilterMount, ForecastHour};
use startmargin_proto::v1 as pb;

use crate::error::{ApiError, FieldViolation};
use crate::local_time::Zone;

pub mod attempts;
pub mod describe;
mod grades;

pub use describe::describe_model;

/// Zone forecasts received on a fleet or watch stream, by zone id.
pub type ZoneForecasts = HashMap<String, Arc<ForecastSeries>>;

/// Longest id accepted (vehicle, zone, depot, item, archetype), bytes.
pub const MAX_ID_LEN: usize = 128;
/// Longest SAE J300 grade text accepted (e.g. `15W-40`), bytes.
pub const MAX_SAE_GRADE_LEN: usize = 16;

/// Collects every field violation of a request, so that a caller fixes them all at once.
#[derive(Debug, Default)]
struct Violations(Vec<FieldViolation>);

impl Violations {
    fn add(&mut self, field: impl Into<String>, description: impl Into<String>) {
        self.0.push(FieldViolation {
            field: field.into(),
            description: description.into(),
        });
    }

    /// Checks a finite value within [min, max]; returns it either way so conversion can go on.
    fn range(&mut self, field: &str, value: f64, min: f64, max: f64, unit: &str) -> f64 {
        if !value.is_finite() {
            self.add(field, format!("must be a finite number, got {value}"));
        } else if value < min || value > max {
            self.add(
                field,
                format!("{value} is outside the valid range {min} to {max} {unit}"),
            );
        }
        value
    }

    fn opt_range(
        &mut self,
        field: &str,
        value: Option<f64>,
        min: f64,
        max: f64,
        unit: &str,
    ) -> Option<f64> {
        value.map(|v| self.range(field, v, min, max, unit))
    }

    /// Checks an id: present when required, at most [`MAX_ID_LEN`] bytes (never echoed).
    fn id(&mut self, field: &str, id: &str, required: bool) {
        if required && id.is_empty() {
            self.add(field, "must not be empty");
        } else if id.len() > MAX_ID_LEN {
            self.add(
                field,
                format!("is {} bytes, longer than {MAX_ID_LEN}", id.len()),
            );
        }
    }

    /// Checks an enum number the API knows; returns whether it is known.
    fn known_enum(&mut self, field: &str, value: i32, known: bool) -> bool {
        if !known {
            self.add(field, format!("unknown value {value}"));
        }
        known
    }

    fn timestamp(&mut self, field: &str, t: Option<&Timestamp>) -> Option<f64> {
        match t {
            None => {
                self.add(field, "is required");
                None
            }
            Some(t) => self.timestamp_value(field, t),
        }
    }

    fn timestamp_value(&mut self, field: &str, t: &Timestamp) -> Option<f64> {
        // Years 1970–2200: anything else is a unit mistake (milliseconds sent as seconds…).
        if !(0..=7_258_118_400).contains(&t.seconds) || !(0..1_000_000_000).contains(&t.nanos) {
            self.add(
                field,
                "must be a UTC time between 1970 and 2200 with nanos in 0..1e9",
            );
            return None;
        }
        Some(t.seconds as f64 + f64::from(t.nanos) * 1e-9)
    }

    fn finish<T>(self, value: T) -> Result<T, ApiError> {
        if self.0.is_empty() {
            Ok(value)
        } else {
            Err(ApiError::InvalidArgument(self.0))
        }
    }
}

/// Converts seconds on the model's axis back to a protobuf timestamp.
pub fn timestamp(at_s: f64) -> Timestamp {
    let seconds = at_s.floor();
    Timestamp {
        seconds: seconds as i64,
        nanos: ((at_s - seconds) * 1e9).round().min(999_999_999.0) as i32,
    }
}

fn duration_s(v: &mut Violations, field: &str, d: Option<&Duration>) -> f64 {
    match d {
        None => 3600.0,
        // A positive duration has nanos in 0..1e9 (protobuf's own rule for Duration).
        Some(d) if !(0..1_000_000_000).contains(&d.nanos) => {
            v.add(
                format!("{field}.nanos"),
                format!("{} is outside 0 to 999999999", d.nanos),
            );
            3600.0
        }
        Some(d) => {
            let s = d.seconds as f64 + f64::from(d.nanos) * 1e-9;
            v.range(field, s, 300.0, 21_600.0, "s (5 min to 6 h)")
        }
    }
}

/// Validates and converts a forecast; `path` is its field path.
fn forecast_from_pb(v: &mut Violations, pb: &pb::Forecast, path: &str) -> ForecastSeries {
    let start_s = v
        .timestamp(&format!("{path}.start_time"), pb.start_time.as_ref())
        .unwrap_or(0.0);
    let step_s = duration_s(v, &format!("{path}.step"), pb.step.as_ref());
    if pb.points.is_empty() {
        v.add(format!("{path}.points"), "must hold at least one point");
    } else if pb.points.len() > assess::MAX_FORECAST_STEPS {
        v.add(
            format!("{path}.points"),
            format!(
                "at most {} points, got {}",
                assess::MAX_FORECAST_STEPS,
                pb.points.len()
            ),
        );
    }
    let mut hours = Vec::with_capacity(pb.points.len().min(assess::MAX_FORECAST_STEPS));
    let mut air_spread_k = Vec::new();
    let any_spread = pb.points.iter().any(|p| p.air_spread_k.is_some());
    for (i, p) in pb
        .points
        .iter()
        .take(assess::MAX_FORECAST_STEPS)
        .enumerate()
    {
        let f = |name: &str| format!("{path}.points[{i}].{name}");
        let air_c = v.range(&f("air_c"), p.air_c, -70.0, 50.0, "°C");
        let wind_mps = v.range(&f("wind_mps"), p.wind_mps, 0.0, 60.0, "m/s");
        let cloud_pct = v.range(&f("cloud_cover_pct"), p.cloud_cover_pct, 0.0, 100.0, "%");
        hours.push(ForecastHour {
            air_t_k: celsius_to_kelvin(air_c),
            wind_mps,
            cloud_fraction: cloud_pct / 100.0,
        });
        if any_spread {
            match p.air_spread_k {
                Some(s) => air_spread_k.push(v.range(&f("air_spread_k"), s, 0.0, 30.0, "K")),
                None => v.add(f("air_spread_k"), "give a spread on every point or on none"),
            }
        }
    }
    let barometric_kpa = v.opt_range(
        &format!("{path}.barometric_kpa"),
        pb.barometric_kpa,
        50.0,
        110.0,
        "kPa",
    );
    ForecastSeries {
        start_s,
        step_s,
        hours,
        air_spread_k,
        barometric_pa: barometric_kpa.map_or(STANDARD_ATMOSPHERE_PA, |k| k * 1000.0),
    }
}

/// Validates and converts a zone forecast (`path` = field path prefix, e.g. `zone_forecast`).
pub fn zone_forecast_from_pb(
    pb: &pb::ZoneForecast,
    path: &str,
) -> Result<(String, Arc<ForecastSeries>), ApiError> {
    let mut v = Violations::default();
    v.id(&format!("{path}.zone_id"), &pb.zone_id, true);
    let series = match &pb.forecast {
        Some(f) => Some(forecast_from_pb(&mut v, f, &format!("{path}.forecast"))),
        None => {
            v.add(format!("{path}.forecast"), "is required");
            None
        }
    };
    v.finish(())?;
    Ok((
        pb.zone_id.clone(),
        Arc::new(series.unwrap_or_else(unreachable_forecast)),
    ))
}

// Only reached when a violation was recorded above (and `finish` returned early).
fn unreachable_forecast() -> ForecastSeries {
    ForecastSeries {
        start_s: 0.0,
        step_s: 3600.0,
        hours: Vec::new(),
        air_spread_k: Vec::new(),
        barometric_pa: STANDARD_ATMOSPHERE_PA,
    }
}

fn combustion_from_pb(c: i32) -> Option<CombustionSystem> {
    match pb::CombustionSystem::try_from(c).ok()? {
        pb::CombustionSystem::Unspecified => None,
        pb::CombustionSystem::DirectInjection => Some(CombustionSystem::DirectInjection),
        pb::CombustionSystem::SwirlChamber => Some(CombustionSystem::SwirlChamber),
        pb::CombustionSystem::Prechamber => Some(CombustionSystem::Prechamber),
    }
}

/// Combustion system → API enum.
pub fn combustion_to_pb(c: CombustionSystem) -> pb::CombustionSystem {
    match c {
        CombustionSystem::DirectInjection => pb::CombustionSystem::DirectInjection,
        CombustionSystem::SwirlChamber => pb::CombustionSystem::SwirlChamber,
        CombustionSystem::Prechamber => pb::CombustionSystem::Prechamber,
    }
}

fn engine_from_pb(
    v: &mut Violations,
    e: &pb::EngineSpec,
    aids: Option<&pb::StartAids>,
    path: &str,
) -> Option<(archetypes::EngineConfig, AidConfig)> {
    let f = |name: &str| format!("{path}.{name}");
    let mm = |v: &mut Violations, name: &str, x: Option<f64>, lo: f64, hi: f64| {
        v.opt_range(&f(name), x, lo, hi, "mm").map(|x| x / 1000.0)
    };
    let overrides = EngineOverrides {
        bore_m: mm(v, "bore_mm", e.bore_mm, 50.0, 250.0),
        stroke_m: mm(v, "stroke_mm", e.stroke_mm, 50.0, 300.0),
        con_rod_m: mm(v, "con_rod_mm", e.con_rod_mm, 80.0, 700.0),
        compression_ratio: v.opt_range(
            &f("compression_ratio"),
            e.compression_ratio,
            12.0,
            26.0,
            "",
        ),
        cylinders: e.cylinders.inspect(|c| {
            if !(1..=16).contains(c) {
                v.add(f("cylinders"), format!("{c} is outside 1 to 16"));
            }
        }),
        ivc_deg_abdc: v.opt_range(&f("ivc_deg_abdc"), e.ivc_deg_abdc, 0.0, 80.0, "°"),
        combustion: combustion_from_pb(e.combustion_system),
        min_start_speed_rpm: v.opt_range(
            &f("min_start_speed_rpm"),
            e.min_start_speed_rpm,
            20.0,
            400.0,
            "rpm",
        ),
        measured_compression_gauge_pa: v
            .opt_range(
                &f("measured_compression_kpa"),
                e.measured_compression_kpa,
                800.0,
                6_000.0,
                "kPa",
            )
            .map(|k| k * 1000.0),
        starter_power_w: v
            .opt_range(&f("starter_power_kw"), e.starter_power_kw, 0.5, 15.0, "kW")
            .map(|k| k * 1000.0),
        heat_capacity_j_per_k: v
            .opt_range(
                &f("heat_capacity_kj_per_k"),
                e.heat_capacity_kj_per_k,
                10.0,
                3_000.0,
                "kJ/K",
            )
            .map(|k| k * 1000.0),
        cooldown_time_constant_s: v
            .opt_range(
                &f("cooldown_time_constant_h"),
                e.cooldown_time_constant_h,
                0.25,
                24.0,
                "h",
            )
            .map(|h| h * 3600.0),
    };
    v.known_enum(
        &f("combustion_system"),
        e.combustion_system,
        pb::CombustionSystem::try_from(e.combustion_system).is_ok(),
    );
    let (base_engine, base_aids) = if e.archetype_id.len() > MAX_ID_LEN {
        v.id(&f("archetype_id"), &e.archetype_id, false);
        return None;
    } else if e.archetype_id.is_empty() {
        // A fully specified engine: the core geometry is required; the rest starts from a generic
        // direct-injection engine and is scaled where it depends on size.
        for (name, given) in [
            ("bore_mm", overrides.bore_m.is_some()),
            ("stroke_mm", overrides.stroke_m.is_some()),
            ("compression_ratio", overrides.compression_ratio.is_some()),
            ("cylinders", overrides.cylinders.is_some()),
        ] {
            if !given {
                v.add(f(name), "is required when archetype_id is empty");
            }
        }
        (
            None,
            AidConfig {
                glow_plugs: None,
                glow_preheat_s: 0.0,
                intake_heater_w: 0.0,
                block_heater_w: 0.0,
            },
        )
    } else {
        match archetypes::find(&e.archetype_id) {
            Some(a) => (Some(a.engine), a.aids),
            None => {
                let ids: Vec<_> = archetypes::ARCHETYPES.iter().map(|a| a.id).collect();
                v.add(
                    f("archetype_id"),
                    format!(
                        "unknown archetype {:?}; known: {}",
                        e.archetype_id,
                        ids.join(", ")
                    ),
                );
                return None;
            }
        }
    };
    let resolved = match base_engine {
        Some(base) => archetypes::apply_overrides(&base, &overrides),
        None => archetypes::custom_engine(&overrides),
    };
    let engine = match resolved {
        Ok(engine) => engine,
        Err(err) => {
            if v.0.is_empty() {
                v.add(path.to_string(), err.to_string());
            }
            return None;
        }
    };
    let aids = aids_from_pb(v, aids, base_aids, &path.replace(".engine", ".aids"));
    Some((engine, aids))
}

fn aids_from_pb(
    v: &mut Violations,
    a: Option<&pb::StartAids>,
    base: AidConfig,
    path: &str,
) -> AidConfig {
    let Some(a) = a else { return base };
    let f = |name: &str| format!("{path}.{name}");
    let glow_plugs = if a.glow_plugs_fitted {
        let health = pb::GlowPlugHealth::try_from(a.glow_plug_health).unwrap_or_else(|_| {
            v.add(
                f("glow_plug_health"),
                format!("unknown value {}", a.glow_plug_health),
            );
            pb::GlowPlugHealth::Unspecified
        });
        let g = base.glow_plugs.unwrap_or(GlowPlugs {
            plateau_gain_k: startmargin_model::aids::DEFAULT_GLOW_PLATEAU_GAIN_K,
            preheat_time_constant_s: startmargin_model::aids::DEFAULT_GLOW_TIME_CONSTANT_S,
            relay_ok: true,
            plugs_ok: true,
        });
        Some(GlowPlugs {
            relay_ok: health != pb::GlowPlugHealth::RelayStuck,
            plugs_ok: health != pb::GlowPlugHealth::PlugFailed,
            ..g
        })
    } else {
        // Health and preheat describe glow plugs: without them they are a mistake, not a no-op.
        if a.glow_plug_health != pb::GlowPlugHealth::Unspecified as i32 {
            v.add(
                f("glow_plug_health"),
                "is set but glow_plugs_fitted is false (give the health only with glow plugs)",
            );
        }
        if a.glow_preheat_s.is_some() {
            v.add(
                f("glow_preheat_s"),
                "is set but glow_plugs_fitted is false (give a preheat time only with glow plugs)",
            );
        }
        None
    };
    let default_preheat_s = if base.glow_plugs.is_some() {
        base.glow_preheat_s
    } else {
        5.0
    };
    AidConfig {
        glow_plugs,
        glow_preheat_s: v
            .opt_range(&f("glow_preheat_s"), a.glow_preheat_s, 0.0, 120.0, "s")
            .unwrap_or(default_preheat_s),
        intake_heater_w: v
            .opt_range(&f("intake_heater_kw"), a.intake_heater_kw, 0.0, 10.0, "kW")
            .map_or(0.0, |k| k * 1000.0),
        block_heater_w: v
            .opt_range(&f("block_heater_w"), a.block_heater_w, 0.0, 4_000.0, "W")
            .unwrap_or(0.0),
    }
}

fn battery_from_pb(v: &mut Violations, b: Option<&pb::BatterySpec>, path: &str) -> BatteryConfig {
    let Some(b) = b else {
        v.add(path, "is required (capacity_cca and nominal_v)");
        return BatteryConfig {
            rated_cca_a: 1.0,
            nominal_v: 12.0,
            state_of_charge: None,
            health_fraction: 1.0,
        };
    };
    let f = |name: &str| format!("{path}.{name}");
    let rated_cca_a = v.range(&f("capacity_cca"), b.capacity_cca, 100.0, 4_000.0, "A");
    if b.nominal_v != 12.0 && b.nominal_v != 24.0 {
        v.add(
            f("nominal_v"),
            format!("must be 12 or 24, got {}", b.nominal_v),
        );
    }
    BatteryConfig {
        rated_cca_a,
        nominal_v: b.nominal_v,
        state_of_charge: v
            .opt_range(
                &f("state_of_charge_pct"),
                b.state_of_charge_pct,
                0.0,
                100.0,
                "%",
            )
            .map(|p| p / 100.0),
        health_fraction: v
            .opt_range(&f("health_pct"), b.health_pct, 5.0, 100.0, "%")
            .map_or(ASSUMED_BATTERY_HEALTH_PCT / 100.0, |p| p / 100.0),
    }
}

fn fuel_from_pb(v: &mut Violations, fpb: Option<&pb::FuelSpec>, path: &str) -> FuelConfig {
    let f = |name: &str| format!("{path}.{name}");
    let default = pb::FuelSpec::default();
    let fpb = match fpb {
        Some(x) => x,
        None => {
            v.add(path, "is required (grade or measured, and tank_capacity_l)");
            &default
        }
    };
    let grade = grades::grade_from_pb(fpb.grade);
    if fpb.measured.is_some() && grade.is_err() {
        // Measured properties win, but an unknown grade beside them is still a mistake.
        v.add(f("grade"), format!("unknown value {}", fpb.grade));
    }
    let base = match (&fpb.measured, grade) {
        (Some(m), _) if m.cloud_point_c == 0.0 && m.cfpp_c == 0.0 && m.pour_point_c == 0.0 => {
            // An empty message reads as 0 °C limits: far from any certificate, and not to be
            // guessed at (a grade is the way to give typical limits).
            v.add(
                f("measured"),
                "is empty (cloud point, CFPP and pour point all 0 °C): give the certificate's \
                 three limits, or leave measured out and give the grade",
            );
            FuelBase::Grade(startmargin_model::fuel::FuelGrade::UsNo2)
        }
        (Some(m), _) => {
            let cp = v.range(
                &f("measured.cloud_point_c"),
                m.cloud_point_c,
                -60.0,
                30.0,
                "°C",
            );
            let cfpp = v.range(&f("measured.cfpp_c"), m.cfpp_c, -60.0, 30.0, "°C");
            let pp = v.range(
                &f("measured.pour_point_c"),
                m.pour_point_c,
                -70.0,
                30.0,
                "°C",
            );
            FuelBase::Measured(ColdFlowProperties {
                cloud_point_k: celsius_to_kelvin(cp),
                cfpp_k: celsius_to_kelvin(cfpp),
                pour_point_k: celsius_to_kelvin(pp),
            })
        }
        (None, Ok(Some(g))) => FuelBase::Grade(g),
        (None, Ok(None)) => {
            if fpb.grade == 0 {
                v.add(f("grade"), "give a grade or measured cold-flow properties");
            }
            FuelBase::Grade(startmargin_model::fuel::FuelGrade::UsNo2)
        }
        (None, Err(())) => {
            v.add(f("grade"), format!("unknown value {}", fpb.grade));
            FuelBase::Grade(startmargin_model::fuel::FuelGrade::UsNo2)
        }
    };
    let feedstock = match pb::BiodieselFeedstock::try_from(fpb.biodiesel_feedstock) {
        Ok(pb::BiodieselFeedstock::Unspecified) => BiodieselFeedstock::Unknown,
        Ok(pb::BiodieselFeedstock::Canola) => BiodieselFeedstock::Canola,
        Ok(pb::BiodieselFeedstock::Soy) => BiodieselFeedstock::Soy,
        Ok(pb::BiodieselFeedstock::Palm) => BiodieselFeedstock::Palm,
        Ok(pb::BiodieselFeedstock::Tallow) => BiodieselFeedstock::Tallow,
        Ok(pb::BiodieselFeedstock::UsedCookingOil) => BiodieselFeedstock::UsedCookingOil,
        Err(_) => {
            v.add(
                f("biodiesel_feedstock"),
                format!("unknown value {}", fpb.biodiesel_feedstock),
            );
            BiodieselFeedstock::Unknown
        }
    };
    let additive = fpb.additive.as_ref().map(|a| AdditiveTreatment {
        cfpp_improvement_k: v
            .opt_range(
                &f("additive.cfpp_improvement_k"),
                a.cfpp_improvement_k,
                0.0,
                30.0,
                "K",
            )
            .unwrap_or(startmargin_model::fuel::TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K),
        fuel_t_when_added_k: celsius_to_kelvin(
            v.opt_range(
                &f("additive.fuel_c_when_added"),
                a.fuel_c_when_added,
                -60.0,
                50.0,
                "°C",
            )
            .unwrap_or(ASSUMED_FUEL_C_WHEN_ADDED),
        ),
    });
    let filter_mount = match pb::FilterMount::try_from(fpb.filter_mount) {
        Ok(pb::FilterMount::EngineBay) => FilterMount::EngineBay,
        // Not given: exposed on the frame, the cautious side (see `assumed_inputs`).
        Ok(_) => FilterMount::Frame,
        Err(_) => {
            v.add(
                f("filter_mount"),
                format!("unknown value {}", fpb.filter_mount),
            );
            FilterMount::EngineBay
        }
    };
    let biodiesel_pct = v.range(&f("biodiesel_pct"), fpb.biodiesel_pct, 0.0, 100.0, "%");
    let no1_blend_pct = v.range(&f("no1_blend_pct"), fpb.no1_blend_pct, 0.0, 100.0, "%");
    // Both are shares of the same tank: together at most all of it.
    if biodiesel_pct + no1_blend_pct > 100.0 {
        v.add(
            f("no1_blend_pct"),
            format!(
                "{no1_blend_pct} % No. 1 plus {biodiesel_pct} % biodiesel is more than 100 % of the fuel"
            ),
        );
    }
    if fpb.biodiesel_feedstock != pb::BiodieselFeedstock::Unspecified as i32 && biodiesel_pct == 0.0
    {
        v.add(
            f("biodiesel_feedstock"),
            "is set but biodiesel_pct is 0 (a feedstock needs a biodiesel share)",
        );
    }
    FuelConfig {
        description: FuelDescription {
            base,
            biodiesel_fraction: biodiesel_pct / 100.0,
            feedstock,
            no1_blend_fraction: no1_blend_pct / 100.0,
            additive,
            cetane_number: v.opt_range(&f("cetane_number"), fpb.cetane_number, 30.0, 80.0, ""),
        },
        tank_capacity_l: v.range(
            &f("tank_capacity_l"),
            fpb.tank_capacity_l,
            10.0,
            3_000.0,
            "L",
        ),
        filter_mount,
    }
}

fn telemetry_from_pb(
    v: &mut Violations,
    t: Option<&pb::VehicleTelemetry>,
    path: &str,
) -> Telemetry {
    let Some(t) = t else {
        return Telemetry::default();
    };
    let f = |name: &str| format!("{path}.{name}");
    let k = |v: &mut Violations, name: &str, x: Option<f64>, lo: f64, hi: f64| {
        v.opt_range(&f(name), x, lo, hi, "°C")
            .map(celsius_to_kelvin)
    };
    let out = Telemetry {
        observed_at_s: t
            .observed_at
            .as_ref()
            .and_then(|ts| v.timestamp_value(&f("observed_at"), ts)),
        coolant_t_k: k(v, "coolant_c", t.coolant_c, -60.0, 130.0),
        oil_t_k: k(v, "oil_c", t.oil_c, -60.0, 150.0),
        fuel_t_k: k(v, "fuel_c", t.fuel_c, -60.0, 90.0),
        ambient_t_k: k(v, "ambient_c", t.ambient_c, -70.0, 50.0),
        battery_rest_v: v.opt_range(&f("battery_rest_v"), t.battery_rest_v, 0.0, 32.0, "V"),
        fuel_level_fraction: v
            .opt_range(&f("fuel_level_pct"), t.fuel_level_pct, 0.0, 100.0, "%")
            .map(|p| p / 100.0),
    };
    let has_temps = out.coolant_t_k.is_some() || out.oil_t_k.is_some() || out.fuel_t_k.is_some();
    if has_temps && t.observed_at.is_none() {
        v.add(f("observed_at"), "is required when a temperature is given");
    }
    out
}

fn options_from_pb(
    v: &mut Violations,
    o: Option<&pb::AssessmentOptions>,
    path: &str,
) -> AssessOptions {
    let Some(o) = o else {
        return AssessOptions::default();
    };
    let delay_correlation = match pb::DelayCorrelation::try_from(o.delay_correlation) {
        Ok(pb::DelayCorrelation::Unspecified) => DelayCorrelation::default(),
        Ok(pb::DelayCorrelation::ChemistryFit) => DelayCorrelation::DetailedChemistryFit,
        Ok(pb::DelayCorrelation::Wolfer) => DelayCorrelation::Wolfer,
        Ok(pb::DelayCorrelation::HardenbergHase) => DelayCorrelation::HardenbergHase,
        Err(_) => {
            v.add(
                format!("{path}.delay_correlation"),
                format!("unknown value {}", o.delay_correlation),
            );
            DelayCorrelation::default()
        }
    };
    v.known_enum(
        &format!("{path}.probability_method"),
        o.probability_method,
        pb::ProbabilityMethod::try_from(o.probability_method).is_ok(),
    );
    // The actions' target: a probability strictly between certainty and doom (as the config's).
    if let Some(t) = o.target_no_start_pct
        && !(t > 0.0 && t < 100.0)
    {
        v.add(
            format!("{path}.target_no_start_pct"),
            format!("{t} must be above 0 and below 100 %"),
        );
    }
    AssessOptions {
        delay_correlation,
        include_margin_path: o.include_margin_path,
        ..AssessOptions::default()
    }
}

/// A vehicle profile converted for the model (engine and aids, battery, oil, fuel); `None`
/// parts had a violation.
pub(crate) struct ProfileParts {
    engine_aids: Option<(archetypes::EngineConfig, AidConfig)>,
    battery: BatteryConfig,
    oil: Option<SaeGrade>,
    fuel: FuelConfig,
}

/// Validates and converts a vehicle profile at field path `vp` (e.g. `night.vehicle`).
fn profile_parts(v: &mut Violations, vehicle: &pb::VehicleProfile, vp: &str) -> ProfileParts {
    let f = |name: &str| format!("{vp}.{name}");
    v.id(&f("vehicle_id"), &vehicle.vehicle_id, true);
    let engine_aids = match vehicle.engine.as_ref() {
        Some(e) => engine_from_pb(v, e, vehicle.aids.as_ref(), &f("engine")),
        None => {
            v.add(
                f("engine"),
                "is required (an archetype_id or the full geometry)",
            );
            None
        }
    };
    let battery = battery_from_pb(v, vehicle.battery.as_ref(), &f("battery"));
    let oil = match vehicle.oil.as_ref() {
        None => {
            v.add(f("oil"), "is required (sae_grade)");
            None
        }
        Some(o) if o.sae_grade.len() > MAX_SAE_GRADE_LEN => {
            v.add(
                f("oil.sae_grade"),
                format!(
                    "is {} bytes; an SAE J300 grade is at most {MAX_SAE_GRADE_LEN}",
                    o.sae_grade.len()
                ),
            );
            None
        }
        Some(o) => match SaeGrade::parse(&o.sae_grade) {
            Ok(g) => Some(g),
            Err(e) => {
                v.add(
                    f("oil.sae_grade"),
                    format!("{:?} is not an SAE J300 grade ({e})", o.sae_grade),
                );
                None
            }
        },
    };
    let fuel = fuel_from_pb(v, vehicle.fuel.as_ref(), &f("fuel"));
    ProfileParts {
        engine_aids,
        battery,
        oil,
        fuel,
    }
}

/// Validates a vehicle profile on its own (a watched vehicle, before any forecast is known);
/// `path` is its field path, e.g. `vehicle.vehicle` in a WatchFleet request.
pub fn check_profile(vehicle: &pb::VehicleProfile, path: &str) -> Result<(), ApiError> {
    let mut v = Violations::default();
    profile_parts(&mut v, vehicle, path);
    v.finish(())
}

/// Validates a telemetry report on its own; `path` is its field path, e.g.
/// `telemetry.telemetry` in a WatchFleet request.
pub fn check_telemetry(t: &pb::VehicleTelemetry, path: &str) -> Result<(), ApiError> {
    let mut v = Violations::default();
    telemetry_from_pb(&mut v, Some(t), path);
    v.finish(())
}

/// Validates an id field on its own (present when `required`, at most [`MAX_ID_LEN`] bytes).
pub fn check_id(field: &str, id: &str, required: bool) -> Result<(), ApiError> {
    let mut v = Violations::default();
    v.id(field, id, required);
    v.finish(())
}

/// Battery health taken when `BatterySpec.health_pct` is absent, percent of a new battery.
/// A battery a few winters into fleet service commonly delivers 70 to 90 % of its rated CCA
/// (common practice (no source)); taking it as new would hide slow cranking.
pub const ASSUMED_BATTERY_HEALTH_PCT: f64 = 80.0;
/// Fuel temperature taken when `AdditiveTreatment.fuel_c_when_added` is absent, °C: the bottom
/// of the accepted range, below any fuel's cloud point, so the additive earns only what the
/// model gives one mixed into fuel that already holds wax (its residual share).
pub const ASSUMED_FUEL_C_WHEN_ADDED: f64 = -60.0;

/// Every absent input of `night` that changes the answer, with the value the conversion took
/// and why. `converted` is the model's input made from it; `zone` its time zone. Field paths
/// are relative to the `VehicleNight`, so that every call that carries one (AssessVehicle,
/// AssessFleet, the watch) names them alike.
pub fn assumed_inputs(
    night: &pb::VehicleNight,
    converted: &VehicleNight,
    zone: &Zone,
) -> Vec<pb::AssumedInput> {
    let mut out = Vec::new();
    let mut add = |field: &str, value: String, reason: &str| {
        out.push(pb::AssumedInput {
            field: field.to_string(),
            value,
            reason: reason.to_string(),
        });
    };
    if zone.assumed {
        add(
            "time_zone",
            "UTC".into(),
            "no depot time zone given: the times in this answer's text are UTC",
        );
    }
    let telemetry = night.telemetry.as_ref();
    if telemetry.is_none() {
        add(
            "telemetry",
            "soaked to the air at the forecast start".into(),
            "no report: the engine, battery and fuel are taken as already cold, with no heat \
             left from the last run",
        );
    }
    if telemetry.and_then(|t| t.fuel_level_pct).is_none() {
        add(
            "telemetry.fuel_level_pct",
            "50 %".into(),
            "fuel level not reported: a half-full tank; a lower level cools faster",
        );
    }
    let Some(vehicle) = night.vehicle.as_ref() else {
        return out;
    };
    if converted.aids.glow_plugs.is_some()
        && vehicle
            .aids
            .as_ref()
            .is_none_or(|a| a.glow_plug_health == pb::GlowPlugHealth::Unspecified as i32)
    {
        add(
            "vehicle.aids.glow_plug_health",
            "GLOW_PLUG_HEALTH_WORKING".into(),
            "not reported: taken as working (taking a fault would send every such vehicle to \
             the workshop); report PLUG_FAILED or RELAY_STUCK from diagnostics to assess \
             without them",
        );
    }
    let battery = vehicle.battery.as_ref();
    if battery.and_then(|b| b.state_of_charge_pct).is_none()
        && telemetry.and_then(|t| t.battery_rest_v).is_none()
    {
        add(
            "vehicle.battery.state_of_charge_pct",
            format!("{:.0} %", assess::DEFAULT_STATE_OF_CHARGE * 100.0),
            "neither a state of charge nor a rested voltage (telemetry.battery_rest_v): a \
             winter fleet battery's usual charge, below full so that slow cranking is not \
             hidden",
        );
    }
    if battery.is_some_and(|b| b.health_pct.is_none()) {
        add(
            "vehicle.battery.health_pct",
            format!("{ASSUMED_BATTERY_HEALTH_PCT:.0} %"),
            "battery health not given: a battery a few winters into service, not a new one",
        );
    }
    let Some(fuel) = vehicle.fuel.as_ref() else {
        return out;
    };
    if fuel.filter_mount == pb::FilterMount::Unspecified as i32 {
        add(
            "vehicle.fuel.filter_mount",
            "FILTER_MOUNT_FRAME".into(),
            "filter position not given: exposed on the frame, cooling with the air; the \
             engine bay would credit warmth a frame-mounted filter never gets",
        );
    }
    if fuel.cetane_number.is_none() {
        add(
            "vehicle.fuel.cetane_number",
            "the grade's typical value".into(),
            "cetane number not given: the typical value of the fuel's grade",
        );
    }
    if fuel.biodiesel_pct > 0.0
        && fuel.biodiesel_feedstock == pb::BiodieselFeedstock::Unspecified as i32
    {
        add(
            "vehicle.fuel.biodiesel_feedstock",
            "a middle cloud-point shift".into(),
            "feedstock not given: between the mildest and the harshest feedstocks",
        );
    }
    if let Some(a) = fuel.additive.as_ref() {
        if a.cfpp_improvement_k.is_none() {
            add(
                "vehicle.fuel.additive.cfpp_improvement_k",
                format!(
                    "{} K",
                    startmargin_model::fuel::TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K
                ),
                "the product's claim not given: a typical claimed CFPP improvement",
            );
        }
        if a.fuel_c_when_added.is_none() {
            add(
                "vehicle.fuel.additive.fuel_c_when_added",
                format!("{ASSUMED_FUEL_C_WHEN_ADDED} °C (below the cloud point)"),
                "not given: taken as mixed in below the cloud point, where an additive earns \
                 little; assuming it went into warm fuel would credit a CFPP gain the fuel \
                 may not have",
            );
        }
    }
    out
}

/// Validates and converts one vehicle night. Returns the vehicle id and the model's input.
pub fn night_from_pb(
    night: &pb::VehicleNight,
    path: &str,
    zones: &ZoneForecasts,
) -> Result<(String, VehicleNight), ApiError> {
    let mut v = Violations::default();
    let p = |name: &str| format!("{path}.{name}");
    let Some(vehicle) = night.vehicle.as_ref() else {
        return Err(ApiError::field(p("vehicle"), "is required"));
    };
    let ProfileParts {
        engine_aids,
        battery,
        oil,
        fuel,
    } = profile_parts(&mut v, vehicle, &p("vehicle"));
    v.id(&p("depot_id"), &night.depot_id, false);
    let telemetry = telemetry_from_pb(&mut v, night.telemetry.as_ref(), &p("telemetry"));
    let forecast = match (&night.forecast, night.forecast_zone_id.as_str()) {
        (_, zone) if zone.len() > MAX_ID_LEN => {
            v.id(&p("forecast_zone_id"), zone, false);
            None
        }
        (Some(f), "") => Some(forecast_from_pb(&mut v, f, &p("forecast"))),
        (Some(_), _) => {
            v.add(
                p("forecast_zone_id"),
                "give either forecast or forecast_zone_id, not both",
            );
            None
        }
        (None, "") => {
            v.add(
                p("forecast"),
                "is required (or forecast_zone_id in a fleet stream)",
            );
            None
        }
        (None, zone) => match zones.get(zone) {
            Some(series) => Some(series.as_ref().clone()),
            None => {
                v.add(
                    p("forecast_zone_id"),
                    format!("no zone forecast {zone:?} was sent earlier on this stream"),
                );
                None
            }
        },
    };
    let departure_s = v.timestamp(&p("departure_time"), night.departure_time.as_ref());
    let block_heater_plan = night.block_heater_plan.as_ref().and_then(|plan| {
        let from = v.timestamp(&p("block_heater_plan.on_from"), plan.on_from.as_ref());
        let until = v.timestamp(&p("block_heater_plan.on_until"), plan.on_until.as_ref());
        match (from, until) {
            (Some(a), Some(b)) if b < a => {
                v.add(p("block_heater_plan.on_until"), "is before on_from");
                None
            }
            (Some(a), Some(b)) => Some((a, b)),
            _ => None,
        }
    });
    if let (Some(_), Some((_, aids))) = (&block_heater_plan, &engine_aids)
        && aids.block_heater_w <= 0.0
    {
        v.add(
            p("block_heater_plan"),
            "the vehicle has no block heater (vehicle.aids.block_heater_w)",
        );
    }
    let options = options_from_pb(&mut v, night.options.as_ref(), &p("options"));
    if let (Some(dep), Some(at)) = (departure_s, telemetry.observed_at_s)
        && at > dep
    {
        v.add(p("telemetry.observed_at"), "is after the departure");
    }
    v.finish(())?;
    // Every Option below is Some when no violation was recorded.
    let (Some((engine, aids)), Some(oil), Some(forecast), Some(departure_s)) =
        (engine_aids, oil, forecast, departure_s)
    else {
        return Err(ApiError::Internal(
            "conversion lost a value without a violation".into(),
        ));
    };
    let night = VehicleNight {
        engine,
        aids,
        battery,
        oil,
        fuel,
        sheltered: vehicle.sheltered,
        telemetry,
        forecast,
        departure_s,
        block_heater_plan,
        options,
    };
    Ok((vehicle.vehicle_id.clone(), night))
}

/// The request field (relative to a `VehicleNight`) a model quantity comes from, so that a value
/// the model refuses is reported at a path of the request the client sent. Quantities the model
/// derives from several fields (displacement, pressures inside the cylinder…) name the message
/// they are derived from; `None` means the night as a whole.
pub fn model_quantity_field(quantity: &str) -> Option<&'static str> {
    Some(match quantity {
        "rest_v" | "battery_rest_v" => "telemetry.battery_rest_v",
        "fuel_level_fraction" => "telemetry.fuel_level_pct",
        "coolant_t_k" | "reading_t_k" => "telemetry.coolant_c",
        "fuel_t_k" => "telemetry.fuel_c",
        "ambient_t_k" => "telemetry.ambient_c",
        "observed_at_s" | "reading_t_s" | "initial_at_s" => "telemetry.observed_at",
        "initial_t_k" => "telemetry",
        "air_t_k" | "cloud_fraction" | "air_spread_k" | "forecast_steps" => "forecast.points",
        "barometric_pa" => "forecast.barometric_kpa",
        "forecast_start_s" => "forecast.start_time",
        "forecast_step_s" => "forecast.step",
        "departure_s" => "departure_time",
        "block_heater_on_from_s" | "heater_on_from_s" => "block_heater_plan.on_from",
        "block_heater_on_until_s" | "heater_on_until_s" => "block_heater_plan.on_until",
        "block_heater_w" | "heater_power_w" => "vehicle.aids.block_heater_w",
        "intake_heater_w" => "vehicle.aids.intake_heater_kw",
        "glow_preheat_s" | "preheat_s" => "vehicle.aids.glow_preheat_s",
        "bore_m" => "vehicle.engine.bore_mm",
        "stroke_m" => "vehicle.engine.stroke_mm",
        "con_rod_m" => "vehicle.engine.con_rod_mm",
        "cylinders" => "vehicle.engine.cylinders",
        "min_start_speed_rpm" => "vehicle.engine.min_start_speed_rpm",
        "starter_power_w" | "starter_rated_power_w" => "vehicle.engine.starter_power_kw",
        "heat_capacity_j_per_k" => "vehicle.engine.heat_capacity_kj_per_k",
        "cooldown_time_constant_s" => "vehicle.engine.cooldown_time_constant_h",
        "measured_compression_pa" | "measured_compression_abs_pa" | "measured_peak_p_pa" => {
            "vehicle.engine.measured_compression_kpa"
        }
        "displacement_m3" | "volume_ratio" | "air_mass_per_cycle_kg" | "air_mass_flow_kg_s" => {
            "vehicle.engine"
        }
        "rated_cca_a" => "vehicle.battery.capacity_cca",
        "nominal_v" | "starter_nominal_v" => "vehicle.battery.nominal_v",
        "state_of_charge" => "vehicle.battery.state_of_charge_pct",
        "health_fraction" | "battery_health_fraction" => "vehicle.battery.health_pct",
        "sae_hot_grade" | "sae_winter_grade" | "nu1_mm2_per_s" | "nu2_mm2_per_s" => {
            "vehicle.oil.sae_grade"
        }
        "biodiesel_fraction" => "vehicle.fuel.biodiesel_pct",
        "no1_blend_fraction" => "vehicle.fuel.no1_blend_pct",
        "cfpp_improvement_k" => "vehicle.fuel.additive.cfpp_improvement_k",
        "fuel_t_when_added_k" => "vehicle.fuel.additive.fuel_c_when_added",
        "cloud_point_k" | "cfpp_k" | "pour_point_k" => "vehicle.fuel",
        _ => return None,
    })
}

/// The operator's decision policy: outlook thresholds, the default action target and the
/// probability method. Comes from the server's configuration.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Policy {
    /// Outlook thresholds.
    pub thresholds: OutlookThresholds,
    /// Default no-start probability the actions aim for (0..1).
    pub target_probability: f64,
}

impl Default for Policy {
    fn default() -> Self {
        Self {
            thresholds: OutlookThresholds::default(),
            target_probability: ActionPolicy::default().target_probability,
        }
    }
}

/// Samples of the sampling method (see `ProbabilityMethod` in the API).
pub const SAMPLING_SAMPLES: u32 = 256;

/// Validates, converts, runs the model and converts back, with the default policy. CPU-bound.
pub fn assess_pb(
    night: &pb::VehicleNight,
    path: &str,
    zones: &ZoneForecasts,
) -> Result<pb::VehicleAssessment, ApiError> {
    assess_pb_with(night, path, zones, &Policy::default())
}

/// A stable key of the request for the deterministic sampling stream (FNV-1a of its encoding).
fn request_key(night: &pb::VehicleNight) -> u64 {
    use prost::Message;
    night
        .encode_to_vec()
        .iter()
        .fold(0xcbf2_9ce4_8422_2325_u64, |h, b| {
            (h ^ u64::from(*b)).wrapping_mul(0x0100_0000_01b3)
        })
}

/// Validates, converts, runs the model, the probability and the action search, and converts back.
pub fn assess_pb_with(
    night: &pb::VehicleNight,
    path: &str,
    zones: &ZoneForecasts,
    policy: &Policy,
) -> Result<pb::VehicleAssessment, ApiError> {
    let decided = decide(night, path, zones, policy)?;
    Ok(decided.message)
}

/// An assessed vehicle with what the depot plan needs.
#[derive(Debug, Clone)]
pub struct Decided {
    /// The API answer.
    pub message: pb::VehicleAssessment,
    /// The depot plan candidate, when the vehicle has a block heater and a depot.
    pub plug_in: Option<PlugInCandidate>,
}

/// Assesses one vehicle fully: margin, probability, outlook, actions, and its plug-in candidate.
/// Validates and converts; the decision itself is the model's one pure function.
pub fn decide(
    night: &pb::VehicleNight,
    path: &str,
    zones: &ZoneForecasts,
    policy: &Policy,
) -> Result<Decided, ApiError> {
    decide_calibrated(night, path, zones, policy, None)
}

/// The vehicle's archetype id as sent ("" for a fully specified engine): the key of its pooled
/// calibration.
pub fn archetype_of(night: &pb::VehicleNight) -> &str {
    night
        .vehicle
        .as_ref()
        .and_then(|v| v.engine.as_ref())
        .map_or("", |e| e.archetype_id.as_str())
}

/// [`decide`] with what the vehicle's reported start attempts taught (`None`: nothing, or the
/// request asks to ignore it): the model applies the calibration's means and its spread widens
/// the no-start probability; the answer says how many observations calibrated it.
pub fn decide_calibrated(
    night: &pb::VehicleNight,
    path: &str,
    zones: &ZoneForecasts,
    policy: &Policy,
    calibration: Option<crate::learning::book::Looked>,
) -> Result<Decided, ApiError> {
    let ignore = night.options.as_ref().is_some_and(|o| o.ignore_calibration);
    let calibration = calibration.filter(|_| !ignore);
    let target = match night.options.as_ref().and_then(|o| o.target_no_start_pct) {
        None => policy.target_probability,
        Some(pct) if pct.is_finite() && pct > 0.0 && pct < 100.0 => pct / 100.0,
        Some(_) => {
            return Err(ApiError::field(
                format!("{path}.options.target_no_start_pct"),
                "the target no-start probability must lie strictly between 0 and 100 percent",
            ));
        }
    };
    // Every bad field at once: the zone's violation joins the night's.
    let (vehicle_id, mut domain, zone) = match (
        night_from_pb(night, path, zones),
        Zone::from_name(&night.time_zone),
    ) {
        (Ok((id, domain)), Ok(zone)) => (id, domain, zone),
        (Err(ApiError::InvalidArgument(mut found)), Err(why)) => {
            found.push(FieldViolation {
                field: format!("{path}.time_zone"),
                description: why,
            });
            return Err(ApiError::InvalidArgument(found));
        }
        (Err(e), _) => return Err(e),
        (Ok(_), Err(why)) => return Err(ApiError::field(format!("{path}.time_zone"), why)),
    };
    if let Some(c) = calibration {
        domain.options.calibration = c.calibration;
    }
    // Model time for the metrics: the whole decision (assessment, probability, actions, plan).
    let started = std::time::Instant::now();
    let model_err = |e| ApiError::from_model_in(path, e, &zone);
    let method = match night.options.as_ref().map(|o| o.probability_method()) {
        Some(pb::ProbabilityMethod::Sampling) => Method::Sampling {
            samples: SAMPLING_SAMPLES,
            key: request_key(night),
        },
        _ => Method::SigmaPoints,
    };
    let d = decision::decide(
        &domain,
        &DecisionPolicy {
            thresholds: policy.thresholds,
            target_probability: target,
            method,
        },
    )
    .map_err(model_err)?;
    // Depot candidate: the vehicle's probability with its heater from the planned time.
    let plug_in = match d.heater {
        Some(h) if !night.depot_id.is_empty() => Some(PlugInCandidate {
            p_without: h.p_without,
            p_with: h.p_with,
            heater_w: domain.aids.block_heater_w,
            plug_in_s: h.plug_in_s,
            margin_without_k: h.margin_without_k,
        }),
        _ => None,
    };
    let a = &d.assessment;
    let p = &d.probability;
    let mut message = assessment_to_pb(vehicle_id, &domain, a);
    message.limiting_factor = limiting_to_pb(d.limiting_factor) as i32;
    message.explanation = explanation(a, d.limiting_factor);
    message.no_start_pct = p.probability * 100.0;
    message.margin_spread_k = p.margin_spread_k;
    message.dominant_uncertainty = uncertainty_to_pb(p.dominant) as i32;
    message.outlook = outlook_to_pb(d.outlook) as i32;
    message.no_start_standard_error_pct = p.standard_error * 100.0;
    message.depot_id = night.depot_id.clone();
    message.actions = d.actions.iter().map(|a| action_to_pb(a, &zone)).collect();
    message.time_zone = zone.name.clone();
    message.assumed = assumed_inputs(night, &domain, &zone);
    message.binding_mode = failure_mode_to_pb(p.binding) as i32;
    message.modes = FailureMode::ALL
        .iter()
        .rev()
        .map(|&m| pb::ModeMargin {
            mode: failure_mode_to_pb(m) as i32,
            margin: a.modes.get(m),
            unit: m.unit().to_string(),
            spread: p.spread_of(m),
            no_start_pct: p.of_mode(m) * 100.0,
        })
        .collect();
    message.headline = headline(p.binding, p.binding_margin, a);
    message.calibration = Some(crate::learning::calibration_to_pb(
        &domain.options.calibration,
        calibration.map_or(0, |c| c.pooled_observations),
        None,
    ));
    crate::metrics::record_model_time(started.elapsed());
    Ok(Decided { message, plug_in })
}

fn failure_mode_to_pb(m: FailureMode) -> pb::FailureMode {
    match m {
        FailureMode::ChargeTemperature => pb::FailureMode::ChargeTemperature,
        FailureMode::CrankingSpeed => pb::FailureMode::CrankingSpeed,
        FailureMode::FrozenBattery => pb::FailureMode::FrozenBattery,
        FailureMode::FuelFlow => pb::FailureMode::FuelFlow,
    }
}

/// Margins farther than this from zero are not printed to the unit: they carry no more meaning
/// than "far from the limit" (K or rpm).
const HEADLINE_FAR: f64 = 100.0;

/// The binding margin as a person reads it.
fn headline(mode: FailureMode, margin: f64, a: &Assessment) -> String {
    let far = margin.abs() > HEADLINE_FAR;
    match (mode, margin > 0.0) {
        (FailureMode::ChargeTemperature, true) if far => {
            "charge temperature: more than 100 K to spare".into()
        }
        (FailureMode::ChargeTemperature, true) => {
            format!("charge temperature: {margin:.0} K to spare")
        }
        (FailureMode::ChargeTemperature, false) if far => {
            "charge temperature: more than 100 K short of what ignition needs".into()
        }
        (FailureMode::ChargeTemperature, false) => {
            format!(
                "charge temperature: {:.0} K short of what ignition needs",
                -margin
            )
        }
        (FailureMode::CrankingSpeed, true) => format!(
            "cranking: {margin:.0} rpm above the {:.0} rpm starting speed",
            a.cranking.min_start_speed_rpm
        ),
        (FailureMode::CrankingSpeed, false) => format!(
            "cranking: {:.0} rpm below the {:.0} rpm starting speed",
            -margin, a.cranking.min_start_speed_rpm
        ),
        (FailureMode::FrozenBattery, true) => {
            format!("battery: {margin:.0} K above its freezing point")
        }
        (FailureMode::FrozenBattery, false) => "battery: frozen".into(),
        (FailureMode::FuelFlow, true) => {
            format!("fuel: {margin:.1} K above its filter-plugging limit")
        }
        (FailureMode::FuelFlow, false) => {
            format!("fuel: {:.1} K below its filter-plugging limit", -margin)
        }
    }
}

fn uncertainty_to_pb(u: UncertaintySource) -> pb::UncertaintySource {
    match u {
        UncertaintySource::Forecast => pb::UncertaintySource::Forecast,
        UncertaintySource::BatteryCharge => pb::UncertaintySource::BatteryCharge,
        UncertaintySource::BatteryHealth => pb::UncertaintySource::BatteryHealth,
        UncertaintySource::FuelProperties => pb::UncertaintySource::FuelProperties,
        UncertaintySource::Model => pb::UncertaintySource::Model,
    }
}

/// Outlook level → API enum.
pub fn outlook_to_pb(o: StartOutlook) -> pb::StartOutlook {
    match o {
        StartOutlook::Assured => pb::StartOutlook::Assured,
        StartOutlook::Watch => pb::StartOutlook::Watch,
        StartOutlook::AtRisk => pb::StartOutlook::AtRisk,
        StartOutlook::NoStartExpected => pb::StartOutlook::NoStartExpected,
    }
}

fn action_kind_to_pb(k: ActionKind) -> pb::ActionKind {
    match k {
        ActionKind::PlugInBlockHeater => pb::ActionKind::PlugInBlockHeater,
        ActionKind::ExtendPreheat => pb::ActionKind::ExtendPreheat,
        ActionKind::RepairGlowPlugs => pb::ActionKind::RepairGlowPlugs,
        ActionKind::ChargeBattery => pb::ActionKind::ChargeBattery,
        ActionKind::ThawBattery => pb::ActionKind::ThawBattery,
        ActionKind::LighterOil => pb::ActionKind::LighterOil,
        ActionKind::TreatFuel => pb::ActionKind::TreatFuel,
        ActionKind::BlendNo1 => pb::ActionKind::BlendNo1,
        ActionKind::WinterFuel => pb::ActionKind::WinterFuel,
        ActionKind::WarmFuel => pb::ActionKind::WarmFuel,
        ActionKind::ParkSheltered => pb::ActionKind::ParkSheltered,
    }
}

/// The model's action as the API message; a timed action's summary ends with its deadline in
/// the depot's local time (the model gives the instant, the service writes it).
fn action_to_pb(a: &Action, zone: &Zone) -> pb::Action {
    let summary = match a.act_by_s {
        Some(t) => format!("{} Act by {}.", a.summary, zone.deadline(t)),
        None => a.summary.clone(),
    };
    pb::Action {
        kind: action_kind_to_pb(a.kind) as i32,
        summary,
        expected_margin_gain_k: a.expected_margin_gain_k,
        act_by: a.act_by_s.map(timestamp),
        energy_kwh: a.energy_j / 3.6e6,
        caution: a.caution.unwrap_or("").to_string(),
        no_start_after_pct: a.no_start_after * 100.0,
        tonight: a.tonight,
    }
}

/// A depot's outlets as the model's limits, with the depot's time zone.
#[derive(Debug, Clone)]
pub struct Depot {
    /// Depot id.
    pub depot_id: String,
    /// Outlets and circuit limit.
    pub limits: DepotLimits,
    /// Its time zone (UTC when it named none).
    pub zone: Zone,
}

/// Validates and converts a depot's outlets (`path` = field path prefix).
pub fn depot_from_pb(d: &pb::DepotOutlets, path: &str) -> Result<Depot, ApiError> {
    let mut v = Violations::default();
    v.id(&format!("{path}.depot_id"), &d.depot_id, true);
    let zone = match Zone::from_name(&d.time_zone) {
        Ok(zone) => zone,
        Err(why) => {
            v.add(format!("{path}.time_zone"), why);
            Zone::default()
        }
    };
    if d.outlet_count > 100_000 {
        v.add(format!("{path}.outlet_count"), "at most 100000 outlets");
    }
    let limit = v.opt_range(
        &format!("{path}.circuit_limit_kw"),
        d.circuit_limit_kw,
        0.0,
        10_000.0,
        "kW",
    );
    v.finish(())?;
    Ok(Depot {
        depot_id: d.depot_id.clone(),
        limits: DepotLimits {
            outlets: d.outlet_count,
            circuit_limit_w: limit.map(|k| k * 1000.0),
        },
        zone,
    })
}

/// The depot's plan as the API message. `vehicles[i]` and `candidates[i]` belong together.
pub fn plan_to_pb(
    depot: &Depot,
    vehicles: &[String],
    candidates: &[PlugInCandidate],
) -> pb::PlugInPlan {
    let (depot_id, limits, zone) = (&depot.depot_id, &depot.limits, &depot.zone);
    let plan = plug_in_plan::plan(candidates, limits);
    let coldest = plug_in_plan::coldest_first(candidates, limits);
    pb::PlugInPlan {
        depot_id: depot_id.to_string(),
        // An outlet left to a heater that cannot lower the probability changes no total: such a
        // vehicle is not listed as a plug-in.
        plug_ins: plan
            .chosen
            .iter()
            .filter(|&&i| candidates[i].p_with < candidates[i].p_without - 1e-3)
            .map(|&i| pb::PlannedPlugIn {
                vehicle_id: vehicles[i].clone(),
                plug_in_at: Some(timestamp(candidates[i].plug_in_s)),
                heater_w: candidates[i].heater_w,
                no_start_without_pct: candidates[i].p_without * 100.0,
                no_start_with_pct: candidates[i].p_with * 100.0,
                // Set by the fleet stream, which knows each vehicle's item.
                item_id: String::new(),
                summary: format!(
                    "Plug in by {}: no-start risk {:.1} % without, {:.1} % with",
                    zone.rfc3339(candidates[i].plug_in_s),
                    candidates[i].p_without * 100.0,
                    candidates[i].p_with * 100.0
                ),
            })
            .collect(),
        expected_no_starts_without: plan.expected_no_starts_without,
        expected_no_starts_with: plan.expected_no_starts_with,
        expected_no_starts_coldest_first: coldest.expected_no_starts_with,
        exact: plan.method == PlanMethod::Exact,
        gap_bound: plan.gap_bound,
        time_zone: zone.name.clone(),
    }
}

fn limiting_to_pb(l: LimitingFactor) -> pb::LimitingFactor {
    match l {
        LimitingFactor::None => pb::LimitingFactor::None,
        LimitingFactor::ColdCharge => pb::LimitingFactor::ColdCharge,
        LimitingFactor::SlowCranking => pb::LimitingFactor::SlowCranking,
        LimitingFactor::FrozenBattery => pb::LimitingFactor::FrozenBattery,
        LimitingFactor::Leakage => pb::LimitingFactor::Leakage,
        LimitingFactor::WaxedFuel => pb::LimitingFactor::WaxedFuel,
    }
}

fn explanation(a: &Assessment, limiting: LimitingFactor) -> String {
    let b = &a.budget;
    let c = &a.cranking;
    match limiting {
        LimitingFactor::None => format!(
            "Charge reaches {:.0} °C against {:.0} °C needed: {:.0} K to spare.",
            kelvin_to_celsius(b.predicted_end_t_k),
            kelvin_to_celsius(b.required_t_k),
            a.margin_k
        ),
        LimitingFactor::ColdCharge => format!(
            "The soaked engine ({:.0} °C) takes {:.0} K from the charge; it reaches {:.0} °C against {:.0} °C needed.",
            kelvin_to_celsius(a.soaked.engine_t_k),
            b.wall_loss_k,
            kelvin_to_celsius(b.predicted_end_t_k),
            kelvin_to_celsius(b.required_t_k)
        ),
        LimitingFactor::Leakage => format!(
            "Leakage past rings and valves costs {:.0} K at {:.0} rpm; the charge reaches {:.0} °C against {:.0} °C needed.",
            b.leakage_loss_k,
            c.result.crank_rpm,
            kelvin_to_celsius(b.predicted_end_t_k),
            kelvin_to_celsius(b.required_t_k)
        ),
        LimitingFactor::SlowCranking => format!(
            "Cranking reaches only {:.0} rpm (needs {:.0}): battery at {:.0} °C and {:.0} % charge, oil at {:.0} mPa·s.",
            c.result.crank_rpm,
            c.min_start_speed_rpm,
            kelvin_to_celsius(a.soaked.battery_t_k),
            a.state_of_charge * 100.0,
            c.oil_viscosity_pa_s * 1000.0
        ),
        LimitingFactor::FrozenBattery => format!(
            "The battery electrolyte is frozen at {:.0} °C and {:.0} % charge: it cannot crank. Never charge or jump a frozen battery; thaw it first.",
            kelvin_to_celsius(a.soaked.battery_t_k),
            a.state_of_charge * 100.0
        ),
        LimitingFactor::WaxedFuel => format!(
            "Fuel falls to {:.0} °C, {:.1} K below its CFPP: the filter will not pass it.",
            kelvin_to_celsius(a.gel.lowest_t_k),
            -a.gel.margin_to_cfpp_k
        ),
    }
}

fn gel_level_to_pb(l: GelRiskLevel) -> pb::GelLevel {
    grades::gel_level_to_pb(l)
}

fn fuel_point_to_pb(p: FuelPoint) -> pb::FuelPoint {
    match p {
        FuelPoint::Tank => pb::FuelPoint::Tank,
        FuelPoint::Line => pb::FuelPoint::Line,
        FuelPoint::Filter => pb::FuelPoint::Filter,
    }
}

/// The model's answer as the API message.
pub fn assessment_to_pb(
    vehicle_id: String,
    night: &VehicleNight,
    a: &Assessment,
) -> pb::VehicleAssessment {
    let b = &a.budget;
    let c = kelvin_to_celsius;
    let gel = &a.gel;
    pb::VehicleAssessment {
        calibration: None,
        vehicle_id,
        model_version: assess::MODEL_VERSION.to_string(),
        departure_time: Some(timestamp(night.departure_s)),
        start_margin_k: a.margin_k,
        start_expected: a.start_expected,
        limiting_factor: limiting_to_pb(a.limiting_factor) as i32,
        explanation: explanation(a, a.limiting_factor),
        budget: Some(pb::HeatBudget {
            intake_c: c(b.intake_t_k),
            ideal_end_c: c(b.ideal_end_t_k),
            wall_loss_k: b.wall_loss_k,
            leakage_loss_k: b.leakage_loss_k,
            evaporation_loss_k: b.evaporation_loss_k,
            intake_heater_gain_k: b.intake_heater_gain_k,
            glow_plug_gain_k: b.glow_plug_gain_k,
            predicted_end_c: c(b.predicted_end_t_k),
            required_c: c(b.required_t_k),
            end_pressure_kpa: b.end_p_pa / 1000.0,
            compression_gauge_kpa: b.compression_gauge_pa / 1000.0,
            ivc_c: c(b.ivc_t_k),
        }),
        cranking: Some(pb::CrankingOutcome {
            cranking_rpm: a.cranking.result.crank_rpm,
            min_start_speed_rpm: a.cranking.min_start_speed_rpm,
            terminal_v: a.cranking.result.terminal_v,
            current_a: a.cranking.result.current_a,
            oil_viscosity_mpa_s: a.cranking.oil_viscosity_pa_s * 1000.0,
            battery_frozen: a.cranking.result.battery_frozen,
        }),
        soaked: Some(pb::SoakedState {
            engine_c: c(a.soaked.engine_t_k),
            battery_c: c(a.soaked.battery_t_k),
            fuel_tank_c: c(a.soaked.fuel_tank_t_k),
            fuel_filter_c: c(a.soaked.fuel_filter_t_k),
            air_c: c(a.soaked.air_t_k),
        }),
        gel: Some(pb::GelOutlook {
            level: gel_level_to_pb(gel.level) as i32,
            blocks_start: gel.blocks_start,
            cloud_point_c: c(a.cold_flow.cloud_point_k),
            cfpp_c: c(a.cold_flow.cfpp_k),
            pour_point_c: c(a.cold_flow.pour_point_k),
            lowest_fuel_c: c(gel.lowest_t_k),
            lowest_at: Some(timestamp(gel.lowest_at_s)),
            limiting_point: fuel_point_to_pb(gel.limiting_point) as i32,
            hours_below_cloud_point: gel.hours_below_cloud_point,
            margin_to_cfpp_k: gel.margin_to_cfpp_k,
            margin_to_pour_point_k: gel.margin_to_pour_point_k,
            cloud_point_crossed_at: gel.crosses_cloud_point_at_s.map(timestamp),
            cfpp_crossed_at: gel.crosses_cfpp_at_s.map(timestamp),
            path: a
                .fuel_path
                .iter()
                .map(|s| pb::FuelTemperaturePoint {
                    at: Some(timestamp(s.at_s)),
                    tank_c: c(s.tank_t_k),
                    filter_c: c(s.filter_t_k),
                })
                .collect(),
        }),
        no_start_pct: 0.0,
        margin_spread_k: 0.0,
        dominant_uncertainty: pb::UncertaintySource::Unspecified as i32,
        outlook: pb::StartOutlook::Unspecified as i32,
        no_start_standard_error_pct: 0.0,
        depot_id: String::new(),
        margin_path: a
            .margin_path
            .iter()
            .map(|m| pb::MarginPoint {
                at: Some(timestamp(m.at_s)),
                margin_k: m.margin_k,
            })
            .collect(),
        actions: Vec::new(),
        binding_mode: pb::FailureMode::Unspecified as i32,
        modes: Vec::new(),
        headline: String::new(),
        time_zone: String::new(),
        assumed: Vec::new(),
    }
}

/// Cached DescribeModel answer.
pub(crate) fn cached<T: Clone>(cell: &'static OnceLock<T>, make: impl FnOnce() -> T) -> T {
    cell.get_or_init(make).clone()
}

#[cfg(test)]
mod request_path_tests {
    use super::*;
    use startmargin_model::ModelError;

    fn field_of(e: ApiError) -> String {
        match e {
            ApiError::InvalidArgument(v) => v[0].field.clone(),
            other => panic!("expected INVALID_ARGUMENT, got {other:?}"),
        }
    }

    #[test]
    fn model_quantities_are_reported_at_request_fields() {
        let out = |quantity| ModelError::OutOfRange {
            quantity,
            value: 1.0,
            reason: "test",
        };
        for (quantity, field) in [
            ("rest_v", "night.telemetry.battery_rest_v"),
            ("displacement_m3", "night.vehicle.engine"),
            ("rated_cca_a", "night.vehicle.battery.capacity_cca"),
            ("air_t_k", "night.forecast.points"),
            // A quantity the model derives internally: the night as a whole.
            ("t_k", "night"),
        ] {
            assert_eq!(
                field_of(ApiError::from_model("night", out(quantity))),
                field,
                "{quantity}"
            );
        }
    }

    #[test]
    fn every_mapped_field_is_a_field_of_the_night_message() {
        // The first segment must be a VehicleNight field; deeper ones are checked by the
        // end-to-end tests through the real messages.
        let night_fields = [
            "vehicle",
            "telemetry",
            "forecast",
            "forecast_zone_id",
            "departure_time",
            "block_heater_plan",
            "options",
            "depot_id",
        ];
        for quantity in [
            "rest_v",
            "observed_at_s",
            "forecast_step_s",
            "block_heater_on_from_s",
            "glow_preheat_s",
            "cooldown_time_constant_s",
            "health_fraction",
            "fuel_t_when_added_k",
        ] {
            let field = model_quantity_field(quantity).expect("mapped");
            let head = field.split('.').next().unwrap_or_default();
            assert!(night_fields.contains(&head), "{quantity} → {field}");
        }
    }
}
