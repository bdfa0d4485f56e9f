//! Engine oil viscosity against temperature, from the oil's SAE grade.
//!
//! **What it models.** The dynamic viscosity that the crankshaft bearings, pistons and valve train
//! shear while the engine is cranked, as a function of oil temperature, for an oil known only by its
//! SAE grade (`15W-40`, `5W-30`, `SAE 30`).
//!
//! **Published methods.**
//! - SAE J300 (January 2015 revision, reference.md §7.1, confirmed): each W grade caps the cold-cranking
//!   simulator (CCS, ASTM D5293) viscosity at a given temperature (e.g. 15W: 7,000 mPa·s at −20 °C), and
//!   each hot grade fixes a band of kinematic viscosity at 100 °C (KV100, ASTM D445; e.g. 40:
//!   12.5–<16.3 mm²/s).
//! - ASTM D341 (Walther) viscosity–temperature relation (reference.md §7.2, confirmed), basic form
//!   `log10 log10(ν + 0.7) = A − B log10 T`, ν in mm²/s, T in K.
//!
//! **Our construction.** A Walther line through two points of the grade:
//! 1. the CCS limit at the CCS temperature, converted from dynamic to kinematic viscosity with an oil
//!    density of 870 kg/m³ (0.87 kg/L; *estimate*, typical of engine oils, held constant with
//!    temperature — the same density converts back, so the J300 point is reproduced exactly);
//! 2. the middle of the hot grade's KV100 band at 100 °C.
//!
//! The CCS is a *high-shear* viscosity measured in a rotor–stator gap that imitates a cranking bearing,
//! and J300 gives its *maximum*: a grade-conforming oil is at or below it. So the line is a
//! conservative (upper-bound) viscosity for cranking friction, which is what this crate wants. It is
//! not the low-shear (pumping, MRV) viscosity, which for VI-improved multigrades is higher at the same
//! temperature (reference.md §7.2 caution).
//!
//! For a monograde without a W rating (`SAE 30`, `SAE 40`) J300 gives no cold point. We then use a
//! Walther slope `B = 3.6` through the KV100 mid-band point. **Estimate**: the slope of a conventional
//! mineral oil (KV40 ≈ 100 mm²/s with KV100 ≈ 11 mm²/s gives B ≈ 3.59, computed with the relation
//! above).
//!
//! **Units.** Temperatures in K, dynamic viscosity in Pa·s, kinematic viscosity in mm²/s (the unit the
//! Walther constants are defined in; 1 mm²/s = 1e-6 m²/s).
//!
//! **Validity.** Oil temperature 183.15–423.15 K (−90 to +150 °C). Below a grade's CCS temperature the
//! line is an extrapolation. Because every grade is pinned to its CCS *limit*, two grades that share a W
//! rating cross at the CCS temperature: below it the one with the lower hot grade comes out slightly
//! thicker. Real oils sit below their CCS limit by unknown amounts, so their order there is not known;
//! a lower W rating with the same hot grade is always thinner below 100 °C.

use crate::constants::ZERO_CELSIUS_K;
use crate::error::{ModelError, check_range};
use std::sync::OnceLock;

/// Oil density used to convert between dynamic and kinematic viscosity, kg/m³. **Estimate** (0.87 kg/L,
/// typical fresh engine oil), held constant with temperature.
pub const OIL_DENSITY_KG_PER_M3: f64 = 870.0;

/// Walther slope used for monogrades without a W rating. **Estimate**: a conventional mineral oil
/// (KV40 ≈ 100, KV100 ≈ 11 mm²/s gives B ≈ 3.59).
pub const MONOGRADE_WALTHER_B: f64 = 3.6;

/// Lowest oil temperature the model accepts, K (−90 °C, the telemetry range: far below any CCS
/// point the Walther line is an extrapolation that only has to say "too thick to crank").
pub const OIL_T_MIN_K: f64 = 183.15;
/// Highest oil temperature the model accepts, K (+150 °C).
pub const OIL_T_MAX_K: f64 = 423.15;

/// KV100 reference temperature, K (100 °C).
const T_100C_K: f64 = 373.15;

