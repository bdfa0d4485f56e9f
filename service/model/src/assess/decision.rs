//! The whole answer for one vehicle and one departure, as one pure function: the assessment, the
//! no-start probability, the outlook, the limiting factor, the actions and the block-heater plan
//! (which the depot plan also uses). AssessVehicle, AssessFleet and WatchFleet all call this, so
//! they cannot disagree, and the work shared by its parts (the central assessment, the heater
//! search) is done once.
//!
//! One verdict: the probability is the binding failure mode's (see `uncertainty`), the outlook
//! follows the probability and the fuel's gel level, and the limiting factor names the binding
//! mode's cause whenever the outlook is not assured, so no two outputs contradict each other.

use super::actions::{self, Action, ActionPolicy, HeaterPlan};
use super::outlook::{OutlookThresholds, StartOutlook};
use super::shared::NightContext;
use super::uncertainty::{self, Method, NoStartProbability};
use super::{Assessment, LimitingFactor, Probe, VehicleNight, assess_in, cause_of};
use crate::error::ModelError;

/// The operator's decision policy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DecisionPolicy {
    /// Outlook thresholds.
    pub thresholds: OutlookThresholds,
    /// No-start probability the actions aim for (0 < target < 1).
    pub target_probability: f64,
    /// How the probability is computed.
    pub method: Method,
}

impl Default for DecisionPolicy {
    fn default() -> Self {
        Self {
            thresholds: OutlookThresholds::default(),
            target_probability: ActionPolicy::default().target_probability,
            method: Method::SigmaPoints,
        }
    }
}

/// The whole answer.
#[derive(Debug, Clone, PartialEq)]
pub struct Decision {
    /// The central assessment.
    pub assessment: Assessment,
    /// The no-start probability and its binding mode.
    pub probability: NoStartProbability,
    /// The outlook level.
    pub outlook: StartOutlook,
    /// What decides, consistent with the outlook (never "none" unless the outlook is assured).
    pub limiting_factor: LimitingFactor,
    /// Actions: tonight's first, ranked by the probability each achieves; then later ones.
    pub actions: Vec<Action>,
    /// The block-heater plan, when the vehicle has a heater and needs it.
    pub heater: Option<HeaterPlan>,
}

/// Decides one vehicle's night.
pub fn decide(night: &VehicleNight, policy: &DecisionPolicy) -> Result<Decision, ModelError> {
    decide_in(night, policy, &mut NightContext::new())
}

/// [`decide`] with the work of its runs shared through `ctx` (the reference passes
/// [`NightContext::unshared`]).
#[doc(hidden)]
pub fn decide_in(
    night: &VehicleNight,
    policy: &DecisionPolicy,
    ctx: &mut NightContext,
) -> Result<Decision, ModelError> {
    let action_policy = ActionPolicy {
        target_probability: policy.target_probability,
        method: policy.method,
    };
    action_policy.validate()?;
    policy
        .thresholds
        .validate()
        .map_err(ModelError::Inconsistent)?;
    let assessment = assess_in(night, ctx)?;
    let probability = uncertainty::no_start_probability_in(night, &assessment, policy.method, ctx)?;
    // The heater search's "without" and some actions are this very night.
    let mut bare = night.clone();
    bare.options.include_margin_path = false;
    ctx.keep_outcome(
        bare,
        actions::Outcome {
            probe: Probe::from(&assessment),
            probability,
        },
    );
    let outlook = policy
        .thresholds
        .outlook(probability.probability, assessment.gel.level);
    let limiting_factor = if outlook == StartOutlook::Assured {
        assessment.limiting_factor
    } else if probability.probability < policy.thresholds.watch_from
        && assessment.gel.level >= policy.thresholds.gel_watch
    {
        // Raised by the fuel's gel level alone.
        LimitingFactor::WaxedFuel
    } else {
        cause_of(probability.binding, &assessment.budget)
    };
    let heater = actions::plan_block_heater_in(night, &action_policy, ctx)?;
    let mut list = Vec::new();
    actions::recommend_in(
        night,
        &assessment,
        &probability,
        heater.as_ref(),
        &action_policy,
        &mut list,
        ctx,
    )?;
    Ok(Decision {
        assessment,
        probability,
        outlook,
        limiting_factor,
        actions: list,
        heater,
    })
}

#[cfg(test)]
mod tests {
    //! One verdict: over a grid of archetypes, nights, batteries, relays and fuels, no two outputs
    //! of a decision contradict each other.
    use super::*;
    use crate::archetypes::ARCHETYPES;
    use crate::assess::tests::service_night;
    use crate::fuel::{FuelBase, FuelGrade};

    #[test]
    fn verdict_headline_probability_outlook_and_limiting_factor_agree() {
        let mut checked = (0, 0);
        for a in ARCHETYPES {
            for air_c in [-40.0, -25.0, -15.0, -5.0, 5.0] {
                for soc in [1.0, 0.6, 0.2] {
                    for grade in [FuelGrade::UsNo2, FuelGrade::UsNo1] {
                        let mut n = service_night(a, air_c);
                        n.battery.state_of_charge = Some(soc);
                        n.fuel.description.base = FuelBase::Grade(grade);
                        let d = decide(&n, &DecisionPolicy::default()).unwrap();
                        let p = &d.probability;
                        let margin = d.assessment.modes.get(p.binding);
                        // The verdict and the headline margin.
                        assert_eq!(
                            d.assessment.start_expected,
                            margin > 0.0,
                            "{} {air_c}",
                            a.id
                        );
                        // The probability follows the binding margin's sign.
                        assert_eq!(p.probability >= 0.5, margin <= 0.0, "{} {air_c}", a.id);
                        // "No start expected" exactly when no start is expected.
                        assert_eq!(
                            d.outlook == StartOutlook::NoStartExpected,
                            !d.assessment.start_expected,
                            "{} {air_c} soc {soc} {grade:?}: {:?} p {} margin {margin}",
                            a.id,
                            d.outlook,
                            p.probability
                        );
                        // Nothing "limits" only when the outlook is assured.
                        if d.outlook != StartOutlook::Assured {
                            assert_ne!(d.limiting_factor, LimitingFactor::None, "{} {air_c}", a.id);
                        }
                        checked.0 += 1;
                        checked.1 += usize::from(!d.assessment.start_expected);
                    }
                }
            }
        }
        // Not vacuous: both verdicts occur.
        assert!(checked.1 > 20 && checked.1 < checked.0 - 20, "{checked:?}");
    }

    #[test]
    fn across_nights_a_lower_binding_margin_never_has_a_lower_probability() {
        for a in ARCHETYPES {
            let mut rows = Vec::new();
            for step in 0..=16 {
                let air_c = 10.0 - 3.0 * f64::from(step);
                let d = decide(&service_night(a, air_c), &DecisionPolicy::default()).unwrap();
                let p = &d.probability;
                rows.push((p.binding_margin / p.binding.model_sigma(), p.probability));
            }
            rows.sort_by(|x, y| x.0.total_cmp(&y.0));
            for w in rows.windows(2) {
                assert!(
                    w[1].1 <= w[0].1 + 1e-9,
                    "{}: {:?} then {:?}",
                    a.id,
                    w[0],
                    w[1]
                );
            }
        }
    }
}
