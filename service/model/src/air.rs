//! Thermodynamic properties of dry air (ideal gas with variable cp, plus a second-virial real-gas
//! correction) and isentropic compression.
//!
//! **What it models.** Dry air as an ideal-gas mixture of N2, O2, Ar and CO2 with the U.S. Standard
//! Atmosphere 1976 mole fractions (0.78084, 0.209476, 0.00934, 0.000314, renormalised to sum to 1;
//! reference.md §1.4), which gives M = 28.9648 g/mol and R = 287.054 J/(kg K).
//!
//! **Published method.** Each species follows the NASA 7-coefficient polynomials (reference.md §1.1) with
//! the Burcat 2015 coefficients ("Extended Third Millennium Thermodynamic Database", Goos, Burcat &
//! Ruscic; BURCAT.THR of 29 June 2015; reference.md §1.2), valid 200–1000–6000 K. The mixture is the
//! mole-weighted sum of the species, so the mixture is itself a NASA polynomial; its entropy includes
//! the ideal entropy of mixing (−R Σ xᵢ ln xᵢ), so [`standard_entropy_j_per_kg_k`] is the entropy of air
//! at a total pressure of 1 bar. Enthalpy is on the NASA absolute basis (formation enthalpy of the
//! elements in their reference state at 298.15 K is zero; CO2 brings its formation enthalpy, weighted by
//! its tiny mole fraction).
//!
//! The isentropic change of state with temperature-dependent cp is solved exactly on the entropy
//! function: s°(T2) − s°(T1) = R ln(p2/p1), and for a volume ratio r with p2/p1 = r T2/T1 (reference.md
//! §2), by a safeguarded Newton iteration.
//!
//! **Units.** Kelvin, pascal, J/kg, J/(kg K). Ratios are dimensionless.
//!
//! **Validity.** 200–6000 K (the range of the fits). The plain property functions evaluate the
//! polynomial wherever they are called (outside the range it is an extrapolation, NaN in gives NaN
//! out); the functions that return a `Result` check the range. The real-gas functions also require
//! densities up to 100 kg/m³ and pressures up to 50 MPa (second-virial truncation).
//!
//! **Real air.** Real air departs from the ideal gas at end-of-compression densities (about
//! 20–26 kg/m³ at r = 17). Compared with the Lemmon, Jacobsen, Penoncello & Friend (2000) reference
//! equation of state for air, as implemented in CoolProp 8.0.0 (PyPI package `CoolProp`, HEOS backend;
//! `tests/data/make_real_gas_air.py`), the ideal-gas isentropic end temperature at r = 17 from
//! 101.325 kPa is **7–8 K too low** (8.3 K from −40 °C, 7.4 K from +20 °C) and the end pressure 2.6–3.3 %
//! too low; almost all of it is the density effect (the same equation of state in its dilute limit agrees
//! with the ideal path here within 0.25 K). A one-off check with CoolProp's Peng–Robinson and SRK
//! N2/O2/Ar mixtures (not in the script) gave 7.1 K at −40 °C as well.
//! That exceeds the ~2 K that matters for the margins the model reports, so **a correction is applied**:
//! the gas follows the second-virial equation of state p = ρRT(1 + β(T)ρ) (β = B/M), with B(T) fitted
//! here to the reference equation of state (5 terms in 100 K/T, 200–1500 K, residual ≤ 0.14 cm³/mol;
//! `tests/data/air_second_virial.csv`). Its residual entropy, internal energy and cv follow exactly from
//! the virial form (Helmholtz residual RTβρ). With it the isentropic end state matches the reference
//! equation of state within 0.4 K and 0.2 % (`tests/real_gas.rs`); the truncation at B is taken as
//! adequate up to about 100 kg/m³ (estimate: the third virial term grows past ~0.5 % of Z there).
//!
//! So [`isentropic_compression`] and [`isentropic_temperature_real_gas_k`] are real-gas (what the
//! compression integrator follows, so a lossless compression reproduces them), while
//! [`isentropic_compression_ideal_gas`] and [`isentropic_temperature_k`] are the ideal-gas paths of
//! reference.md §2. The property functions cp, cv, γ, h, u, s° are ideal-gas (zero-density) values.
//!
//! **Estimates.** No tunable defaults: every number is a published coefficient or derived from one (the
//! B(T) fit is computed here from the reference equation of state). The mixture CO2 fraction is the
//! 1976 value (modern air has about 0.00042); the effect on cp is below 1e-4 relative.

use crate::error::{ModelError, check_range};

/// Universal gas constant, J/(mol K): CODATA 2018, exact in the 2019 SI. Kept local so this module
/// depends on nothing but the error type.
const R_UNIVERSAL_J_PER_MOL_K: f64 = 8.314_462_618;

/// Lowest temperature of the NASA/Burcat fits, K.
pub const AIR_MIN_T_K: f64 = 200.0;
/// Highest temperature of the NASA/Burcat fits, K.
pub const AIR_MAX_T_K: f64 = 6000.0;
/// Temperature at which the fits switch from the low to the high coefficient set, K.
const T_SWITCH_K: f64 = 1000.0;

/// One species: molar mass and the two NASA 7-coefficient sets (low 200–1000 K, high 1000–6000 K).
#[derive(Debug, Clone, Copy)]
struct Species {
    molar_mass_g_per_mol: f64,
    low: [f64; 7],
    high: [f64; 7],
}

/// N2, Burcat G 8/02 (reference.md §1.2).
const N2: Species = Species {
    molar_mass_g_per_mol: 28.013_40,
    low: [
        3.531_005_28E+00,
        -1.236_609_88E-04,
        -5.029_994_33E-07,
        2.435_306_12E-09,
        -1.408_812_35E-12,
        -1.046_976_28E+03,
        2.967_470_38E+00,
    ],
    high: [
        2.952_576_37E+00,
        1.396_900_40E-03,
        -4.926_316_03E-07,
        7.860_101_95E-11,
        -4.607_552_04E-15,
        -9.239_486_88E+02,
        5.871_887_62E+00,
    ],
};

/// O2, Burcat TPIS89 corrected by McBride (NASA TP-2002-211556) (reference.md §1.2).
const O2: Species = Species {
    molar_mass_g_per_mol: 31.998_80,
    low: [
        3.782_456_36E+00,
        -2.996_734_16E-03,
        9.847_302_01E-06,
        -9.681_295_09E-09,
        3.243_728_37E-12,
        -1.063_943_56E+03,
        3.657_675_73E+00,
    ],
    high: [
        3.660_960_65E+00,
        6.563_658_11E-04,
        -1.411_496_27E-07,
        2.057_979_35E-11,
        -1.299_134_36E-15,
        -1.215_977_18E+03,
        3.415_362_79E+00,
    ],
};