/// SAE J300 (2015) W grades: (W number, CCS max in mPa·s, CCS temperature in °C). reference.md §7.1.
const J300_W_GRADES: [(u8, f64, f64); 6] = [
    (0, 6_200.0, -35.0),
    (5, 6_600.0, -30.0),
    (10, 7_000.0, -25.0),
    (15, 7_000.0, -20.0),
    (20, 9_500.0, -15.0),
    (25, 13_000.0, -10.0),
];

/// SAE J300 (2015) high-temperature grades: (grade, KV100 min, KV100 upper bound), mm²/s.
/// reference.md §7.1.
const J300_HOT_GRADES: [(u8, f64, f64); 8] = [
    (8, 4.0, 6.1),
    (12, 5.0, 7.1),
    (16, 6.1, 8.2),
    (20, 6.9, 9.3),
    (30, 9.3, 12.5),
    (40, 12.5, 16.3),
    (50, 16.3, 21.9),
    (60, 21.9, 26.1),
];

/// An SAE J300 engine-oil viscosity grade: `15W-40` is `{ winter: Some(15), hot: 40 }`, `SAE 30` is
/// `{ winter: None, hot: 30 }`. Winter-only grades (`10W`) are not represented.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SaeGrade {
    /// The W (winter) number, one of 0, 5, 10, 15, 20, 25; `None` for a monograde without W rating.
    pub winter: Option<u8>,
    /// The high-temperature grade: 8, 12, 16, 20, 30, 40, 50 or 60.
    pub hot: u8,
}

/// The cold-cranking point J300 sets for a W grade.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CcsLimit {
    /// CCS test temperature, K.
    pub t_k: f64,
    /// Maximum CCS dynamic viscosity at that temperature, Pa·s.
    pub viscosity_pa_s: f64,
}

impl SaeGrade {
    /// Parses `15W-40`, `15w40`, `15W 40`, `SAE 15W-40`, `SAE 30` or `30` (ASCII, case-insensitive),
    /// then validates the numbers against J300.
    pub fn parse(s: &str) -> Result<SaeGrade, ModelError> {
        const FORMAT: &str = "oil grade must look like 15W-40, 5W30, SAE 15W-40 or SAE 30";
        let mut rest = s.trim();
        if rest.len() >= 3 && rest.as_bytes()[..3].eq_ignore_ascii_case(b"SAE") {
            rest = rest[3..].trim_start();
        }
        let grade = match rest.find(['W', 'w']) {
            Some(w_at) => {
                let winter =
                    parse_grade_number(&rest[..w_at]).ok_or(ModelError::Inconsistent(FORMAT))?;
                let after = &rest[w_at + 1..];
                let after = after.strip_prefix(['-', ' ']).unwrap_or(after);
                if after.is_empty() {
                    return Err(ModelError::Inconsistent(
                        "winter-only oil grades (e.g. 10W) are not supported: give the hot grade too",
                    ));
                }
                let hot = parse_grade_number(after).ok_or(ModelError::Inconsistent(FORMAT))?;
                SaeGrade {
                    winter: Some(winter),
                    hot,
                }
            }
            None => {
                let hot = parse_grade_number(rest).ok_or(ModelError::Inconsistent(FORMAT))?;
                SaeGrade { winter: None, hot }
            }
        };
        grade.validate()?;
        Ok(grade)
    }

    /// Checks that both numbers are SAE J300 (2015) grades.
    pub fn validate(&self) -> Result<(), ModelError> {
        if let Some(w) = self.winter
            && !J300_W_GRADES.iter().any(|&(g, _, _)| g == w)
        {
            return Err(ModelError::OutOfRange {
                quantity: "sae_winter_grade",
                value: f64::from(w),
                reason: "SAE J300 W grades are 0, 5, 10, 15, 20, 25",
            });
        }
        if !J300_HOT_GRADES.iter().any(|&(g, _, _)| g == self.hot) {
            return Err(ModelError::OutOfRange {
                quantity: "sae_hot_grade",
                value: f64::from(self.hot),
                reason: "SAE J300 hot grades are 8, 12, 16, 20, 30, 40, 50, 60",
            });
        }
        Ok(())
    }

    /// The J300 CCS limit of the W grade, `None` for a monograde without W (or an unknown W number).
    pub fn ccs_limit(&self) -> Option<CcsLimit> {
        let w = self.winter?;
        J300_W_GRADES
            .iter()
            .find(|&&(g, _, _)| g == w)
            .map(|&(_, mpa_s, t_c)| CcsLimit {
                t_k: t_c + ZERO_CELSIUS_K,
                viscosity_pa_s: mpa_s * 1e-3,
            })
    }

