//! Actions that lower tonight's no-start probability, each found by running the model with the
//! action applied (model.md §8): the no-start probability it achieves, its effect on the binding
//! margin, its own act-by time, the energy it uses and any safety caution. Actions that can be done
//! tonight are ranked by the probability they achieve; what cannot be done tonight (an oil change,
//! a winter grade at the next fill, fitting a fuel heater) is listed apart, after them.
//!
//! The block-heater plug-in time is found by a root search on the full no-start probability: the
//! latest plug-in time whose probability still meets the operator's target. When even plugging in
//! at once does not meet it, the advice is "plug in now", with the best probability it reaches.
//!
//! Safety cautions are the usual ones of the trade (common practice, no source) and always defer
//! to the vehicle and equipment manufacturer, local electrical codes and licensed practice.

use super::shared::NightContext;
use super::uncertainty::{
    Method, NoStartProbability, estimated_probability, misses_target_for_sure, probability_around,
};
use super::{Assessment, FailureMode, LimitingFactor, Probe, VehicleNight, probe_in};
use crate::error::{ModelError, check_range};
use crate::fuel::{AdditiveTreatment, FuelBase};
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
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
    /// Fit a fuel or filter heater.
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
    /// No-start probability tonight with this action done (0..1); for actions that cannot be
    /// done tonight, the probability a night like this one would have with it.
    pub no_start_after: f64,
    /// Change of the charge-temperature margin, K.
    pub expected_margin_gain_k: f64,
    /// Latest time to act, s (None only for actions that cannot be done tonight).
    pub act_by_s: Option<f64>,
    /// Energy used, J.
    pub energy_j: f64,
    /// Safety caution, when the action can hurt someone.
    pub caution: Option<&'static str>,
    /// Turns tonight's verdict from "no start" into "start".
    pub fixes_hard_failure: bool,
    /// Can be done tonight (false: at the next service, fill or workshop visit).
    pub tonight: bool,
}

/// What the operator wants from the actions.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ActionPolicy {
    /// No-start probability the actions aim to reach at departure (0 < target < 1).
    pub target_probability: f64,
    /// How probabilities are computed.
    pub method: Method,
}

impl Default for ActionPolicy {
    fn default() -> Self {
        Self {
            target_probability: 0.05,
            method: Method::SigmaPoints,
        }
    }
}

impl ActionPolicy {
    /// Checks the target: a probability strictly between 0 and 1.
    pub fn validate(&self) -> Result<(), ModelError> {
        let t = self.target_probability;
        if !(t.is_finite() && t > 0.0 && t < 1.0) {
            return Err(ModelError::OutOfRange {
                quantity: "target_no_start_probability",
                value: t,
                reason: "the target must lie strictly between 0 and 100 %",
            });
        }
        Ok(())
    }
}

/// Inverse of Φ by bisection (monotone; 60 halvings reach machine precision on [−10, 10]).
pub fn normal_quantile(p: f64) -> f64 {
    let (mut lo, mut hi) = (-10.0, 10.0);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if super::uncertainty::normal_cdf(mid) < p {
            lo = mid
        } else {
            hi = mid
        }
    }
    0.5 * (lo + hi)
}

/// A night with a change applied, assessed and its probability computed.
#[derive(Debug, Clone)]
pub(super) struct Outcome {
    pub(super) probe: Probe,
    pub(super) probability: NoStartProbability,
}

/// The outcome of `night` with `change` applied (a kept one when this exact night was already
/// assessed by this vehicle's decision).
fn outcome_with(
    night: &VehicleNight,
    method: Method,
    ctx: &mut NightContext,
    change: impl FnOnce(&mut VehicleNight),
) -> Result<Outcome, ModelError> {
    let mut n = night.clone();
    n.options.include_margin_path = false;
    change(&mut n);
    if let Some(o) = ctx.outcome(&n) {
        return Ok(o.clone());
    }
    let probe = probe_in(&n, ctx)?;
    let probability = probability_around(&n, &probe.modes, probe.state_of_charge, method, ctx)?;
    let o = Outcome { probe, probability };
    ctx.keep_outcome(n, o.clone());
    Ok(o)
}

