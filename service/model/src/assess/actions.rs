//! Actions that raise the start margin or remove a hard failure, each found by running the model
//! with the action applied (model.md §8): its expected effect on the margin, its timing, the
//! energy it uses and any safety caution. The block-heater plug-in time is found by root finding
//! on the soak-and-start model: the latest plug-in time whose margin still meets the margin that
//! corresponds to the target no-start probability.
//!
//! Safety cautions are the usual ones of the trade (common practice, no source) and always defer
//! to the vehicle and equipment manufacturer, local electrical codes and licensed practice.

use super::uncertainty::{MODEL_MARGIN_SIGMA_K, normal_cdf};
use super::{Assessment, COMFORT_MARGIN_K, LimitingFactor, VehicleNight, assess};
use crate::aids;
use crate::error::ModelError;
use crate::gel_risk::{self, FuelAdvice, FuelAdviceKind};
use crate::oil::SaeGrade;

/// Caution for anything plugged into mains power outdoors.
pub const CORD_CAUTION: &str = "Use an outdoor-rated extension cord and outlet rated for the heater's current, fully uncoiled, with ground-fault protection; keep connections dry and follow local electrical codes and the heater maker's instructions.";
/// Caution for engines with glow plugs or intake heaters.
pub const STARTING_FLUID_CAUTION: &str = "Never use starting fluid (ether) on an engine with glow plugs or an intake-air heater: it can ignite in the intake and wreck the engine or injure people. Follow the engine maker's cold-start procedure.";
/// Caution for charging a battery.
pub const CHARGE_CAUTION: &str = "Check the battery is not frozen before charging or jump-starting; charge in a ventilated place away from sparks and flames, with eye protection, following the battery and charger makers' instructions.";
/// Caution for a frozen battery.
pub const FROZEN_BATTERY_CAUTION: &str = "Never charge or jump-start a frozen battery: it can burst or explode. Let it thaw in a warm place, inspect the case for cracks, then charge it, or replace it.";
/// Caution for idling and warming engines.
pub const IDLING_CAUTION: &str = "Never run or idle an engine inside a closed building: exhaust carbon monoxide kills. Follow local idling rules.";
/// Caution for oil changes.
pub const OIL_CAUTION: &str = "Use only an oil grade and specification the engine maker approves for the temperatures expected.";
/// Caution for fuel handling.
pub const FUEL_CAUTION: &str = "Add additives and No. 1 diesel or kerosene only as the fuel and engine makers allow, at the stated treat rate, with no smoking or open flame nearby.";

/// What an action is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ActionKind {
    /// Plug in the block heater by a time.
    PlugInBlockHeater,
    /// Preheat longer with the glow plugs.
    ExtendPreheat,
    /// Repair the glow-plug system.
    RepairGlowPlugs,
    /// Charge or swap the battery.
    ChargeBattery,
    /// Thaw the frozen battery before anything else.
    ThawBattery,
    /// Use a lighter oil at the next service.
    LighterOil,
    /// Treat the fuel with a cold-flow additive now.
    TreatFuel,
    /// Blend in No. 1 diesel or kerosene.
    BlendNo1,
    /// Fill with a winter grade at the next fill.
    WinterFuel,
    /// Warm the fuel before departure.
    WarmFuel,
    /// Park sheltered from wind and sky.
    ParkSheltered,
}

/// A recommended action.
#[derive(Debug, Clone, PartialEq)]
pub struct Action {
    /// What to do.
    pub kind: ActionKind,
    /// One-line instruction.
    pub summary: String,
    /// Expected change of the margin, K.
    pub expected_margin_gain_k: f64,
    /// Latest time to act, s (None when timing does not matter).
    pub act_by_s: Option<f64>,
    /// Energy used, J.
    pub energy_j: f64,
    /// Safety caution, when the action can hurt someone.
    pub caution: Option<&'static str>,
    /// Removes a hard failure (frozen battery, slow cranking, waxed fuel).
    pub fixes_hard_failure: bool,
}

/// What the operator wants from the actions.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ActionPolicy {
    /// No-start probability the actions aim to reach at departure.
    pub target_probability: f64,
}

impl Default for ActionPolicy {
    fn default() -> Self {
        Self {
            target_probability: 0.05,
        }
    }
}

/// Inverse of Φ by bisection (monotone; 60 halvings reach machine precision on [−10, 10]).
pub fn normal_quantile(p: f64) -> f64 {
    let (mut lo, mut hi) = (-10.0, 10.0);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if normal_cdf(mid) < p {
            lo = mid
        } else {
            hi = mid
        }
    }
    0.5 * (lo + hi)
}

/// Margin that meets the target probability under the model's own error alone, K.
pub fn target_margin_k(policy: &ActionPolicy) -> f64 {
    MODEL_MARGIN_SIGMA_K * normal_quantile(1.0 - policy.target_probability)
}

