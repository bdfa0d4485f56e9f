//! The model's free factors, the anchors they are fitted to, and the anchors they predict.
//!
//! Published correlations were fitted to warm engines (reference.md §0.3): at cranking their use is
//! an extrapolation, so each carries a factor. Which charge temperature must reach the ignition
//! requirement:
//! - **divided chambers** (swirl chamber, prechamber): the whole charge is forced through a narrow
//!   throat into a small chamber with a large surface; no adiabatic core survives: the igniting
//!   charge is the *mass-averaged* charge (core weight 0), and the chamber's extra surface and gas
//!   speed show as a wall heat-transfer multiplier above 1 (fitted).
//! - **direct injection**: the fuel is sprayed into the bowl, where the core is compressed almost
//!   adiabatically; but at cranking densities the spray reaches the bowl wall, so part of the
//!   mixture forms in the cooled boundary layer: the igniting charge is a blend of adiabatic core
//!   and mass average whose core weight [`DI_CORE_WEIGHT`] is fitted.
//!
//! The charge enters at its IVC temperature, warmed by the port and cylinder walls at cranking
//! flow (`induction`): a hot or plugged-in engine warms it, a cold-soaked one does not.
//!
//! | anchor | published / practice | source | role | model |
//! |---|---|---|---|---|
//! | passenger-car DI, no aid | about 0 °C | Reif 2014 p. 136 (reference.md §13, confirmed) | fitted: [`DI_CORE_WEIGHT`] | +0.8 °C |
//! | passenger-car prechamber, no aid | about 40 °C | same | fitted: [`PRECHAMBER_WALL_MULTIPLIER`] | 40.2 °C |
//! | passenger-car swirl chamber, no aid | about 20 °C | same | fitted: [`SWIRL_WALL_MULTIPLIER`] | 19.9 °C |
//! | aided limit, glow plugs (compact DI, swirl, prechamber) | about −25 °C | common practice, from memory | fitted: glow plateaus (`aids`) | −24.3, −23.3, −24.4 °C |
//! | aided limit, glow plugs, light DI truck | about −25 °C | same | predicted | −22.9 °C |
//! | aided limit, intake heater (medium, heavy, off-road DI) | about −25 °C | same | predicted (heater share an estimate) | −25.1, −27.0, −25.9 °C |
//! | heavy-duty DI, no aid | about −10 to −20 °C | reference.md §13 (estimate) | predicted | −16.0 °C |
//! | 17.5:1 light truck without glow plugs | starts hard near 10 °C | common practice (no source) | predicted | 28 K at 10 °C, zero at +2.0 °C |
//! | hot restart at −30 °C, 85 °C coolant, no aid | starts | common practice (no source) | predicted | starts, every archetype |
//! | 1 kW block heater, 2 h at −20 °C / 4 h at −30 °C | comfortable start | reference.md §12 (common practice) | predicted | ≥ 15 K every DI archetype |
//! | running blow-by at 2000 rpm | about 1 % of the charge or less | Heywood §8.6 (from memory) | sets [`DEFAULT_LEAK_AREA_M2_PER_M_BORE`] | 0.37–1.04 % |
//! | warm cranking compression | about 2.4–3.4 MPa | reference.md §6.3 (workshop estimate) | predicted | 3.4–4.3 MPa (high by up to 0.9 MPa) |
//! | cranking at the oil's J300 CCS point | near the starting speed | J300 intent (from memory) | predicted | 0.68–1.54 × the minimum speed |
//! | battery power at 0 / −18 °C vs 27 °C | 65 % / 40 % | reference.md §8.2 (from memory) | predicted | 67 % / 49 % |
//!
//! The tests in `assess::unassisted` hold every row, and a sensitivity table there shows how the
//! leak area, the cetane number and the battery health move the fitted DI anchor (leak ×0.5:
//! −3.5 K, ×2: +7.1 K; cetane ±5: −0.8/+1.0 K; health 80 %: +0.4 K).
//!
//! Sources: reference.md §13 (Reif (ed.), *Diesel Engine Management*, Springer 2014, p. 136,
//! confirmed as quoted there); reference.md §6, §8, §12; model.md "Calibration and validation
//! anchors".

use crate::archetypes::CombustionSystem;
use crate::heat_transfer::WallHeatTransfer;

/// In-cylinder correlation used at cranking (Hohenberg stays finite at cranking piston speeds).
pub const WALL_HEAT_TRANSFER: WallHeatTransfer = WallHeatTransfer::Hohenberg;

/// Multiplier on the in-cylinder correlation for direct-injection engines: the published
/// correlation as it stands.
pub const DI_WALL_MULTIPLIER: f64 = 1.0;

/// Multiplier for swirl-chamber engines (fitted on the 20 °C no-aid limit).
pub const SWIRL_WALL_MULTIPLIER: f64 = 1.63;

/// Multiplier for prechamber engines (fitted on the 40 °C no-aid limit).
pub const PRECHAMBER_WALL_MULTIPLIER: f64 = 2.08;

/// Weight of the adiabatic core in a direct-injection engine's igniting charge (fitted).
pub const DI_CORE_WEIGHT: f64 = 0.29;

/// Weight of the adiabatic core in the igniting-charge temperature (1 = core, 0 = mass average).
pub const fn core_weight(c: CombustionSystem) -> f64 {
    match c {
        CombustionSystem::DirectInjection => DI_CORE_WEIGHT,
        CombustionSystem::SwirlChamber | CombustionSystem::Prechamber => 0.0,
    }
}

/// Default effective leak area per cylinder, per metre of bore (ring circumference scales with
/// bore): 0.35 mm² at an 85 mm bore, the area at which a warm engine at 2000 rpm loses about 1 %
/// of its charge from IVC to TDC (normal blow-by is of order 1 % or less: Heywood §8.6, from
/// memory; computed in the tests). The orifice law then gives the larger losses at cranking speed.
pub const DEFAULT_LEAK_AREA_M2_PER_M_BORE: f64 = 0.35e-6 / 0.085;

/// Effective air–fuel mass ratio of the fuel that evaporates into the charge before ignition
/// while cranking (estimate: a start quantity about 1.5× the full-load quantity, λ ≈ 1.3 at full
/// load, of which about 40 % evaporates before ignition, the rest wets the cold walls; all from
/// memory). Its effect is in the budget's evaporation term (about 40 K).
pub const CRANKING_AIR_FUEL_RATIO: f64 = crate::evaporation::DEFAULT_CRANKING_AIR_FUEL_RATIO;

/// Conditions of a workshop compression test: warm engine, cranking at about 200 rpm with the
/// throttle open (common practice (no source)).
pub const COMPRESSION_TEST_RPM: f64 = 200.0;
/// Wall temperature of a warm engine in a compression test, K (about 80 °C, common practice).
pub const COMPRESSION_TEST_WALL_T_K: f64 = 353.15;
/// Intake air temperature in a compression test, K (a workshop at 20 °C).
pub const COMPRESSION_TEST_INTAKE_T_K: f64 = 293.15;