/// Where the night starts on the model's time axis (telemetry time or forecast start).
pub fn night_start_s(night: &VehicleNight) -> f64 {
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

/// The block-heater plan the search found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HeaterPlan {
    /// Plug in at this time, s (the night's start when the target cannot be met).
    pub plug_in_s: f64,
    /// No-start probability without the heater.
    pub p_without: f64,
    /// No-start probability with the heater from `plug_in_s`.
    pub p_with: f64,
    /// Charge-temperature margin without the heater, K.
    pub margin_without_k: f64,
    /// Charge-temperature margin with the heater from `plug_in_s`, K.
    pub margin_with_k: f64,
    /// The plan meets the target (false: "plug in now" is the best there is).
    pub meets_target: bool,
    /// The heater turns tonight's verdict into a start.
    pub fixes_verdict: bool,
}

/// Halvings of the plug-in search: a night of about 14 h resolves to under a minute.
const PLUG_IN_HALVINGS: u32 = 10;
/// Rounds of the plug-in search's estimate before it bisects on the real probability alone.
const SURROGATE_ROUNDS: u32 = 3;

/// Block heater: the latest plug-in time whose no-start probability meets the target, to the
/// night's span over 2^10 (a later plug-in never lowers the probability: tested). `None` when the
/// vehicle has no heater or meets the target without one.
///
/// The search first brackets the time by a regula-falsi search on an estimated probability (each time's
/// central margins with the spreads of the all-night and no-heater ends, interpolated: one
/// model run a time), then confirms the bracket with the real probability on both sides and
/// bisects that down to the resolution: the plan's probability is always the real one at the
/// time it names, and the time is within the resolution of the latest one that meets the target.
pub fn plan_block_heater(
    night: &VehicleNight,
    policy: &ActionPolicy,
) -> Result<Option<HeaterPlan>, ModelError> {
    plan_block_heater_in(night, policy, &mut NightContext::new())
}

