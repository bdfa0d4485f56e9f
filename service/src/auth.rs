//! Bearer-token authentication: a table of tokens, each bound to a [`Tenant`], loaded from a file
//! and/or an environment variable, and a tower layer that checks the `authorization: Bearer …`
//! header of every API call before it reaches the service.
//!
//! - A missing, malformed or unknown token is answered with `UNAUTHENTICATED` and a fixed message;
//!   the token is never logged, echoed in an error or kept beyond the call.
//! - Tokens are compared in constant time (`subtle`) against every entry of the table, so the time
//!   taken does not tell how much of a guess was right (only its length may show).
//! - The matched tenant goes into the request's extensions, where [`crate::tenant::tenant_of`]
//!   finds it: everything kept across messages is per stream and tagged with that tenant.
//! - `grpc.health.v1.Health` and server reflection stay open, so that orchestrator probes and
//!   tooling work without credentials; they reveal no tenant data.
//!
//! Token file format: one `tenant-id:token` per line; blank lines and lines starting with `#`
//! are ignored. Tenant ids are `[A-Za-z0-9._-]+`; tokens are at least
//! [`MIN_TOKEN_LEN`] printable characters without spaces, and unique.

use std::future::Future;
use std::path::{Path, PathBuf};
use std::pin::Pin;
use std::sync::Arc;
use std::task::{Context, Poll};

use subtle::ConstantTimeEq as _;
use tracing::debug;

use crate::config::Config;
use crate::tenant::Tenant;

/// Shortest accepted token, characters: shorter ones are refused at load.
pub const MIN_TOKEN_LEN: usize = 16;

/// Path prefixes that need no token: the health protocol and server reflection.
pub const OPEN_PATH_PREFIXES: [&str; 2] = ["/grpc.health.v1.Health/", "/grpc.reflection."];

/// The message of every refusal; deliberately the same for a missing and a wrong token.
pub const UNAUTHENTICATED_MESSAGE: &str =
    "a valid bearer token is required (authorization: Bearer <token>)";

/// Why the token table could not be loaded. Messages name the source and line, never a token.
#[derive(Debug, thiserror::Error)]
pub enum AuthError {
    /// The token file could not be read.
    #[error("cannot read the token file {path}: {source}")]
    Read {
        /// The file.
        path: PathBuf,
        /// The I/O error.
        source: std::io::Error,
    },
    /// The environment variable named by `auth_tokens_env` is not set or not UTF-8.
    #[error("the token variable {0} is not set")]
    MissingEnv(String),
    /// An entry is malformed.
    #[error("{source_name}, entry {entry}: {reason}")]
    Entry {
        /// The file path or variable name.
        source_name: String,
        /// 1-based entry (line) number.
        entry: usize,
        /// What is wrong (never the token itself).
        reason: &'static str,
    },
    /// Authentication is configured but no token was found.
    #[error("authentication is on but no token is configured")]
    Empty,
}

/// Tokens and the tenants they belong to.
#[derive(Clone, Default)]
pub struct TokenTable {
    entries: Vec<(Box<[u8]>, Tenant)>,
}

impl std::fmt::Debug for TokenTable {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        // Never print a token.
        f.debug_struct("TokenTable")
            .field("tokens", &self.entries.len())
            .finish()
    }
}

impl TokenTable {
    /// Loads the table the configuration names; `Ok(None)` when authentication is off.
    pub fn from_config(config: &Config) -> Result<Option<Self>, AuthError> {
        if !config.auth_enabled() {
            return Ok(None);
        }
        let mut table = Self::default();
        if let Some(path) = &config.auth_tokens_file {
            table.add_file(path)?;
        }
        if !config.auth_tokens_env.is_empty() {
            let name = &config.auth_tokens_env;
            let text = std::env::var(name).map_err(|_| AuthError::MissingEnv(name.to_string()))?;
            table.add_text(&text, name)?;
        }
        if table.entries.is_empty() {
            return Err(AuthError::Empty);
        }
        Ok(Some(table))
    }

    /// Adds the entries of a token file.
    pub fn add_file(&mut self, path: &Path) -> Result<(), AuthError> {
        let text = std::fs::read_to_string(path).map_err(|source| AuthError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        self.add_text(&text, &path.display().to_string())
    }

    /// Adds `tenant-id:token` entries separated by newlines or commas; `source_name` names the
    /// source in errors.
    pub fn add_text(&mut self, text: &str, source_name: &str) -> Result<(), AuthError> {
        for (i, entry) in text.split(['\n', ',']).enumerate() {
            let entry = entry.trim();
            if entry.is_empty() || entry.starts_with('#') {
                continue;
            }
            let error = |reason| AuthError::Entry {
                source_name: source_name.to_string(),
                entry: i + 1,
                reason,
            };
            let (tenant, token) = entry
                .split_once(':')
                .ok_or_else(|| error("expected tenant-id:token"))?;
            let valid_tenant = !tenant.is_empty()
                && tenant
                    .bytes()
                    .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'.' | b'_' | b'-'));
            if !valid_tenant {
                return Err(error("the tenant id must be [A-Za-z0-9._-]+"));
            }
            if token.len() < MIN_TOKEN_LEN {
                return Err(error("the token is shorter than 16 characters"));
            }
            if !token.bytes().all(|b| b.is_ascii_graphic()) {
                return Err(error("the token must be printable ASCII without spaces"));
            }
            if self.tenant_for(token.as_bytes()).is_some() {
                return Err(error("the token is already given to a tenant"));
            }
            self.entries
                .push((token.as_bytes().into(), Tenant(Arc::from(tenant))));
        }
        Ok(())
    }

    /// Number of tokens.
    pub fn len(&self) -> usize {
        self.entries.len()
    }

    /// Whether the table has no token.
    pub fn is_empty(&self) -> bool {
        self.entries.is_empty()
    }

    /// The tenant of `token`, comparing in constant time against every entry.
    pub fn tenant_for(&self, token: &[u8]) -> Option<Tenant> {
        let mut found = None;
        for (candidate, tenant) in &self.entries {
            if constant_time_eq(candidate, token) {
                found = Some(tenant.clone());
            }
        }
        found
    }
}

