//! The variables Kubernetes injects for a Service named `startmargin` (service links such as
//! `STARTMARGIN_PORT=tcp://…`) share our configuration prefix. The real binary refuses them with
//! exit code 64 and a message that names the variables, the cause and the fix, instead of figment's
//! bare "unknown field: port"; without them the same configuration loads.

use std::process::Command;

use startmargin_e2e::startmargind_binary;

/// What Kubernetes sets for a Service `startmargin` with ports 50051 (`grpc`) and 9464 (`metrics`).
const SERVICE_LINKS: [(&str, &str); 8] = [
    ("STARTMARGIN_PORT", "tcp://127.0.0.1:50051"),
    ("STARTMARGIN_PORT_50051_TCP", "tcp://127.0.0.1:50051"),
    ("STARTMARGIN_PORT_50051_TCP_PROTO", "tcp"),
    ("STARTMARGIN_PORT_50051_TCP_PORT", "50051"),
    ("STARTMARGIN_PORT_50051_TCP_ADDR", "127.0.0.1"),
    ("STARTMARGIN_SERVICE_HOST", "127.0.0.1"),
    ("STARTMARGIN_SERVICE_PORT", "50051"),
    ("STARTMARGIN_SERVICE_PORT_METRICS", "9464"),
];

fn check_config(vars: &[(&str, &str)]) -> std::process::Output {
    Command::new(startmargind_binary())
        .arg("check-config")
        .env_clear()
        .env("STARTMARGIN_LISTEN", "0.0.0.0:50051")
        .envs(vars.iter().copied())
        .output()
        .expect("run startmargind")
}

#[test]
fn service_link_variables_are_refused_with_cause_and_fix() {
    let out = check_config(&SERVICE_LINKS);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(64), "{stderr}");
    for (name, _) in SERVICE_LINKS {
        assert!(stderr.contains(name), "{name} not named in: {stderr}");
    }
    assert!(stderr.contains("Kubernetes service links"), "{stderr}");
    assert!(stderr.contains("enableServiceLinks: false"), "{stderr}");
    assert!(stderr.contains("another name"), "{stderr}");
    assert!(!stderr.contains("unknown field"), "{stderr}");
}

#[test]
fn a_single_injected_variable_is_enough_to_be_named() {
    let out = check_config(&[("STARTMARGIN_SERVICE_HOST", "127.0.0.1")]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(64), "{stderr}");
    assert!(stderr.contains("STARTMARGIN_SERVICE_HOST"), "{stderr}");
}

#[test]
fn without_them_the_same_environment_loads() {
    let out = check_config(&[]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("listen = \"0.0.0.0:50051\""), "{stdout}");
}