/// [`plan_block_heater`], sharing work with the vehicle's other runs through `ctx` (each plug-in
/// time resumes the engine's soak from that time; the battery and fuel are not touched).
pub fn plan_block_heater_in(
    night: &VehicleNight,
    policy: &ActionPolicy,
    ctx: &mut NightContext,
) -> Result<Option<HeaterPlan>, ModelError> {
    policy.validate()?;
    if night.aids.block_heater_w <= 0.0 {
        return Ok(None);
    }
    let target = policy.target_probability;
    let start_s = night_start_s(night);
    let dep_s = night.departure_s;
    let without = outcome_with(night, policy.method, ctx, |n| n.block_heater_plan = None)?;
    if without.probability.probability <= target {
        return Ok(None);
    }
    let plugged_at = |ctx: &mut NightContext, t: f64| {
        outcome_with(night, policy.method, ctx, |n| {
            n.block_heater_plan = Some((t, dep_s))
        })
    };
    let plan = |t: f64, with: &Outcome, meets_target: bool| HeaterPlan {
        plug_in_s: t,
        p_without: without.probability.probability,
        p_with: with.probability.probability,
        margin_without_k: without.probe.margin_k,
        margin_with_k: with.probe.margin_k,
        meets_target,
        fixes_verdict: !without.probe.start_expected && with.probe.start_expected,
    };
    let all_night = plugged_at(ctx, start_s)?;
    if all_night.probability.probability > target {
        return Ok(Some(plan(start_s, &all_night, false)));
    }
    // The search resolves the plug-in time to the night's span over 2^PLUG_IN_HALVINGS.
    let grid = PlugInGrid {
        start_s,
        resolution_s: (dep_s - start_s) / f64::from(1_u32 << PLUG_IN_HALVINGS),
    };
    let resolution_s = grid.resolution_s;
    let (mut early, mut early_outcome) = (start_s, all_night);
    let (mut late, mut late_outcome) = (dep_s, without.clone());
    // The spreads of the real probability last computed, and where.
    let mut nearest = None;
    // 1. Narrow the bracket cheaply, in a few rounds: a root search on the probability estimated
    //    from each plug-in time's central margins (one model run a time) with spreads taken from
    //    real probabilities nearby (the spreads change slowly with the plug-in time, the margins
    //    do not), then the real probability at the estimate and one resolution after it.
    for _ in 0..SURROGATE_ROUNDS {
        if grid.inside(early, late).is_none() {
            break;
        }
        let estimate_s = {
            let (e, l) = (
                early_outcome.probability.mode_spreads,
                late_outcome.probability.mode_spreads,
            );
            let (early_s, late_s) = (early, late);
            let spreads_at = |t: f64| -> [f64; 4] {
                match nearest {
                    Some(spreads) => spreads,
                    // First round: between the two ends, by time.
                    None => {
                        let w = (t - early_s) / (late_s - early_s);
                        std::array::from_fn(|k| e[k] + w * (l[k] - e[k]))
                    }
                }
            };
            let gap = |ctx: &mut NightContext, t: f64| -> Result<f64, ModelError> {
                let n = plugged_in(night, t);
                let centre = probe_in(&n, ctx)?;
                Ok(logit_gap(
                    estimated_probability(&n, &centre, &spreads_at(t)),
                    target,
                ))
            };
            grid.latest_meeting(
                (
                    early,
                    logit_gap(early_outcome.probability.probability, target),
                ),
                (
                    late,
                    logit_gap(late_outcome.probability.probability, target),
                ),
                |t| gap(ctx, t),
            )?
        };
        // 2. The real probability at the estimate and one resolution later: when the estimate
        //    is right, the bracket is then one resolution wide.
        for t in [estimate_s, estimate_s + resolution_s] {
            if t <= early || t >= late {
                continue;
            }
            let o = plugged_at(ctx, t)?;
            nearest = Some(o.probability.mode_spreads);
            if o.probability.probability <= target {
                (early, early_outcome) = (t, o);
            } else {
                (late, late_outcome) = (t, o);
                break;
            }
        }
    }
    // 3. Bisection on the real probability down to the resolution (at most as many halvings as
    //    the whole night needs).
    for _ in 0..PLUG_IN_HALVINGS {
        let Some(mid) = grid.inside(early, late) else {
            break;
        };
        // A time whose central margins alone already miss the target needs no sigma points:
        // the bisection only moves its late end there.
        let n = plugged_in(night, mid);
        let centre = probe_in(&n, ctx)?;
        if misses_target_for_sure(&n, &centre, target) {
            late = mid;
            continue;
        }
        let o = plugged_at(ctx, mid)?;
        if o.probability.probability <= target {
            (early, early_outcome) = (mid, o);
        } else {
            late = mid;
        }
    }
    Ok(Some(plan(early, &early_outcome, true)))
}

/// The plug-in times the search may name: the night's start plus whole resolutions.
struct PlugInGrid {
    start_s: f64,
    resolution_s: f64,
}

impl PlugInGrid {
    /// The grid time nearest the middle of (lo, hi), strictly inside; `None` once the bracket
    /// is one resolution wide (or the span is not positive).
    fn inside(&self, lo_s: f64, hi_s: f64) -> Option<f64> {
        let to_steps = |t: f64| ((t - self.start_s) / self.resolution_s).round();
        let (lo, hi) = (to_steps(lo_s), to_steps(hi_s));
        if !(self.resolution_s > 0.0 && hi - lo >= 2.0) {
            return None;
        }
        let mid = (0.5 * (lo + hi)).floor();
        Some(self.start_s + mid * self.resolution_s)
    }
}

impl PlugInGrid {
    /// The grid time nearest `t_s`, strictly inside (lo, hi) (which `inside` found at least two
    /// resolutions wide).
    fn nearest_inside(&self, lo_s: f64, hi_s: f64, t_s: f64) -> f64 {
        let to_steps = |t: f64| ((t - self.start_s) / self.resolution_s).round();
        let (lo, hi) = (to_steps(lo_s), to_steps(hi_s));
        // NaN (a degenerate secant) falls to the low side of the clamp.
        let k = to_steps(t_s).max(lo + 1.0).min(hi - 1.0);
        self.start_s + k * self.resolution_s
    }

