//! The depot plug-in plan of a fleet stream: after every result of its own vehicles, each depot that sent
//! its outlets gets one plan that fits its outlets and names only its own vehicles.

use std::collections::HashSet;

use startmargin_e2e::{
    TestServer, sample_night_in_zone, vehicle_item, violated_fields_in, zone_item,
};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use tokio_stream::StreamExt as _;
use tonic::Code;

const OUTLETS: u32 = 3;

fn outlets_item(item_id: &str, depot_id: &str, outlet_count: u32) -> pb::AssessFleetRequest {
    pb::AssessFleetRequest {
        item_id: item_id.to_string(),
        item: Some(pb::assess_fleet_request::Item::DepotOutlets(
            pb::DepotOutlets {
                depot_id: depot_id.to_string(),
                outlet_count,
                circuit_limit_kw: None,
                time_zone: String::new(),
            },
        )),
    }
}

#[tokio::test]
async fn plan_follows_every_vehicle_and_fits_the_outlets() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut items = vec![
        zone_item("z", "depot-east"),
        outlets_item("outlets", "depot-east", OUTLETS),
        outlets_item("bad-outlets", "", 2),
    ];
    let mut depot_vehicles = HashSet::new();
    for i in 0..12 {
        let vehicle_id = format!("truck-{i:02}");
        let mut night = sample_night_in_zone(&vehicle_id, "depot-east");
        night.depot_id = "depot-east".to_string();
        let vehicle = night.vehicle.as_mut().expect("vehicle");
        // Arctic fuel, so that the engine, not the fuel, decides the start.
        vehicle.fuel.as_mut().expect("fuel").grade = pb::FuelGrade::En590Arctic1 as i32;
        vehicle.aids = Some(pb::StartAids {
            block_heater_w: Some(1_000.0),
            ..Default::default()
        });
        // Some vehicles parked cold since the forecast start, some still warm.
        if i % 2 == 0 {
            night.telemetry = None;
        }
        depot_vehicles.insert(vehicle_id.clone());
        items.push(vehicle_item(&format!("v{i}"), night));
    }
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();

    let mut vehicles_answered = 0;
    let mut plans = Vec::new();
    while let Some(r) = results.next().await {
        let r = r?;
        match r.outcome {
            Some(Outcome::Assessment(a)) => {
                assert!(plans.is_empty(), "a vehicle result came after the plan");
                assert_eq!(a.depot_id, "depot-east");
                vehicles_answered += 1;
            }
            Some(Outcome::PlugInPlan(plan)) => plans.push((r.item_id, plan)),
            Some(Outcome::Error(status)) => {
                assert_eq!(r.item_id, "bad-outlets");
                assert_eq!(Code::from(status.code), Code::InvalidArgument);
                assert!(
                    violated_fields_in(&status).contains(&"depot_outlets.depot_id".to_string())
                );
            }
            None => panic!("an answer without an outcome"),
        }
    }
    assert_eq!(vehicles_answered, 12);
    assert_eq!(
        plans.len(),
        1,
        "one plan for the one depot that sent valid outlets"
    );
    let (item_id, plan) = &plans[0];
    assert_eq!(item_id, "outlets", "the plan answers the outlets item");
    assert_eq!(plan.depot_id, "depot-east");
    assert!(
        plan.plug_ins.len() <= OUTLETS as usize,
        "{} plug-ins for {OUTLETS} outlets",
        plan.plug_ins.len()
    );
    assert!(
        !plan.plug_ins.is_empty(),
        "heaters help cold-soaked engines on arctic fuel: {plan:?}"
    );
    let chosen: HashSet<_> = plan.plug_ins.iter().map(|p| p.vehicle_id.clone()).collect();
    assert_eq!(
        chosen.len(),
        plan.plug_ins.len(),
        "a vehicle gets at most one outlet"
    );
    assert!(
        chosen.is_subset(&depot_vehicles),
        "only the depot's vehicles: {chosen:?}"
    );
    for p in &plan.plug_ins {
        assert!(p.plug_in_at.is_some() && p.heater_w > 0.0, "{p:?}");
        assert!(
            p.no_start_with_pct <= p.no_start_without_pct,
            "the heater does not hurt: {p:?}"
        );
    }
    assert!(plan.expected_no_starts_with <= plan.expected_no_starts_without + 1e-9);
    assert!(
        plan.expected_no_starts_with <= plan.expected_no_starts_coldest_first + 1e-9,
        "the plan is at least as good as coldest-first: {plan:?}"
    );
    server.shutdown().await
}

#[tokio::test]
async fn a_stream_without_outlets_gets_no_plan() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night_in_zone("truck-x", "depot-east");
    night.depot_id = "depot-east".to_string();
    let items = vec![zone_item("z", "depot-east"), vehicle_item("v", night)];
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let mut outcomes = Vec::new();
    while let Some(r) = results.next().await {
        outcomes.push(r?.outcome);
    }
    assert_eq!(outcomes.len(), 1);
    assert!(matches!(outcomes[0], Some(Outcome::Assessment(_))));
    server.shutdown().await
}

