//! The assembled assessment: from a forecast, the latest telemetry and a vehicle to a start margin,
//! its heat budget, cranking, the soaked state, the fuel gel outlook and the limiting factor.
//!
//! Method (model.md §6): a *sequential attribution* that sums exactly. Starting from the intake
//! temperature, each effect is switched on in a fixed order and its term is the change it makes:
//! ideal isentropic end temperature (variable cp) → wall loss → leakage loss → fuel evaporation →
//! intake heater → glow plugs = predicted temperature of the igniting charge. The margin is that
//! minus the temperature ignition needs within the crank-angle window at the cranking speed.
//! Which charge temperature ignites depends on the combustion system
//! ([`calibration::core_weight`]): the adiabatic core in a direct-injection bowl, the wall-cooled
//! mass average in a divided chamber.
//!
//! Units: SI inside (K, Pa, s, W, m). Times are seconds on the caller's axis (e.g. Unix seconds).
//! Deterministic: the same input always gives the same output, bit for bit.

pub mod actions;
pub mod calibration;
pub mod decision;
pub mod outlook;
pub mod shared;
pub mod unassisted;
pub mod uncertainty;

use crate::aids;
use crate::air;
use crate::archetypes::{AidConfig, CombustionSystem, EngineConfig};
use crate::battery::{self, Battery};
use crate::compression::{self, CompressionInput, CompressionResult};
use crate::constants::STANDARD_ATMOSPHERE_PA;
use crate::cranking::{self, CrankingInput, CrankingResult, Starter};
use crate::error::{ModelError, check_range};
use crate::evaporation;
use crate::fuel::{self, ColdFlowProperties, FuelDescription};
use crate::gel_risk::{FuelTemperatureSample, GelOutlook};
use crate::ignition::{self, DelayCorrelation};
use crate::induction;
use crate::learning::VehicleCalibration;
use crate::oil::SaeGrade;
use crate::soak::{self, FilterMount, Forecast, ForecastHour, HeaterSchedule, ThermalNode};
use shared::{Chain, Detail, NightContext, Soak, Stages};

/// Version of the model, reported with every answer.
pub const MODEL_VERSION: &str = concat!("startmargin-model ", env!("CARGO_PKG_VERSION"));

/// Longest forecast the model accepts, in steps (bounds work and stack buffers).
pub const MAX_FORECAST_STEPS: usize = 168;

/// Cranking speed at which the intake heater's air stream is evaluated, rpm (the middle of the
/// typical 100–250 rpm diesel cranking band, reference.md §8.6, from memory).
pub const INTAKE_HEATER_REFERENCE_RPM: f64 = 150.0;

/// State of charge assumed when neither the profile nor a rested voltage gives one: the cautious
/// side of a winter fleet battery (short trips and long idle nights leave lead-acid batteries in
/// daily service near 70 to 80 %, common practice (no source)); a fully charged one would hide
/// the slow-cranking failure the assessment is there to find.
pub const DEFAULT_STATE_OF_CHARGE: f64 = 0.75;

/// The starting battery as the caller describes it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BatteryConfig {
    /// Rated cold cranking amps (SAE J537).
    pub rated_cca_a: f64,
    /// Nominal voltage, 12 or 24 V.
    pub nominal_v: f64,
    /// State of charge 0..1, when known.
    pub state_of_charge: Option<f64>,
    /// Health 0..1 (1 = new).
    pub health_fraction: f64,
}

/// The fuel system as the caller describes it.
#[derive(Debug, Clone, PartialEq)]
pub struct FuelConfig {
    /// What the fuel is.
    pub description: FuelDescription,
    /// Tank capacity, litres.
    pub tank_capacity_l: f64,
    /// Where the filter sits.
    pub filter_mount: FilterMount,
}

/// Latest telemetry; every reading optional.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Telemetry {
    /// When the readings were taken, s.
    pub observed_at_s: Option<f64>,
    /// Coolant temperature, K.
    pub coolant_t_k: Option<f64>,
    /// Oil temperature, K.
    pub oil_t_k: Option<f64>,
    /// Fuel temperature, K.
    pub fuel_t_k: Option<f64>,
    /// Ambient air at the vehicle, K.
    pub ambient_t_k: Option<f64>,
    /// Battery voltage at rest, V.
    pub battery_rest_v: Option<f64>,
    /// Fuel level 0..1.
    pub fuel_level_fraction: Option<f64>,
}

/// An owned forecast (the service builds it; [`Forecast`] borrows it).
#[derive(Debug, Clone, PartialEq)]
pub struct ForecastSeries {
    /// Start of the first step, s.
    pub start_s: f64,
    /// Step length, s.
    pub step_s: f64,
    /// The steps.
    pub hours: Vec<ForecastHour>,
    /// One-sigma spread of each step's air temperature, K (empty when not given).
    pub air_spread_k: Vec<f64>,
    /// Barometric pressure at the parking place, Pa.
    pub barometric_pa: f64,
}

impl ForecastSeries {
    /// Borrowed view for the soak model.
    pub fn view(&self) -> Forecast<'_> {
        Forecast {
            start_s: self.start_s,
            step_s: self.step_s,
            hours: &self.hours,
        }
    }
}

/// Options of one assessment.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct AssessOptions {
    /// Ignition-delay correlation.
    pub delay_correlation: DelayCorrelation,
    /// Also compute the margin for a departure at each forecast step.
    pub include_margin_path: bool,
    /// What the vehicle's observed starts taught (`learning`); the default is the identity.
    pub calibration: VehicleCalibration,
}