    /// The latest grid time in [lo, hi) whose `gap` is ≤ 0, given gap(lo) ≤ 0 < gap(hi) and a gap
    /// that grows with the time, to one resolution. Regula falsi with the Illinois modification
    /// (Dowell & Jarratt 1971, *from memory*): the secant through the bracket's ends, rounded to
    /// the grid, and the value at an end kept twice in a row halved so that end moves too. A step
    /// that did not halve the bracket is followed by a bisection step, so the search never takes
    /// more than twice the evaluations of bisection, and on a smooth gap takes a few.
    fn latest_meeting(
        &self,
        (mut lo_s, mut gap_lo): (f64, f64),
        (mut hi_s, mut gap_hi): (f64, f64),
        mut gap: impl FnMut(f64) -> Result<f64, ModelError>,
    ) -> Result<f64, ModelError> {
        let mut moved_low_last = None;
        let mut bisect_next = false;
        while let Some(mid_s) = self.inside(lo_s, hi_s) {
            let width_s = hi_s - lo_s;
            let secant_ok =
                gap_lo.is_finite() && gap_hi.is_finite() && gap_lo <= 0.0 && gap_hi > 0.0;
            let t_s = if bisect_next || !secant_ok {
                mid_s
            } else {
                self.nearest_inside(lo_s, hi_s, lo_s + width_s * gap_lo / (gap_lo - gap_hi))
            };
            let g = gap(t_s)?;
            // NaN counts as missing the target, as the bisection on the probability did.
            let meets = g <= 0.0;
            if meets {
                (lo_s, gap_lo) = (t_s, g);
                if moved_low_last == Some(true) {
                    gap_hi *= 0.5;
                }
            } else {
                (hi_s, gap_hi) = (t_s, g);
                if moved_low_last == Some(false) {
                    gap_lo *= 0.5;
                }
            }
            moved_low_last = Some(meets);
            bisect_next = hi_s - lo_s > 0.5 * width_s;
        }
        Ok(lo_s)
    }
}

/// How far a probability is past the target, on the log-odds scale (where the probability's
/// dependence on the plug-in time is closer to a straight line than on its own scale): ≤ 0 when
/// `p` meets `target`, and increasing in `p`.
fn logit_gap(p: f64, target: f64) -> f64 {
    let logit = |x: f64| {
        let x = x.clamp(1e-300, 1.0 - 1e-16);
        x.ln() - (1.0 - x).ln()
    };
    logit(p) - logit(target)
}

/// `night` with its block heater plugged in from `plug_in_s` to the departure, no margin path.
fn plugged_in(night: &VehicleNight, plug_in_s: f64) -> VehicleNight {
    let mut n = night.clone();
    n.options.include_margin_path = false;
    n.block_heater_plan = Some((plug_in_s, n.departure_s));
    n
}

fn hours_minutes(s: f64) -> String {
    let minutes = (s / 60.0).round().max(0.0) as i64;
    format!("{} h {:02} min", minutes / 60, minutes % 60)
}

/// Recommends actions for an assessed night: tonight's first, ranked by the no-start probability
/// each achieves, then what can only be done later. `p` is the night's probability, `heater` the
/// result of [`plan_block_heater`].
pub fn recommend(
    night: &VehicleNight,
    a: &Assessment,
    p: &NoStartProbability,
    heater: Option<&HeaterPlan>,
    policy: &ActionPolicy,
    out: &mut Vec<Action>,
) -> Result<(), ModelError> {
    recommend_in(night, a, p, heater, policy, out, &mut NightContext::new())
}