/// Ar, Burcat g 5/97 (reference.md §1.2): monatomic, cp = 5/2 R at every temperature.
const AR: Species = Species {
    molar_mass_g_per_mol: 39.948_00,
    low: [2.5, 0.0, 0.0, 0.0, 0.0, -7.453_750_00E+02, 4.379_674_91E+00],
    high: [2.5, 0.0, 0.0, 0.0, 0.0, -7.453_750_00E+02, 4.379_674_91E+00],
};

/// CO2, Burcat L 7/88 (reference.md §1.2).
const CO2: Species = Species {
    molar_mass_g_per_mol: 44.009_80,
    low: [
        2.356_813_0E+00,
        8.984_129_9E-03,
        -7.122_063_2E-06,
        2.457_300_8E-09,
        -1.428_854_8E-13,
        -4.837_197_1E+04,
        9.900_903_5E+00,
    ],
    high: [
        4.636_511_1E+00,
        2.741_456_9E-03,
        -9.958_975_9E-07,
        1.603_866_6E-10,
        -9.161_985_7E-15,
        -4.902_490_4E+04,
        -1.934_895_5E+00,
    ],
};

/// Species of dry air and their U.S. Standard Atmosphere 1976 mole fractions before renormalising
/// (reference.md §1.4, from memory there; they sum to 0.99997).
const SPECIES: [(Species, f64); 4] = [
    (N2, 0.78084),
    (O2, 0.209476),
    (AR, 0.00934),
    (CO2, 0.000314),
];

/// Sum of the raw mole fractions, used to renormalise them.
const MOLE_FRACTION_SUM: f64 = {
    let mut sum = 0.0;
    let mut i = 0;
    while i < SPECIES.len() {
        sum += SPECIES[i].1;
        i += 1;
    }
    sum
};

/// Ideal entropy of mixing of the renormalised composition, −Σ xᵢ ln xᵢ (dimensionless, per R).
/// `ln` is not available in const context, so the value is written out; a test recomputes it.
const MIXING_ENTROPY_OVER_R: f64 = 0.566_779_487_729_927_6;

/// Molar mass of the renormalised dry-air mixture, kg/mol (≈ 0.0289648; reference.md §1.4 gives
/// 28.965 g/mol, computed there).
pub const AIR_MOLAR_MASS_KG_PER_MOL: f64 = {
    let mut m = 0.0;
    let mut i = 0;
    while i < SPECIES.len() {
        m += SPECIES[i].1 / MOLE_FRACTION_SUM * SPECIES[i].0.molar_mass_g_per_mol;
        i += 1;
    }
    m * 1e-3
};

/// Specific gas constant of dry air, J/(kg K) (≈ 287.054; reference.md §1.4 gives 287.05).
pub const R_AIR_J_PER_KG_K: f64 = R_UNIVERSAL_J_PER_MOL_K / AIR_MOLAR_MASS_KG_PER_MOL;

/// Mole-weighted mixture coefficients of one range (`high = false` for 200–1000 K), with the entropy
/// of mixing folded into a7.
const fn mixture_coefficients(high: bool) -> [f64; 7] {
    let mut a = [0.0; 7];
    let mut i = 0;
    while i < SPECIES.len() {
        let x = SPECIES[i].1 / MOLE_FRACTION_SUM;
        let c = if high {
            SPECIES[i].0.high
        } else {
            SPECIES[i].0.low
        };
        let mut k = 0;
        while k < 7 {
            a[k] += x * c[k];
            k += 1;
        }
        i += 1;
    }
    a[6] += MIXING_ENTROPY_OVER_R;
    a
}

/// Mixture coefficients, 200–1000 K.
const AIR_LOW: [f64; 7] = mixture_coefficients(false);
/// Mixture coefficients, 1000–6000 K.
const AIR_HIGH: [f64; 7] = mixture_coefficients(true);

#[inline]
fn coefficients(t_k: f64) -> &'static [f64; 7] {
    if t_k < T_SWITCH_K {
        &AIR_LOW
    } else {
        &AIR_HIGH
    }
}

/// cp/R of a coefficient set (NASA form, reference.md §1.1).
#[inline]
fn cp_over_r(a: &[f64; 7], t_k: f64) -> f64 {
    a[0] + t_k * (a[1] + t_k * (a[2] + t_k * (a[3] + t_k * a[4])))
}

/// h/R (kelvin) of a coefficient set.
#[inline]
fn h_over_r_k(a: &[f64; 7], t_k: f64) -> f64 {
    t_k * (a[0] + t_k * (a[1] / 2.0 + t_k * (a[2] / 3.0 + t_k * (a[3] / 4.0 + t_k * a[4] / 5.0))))
        + a[5]
}

/// s°/R of a coefficient set at 1 bar.
#[inline]
fn s_over_r(a: &[f64; 7], t_k: f64) -> f64 {
    a[0] * t_k.ln()
        + t_k * (a[1] + t_k * (a[2] / 2.0 + t_k * (a[3] / 3.0 + t_k * a[4] / 4.0)))
        + a[6]
}

/// Isobaric specific heat of air, J/(kg K).
#[inline]
pub fn cp_j_per_kg_k(t_k: f64) -> f64 {
    R_AIR_J_PER_KG_K * cp_over_r(coefficients(t_k), t_k)
}

/// Isochoric specific heat of air, J/(kg K): cv = cp − R for an ideal gas.
#[inline]
pub fn cv_j_per_kg_k(t_k: f64) -> f64 {
    R_AIR_J_PER_KG_K * (cp_over_r(coefficients(t_k), t_k) - 1.0)
}

/// Ratio of specific heats cp/cv of air (dimensionless).
#[inline]
pub fn gamma(t_k: f64) -> f64 {
    let cp_r = cp_over_r(coefficients(t_k), t_k);
    cp_r / (cp_r - 1.0)
}

/// Specific enthalpy of air on the NASA absolute basis, J/kg.
#[inline]
pub fn enthalpy_j_per_kg(t_k: f64) -> f64 {
    R_AIR_J_PER_KG_K * h_over_r_k(coefficients(t_k), t_k)
}

/// Specific internal energy of air, J/kg: u = h − R T.
#[inline]
pub fn internal_energy_j_per_kg(t_k: f64) -> f64 {
    R_AIR_J_PER_KG_K * (h_over_r_k(coefficients(t_k), t_k) - t_k)
}

