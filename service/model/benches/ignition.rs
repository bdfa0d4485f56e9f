//! Benchmarks (to be written).
fn main() {}
