//! Generates the API code from `startmargin/v1/*.proto` with protox (a pure-Rust protobuf
//! compiler), so no system `protoc` is needed, and writes the encoded file descriptor set that the
//! server's reflection service publishes.

use std::path::PathBuf;

use prost::Message;

const PROTO_FILES: &[&str] = &[
    "startmargin/v1/vehicle.proto",
    "startmargin/v1/conditions.proto",
    "startmargin/v1/assessment.proto",
    "startmargin/v1/watch.proto",
    "startmargin/v1/service.proto",
];

fn main() -> Result<(), Box<dyn std::error::Error>> {
    println!("cargo:rerun-if-changed=startmargin");
    println!("cargo:rerun-if-changed=google");

    let descriptors = protox::compile(PROTO_FILES, ["."])?;
    let out_dir = PathBuf::from(std::env::var("OUT_DIR")?);
    std::fs::write(
        out_dir.join("startmargin_descriptor.bin"),
        descriptors.encode_to_vec(),
    )?;

    tonic_prost_build::configure()
        .build_client(true)
        .build_server(true)
        .compile_fds(descriptors)?;
    Ok(())
}