fn margin_with(
    night: &VehicleNight,
    change: impl FnOnce(&mut VehicleNight),
) -> Result<Assessment, ModelError> {
    let mut n = night.clone();
    n.options.include_margin_path = false;
    change(&mut n);
    assess(&n)
}

/// Where the night starts on the model's time axis (telemetry time or forecast start).
fn night_start_s(night: &VehicleNight) -> f64 {
    match night.telemetry.observed_at_s {
        Some(t)
            if night.telemetry.coolant_t_k.is_some()
                || night.telemetry.oil_t_k.is_some()
                || night.telemetry.fuel_t_k.is_some() =>
        {
            t
        }
        _ => night.forecast.start_s,
    }
}

/// Block heater: latest plug-in time at which the vehicle still starts with `target_margin_k`, by
/// bisection on the plug-in time (a later plug-in never raises the margin: tested).
pub fn latest_plug_in_s(
    night: &VehicleNight,
    target_margin_k: f64,
) -> Result<Option<(f64, f64)>, ModelError> {
    if night.aids.block_heater_w <= 0.0 {
        return Ok(None);
    }
    let start_s = night_start_s(night);
    let dep_s = night.departure_s;
    // A plan is good enough when the vehicle is expected to start (the warm oil also speeds
    // cranking) with the target margin.
    let good = |a: &Assessment| a.start_expected && a.margin_k >= target_margin_k;
    let plugged_at = |t: f64| margin_with(night, |n| n.block_heater_plan = Some((t, dep_s)));
    if good(&margin_with(night, |n| n.block_heater_plan = None)?) {
        // The target is met without the heater: no plug-in needed.
        return Ok(None);
    }
    let all_night = plugged_at(start_s)?;
    if !good(&all_night) {
        // Even all night is not enough: plug in now for the most it can give.
        return Ok(Some((start_s, all_night.margin_k)));
    }
    let (mut early, mut late) = (start_s, dep_s);
    // 16 halvings of a night of ~15 h resolve about 1 minute.
    for _ in 0..16 {
        let mid = 0.5 * (early + late);
        if good(&plugged_at(mid)?) {
            early = mid
        } else {
            late = mid
        }
    }
    Ok(Some((early, plugged_at(early)?.margin_k)))
}

