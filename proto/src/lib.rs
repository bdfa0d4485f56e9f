//! The `startmargin.v1` API as Rust types: messages, the tonic client and server, and the encoded
//! file descriptor set for gRPC reflection. The only code generation in the workspace; the
//! service and the SDK both depend on this crate.
#![allow(missing_docs, unreachable_pub, clippy::all)]

/// `google.rpc` types used inside our messages (the per-item error of a fleet stream).
pub mod google {
    /// `google.rpc`.
    pub mod rpc {
        include!(concat!(env!("OUT_DIR"), "/google.rpc.rs"));
    }
}

/// Generated packages, laid out as the protobuf package path so that cross-package references resolve.
pub mod startmargin {
    /// `startmargin.v1`: the API.
    pub mod v1 {
        include!(concat!(env!("OUT_DIR"), "/startmargin.v1.rs"));
    }
}

pub use startmargin::v1;

/// Encoded `FileDescriptorSet` of the API, for the reflection service.
pub const FILE_DESCRIPTOR_SET: &[u8] =
    include_bytes!(concat!(env!("OUT_DIR"), "/startmargin_descriptor.bin"));