    /// The J300 KV100 band of the hot grade, `(min, upper bound)` in mm²/s, `None` if unknown.
    pub fn kv100_band_mm2_per_s(&self) -> Option<(f64, f64)> {
        J300_HOT_GRADES
            .iter()
            .find(|&&(g, _, _)| g == self.hot)
            .map(|&(_, lo, hi)| (lo, hi))
    }
}

/// Parses 1–3 ASCII digits (no sign, no spaces) into a grade number.
fn parse_grade_number(s: &str) -> Option<u8> {
    if s.is_empty() || s.len() > 3 || !s.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    s.parse().ok()
}

/// The Walther–ASTM D341 double-log transform `log10 log10(ν + 0.7)`, ν in mm²/s.
fn walther_z(nu_mm2_per_s: f64) -> f64 {
    (nu_mm2_per_s + 0.7).log10().log10()
}

/// A Walther line `log10 log10(ν + 0.7) = a − b log10 T` (ASTM D341 basic form, reference.md §7.2),
/// ν in mm²/s, T in K. The basic form holds for ν above about 2 mm²/s.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WaltherLine {
    /// Intercept A (dimensionless).
    pub a: f64,
    /// Slope B (dimensionless; larger means viscosity changes faster with temperature).
    pub b: f64,
}

impl WaltherLine {
    /// The line through two (temperature, kinematic viscosity) points, per ASTM D341:
    /// `B = [f(ν1) − f(ν2)] / [log T2 − log T1]`, `A = f(ν1) + B log T1`.
    pub fn through(
        t1_k: f64,
        nu1_mm2_per_s: f64,
        t2_k: f64,
        nu2_mm2_per_s: f64,
    ) -> Result<WaltherLine, ModelError> {
        const T_REASON: &str = "Walther points need a temperature of 100–600 K";
        const NU_REASON: &str = "Walther basic form needs a kinematic viscosity of 0.5–1e7 mm²/s";
        check_range("t1_k", t1_k, 100.0, 600.0, T_REASON)?;
        check_range("t2_k", t2_k, 100.0, 600.0, T_REASON)?;
        check_range("nu1_mm2_per_s", nu1_mm2_per_s, 0.5, 1e7, NU_REASON)?;
        check_range("nu2_mm2_per_s", nu2_mm2_per_s, 0.5, 1e7, NU_REASON)?;
        let dlog_t = t2_k.log10() - t1_k.log10();
        if dlog_t.abs() < 1e-6 {
            return Err(ModelError::Inconsistent(
                "Walther points must be at different temperatures",
            ));
        }
        let b = (walther_z(nu1_mm2_per_s) - walther_z(nu2_mm2_per_s)) / dlog_t;
        if b.is_nan() || b <= 0.0 {
            return Err(ModelError::Inconsistent(
                "Walther points must show viscosity falling as temperature rises",
            ));
        }
        Ok(WaltherLine {
            a: walther_z(nu1_mm2_per_s) + b * t1_k.log10(),
            b,
        })
    }

    /// Kinematic viscosity on the line at `t_k`, mm²/s (basic-form inverse
    /// `ν = 10^(10^(A − B log10 T)) − 0.7`). Unchecked: NaN in gives NaN out.
    pub fn kinematic_viscosity_mm2_per_s(&self, t_k: f64) -> f64 {
        10f64.powf(10f64.powf(self.a - self.b * t_k.log10())) - 0.7
    }
}

/// The Walther line this module uses for `grade` (see the module doc for the two points).
///
/// The lines of all J300 grades are computed once and kept: every start computation reads the
/// oil's viscosity, and a line costs six logarithms.
pub fn walther_line(grade: SaeGrade) -> Result<WaltherLine, ModelError> {
    grade.validate()?;
    // Validated: both numbers are in the tables.
    let w = grade.winter.map_or(0, |w| {
        1 + J300_W_GRADES
            .iter()
            .position(|&(g, _, _)| g == w)
            .unwrap_or(0)
    });
    let h = J300_HOT_GRADES
        .iter()
        .position(|&(g, _, _)| g == grade.hot)
        .unwrap_or(0);
    static LINES: OnceLock<LineTable> = OnceLock::new();
    LINES.get_or_init(compute_lines)[w][h].clone()
}

