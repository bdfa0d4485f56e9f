//! AssessFleet through real gRPC: 1,000 vehicles sharing one zone forecast, with bad items mixed
//! in. Each bad item gets its own error (right code, field path) and never ends the stream;
//! every good vehicle gets an assessment; every item id is answered exactly once.

use std::collections::HashMap;

use startmargin_e2e::{
    TestServer, assert_budget_sums, at_hour, sample_night_in_zone, vehicle_item,
    violated_fields_in, zone_item,
};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use tokio_stream::StreamExt as _;
use tonic::Code;

const VEHICLES: usize = 1_000;

/// What the answer to an item must be.
#[derive(Debug, Clone)]
enum Expect {
    Assessment {
        vehicle_id: String,
    },
    Error {
        code: Code,
        field: Option<&'static str>,
    },
}

/// Every 37th vehicle is broken in one of several ways; the rest are valid.
fn fleet() -> (Vec<pb::AssessFleetRequest>, HashMap<String, Expect>) {
    let mut items = vec![zone_item("zone-0", "depot-east")];
    let mut expect = HashMap::new();
    for i in 0..VEHICLES {
        let item_id = format!("item-{i}");
        let vehicle_id = format!("truck-{i:04}");
        let mut night = sample_night_in_zone(&vehicle_id, "depot-east");
        let e = if i % 37 != 5 {
            Expect::Assessment {
                vehicle_id: vehicle_id.clone(),
            }
        } else {
            match (i / 37) % 5 {
                0 => {
                    night
                        .vehicle
                        .as_mut()
                        .and_then(|v| v.battery.as_mut())
                        .expect("battery")
                        .capacity_cca = f64::NAN;
                    Expect::Error {
                        code: Code::InvalidArgument,
                        field: Some("vehicle.vehicle.battery.capacity_cca"),
                    }
                }
                1 => {
                    night.forecast_zone_id = "depot-nowhere".to_string();
                    Expect::Error {
                        code: Code::InvalidArgument,
                        field: Some("vehicle.forecast_zone_id"),
                    }
                }
                2 => {
                    night.departure_time = None;
                    Expect::Error {
                        code: Code::InvalidArgument,
                        field: Some("vehicle.departure_time"),
                    }
                }
                3 => {
                    // The forecast covers 12 h; a departure 30 h out cannot be assessed.
                    night.departure_time = Some(at_hour(30.0));
                    night.telemetry = None;
                    Expect::Error {
                        code: Code::FailedPrecondition,
                        field: None,
                    }
                }
                _ => {
                    night
                        .vehicle
                        .as_mut()
                        .and_then(|v| v.engine.as_mut())
                        .expect("engine")
                        .archetype_id = "no-such-engine".to_string();
                    Expect::Error {
                        code: Code::InvalidArgument,
                        field: Some("vehicle.vehicle.engine.archetype_id"),
                    }
                }
            }
        };
        items.push(vehicle_item(&item_id, night));
        expect.insert(item_id, e);
        if i == 500 {
            // Mid-stream: an item with nothing in it, and a zone forecast with no id.
            items.push(pb::AssessFleetRequest {
                item_id: "empty".to_string(),
                item: None,
            });
            expect.insert(
                "empty".to_string(),
                Expect::Error {
                    code: Code::InvalidArgument,
                    field: Some("item"),
                },
            );
            items.push(zone_item("bad-zone", ""));
            expect.insert(
                "bad-zone".to_string(),
                Expect::Error {
                    code: Code::InvalidArgument,
                    field: Some("zone_forecast.zone_id"),
                },
            );
        }
    }
    (items, expect)
}