/// Recommends actions for an assessed night, most useful first.
pub fn recommend(
    night: &VehicleNight,
    a: &Assessment,
    policy: &ActionPolicy,
    out: &mut Vec<Action>,
) -> Result<(), ModelError> {
    let target_k = target_margin_k(policy);
    let base = a.margin_k;
    let needs_help = !a.start_expected || base < target_k.max(COMFORT_MARGIN_K);
    let has_ignition_aids = night.aids.glow_plugs.is_some() || night.aids.intake_heater_w > 0.0;

    if a.cranking.result.battery_frozen {
        out.push(Action {
            kind: ActionKind::ThawBattery,
            summary: "Battery electrolyte is frozen: thaw it (or fit a charged battery) before any start attempt.".into(),
            expected_margin_gain_k: 0.0,
            act_by_s: Some(night.departure_s),
            energy_j: 0.0,
            caution: Some(FROZEN_BATTERY_CAUTION),
            fixes_hard_failure: true,
        });
    }
    if needs_help {
        if let Some((plug_s, margin_k)) = latest_plug_in_s(night, target_k)? {
            let planned = margin_with(night, |n| {
                n.block_heater_plan = Some((plug_s, n.departure_s))
            })?;
            let energy_j = night.aids.block_heater_w * (night.departure_s - plug_s).max(0.0);
            let all_night_j =
                night.aids.block_heater_w * (night.departure_s - night_start_s(night)).max(0.0);
            out.push(Action {
                kind: ActionKind::PlugInBlockHeater,
                summary: format!(
                    "Plug in the block heater by the time given ({:.1} kWh on a timer from then, {:.1} kWh all night).",
                    energy_j / 3.6e6, all_night_j / 3.6e6
                ),
                expected_margin_gain_k: margin_k - base,
                act_by_s: Some(plug_s),
                energy_j,
                caution: Some(CORD_CAUTION),
                fixes_hard_failure: !a.start_expected && planned.start_expected,
            });
        }
        if let Some(g) = night.aids.glow_plugs {
            if !(g.relay_ok && g.plugs_ok) {
                let fixed = margin_with(night, |n| {
                    if let Some(p) = n.aids.glow_plugs.as_mut() {
                        p.relay_ok = true;
                        p.plugs_ok = true;
                    }
                })?;
                out.push(Action {
                    kind: ActionKind::RepairGlowPlugs,
                    summary: "Repair the glow-plug relay or plugs before the cold morning; the engine starts unassisted until then.".into(),
                    expected_margin_gain_k: fixed.margin_k - base,
                    act_by_s: Some(night.departure_s),
                    energy_j: 0.0,
                    caution: Some(STARTING_FLUID_CAUTION),
                    fixes_hard_failure: false,
                });
            } else {
                let full_s = 3.0 * g.preheat_time_constant_s;
                if night.aids.glow_preheat_s < full_s {
                    let gain = aids::glow_plug_gain_k(&g, full_s)?
                        - aids::glow_plug_gain_k(&g, night.aids.glow_preheat_s)?;
                    if gain > 1.0 {
                        out.push(Action {
                            kind: ActionKind::ExtendPreheat,
                            summary: format!("Preheat at least {full_s:.0} s (wait for the lamp, cycle it twice in deep cold)."),
                            expected_margin_gain_k: gain,
                            act_by_s: None,
                            energy_j: 0.0,
                            caution: Some(STARTING_FLUID_CAUTION),
                            fixes_hard_failure: false,
                        });
                    }
                }
            }
        }
        if !a.cranking.result.battery_frozen
            && (a.state_of_charge < 0.8 || a.limiting_factor == LimitingFactor::SlowCranking)
        {
            let charged = margin_with(night, |n| {
                n.telemetry.battery_rest_v = None;
                n.battery.state_of_charge = Some(1.0);
            })?;
            out.push(Action {
                kind: ActionKind::ChargeBattery,
                summary: if night.telemetry.battery_rest_v.is_some() || night.battery.state_of_charge.is_some() {
                    format!("Charge the battery tonight (now at {:.0} %) or fit a charged one.", a.state_of_charge * 100.0)
                } else {
                    format!("Check and charge the battery tonight (charge unknown, {:.0} % assumed) or fit a charged one.", a.state_of_charge * 100.0)
                },
                expected_margin_gain_k: charged.margin_k - base,
                act_by_s: Some(night.departure_s - 4.0 * 3600.0),
                energy_j: 0.0,
                caution: Some(CHARGE_CAUTION),
                fixes_hard_failure: a.limiting_factor == LimitingFactor::SlowCranking && charged.start_expected,
            });
        }
        if night.oil.winter.is_none_or(|w| w >= 15) {
            let lighter = SaeGrade {
                winter: Some(5),
                hot: if night.oil.hot >= 40 { 40 } else { 30 },
            };
            let with = margin_with(night, |n| n.oil = lighter)?;
            if with.cranking.result.crank_rpm > a.cranking.result.crank_rpm + 5.0 {
                out.push(Action {
                    kind: ActionKind::LighterOil,
                    summary: format!("At the next service use {}W-{} if the engine maker approves it (cranks {:.0} rpm faster).", 5, lighter.hot, with.cranking.result.crank_rpm - a.cranking.result.crank_rpm),
                    expected_margin_gain_k: with.margin_k - base,
                    act_by_s: None,
                    energy_j: 0.0,
                    caution: Some(OIL_CAUTION),
                    fixes_hard_failure: a.limiting_factor == LimitingFactor::SlowCranking && with.start_expected,
                });
            }
        }
        if !night.sheltered {
            let with = margin_with(night, |n| n.sheltered = true)?;
            if with.margin_k - base > 1.0 {
                out.push(Action {
                    kind: ActionKind::ParkSheltered,
                    summary: "Park in an open-sided shed or behind a wind break tonight.".into(),
                    expected_margin_gain_k: with.margin_k - base,
                    act_by_s: Some(night_start_s(night)),
                    energy_j: 0.0,
                    caution: Some(IDLING_CAUTION),
                    fixes_hard_failure: false,
                });
            }
        }
        if has_ignition_aids && base < 0.0 {
            // Already carried by the aid actions; nothing more to add.
        }
    }
    let mut fuel = Vec::new();
    gel_risk::fuel_advice(
        &night.fuel.description,
        &a.cold_flow,
        &a.gel,
        None,
        &mut fuel,
    )?;
    out.extend(fuel.iter().map(|f| fuel_action(f, a)));
    out.sort_by(|x, y| {
        y.fixes_hard_failure.cmp(&x.fixes_hard_failure).then(
            y.expected_margin_gain_k
                .total_cmp(&x.expected_margin_gain_k),
        )
    });
    Ok(())
}

fn fuel_action(f: &FuelAdvice, a: &Assessment) -> Action {
    let kind = match f.kind {
        FuelAdviceKind::TreatWithAdditiveNow => ActionKind::TreatFuel,
        FuelAdviceKind::BlendNo1 => ActionKind::BlendNo1,
        FuelAdviceKind::SwitchToWinterGrade => ActionKind::WinterFuel,
        FuelAdviceKind::WarmFuel => ActionKind::WarmFuel,
        FuelAdviceKind::ParkSheltered => ActionKind::ParkSheltered,
    };
    Action {
        kind,
        summary: f.note.to_string(),
        expected_margin_gain_k: 0.0,
        act_by_s: f.act_before_s,
        energy_j: 0.0,
        caution: Some(match kind {
            ActionKind::WarmFuel => CORD_CAUTION,
            ActionKind::ParkSheltered => IDLING_CAUTION,
            _ => FUEL_CAUTION,
        }),
        fixes_hard_failure: a.gel.blocks_start,
    }
}

#[cfg(test)]
#[path = "actions_tests.rs"]
mod tests;