/// Everything the model needs for one vehicle and one departure.
#[derive(Debug, Clone, PartialEq)]
pub struct VehicleNight {
    /// Resolved engine.
    pub engine: EngineConfig,
    /// Aids.
    pub aids: AidConfig,
    /// Battery.
    pub battery: BatteryConfig,
    /// Oil grade.
    pub oil: SaeGrade,
    /// Fuel.
    pub fuel: FuelConfig,
    /// Parked sheltered from wind and sky.
    pub sheltered: bool,
    /// Latest telemetry.
    pub telemetry: Telemetry,
    /// Forecast.
    pub forecast: ForecastSeries,
    /// Planned departure, s.
    pub departure_s: f64,
    /// Planned block-heater connection [from, until), s.
    pub block_heater_plan: Option<(f64, f64)>,
    /// Options.
    pub options: AssessOptions,
}

/// The heat budget (see the module doc); temperatures in K, terms in K.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct HeatBudget {
    /// Air temperature entering the intake, K.
    pub intake_t_k: f64,
    /// Charge temperature at intake valve closing after the port and cylinder walls warmed it
    /// (induction heating, no aids), K.
    pub ivc_t_k: f64,
    /// Ideal isentropic end temperature from the IVC charge temperature, K.
    pub ideal_end_t_k: f64,
    /// Wall loss, K (positive = cooling).
    pub wall_loss_k: f64,
    /// Leakage loss, K (positive = cooling).
    pub leakage_loss_k: f64,
    /// Evaporation cooling, K (positive = cooling).
    pub evaporation_loss_k: f64,
    /// Intake heater gain, K.
    pub intake_heater_gain_k: f64,
    /// Glow plug gain, K.
    pub glow_plug_gain_k: f64,
    /// The vehicle's calibrated thermal offset (posterior mean), K; 0 uncalibrated.
    pub calibration_offset_k: f64,
    /// Predicted igniting-charge temperature at TDC, K.
    pub predicted_end_t_k: f64,
    /// Required temperature, K.
    pub required_t_k: f64,
    /// Cylinder pressure at TDC, Pa.
    pub end_p_pa: f64,
    /// Peak cranking pressure a gauge would read, Pa gauge.
    pub compression_gauge_pa: f64,
}

impl HeatBudget {
    /// Margin = predicted − required, K.
    pub fn margin_k(&self) -> f64 {
        self.predicted_end_t_k - self.required_t_k
    }
}

/// Temperatures at departure, K.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct SoakedState {
    /// Engine node.
    pub engine_t_k: f64,
    /// Battery.
    pub battery_t_k: f64,
    /// Fuel tank.
    pub fuel_tank_t_k: f64,
    /// Fuel filter.
    pub fuel_filter_t_k: f64,
    /// Air.
    pub air_t_k: f64,
}

/// What decides the outcome.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LimitingFactor {
    /// Nothing limits: every failure mode has a comfortable margin.
    None,
    /// The soaked engine takes too much heat from the charge.
    ColdCharge,
    /// Cranking below the engine's minimum starting speed.
    SlowCranking,
    /// Battery electrolyte frozen.
    FrozenBattery,
    /// Leakage loses too much charge.
    Leakage,
    /// Fuel will not pass the filter.
    WaxedFuel,
}

/// The ways a start can fail, each with a margin in its own unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum FailureMode {
    /// The charge does not reach the temperature ignition needs (margin in K).
    ChargeTemperature,
    /// The starter cannot reach the minimum starting speed (margin in rpm).
    CrankingSpeed,
    /// The battery electrolyte freezes (margin in K above its freezing point).
    FrozenBattery,
    /// The fuel does not pass the filter (margin in K above the CFPP or pour point).
    FuelFlow,
}

impl FailureMode {
    /// All modes, in the order ties are broken (the first hard failure wins).
    pub const ALL: [FailureMode; 4] = [
        FailureMode::FrozenBattery,
        FailureMode::FuelFlow,
        FailureMode::CrankingSpeed,
        FailureMode::ChargeTemperature,
    ];

    /// The model's own error of this mode's margin, one standard deviation, in the mode's unit
    /// (estimates: [`uncertainty::MODEL_MARGIN_SIGMA_K`] for the charge, about 15 % of a
    /// 100 rpm starting speed for cranking, the spread of the freezing-point table for the
    /// battery, the fuel-path error for the fuel).
    pub const fn model_sigma(self) -> f64 {
        match self {
            FailureMode::ChargeTemperature => uncertainty::MODEL_MARGIN_SIGMA_K,
            FailureMode::CrankingSpeed => 15.0,
            FailureMode::FrozenBattery => 2.0,
            FailureMode::FuelFlow => 1.5,
        }
    }

    /// Unit of the mode's margin.
    pub const fn unit(self) -> &'static str {
        match self {
            FailureMode::CrankingSpeed => "rpm",
            _ => "K",
        }
    }
}

/// The margin of every failure mode (positive = that mode does not stop the start).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct ModeMargins {
    /// Charge temperature at TDC above what ignition needs, K.
    pub charge_k: f64,
    /// Cranking speed above the minimum starting speed, rpm.
    pub cranking_rpm: f64,
    /// Battery temperature above its electrolyte freezing point, K.
    pub battery_freeze_k: f64,
    /// Lowest fuel temperature above the nearer of its CFPP and pour point, K.
    pub fuel_flow_k: f64,
}

impl ModeMargins {
    /// The margin of one mode, in its unit.
    pub const fn get(&self, mode: FailureMode) -> f64 {
        match mode {
            FailureMode::ChargeTemperature => self.charge_k,
            FailureMode::CrankingSpeed => self.cranking_rpm,
            FailureMode::FrozenBattery => self.battery_freeze_k,
            FailureMode::FuelFlow => self.fuel_flow_k,
        }
    }

    /// The binding mode: the one whose margin is smallest in units of its model error.
    pub fn binding(&self) -> FailureMode {
        let mut best = FailureMode::ALL[0];
        for m in FailureMode::ALL {
            if self.get(m) / m.model_sigma() < self.get(best) / best.model_sigma() {
                best = m;
            }
        }
        best
    }