#[tokio::test]
async fn thousand_vehicles_with_bad_ones_mixed_in() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let (items, expect) = fleet();
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();

    let mut seen: HashMap<String, pb::AssessFleetResponse> = HashMap::new();
    while let Some(r) = results.next().await {
        let r = r?; // the stream itself never fails because of a bad item
        let previous = seen.insert(r.item_id.clone(), r);
        assert!(
            previous.is_none(),
            "item {} answered twice",
            previous.map(|p| p.item_id).unwrap_or_default()
        );
    }

    let mut assessed = 0;
    let mut refused = 0;
    for (item_id, e) in &expect {
        let r = seen
            .get(item_id)
            .unwrap_or_else(|| panic!("item {item_id} got no answer"));
        match (e, r.outcome.as_ref()) {
            (Expect::Assessment { vehicle_id }, Some(Outcome::Assessment(a))) => {
                assert_eq!(&r.vehicle_id, vehicle_id);
                assert_eq!(&a.vehicle_id, vehicle_id);
                assert!(a.start_margin_k.is_finite());
                assert_budget_sums(a, 1e-6);
                assessed += 1;
            }
            (Expect::Error { code, field }, Some(Outcome::Error(status))) => {
                assert_eq!(Code::from(status.code), *code, "item {item_id}: {status:?}");
                assert!(!status.message.is_empty(), "item {item_id}: an explanation");
                if let Some(field) = field {
                    let fields = violated_fields_in(status);
                    assert!(
                        fields.iter().any(|f| f == field),
                        "item {item_id}: {field} not in {fields:?}"
                    );
                }
                refused += 1;
            }
            (e, outcome) => panic!("item {item_id}: expected {e:?}, got {outcome:?}"),
        }
    }
    assert_eq!(
        seen.len(),
        expect.len(),
        "no answer to an item that was not sent (the good zone item gets none)"
    );
    assert_eq!(assessed + refused, expect.len());
    assert!(
        assessed > 950 && refused > 20,
        "{assessed} assessed, {refused} refused"
    );

    server.shutdown().await
}

#[tokio::test]
async fn vehicles_sharing_a_zone_get_the_answer_of_an_inline_forecast() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut client = server.client();
    let unary = client
        .assess_vehicle(pb::AssessVehicleRequest {
            night: Some(startmargin_e2e::sample_night("truck-a")),
        })
        .await?
        .into_inner()
        .assessment
        .expect("an assessment");

    let items = vec![
        zone_item("z", "depot-east"),
        vehicle_item("a", sample_night_in_zone("truck-a", "depot-east")),
        vehicle_item("b", sample_night_in_zone("truck-a", "depot-east")),
    ];
    let mut results = client
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let mut n = 0;
    while let Some(r) = results.next().await {
        let Some(Outcome::Assessment(a)) = r?.outcome else {
            panic!("expected an assessment")
        };
        assert_eq!(
            a, unary,
            "a zone forecast gives the same answer as the same forecast inline"
        );
        n += 1;
    }
    assert_eq!(n, 2);
    server.shutdown().await
}

#[tokio::test]
async fn a_later_zone_forecast_replaces_the_earlier_one() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut warmer = zone_item("z2", "depot-east");
    if let Some(pb::assess_fleet_request::Item::ZoneForecast(z)) = warmer.item.as_mut() {
        for p in &mut z.forecast.as_mut().expect("forecast").points {
            p.air_c += 15.0;
        }
    }
    let items = vec![
        zone_item("z1", "depot-east"),
        vehicle_item("cold", sample_night_in_zone("truck-c", "depot-east")),
        warmer,
        vehicle_item("warm", sample_night_in_zone("truck-w", "depot-east")),
    ];
    let mut results = server
        .client()
        .assess_fleet(tokio_stream::iter(items))
        .await?
        .into_inner();
    let mut by_item = HashMap::new();
    while let Some(r) = results.next().await {
        let r = r?;
        let Some(Outcome::Assessment(a)) = r.outcome else {
            panic!("expected an assessment")
        };
        by_item.insert(r.item_id, a);
    }
    let cold = &by_item["cold"].soaked.as_ref().expect("soaked").air_c;
    let warm = &by_item["warm"].soaked.as_ref().expect("soaked").air_c;
    assert!(
        (warm - cold - 15.0).abs() < 1e-6,
        "air at departure {cold} then {warm}"
    );
    server.shutdown().await
}
