//! The fleet stream: one result per vehicle; a bad vehicle gets its own error with field
//! violations and the stream goes on.

mod support;

use startmargin_sdk::{Client, Error, FleetItem, FleetOutcome, Forecast, VehicleNight, api};
use support::Script;
use tokio_stream::StreamExt;
use tonic::Code;

/// A night whose battery capacity is zero, sent unchecked so the server rejects it.
fn bad_night(id: &str) -> VehicleNight {
    let mut pb = support::night(id).into_pb();
    pb.vehicle.as_mut().unwrap().battery = Some(api::BatterySpec::default());
    VehicleNight::from_pb_unchecked(pb)
}

#[tokio::test]
async fn a_bad_vehicle_gets_its_own_error_and_the_stream_goes_on() {
    let server = support::start(Script::FailThenOk(Code::Ok, 0)).await;
    let c = Client::builder([server.uri()]).build().await.unwrap();
    let zone = Forecast::hourly(std::time::UNIX_EPOCH)
        .point(0.0, 1.0, 0.0)
        .build()
        .unwrap();
    let items = vec![
        FleetItem::zone_forecast("yard", zone),
        FleetItem::vehicle(support::night("good-1")),
        FleetItem::vehicle(bad_night("bad-2")).with_item_id("row-2"),
        FleetItem::vehicle(support::night("good-3")),
    ];
    let results: Vec<_> = c.assess_fleet(tokio_stream::iter(items)).collect().await;
    assert_eq!(
        results.len(),
        3,
        "one result per vehicle, none for the zone forecast"
    );
    let results: Vec<_> = results.into_iter().map(Result::unwrap).collect();

    assert_eq!(results[0].item_id, "good-1");
    match &results[0].outcome {
        Ok(FleetOutcome::Assessment(a)) => assert_eq!(a.vehicle_id, "good-1"),
        other => panic!("expected an assessment, got {other:?}"),
    }

    assert_eq!(
        (results[1].item_id.as_str(), results[1].vehicle_id.as_str()),
        ("row-2", "bad-2")
    );
    match &results[1].outcome {
        Err(Error::InvalidArgument { violations, .. }) => {
            assert_eq!(violations[0].field, "vehicle.battery.capacity_cca")
        }
        other => panic!("expected a per-item InvalidArgument, got {other:?}"),
    }

    assert!(results[2].outcome.is_ok());
}

#[tokio::test]
async fn depot_outlets_yield_a_plug_in_plan_after_the_vehicles() {
    let server = support::start(Script::FailThenOk(Code::Ok, 0)).await;
    let c = Client::builder([server.uri()]).build().await.unwrap();
    let items = vec![
        FleetItem::depot_outlets("yard", 2, Some(3.0)),
        FleetItem::vehicle(support::night("v1").depot("yard")),
        FleetItem::vehicle(support::night("v2").depot("yard")),
    ];
    let results: Vec<_> = c.assess_fleet(tokio_stream::iter(items)).collect().await;
    assert_eq!(results.len(), 3);
    let last = results.into_iter().last().unwrap().unwrap();
    assert_eq!(last.item_id, "depot:yard");
    match last.outcome {
        Ok(FleetOutcome::PlugInPlan(p)) => {
            assert_eq!(p.depot_id, "yard");
            assert_eq!(
                p.plug_ins.len(),
                2,
                "the mock plans every vehicle of the depot"
            );
        }
        other => panic!("expected a plug-in plan, got {other:?}"),
    }
}

#[tokio::test]
async fn a_refused_stream_yields_one_error_then_ends() {
    let server = support::start(Script::Always(Code::ResourceExhausted)).await;
    let c = Client::builder([server.uri()]).build().await.unwrap();
    let mut results = c.assess_fleet(tokio_stream::iter([FleetItem::vehicle(support::night(
        "a",
    ))]));
    assert!(matches!(
        results.next().await,
        Some(Err(Error::ResourceExhausted(_)))
    ));
    assert!(results.next().await.is_none());
}