/// Walther lines by (0 = monograde, else 1 + W-grade index) and hot-grade index.
type LineTable =
    [[Result<WaltherLine, ModelError>; J300_HOT_GRADES.len()]; J300_W_GRADES.len() + 1];

fn compute_lines() -> LineTable {
    std::array::from_fn(|w| {
        std::array::from_fn(|h| {
            compute_walther_line(SaeGrade {
                winter: w.checked_sub(1).map(|i| J300_W_GRADES[i].0),
                hot: J300_HOT_GRADES[h].0,
            })
        })
    })
}

/// The Walther line of a valid `grade`, computed.
fn compute_walther_line(grade: SaeGrade) -> Result<WaltherLine, ModelError> {
    let (kv_lo, kv_hi) = grade
        .kv100_band_mm2_per_s()
        .ok_or(ModelError::Inconsistent("unknown SAE hot grade"))?;
    let nu100_mm2_per_s = 0.5 * (kv_lo + kv_hi);
    match grade.ccs_limit() {
        Some(ccs) => {
            let nu_ccs_mm2_per_s = ccs.viscosity_pa_s / OIL_DENSITY_KG_PER_M3 * 1e6;
            WaltherLine::through(ccs.t_k, nu_ccs_mm2_per_s, T_100C_K, nu100_mm2_per_s)
        }
        None => {
            let b = MONOGRADE_WALTHER_B;
            Ok(WaltherLine {
                a: walther_z(nu100_mm2_per_s) + b * T_100C_K.log10(),
                b,
            })
        }
    }
}