/// The depot's time zone: vehicles sent after its outlets without a zone of their own write
/// their times in it, a vehicle's own zone wins, the plan's text is local, and an unknown
/// depot zone is refused at its field.
#[tokio::test]
async fn the_depot_zone_reaches_its_vehicles_and_its_plan() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut outlets = outlets_item("outlets", "depot-east", OUTLETS);
    let mut bad = outlets_item("bad-zone", "depot-west", 1);
    for (item, zone) in [(&mut outlets, "America/Denver"), (&mut bad, "Denver")] {
        if let Some(pb::assess_fleet_request::Item::DepotOutlets(d)) = item.item.as_mut() {
            d.time_zone = zone.to_string();
        }
    }
    let mut items = vec![zone_item("z", "depot-east"), outlets, bad];
    for i in 0..4 {
        let mut night = sample_night_in_zone(&format!("truck-{i}"), "depot-east");
        night.depot_id = "depot-east".to_string();
        night.telemetry = None;
        let vehicle = night.vehicle.as_mut().expect("vehicle");
        vehicle.fuel.as_mut().expect("fuel").grade = pb::FuelGrade::En590Arctic1 as i32;
        vehicle.aids = Some(pb::StartAids {
            block_heater_w: Some(1_000.0),
            ..Default::default()
        });
        if i == 3 {
            night.time_zone = "Europe/Oslo".to_string();
        }
        items.push(vehicle_item(&format!("v{i}"), night));
    }
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let mut zones = Vec::new();
    let mut plan = None;
    while let Some(r) = results.next().await {
        let r = r?;
        match r.outcome {
            Some(Outcome::Assessment(a)) => {
                assert!(a.assumed.iter().all(|x| x.field != "time_zone"));
                // In January Denver is UTC-7 and Oslo UTC+1.
                let offset = if a.time_zone == "Europe/Oslo" {
                    "+01:00."
                } else {
                    "-07:00."
                };
                for action in a.actions.iter().filter(|x| x.act_by.is_some()) {
                    assert!(action.summary.ends_with(offset), "{}", action.summary);
                }
                zones.push(a.time_zone);
            }
            Some(Outcome::PlugInPlan(p)) => plan = Some(p),
            Some(Outcome::Error(status)) => {
                assert_eq!(r.item_id, "bad-zone");
                assert_eq!(
                    violated_fields_in(&status),
                    ["depot_outlets.time_zone".to_string()]
                );
            }
            None => panic!("an answer without an outcome"),
        }
    }
    zones.sort();
    assert_eq!(
        zones,
        [
            "America/Denver",
            "America/Denver",
            "America/Denver",
            "Europe/Oslo"
        ]
    );
    let plan = plan.expect("a plan");
    assert_eq!(plan.time_zone, "America/Denver");
    assert!(!plan.plug_ins.is_empty());
    for p in &plan.plug_ins {
        assert!(
            p.summary.starts_with("Plug in by 2025-01-1")
                && p.summary.contains("-07:00: no-start risk"),
            "{}",
            p.summary
        );
    }
    server.shutdown().await
}

/// A stream of several depots: each depot's plan follows every result of its own vehicles, and
/// the same stream sent twice gives the same plans (planning in parallel changes no answer).
#[tokio::test]
async fn each_depot_plan_follows_its_own_vehicles_and_repeats_exactly() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let depots = ["depot-a", "depot-b", "depot-c"];
    let mut items = vec![zone_item("z", "depot-east")];
    for (d, depot) in depots.iter().enumerate() {
        items.push(outlets_item(&format!("outlets-{d}"), depot, 2));
    }
    for i in 0..12 {
        let depot = depots[i % depots.len()];
        let vehicle_id = format!("truck-{i:02}");
        let mut night = sample_night_in_zone(&vehicle_id, "depot-east");
        night.depot_id = depot.to_string();
        let vehicle = night.vehicle.as_mut().expect("vehicle");
        vehicle.fuel.as_mut().expect("fuel").grade = pb::FuelGrade::En590Arctic1 as i32;
        vehicle.aids = Some(pb::StartAids {
            block_heater_w: Some(1_000.0),
            ..Default::default()
        });
        if i % 2 == 0 {
            night.telemetry = None;
        }
        items.push(vehicle_item(&format!("v{i}"), night));
    }
    let mut runs = Vec::new();
    for _ in 0..2 {
        let mut results = server
            .client()
            .assess_fleet(tokio_stream::iter(items.clone()))
            .await?
            .into_inner();
        let mut planned = HashSet::new();
        let mut plans = std::collections::BTreeMap::new();
        while let Some(r) = results.next().await {
            let r = r?;
            match r.outcome {
                Some(Outcome::Assessment(a)) => {
                    assert!(
                        !planned.contains(&a.depot_id),
                        "a vehicle of {} came after its depot's plan",
                        a.depot_id
                    );
                }
                Some(Outcome::PlugInPlan(plan)) => {
                    planned.insert(plan.depot_id.clone());
                    plans.insert(plan.depot_id.clone(), (r.item_id, plan));
                }
                other => panic!("unexpected outcome {other:?}"),
            }
        }
        assert_eq!(plans.len(), depots.len(), "one plan per depot");
        for (depot, (item_id, plan)) in &plans {
            let d = depots
                .iter()
                .position(|x| x == depot)
                .expect("a known depot");
            assert_eq!(item_id, &format!("outlets-{d}"));
            assert!(plan.plug_ins.len() <= 2);
        }
        runs.push(plans);
    }
    assert_eq!(runs[0], runs[1], "the same stream, the same plans");
    server.shutdown().await
}
