//! Generates the API code from `startmargin/v1/*.proto` with protox (a pure-Rust protobuf
//! compiler), so no system `protoc` is needed, and writes the encoded file descriptor set that the
//! server's reflection service publishes.
//!
//! `google/rpc/*.proto` are verbatim copies of the googleapis files under `vendor/googleapis`, a
//! separate include root, so that nothing generated from `startmargin/` shadows the standard
//! `google.rpc` packages of other languages.
//!
//! With the `json` feature, the same messages are generated a second time (messages only, with
//! the well-known types of `pbjson-types`) together with serde impls from `pbjson-build` that
//! follow the canonical proto3 JSON mapping. The first set, used by the server and the SDK, stays
//! exactly as without the feature.

use std::path::PathBuf;

use prost::Message;

const PROTO_FILES: &[&str] = &[
    "startmargin/v1/vehicle.proto",
    "startmargin/v1/conditions.proto",
    "startmargin/v1/assessment.proto",
    "startmargin/v1/watch.proto",
    "startmargin/v1/learning.proto",
    "startmargin/v1/service.proto",
    // Not imported by the API; compiled so that reflection clients can decode error details.
    "vendor/googleapis/google/rpc/error_details.proto",
];

// The vendored root first: it also lies under ".", and protox refuses a file found through an
// earlier include path under another name. Files are named by their path from here.
const INCLUDES: &[&str] = &["vendor/googleapis", "."];

fn main() -> Result<(), Box<dyn std::error::Error>> {
    println!("cargo:rerun-if-changed=startmargin");
    println!("cargo:rerun-if-changed=vendor");

    let descriptors = protox::compile(PROTO_FILES, INCLUDES)?;
    let out_dir = PathBuf::from(std::env::var("OUT_DIR")?);
    let encoded = descriptors.encode_to_vec();
    std::fs::write(out_dir.join("startmargin_descriptor.bin"), &encoded)?;

    tonic_prost_build::configure()
        .build_client(true)
        .build_server(true)
        .compile_fds(descriptors.clone())?;

    if std::env::var_os("CARGO_FEATURE_JSON").is_some() {
        let json_dir = out_dir.join("json");
        std::fs::create_dir_all(&json_dir)?;
        tonic_prost_build::configure()
            .build_client(false)
            .build_server(false)
            .out_dir(&json_dir)
            // Stops prost's own mapping to prost-types, so that pbjson-types can take its place.
            .compile_well_known_types(true)
            // pbjson-types writes Timestamps with a +00:00 offset; the mapping wants Z.
            .extern_path(".google.protobuf.Timestamp", "crate::json::wkt::Timestamp")
            .extern_path(".google.protobuf", "::pbjson_types")
            .compile_fds(descriptors)?;
        pbjson_build::Builder::new()
            .register_descriptors(&encoded)?
            .out_dir(&json_dir)
            .build(&[".startmargin.v1", ".google.rpc"])?;
    }
    Ok(())
}
