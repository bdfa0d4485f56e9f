//! DescribeModel through real gRPC: the model names its version, methods, archetypes and grades.

use std::collections::HashSet;

use startmargin_e2e::{TestServer, sample_night};
use startmargin_proto::v1 as pb;

#[tokio::test]
async fn describe_model_names_version_methods_archetypes_and_grades() -> anyhow::Result<()> {
    let server = TestServer::start().await?;
    let mut client = server.client();
    let d = client
        .describe_model(pb::DescribeModelRequest {})
        .await?
        .into_inner();

    assert!(!d.model_version.is_empty());
    assert!(!d.methods.is_empty(), "published methods are listed");
    for m in &d.methods {
        assert!(
            !m.topic.is_empty() && !m.method.is_empty() && !m.source.is_empty(),
            "{m:?}"
        );
    }
    for p in &d.parameters {
        assert!(p.value.is_finite(), "{p:?}");
        assert!(!p.name.is_empty() && !p.origin.is_empty(), "{p:?}");
    }

    let heavy = d
        .archetypes
        .iter()
        .find(|a| a.id == "heavy-di-i6")
        .expect("the sample archetype is built in");
    let engine = heavy.engine.as_ref().expect("the archetype's engine");
    assert!(
        engine.bore_mm.is_some()
            && engine.stroke_mm.is_some()
            && engine.compression_ratio.is_some()
    );
    assert!(
        d.archetypes
            .iter()
            .all(|a| a.unassisted_limit_c.is_finite())
    );
    let ids: HashSet<_> = d.archetypes.iter().map(|a| a.id.as_str()).collect();
    assert_eq!(ids.len(), d.archetypes.len(), "archetype ids are unique");

    assert!(!d.fuel_grades.is_empty());
    let grades: HashSet<_> = d.fuel_grades.iter().map(|g| g.grade).collect();
    assert_eq!(grades.len(), d.fuel_grades.len(), "each grade once");
    assert!(!grades.contains(&(pb::FuelGrade::Unspecified as i32)));
    assert!(
        grades.contains(&(pb::FuelGrade::UsNo2 as i32)),
        "the sample grade is described"
    );
    for g in &d.fuel_grades {
        assert!(
            g.cloud_point_c >= g.pour_point_c,
            "cloud point is above pour point: {g:?}"
        );
    }

    // Cached and stable, and the same version stamps every assessment.
    let again = client
        .describe_model(pb::DescribeModelRequest {})
        .await?
        .into_inner();
    assert_eq!(d, again);
    let a = client
        .assess_vehicle(pb::AssessVehicleRequest {
            night: Some(sample_night("depot-north-01")),
        })
        .await?
        .into_inner()
        .assessment
        .expect("an assessment");
    assert_eq!(a.model_version, d.model_version);

    server.shutdown().await
}
