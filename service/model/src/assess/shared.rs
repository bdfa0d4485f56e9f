//! Work shared across the runs of one vehicle's decision: the sigma points, the action outcomes,
//! the block-heater search and the margin path all assess variants of one night, and most of them
//! repeat work another run already did.
//!
//! - **The soak.** Each distinct thermal input (the vehicle's thermal nodes, where the night
//!   starts, the forecast and the departure) is soaked once: every node's temperature is kept at
//!   each forecast step end ([`SoakTrace`]). A battery or fuel perturbation, a glow-plug or fuel
//!   action, reuses it; a block heater switched on at some time resumes the engine's soak from the
//!   last step end before that time; the margin path reads the step ends directly; the fuel path is
//!   the tank and filter traces.
//! - **The compression chain** (charge at intake valve closing, the ideal, walled, leaking and
//!   heated compressions) for each distinct (air, wall, cranking speed), the bulk of one
//!   assessment: the fuel perturbations and the glow-plug and fuel actions leave it unchanged.
//! - **Whole outcomes** (an assessment and its probability) of each distinct night variant: the
//!   heater search's "without" is the decision's own night, a battery charge and a thaw are the
//!   same change, and so on.
//!
//! Everything reused is an exact intermediate result of the same computation, so the answers are
//! those of the unshared path bit for bit (tested over a grid against [`NightContext::unshared`]).
//! The context belongs to one decision of one vehicle: no statics, no state between requests.

use super::{Nodes, StartState, VehicleNight};
use crate::archetypes::EngineConfig;
use crate::assess::AssessOptions;
use crate::compression::CompressionResult;
use crate::error::ModelError;
use crate::fuel::ColdFlowProperties;
use crate::gel_risk::{self, FuelTemperatureSample, GelOutlook};
use crate::soak::{self, Forecast, ForecastHour, HeaterSchedule, SoakTrace};
use std::borrow::Cow;

/// Most distinct thermal inputs kept (a decision needs about a dozen: the central night, the two
/// forecast points, shelter and filter changes with their own forecast points).
const MAX_THERMAL_ENTRIES: usize = 16;
/// Most compression chains kept (a decision with a heater search computes about a hundred).
const MAX_CHAINS: usize = 256;
/// Most gel outlooks kept per soak (the fuel's sigma points and actions need a few).
const MAX_GEL_OUTLOOKS: usize = 4;
/// Most whole outcomes kept.
const MAX_OUTCOMES: usize = 32;

/// What one vehicle's runs share (see the module doc). Create one per decision.
#[derive(Debug, Default)]
pub struct NightContext {
    pub(super) soaks: Soaks,
    pub(super) chains: Chains,
    outcomes: Vec<(VehicleNight, super::actions::Outcome)>,
    unshared: bool,
}

impl NightContext {
    /// A context that shares work between the runs it sees.
    pub fn new() -> Self {
        Self::default()
    }

    /// The reference: every run computed from scratch, as if each had its own context. For tests
    /// and benchmarks that check the sharing changes nothing.
    #[doc(hidden)]
    pub fn unshared() -> Self {
        Self {
            soaks: Soaks {
                unshared: true,
                ..Soaks::default()
            },
            chains: Chains {
                unshared: true,
                ..Chains::default()
            },
            outcomes: Vec::new(),
            unshared: true,
        }
    }

    /// A kept outcome of exactly this night.
    pub(super) fn outcome(&self, night: &VehicleNight) -> Option<&super::actions::Outcome> {
        if self.unshared {
            return None;
        }
        self.outcomes
            .iter()
            .find(|(n, _)| n == night)
            .map(|(_, o)| o)
    }

    /// Keeps an outcome of `night`.
    pub(super) fn keep_outcome(&mut self, night: VehicleNight, o: super::actions::Outcome) {
        if self.unshared || self.outcomes.len() >= MAX_OUTCOMES {
            return;
        }
        self.outcomes.push((night, o));
    }
}

