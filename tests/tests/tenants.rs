//! Tenant isolation: state kept across messages lives in one stream and is reached only through
//! that stream, so a valid token of another tenant cannot read a stream's vehicles. Tenant
//! "depot-north" sends a zone forecast and its vehicles on a fleet stream; tenant "depot-south",
//! with its own valid token, opens a stream at the same time and names the same zone: its vehicle
//! is refused for lack of a forecast, and none of its answers mention a vehicle of the other
//! tenant. The stateless RPCs (AssessVehicle, DescribeModel) keep no data between calls.

use startmargin_e2e::{
    TestServer, auth_config, sample_night_in_zone, vehicle_item, with_token, zone_item,
};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use tokio::sync::mpsc;
use tokio_stream::StreamExt as _;
use tokio_stream::wrappers::ReceiverStream;

const NORTH_TOKEN: &str = "north-depot-1d5be0c4a7f2e963";
const SOUTH_TOKEN: &str = "south-depot-8c2a47e1f05b9d36";
const ZONE: &str = "ridge-yard";

#[tokio::test]
async fn another_tenant_cannot_read_a_streams_vehicles() {
    let config = auth_config(
        "tenants",
        &[("depot-north", NORTH_TOKEN), ("depot-south", SOUTH_TOKEN)],
    );
    let t = TestServer::start_with(config).await.expect("server");

    // North keeps its stream open: its zone forecast and vehicles are held by the server.
    let (north_tx, north_rx) = mpsc::channel(16);
    let mut north = t
        .client()
        .assess_fleet(with_token(ReceiverStream::new(north_rx), NORTH_TOKEN))
        .await
        .expect("north's stream opens")
        .into_inner();
    north_tx
        .send(zone_item("z", ZONE))
        .await
        .expect("send zone");
    for i in 0..3 {
        north_tx
            .send(vehicle_item(
                &format!("n-{i}"),
                sample_night_in_zone(&format!("north-truck-{i}"), ZONE),
            ))
            .await
            .expect("send vehicle");
    }
    let mut north_vehicles = Vec::new();
    while north_vehicles.len() < 3 {
        let r = north
            .next()
            .await
            .expect("north's results come")
            .expect("north's stream is fine");
        if let Some(Outcome::Assessment(a)) = r.outcome {
            north_vehicles.push(a.vehicle_id);
        }
    }
    north_vehicles.sort();
    assert_eq!(
        north_vehicles,
        ["north-truck-0", "north-truck-1", "north-truck-2"]
    );

    // South, with a valid token, names north's zone on its own stream while north's is open.
    let south_items = vec![vehicle_item(
        "s-0",
        sample_night_in_zone("south-van-0", ZONE),
    )];
    let south: Vec<pb::AssessFleetResponse> = t
        .client()
        .assess_fleet(with_token(tokio_stream::iter(south_items), SOUTH_TOKEN))
        .await
        .expect("south's stream opens")
        .into_inner()
        .collect::<Result<_, _>>()
        .await
        .expect("south's stream ends cleanly");
    assert_eq!(south.len(), 1, "{south:?}");
    let answer = &south[0];
    assert_eq!(answer.item_id, "s-0");
    let Some(Outcome::Error(status)) = &answer.outcome else {
        panic!("south's vehicle must not use north's zone forecast: {answer:?}")
    };
    assert_eq!(
        status.code,
        tonic::Code::InvalidArgument as i32,
        "{status:?}"
    );
    let text = format!("{south:?}");
    assert!(
        !text.contains("north-truck"),
        "south sees a north vehicle: {text}"
    );

    // North's stream is unaffected and still works after south's attempt.
    north_tx
        .send(vehicle_item(
            "n-3",
            sample_night_in_zone("north-truck-3", ZONE),
        ))
        .await
        .expect("send vehicle");
    drop(north_tx);
    let rest: Vec<pb::AssessFleetResponse> = north
        .collect::<Result<_, _>>()
        .await
        .expect("north's stream ends cleanly");
    assert!(
        rest.iter().any(|r| matches!(&r.outcome,
            Some(Outcome::Assessment(a)) if a.vehicle_id == "north-truck-3")),
        "{rest:?}"
    );

    t.shutdown().await.expect("drains");
}
