//! TLS for the gRPC port (rustls with the ring backend, through tonic): the server certificate
//! chain and key from PEM files, and optionally a client CA bundle that turns on mutual TLS (every
//! client must present a certificate it signed). Paths come from the configuration; an error names
//! the file, never its content.

use std::path::{Path, PathBuf};

use tonic::transport::{Certificate, Identity, ServerTlsConfig};

use crate::config::Config;

/// Why the TLS files could not be used.
#[derive(Debug, thiserror::Error)]
pub enum TlsError {
    /// A file could not be read.
    #[error("cannot read {what} {path}: {source}")]
    Read {
        /// Which file (certificate, key, client CA).
        what: &'static str,
        /// The path.
        path: PathBuf,
        /// The I/O error.
        source: std::io::Error,
    },
    /// A file holds no PEM block of the expected kind.
    #[error("{what} {path} holds no PEM {label} block")]
    NotPem {
        /// Which file.
        what: &'static str,
        /// The path.
        path: PathBuf,
        /// The expected PEM label fragment.
        label: &'static str,
    },
}

fn read_pem(what: &'static str, path: &Path, label: &'static str) -> Result<Vec<u8>, TlsError> {
    let bytes = std::fs::read(path).map_err(|source| TlsError::Read {
        what,
        path: path.to_path_buf(),
        source,
    })?;
    let has_block = String::from_utf8_lossy(&bytes)
        .lines()
        .any(|l| l.starts_with("-----BEGIN ") && l.contains(label));
    if !has_block {
        return Err(TlsError::NotPem {
            what,
            path: path.to_path_buf(),
            label,
        });
    }
    Ok(bytes)
}

/// The server TLS configuration, `None` when TLS is off (no `tls_cert_path`).
pub fn server_tls_config(config: &Config) -> Result<Option<ServerTlsConfig>, TlsError> {
    let (Some(cert), Some(key)) = (&config.tls_cert_path, &config.tls_key_path) else {
        return Ok(None);
    };
    let cert = read_pem("the TLS certificate", cert, "CERTIFICATE")?;
    let key = read_pem("the TLS key", key, "PRIVATE KEY")?;
    let mut tls = ServerTlsConfig::new()
        .identity(Identity::from_pem(cert, key))
        .timeout(config.handshake_timeout());
    if let Some(ca) = &config.tls_client_ca_path {
        let ca = read_pem("the client CA", ca, "CERTIFICATE")?;
        tls = tls
            .client_ca_root(Certificate::from_pem(ca))
            .client_auth_optional(false);
    }
    Ok(Some(tls))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tls_is_off_without_a_certificate() {
        assert!(server_tls_config(&Config::default()).expect("ok").is_none());
    }

    #[test]
    fn missing_and_non_pem_files_are_named() {
        let config = Config {
            tls_cert_path: Some("/nonexistent/server.pem".into()),
            tls_key_path: Some("/nonexistent/server.key".into()),
            ..Config::default()
        };
        let e = server_tls_config(&config).expect_err("missing");
        assert!(e.to_string().contains("/nonexistent/server.pem"), "{e}");

        let dir = std::env::temp_dir().join(format!("startmargin-tls-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("temp dir");
        let junk = dir.join("junk.pem");
        std::fs::write(&junk, "not a certificate").expect("write");
        let config = Config {
            tls_cert_path: Some(junk.clone()),
            tls_key_path: Some(junk.clone()),
            ..Config::default()
        };
        let e = server_tls_config(&config).expect_err("not pem");
        assert!(matches!(e, TlsError::NotPem { .. }), "{e}");
        let _ = std::fs::remove_dir_all(&dir);
    }
}
