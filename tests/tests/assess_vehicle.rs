//! AssessVehicle through real gRPC: one vehicle gets a complete, self-consistent assessment.

use startmargin_e2e::{TestServer, assert_budget_sums, sample_night};
use startmargin_proto::v1 as pb;

#[tokio::test]
async fn one_vehicle_gets_a_consistent_assessment() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let night = sample_night("depot-north-07");
    let response = server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest {
            night: Some(night.clone()),
        })
        .await?
        .into_inner();
    let a = response.assessment.expect("an assessment");

    assert_eq!(a.vehicle_id, "depot-north-07");
    assert!(
        !a.model_version.is_empty(),
        "the answer names the model version"
    );
    assert_eq!(
        a.departure_time, night.departure_time,
        "the departure assessed is the one asked"
    );
    assert!(a.start_margin_k.is_finite(), "margin {}", a.start_margin_k);
    assert_ne!(
        a.limiting_factor,
        pb::LimitingFactor::Unspecified as i32,
        "a limiting factor is named"
    );
    assert!(
        pb::LimitingFactor::try_from(a.limiting_factor).is_ok(),
        "a known limiting factor"
    );
    assert!(
        !a.explanation.is_empty(),
        "the limiting factor is explained"
    );
    assert!(
        a.cranking.is_some() && a.soaked.is_some() && a.gel.is_some(),
        "cranking, soak and fuel outlook"
    );
    assert_budget_sums(&a, 1e-6);
    let b = a.budget.as_ref().expect("budget");
    assert!(
        b.ideal_end_c > b.intake_c,
        "compression heats the charge: {} -> {}",
        b.intake_c,
        b.ideal_end_c
    );
    assert!(a.margin_path.is_empty(), "no margin path unless asked for");

    server.shutdown().await
}

#[tokio::test]
async fn the_same_request_gives_the_same_answer() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut client = server.client();
    let request = pb::AssessVehicleRequest {
        night: Some(sample_night("depot-north-08")),
    };
    let first = client.assess_vehicle(request.clone()).await?.into_inner();
    let second = client.assess_vehicle(request).await?.into_inner();
    assert_eq!(
        first, second,
        "answers are deterministic, so they can be cached and audited"
    );
    server.shutdown().await
}

#[tokio::test]
async fn margin_path_is_given_when_asked_for() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut night = sample_night("depot-north-09");
    night.options = Some(pb::AssessmentOptions {
        include_margin_path: true,
        ..Default::default()
    });
    let a = server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await?
        .into_inner()
        .assessment
        .expect("an assessment");
    assert!(!a.margin_path.is_empty(), "a margin path was asked for");
    let times: Vec<i64> = a
        .margin_path
        .iter()
        .map(|p| p.at.as_ref().expect("time").seconds)
        .collect();
    assert!(
        times.windows(2).all(|w| w[0] < w[1]),
        "the path is in time order: {times:?}"
    );
    assert!(
        a.margin_path.iter().all(|p| p.margin_k.is_finite()),
        "every margin is finite"
    );
    assert_budget_sums(&a, 1e-6);
    server.shutdown().await
}
