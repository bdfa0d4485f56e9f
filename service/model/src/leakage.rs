//! Compressible flow through an orifice: the blow-by and valve leakage of a cylinder.
//!
//! **What it models.** Steady, one-dimensional, isentropic flow of an ideal gas from a reservoir at
//! (p₀, T₀) through a restriction of effective area C_D·A into a space at p_T, choked or not. The ring
//! pack and valve seats of a cold engine are lumped into one such orifice per cylinder.
//!
//! **Published method.** The standard isentropic-nozzle formulas, Heywood, *Internal Combustion Engine
//! Fundamentals* (1988), Appendix C, eqs. C.8–C.9 (equation numbers from memory; reference.md §6.1):
//! - unchoked (p_T/p₀ > p*): ṁ = C_D A p₀/√(R T₀) · (p_T/p₀)^(1/γ) · {[2γ/(γ−1)][1 − (p_T/p₀)^((γ−1)/γ)]}^½;
//! - choked (p_T/p₀ ≤ p* = (2/(γ+1))^(γ/(γ−1))): ṁ = C_D A p₀/√(R T₀) · γ^½ (2/(γ+1))^((γ+1)/(2(γ−1))).
//!
//! For inner loops, [`FlowConstants`] holds the γ-dependent constants; [`FlowConstants::from_fit`]
//! gets them from degree-6 polynomial fits (relative error < 1e-11 for 1.25 ≤ γ ≤ 1.42, computed here
//! and tested) instead of logarithms and exponentials.
//!
//! **Units.** m², Pa, K, J/(kg K); mass flow in kg/s.
//!
//! **Validity.** Any finite positive state with γ > 1. Flow goes from upstream to downstream only:
//! when the downstream pressure is at or above the upstream one the result is zero (call with the two
//! states swapped for the reverse direction). A non-finite, negative or otherwise non-physical input
//! gives NaN, never a panic (hot path: callers validate).
//!
//! **Estimates.** No authoritative "typical effective leakage area" is published (reference.md §6.2):
//! the area is a calibration parameter, fitted to a measured cranking compression pressure when one
//! is known (`compression::leak_area_for_peak_pressure_m2`).

/// Critical (choking) pressure ratio p* = (2/(γ+1))^(γ/(γ−1)); NaN unless γ > 1 is finite.
#[inline]
pub fn critical_pressure_ratio(gamma: f64) -> f64 {
    FlowConstants::new(gamma).critical_pressure_ratio
}

/// Dimensionless flow function Ψ with ṁ = C_D A p₀/√(R T₀) · Ψ, for a downstream-to-upstream
/// pressure ratio in [0, 1] (choked below p*, zero at 1). NaN for a ratio outside [0, 1] or γ ≤ 1.
#[inline]
pub fn flow_function(pressure_ratio: f64, gamma: f64) -> f64 {
    FlowConstants::new(gamma).flow_function(pressure_ratio)
}

/// The γ-dependent constants of the nozzle formulas, computed once for repeated evaluation at the
/// same γ (the compression integrator holds γ over one crank-angle step).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FlowConstants {
    /// Ratio of specific heats γ.
    pub gamma: f64,
    /// Critical pressure ratio p* = (2/(γ+1))^(γ/(γ−1)).
    pub critical_pressure_ratio: f64,
    /// Choked flow function γ^½ (2/(γ+1))^((γ+1)/(2(γ−1))).
    pub choked_flow_function: f64,
}

impl FlowConstants {
    /// Constants for a γ; every field is NaN unless γ > 1 is finite.
    #[inline]
    pub fn new(gamma: f64) -> Self {
        if !(gamma.is_finite() && gamma > 1.0) {
            return Self {
                gamma: f64::NAN,
                critical_pressure_ratio: f64::NAN,
                choked_flow_function: f64::NAN,
            };
        }
        let ln_base = (2.0 / (gamma + 1.0)).ln();
        let gm1 = gamma - 1.0;
        Self {
            gamma,
            critical_pressure_ratio: (gamma / gm1 * ln_base).exp(),
            choked_flow_function: gamma.sqrt() * ((gamma + 1.0) / (2.0 * gm1) * ln_base).exp(),
        }
    }

    /// Constants from polynomial fits for 1.25 ≤ γ ≤ 1.42 (air from about 200 to 1500 K), with no
    /// logarithm or exponential: degree-6 least-squares fits of the exact formulas in
    /// x = (γ − 1.335)/0.085, relative error below 1e-11 (computed here; tested). Outside the range it
    /// is [`FlowConstants::new`]. For inner loops that re-evaluate γ often.
    #[inline]
    pub fn from_fit(gamma: f64) -> Self {
        if !(1.25..=1.42).contains(&gamma) {
            return Self::new(gamma);
        }
        const P_CRIT: [f64; 7] = [
            5.394_811_532_369_872e-1,
            -1.498_211_528_683_272_3e-2,
            4.510_146_421_419_853e-4,
            -1.419_856_974_685_704e-5,
            4.598_467_081_166_759e-7,
            -1.521_382_818_308_804_2e-8,
            5.097_457_408_802_957e-10,
        ];
        const PSI_CHOKED: [f64; 7] = [
            6.735_120_259_112_851e-1,
            1.499_584_587_727_458_9e-2,
            -4.354_301_086_797_152e-4,
            1.531_826_789_169_797_6e-5,
            -6.118_044_771_026_567e-7,
            2.684_389_267_371_49e-8,
            -1.254_968_587_250_134e-9,
        ];
        let x = (gamma - 1.335) / 0.085;
        let horner = |c: &[f64; 7]| c.iter().rev().fold(0.0, |acc, &ck| acc * x + ck);
        Self {
            gamma,
            critical_pressure_ratio: horner(&P_CRIT),
            choked_flow_function: horner(&PSI_CHOKED),
        }
    }