/// The kept soaks, one per distinct thermal input.
#[derive(Debug, Default)]
pub(super) struct Soaks {
    unshared: bool,
    entries: Vec<ThermalEntry>,
    next: usize,
}

impl Soaks {
    /// The soak of this thermal input: a kept one, or a new one traced to the departure.
    pub(super) fn soak<'a>(
        &'a mut self,
        night: &VehicleNight,
        nodes: &'a Nodes,
        start: &'a StartState,
    ) -> Result<Soak<'a>, ModelError> {
        if self.unshared {
            return Ok(Soak::Direct { nodes, start });
        }
        let key = ThermalKey {
            nodes: *nodes,
            start: *start,
            forecast_start_s: night.forecast.start_s,
            step_s: night.forecast.step_s,
            departure_s: night.departure_s,
        };
        let hours = &night.forecast.hours;
        let found = self
            .entries
            .iter()
            .position(|e| e.key == key && e.hours == *hours);
        let i = match found {
            Some(i) => i,
            None => {
                let f = night.forecast.view();
                let dep_s = night.departure_s;
                let trace = |node, t0_k| SoakTrace::new(node, t0_k, start.at_s, &f, dep_s);
                let entry = ThermalEntry {
                    key,
                    hours: hours.clone(),
                    engine: trace(&nodes.engine, start.engine_t_k)?,
                    battery: trace(&nodes.battery, start.battery_t_k)?,
                    tank: trace(&nodes.tank, start.tank_t_k)?,
                    filter: trace(&nodes.filter, start.filter_t_k)?,
                    fuel_path: None,
                    gels: Vec::new(),
                };
                if self.entries.len() < MAX_THERMAL_ENTRIES {
                    self.entries.push(entry);
                    self.entries.len() - 1
                } else {
                    let i = self.next;
                    self.entries[i] = entry;
                    self.next = (i + 1) % MAX_THERMAL_ENTRIES;
                    i
                }
            }
        };
        Ok(Soak::Traced(&mut self.entries[i]))
    }
}

/// The kept compression chains of one engine.
#[derive(Debug, Default)]
pub(super) struct Chains {
    unshared: bool,
    fingerprint: Option<ChainFingerprint>,
    entries: Vec<(ChainKey, Chain)>,
    next: usize,
}

impl Chains {
    /// The compression chain at (air, wall, cranking speed) of `night`'s engine with at least
    /// `detail`: a kept one, or `compute`'s (a kept chain without the stages a budget needs is
    /// replaced by one with them).
    pub(super) fn chain(
        &mut self,
        night: &VehicleNight,
        (air_t_k, wall_t_k, crank_rpm): (f64, f64, f64),
        detail: Detail,
        compute: impl FnOnce() -> Result<Chain, ModelError>,
    ) -> Result<Chain, ModelError> {
        if self.unshared {
            return compute();
        }
        let fingerprint = ChainFingerprint {
            engine: night.engine,
            intake_heater_w: night.aids.intake_heater_w,
            barometric_pa: night.forecast.barometric_pa,
            options: AssessOptions {
                include_margin_path: false,
                ..night.options
            },
        };
        if self.fingerprint.as_ref() != Some(&fingerprint) {
            self.entries.clear();
            self.next = 0;
            self.fingerprint = Some(fingerprint);
        }
        // Bit patterns: a kept chain is reused only for exactly the same inputs.
        let key = ChainKey([air_t_k.to_bits(), wall_t_k.to_bits(), crank_rpm.to_bits()]);
        let kept = self.entries.iter().rposition(|(k, _)| *k == key);
        if let Some(i) = kept {
            let c = self.entries[i].1;
            if c.stages.is_some() || detail == Detail::Margins {
                return Ok(c);
            }
            let c = compute()?;
            self.entries[i].1 = c;
            return Ok(c);
        }
        let c = compute()?;
        if self.entries.len() < MAX_CHAINS {
            self.entries.push((key, c));
        } else {
            self.entries[self.next] = (key, c);
            self.next = (self.next + 1) % MAX_CHAINS;
        }
        Ok(c)
    }
}

