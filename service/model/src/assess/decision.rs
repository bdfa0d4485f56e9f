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
use super::uncertainty::{self, Method, NoStartProbability};
use super::{Assessment, LimitingFactor, VehicleNight, assess, cause_of};
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
    let action_policy = ActionPolicy {
        target_probability: policy.target_probability,
        method: policy.method,
    };
    action_policy.validate()?;
    policy
        .thresholds
        .validate()
        .map_err(ModelError::Inconsistent)?;
    let assessment = assess(night)?;
    let probability = uncertainty::no_start_probability_from(night, &assessment, policy.method)?;
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
    let heater = actions::plan_block_heater(night, &action_policy)?;
    let mut list = Vec::new();
    actions::recommend(
        night,
        &assessment,
        &probability,
        heater.as_ref(),
        &action_policy,
        &mut list,
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