/// Specific entropy of air at a total pressure of 1 bar, J/(kg K), including the entropy of mixing.
/// At another pressure: s(T, p) = s°(T) − R ln(p / 1 bar).
#[inline]
pub fn standard_entropy_j_per_kg_k(t_k: f64) -> f64 {
    R_AIR_J_PER_KG_K * s_over_r(coefficients(t_k), t_k)
}

/// Temperature after an isentropic pressure change (variable cp, solved on s°).
///
/// Solves s°(T2) − s°(T1) = R ln(pressure_ratio), pressure_ratio = p2/p1.
///
/// # Errors
/// `OutOfRange` if `t1_k` is outside 200–6000 K, if `pressure_ratio` is not a finite number in
/// 1e-6–1e6, or if the end temperature would leave 200–6000 K.
pub fn isentropic_temperature_k(t1_k: f64, pressure_ratio: f64) -> Result<f64, ModelError> {
    check_range(
        "t1_k",
        t1_k,
        AIR_MIN_T_K,
        AIR_MAX_T_K,
        "NASA/Burcat air fits cover 200–6000 K",
    )?;
    check_range(
        "pressure_ratio",
        pressure_ratio,
        1e-6,
        1e6,
        "must be a finite positive pressure ratio p2/p1 in 1e-6–1e6",
    )?;
    // Dimensionless: s°(T2)/R = s°(T1)/R + ln(p2/p1); d(s°/R)/dT = (cp/R)/T.
    let target = s_over_r(coefficients(t1_k), t1_k) + pressure_ratio.ln();
    solve_increasing(
        |t| {
            let a = coefficients(t);
            (s_over_r(a, t), cp_over_r(a, t) / t)
        },
        target,
        // Constant-γ first guess: T2 = T1 (p2/p1)^((γ−1)/γ).
        t1_k * pressure_ratio.powf(1.0 - 1.0 / gamma(t1_k)),
    )
    .ok_or(ModelError::OutOfRange {
        quantity: "pressure_ratio",
        value: pressure_ratio,
        reason: "end temperature would leave the 200–6000 K range of the air fits",
    })
}

/// Second virial coefficient fit, m³/mol: B(T) = Σ cₖ (100 K/T)^k, k = 0..4. Fitted here to the
/// Lemmon et al. (2000) reference equation of state for air via CoolProp 8.0.0 over 200–1500 K,
/// residual ≤ 0.14 cm³/mol (`tests/data/make_real_gas_air.py`).
const B_FIT_M3_PER_MOL: [f64; 5] = [
    3.077410423e-05,
    3.194313904e-06,
    -6.328277236e-04,
    1.100284553e-03,
    -8.176868905e-04,
];
/// Reference temperature of the B fit, K.
const B_FIT_T0_K: f64 = 100.0;
/// Highest density at which the second-virial truncation is trusted, kg/m³ (about 4× the densities
/// of an r = 17 compression; beyond it the third virial term grows past ~0.5 % of Z).
pub const REAL_GAS_MAX_DENSITY_KG_PER_M3: f64 = 100.0;
/// Highest pressure accepted by the real-gas functions, Pa.
const REAL_GAS_MAX_P_PA: f64 = 50e6;

/// Second virial coefficient of air, m³/mol (fit to the Lemmon et al. 2000 reference equation of state,
/// 200–1500 K; it levels off towards its high-temperature limit outside).
#[inline]
pub fn second_virial_m3_per_mol(t_k: f64) -> f64 {
    virial_terms(t_k).0 * AIR_MOLAR_MASS_KG_PER_MOL
}

/// Per-mass virial terms (β, T β', T² β'') in m³/kg, with β = B/M.
#[inline]
fn virial_terms(t_k: f64) -> (f64, f64, f64) {
    let x = B_FIT_T0_K / t_k;
    let c = &B_FIT_M3_PER_MOL;
    let (t1, t2, t3, t4) = (
        c[1] * x,
        c[2] * x * x,
        c[3] * x * x * x,
        c[4] * x * x * x * x,
    );
    let b = c[0] + t1 + t2 + t3 + t4;
    // With x = T0/T: T dB/dT = −Σ k cₖ x^k and T² d²B/dT² = Σ k(k+1) cₖ x^k.
    let t_db = -(t1 + 2.0 * t2 + 3.0 * t3 + 4.0 * t4);
    let t2_d2b = 2.0 * t1 + 6.0 * t2 + 12.0 * t3 + 20.0 * t4;
    let per_kg = 1.0 / AIR_MOLAR_MASS_KG_PER_MOL;
    (b * per_kg, t_db * per_kg, t2_d2b * per_kg)
}

/// Compressibility factor Z = p/(ρRT) = 1 + βρ of air at a temperature and density.
#[inline]
pub fn compressibility_factor(t_k: f64, density_kg_per_m3: f64) -> f64 {
    1.0 + virial_terms(t_k).0 * density_kg_per_m3
}

/// Pressure of air at a temperature and density (second-virial equation of state), Pa.
#[inline]
pub fn pressure_pa(t_k: f64, density_kg_per_m3: f64) -> f64 {
    density_kg_per_m3 * R_AIR_J_PER_KG_K * t_k * compressibility_factor(t_k, density_kg_per_m3)
}

/// Density of air at a temperature and pressure (second-virial equation of state), kg/m³.
///
/// # Errors
/// `OutOfRange` if `t_k` is outside 200–6000 K, `p_pa` outside 1 Pa–50 MPa, or the density would
/// exceed [`REAL_GAS_MAX_DENSITY_KG_PER_M3`].
pub fn density_kg_per_m3(t_k: f64, p_pa: f64) -> Result<f64, ModelError> {
    check_range(
        "t_k",
        t_k,
        AIR_MIN_T_K,
        AIR_MAX_T_K,
        "NASA/Burcat air fits cover 200–6000 K",
    )?;
    check_range(
        "p_pa",
        p_pa,
        1.0,
        REAL_GAS_MAX_P_PA,
        "real-gas air is evaluated from 1 Pa to 50 MPa",
    )?;
    let v = specific_volume_m3_per_kg(t_k, p_pa).ok_or(ModelError::OutOfRange {
        quantity: "p_pa",
        value: p_pa,
        reason: "density beyond the second-virial equation of state (about 100 kg/m³)",
    })?;
    Ok(1.0 / v)
}

/// Specific volume from (T, p): the gas root of p v² − RT v − RTβ = 0. `None` past the validity limit.
#[inline]
fn specific_volume_m3_per_kg(t_k: f64, p_pa: f64) -> Option<f64> {
    let rt = R_AIR_J_PER_KG_K * t_k;
    let beta = virial_terms(t_k).0;
    let disc = rt * rt + 4.0 * p_pa * rt * beta;
    // NaN or negative: no gas root.
    if disc.is_nan() || disc < 0.0 {
        return None;
    }
    // No cancellation worth guarding: RT and √disc have the same sign and similar size.
    let v = (rt + disc.sqrt()) / (2.0 * p_pa);
    (v.is_finite() && v > 0.0 && 1.0 / v <= REAL_GAS_MAX_DENSITY_KG_PER_M3).then_some(v)
}