/// What the compression chain depends on beyond (air, wall, cranking speed).
#[derive(Debug, Clone, PartialEq)]
struct ChainFingerprint {
    engine: EngineConfig,
    intake_heater_w: f64,
    barometric_pa: f64,
    options: AssessOptions,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct ChainKey([u64; 3]);

/// The compression chain of one cranking state (see `heat_budget`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Chain {
    /// Charge temperature at intake valve closing, K.
    pub ivc_t_k: f64,
    /// The compression ignition sees: with walls and leakage, from the intake heater's warmer
    /// intake when there is one.
    pub igniting: CompressionResult,
    /// The stages the heat budget's lines are read from; only for a run whose budget is shown.
    pub stages: Option<Stages>,
}

/// The stages of a compression chain behind the heat budget's lines.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Stages {
    /// Ideal isentropic end temperature, K.
    pub ideal_end_t_k: f64,
    /// With wall heat transfer only.
    pub walls: CompressionResult,
    /// With walls and leakage, from the unheated intake.
    pub full: CompressionResult,
}

/// How much of a run is needed: everything (the assessment a caller reads), or only its margins
/// (a probe: a sigma point, an action's outcome, a plug-in time, a point of the margin path, whose
/// heat budget nobody reads; it skips the compressions that only split the budget into lines).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Detail {
    /// The heat budget line by line.
    Budget,
    /// The margins only.
    Margins,
}

/// What the soak depends on besides the forecast hours.
#[derive(Debug, Clone, Copy, PartialEq)]
struct ThermalKey {
    nodes: Nodes,
    start: StartState,
    forecast_start_s: f64,
    step_s: f64,
    departure_s: f64,
}

/// One thermal input's soak.
#[derive(Debug, Clone)]
pub(super) struct ThermalEntry {
    key: ThermalKey,
    hours: Vec<ForecastHour>,
    pub engine: SoakTrace,
    pub battery: SoakTrace,
    pub tank: SoakTrace,
    pub filter: SoakTrace,
    /// The fuel's temperature path, once asked for.
    fuel_path: Option<Vec<FuelTemperatureSample>>,
    /// Gel outlooks of the path for the last cold-flow properties asked for.
    gels: Vec<(ColdFlowProperties, GelOutlook)>,
}

/// How an assessment gets its node temperatures.
pub(super) enum Soak<'a> {
    /// From the start of the night, each time (the unshared reference).
    Direct {
        nodes: &'a Nodes,
        start: &'a StartState,
    },
    /// From a kept soak.
    Traced(&'a mut ThermalEntry),
}