/// Dynamic viscosity of an oil of `grade` at `oil_t_k`, Pa·s: the Walther line through the grade's
/// CCS limit and KV100 mid-band (module doc), times the assumed density. An upper-bound, high-shear
/// viscosity for cranking friction.
pub fn dynamic_viscosity_pa_s(grade: SaeGrade, oil_t_k: f64) -> Result<f64, ModelError> {
    check_range(
        "oil_t_k",
        oil_t_k,
        OIL_T_MIN_K,
        OIL_T_MAX_K,
        "oil viscosity model covers −90 to +150 °C",
    )?;
    let line = walther_line(grade)?;
    Ok(line.kinematic_viscosity_mm2_per_s(oil_t_k) * 1e-6 * OIL_DENSITY_KG_PER_M3)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn grade(s: &str) -> SaeGrade {
        SaeGrade::parse(s).expect("valid grade")
    }

    #[test]
    fn kept_lines_are_the_computed_ones_for_every_j300_grade() {
        let winters = std::iter::once(None).chain(J300_W_GRADES.iter().map(|&(w, _, _)| Some(w)));
        for winter in winters {
            for &(hot, _, _) in &J300_HOT_GRADES {
                let g = SaeGrade { winter, hot };
                assert_eq!(walther_line(g), compute_walther_line(g), "{g:?}");
            }
        }
        // Grades outside J300 are still refused.
        assert!(
            walther_line(SaeGrade {
                winter: Some(7),
                hot: 40
            })
            .is_err()
        );
        assert!(
            walther_line(SaeGrade {
                winter: None,
                hot: 35
            })
            .is_err()
        );
    }

    #[test]
    fn parses_the_usual_spellings() {
        // Grade spellings: common practice (no source).
        let g = SaeGrade {
            winter: Some(15),
            hot: 40,
        };
        for s in [
            "15W-40",
            "15w40",
            "15W 40",
            "SAE 15W-40",
            "sae15w-40",
            "  15W-40  ",
        ] {
            assert_eq!(SaeGrade::parse(s), Ok(g), "{s}");
        }
        assert_eq!(
            SaeGrade::parse("SAE 30"),
            Ok(SaeGrade {
                winter: None,
                hot: 30
            })
        );
        assert_eq!(
            SaeGrade::parse("40"),
            Ok(SaeGrade {
                winter: None,
                hot: 40
            })
        );
        assert_eq!(
            SaeGrade::parse("0W-20"),
            Ok(SaeGrade {
                winter: Some(0),
                hot: 20
            })
        );
    }

    #[test]
    fn rejects_non_grades_without_panicking() {
        for s in [
            "",
            "W",
            "15W",
            "15W-",
            "W-40",
            "15W--40",
            "-5W-30",
            "15X-40",
            "300",
            "256W-40",
            "15W-45",
            "7W-30",
            "SAE",
            "१५W-४०",
            "15W-40 extra",
            "5W-3O",
        ] {
            assert!(SaeGrade::parse(s).is_err(), "{s:?} should be rejected");
        }
        assert!(
            SaeGrade {
                winter: Some(7),
                hot: 30
            }
            .validate()
            .is_err()
        );
        assert!(
            SaeGrade {
                winter: None,
                hot: 35
            }
            .validate()
            .is_err()
        );
    }

    #[test]
    fn walther_check_values_of_reference_sheet() {
        // reference.md §7.2, ASTM D341 basic form; check values computed here (illustrative oil
        // KV40 = 100, KV100 = 14 mm²/s): A = 7.98909, B = 3.08019; ν = 1,125 / 4,277 / 12,622 mm²/s
        // at 0 / −15 / −25 °C.
        let line = WaltherLine::through(313.15, 100.0, 373.15, 14.0).unwrap();
        assert!((line.a - 7.98909).abs() < 5e-5, "A = {}", line.a);
        assert!((line.b - 3.08019).abs() < 5e-5, "B = {}", line.b);
        for (t_c, nu) in [(0.0, 1_125.0), (-15.0, 4_277.0), (-25.0, 12_622.0)] {
            let got = line.kinematic_viscosity_mm2_per_s(t_c + ZERO_CELSIUS_K);
            assert!((got / nu - 1.0).abs() < 1e-3, "{t_c} °C: {got} vs {nu}");
        }
        // And the line returns its own input points.
        assert!((line.kinematic_viscosity_mm2_per_s(313.15) - 100.0).abs() < 1e-9);
        assert!((line.kinematic_viscosity_mm2_per_s(373.15) - 14.0).abs() < 1e-9);
    }

    #[test]
    fn j300_ccs_points_are_reproduced_at_their_temperatures() {
        // reference.md §7.1, SAE J300 (2015) W-grade table, confirmed: CCS max 6,200/6,600/7,000/
        // 7,000/9,500/13,000 mPa·s at −35/−30/−25/−20/−15/−10 °C.
        let table = [
            ("0W-30", 6_200.0, -35.0),
            ("5W-30", 6_600.0, -30.0),
            ("10W-40", 7_000.0, -25.0),
            ("15W-40", 7_000.0, -20.0),
            ("20W-50", 9_500.0, -15.0),
            ("25W-60", 13_000.0, -10.0),
        ];
        for (s, mpa_s, t_c) in table {
            let mu = dynamic_viscosity_pa_s(grade(s), t_c + ZERO_CELSIUS_K).unwrap();
            assert!(
                (mu * 1e3 / mpa_s - 1.0).abs() < 1e-9,
                "{s}: {} mPa·s",
                mu * 1e3
            );
        }
    }

    #[test]
    fn j300_kv100_mid_band_is_reproduced_at_100_c() {
        // reference.md §7.1, SAE J300 (2015) hot-grade table, confirmed: KV100 bands; the mid-band is
        // our construction. Density cancels: ν = μ/ρ.
        for (s, lo, hi) in [
            ("0W-8", 4.0, 6.1),
            ("0W-16", 6.1, 8.2),
            ("5W-20", 6.9, 9.3),
            ("5W-30", 9.3, 12.5),
            ("15W-40", 12.5, 16.3),
            ("SAE 30", 9.3, 12.5),
            ("SAE 40", 12.5, 16.3),
            ("20W-50", 16.3, 21.9),
        ] {
            let mu = dynamic_viscosity_pa_s(grade(s), 373.15).unwrap();
            let nu = mu / OIL_DENSITY_KG_PER_M3 * 1e6;
            assert!((nu - 0.5 * (lo + hi)).abs() < 1e-9, "{s}: {nu}");
            assert!(nu >= lo && nu < hi, "{s}: {nu} outside the J300 band");
        }
    }

    #[test]
    fn multigrade_lines_are_plausible_at_40_c() {
        // A 15W-40 engine oil has KV40 of roughly 100–120 mm²/s: common practice (no source). Our line
        // (CCS limit + mid-band) should land in the same region, within a generous band.
        let nu40 = walther_line(grade("15W-40"))
            .unwrap()
            .kinematic_viscosity_mm2_per_s(313.15);
        assert!((85.0..130.0).contains(&nu40), "15W-40 KV40 = {nu40}");
        // Slope of a multigrade is flatter than that of the mineral monograde estimate.
        assert!(walther_line(grade("15W-40")).unwrap().b < MONOGRADE_WALTHER_B);
    }

    #[test]
    fn lower_w_is_thinner_in_the_cold() {
        // Brief: 5W thinner than 15W at −20 °C (J300 ordering of W grades, reference.md §7.1).
        let t_k = -20.0 + ZERO_CELSIUS_K;
        let mu5 = dynamic_viscosity_pa_s(grade("5W-40"), t_k).unwrap();
        let mu15 = dynamic_viscosity_pa_s(grade("15W-40"), t_k).unwrap();
        assert!(mu5 < mu15, "{mu5} vs {mu15}");
        // 15W-40 at −20 °C is its CCS limit, 7.0 Pa·s (J300, confirmed); a 5W is far thinner there.
        assert!((mu15 - 7.0).abs() < 1e-9);
        assert!(mu5 < 0.5 * mu15);
    }

    #[test]
    fn hostile_temperatures_are_rejected() {
        let g = grade("5W-30");
        for t in [
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            -1.0,
            0.0,
            100.0,
            183.0,
            424.0,
            1e300,
        ] {
            assert!(matches!(
                dynamic_viscosity_pa_s(g, t),
                Err(ModelError::OutOfRange {
                    quantity: "oil_t_k",
                    ..
                })
            ));
        }
        assert!(
            dynamic_viscosity_pa_s(
                SaeGrade {
                    winter: Some(3),
                    hot: 30
                },
                300.0
            )
            .is_err()
        );
        assert!(WaltherLine::through(300.0, 10.0, 300.0, 20.0).is_err());
        assert!(WaltherLine::through(300.0, 10.0, 350.0, 20.0).is_err()); // thicker when hotter
        assert!(WaltherLine::through(f64::NAN, 10.0, 350.0, 5.0).is_err());
        assert!(WaltherLine::through(300.0, -1.0, 350.0, 5.0).is_err());
    }

    const W: [u8; 6] = [0, 5, 10, 15, 20, 25];
    const HOT: [u8; 8] = [8, 12, 16, 20, 30, 40, 50, 60];

    fixed_proptest! {
        #[test]
        fn colder_is_thicker(wi in 0usize..7, hi in 0usize..8, t1 in OIL_T_MIN_K..OIL_T_MAX_K, dt in 0.01f64..100.0) {
            // Law: viscosity falls monotonically with temperature (ASTM D341 B > 0).
            let g = SaeGrade { winter: W.get(wi).copied(), hot: HOT[hi] };
            let t2 = (t1 + dt).min(OIL_T_MAX_K);
            prop_assume!(t2 > t1);
            let mu1 = dynamic_viscosity_pa_s(g, t1).unwrap();
            let mu2 = dynamic_viscosity_pa_s(g, t2).unwrap();
            prop_assert!(mu1 > mu2 && mu2 > 0.0 && mu1.is_finite());
        }

        #[test]
        fn lower_w_same_hot_is_thinner_below_100_c(wi in 0usize..5, hi in 0usize..8, t in OIL_T_MIN_K..373.0) {
            // Law of our construction: same anchor at 100 °C, steeper line for a higher W grade.
            let light = SaeGrade { winter: Some(W[wi]), hot: HOT[hi] };
            let heavy = SaeGrade { winter: Some(W[wi + 1]), hot: HOT[hi] };
            prop_assert!(dynamic_viscosity_pa_s(light, t).unwrap() < dynamic_viscosity_pa_s(heavy, t).unwrap());
        }

        #[test]
        fn parse_never_panics_and_only_returns_j300_grades(s in "\\PC{0,12}") {
            if let Ok(g) = SaeGrade::parse(&s) {
                prop_assert!(g.validate().is_ok());
            }
        }
    }
}
