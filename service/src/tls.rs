//! TLS for the gRPC port (rustls with the ring backend, through tonic): the server certificate
//! chain and key from PEM files, and optionally a client CA bundle that turns on mutual TLS (every
//! client must present a certificate it signed). Paths come from the configuration; an error names
//! the file, never its content.
//!
//! Before the files are handed to tonic they are checked the way the TLS handshake will use
//! them (rustls, as tonic does): the certificates and the key parse, the key is the private key
//! of the first certificate, and the client CA holds at least one usable certificate. So
//! `check-config` and the start of `serve` refuse what would otherwise fail only once the server
//! runs.

use std::path::{Path, PathBuf};

use rustls::pki_types::pem::PemObject as _;
use rustls::pki_types::{CertificateDer, PrivateKeyDer};
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
    /// A file's PEM blocks do not parse as what they should hold.
    #[error("{what} {path} cannot be used: {reason}")]
    Unusable {
        /// Which file.
        what: &'static str,
        /// The path.
        path: PathBuf,
        /// Why (from the TLS library; never the file's content).
        reason: String,
    },
    /// The key is not the private key of the certificate.
    #[error("the TLS key {key} does not belong to the certificate {cert}: {reason}")]
    Mismatch {
        /// The certificate file.
        cert: PathBuf,
        /// The key file.
        key: PathBuf,
        /// Why.
        reason: String,
    },
}

/// The certificates of a PEM file.
fn parse_certificates(
    what: &'static str,
    path: &Path,
    pem: &[u8],
) -> Result<Vec<CertificateDer<'static>>, TlsError> {
    let certs = CertificateDer::pem_slice_iter(pem)
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| TlsError::Unusable {
            what,
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
    if certs.is_empty() {
        return Err(TlsError::NotPem {
            what,
            path: path.to_path_buf(),
            label: "CERTIFICATE",
        });
    }
    Ok(certs)
}

/// Checks that the certificate chain and key parse and belong together, and that the client
/// CA (when given) holds a usable certificate.
fn check_identity(
    cert_path: &Path,
    cert: &[u8],
    key_path: &Path,
    key: &[u8],
    ca: Option<(&Path, &[u8])>,
) -> Result<(), TlsError> {
    let chain = parse_certificates("the TLS certificate", cert_path, cert)?;
    let private_key = PrivateKeyDer::from_pem_slice(key).map_err(|e| TlsError::Unusable {
        what: "the TLS key",
        path: key_path.to_path_buf(),
        reason: e.to_string(),
    })?;
    let provider = rustls::crypto::ring::default_provider();
    let mismatch = |reason: String| TlsError::Mismatch {
        cert: cert_path.to_path_buf(),
        key: key_path.to_path_buf(),
        reason,
    };
    let signing_key = provider
        .key_provider
        .load_private_key(private_key)
        .map_err(|e| TlsError::Unusable {
            what: "the TLS key",
            path: key_path.to_path_buf(),
            reason: e.to_string(),
        })?;
    rustls::sign::CertifiedKey::new(chain, signing_key)
        .keys_match()
        .map_err(|e| mismatch(e.to_string()))?;
    if let Some((ca_path, ca)) = ca {
        let roots = parse_certificates("the client CA", ca_path, ca)?;
        let mut store = rustls::RootCertStore::empty();
        let (added, _ignored) = store.add_parsable_certificates(roots);
        if added == 0 {
            return Err(TlsError::Unusable {
                what: "the client CA",
                path: ca_path.to_path_buf(),
                reason: "no certificate in it can be a trust anchor".to_string(),
            });
        }
    }
    Ok(())
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
    let (cert_path, key_path) = (cert, key);
    let cert = read_pem("the TLS certificate", cert_path, "CERTIFICATE")?;
    let key = read_pem("the TLS key", key_path, "PRIVATE KEY")?;
    let ca = match &config.tls_client_ca_path {
        Some(path) => Some((path, read_pem("the client CA", path, "CERTIFICATE")?)),
        None => None,
    };
    check_identity(
        cert_path,
        &cert,
        key_path,
        &key,
        ca.as_ref().map(|(p, b)| (p.as_path(), b.as_slice())),
    )?;
    let mut tls = ServerTlsConfig::new()
        .identity(Identity::from_pem(cert, key))
        .timeout(config.handshake_timeout());
    if let Some((_, ca)) = ca {
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