    /// Flow function Ψ at a downstream-to-upstream pressure ratio in [0, 1]; NaN outside.
    #[inline]
    pub fn flow_function(&self, pressure_ratio: f64) -> f64 {
        if !(0.0..=1.0).contains(&pressure_ratio) {
            return f64::NAN;
        }
        if pressure_ratio <= self.critical_pressure_ratio {
            return self.choked_flow_function;
        }
        // Unchoked: pr^(1/γ) √{[2γ/(γ−1)][1 − pr^((γ−1)/γ)]}, with pr^((γ−1)/γ) = pr / pr^(1/γ).
        let g = self.gamma;
        let pr_1g = (pressure_ratio.ln() / g).exp();
        let expansion = 1.0 - pressure_ratio / pr_1g;
        pr_1g * (2.0 * g / (g - 1.0) * expansion.max(0.0)).sqrt()
    }

    /// Mass flow, kg/s, for already-validated finite inputs (positive pressures and temperature):
    /// zero when downstream ≥ upstream. The checked entry point is [`orifice_mass_flow_kg_s`].
    #[inline]
    pub fn mass_flow_kg_s(
        &self,
        effective_area_m2: f64,
        upstream_p_pa: f64,
        upstream_t_k: f64,
        downstream_p_pa: f64,
        r_j_per_kg_k: f64,
    ) -> f64 {
        if downstream_p_pa >= upstream_p_pa {
            return 0.0;
        }
        // Choked test without a division (the common case in a compressing cylinder).
        let psi = if downstream_p_pa <= self.critical_pressure_ratio * upstream_p_pa {
            self.choked_flow_function
        } else {
            self.flow_function(downstream_p_pa / upstream_p_pa)
        };
        effective_area_m2 * upstream_p_pa / (r_j_per_kg_k * upstream_t_k).sqrt() * psi
    }
}