/// Real-gas state at (T, ρ), ρ in kg/m³ (v = 1/ρ in the formulas), as used by the compression
/// integrator.
#[derive(Debug, Clone, Copy)]
pub(crate) struct RealGasState {
    /// Pressure, Pa: p = (RT/v)(1 + β/v).
    pub(crate) p_pa: f64,
    /// Isochoric specific heat, J/(kg K): cv = cv°(T) − R(2Tβ' + T²β'')/v.
    pub(crate) cv_j_per_kg_k: f64,
    /// (∂p/∂T)_v = (R/v)(1 + (β + Tβ')/v), Pa/K.
    pub(crate) dp_dt_pa_per_k: f64,
    /// (∂p/∂v)_T = −(RT/v²)(1 + 2β/v), Pa per m³/kg.
    pub(crate) dp_dv_pa_kg_per_m3: f64,
}

/// Second-virial real-gas state terms at a temperature and density ρ = 1/v.
#[inline]
pub(crate) fn real_gas_state(t_k: f64, rho: f64) -> RealGasState {
    let (b, t_db, t2_d2b) = virial_terms(t_k);
    let r_rho = R_AIR_J_PER_KG_K * rho;
    RealGasState {
        p_pa: r_rho * t_k * (1.0 + b * rho),
        cv_j_per_kg_k: cv_j_per_kg_k(t_k) - R_AIR_J_PER_KG_K * (2.0 * t_db + t2_d2b) * rho,
        dp_dt_pa_per_k: r_rho * (1.0 + (b + t_db) * rho),
        dp_dv_pa_kg_per_m3: -r_rho * t_k * rho * (1.0 + 2.0 * b * rho),
    }
}

/// Real-gas specific internal energy at (T, v), J/kg: u = u°(T) − R T (Tβ')/v (second-virial form).
#[cfg(test)]
pub(crate) fn real_gas_internal_energy_j_per_kg(t_k: f64, v_m3_per_kg: f64) -> f64 {
    let (_, t_db, _) = virial_terms(t_k);
    internal_energy_j_per_kg(t_k) - R_AIR_J_PER_KG_K * t_k * t_db / v_m3_per_kg
}

/// Real-gas specific enthalpy at (T, v), J/kg: h = h°(T) + R T (β − Tβ')/v (second-virial form).
#[inline]
pub(crate) fn real_gas_enthalpy_j_per_kg(t_k: f64, v_m3_per_kg: f64) -> f64 {
    let (b, t_db, _) = virial_terms(t_k);
    enthalpy_j_per_kg(t_k) + R_AIR_J_PER_KG_K * t_k * (b - t_db) / v_m3_per_kg
}

/// Real-gas specific entropy over R at (T, v), dimensionless, on the same basis as s°/R at 1 bar:
/// s/R = s°/R − ln(RT/(v·1 bar)) − (β + Tβ')/v.
#[inline]
fn real_entropy_over_r(t_k: f64, v_m3_per_kg: f64) -> f64 {
    let (b, t_db, _) = virial_terms(t_k);
    s_over_r(coefficients(t_k), t_k)
        - (R_AIR_J_PER_KG_K * t_k / (v_m3_per_kg * 1e5)).ln()
        - (b + t_db) / v_m3_per_kg
}

/// Isentropic compression by a volume ratio: returns (t2_k, p2_pa). Variable cp, real gas.
///
/// `volume_ratio` is V1/V2 (> 1 compresses). The gas follows the second-virial equation of state (see
/// the module doc): from (T1, p1) the density follows, the end density is r times it, and T2 solves
/// s(T2, v2) = s(T1, v1) with the exact virial entropy. About 7–8 K hotter than the ideal-gas
/// [`isentropic_compression_ideal_gas`] at r = 17 from 1 atm.
///
/// # Errors
/// `OutOfRange` if `t1_k` is outside 200–6000 K, `p1_pa` outside 1 Pa–50 MPa, `volume_ratio` outside
/// 0.01–100, or if the end state would leave 200–6000 K or exceed
/// [`REAL_GAS_MAX_DENSITY_KG_PER_M3`].
pub fn isentropic_compression(
    t1_k: f64,
    p1_pa: f64,
    volume_ratio: f64,
) -> Result<(f64, f64), ModelError> {
    check_range(
        "volume_ratio",
        volume_ratio,
        0.01,
        100.0,
        "must be a finite volume ratio V1/V2 in 0.01–100",
    )?;
    let v1 = 1.0 / density_kg_per_m3(t1_k, p1_pa)?;
    let v2 = v1 / volume_ratio;
    if 1.0 / v2 > REAL_GAS_MAX_DENSITY_KG_PER_M3 {
        return Err(ModelError::OutOfRange {
            quantity: "volume_ratio",
            value: volume_ratio,
            reason: "end density beyond the second-virial equation of state (about 100 kg/m³)",
        });
    }
    let target = real_entropy_over_r(t1_k, v1);
    let rho2 = 1.0 / v2;
    let t2_k = solve_increasing(
        |t| {
            // (∂s/∂T)_v = cv/T, real cv.
            let cv = real_gas_state(t, rho2).cv_j_per_kg_k;
            (real_entropy_over_r(t, v2), cv / (R_AIR_J_PER_KG_K * t))
        },
        target,
        t1_k * volume_ratio.powf(gamma(t1_k) - 1.0),
    )
    .ok_or(ModelError::OutOfRange {
        quantity: "volume_ratio",
        value: volume_ratio,
        reason: "end temperature would leave the 200–6000 K range of the air fits",
    })?;
    Ok((t2_k, pressure_pa(t2_k, 1.0 / v2)))
}

/// Temperature after an isentropic change from (T1, p1) to pressure p2, real gas (second-virial
/// equation of state; the ideal-gas counterpart is [`isentropic_temperature_k`]).
///
/// # Errors
/// `OutOfRange` if `t1_k` is outside 200–6000 K, either pressure outside 1 Pa–50 MPa, or if the end
/// state would leave 200–6000 K or exceed [`REAL_GAS_MAX_DENSITY_KG_PER_M3`].
pub fn isentropic_temperature_real_gas_k(
    t1_k: f64,
    p1_pa: f64,
    p2_pa: f64,
) -> Result<f64, ModelError> {
    isentropic_temperature_real_gas_from_guess_k(t1_k, p1_pa, p2_pa, f64::NAN)
}

