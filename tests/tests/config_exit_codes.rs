//! The real `startmargind` binary refuses a configuration that cannot serve with exit code 64
//! and a message naming the problem, in `check-config` and in `serve` alike: missing TLS files, a
//! key that is not the certificate's, an unreadable client CA, a missing token file, an unset
//! token variable. A valid TLS configuration passes `check-config`.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Duration;

use rcgen::{CertificateParams, KeyPair};
use startmargin_e2e::startmargind_binary;

/// EX_USAGE of sysexits.h, the binary's code for an invalid configuration.
const EXIT_INVALID_CONFIG: i32 = 64;

fn temp_dir() -> PathBuf {
    let dir = std::env::temp_dir().join(format!("startmargin-exit-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

/// A self-signed `localhost` certificate and its key, as PEM.
fn certificate() -> (String, String) {
    let key = KeyPair::generate().expect("key");
    let cert = CertificateParams::new(vec!["localhost".to_string()])
        .expect("params")
        .self_signed(&key)
        .expect("self-signed");
    (cert.pem(), key.serialize_pem())
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, text).expect("write");
    path
}

/// Runs `startmargind <command> --config <file>` with `toml` as the file; returns the exit code
/// and stderr. `serve` is stopped if it starts after all (the test then fails on its code).
fn run(binary: &Path, dir: &Path, command: &str, toml: &str) -> (Option<i32>, String) {
    let config = write(dir, &format!("{command}.toml"), toml);
    let mut child = Command::new(binary)
        .args([command, "--config"])
        .arg(&config)
        .env_remove("SMTEST_UNSET_TOKENS")
        .env("STARTMARGIN_LISTEN", "127.0.0.1:0")
        .env("STARTMARGIN_METRICS_LISTEN", "")
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start startmargind");
    let deadline = std::time::Instant::now() + Duration::from_secs(20);
    loop {
        if let Some(status) = child.try_wait().expect("wait") {
            let mut stderr = String::new();
            if let Some(mut e) = child.stderr.take() {
                use std::io::Read as _;
                let _ = e.read_to_string(&mut stderr);
            }
            return (status.code(), stderr);
        }
        if std::time::Instant::now() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            return (None, "still running".to_string());
        }
        std::thread::sleep(Duration::from_millis(50));
    }
}

#[test]
fn configuration_failures_exit_64_in_check_config_and_serve() {
    let binary = startmargind_binary();
    let dir = temp_dir();
    let (cert, key) = certificate();
    let (_, other_key) = certificate();
    let cert_path = write(&dir, "server.pem", &cert);
    let key_path = write(&dir, "server.key", &key);
    let other_key_path = write(&dir, "other.key", &other_key);
    let missing = dir.join("missing.pem");
    let tls = |cert: &Path, key: &Path| {
        format!(
            "tls_cert_path = {:?}\ntls_key_path = {:?}\n",
            cert.display().to_string(),
            key.display().to_string()
        )
    };

    let cases = [
        (
            "missing certificate",
            tls(&missing, &key_path),
            "missing.pem",
        ),
        ("missing key", tls(&cert_path, &missing), "missing.pem"),
        (
            "key of another certificate",
            tls(&cert_path, &other_key_path),
            "does not belong",
        ),
        (
            "missing client CA",
            format!(
                "{}tls_client_ca_path = {:?}\n",
                tls(&cert_path, &key_path),
                missing.display().to_string()
            ),
            "client CA",
        ),
        (
            "missing token file",
            format!("auth_tokens_file = {:?}\n", missing.display().to_string()),
            "missing.pem",
        ),
        (
            "unset token variable",
            "auth_tokens_env = \"SMTEST_UNSET_TOKENS\"\n".to_string(),
            "SMTEST_UNSET_TOKENS",
        ),
        (
            "unknown key",
            "listne = \"0.0.0.0:1\"\n".to_string(),
            "listne",
        ),
    ];
    for (what, toml, needle) in &cases {
        for command in ["check-config", "serve"] {
            let (code, stderr) = run(&binary, &dir, command, toml);
            assert_eq!(
                code,
                Some(EXIT_INVALID_CONFIG),
                "{what}, {command}: {stderr}"
            );
            assert!(stderr.contains(needle), "{what}, {command}: {stderr}");
        }
    }

    let (code, stderr) = run(&binary, &dir, "check-config", &tls(&cert_path, &key_path));
    assert_eq!(code, Some(0), "a valid TLS configuration: {stderr}");
    let _ = std::fs::remove_dir_all(&dir);
}