/// Mass flow through an orifice of effective area C_D·A from an upstream reservoir to a downstream
/// space, kg/s. Choked or unchoked as the pressure ratio requires; zero when downstream ≥ upstream or
/// the area is zero; NaN for non-physical input (negative area or pressure, T ≤ 0, γ ≤ 1, R ≤ 0, or
/// anything non-finite).
#[inline]
pub fn orifice_mass_flow_kg_s(
    effective_area_m2: f64,
    upstream_p_pa: f64,
    upstream_t_k: f64,
    downstream_p_pa: f64,
    gamma: f64,
    r_j_per_kg_k: f64,
) -> f64 {
    let finite = effective_area_m2.is_finite()
        && upstream_p_pa.is_finite()
        && upstream_t_k.is_finite()
        && downstream_p_pa.is_finite()
        && gamma.is_finite()
        && r_j_per_kg_k.is_finite();
    if !finite
        || effective_area_m2 < 0.0
        || upstream_p_pa <= 0.0
        || upstream_t_k <= 0.0
        || downstream_p_pa < 0.0
        || gamma <= 1.0
        || r_j_per_kg_k <= 0.0
    {
        return f64::NAN;
    }
    if effective_area_m2 == 0.0 {
        return 0.0;
    }
    FlowConstants::new(gamma).mass_flow_kg_s(
        effective_area_m2,
        upstream_p_pa,
        upstream_t_k,
        downstream_p_pa,
        r_j_per_kg_k,
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Unchoked formula written out literally as in Heywood App. C (reference.md §6.1), no rewriting.
    fn unchoked_literal(pr: f64, g: f64) -> f64 {
        pr.powf(1.0 / g) * ((2.0 * g / (g - 1.0)) * (1.0 - pr.powf((g - 1.0) / g))).sqrt()
    }

    #[test]
    fn critical_ratio_and_choked_function_gamma_1_4() {
        // reference.md §6.1, computed there for γ = 1.4: p* = 0.528282, choked Ψ = 0.684731.
        assert!((critical_pressure_ratio(1.4) - 0.528282).abs() < 1e-6);
        assert!((flow_function(0.1, 1.4) - 0.684731).abs() < 1e-6);
        assert!((flow_function(0.0, 1.4) - 0.684731).abs() < 1e-6);
        // The two forms agree at the critical ratio (reference.md §6.1, verified there numerically).
        let pstar = critical_pressure_ratio(1.4);
        assert!((unchoked_literal(pstar, 1.4) - 0.684731).abs() < 1e-6);
        assert!((flow_function(pstar * 1.000001, 1.4) - 0.684731).abs() < 1e-6);
    }

    #[test]
    fn choked_check_value_5_mpa() {
        // reference.md §6.1, computed there: A = 1 mm², C_D = 1, p₀ = 5 MPa, T₀ = 700 K, R = 287.05,
        // γ = 1.4 → ṁ = 7.638e-3 kg/s.
        let m = orifice_mass_flow_kg_s(1e-6, 5e6, 700.0, 101_325.0, 1.4, 287.05);
        assert!((m - 7.638e-3).abs() < 0.001e-3, "{m}");
    }

    #[test]
    fn check_value_200_kpa_to_atmosphere() {
        // reference.md §6.1, computed there: A = 1 mm², p₀ = 200 kPa, p_T = 101.325 kPa, T₀ = 300 K →
        // 4.662e-4 kg/s (p_T/p₀ = 0.507 < p*, so choked).
        let m = orifice_mass_flow_kg_s(1e-6, 200e3, 300.0, 101_325.0, 1.4, 287.05);
        assert!((m - 4.662e-4).abs() < 0.006e-4, "{m}");
    }

    #[test]
    fn fitted_constants_match_exact() {
        // The polynomial fits against the exact formulas over their range, and the fallback outside.
        for i in 0..=1000 {
            let g = 1.25 + 0.17 * f64::from(i) / 1000.0;
            let (fit, exact) = (FlowConstants::from_fit(g), FlowConstants::new(g));
            assert!(
                (fit.critical_pressure_ratio / exact.critical_pressure_ratio - 1.0).abs() < 1e-11,
                "{g}"
            );
            assert!(
                (fit.choked_flow_function / exact.choked_flow_function - 1.0).abs() < 1e-11,
                "{g}"
            );
        }
        assert_eq!(FlowConstants::from_fit(1.6), FlowConstants::new(1.6));
        assert!(FlowConstants::from_fit(f64::NAN).gamma.is_nan());
    }

    #[test]
    fn unchoked_matches_literal_formula() {
        // Heywood App. C unchoked formula (reference.md §6.1) at a few ratios and γ.
        for g in [1.3, 1.35, 1.4] {
            for pr in [0.6, 0.8, 0.95, 0.999] {
                assert!((flow_function(pr, g) - unchoked_literal(pr, g)).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn no_flow_cases_and_hostile_inputs() {
        assert_eq!(
            orifice_mass_flow_kg_s(1e-6, 1e5, 300.0, 1e5, 1.4, 287.05),
            0.0
        );
        assert_eq!(
            orifice_mass_flow_kg_s(1e-6, 1e5, 300.0, 2e5, 1.4, 287.05),
            0.0
        );
        assert_eq!(
            orifice_mass_flow_kg_s(0.0, 5e6, 300.0, 1e5, 1.4, 287.05),
            0.0
        );
        for bad in [f64::NAN, f64::INFINITY, -1.0] {
            assert!(orifice_mass_flow_kg_s(bad, 5e6, 700.0, 1e5, 1.4, 287.05).is_nan());
            assert!(orifice_mass_flow_kg_s(1e-6, bad, 700.0, 1e5, 1.4, 287.05).is_nan());
            assert!(orifice_mass_flow_kg_s(1e-6, 5e6, bad, 1e5, 1.4, 287.05).is_nan());
            assert!(orifice_mass_flow_kg_s(1e-6, 5e6, 700.0, bad, 1.4, 287.05).is_nan());
            assert!(orifice_mass_flow_kg_s(1e-6, 5e6, 700.0, 1e5, bad, 287.05).is_nan());
            assert!(orifice_mass_flow_kg_s(1e-6, 5e6, 700.0, 1e5, 1.4, bad).is_nan());
        }
        assert!(orifice_mass_flow_kg_s(1e-6, 5e6, 700.0, 1e5, 1.0, 287.05).is_nan());
        assert!(flow_function(1.5, 1.4).is_nan());
        assert!(critical_pressure_ratio(0.9).is_nan());
    }

    fixed_proptest! {
        #[test]
        fn flow_laws(a in 1e-8f64..1e-4, p0 in 1e4f64..1e7, t0 in 200.0f64..1500.0,
                     frac in 0.0f64..1.0, g in 1.25f64..1.45) {
            let pt = frac * p0;
            let m = orifice_mass_flow_kg_s(a, p0, t0, pt, g, 287.05);
            prop_assert!(m >= 0.0);
            // Linear in area; rises as the downstream pressure falls, constant once choked.
            let m2 = orifice_mass_flow_kg_s(2.0 * a, p0, t0, pt, g, 287.05);
            prop_assert!((m2 - 2.0 * m).abs() <= 1e-12 * m2.max(1e-30));
            let lower = orifice_mass_flow_kg_s(a, p0, t0, 0.9 * pt, g, 287.05);
            prop_assert!(lower >= m * (1.0 - 1e-12));
            // Never more than the choked flow.
            let choked = orifice_mass_flow_kg_s(a, p0, t0, 0.0, g, 287.05);
            prop_assert!(m <= choked * (1.0 + 1e-12));
        }
    }
}
