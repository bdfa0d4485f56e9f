//! `startmargind --help` says what the program is for, not the crate's one-line summary of its
//! parts.

use std::process::Command;

use startmargin_e2e::startmargind_binary;

#[test]
fn help_says_what_the_program_does() {
    let out = Command::new(startmargind_binary())
        .arg("--help")
        .output()
        .expect("run startmargind");
    assert!(out.status.success());
    let help = String::from_utf8_lossy(&out.stdout);
    let first = help.lines().next().unwrap_or_default();
    assert!(first.contains("parked diesel vehicles"), "{help}");
    assert!(first.contains("will not start"), "{help}");
    assert!(!help.contains("validation, conversion"), "{help}");
    for command in ["serve", "check-config", "health-check"] {
        assert!(help.contains(command), "{command} missing: {help}");
    }
}