    /// True when every mode has a positive margin.
    pub fn all_positive(&self) -> bool {
        FailureMode::ALL.iter().all(|&m| self.get(m) > 0.0)
    }
}

/// Margin below which the outcome is "limited" even though a start is expected, in units of the
/// mode's model error: 1.5 σ, i.e. 15 K of charge temperature (about the spread of the published
/// start limits; estimate).
pub const COMFORT_SIGMAS: f64 = 1.5;
/// The comfort margin of the charge temperature, K.
pub const COMFORT_MARGIN_K: f64 = COMFORT_SIGMAS * uncertainty::MODEL_MARGIN_SIGMA_K;

/// Cranking as assessed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CrankingSummary {
    /// The cranking model's answer.
    pub result: CrankingResult,
    /// Minimum starting speed, rpm.
    pub min_start_speed_rpm: f64,
    /// Oil dynamic viscosity at the oil temperature, Pa s.
    pub oil_viscosity_pa_s: f64,
}

/// One point of the night's margin path.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MarginPoint {
    /// Departure time considered, s.
    pub at_s: f64,
    /// Margin, K.
    pub margin_k: f64,
}

/// The answer.
#[derive(Debug, Clone, PartialEq)]
pub struct Assessment {
    /// Charge-temperature margin, K (the thermal failure mode; see `modes` for all of them).
    pub margin_k: f64,
    /// Every failure mode's margin.
    pub modes: ModeMargins,
    /// The failure mode closest to stopping the start.
    pub binding: FailureMode,
    /// Every mode has a positive margin.
    pub start_expected: bool,
    /// What decides: the binding mode's cause, or none when every mode is comfortable.
    pub limiting_factor: LimitingFactor,
    /// The heat budget.
    pub budget: HeatBudget,
    /// Cranking.
    pub cranking: CrankingSummary,
    /// Temperatures at departure.
    pub soaked: SoakedState,
    /// Fuel cold-flow properties used.
    pub cold_flow: ColdFlowProperties,
    /// Fuel gel outlook.
    pub gel: GelOutlook,
    /// Fuel temperature path (hourly from the start of the night to departure).
    pub fuel_path: Vec<FuelTemperatureSample>,
    /// Margin path, when asked for.
    pub margin_path: Vec<MarginPoint>,
    /// State of charge used (0..1) and whether it came from a rested voltage.
    pub state_of_charge: f64,
    /// Block heater energy used before departure, J.
    pub block_heater_energy_j: f64,
}

/// Where the night starts: the latest telemetry, or the forecast start with everything at ambient.
#[derive(Debug, Clone, Copy, PartialEq)]
struct StartState {
    at_s: f64,
    engine_t_k: f64,
    battery_t_k: f64,
    tank_t_k: f64,
    filter_t_k: f64,
}

/// Thermal nodes of the vehicle.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Nodes {
    engine: ThermalNode,
    battery: ThermalNode,
    tank: ThermalNode,
    filter: ThermalNode,
}

/// Shelter reduces the wind a node sees and its view of the night sky (estimate: an open-sided
/// shed or wind break keeps about a third of the wind and a tenth of the sky).
const SHELTER_WIND_SHARE: f64 = 0.35;
const SHELTER_SKY_SHARE: f64 = 0.1;

/// Battery mass per rated cold cranking amp, kg/A (group 31 batteries: ≈ 27 kg for ≈ 900 CCA; estimate).
const BATTERY_KG_PER_CCA: f64 = 0.03;

fn sheltered(node: ThermalNode, sheltered: bool) -> ThermalNode {
    if sheltered {
        ThermalNode {
            wind_exposure: node.wind_exposure * SHELTER_WIND_SHARE,
            sky_view_area_m2: node.sky_view_area_m2 * SHELTER_SKY_SHARE,
            ..node
        }
    } else {
        node
    }
}

fn build_nodes(night: &VehicleNight, fuel_level: f64) -> Nodes {
    let e = &night.engine;
    let mut engine = soak::engine_node(e.geometry.displacement_m3());
    // The caller's heat capacity keeps the node's conductance: τ scales with it.
    engine.heat_capacity_j_per_k = e.heat_capacity_j_per_k;
    // The caller's fitted constant first, else the one calibrated from key-off readings.
    let calibrated_tau_s = night.options.calibration.cooldown_time_constant_s;
    if let Some(tau_s) = e
        .cooldown_time_constant_s
        .or(calibrated_tau_s.map(|b| b.mean))
    {
        // A fitted time constant is a still-air figure from the vehicle's own log.
        engine = engine.with_time_constant(tau_s, 0.0);
    }
    let battery_kg = (night.battery.rated_cca_a * BATTERY_KG_PER_CCA).max(5.0);
    Nodes {
        engine: sheltered(engine, night.sheltered),
        battery: sheltered(soak::battery_node(battery_kg), night.sheltered),
        tank: sheltered(
            soak::fuel_tank_node(night.fuel.tank_capacity_l, fuel_level),
            night.sheltered,
        ),
        filter: sheltered(
            soak::fuel_filter_node(night.fuel.filter_mount),
            night.sheltered,
        ),
    }
}

