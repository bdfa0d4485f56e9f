//! Server reflection (v1, and v1alpha for older tools): generic gRPC tools can list the services
//! and fetch the API's descriptors with no extra files.

use prost::Message as _;
use prost_types::FileDescriptorProto;
use startmargin_e2e::{SERVICE_NAME, TestServer};
use tokio_stream::StreamExt as _;
use tonic_reflection::pb::v1::server_reflection_client::ServerReflectionClient;
use tonic_reflection::pb::v1::server_reflection_request::MessageRequest;
use tonic_reflection::pb::v1::server_reflection_response::MessageResponse;
use tonic_reflection::pb::v1::{ServerReflectionRequest, ServerReflectionResponse};

async fn ask(server: &TestServer, request: MessageRequest) -> anyhow::Result<MessageResponse> {
    let mut client = ServerReflectionClient::new(server.channel.clone());
    let request = ServerReflectionRequest {
        host: String::new(),
        message_request: Some(request),
    };
    let mut responses = client
        .server_reflection_info(tokio_stream::iter([request]))
        .await?
        .into_inner();
    let ServerReflectionResponse {
        message_response, ..
    } = responses.next().await.expect("one answer")?;
    Ok(message_response.expect("an answer body"))
}

#[tokio::test]
async fn v1_lists_the_api_health_and_reflection_services() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let MessageResponse::ListServicesResponse(list) =
        ask(&server, MessageRequest::ListServices(String::new())).await?
    else {
        panic!("expected a service list");
    };
    let names: Vec<&str> = list.service.iter().map(|s| s.name.as_str()).collect();
    for expected in [
        SERVICE_NAME,
        "grpc.health.v1.Health",
        "grpc.reflection.v1.ServerReflection",
    ] {
        assert!(
            names.contains(&expected),
            "{expected} missing from {names:?}"
        );
    }
    server.shutdown().await
}

#[tokio::test]
async fn v1_serves_the_api_descriptor_with_its_methods() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let answer = ask(
        &server,
        MessageRequest::FileContainingSymbol(SERVICE_NAME.to_string()),
    )
    .await?;
    let MessageResponse::FileDescriptorResponse(files) = answer else {
        panic!("expected file descriptors");
    };
    let files: Vec<FileDescriptorProto> = files
        .file_descriptor_proto
        .iter()
        .map(|b| FileDescriptorProto::decode(b.as_slice()))
        .collect::<Result<_, _>>()?;
    let service = files
        .iter()
        .filter(|f| f.package() == "startmargin.v1")
        .flat_map(|f| f.service.iter())
        .find(|s| s.name() == "StartMarginService")
        .expect("the service's file is served");
    let methods: Vec<&str> = service.method.iter().map(|m| m.name()).collect();
    for m in ["AssessVehicle", "AssessFleet", "DescribeModel"] {
        assert!(methods.contains(&m), "{m} missing from {methods:?}");
    }
    // Dependencies are resolvable too: every import of the served files is served.
    let names: Vec<&str> = files.iter().map(|f| f.name()).collect();
    for f in &files {
        for dep in &f.dependency {
            let ok = names.contains(&dep.as_str())
                || matches!(
                    ask(&server, MessageRequest::FileByFilename(dep.clone())).await?,
                    MessageResponse::FileDescriptorResponse(_)
                );
            assert!(ok, "import {dep} of {} is not served", f.name());
        }
    }
    server.shutdown().await
}

#[tokio::test]
async fn v1alpha_lists_the_api_for_older_tools() -> anyhow::Result<()> {
    use tonic_reflection::pb::v1alpha::ServerReflectionRequest as AlphaReflectionRequest;
    use tonic_reflection::pb::v1alpha::server_reflection_client::ServerReflectionClient as AlphaClient;
    use tonic_reflection::pb::v1alpha::server_reflection_request::MessageRequest as AlphaRequest;
    use tonic_reflection::pb::v1alpha::server_reflection_response::MessageResponse as AlphaResponse;

    let server = TestServer::start().await?;
    let mut client = AlphaClient::new(server.channel.clone());
    let request = AlphaReflectionRequest {
        host: String::new(),
        message_request: Some(AlphaRequest::ListServices(String::new())),
    };
    let mut responses = client
        .server_reflection_info(tokio_stream::iter([request]))
        .await?
        .into_inner();
    let answer = responses
        .next()
        .await
        .expect("one answer")?
        .message_response
        .expect("a body");
    let AlphaResponse::ListServicesResponse(list) = answer else {
        panic!("expected a service list")
    };
    assert!(list.service.iter().any(|s| s.name == SERVICE_NAME));
    server.shutdown().await
}