/// Compares two byte strings in time that depends on their lengths only.
pub fn constant_time_eq(a: &[u8], b: &[u8]) -> bool {
    bool::from(a.ct_eq(b))
}

/// The token of an `authorization` header value `Bearer <token>` (scheme case-insensitive).
pub fn bearer_token(value: &[u8]) -> Option<&[u8]> {
    let scheme = b"bearer ";
    if value.len() <= scheme.len() || !value[..scheme.len()].eq_ignore_ascii_case(scheme) {
        return None;
    }
    let token = value[scheme.len()..].trim_ascii();
    (!token.is_empty()).then_some(token)
}

/// Whether a request path needs no token (health, reflection).
pub fn is_open_path(path: &str) -> bool {
    OPEN_PATH_PREFIXES.iter().any(|p| path.starts_with(p))
}

/// Tower layer that authenticates API calls (a no-op when the table is `None`).
#[derive(Debug, Clone, Default)]
pub struct AuthLayer {
    table: Option<Arc<TokenTable>>,
}

impl AuthLayer {
    /// A layer checking tokens against `table`; `None` lets every call through as the default
    /// tenant.
    pub fn new(table: Option<TokenTable>) -> Self {
        Self {
            table: table.map(Arc::new),
        }
    }
}

impl<S> tower::Layer<S> for AuthLayer {
    type Service = Auth<S>;

    fn layer(&self, inner: S) -> Self::Service {
        Auth {
            inner,
            table: self.table.clone(),
        }
    }
}

/// The service of [`AuthLayer`].
#[derive(Debug, Clone)]
pub struct Auth<S> {
    inner: S,
    table: Option<Arc<TokenTable>>,
}

type BoxFuture<T> = Pin<Box<dyn Future<Output = T> + Send>>;