fn start_state(night: &VehicleNight) -> Result<StartState, ModelError> {
    let f = night.forecast.view();
    let t = &night.telemetry;
    let has_temps = t.coolant_t_k.is_some() || t.oil_t_k.is_some() || t.fuel_t_k.is_some();
    let at_s = match (t.observed_at_s, has_temps) {
        (Some(at), true) => at,
        _ => f.start_s,
    };
    if at_s < f.start_s {
        return Err(ModelError::Inconsistent(
            "telemetry is older than the forecast start: send a forecast that covers the time since the readings",
        ));
    }
    if at_s > night.departure_s {
        return Err(ModelError::Inconsistent(
            "telemetry is later than the departure",
        ));
    }
    let hour = forecast_step(&f, at_s)?;
    let air_t_k = t.ambient_t_k.unwrap_or(hour.air_t_k);
    let engine_t_k = t.coolant_t_k.or(t.oil_t_k).unwrap_or(air_t_k);
    // A battery under the hood or in a box starts between the engine and the air (estimate).
    let battery_t_k = air_t_k + 0.5 * (engine_t_k - air_t_k);
    let tank_t_k = t.fuel_t_k.unwrap_or(air_t_k);
    let filter_t_k = match night.fuel.filter_mount {
        FilterMount::EngineBay => 0.5 * (engine_t_k + tank_t_k),
        FilterMount::Frame => tank_t_k,
    };
    Ok(StartState {
        at_s,
        engine_t_k,
        battery_t_k,
        tank_t_k,
        filter_t_k,
    })
}

/// The forecast step holding at `at_s`; the end of the forecast belongs to its last step (a
/// departure exactly at the end is covered).
fn forecast_step<'a>(f: &'a Forecast<'_>, at_s: f64) -> Result<&'a ForecastHour, ModelError> {
    let too_short = ModelError::ForecastTooShort {
        covered_until_s: f.covered_until_s(),
        requested_s: at_s,
    };
    match f.at(at_s) {
        Some(h) => Ok(h),
        None if at_s == f.covered_until_s() => f.hours.last().ok_or(too_short),
        None => Err(too_short),
    }
}

fn heater_schedule(night: &VehicleNight) -> Option<HeaterSchedule> {
    match night.block_heater_plan {
        Some((from_s, until_s)) if night.aids.block_heater_w > 0.0 => Some(HeaterSchedule {
            power_w: night.aids.block_heater_w,
            on_from_s: from_s,
            on_until_s: until_s,
        }),
        _ => None,
    }
}

/// Checks the parts of the input that the sub-models do not check themselves.
fn validate(night: &VehicleNight) -> Result<(), ModelError> {
    let f = night.forecast.view();
    f.validate()?;
    if night.forecast.hours.len() > MAX_FORECAST_STEPS {
        return Err(ModelError::OutOfRange {
            quantity: "forecast_steps",
            value: night.forecast.hours.len() as f64,
            reason: "at most 168 steps",
        });
    }
    check_range(
        "barometric_pa",
        night.forecast.barometric_pa,
        50_000.0,
        110_000.0,
        "50–110 kPa",
    )?;
    check_range(
        "departure_s",
        night.departure_s,
        -1e12,
        1e12,
        "a finite time",
    )?;
    if night.departure_s > f.covered_until_s() || night.departure_s < f.start_s {
        return Err(ModelError::ForecastTooShort {
            covered_until_s: f.covered_until_s(),
            requested_s: night.departure_s,
        });
    }
    if let Some((from_s, until_s)) = night.block_heater_plan {
        check_range(
            "block_heater_on_from_s",
            from_s,
            -1e12,
            1e12,
            "a finite time",
        )?;
        check_range(
            "block_heater_on_until_s",
            until_s,
            -1e12,
            1e12,
            "a finite time",
        )?;
        if until_s < from_s {
            return Err(ModelError::Inconsistent(
                "block heater switched off before it is switched on",
            ));
        }
    }
    check_range(
        "tank_capacity_l",
        night.fuel.tank_capacity_l,
        5.0,
        3_000.0,
        "5–3000 L",
    )?;
    check_range(
        "ignition_window_deg",
        night.engine.ignition_window_deg,
        5.0,
        90.0,
        "5–90 °CA",
    )?;
    check_range(
        "glow_preheat_s",
        night.aids.glow_preheat_s,
        0.0,
        600.0,
        "0–600 s",
    )?;
    check_range(
        "intake_heater_w",
        night.aids.intake_heater_w,
        0.0,
        20_000.0,
        "0–20 kW",
    )?;
    check_range(
        "block_heater_w",
        night.aids.block_heater_w,
        0.0,
        5_000.0,
        "0–5 kW",
    )?;
    check_range(
        "battery_health_fraction",
        night.battery.health_fraction,
        0.05,
        1.0,
        "5–100 %",
    )?;
    check_range(
        "min_start_speed_rpm",
        night.engine.min_start_speed_rpm,
        10.0,
        600.0,
        "10–600 rpm",
    )?;
    if let Some(tau_s) = night.engine.cooldown_time_constant_s {
        check_range(
            "cooldown_time_constant_s",
            tau_s,
            600.0,
            172_800.0,
            "10 min – 48 h",
        )?;
    }
    if let Some(p) = night.engine.measured_compression_abs_pa {
        check_range(
            "measured_compression_abs_pa",
            p,
            400_000.0,
            8_200_000.0,
            "0.4–8.2 MPa absolute",
        )?;
    }
    night.options.calibration.validate()?;
    for s in &night.forecast.air_spread_k {
        check_range("air_spread_k", *s, 0.0, 30.0, "0–30 K")?;
    }
    if !night.forecast.air_spread_k.is_empty()
        && night.forecast.air_spread_k.len() != night.forecast.hours.len()
    {
        return Err(ModelError::Inconsistent(
            "give an air spread for every forecast step or for none",
        ));
    }
    let t = &night.telemetry;
    for (name, v) in [
        ("coolant_t_k", t.coolant_t_k),
        ("oil_t_k", t.oil_t_k),
        ("fuel_t_k", t.fuel_t_k),
        ("ambient_t_k", t.ambient_t_k),
    ] {
        if let Some(v) = v {
            check_range(name, v, 183.15, 423.15, "−90 to +150 °C")?;
        }
    }
    if let Some(at) = t.observed_at_s {
        check_range("observed_at_s", at, -1e12, 1e12, "a finite time")?;
    }
    if let Some(v) = t.battery_rest_v {
        check_range("battery_rest_v", v, 0.0, 32.0, "0–32 V")?;
    }
    if let Some(soc) = night.battery.state_of_charge {
        check_range("state_of_charge", soc, 0.0, 1.0, "0–100 %")?;
    }
    Ok(())
}