/// [`isentropic_temperature_real_gas_k`] starting its Newton iteration from `guess_k` (NaN: the
/// constant-γ estimate); a close guess saves iterations in the compression integrator.
pub(crate) fn isentropic_temperature_real_gas_from_guess_k(
    t1_k: f64,
    p1_pa: f64,
    p2_pa: f64,
    guess_k: f64,
) -> Result<f64, ModelError> {
    let v1 = 1.0 / density_kg_per_m3(t1_k, p1_pa)?;
    check_range(
        "p2_pa",
        p2_pa,
        1.0,
        REAL_GAS_MAX_P_PA,
        "real-gas air is evaluated from 1 Pa to 50 MPa",
    )?;
    let target = real_entropy_over_r(t1_k, v1);
    let out_of_range = ModelError::OutOfRange {
        quantity: "p2_pa",
        value: p2_pa,
        reason: "end state would leave 200–6000 K or the second-virial equation of state",
    };
    // s(T, p2) is increasing in T.
    let t2_k = solve_increasing(
        |t| match specific_volume_m3_per_kg(t, p2_pa) {
            // (∂s/∂T)_p = cp/T with the real cp = cv + T (∂p/∂T)_v² / (−(∂p/∂v)_T).
            Some(v) => {
                let g = real_gas_state(t, 1.0 / v);
                let cp = g.cv_j_per_kg_k
                    - t * g.dp_dt_pa_per_k * g.dp_dt_pa_per_k / g.dp_dv_pa_kg_per_m3;
                (real_entropy_over_r(t, v), cp / (R_AIR_J_PER_KG_K * t))
            }
            // Too dense at this T (only at low T and high p): "entropy too low", so bisection moves up.
            None => (f64::NEG_INFINITY, f64::INFINITY),
        },
        target,
        if guess_k.is_finite() {
            guess_k
        } else {
            t1_k * (p2_pa / p1_pa).powf(1.0 - 1.0 / gamma(t1_k))
        },
    );
    match t2_k {
        Some(t) if specific_volume_m3_per_kg(t, p2_pa).is_some() => Ok(t),
        _ => Err(out_of_range),
    }
}

/// Isentropic compression of the IDEAL gas by a volume ratio: returns (t2_k, p2_pa). Variable cp.
/// This is the path of reference.md §2; the model itself uses the real-gas [`isentropic_compression`].
///
/// `volume_ratio` is V1/V2 (> 1 compresses). Solves s°(T2) − s°(T1) = R ln(p2/p1) with
/// p2/p1 = r T2/T1, i.e. ∫ cv/T dT = R ln r.
///
/// # Errors
/// `OutOfRange` if `t1_k` is outside 200–6000 K, `p1_pa` outside 1 Pa–1 GPa, `volume_ratio` outside
/// 0.01–100, or if the end temperature would leave 200–6000 K.
pub fn isentropic_compression_ideal_gas(
    t1_k: f64,
    p1_pa: f64,
    volume_ratio: f64,
) -> Result<(f64, f64), ModelError> {
    check_range(
        "t1_k",
        t1_k,
        AIR_MIN_T_K,
        AIR_MAX_T_K,
        "NASA/Burcat air fits cover 200–6000 K",
    )?;
    check_range(
        "p1_pa",
        p1_pa,
        1.0,
        1e9,
        "must be a positive pressure up to 1 GPa",
    )?;
    check_range(
        "volume_ratio",
        volume_ratio,
        0.01,
        100.0,
        "must be a finite volume ratio V1/V2 in 0.01–100",
    )?;
    // Dimensionless: s°/R − ln T is a function of T alone with derivative (cp/R − 1)/T = (cv/R)/T.
    let target = s_over_r(coefficients(t1_k), t1_k) - t1_k.ln() + volume_ratio.ln();
    let t2_k = solve_increasing(
        |t| {
            let a = coefficients(t);
            (s_over_r(a, t) - t.ln(), (cp_over_r(a, t) - 1.0) / t)
        },
        target,
        t1_k * volume_ratio.powf(gamma(t1_k) - 1.0),
    )
    .ok_or(ModelError::OutOfRange {
        quantity: "volume_ratio",
        value: volume_ratio,
        reason: "end temperature would leave the 200–6000 K range of the air fits",
    })?;
    Ok((t2_k, p1_pa * volume_ratio * t2_k / t1_k))
}

