//! Every fleet result can be mapped back to what was sent: a vehicle item needs an item id, a
//! duplicate item id is refused for that item alone, planned plug-ins carry the item id (also
//! when vehicle ids repeat); and after a broken stream the SDK's fleet helper sends only the
//! unanswered vehicles again, on the next endpoint, and says so.

use std::collections::HashMap;

use startmargin_e2e::{TestServer, sample_night_in_zone, vehicle_item, violated_fields_in};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_sdk::{Client, FleetItem, FleetOutcome, FleetProgress};
use tokio_stream::StreamExt as _;

fn heated(vehicle_id: &str) -> pb::VehicleNight {
    let mut night = sample_night_in_zone(vehicle_id, "yard");
    night.depot_id = "north".to_string();
    // Parked cold since the forecast start, on arctic fuel: the engine decides, a heater helps.
    night.telemetry = None;
    let vehicle = night.vehicle.as_mut().expect("vehicle");
    vehicle.fuel.as_mut().expect("fuel").grade = pb::FuelGrade::En590Arctic1 as i32;
    vehicle.aids = Some(pb::StartAids {
        block_heater_w: Some(1000.0),
        ..Default::default()
    });
    night
}

#[tokio::test]
async fn duplicate_and_missing_item_ids_are_refused_per_item() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let items = vec![
        startmargin_e2e::zone_item("z", "yard"),
        vehicle_item("a", heated("same-id")),
        vehicle_item("a", heated("other")),
        vehicle_item("", heated("third")),
        vehicle_item("b", heated("same-id")),
        pb::AssessFleetRequest {
            item_id: "depot".to_string(),
            item: Some(pb::assess_fleet_request::Item::DepotOutlets(
                pb::DepotOutlets {
                    depot_id: "north".to_string(),
                    outlet_count: 5,
                    circuit_limit_kw: None,
                    time_zone: String::new(),
                },
            )),
        },
    ];
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let mut assessed = Vec::new();
    let mut refused = Vec::new();
    let mut plan = None;
    while let Some(r) = results.next().await {
        let r = r?;
        match r.outcome {
            Some(Outcome::Assessment(_)) => assessed.push(r.item_id),
            Some(Outcome::Error(e)) => refused.push((r.item_id, violated_fields_in(&e))),
            Some(Outcome::PlugInPlan(p)) => plan = Some(p),
            None => panic!("a result without an outcome"),
        }
    }
    assessed.sort();
    assert_eq!(
        assessed,
        ["a", "b"],
        "the first \"a\" and \"b\" are assessed"
    );
    refused.sort();
    assert_eq!(
        refused,
        [
            (String::new(), vec!["item_id".to_string()]),
            ("a".to_string(), vec!["item_id".to_string()]),
        ]
    );
    let plan = plan.expect("the depot's plan");
    assert!(!plan.plug_ins.is_empty(), "the cold night plugs someone in");
    for p in &plan.plug_ins {
        assert!(
            ["a", "b"].contains(&p.item_id.as_str()),
            "plug-in {p:?} names its item"
        );
        assert_eq!(p.vehicle_id, "same-id");
    }
    server.shutdown().await
}

#[tokio::test(flavor = "multi_thread", worker_threads = 4)]
async fn the_sdk_resends_only_unanswered_vehicles_after_a_broken_stream() -> anyhow::Result<()> {
    let first = TestServer::start().await?;
    let second = TestServer::start().await?;
    let client = Client::builder([
        format!("http://{}", first.server.addr),
        format!("http://{}", second.server.addr),
    ])
    .build()
    .await?;
    let forecast = startmargin_sdk::Forecast::from_pb_unchecked(startmargin_e2e::sample_forecast());
    let total = 120;
    let mut items = vec![FleetItem::zone_forecast("yard", forecast)];
    for i in 0..total {
        let night = startmargin_sdk::VehicleNight::from_pb_unchecked(sample_night_in_zone(
            &format!("unit-{i:03}"),
            "yard",
        ));
        items.push(FleetItem::vehicle(night));
    }
    let mut run = client.assess_fleet_resuming(items, 2);
    let mut answered: HashMap<String, usize> = HashMap::new();
    let mut notes = Vec::new();
    let mut before_break = 0;
    let mut stopper = Some(first);
    while let Some(event) = run.next().await {
        match event? {
            FleetProgress::Result(r) => {
                assert!(matches!(r.outcome, Ok(FleetOutcome::Assessment(_))));
                *answered.entry(r.item_id).or_default() += 1;
                if answered.len() == 20
                    && let Some(server) = stopper.take()
                {
                    // The first server goes away mid-run: its stream ends UNAVAILABLE.
                    before_break = answered.len();
                    tokio::spawn(server.shutdown());
                }
            }
            FleetProgress::Resending {
                attempt,
                unanswered,
                for_plans,
                ..
            } => notes.push((attempt, unanswered, for_plans, answered.len())),
        }
    }
    assert_eq!(answered.len(), total, "every vehicle answered");
    assert!(
        answered.values().all(|&n| n == 1),
        "no vehicle delivered twice"
    );
    assert_eq!(notes.len(), 1, "one reconnect: {notes:?}");
    let (attempt, unanswered, for_plans, answered_then) = notes[0];
    assert_eq!(attempt, 1);
    assert_eq!(for_plans, 0, "no depot: nothing re-sent for a plan");
    assert!(answered_then >= before_break);
    assert_eq!(
        unanswered,
        total - answered_then,
        "exactly the unanswered vehicles are sent again"
    );
    second.shutdown().await
}