/// [`recommend`], sharing work with the vehicle's other runs through `ctx`.
pub fn recommend_in(
    night: &VehicleNight,
    a: &Assessment,
    p: &NoStartProbability,
    heater: Option<&HeaterPlan>,
    policy: &ActionPolicy,
    out: &mut Vec<Action>,
    ctx: &mut NightContext,
) -> Result<(), ModelError> {
    policy.validate()?;
    out.clear();
    let method = policy.method;
    let base_k = a.margin_k;
    let dep_s = night.departure_s;
    let needs_help =
        p.probability > policy.target_probability || a.limiting_factor != LimitingFactor::None;
    let action = |kind, summary: String, o: &Outcome, act_by_s, caution, tonight| Action {
        kind,
        summary,
        no_start_after: o.probability.probability,
        expected_margin_gain_k: o.probe.margin_k - base_k,
        act_by_s,
        energy_j: 0.0,
        caution: Some(caution),
        fixes_hard_failure: !a.start_expected && o.probe.start_expected,
        tonight,
    };
    let helps = |o: &Outcome| o.probability.probability < p.probability - 1e-4;

    if a.cranking.result.battery_frozen || p.binding == FailureMode::FrozenBattery && needs_help {
        let o = outcome_with(night, method, ctx, |n| {
            n.telemetry.battery_rest_v = None;
            n.battery.state_of_charge = Some(1.0);
        })?;
        out.push(action(
            ActionKind::ThawBattery,
            "The battery is frozen or close to freezing: bring it (or the vehicle) somewhere warm to thaw, then charge it fully, or fit a charged battery.".into(),
            &o,
            Some(dep_s - 4.0 * 3600.0),
            FROZEN_BATTERY_CAUTION,
            true,
        ));
    }
    if needs_help {
        if let Some(h) = heater {
            let energy_j = night.aids.block_heater_w * (dep_s - h.plug_in_s).max(0.0);
            let lead = hours_minutes(dep_s - h.plug_in_s);
            let summary = if h.meets_target {
                format!(
                    "Plug in the block heater at least {lead} before departure ({:.1} kWh on a timer from then); that brings the no-start risk to {:.1} %.",
                    energy_j / 3.6e6,
                    h.p_with * 100.0
                )
            } else {
                format!(
                    "Plug in the block heater now and leave it on until departure ({:.1} kWh): the best it can do tonight is {:.1} % no-start risk; combine it with the other actions.",
                    energy_j / 3.6e6,
                    h.p_with * 100.0
                )
            };
            out.push(Action {
                kind: ActionKind::PlugInBlockHeater,
                summary,
                no_start_after: h.p_with,
                expected_margin_gain_k: h.margin_with_k - base_k,
                act_by_s: Some(h.plug_in_s),
                energy_j,
                caution: Some(CORD_CAUTION),
                fixes_hard_failure: !a.start_expected && h.fixes_verdict,
                tonight: true,
            });
        }
        if let Some(g) = night.aids.glow_plugs {
            if !(g.relay_ok && g.plugs_ok) {
                let o = outcome_with(night, method, ctx, |n| {
                    if let Some(p) = n.aids.glow_plugs.as_mut() {
                        p.relay_ok = true;
                        p.plugs_ok = true;
                    }
                })?;
                out.push(action(
                    ActionKind::RepairGlowPlugs,
                    "Repair the glow-plug relay or plugs before departure; until then the engine starts unassisted.".into(),
                    &o,
                    Some(dep_s),
                    STARTING_FLUID_CAUTION,
                    true,
                ));
            } else {
                let full_s = 3.0 * g.preheat_time_constant_s;
                if night.aids.glow_preheat_s < full_s {
                    let o = outcome_with(night, method, ctx, |n| n.aids.glow_preheat_s = full_s)?;
                    if helps(&o) {
                        out.push(action(
                            ActionKind::ExtendPreheat,
                            format!("At the start, preheat at least {full_s:.0} s (wait for the lamp; cycle it twice in deep cold)."),
                            &o,
                            Some(dep_s),
                            STARTING_FLUID_CAUTION,
                            true,
                        ));
                    }
                }
            }
        }
        if !a.cranking.result.battery_frozen
            && (a.state_of_charge < 0.8
                || matches!(
                    p.binding,
                    FailureMode::CrankingSpeed | FailureMode::FrozenBattery
                ))
        {
            let o = outcome_with(night, method, ctx, |n| {
                n.telemetry.battery_rest_v = None;
                n.battery.state_of_charge = Some(1.0);
            })?;
            if helps(&o) {
                let known = night.telemetry.battery_rest_v.is_some()
                    || night.battery.state_of_charge.is_some();
                out.push(action(
                    ActionKind::ChargeBattery,
                    if known {
                        format!("Charge the battery tonight (now at {:.0} %) or fit a charged one, at least 4 h before departure.", a.state_of_charge * 100.0)
                    } else {
                        format!("Check and charge the battery tonight (charge unknown, {:.0} % assumed) or fit a charged one, at least 4 h before departure.", a.state_of_charge * 100.0)
                    },
                    &o,
                    Some(dep_s - 4.0 * 3600.0),
                    CHARGE_CAUTION,
                    true,
                ));
            }
        }
        if !night.sheltered {
            let o = outcome_with(night, method, ctx, |n| n.sheltered = true)?;
            if helps(&o) {
                out.push(action(
                    ActionKind::ParkSheltered,
                    "Park in an open-sided shed or behind a wind break tonight.".into(),
                    &o,
                    Some(night_start_s(night)),
                    IDLING_CAUTION,
                    true,
                ));
            }
        }
        if night.oil.winter.is_none_or(|w| w >= 15) {
            let lighter = SaeGrade {
                winter: Some(5),
                hot: if night.oil.hot >= 40 { 40 } else { 30 },
            };
            let o = outcome_with(night, method, ctx, |n| n.oil = lighter)?;
            if o.probe.crank_rpm > a.cranking.result.crank_rpm + 5.0 {
                out.push(action(
                    ActionKind::LighterOil,
                    format!(
                        "At the next service use 5W-{} if the engine maker approves it: it cranks {:.0} rpm faster on a night like this.",
                        lighter.hot,
                        o.probe.crank_rpm - a.cranking.result.crank_rpm
                    ),
                    &o,
                    None,
                    OIL_CAUTION,
                    false,
                ));
            }
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
    for f in &fuel {
        // At the lowest gel levels the fuel advice is only worth showing when it changes tonight.
        if let Some(x) = fuel_action(night, a, f, heater.is_some(), method, ctx)?
            && !out.iter().any(|y| y.kind == x.kind)
            && (a.gel.level >= crate::gel_risk::GelRiskLevel::WaxForming
                || x.no_start_after < p.probability - 1e-4)
        {
            out.push(x);
        }
    }
    // Tonight's actions first, each group by the probability it achieves (then by energy).
    out.sort_by(|x, y| {
        y.tonight
            .cmp(&x.tonight)
            .then(x.no_start_after.total_cmp(&y.no_start_after))
            .then(x.energy_j.total_cmp(&y.energy_j))
    });
    Ok(())
}

/// The fuel temperature now, K: the latest reading, else the forecast's first step.
fn fuel_now_t_k(night: &VehicleNight) -> f64 {
    night
        .telemetry
        .fuel_t_k
        .or_else(|| night.forecast.hours.first().map(|h| h.air_t_k))
        .unwrap_or(273.15)
}

fn fuel_action(
    night: &VehicleNight,
    a: &Assessment,
    f: &FuelAdvice,
    has_block_heater: bool,
    method: Method,
    ctx: &mut NightContext,
) -> Result<Option<Action>, ModelError> {
    let d = night.fuel.description;
    let (kind, tonight, caution) = match f.kind {
        FuelAdviceKind::TreatWithAdditiveNow => (ActionKind::TreatFuel, true, FUEL_CAUTION),
        FuelAdviceKind::BlendNo1 => (ActionKind::BlendNo1, true, FUEL_CAUTION),
        FuelAdviceKind::SwitchToWinterGrade => (ActionKind::WinterFuel, false, FUEL_CAUTION),
        // A block heater already keeps an engine-mounted filter warm: that action covers it.
        FuelAdviceKind::WarmFuel if has_block_heater => return Ok(None),
        FuelAdviceKind::WarmFuel => (ActionKind::WarmFuel, false, CORD_CAUTION),
        FuelAdviceKind::ParkSheltered => (ActionKind::ParkSheltered, true, IDLING_CAUTION),
    };
    let o = outcome_with(night, method, ctx, |n| match f.kind {
        FuelAdviceKind::TreatWithAdditiveNow => {
            n.fuel.description.additive = Some(AdditiveTreatment::typical(
                check_range("fuel_t_k", fuel_now_t_k(night), 183.15, 323.15, "").unwrap_or(273.15),
            ));
        }
        FuelAdviceKind::BlendNo1 => {
            if let Some(share) = f.suggested_no1_blend_fraction {
                n.fuel.description.no1_blend_fraction = share;
            }
        }
        FuelAdviceKind::SwitchToWinterGrade => {
            if let Some(g) = f.suggested_grade {
                n.fuel.description = crate::fuel::FuelDescription {
                    base: FuelBase::Grade(g),
                    ..d
                };
            }
        }
        // A filter heater keeps the filter at least as warm as an engine-bay mount would.
        FuelAdviceKind::WarmFuel => n.fuel.filter_mount = crate::soak::FilterMount::EngineBay,
        FuelAdviceKind::ParkSheltered => n.sheltered = true,
    })?;
    Ok(Some(Action {
        kind,
        summary: f.note.to_string(),
        no_start_after: o.probability.probability,
        expected_margin_gain_k: o.probe.margin_k - a.margin_k,
        act_by_s: if tonight {
            Some(f.act_before_s.unwrap_or(night.departure_s))
        } else {
            None
        },
        energy_j: 0.0,
        caution: Some(caution),
        fixes_hard_failure: !a.start_expected && o.probe.start_expected,
        tonight,
    }))
}

#[cfg(test)]
#[path = "actions_tests.rs"]
mod tests;

#[cfg(test)]
mod plug_in_grid_tests {
    use super::*;

    /// The latest grid time whose gap is ≤ 0, by trying every grid time (the definition).
    fn by_every_time(grid: &PlugInGrid, steps: u32, gap: impl Fn(f64) -> f64) -> f64 {
        (0..=steps)
            .map(|k| grid.start_s + f64::from(k) * grid.resolution_s)
            .filter(|&t| gap(t) <= 0.0)
            .fold(grid.start_s, f64::max)
    }

    #[test]
    fn the_root_search_finds_the_latest_meeting_time_within_twice_bisections_evaluations() {
        let steps = 1_u32 << PLUG_IN_HALVINGS;
        let grid = PlugInGrid {
            start_s: 1_000.0,
            resolution_s: 42.0,
        };
        let end_s = grid.start_s + f64::from(steps) * grid.resolution_s;
        // Increasing gaps: straight, steep near the end (like the log-odds of a heater plugged
        // in late), flat then steep, and a step; roots across the night.
        let shapes: [fn(f64, f64) -> f64; 4] = [
            |x, r| x - r,
            |x, r| (8.0 * x).exp() - (8.0 * r).exp(),
            |x, r| (x - r).powi(3),
            |x, r| if x > r { 1.0 } else { -1.0 },
        ];
        for shape in shapes {
            for root in [0.013, 0.31, 0.5, 0.77, 0.951, 0.999] {
                let gap = |t: f64| shape((t - grid.start_s) / (end_s - grid.start_s), root);
                let mut evaluations = 0;
                let found = grid
                    .latest_meeting(
                        (grid.start_s, gap(grid.start_s)),
                        (end_s, gap(end_s)),
                        |t| {
                            evaluations += 1;
                            Ok(gap(t))
                        },
                    )
                    .unwrap();
                assert_eq!(found, by_every_time(&grid, steps, gap), "root {root}");
                assert!(
                    evaluations <= 2 * PLUG_IN_HALVINGS,
                    "root {root}: {evaluations}"
                );
            }
        }
    }

    #[test]
    fn a_nan_gap_counts_as_missing_and_an_error_is_passed_on() {
        let grid = PlugInGrid {
            start_s: 0.0,
            resolution_s: 1.0,
        };
        let found = grid
            .latest_meeting((0.0, -1.0), (64.0, 1.0), |t| {
                Ok(if t > 10.0 { f64::NAN } else { -1.0 })
            })
            .unwrap();
        assert_eq!(found, 10.0);
        let failed = grid.latest_meeting((0.0, -1.0), (64.0, 1.0), |_| {
            Err(ModelError::NoConvergence("test"))
        });
        assert!(failed.is_err());
        assert!(logit_gap(0.05, 0.05).abs() < 1e-12 && logit_gap(0.0, 0.05).is_finite());
        assert!(logit_gap(1.0, 0.05).is_finite() && logit_gap(0.06, 0.05) > 0.0);
    }
}
