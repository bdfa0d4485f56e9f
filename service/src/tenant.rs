//! The tenant a call belongs to. The authentication layer puts a [`Tenant`] into each request's
//! extensions; everything that keeps state across calls or streams keys it by tenant, so that a
//! tenant sees only its own vehicles and streams. Without authentication every call belongs to
//! [`Tenant::default`].

use std::sync::Arc;

/// A tenant id (never a secret: tokens map to tenants, tenants are safe to log).
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Tenant(pub Arc<str>);

impl Default for Tenant {
    fn default() -> Self {
        Self(Arc::from("default"))
    }
}

impl Tenant {
    /// The tenant id.
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

/// The tenant of a request (the default tenant when authentication is off).
pub fn tenant_of<T>(request: &tonic::Request<T>) -> Tenant {
    request
        .extensions()
        .get::<Tenant>()
        .cloned()
        .unwrap_or_default()
}