impl<S, B> tower::Service<http::Request<B>> for Auth<S>
where
    S: tower::Service<http::Request<B>, Response = http::Response<tonic::body::Body>>,
    S::Future: Send + 'static,
{
    type Response = S::Response;
    type Error = S::Error;
    type Future = BoxFuture<Result<Self::Response, Self::Error>>;

    fn poll_ready(&mut self, cx: &mut Context<'_>) -> Poll<Result<(), Self::Error>> {
        self.inner.poll_ready(cx)
    }

    fn call(&mut self, mut request: http::Request<B>) -> Self::Future {
        if let Some(table) = &self.table
            && !is_open_path(request.uri().path())
        {
            let tenant = request
                .headers()
                .get(http::header::AUTHORIZATION)
                .and_then(|v| bearer_token(v.as_bytes()))
                .and_then(|token| table.tenant_for(token));
            match tenant {
                Some(tenant) => {
                    debug!(
                        tenant = tenant.as_str(),
                        path = request.uri().path(),
                        "authenticated"
                    );
                    request.extensions_mut().insert(tenant);
                }
                None => {
                    debug!(path = request.uri().path(), "unauthenticated call refused");
                    let response =
                        tonic::Status::unauthenticated(UNAUTHENTICATED_MESSAGE).into_http();
                    return Box::pin(async move { Ok(response) });
                }
            }
        }
        Box::pin(self.inner.call(request))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constant_time_compare_is_equality() {
        assert!(constant_time_eq(b"abcdefgh", b"abcdefgh"));
        assert!(!constant_time_eq(b"abcdefgh", b"abcdefgX"));
        assert!(!constant_time_eq(b"abcdefgh", b"abcdefg"));
        assert!(!constant_time_eq(b"", b"a"));
        assert!(constant_time_eq(b"", b""));
    }

    #[test]
    fn tokens_map_to_their_tenants() {
        let mut t = TokenTable::default();
        t.add_text(
            "# depot north\nnorth:n0rth-depot-token-0001\n\nsouth:s0uth-depot-token-0002",
            "test",
        )
        .expect("valid");
        assert_eq!(t.len(), 2);
        assert_eq!(
            t.tenant_for(b"s0uth-depot-token-0002").map(|t| t.0),
            Some(Arc::from("south"))
        );
        assert!(t.tenant_for(b"s0uth-depot-token-0003").is_none());
        assert!(t.tenant_for(b"").is_none());
    }

    #[test]
    fn bad_entries_are_refused_without_echoing_the_token() {
        let mut t = TokenTable::default();
        let e = t.add_text("north:short-secret", "f").expect_err("short");
        assert!(!e.to_string().contains("short-secret"), "{e}");
        assert!(e.to_string().contains("entry 1"), "{e}");
        let e = t
            .add_text("a:aaaaaaaaaaaaaaaaaaaa,b:aaaaaaaaaaaaaaaaaaaa", "f")
            .expect_err("duplicate");
        assert!(e.to_string().contains("entry 2"), "{e}");
        assert!(t.add_text("no colon here at all", "f").is_err());
        assert!(t.add_text("bad tenant:aaaaaaaaaaaaaaaaaaaa", "f").is_err());
        assert!(t.add_text("x:aaaaaaaa aaaaaaaaaaaa", "f").is_err());
        assert!(!format!("{t:?}").contains("aaaa"));
    }

    #[test]
    fn configured_sources_must_exist_and_hold_tokens() {
        let c = Config {
            auth_tokens_env: "SM_TEST_VARIABLE_THAT_IS_NEVER_SET_7F3A".to_string(),
            ..Config::default()
        };
        assert!(matches!(
            TokenTable::from_config(&c),
            Err(AuthError::MissingEnv(_))
        ));
        let c = Config {
            auth_tokens_file: Some("/nonexistent/tokens".into()),
            ..Config::default()
        };
        assert!(matches!(
            TokenTable::from_config(&c),
            Err(AuthError::Read { .. })
        ));
        assert!(
            TokenTable::from_config(&Config::default())
                .expect("off")
                .is_none()
        );
        let mut t = TokenTable::default();
        t.add_text("# only a comment\n\n", "f")
            .expect("empty is fine here");
        assert!(t.is_empty());
    }

    /// An inner service that answers with the tenant it found in the request's extensions.
    #[derive(Clone)]
    struct EchoTenant;

    impl tower::Service<http::Request<()>> for EchoTenant {
        type Response = http::Response<tonic::body::Body>;
        type Error = std::convert::Infallible;
        type Future = std::future::Ready<Result<Self::Response, Self::Error>>;

        fn poll_ready(&mut self, _: &mut Context<'_>) -> Poll<Result<(), Self::Error>> {
            Poll::Ready(Ok(()))
        }

        fn call(&mut self, request: http::Request<()>) -> Self::Future {
            let tenant = request
                .extensions()
                .get::<Tenant>()
                .map_or("none".to_string(), |t| t.as_str().to_string());
            let mut response = http::Response::new(tonic::body::Body::default());
            response
                .headers_mut()
                .insert("x-tenant", tenant.parse().expect("header"));
            std::future::ready(Ok(response))
        }
    }

    async fn call(
        layer: &AuthLayer,
        path: &str,
        auth: Option<&str>,
    ) -> http::Response<tonic::body::Body> {
        use tower::{Layer as _, Service as _};
        let mut request = http::Request::builder().uri(path);
        if let Some(auth) = auth {
            request = request.header("authorization", auth);
        }
        let request = request.body(()).expect("request");
        layer
            .layer(EchoTenant)
            .call(request)
            .await
            .expect("infallible")
    }

    #[tokio::test]
    async fn the_layer_puts_the_tenant_into_the_extensions() {
        let mut table = TokenTable::default();
        table
            .add_text("depot-north:n0rth-depot-token-0001", "test")
            .expect("valid");
        let layer = AuthLayer::new(Some(table));
        let api = "/startmargin.v1.StartMarginService/DescribeModel";

        let ok = call(&layer, api, Some("Bearer n0rth-depot-token-0001")).await;
        assert_eq!(ok.headers()["x-tenant"], "depot-north");

        let refused = call(&layer, api, Some("Bearer n0rth-depot-token-0002")).await;
        assert_eq!(refused.headers()["grpc-status"], "16"); // UNAUTHENTICATED
        assert!(
            refused.headers().get("x-tenant").is_none(),
            "never reached the service"
        );

        let probe = call(&layer, "/grpc.health.v1.Health/Check", None).await;
        assert_eq!(probe.headers()["x-tenant"], "none");

        let off = call(&AuthLayer::new(None), api, None).await;
        assert_eq!(off.headers()["x-tenant"], "none");
    }

    #[test]
    fn bearer_header_parsing() {
        assert_eq!(bearer_token(b"Bearer abc"), Some(&b"abc"[..]));
        assert_eq!(bearer_token(b"bearer   abc "), Some(&b"abc"[..]));
        assert_eq!(bearer_token(b"Basic abc"), None);
        assert_eq!(bearer_token(b"Bearer "), None);
        assert!(is_open_path("/grpc.health.v1.Health/Check"));
        assert!(is_open_path(
            "/grpc.reflection.v1.ServerReflection/ServerReflectionInfo"
        ));
        assert!(!is_open_path(
            "/startmargin.v1.StartMarginService/AssessVehicle"
        ));
    }
}