/// Assesses one vehicle for one departure.
pub fn assess(night: &VehicleNight) -> Result<Assessment, ModelError> {
    assess_in(night, &mut NightContext::new())
}

/// Assesses one vehicle for one departure, sharing work with the vehicle's other runs through
/// `ctx` (see [`shared`]): the same answer as [`assess`].
pub fn assess_in(night: &VehicleNight, ctx: &mut NightContext) -> Result<Assessment, ModelError> {
    let run = evaluate(night, ctx, Detail::Budget)?;
    let budget = run.point.budget.ok_or(ModelError::Inconsistent(
        "the heat budget was not computed for an assessment",
    ))?;
    let limiting_factor = limiting_factor_of(run.binding, &run.modes, &budget);
    let margin_path = if night.options.include_margin_path {
        let mut soak = ctx.soaks.soak(night, &run.nodes, &run.start)?;
        margin_path(
            night,
            &mut soak,
            &mut ctx.chains,
            &run.start,
            run.heater.as_ref(),
            run.soc,
        )?
    } else {
        Vec::new()
    };
    let block_heater_energy_j = run.heater.map_or(0.0, |h| {
        let on_s = (h.on_until_s.min(night.departure_s) - h.on_from_s.max(run.start.at_s)).max(0.0);
        h.power_w * on_s
    });
    Ok(Assessment {
        margin_k: run.point.charge.margin_k(),
        modes: run.modes,
        binding: run.binding,
        start_expected: run.modes.all_positive(),
        limiting_factor,
        budget,
        cranking: run.point.cranking,
        soaked: run.point.soaked,
        cold_flow: run.cold_flow,
        gel: run.gel,
        fuel_path: run.fuel_path,
        margin_path,
        state_of_charge: run.soc,
        block_heater_energy_j,
    })
}

/// What a probe of a night needs (see [`Detail::Margins`]): its margins, verdict and cranking.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Probe {
    /// Charge-temperature margin, K.
    pub margin_k: f64,
    /// Every failure mode's margin.
    pub modes: ModeMargins,
    /// Every mode has a positive margin.
    pub start_expected: bool,
    /// Cranking speed, rpm.
    pub crank_rpm: f64,
    /// State of charge used (0..1).
    pub state_of_charge: f64,
}

impl From<&Assessment> for Probe {
    fn from(a: &Assessment) -> Self {
        Self {
            margin_k: a.margin_k,
            modes: a.modes,
            start_expected: a.start_expected,
            crank_rpm: a.cranking.result.crank_rpm,
            state_of_charge: a.state_of_charge,
        }
    }
}

/// Probes a night (a sigma point, an action's outcome, a plug-in time): its margins exactly as
/// [`assess_in`] gives them, without the heat budget's lines or the margin path.
pub(crate) fn probe_in(night: &VehicleNight, ctx: &mut NightContext) -> Result<Probe, ModelError> {
    let run = evaluate(night, ctx, Detail::Margins)?;
    Ok(Probe {
        margin_k: run.point.charge.margin_k(),
        modes: run.modes,
        start_expected: run.modes.all_positive(),
        crank_rpm: run.point.cranking.result.crank_rpm,
        state_of_charge: run.soc,
    })
}

/// One run of the model at the departure, with what the assessment adds to it.
struct Evaluated {
    start: StartState,
    nodes: Nodes,
    heater: Option<HeaterSchedule>,
    soc: f64,
    point: StartPoint,
    cold_flow: ColdFlowProperties,
    gel: GelOutlook,
    fuel_path: Vec<FuelTemperatureSample>,
    modes: ModeMargins,
    binding: FailureMode,
}

fn evaluate(
    night: &VehicleNight,
    ctx: &mut NightContext,
    detail: Detail,
) -> Result<Evaluated, ModelError> {
    validate(night)?;
    let (start, nodes) = thermal_setup(night)?;
    let heater = heater_schedule(night);
    let soc = state_of_charge(night)?;

    let mut soak = ctx.soaks.soak(night, &nodes, &start)?;
    let point = start_point(
        night,
        &mut soak,
        &mut ctx.chains,
        heater.as_ref(),
        soc,
        night.departure_s,
        detail,
    )?;

    // Fuel path, hourly from the start of the night, then the departure itself.
    let cold_flow = fuel::cold_flow_properties(&night.fuel.description)?;
    let (gel, path) = soak.fuel_outlook(
        &night.forecast.view(),
        &start,
        night.departure_s,
        &cold_flow,
    )?;
    // Only an assessment shows the path.
    let fuel_path = match detail {
        Detail::Budget => path.into_owned(),
        Detail::Margins => Vec::new(),
    };

    let modes = ModeMargins {
        charge_k: point.charge.margin_k(),
        cranking_rpm: if point.cranking.result.battery_frozen {
            -night.engine.min_start_speed_rpm
        } else {
            point.cranking.result.crank_rpm - night.engine.min_start_speed_rpm
        },
        battery_freeze_k: point.soaked.battery_t_k - battery::electrolyte_freezing_point_k(soc),
        fuel_flow_k: fuel_flow_margin_k(&gel),
    };
    Ok(Evaluated {
        start,
        nodes,
        heater,
        soc,
        point,
        cold_flow,
        gel,
        fuel_path,
        binding: modes.binding(),
        modes,
    })
}

