//! Streams the scenario's fleet through the SDK and puts each result back beside its vehicle.

use anyhow::Context;
use startmargin_sdk::{Client, Error, FleetOutcome, PlugInPlan, VehicleAssessment};
use tokio_stream::StreamExt;

use crate::scenario::Scenario;

/// One vehicle's outcome: its assessment or its own error.
pub type Outcome = Result<VehicleAssessment, Error>;

/// What the fleet stream returned.
#[derive(Debug)]
pub struct FleetRun {
    /// Each vehicle's outcome, in the scenario's order.
    pub vehicles: Vec<Outcome>,
    /// The depots' plug-in plans.
    pub plans: Vec<PlugInPlan>,
    /// The item id each plan came with, in the same order.
    pub plan_item_ids: Vec<String>,
}

/// Sends the zone forecast, the depot's outlets and every vehicle on one `AssessFleet` stream and
/// returns the outcomes in the scenario's order, with the plug-in plan. Fails when the stream
/// itself fails (transport, deadline) or a vehicle gets no result.
pub async fn assess_fleet(client: &Client, scenario: &Scenario) -> anyhow::Result<FleetRun> {
    let mut outcomes: Vec<Option<Outcome>> = scenario.vehicles.iter().map(|_| None).collect();
    let mut plans = Vec::new();
    let mut plan_item_ids = Vec::new();
    let mut results = client.assess_fleet(tokio_stream::iter(scenario.fleet_items()));
    while let Some(result) = results.next().await {
        let result = result.context("the fleet stream failed")?;
        let slot = scenario
            .vehicles
            .iter()
            .position(|v| v.id() == result.vehicle_id);
        match (slot, result.outcome) {
            (_, Ok(FleetOutcome::PlugInPlan(plan))) => {
                plans.push(plan);
                plan_item_ids.push(result.item_id);
            }
            (Some(i), Ok(FleetOutcome::Assessment(a))) => outcomes[i] = Some(Ok(a)),
            (Some(i), Err(e)) => outcomes[i] = Some(Err(e)),
            // The zone forecast and the depot outlets are not vehicles: an error there is fatal.
            (None, Err(e)) => anyhow::bail!("item {} failed: {e}", result.item_id),
            (None, Ok(FleetOutcome::Assessment(a))) => {
                anyhow::bail!("result for unknown vehicle {:?}", a.vehicle_id)
            }
        }
    }
    let vehicles = outcomes
        .into_iter()
        .zip(&scenario.vehicles)
        .map(|(o, v)| o.with_context(|| format!("no result for {}", v.id())))
        .collect::<anyhow::Result<_>>()?;
    Ok(FleetRun {
        vehicles,
        plans,
        plan_item_ids,
    })
}