impl Soak<'_> {
    /// Engine, battery, fuel tank and filter temperatures at `at_s`, K, the engine with `heater`.
    pub(super) fn temperatures_k(
        &mut self,
        f: &Forecast<'_>,
        heater: Option<&HeaterSchedule>,
        at_s: f64,
    ) -> Result<[f64; 4], ModelError> {
        match self {
            Soak::Direct { nodes, start } => {
                let t =
                    |node, t0_k, h| soak::node_temperature_k(node, t0_k, start.at_s, f, h, at_s);
                Ok([
                    t(&nodes.engine, start.engine_t_k, heater)?,
                    t(&nodes.battery, start.battery_t_k, None)?,
                    t(&nodes.tank, start.tank_t_k, None)?,
                    t(&nodes.filter, start.filter_t_k, None)?,
                ])
            }
            Soak::Traced(e) => {
                for trace in [&mut e.engine, &mut e.battery, &mut e.tank, &mut e.filter] {
                    trace.extend_to(f, at_s)?;
                }
                Ok([
                    e.engine.at_k(f, heater, at_s)?,
                    e.battery.at_k(f, None, at_s)?,
                    e.tank.at_k(f, None, at_s)?,
                    e.filter.at_k(f, None, at_s)?,
                ])
            }
        }
    }

    /// The fuel's gel outlook at departure and its temperature path (every forecast step end
    /// after the start, and the departure). A kept soak keeps the path, and the outlooks of the
    /// last few cold-flow properties asked for: the plug-in times, glow-plug and battery changes
    /// leave the fuel's soak as it is.
    pub(super) fn fuel_outlook(
        &mut self,
        f: &Forecast<'_>,
        start: &StartState,
        departure_s: f64,
        cold_flow: &ColdFlowProperties,
    ) -> Result<(GelOutlook, Cow<'_, [FuelTemperatureSample]>), ModelError> {
        match self {
            Soak::Direct { nodes, .. } => {
                // Exact piecewise solution: chaining from the previous sample equals solving
                // from the start.
                let path = fuel_path(f, start, departure_s, |from, at_s| {
                    Ok((
                        soak::node_temperature_k(
                            &nodes.tank,
                            from.tank_t_k,
                            from.at_s,
                            f,
                            None,
                            at_s,
                        )?,
                        soak::node_temperature_k(
                            &nodes.filter,
                            from.filter_t_k,
                            from.at_s,
                            f,
                            None,
                            at_s,
                        )?,
                    ))
                })?;
                let gel = gel_risk::gel_outlook(cold_flow, &path, departure_s)?;
                Ok((gel, Cow::Owned(path)))
            }
            Soak::Traced(e) => {
                if e.fuel_path.is_none() {
                    let (tank, filter) = (&mut e.tank, &mut e.filter);
                    let path = fuel_path(f, start, departure_s, |_, at_s| {
                        Ok((tank.at_k(f, None, at_s)?, filter.at_k(f, None, at_s)?))
                    })?;
                    e.fuel_path = Some(path);
                }
                let path = e.fuel_path.as_deref().unwrap_or(&[]);
                let gel = match e.gels.iter().find(|(c, _)| c == cold_flow) {
                    Some((_, gel)) => *gel,
                    None => {
                        let gel = gel_risk::gel_outlook(cold_flow, path, departure_s)?;
                        if e.gels.len() >= MAX_GEL_OUTLOOKS {
                            e.gels.remove(0);
                        }
                        e.gels.push((*cold_flow, gel));
                        gel
                    }
                };
                Ok((gel, Cow::Borrowed(path)))
            }
        }
    }
}

/// The fuel temperature path from the night's start: `next(previous sample, at_s)` gives the
/// (tank, filter) temperatures at each forecast step end after the start and at departure.
fn fuel_path(
    f: &Forecast<'_>,
    start: &StartState,
    departure_s: f64,
    mut next: impl FnMut(&FuelTemperatureSample, f64) -> Result<(f64, f64), ModelError>,
) -> Result<Vec<FuelTemperatureSample>, ModelError> {
    let mut path = Vec::with_capacity(f.hours.len() + 2);
    let mut sample = FuelTemperatureSample {
        at_s: start.at_s,
        tank_t_k: start.tank_t_k,
        line_t_k: super::line_t_k(start.tank_t_k, start.filter_t_k),
        filter_t_k: start.filter_t_k,
    };
    path.push(sample);
    let mut k = ((start.at_s - f.start_s) / f.step_s).floor() as usize + 1;
    loop {
        let next_s = (f.start_s + k as f64 * f.step_s).min(departure_s);
        if next_s <= sample.at_s {
            break;
        }
        let (tank_t_k, filter_t_k) = next(&sample, next_s)?;
        sample = FuelTemperatureSample {
            at_s: next_s,
            tank_t_k,
            line_t_k: super::line_t_k(tank_t_k, filter_t_k),
            filter_t_k,
        };
        path.push(sample);
        k += 1;
    }
    Ok(path)
}