/// Finds T in [200, 6000] K with f(T) = target for an increasing f, given `f_and_slope(T) = (f, f')`.
/// Newton steps inside a shrinking bracket, falling back to bisection whenever a step leaves it.
/// Returns `None` if no root lies in [200, 6000] K (the bracket then collapses onto an end without
/// the Newton correction becoming small), so the ends need not be evaluated up front.
fn solve_increasing(
    f_and_slope: impl Fn(f64) -> (f64, f64),
    target: f64,
    guess_k: f64,
) -> Option<f64> {
    let (mut lo, mut hi) = (AIR_MIN_T_K, AIR_MAX_T_K);
    let mut t = if guess_k.is_finite() {
        guess_k.clamp(lo, hi)
    } else {
        0.5 * (lo + hi)
    };
    for _ in 0..200 {
        let (f, slope) = f_and_slope(t);
        let residual = f - target;
        if residual > 0.0 {
            hi = t;
        } else {
            lo = t;
        }
        let newton_step = residual / slope;
        // Converged: the Newton correction is below 1e-11 of T and lands inside the valid range.
        if newton_step.abs() <= 1e-11 * t {
            let root = t - newton_step;
            return (AIR_MIN_T_K..=AIR_MAX_T_K).contains(&root).then_some(root);
        }
        let mut next = t - newton_step;
        if !(next > lo && next < hi) {
            next = 0.5 * (lo + hi);
        }
        if hi - lo <= 1e-12 * t {
            // Collapsed without converging: the root is outside [200, 6000] K.
            return None;
        }
        t = next;
    }
    // A 200-step bisection of 5800 K cannot fail to converge; reaching here means NaN crept in.
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    impl Species {
        fn coeffs(&self, t_k: f64) -> &[f64; 7] {
            if t_k < T_SWITCH_K {
                &self.low
            } else {
                &self.high
            }
        }
    }

    #[test]
    fn molar_mass_and_gas_constant() {
        // reference.md §1.4: M_air = 28.965 g/mol and R_air = 287.05 J/(kg K), computed here from the
        // US Standard Atmosphere 1976 fractions (from memory there) and Burcat molar masses (confirmed).
        assert!((AIR_MOLAR_MASS_KG_PER_MOL * 1e3 - 28.965).abs() < 0.001);
        assert!((R_AIR_J_PER_KG_K - 287.05).abs() < 0.01);
    }

    #[test]
    fn mixing_entropy_constant_matches_composition() {
        // Internal consistency: the written-out −Σ x ln x equals the value computed from SPECIES.
        let computed: f64 = SPECIES
            .iter()
            .map(|&(_, x)| {
                let x = x / MOLE_FRACTION_SUM;
                -x * x.ln()
            })
            .sum();
        assert!((computed - MIXING_ENTROPY_OVER_R).abs() < 1e-14);
    }

    #[test]
    fn species_cp_and_entropy_at_298_k() {
        // reference.md §1.2 check values at 298.15 K, computed here from the Burcat 2015 coefficients
        // (confirmed, BURCAT.THR); they agree with JANAF/CODATA from memory. Units J/(mol K).
        let cases = [
            (N2, 29.124, 191.609),
            (O2, 29.378, 205.148),
            (AR, 20.786, 154.846),
        ];
        for (sp, cp_ref, s_ref) in cases {
            let a = sp.coeffs(298.15);
            let cp = R_UNIVERSAL_J_PER_MOL_K * cp_over_r(a, 298.15);
            let s = R_UNIVERSAL_J_PER_MOL_K * s_over_r(a, 298.15);
            assert!((cp - cp_ref).abs() < 0.002, "cp {cp} vs {cp_ref}");
            assert!((s - s_ref).abs() < 0.002, "s {s} vs {s_ref}");
        }
    }

    #[test]
    fn species_enthalpy_zero_at_reference_for_elements() {
        // NASA absolute enthalpy basis (reference.md §1.1, from memory): elements in their reference
        // state have h = 0 at 298.15 K. The Burcat fits reproduce that to about 1e-3 of R·T.
        for sp in [N2, O2, AR] {
            let h_j_per_mol = R_UNIVERSAL_J_PER_MOL_K * h_over_r_k(sp.coeffs(298.15), 298.15);
            assert!(h_j_per_mol.abs() < 2.0, "h(298.15) = {h_j_per_mol} J/mol");
        }
    }

    #[test]
    fn cp_cv_gamma_against_nbs_circular_564() {
        // reference.md §1.5: NBS Circular 564 (1955) via Cengel & Boles Table A-2(b), confirmed.
        // Columns: T (K), cp, cv (kJ/(kg K)), k. Tolerance ±0.002 kJ/(kg K) as the sheet suggests; k is
        // printed to 3 decimals, the Burcat mixture agrees within 0.001.
        let table = [
            (250.0, 1.003, 0.716, 1.401),
            (300.0, 1.005, 0.718, 1.400),
            (350.0, 1.008, 0.721, 1.398),
            (400.0, 1.013, 0.726, 1.395),
            (450.0, 1.020, 0.733, 1.391),
            (500.0, 1.029, 0.742, 1.387),
            (550.0, 1.040, 0.753, 1.381),
            (600.0, 1.051, 0.764, 1.376),
            (650.0, 1.063, 0.776, 1.370),
            (700.0, 1.075, 0.788, 1.364),
            (750.0, 1.087, 0.800, 1.359),
            (800.0, 1.099, 0.812, 1.354),
            (900.0, 1.121, 0.834, 1.344),
            (1000.0, 1.142, 0.855, 1.336),
        ];
        for (t, cp, cv, k) in table {
            assert!((cp_j_per_kg_k(t) / 1e3 - cp).abs() <= 0.002, "cp at {t} K");
            assert!((cv_j_per_kg_k(t) / 1e3 - cv).abs() <= 0.002, "cv at {t} K");
            assert!((gamma(t) - k).abs() <= 0.001, "gamma at {t} K");
        }
    }

    #[test]
    fn burcat_mixture_column_of_reference_table() {
        // reference.md §1.5 "Burcat mix" columns, computed here (4-decimal regression values).
        let table = [
            (250.0, 1.0030, 1.4010),
            (500.0, 1.0299, 1.3864),
            (1000.0, 1.1407, 1.3363),
        ];
        for (t, cp, k) in table {
            assert!((cp_j_per_kg_k(t) / 1e3 - cp).abs() < 0.00006, "cp at {t} K");
            assert!((gamma(t) - k).abs() < 0.00006, "gamma at {t} K");
        }
    }

    #[test]
    fn properties_continuous_at_1000_k() {
        // reference.md §1.1: cp continuous at 1000 K to better than 1e-7 relative (computed there).
        // The mixture inherits it; h and s° are continuous to the fits' precision too.
        let (below, above) = (1000.0 - 1e-9, 1000.0);
        assert!((cp_j_per_kg_k(below) / cp_j_per_kg_k(above) - 1.0).abs() < 1e-6);
        assert!((enthalpy_j_per_kg(below) - enthalpy_j_per_kg(above)).abs() < 0.5);
        assert!(
            (standard_entropy_j_per_kg_k(below) - standard_entropy_j_per_kg_k(above)).abs() < 1e-3
        );
    }

    #[test]
    fn enthalpy_and_entropy_consistent_with_cp() {
        // Thermodynamic identities: dh/dT = cp, ds°/dT = cp/T, u = h − RT (ideal gas, textbook).
        for t in [220.0, 300.0, 650.0, 1500.0, 4000.0] {
            let d = 1e-3;
            let dh = (enthalpy_j_per_kg(t + d) - enthalpy_j_per_kg(t - d)) / (2.0 * d);
            let ds = (standard_entropy_j_per_kg_k(t + d) - standard_entropy_j_per_kg_k(t - d))
                / (2.0 * d);
            assert!((dh / cp_j_per_kg_k(t) - 1.0).abs() < 1e-6);
            assert!((ds * t / cp_j_per_kg_k(t) - 1.0).abs() < 1e-6);
            let u = internal_energy_j_per_kg(t);
            assert!((enthalpy_j_per_kg(t) - u - R_AIR_J_PER_KG_K * t).abs() < 1e-6);
        }
    }

    /// T2 = T1 r^(γ−1): the constant-γ textbook formula (reference.md §2, from memory, certain).
    fn constant_gamma_t2_k(t1_k: f64, r: f64, gamma: f64) -> f64 {
        t1_k * r.powf(gamma - 1.0)
    }

    #[test]
    fn isentropic_table_r17_variable_cp() {
        // reference.md §2 table (r = 17, p1 = 101.325 kPa), computed there with the Burcat mixture:
        // T1 (°C), γ=1.4 T2 (K), variable-cp T2 (K), variable-cp p2 (kPa).
        let table = [
            (-40.0, 724.1, 704.1, 5202.0),
            (-30.0, 755.2, 731.4, 5181.0),
            (-20.0, 786.2, 758.3, 5160.0),
            (-10.0, 817.3, 784.9, 5138.0),
            (0.0, 848.4, 811.2, 5115.0),
            (20.0, 910.5, 862.8, 5070.0),
        ];
        for (t1_c, t2_const_k, t2_k, p2_kpa) in table {
            let t1_k = t1_c + 273.15;
            let (t2, p2) = isentropic_compression_ideal_gas(t1_k, 101_325.0, 17.0).unwrap();
            assert!((t2 - t2_k).abs() < 0.15, "T2 {t2} vs {t2_k} at {t1_c} °C");
            assert!(
                (p2 / 1e3 - p2_kpa).abs() < 1.5,
                "p2 {p2} vs {p2_kpa} kPa at {t1_c} °C"
            );
            // γ = 1.4 column: the constant-γ formula, and it is the upper bound (reference.md §0.2).
            let t2_const = constant_gamma_t2_k(t1_k, 17.0, 1.4);
            assert!((t2_const - t2_const_k).abs() < 0.15);
            assert!(t2 < t2_const - 15.0);
            // With γ = 1.4 p2 = p1 r^1.4 = 5350 kPa at every T1 (reference.md §2).
            assert!((101.325 * 17f64.powf(1.4) - 5350.0).abs() < 1.0);
        }
    }

    #[test]
    fn worked_example_minus_25_c() {
        // reference.md §2 worked example, computed there: T1 = 248.15 K, r = 17 → variable cp
        // T2 = 744.9 K, p2 = 5170 kPa, effective γ = 1.388; γ = 1.4 gives 770.7 K.
        let (t2, p2) = isentropic_compression_ideal_gas(248.15, 101_325.0, 17.0).unwrap();
        assert!((t2 - 744.9).abs() < 0.15);
        assert!((p2 / 1e3 - 5170.0).abs() < 1.5);
        let gamma_eff = 1.0 + (t2 / 248.15).ln() / 17f64.ln();
        assert!((gamma_eff - 1.388).abs() < 0.0006);
        assert!((constant_gamma_t2_k(248.15, 17.0, 1.4) - 770.7).abs() < 0.1);
    }

    #[test]
    fn textbook_minus_10_f_at_r_17_5() {
        // Common practice (no source): with γ = 1.4 and r = 17.5, air drawn in at −10 °F (−23.3 °C)
        // reaches about 955 °F (about 512 °C) ideal; formula T2 = T1 r^(γ−1) (reference.md §2).
        let t1_k = (-10.0 - 32.0) * 5.0 / 9.0 + 273.15; // reference.md §15 conversion
        let t2_k = constant_gamma_t2_k(t1_k, 17.5, 1.4);
        assert!((t2_k - 273.15 - 512.0).abs() < 1.5, "{} °C", t2_k - 273.15);
        assert!(((t2_k - 273.15) * 9.0 / 5.0 + 32.0 - 955.0).abs() < 3.0);
        // Variable cp is lower (γ falls as T rises), by roughly 25–35 K here (reference.md §0.2).
        let (t2_var, _) = isentropic_compression_ideal_gas(t1_k, 101_325.0, 17.5).unwrap();
        assert!(t2_k - t2_var > 20.0 && t2_k - t2_var < 40.0, "{t2_var}");
    }

    #[test]
    fn isentropic_pressure_and_volume_paths_agree() {
        // Internal consistency: compressing by r then asking for the temperature at p2 gives T2, for
        // the ideal and the real-gas pair.
        let (t2, p2) = isentropic_compression_ideal_gas(255.0, 95_000.0, 16.0).unwrap();
        let t2p = isentropic_temperature_k(255.0, p2 / 95_000.0).unwrap();
        assert!((t2 - t2p).abs() < 1e-6);
        let (t2, p2) = isentropic_compression(255.0, 95_000.0, 16.0).unwrap();
        let t2p = isentropic_temperature_real_gas_k(255.0, 95_000.0, p2).unwrap();
        assert!((t2 - t2p).abs() < 1e-6);
    }

    #[test]
    fn real_gas_reduces_to_ideal_gas_when_dilute() {
        // Physics: the virial correction vanishes as density → 0 (reference.md §2 is the ideal limit).
        let (ti, pi) = isentropic_compression_ideal_gas(248.15, 1.0, 17.0).unwrap();
        let (tr, pr) = isentropic_compression(248.15, 1.0, 17.0).unwrap();
        assert!((ti - tr).abs() < 1e-3 && (pi / pr - 1.0).abs() < 1e-6);
        assert!((compressibility_factor(700.0, 0.0) - 1.0).abs() < 1e-15);
    }

    #[test]
    fn real_gas_check_values() {
        // Computed here with CoolProp 8.0.0 (Lemmon et al. 2000 reference equation of state for air,
        // tests/data/make_real_gas_air.py): B(300 K) = −7.76 cm³/mol, B(700 K) = +21.16 cm³/mol;
        // Z(700 K, 25 kg/m³) = 1.0193 (the second-virial truncation gives 1.0183).
        assert!((second_virial_m3_per_mol(300.0) * 1e6 + 7.76).abs() < 0.15);
        assert!((second_virial_m3_per_mol(700.0) * 1e6 - 21.16).abs() < 0.15);
        assert!((compressibility_factor(700.0, 25.0) - 1.0193).abs() < 0.0015);
        // Ideal gas at 1 atm and 300 K: ρ = p/(RT) = 1.1767 kg/m³ (textbook); real air 0.03 % denser.
        let rho = density_kg_per_m3(300.0, 101_325.0).unwrap();
        assert!((rho / (101_325.0 / (R_AIR_J_PER_KG_K * 300.0)) - 1.0003).abs() < 5e-5);
        assert!((pressure_pa(300.0, rho) / 101_325.0 - 1.0).abs() < 1e-12);
        // Real-gas T2 at r = 17 from −40 °C: CoolProp 712.42 K (tests/data CSV; tests/real_gas.rs has all).
        let (t2, _) = isentropic_compression(233.15, 101_325.0, 17.0).unwrap();
        assert!((t2 - 712.42).abs() < 0.5);
    }

    #[test]
    fn real_gas_state_terms_consistent() {
        // Thermodynamic identities for the virial form: (∂p/∂T)_v and (∂p/∂v)_T by finite difference,
        // cv = (∂u/∂T)_v, and h = u + p v.
        for (t, rho) in [(250.0, 1.4), (700.0, 25.0), (900.0, 60.0)] {
            let v = 1.0 / rho;
            let s = real_gas_state(t, rho);
            let d = 1e-3;
            let dpdt =
                (real_gas_state(t + d, rho).p_pa - real_gas_state(t - d, rho).p_pa) / (2.0 * d);
            let dv = 1e-7 * v;
            let dpdv = (real_gas_state(t, 1.0 / (v + dv)).p_pa
                - real_gas_state(t, 1.0 / (v - dv)).p_pa)
                / (2.0 * dv);
            let cv = (real_gas_internal_energy_j_per_kg(t + d, v)
                - real_gas_internal_energy_j_per_kg(t - d, v))
                / (2.0 * d);
            assert!((dpdt / s.dp_dt_pa_per_k - 1.0).abs() < 1e-6);
            assert!((dpdv / s.dp_dv_pa_kg_per_m3 - 1.0).abs() < 1e-5);
            assert!((cv / s.cv_j_per_kg_k - 1.0).abs() < 1e-6);
            let h = real_gas_enthalpy_j_per_kg(t, v);
            assert!((h - real_gas_internal_energy_j_per_kg(t, v) - s.p_pa * v).abs() < 1e-6);
            // Entropy: (∂s/∂T)_v = cv/T.
            let ds = (real_entropy_over_r(t + d, v) - real_entropy_over_r(t - d, v)) / (2.0 * d)
                * R_AIR_J_PER_KG_K;
            assert!((ds * t / s.cv_j_per_kg_k - 1.0).abs() < 1e-6);
        }
    }

    #[test]
    fn hostile_inputs_are_errors_not_panics() {
        for bad in [f64::NAN, f64::INFINITY, -1.0, 0.0, 150.0, 7000.0] {
            assert!(isentropic_compression(bad, 1e5, 17.0).is_err());
            assert!(isentropic_compression_ideal_gas(bad, 1e5, 17.0).is_err());
            assert!(isentropic_temperature_k(bad, 2.0).is_err());
            assert!(isentropic_temperature_real_gas_k(bad, 1e5, 2e5).is_err());
            assert!(density_kg_per_m3(bad, 1e5).is_err());
        }
        for bad in [f64::NAN, f64::NEG_INFINITY, -5.0, 0.0, 1e12] {
            assert!(isentropic_compression(300.0, bad, 17.0).is_err());
            assert!(isentropic_compression(300.0, 1e5, bad).is_err());
            assert!(isentropic_compression_ideal_gas(300.0, bad, 17.0).is_err());
            assert!(isentropic_compression_ideal_gas(300.0, 1e5, bad).is_err());
            assert!(isentropic_temperature_k(300.0, bad).is_err());
            assert!(isentropic_temperature_real_gas_k(300.0, bad, 1e5).is_err());
            assert!(isentropic_temperature_real_gas_k(300.0, 1e5, bad).is_err());
            assert!(density_kg_per_m3(300.0, bad).is_err());
        }
        // Beyond the second-virial range: 200 K at 40 MPa, or compressing 10 MPa air by 20.
        assert!(density_kg_per_m3(200.0, 40e6).is_err());
        assert!(isentropic_compression(300.0, 10e6, 20.0).is_err());
        // End state outside the fits: 5000 K compressed by 100 exceeds 6000 K; 300 K expanded by
        // 1e-6 in pressure falls below 200 K.
        assert!(matches!(
            isentropic_compression_ideal_gas(5000.0, 1e5, 100.0),
            Err(ModelError::OutOfRange {
                quantity: "volume_ratio",
                ..
            })
        ));
        assert!(isentropic_temperature_k(300.0, 1e-6).is_err());
        // Plain property functions never panic; NaN propagates.
        assert!(cp_j_per_kg_k(f64::NAN).is_nan());
    }

    fixed_proptest! {
        #[test]
        fn cp_rises_and_gamma_falls_above_300_k(t in 300.0f64..5900.0) {
            // Vibrational modes of N2/O2 make cp rise with T over this range (NBS table, §1.5).
            prop_assert!(cp_j_per_kg_k(t + 50.0) > cp_j_per_kg_k(t));
            prop_assert!(gamma(t + 50.0) < gamma(t));
            prop_assert!(gamma(t) > 1.0 && gamma(t) < 5.0 / 3.0);
        }

        #[test]
        fn isentropic_end_temperature_monotone(t1 in 200.0f64..400.0, r in 1.5f64..25.0) {
            let (t2, p2) = isentropic_compression_ideal_gas(t1, 1e5, r).unwrap();
            let (t2_more, _) = isentropic_compression_ideal_gas(t1, 1e5, r * 1.01).unwrap();
            let (t2_warm, _) = isentropic_compression_ideal_gas(t1 + 1.0, 1e5, r).unwrap();
            let (t2_real, _) = isentropic_compression(t1, 1e5, r).unwrap();
            let (t2_real_more, _) = isentropic_compression(t1, 1e5, r * 1.01).unwrap();
            // The real gas ends hotter (B + T dB/dT > 0 at these end temperatures), by under 3 % up to
            // the end densities here (≤ 45 kg/m³).
            prop_assert!(t2_real_more > t2_real && t2_real > t2 && t2_real < 1.03 * t2);
            prop_assert!(t2_more > t2 && t2_warm > t2);
            // Bounded by the constant-γ results at the end and start temperatures where γ falls
            // monotonically (above the cp minimum of the fit near 225 K).
            if t1 >= 230.0 {
                prop_assert!(t2 <= constant_gamma_t2_k(t1, r, gamma(t1)) + 1e-9);
                prop_assert!(t2 >= constant_gamma_t2_k(t1, r, gamma(t2)) - 1e-9);
            }
            prop_assert!((p2 / 1e5 - r * t2 / t1).abs() < 1e-9 * p2);
        }

        #[test]
        fn expansion_undoes_compression(t1 in 200.0f64..1500.0, r in 1.1f64..20.0) {
            if let Ok((t2, p2)) = isentropic_compression_ideal_gas(t1, 1e5, r) {
                let (t3, p3) = isentropic_compression_ideal_gas(t2, p2, 1.0 / r).unwrap();
                prop_assert!((t3 - t1).abs() < 1e-6 && (p3 / 1e5 - 1.0).abs() < 1e-9);
            }
            if let Ok((t2, p2)) = isentropic_compression(t1, 1e5, r) {
                let (t3, p3) = isentropic_compression(t2, p2, 1.0 / r).unwrap();
                prop_assert!((t3 - t1).abs() < 1e-6 && (p3 / 1e5 - 1.0).abs() < 1e-8);
            }
        }
    }
}
