//! TLS and mutual TLS on the API port, with certificates generated in the test (rcgen): a client
//! that trusts the test CA gets answers over TLS; a plaintext client does not; with a client CA
//! configured, only clients presenting a certificate signed by it get through.

use std::path::PathBuf;

use rcgen::{BasicConstraints, CertificateParams, DnType, IsCa, Issuer, KeyPair};
use startmargin_e2e::loopback_config;
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::start_margin_service_client::StartMarginServiceClient;
use startmargin_service::Config;
use tonic::transport::{Certificate, Channel, ClientTlsConfig, Identity};

/// A certificate authority made for one test.
struct TestCa {
    pem: String,
    issuer: Issuer<'static, KeyPair>,
}

impl TestCa {
    fn new(name: &str) -> Self {
        let key = KeyPair::generate().expect("key");
        let mut params = CertificateParams::new(Vec::<String>::new()).expect("params");
        params.is_ca = IsCa::Ca(BasicConstraints::Unconstrained);
        params.distinguished_name.push(DnType::CommonName, name);
        let cert = params.self_signed(&key).expect("self-signed CA");
        Self {
            pem: cert.pem(),
            issuer: Issuer::new(params, key),
        }
    }

    /// A leaf certificate for `names`, as (certificate PEM, key PEM).
    fn leaf(&self, names: &[&str]) -> (String, String) {
        let key = KeyPair::generate().expect("key");
        let params =
            CertificateParams::new(names.iter().map(|n| n.to_string()).collect::<Vec<_>>())
                .expect("params");
        let cert = params.signed_by(&key, &self.issuer).expect("signed leaf");
        (cert.pem(), key.serialize_pem())
    }
}

fn temp_dir(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("startmargin-tls-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

/// A configuration serving TLS with a `localhost` certificate from `ca`, files under `dir`.
fn tls_config(ca: &TestCa, dir: &std::path::Path) -> Config {
    let (cert, key) = ca.leaf(&["localhost", "127.0.0.1"]);
    std::fs::write(dir.join("server.pem"), cert).expect("write");
    std::fs::write(dir.join("server.key"), key).expect("write");
    Config {
        tls_cert_path: Some(dir.join("server.pem")),
        tls_key_path: Some(dir.join("server.key")),
        ..loopback_config()
    }
}

async fn describe_over(channel: Channel) -> Result<pb::DescribeModelResponse, tonic::Status> {
    StartMarginServiceClient::new(channel)
        .describe_model(pb::DescribeModelRequest {})
        .await
        .map(tonic::Response::into_inner)
}

async fn tls_channel(
    addr: std::net::SocketAddr,
    ca_pem: &str,
    identity: Option<(String, String)>,
) -> Result<Channel, tonic::transport::Error> {
    let mut tls = ClientTlsConfig::new()
        .ca_certificate(Certificate::from_pem(ca_pem))
        .domain_name("localhost");
    if let Some((cert, key)) = identity {
        tls = tls.identity(Identity::from_pem(cert, key));
    }
    Channel::from_shared(format!("https://{addr}"))
        .expect("uri")
        .tls_config(tls)?
        .connect()
        .await
}

#[tokio::test]
async fn tls_handshake_serves_a_client_that_trusts_the_ca() {
    let dir = temp_dir("plain");
    let ca = TestCa::new("startmargin test ca");
    let server = startmargin_service::spawn(tls_config(&ca, &dir))
        .await
        .expect("server starts with TLS");

    let channel = tls_channel(server.addr, &ca.pem, None)
        .await
        .expect("TLS handshake");
    let described = describe_over(channel).await.expect("answer over TLS");
    assert!(!described.model_version.is_empty());

    // A plaintext HTTP/2 client gets no answer from a TLS port.
    let plain = Channel::from_shared(format!("http://{}", server.addr))
        .expect("uri")
        .connect()
        .await;
    if let Ok(plain) = plain {
        assert!(describe_over(plain).await.is_err(), "plaintext must fail");
    }

    // A client trusting another CA refuses the server's certificate.
    let other = TestCa::new("another ca");
    let wrong = match tls_channel(server.addr, &other.pem, None).await {
        Ok(channel) => describe_over(channel).await.is_err(),
        Err(_) => true,
    };
    assert!(
        wrong,
        "a client must not trust a certificate of an unknown CA"
    );

    server.shutdown().await.expect("drains");
    let _ = std::fs::remove_dir_all(&dir);
}

#[tokio::test]
async fn mutual_tls_requires_a_client_certificate_of_the_client_ca() {
    let dir = temp_dir("mutual");
    let server_ca = TestCa::new("startmargin server ca");
    let client_ca = TestCa::new("startmargin client ca");
    std::fs::write(dir.join("clients.pem"), &client_ca.pem).expect("write");
    let config = Config {
        tls_client_ca_path: Some(dir.join("clients.pem")),
        ..tls_config(&server_ca, &dir)
    };
    let server = startmargin_service::spawn(config)
        .await
        .expect("server starts with mutual TLS");

    // With a certificate signed by the client CA: served.
    let good = client_ca.leaf(&["depot-north-dispatch"]);
    let channel = tls_channel(server.addr, &server_ca.pem, Some(good))
        .await
        .expect("mutual TLS handshake");
    describe_over(channel)
        .await
        .expect("answer over mutual TLS");

    // Without a client certificate: refused.
    let refused = match tls_channel(server.addr, &server_ca.pem, None).await {
        Ok(channel) => describe_over(channel).await.is_err(),
        Err(_) => true,
    };
    assert!(refused, "a client without a certificate must be refused");

    // With a certificate from another CA: refused.
    let stranger = TestCa::new("stranger ca").leaf(&["stranger"]);
    let refused = match tls_channel(server.addr, &server_ca.pem, Some(stranger)).await {
        Ok(channel) => describe_over(channel).await.is_err(),
        Err(_) => true,
    };
    assert!(
        refused,
        "a client certificate of another CA must be refused"
    );

    server.shutdown().await.expect("drains");
    let _ = std::fs::remove_dir_all(&dir);
}
