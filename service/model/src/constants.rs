//! Physical constants used across the model, each with its source.

/// Universal gas constant, J/(mol K). CODATA 2018, exact in the 2019 SI.
pub const R_UNIVERSAL_J_PER_MOL_K: f64 = 8.314_462_618;

/// Stefan–Boltzmann constant, W/(m² K⁴). Exact in the 2019 SI.
pub const STEFAN_BOLTZMANN_W_PER_M2_K4: f64 = 5.670_374_419e-8;

/// 0 °C in kelvin.
pub const ZERO_CELSIUS_K: f64 = 273.15;

/// Standard atmosphere, Pa.
pub const STANDARD_ATMOSPHERE_PA: f64 = 101_325.0;

/// Converts degrees Celsius to kelvin.
#[inline]
pub fn celsius_to_kelvin(t_c: f64) -> f64 {
    t_c + ZERO_CELSIUS_K
}

/// Converts kelvin to degrees Celsius.
#[inline]
pub fn kelvin_to_celsius(t_k: f64) -> f64 {
    t_k - ZERO_CELSIUS_K
}