/// The night's start state and thermal nodes.
fn thermal_setup(night: &VehicleNight) -> Result<(StartState, Nodes), ModelError> {
    let start = start_state(night)?;
    let fuel_level = night.telemetry.fuel_level_fraction.unwrap_or(0.5);
    check_range("fuel_level_fraction", fuel_level, 0.0, 1.0, "0–100 %")?;
    Ok((start, build_nodes(night, fuel_level)))
}

/// The fuel-flow margin of an already validated `night` if its fuel had the cold-flow limits
/// `cold_flow`, K: [`evaluate`]'s fuel mode alone. The other modes do not depend on the cold-flow
/// limits (the cetane number is the fuel's own), so a change of the limits alone needs no start
/// computation: the fuel axis of the sigma points.
pub(crate) fn fuel_flow_margin_in(
    night: &VehicleNight,
    cold_flow: &ColdFlowProperties,
    ctx: &mut NightContext,
) -> Result<f64, ModelError> {
    let (start, nodes) = thermal_setup(night)?;
    let mut soak = ctx.soaks.soak(night, &nodes, &start)?;
    let (gel, _) =
        soak.fuel_outlook(&night.forecast.view(), &start, night.departure_s, cold_flow)?;
    Ok(fuel_flow_margin_k(&gel))
}

/// The fuel-flow mode's margin from a gel outlook, K: the nearer of the CFPP and the pour point.
fn fuel_flow_margin_k(gel: &GelOutlook) -> f64 {
    gel.margin_to_cfpp_k.min(gel.margin_to_pour_point_k)
}

/// The cause behind a binding mode, or none when that mode (and so every mode) is comfortable.
fn limiting_factor_of(binding: FailureMode, modes: &ModeMargins, b: &HeatBudget) -> LimitingFactor {
    if modes.get(binding) >= COMFORT_SIGMAS * binding.model_sigma() {
        return LimitingFactor::None;
    }
    cause_of(binding, b)
}

/// The cause a failure mode names.
pub fn cause_of(mode: FailureMode, b: &HeatBudget) -> LimitingFactor {
    match mode {
        FailureMode::FrozenBattery => LimitingFactor::FrozenBattery,
        FailureMode::FuelFlow => LimitingFactor::WaxedFuel,
        FailureMode::CrankingSpeed => LimitingFactor::SlowCranking,
        FailureMode::ChargeTemperature if b.leakage_loss_k > b.wall_loss_k => {
            LimitingFactor::Leakage
        }
        FailureMode::ChargeTemperature => LimitingFactor::ColdCharge,
    }
}

fn state_of_charge(night: &VehicleNight) -> Result<f64, ModelError> {
    match (
        night.telemetry.battery_rest_v,
        night.battery.state_of_charge,
    ) {
        (Some(v), _) => battery::state_of_charge_from_rest_v(v, night.battery.nominal_v),
        (None, Some(soc)) => check_range("state_of_charge", soc, 0.0, 1.0, "0–100 %"),
        (None, None) => Ok(DEFAULT_STATE_OF_CHARGE),
    }
}

/// The start computation for a departure at `at_s`.
#[derive(Debug, Clone, Copy, PartialEq)]
struct StartPoint {
    charge: Charge,
    /// The heat budget line by line (only for [`Detail::Budget`]).
    budget: Option<HeatBudget>,
    cranking: CrankingSummary,
    soaked: SoakedState,
}

fn start_point(
    night: &VehicleNight,
    soak: &mut Soak<'_>,
    chains: &mut shared::Chains,
    heater: Option<&HeaterSchedule>,
    state_of_charge: f64,
    at_s: f64,
    detail: Detail,
) -> Result<StartPoint, ModelError> {
    let f = night.forecast.view();
    let [engine_t_k, battery_t_k, fuel_tank_t_k, fuel_filter_t_k] =
        soak.temperatures_k(&f, heater, at_s)?;
    let hour = forecast_step(&f, at_s)?;
    // Between the telemetry's own ambient and the forecast, the forecast holds at departure.
    let air_t_k = hour.air_t_k;
    let soaked = SoakedState {
        engine_t_k,
        battery_t_k,
        fuel_tank_t_k,
        fuel_filter_t_k,
        air_t_k,
    };

    let engine = &night.engine;
    let cranking_input = CrankingInput {
        battery: Battery {
            rated_cca_a: night.battery.rated_cca_a,
            nominal_v: night.battery.nominal_v,
            state_of_charge,
            health_fraction: night.battery.health_fraction,
            temperature_k: battery_t_k,
        },
        starter: Starter {
            rated_power_w: engine.starter_power_w,
            nominal_v: night.battery.nominal_v,
            gear_ratio: engine.starter_gear_ratio,
            cable_resistance_ohm: cranking::DEFAULT_CABLE_RESISTANCE_OHM * night.battery.nominal_v
                / 12.0,
        },
        displacement_m3: engine.geometry.displacement_m3(),
        cylinders: engine.geometry.cylinders,
        compression_ratio: engine.geometry.compression_ratio,
        oil: night.oil,
        oil_t_k: engine_t_k,
    };
    let mut result = cranking::cranking_speed(&cranking_input)?;
    // Calibrated battery and starter health: the observed-to-modelled speed ratio (exactly 1
    // uncalibrated).
    result.crank_rpm *= night.options.calibration.cranking_log_factor.mean.exp();
    let cranking = CrankingSummary {
        result,
        min_start_speed_rpm: engine.min_start_speed_rpm,
        oil_viscosity_pa_s: result.oil_viscosity_pa_s,
    };
    // Below the minimum starting speed the engine does not start whatever the charge does; the
    // budget is then shown at the minimum starting speed (the best the starter would need to do).
    let crank_rpm = result.crank_rpm.max(engine.min_start_speed_rpm);
    let cetane = fuel::cetane_number(&night.fuel.description)?;
    let chain = chains.chain(night, (air_t_k, engine_t_k, crank_rpm), detail, || {
        compression_chain(night, air_t_k, engine_t_k, crank_rpm, detail)
    })?;
    let charge = igniting_charge(night, &chain, fuel_tank_t_k, crank_rpm, cetane)?;
    let budget = match (detail, &chain.stages) {
        (Detail::Budget, Some(stages)) => Some(heat_budget(
            night,
            &chain,
            stages,
            &charge,
            air_t_k,
            fuel_tank_t_k,
        )?),
        _ => None,
    };
    Ok(StartPoint {
        charge,
        budget,
        cranking,
        soaked,
    })
}

