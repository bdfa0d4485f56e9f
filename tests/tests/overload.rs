//! Overload: beyond the in-flight limit, unary calls are refused at once with RESOURCE_EXHAUSTED
//! (never UNKNOWN, never a hang), and the server keeps answering.

use startmargin_e2e::{TestServer, loopback_config, sample_night};
use startmargin_proto::v1 as pb;
use startmargin_service::Config;
use tonic::Code;

#[tokio::test]
async fn calls_beyond_the_limit_are_refused_resource_exhausted() -> anyhow::Result<()> {
    let config = Config {
        concurrency_limit: 1,
        compute_threads: 1,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await?;
    let night = sample_night("v");

    let calls: Vec<_> = (0..64)
        .map(|_| {
            let mut client = server.client();
            let request = pb::AssessVehicleRequest {
                night: Some(night.clone()),
            };
            tokio::spawn(async move { client.assess_vehicle(request).await })
        })
        .collect();
    let (mut ok, mut shed) = (0, 0);
    for call in calls {
        match call.await? {
            Ok(_) => ok += 1,
            Err(status) => {
                assert_eq!(status.code(), Code::ResourceExhausted, "{status:?}");
                assert!(status.message().contains("retry"), "{status:?}");
                shed += 1;
            }
        }
    }
    assert!(ok >= 1, "{ok} answered, {shed} refused");
    // 64 calls at once against one slot: some must find it taken (each takes milliseconds).
    assert!(shed >= 1, "{ok} answered, {shed} refused");
    assert_eq!(ok + shed, 64);

    // Once the burst is over the server answers again.
    let after = server
        .client()
        .assess_vehicle(pb::AssessVehicleRequest { night: Some(night) })
        .await;
    assert!(after.is_ok(), "{after:?}");
    server.shutdown().await
}
