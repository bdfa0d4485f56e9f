//! The standard `grpc.health.v1.Health` service: SERVING for the server and the API service.

use startmargin_e2e::{SERVICE_NAME, TestServer};
use tokio_stream::StreamExt as _;
use tonic::Code;
use tonic_health::pb::HealthCheckRequest;
use tonic_health::pb::health_check_response::ServingStatus;

#[tokio::test]
async fn server_and_api_service_are_serving() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut health = server.health();
    for service in ["", SERVICE_NAME] {
        let r = health
            .check(HealthCheckRequest {
                service: service.to_string(),
            })
            .await?
            .into_inner();
        assert_eq!(
            r.status,
            ServingStatus::Serving as i32,
            "service {service:?}"
        );
    }
    assert_eq!(SERVICE_NAME, "startmargin.v1.StartMarginService");
    server.shutdown().await
}

#[tokio::test]
async fn unknown_service_is_not_found() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let e = server
        .health()
        .check(HealthCheckRequest {
            service: "no.such.Service".to_string(),
        })
        .await
        .expect_err("unknown service");
    assert_eq!(e.code(), Code::NotFound);
    server.shutdown().await
}

#[tokio::test]
async fn watch_reports_serving_first() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut updates = server
        .health()
        .watch(HealthCheckRequest {
            service: SERVICE_NAME.to_string(),
        })
        .await?
        .into_inner();
    let first = updates.next().await.expect("a first update")?;
    assert_eq!(first.status, ServingStatus::Serving as i32);
    drop(updates);
    server.shutdown().await
}
