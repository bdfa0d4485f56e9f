//! The server's own deadline on AssessVehicle: a call that outlives `request_timeout_s` gets
//! DEADLINE_EXCEEDED (not CANCELLED, not UNKNOWN), and the server goes on answering.

use startmargin_e2e::{TestServer, loopback_config, sample_night};
use startmargin_proto::v1 as pb;
use startmargin_service::Config;
use tonic::Code;

#[tokio::test]
async fn a_call_past_the_request_timeout_gets_deadline_exceeded() -> anyhow::Result<()> {
    let config = Config {
        // One microsecond: no answer of this model can be computed that fast on any machine or
        // build, so the test does not depend on how fast the machine running it is.
        request_timeout_s: 1e-6,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await?;
    let mut night = sample_night("v");
    // The sampling method runs the model hundreds of times, on the compute pool.
    night.options = Some(pb::AssessmentOptions {
        probability_method: pb::ProbabilityMethod::Sampling as i32,
        ..Default::default()
    });
    let status = server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await
        .expect_err("the assessment cannot finish within 1 µs");
    assert_eq!(status.code(), Code::DeadlineExceeded, "{status:?}");
    assert!(status.message().contains("request timeout"), "{status:?}");

    // The default method on an idle server may run on the thread that took the call (it saves a
    // hand-off): the deadline holds there too, judged when the run ends.
    let status = server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest {
            night: Some(sample_night("w")),
        })
        .await
        .expect_err("a whole answer takes far more than 1 µs");
    assert_eq!(status.code(), Code::DeadlineExceeded, "{status:?}");

    // DescribeModel has no such deadline and the server still answers.
    let d = server
        .client()
        .describe_model(pb::DescribeModelRequest {})
        .await?;
    assert!(!d.into_inner().model_version.is_empty());
    server.shutdown().await
}