/// Igniting-charge temperature: the blend of adiabatic core and mass average that the combustion
/// system implies (see [`calibration::core_weight`]).
fn charge_t_k(r: &CompressionResult, c: CombustionSystem) -> f64 {
    r.tdc_mean_t_k + calibration::core_weight(c) * (r.tdc_core_t_k - r.tdc_mean_t_k)
}

/// Wall heat-transfer multiplier of a combustion system.
pub fn wall_multiplier(c: CombustionSystem) -> f64 {
    match c {
        CombustionSystem::DirectInjection => calibration::DI_WALL_MULTIPLIER,
        CombustionSystem::SwirlChamber => calibration::SWIRL_WALL_MULTIPLIER,
        CombustionSystem::Prechamber => calibration::PRECHAMBER_WALL_MULTIPLIER,
    }
}

/// Effective leak area of the engine: fitted to a measured compression when given.
pub fn leak_area_m2(engine: &EngineConfig) -> Result<f64, ModelError> {
    match engine.measured_compression_abs_pa {
        None => Ok(engine.leak_area_m2),
        Some(measured_abs_pa) => {
            let template = CompressionInput {
                geometry: engine.geometry,
                crank_rpm: calibration::COMPRESSION_TEST_RPM,
                intake_t_k: calibration::COMPRESSION_TEST_INTAKE_T_K,
                intake_p_pa: STANDARD_ATMOSPHERE_PA,
                wall_t_k: calibration::COMPRESSION_TEST_WALL_T_K,
                heat_transfer: calibration::WALL_HEAT_TRANSFER,
                heat_transfer_multiplier: wall_multiplier(engine.combustion),
                leak_area_m2: 0.0,
                crankcase_p_pa: STANDARD_ATMOSPHERE_PA,
            };
            compression::leak_area_for_peak_pressure_m2(&template, measured_abs_pa)
        }
    }
}

/// The compressions of one cranking state: the charge at intake valve closing, the compression
/// ignition sees (walls and leakage, from the intake heater's warmer intake when there is one) and,
/// for a budget that is shown, the stages its lines are read from (walls alone, walls and leakage
/// from the unheated intake).
fn compression_chain(
    night: &VehicleNight,
    air_t_k: f64,
    wall_t_k: f64,
    crank_rpm: f64,
    detail: Detail,
) -> Result<Chain, ModelError> {
    let engine = &night.engine;
    let intake_p_pa = night.forecast.barometric_pa;
    let ivc_t_k =
        induction::ivc_charge(&engine.geometry, crank_rpm, air_t_k, intake_p_pa, wall_t_k)?.ivc_t_k;
    let with_walls = CompressionInput {
        geometry: engine.geometry,
        crank_rpm,
        intake_t_k: ivc_t_k,
        intake_p_pa,
        wall_t_k,
        heat_transfer: calibration::WALL_HEAT_TRANSFER,
        heat_transfer_multiplier: wall_multiplier(engine.combustion),
        leak_area_m2: 0.0,
        crankcase_p_pa: intake_p_pa,
    };
    let with_leak = CompressionInput {
        leak_area_m2: engine.leak_area_m2,
        ..with_walls
    };
    let heated_ivc_t_k = if night.aids.intake_heater_w > 0.0 {
        // The air stream is taken at a nominal cranking speed, not the actual one: otherwise a
        // weaker battery (slower cranking, less air) would earn a larger heater rise, and anything
        // that helps cranking would cost heater gain, which the trade does not see.
        let flow_kg_s = aids::cranking_air_mass_flow_kg_s(
            engine.geometry.displacement_m3(),
            INTAKE_HEATER_REFERENCE_RPM,
            intake_p_pa,
            air_t_k,
            aids::DEFAULT_CRANKING_VOLUMETRIC_EFFICIENCY,
            air::R_AIR_J_PER_KG_K,
        )?;
        let rise_k = aids::intake_heater_rise_k(
            night.aids.intake_heater_w,
            aids::DEFAULT_INTAKE_HEATER_EFFICIENCY,
            flow_kg_s,
            air::cp_j_per_kg_k(air_t_k),
        )?;
        // The heated air passes the same port and cylinder walls: cold walls take part of it back.
        Some(
            induction::ivc_charge(
                &engine.geometry,
                crank_rpm,
                (air_t_k + rise_k).min(400.0),
                intake_p_pa,
                wall_t_k,
            )?
            .ivc_t_k,
        )
    } else {
        None
    };
    let heated = heated_ivc_t_k
        .map(|intake_t_k| {
            compression::compress(&CompressionInput {
                intake_t_k,
                ..with_leak
            })
        })
        .transpose()?;
    let (igniting, stages) = match (detail, heated) {
        (Detail::Margins, Some(heated)) => (heated, None),
        (Detail::Margins, None) => (compression::compress(&with_leak)?, None),
        (Detail::Budget, heated) => {
            let (ideal_end_t_k, _) = air::isentropic_compression(
                ivc_t_k,
                intake_p_pa,
                engine.geometry.effective_compression_ratio(),
            )?;
            let walls = compression::compress(&with_walls)?;
            let full = compression::compress(&with_leak)?;
            let stages = Stages {
                ideal_end_t_k,
                walls,
                full,
            };
            (heated.unwrap_or(full), Some(stages))
        }
    };
    Ok(Chain {
        ivc_t_k,
        igniting,
        stages,
    })
}

