//! # startmargin-model
//!
//! The physics of an overnight diesel cold start, as a pure library: plain Rust values in, plain
//! results out, SI units inside (kelvin, pascal, metre, second, watt, joule, kilogram), the unit in
//! every name. No I/O, no clock, no randomness that is not keyed by the caller.
//!
//! The chain (see each module's doc for its published method and validity range):
//!
//! ```text
//! forecast + telemetry ─> soak ─> wall, oil, battery, fuel temperatures at departure
//!                                  ├─> cranking: battery + starter vs oil drag ─> cranking rpm
//!                                  ├─> compression: IVC → TDC, walls, leakage ─> charge T and p
//!                                  ├─> ignition: delay vs crank-angle window ─> required T
//!                                  ├─> aids: glow plugs, intake heater (block heater via soak)
//!                                  ├─> fuel cold flow: tank/filter T vs cloud point, CFPP, pour point
//!                                  └─> margin = predicted T − required T, with its heat budget
//! ```
#![forbid(unsafe_code)]

// Test support: property tests on a fixed sequence of cases (defined first so every module sees it).
#[cfg(test)]
#[macro_use]
mod fixed_proptest;

// Thermodynamics and engine geometry.
pub mod air;
pub mod compression;
pub mod geometry;
pub mod heat_transfer;
pub mod induction;
pub mod leakage;

// Overnight soak and cranking.
pub mod battery;
pub mod cranking;
pub mod oil;
pub mod soak;

// Ignition and start aids.
pub mod aids;
pub mod evaporation;
pub mod ignition;

// Fuel cold flow.
pub mod fuel;
pub mod gel_risk;

// The assembled assessment and the decisions built on it.
pub mod archetypes;
pub mod assess;
pub mod plug_in_plan;

// Calibration from the fleet's observed starts.
pub mod learning;

pub mod constants;
pub mod error;

pub use error::ModelError;
