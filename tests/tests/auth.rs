//! Bearer-token authentication through real gRPC: no token, a malformed header or a wrong token
//! get UNAUTHENTICATED with a message that never repeats the token; a valid token is served; the
//! health protocol and reflection stay open for probes without a token.

use startmargin_e2e::{SERVICE_NAME, TestServer, auth_config, sample_night, with_token};
use startmargin_proto::v1 as pb;
use tonic::Code;
use tonic_health::pb::HealthCheckRequest;

const NORTH_TOKEN: &str = "north-depot-7f3a9c1e55d04b2a";
const SOUTH_TOKEN: &str = "south-depot-0b8e6d2f91c7a443";

fn config() -> startmargin_service::Config {
    auth_config(
        "auth",
        &[("depot-north", NORTH_TOKEN), ("depot-south", SOUTH_TOKEN)],
    )
}

#[tokio::test]
async fn missing_malformed_or_wrong_tokens_are_unauthenticated() {
    let t = TestServer::start_with(config()).await.expect("server");
    let mut client = t.client();

    let missing = client
        .describe_model(pb::DescribeModelRequest {})
        .await
        .expect_err("no token");
    assert_eq!(missing.code(), Code::Unauthenticated, "{missing:?}");

    let wrong_guess = "north-depot-7f3a9c1e55d04b2b";
    let wrong = client
        .describe_model(with_token(pb::DescribeModelRequest {}, wrong_guess))
        .await
        .expect_err("wrong token");
    assert_eq!(wrong.code(), Code::Unauthenticated);
    assert!(
        !wrong.message().contains(wrong_guess),
        "{}",
        wrong.message()
    );
    assert!(
        !wrong.message().contains("north-depot"),
        "{}",
        wrong.message()
    );

    let mut basic = tonic::Request::new(pb::AssessVehicleRequest {
        night: Some(sample_night("truck-0001")),
    });
    basic.metadata_mut().insert(
        "authorization",
        format!("Basic {NORTH_TOKEN}").parse().expect("header"),
    );
    let basic = client.assess_vehicle(basic).await.expect_err("not bearer");
    assert_eq!(basic.code(), Code::Unauthenticated);

    // The same applies to streams: the stream is refused before any item is read.
    let stream = client
        .assess_fleet(tokio_stream::iter(Vec::<pb::AssessFleetRequest>::new()))
        .await
        .expect_err("stream without token");
    assert_eq!(stream.code(), Code::Unauthenticated);

    t.shutdown().await.expect("drains");
}

#[tokio::test]
async fn a_valid_token_is_served_and_probes_need_none() {
    let t = TestServer::start_with(config()).await.expect("server");
    let mut client = t.client();

    for token in [NORTH_TOKEN, SOUTH_TOKEN] {
        let response = client
            .assess_vehicle(with_token(
                pb::AssessVehicleRequest {
                    night: Some(sample_night("truck-0001")),
                },
                token,
            ))
            .await
            .expect("served with a valid token")
            .into_inner();
        let assessment = response.assessment.expect("an assessment");
        assert_eq!(assessment.vehicle_id, "truck-0001");
    }

    let health = t
        .health()
        .check(HealthCheckRequest {
            service: SERVICE_NAME.to_string(),
        })
        .await
        .expect("health is open without a token")
        .into_inner();
    assert_eq!(
        health.status,
        tonic_health::pb::health_check_response::ServingStatus::Serving as i32
    );

    t.shutdown().await.expect("drains");
}

#[tokio::test]
async fn a_server_with_a_bad_token_file_does_not_start() {
    let config = auth_config("short", &[("depot-north", "too-short")]);
    let e = startmargin_service::spawn(config)
        .await
        .expect_err("a short token is refused at start");
    let message = format!("{e:#}");
    assert!(message.contains("shorter than 16"), "{message}");
    assert!(!message.contains("too-short"), "{message}");
}
