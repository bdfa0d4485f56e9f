//! The invented scenario against the real embedded server over loopback gRPC: every vehicle is
//! accepted and assessed, with its margin path and fuel path, the yard gets a plug-in plan within
//! its outlets, and the charts draw every vehicle.

use std::time::Duration;

use startmargin_demo::chart::{self, Assessed};
use startmargin_demo::{run, scenario};
use startmargin_sdk::Client;

#[tokio::test]
async fn the_whole_fleet_is_assessed_through_the_sdk() {
    let server = startmargin_service::server::spawn_on_loopback()
        .await
        .unwrap();
    let client = Client::builder([format!("http://{}", server.addr)])
        .timeout(Duration::from_secs(10))
        .build()
        .await
        .unwrap();
    let s = scenario::evening_cold_front().unwrap();
    let fleet = run::assess_fleet(&client, &s).await.unwrap();
    let outcomes = &fleet.vehicles;
    assert_eq!(outcomes.len(), 12);

    let mut assessed = Vec::new();
    for (v, o) in s.vehicles.iter().zip(outcomes) {
        let a = o.as_ref().unwrap_or_else(|e| panic!("{}: {e}", v.id()));
        assert_eq!(a.vehicle_id, v.id());
        assert!(a.start_margin_k.is_finite(), "{}", v.id());
        assert!(
            !a.margin_path.is_empty(),
            "{}: margin path asked for",
            v.id()
        );
        let gel = a.gel.as_ref().expect("gel outlook");
        assert!(!gel.path.is_empty(), "{}: fuel path", v.id());
        assert!(gel.cfpp_c <= gel.cloud_point_c, "{}", v.id());
        assessed.push(Assessed {
            vehicle: v,
            assessment: a,
        });
    }
    // The summer-fuel plow's fuel is worse off than the arctic-fuel pickup's.
    let cfpp = |id: &str| {
        let i = s.vehicles.iter().position(|v| v.id() == id).unwrap();
        outcomes[i].as_ref().unwrap().gel.as_ref().unwrap().cfpp_c
    };
    assert!(cfpp("PL-02") > cfpp("PU-05"));

    // The plow still on summer No. 2 (frame-mounted filter) is flagged before the night's low,
    // with the times its fuel crosses cloud point and CFPP, and the fuel blocks its start.
    let i = s.vehicles.iter().position(|v| v.id() == "PL-02").unwrap();
    let a = outcomes[i].as_ref().unwrap();
    let gel = a.gel.as_ref().unwrap();
    assert_eq!(gel.level, startmargin_sdk::api::GelLevel::NoFlow as i32);
    assert!(gel.blocks_start);
    assert!(
        gel.cloud_point_crossed_at.as_ref().unwrap().seconds
            < gel.cfpp_crossed_at.as_ref().unwrap().seconds
    );
    assert!(
        gel.cfpp_crossed_at.as_ref().unwrap().seconds <= gel.lowest_at.as_ref().unwrap().seconds
    );
    assert_eq!(
        a.limiting_factor,
        startmargin_sdk::api::LimitingFactor::WaxedFuel as i32
    );

    // The yard's plan: at most its two outlets, only vehicles parked there with a block heater.
    assert_eq!(fleet.plans.len(), 1);
    let plan = &fleet.plans[0];
    assert_eq!(plan.depot_id, scenario::DEPOT_ID);
    assert!(plan.plug_ins.len() <= scenario::YARD_OUTLETS as usize);
    for p in &plan.plug_ins {
        assert!(
            ["PL-01", "PU-06", "LDR-09", "PU-11"].contains(&p.vehicle_id.as_str()),
            "{}",
            p.vehicle_id
        );
    }
    assert!(plan.expected_no_starts_with <= plan.expected_no_starts_without);
    // Plugging in the coldest first spends an outlet on the pickup whose stuck glow-plug relay no
    // heater can make up for; the plan does better.
    assert!(plan.expected_no_starts_with < plan.expected_no_starts_coldest_first);

    let svg = chart::margin_chart(&s, &assessed);
    assert_eq!(svg.matches("<polyline").count(), 12);
    server.shutdown().await.unwrap();
}