/// The igniting charge at one cranking state, from its compression chain: its predicted
/// temperature and the temperature ignition needs.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Charge {
    /// Evaporation cooling of the igniting charge, K.
    evaporation_loss_k: f64,
    /// Glow plug gain, K.
    glow_plug_gain_k: f64,
    /// Predicted igniting-charge temperature at TDC, K.
    predicted_end_t_k: f64,
    /// Required temperature, K.
    required_t_k: f64,
}

impl Charge {
    fn margin_k(&self) -> f64 {
        self.predicted_end_t_k - self.required_t_k
    }
}

/// The igniting charge at one cranking state: the igniting compression less the fuel's
/// evaporation, plus the glow plugs and the vehicle's calibrated offset, against the temperature
/// ignition needs at the igniting compression's end pressure.
fn igniting_charge(
    night: &VehicleNight,
    chain: &Chain,
    fuel_t_k: f64,
    crank_rpm: f64,
    cetane_number: f64,
) -> Result<Charge, ModelError> {
    let engine = &night.engine;
    let igniting_t_k = charge_t_k(&chain.igniting, engine.combustion);
    let evaporation_loss_k = evaporation_loss_k(fuel_t_k, igniting_t_k)?;
    let glow_plug_gain_k = match night.aids.glow_plugs {
        Some(g) => aids::glow_plug_gain_k(&g, night.aids.glow_preheat_s)?,
        None => 0.0,
    };
    let predicted_end_t_k = igniting_t_k - evaporation_loss_k
        + glow_plug_gain_k
        + night.options.calibration.thermal_offset_k.mean;
    let window_s = ignition::crank_window_s(engine.ignition_window_deg, crank_rpm);
    let required_t_k = ignition::required_temperature_k(
        night.options.delay_correlation,
        chain.igniting.tdc_p_pa,
        window_s,
        cetane_number,
        engine.geometry.mean_piston_speed_mps(crank_rpm),
        crank_rpm,
    )?;
    Ok(Charge {
        evaporation_loss_k,
        glow_plug_gain_k,
        predicted_end_t_k,
        required_t_k,
    })
}

/// Evaporation cooling of a charge at `charge_t_k` by the cranking fuel at `fuel_t_k`, K.
fn evaporation_loss_k(fuel_t_k: f64, charge_t_k: f64) -> Result<f64, ModelError> {
    evaporation::evaporation_cooling_k(
        calibration::CRANKING_AIR_FUEL_RATIO,
        fuel_t_k,
        charge_t_k,
        air::cv_j_per_kg_k(charge_t_k),
    )
}

/// The sequential heat budget at one cranking state, line by line, from its compression chain's
/// stages and the igniting charge: the lines sum to the predicted temperature (within rounding).
fn heat_budget(
    night: &VehicleNight,
    chain: &Chain,
    stages: &Stages,
    charge: &Charge,
    air_t_k: f64,
    fuel_t_k: f64,
) -> Result<HeatBudget, ModelError> {
    let engine = &night.engine;
    let walls_t_k = charge_t_k(&stages.walls, engine.combustion);
    let full_t_k = charge_t_k(&stages.full, engine.combustion);
    // The evaporation line is that of the unheated charge; the intake heater's gain is the
    // difference the warmer intake makes to the evaporated charge.
    let (evaporation_loss_k, intake_heater_gain_k) = if night.aids.intake_heater_w > 0.0 {
        let unheated_k = evaporation_loss_k(fuel_t_k, full_t_k)?;
        let igniting_t_k = charge_t_k(&chain.igniting, engine.combustion);
        (
            unheated_k,
            (igniting_t_k - charge.evaporation_loss_k) - (full_t_k - unheated_k),
        )
    } else {
        (charge.evaporation_loss_k, 0.0)
    };
    Ok(HeatBudget {
        intake_t_k: air_t_k,
        ivc_t_k: chain.ivc_t_k,
        ideal_end_t_k: stages.ideal_end_t_k,
        wall_loss_k: stages.ideal_end_t_k - walls_t_k,
        leakage_loss_k: walls_t_k - full_t_k,
        evaporation_loss_k,
        intake_heater_gain_k,
        glow_plug_gain_k: charge.glow_plug_gain_k,
        calibration_offset_k: night.options.calibration.thermal_offset_k.mean,
        predicted_end_t_k: charge.predicted_end_t_k,
        required_t_k: charge.required_t_k,
        end_p_pa: chain.igniting.tdc_p_pa,
        compression_gauge_pa: stages.full.peak_p_pa - night.forecast.barometric_pa,
    })
}

/// The line from tank to filter runs along the frame between the two (estimate: their mean).
fn line_t_k(tank_t_k: f64, filter_t_k: f64) -> f64 {
    0.5 * (tank_t_k + filter_t_k)
}

fn margin_path(
    night: &VehicleNight,
    soak: &mut Soak<'_>,
    chains: &mut shared::Chains,
    start: &StartState,
    heater: Option<&HeaterSchedule>,
    soc: f64,
) -> Result<Vec<MarginPoint>, ModelError> {
    let f = night.forecast.view();
    let mut out = Vec::with_capacity(night.forecast.hours.len() + 1);
    for k in 0..=night.forecast.hours.len() {
        let at_s = f.start_s + k as f64 * f.step_s;
        if at_s < start.at_s {
            continue;
        }
        let at_s = at_s.min(f.covered_until_s());
        let p = start_point(night, soak, chains, heater, soc, at_s, Detail::Margins)?;
        out.push(MarginPoint {
            at_s,
            margin_k: p.charge.margin_k(),
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests;
