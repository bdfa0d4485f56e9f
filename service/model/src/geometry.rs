//! Engine cylinder geometry: slider-crank volume, wall area and piston speed.
//!
//! **What it models.** One cylinder of a reciprocating engine with a centred (non-offset) slider-crank,
//! a flat cylinder head and a flat piston crown, and the intake valve closing (IVC) that sets where
//! compression effectively starts.
//!
//! **Published method.** Heywood, *Internal Combustion Engine Fundamentals* (McGraw-Hill, 1988),
//! §2.2, eqs. 2.3–2.10 (reference.md §3; the equation numbers are from memory there, the formulas are
//! standard and checked numerically):
//! - V_d = (π/4) B² L, V_c = V_d/(r_c − 1), a = L/2, R = l/a;
//! - s = a cos θ + (l² − a² sin² θ)^½, V = V_c + (π B²/4)(l + a − s);
//! - A = A_head + A_piston + π B (l + a − s);
//! - S̄_p = 2 L N, S_p/S̄_p = (π/2) sin θ [1 + cos θ/(R² − sin² θ)^½].
//!
//! Crank angle θ is in degrees from top dead centre (TDC) of the compression stroke; negative angles
//! are before TDC (the compression stroke runs from −180° to 0°). IVC is given in degrees after bottom
//! dead centre (ABDC), so it sits at θ = −(180° − IVC).
//!
//! **Units.** Metres, m², m³, m/s, rpm for crank speed, degrees for crank angles.
//!
//! **Validity** (checked by [`EngineGeometry::validate`]): bore and stroke 20–800 mm, rod/crank-radius
//! ratio R = 2–10 (Heywood §2.2 gives about 3–4 for small and medium engines and 5–9 for large
//! slow-speed ones, from memory), geometric compression ratio 8–30 (diesels 12–24, reference.md §13),
//! 1–24 cylinders, IVC 0–90° ABDC.
//!
//! **Estimates.** The flat head and flat piston make the wall area a lower bound: a bowl-in-piston
//! direct-injection chamber has more surface (the heat-transfer calibration multiplier absorbs this).
//! Piston-pin offset, valve recesses and the crevice volume are neglected.

use crate::error::{ModelError, check_range};
use std::f64::consts::PI;

/// Geometry and valve timing of one engine (all cylinders alike).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EngineGeometry {
    /// Cylinder bore, m.
    pub bore_m: f64,
    /// Piston stroke, m (twice the crank radius).
    pub stroke_m: f64,
    /// Connecting-rod length between pin centres, m.
    pub con_rod_m: f64,
    /// Geometric compression ratio (V_d + V_c)/V_c.
    pub compression_ratio: f64,
    /// Number of cylinders.
    pub cylinders: u32,
    /// Intake valve closing, degrees after bottom dead centre.
    pub ivc_deg_abdc: f64,
}

impl EngineGeometry {
    /// Checks every field for range and the fields for consistency.
    ///
    /// # Errors
    /// `OutOfRange` for a non-finite or out-of-range field (see the module doc for the ranges);
    /// `Inconsistent` if the connecting rod is not longer than the crank radius.
    pub fn validate(&self) -> Result<(), ModelError> {
        check_range("bore_m", self.bore_m, 0.02, 0.8, "bore must be 20–800 mm")?;
        check_range(
            "stroke_m",
            self.stroke_m,
            0.02,
            0.8,
            "stroke must be 20–800 mm",
        )?;
        check_range(
            "con_rod_m",
            self.con_rod_m,
            0.02,
            4.0,
            "connecting rod must be 20–4000 mm",
        )?;
        check_range(
            "compression_ratio",
            self.compression_ratio,
            8.0,
            30.0,
            "geometric compression ratio must be 8–30 (diesels are about 12–24)",
        )?;
        if self.cylinders == 0 || self.cylinders > 24 {
            return Err(ModelError::OutOfRange {
                quantity: "cylinders",
                value: f64::from(self.cylinders),
                reason: "an engine has 1–24 cylinders",
            });
        }
        check_range(
            "ivc_deg_abdc",
            self.ivc_deg_abdc,
            0.0,
            90.0,
            "intake valve closing must be 0–90° after bottom dead centre",
        )?;
        if self.con_rod_m <= self.crank_radius_m() {
            return Err(ModelError::Inconsistent(
                "connecting rod must be longer than the crank radius (half the stroke)",
            ));
        }
        check_range(
            "con_rod_m",
            self.con_rod_m,
            2.0 * self.crank_radius_m(),
            10.0 * self.crank_radius_m(),
            "rod/crank-radius ratio must be 2–10 (Heywood §2.2: 3–4 small engines, 5–9 large)",
        )?;
        Ok(())
    }

    /// Crank radius a = L/2, m.
    #[inline]
    pub fn crank_radius_m(&self) -> f64 {
        0.5 * self.stroke_m
    }

    /// Rod-to-crank-radius ratio R = l/a (dimensionless).
    #[inline]
    pub fn rod_ratio(&self) -> f64 {
        self.con_rod_m / self.crank_radius_m()
    }

    /// Piston crown (= bore cross-section) area π B²/4, m².
    #[inline]
    pub fn piston_area_m2(&self) -> f64 {
        0.25 * PI * self.bore_m * self.bore_m
    }

    /// Swept volume of one cylinder V_d = (π/4) B² L, m³.
    #[inline]
    pub fn cylinder_displacement_m3(&self) -> f64 {
        self.piston_area_m2() * self.stroke_m
    }

    /// Swept volume of all cylinders, m³.
    #[inline]
    pub fn displacement_m3(&self) -> f64 {
        self.cylinder_displacement_m3() * f64::from(self.cylinders)
    }

    /// Clearance volume of one cylinder V_c = V_d/(r_c − 1), m³.
    #[inline]
    pub fn clearance_volume_m3(&self) -> f64 {
        self.cylinder_displacement_m3() / (self.compression_ratio - 1.0)
    }

    /// Distance l + a − s that the piston has travelled from TDC at a crank angle, m.
    #[inline]
    fn piston_travel_m(&self, crank_deg_from_tdc: f64) -> f64 {
        let (sin, cos) = crank_deg_from_tdc.to_radians().sin_cos();
        let a = self.crank_radius_m();
        let l = self.con_rod_m;
        let s = a * cos + (l * l - a * a * sin * sin).sqrt();
        l + a - s
    }

    /// Cylinder volume at a crank angle (degrees from TDC), m³.
    #[inline]
    pub fn volume_m3(&self, crank_deg_from_tdc: f64) -> f64 {
        self.clearance_volume_m3()
            + self.piston_area_m2() * self.piston_travel_m(crank_deg_from_tdc)
    }

    /// Rate of change of the cylinder volume with crank angle dV/dθ, m³ per radian.
    #[inline]
    pub fn volume_rate_m3_per_rad(&self, crank_deg_from_tdc: f64) -> f64 {
        let (sin, cos) = crank_deg_from_tdc.to_radians().sin_cos();
        let rr = self.rod_ratio();
        self.piston_area_m2()
            * self.crank_radius_m()
            * sin
            * (1.0 + cos / (rr * rr - sin * sin).sqrt())
    }

    /// Gas-side wall area at a crank angle: flat head + flat piston crown + exposed liner, m².
    #[inline]
    pub fn wall_area_m2(&self, crank_deg_from_tdc: f64) -> f64 {
        2.0 * self.piston_area_m2() + PI * self.bore_m * self.piston_travel_m(crank_deg_from_tdc)
    }

    /// Mean piston speed S̄_p = 2 L N at a crank speed, m/s.
    #[inline]
    pub fn mean_piston_speed_mps(&self, crank_rpm: f64) -> f64 {
        2.0 * self.stroke_m * crank_rpm / 60.0
    }

    /// Instantaneous piston speed at a crank angle and crank speed, m/s (positive moving away from the
    /// head).
    #[inline]
    pub fn piston_speed_mps(&self, crank_deg_from_tdc: f64, crank_rpm: f64) -> f64 {
        let (sin, cos) = crank_deg_from_tdc.to_radians().sin_cos();
        let rr = self.rod_ratio();
        self.mean_piston_speed_mps(crank_rpm)
            * 0.5
            * PI
            * sin
            * (1.0 + cos / (rr * rr - sin * sin).sqrt())
    }

    /// Crank angle of intake valve closing in degrees from compression TDC (negative: before TDC).
    #[inline]
    pub fn ivc_crank_deg_from_tdc(&self) -> f64 {
        -(180.0 - self.ivc_deg_abdc)
    }

    /// Effective compression ratio V(IVC)/V_c: compression effectively starts when the intake valve
    /// closes (reference.md §2).
    #[inline]
    pub fn effective_compression_ratio(&self) -> f64 {
        self.volume_m3(self.ivc_crank_deg_from_tdc()) / self.clearance_volume_m3()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// A geometry with r_c = 17 and R = l/a = 3.5, the check-value case of reference.md §2–§3.
    fn check_case(ivc_deg_abdc: f64) -> EngineGeometry {
        EngineGeometry {
            bore_m: 0.13,
            stroke_m: 0.16,
            con_rod_m: 3.5 * 0.08,
            compression_ratio: 17.0,
            cylinders: 6,
            ivc_deg_abdc,
        }
    }

    #[test]
    fn volume_ratio_check_values() {
        // reference.md §3, computed there (r_c = 17, R = 3.5): V/V_c = 1, 10.1672, 17.0 at 0, 90, 180°.
        let g = check_case(0.0);
        let vc = g.clearance_volume_m3();
        assert!((g.volume_m3(0.0) / vc - 1.0).abs() < 1e-12);
        assert!((g.volume_m3(90.0) / vc - 10.1672).abs() < 5e-5);
        assert!((g.volume_m3(180.0) / vc - 17.0).abs() < 1e-12);
        // The same from Heywood eq. 2.6 written out: V/V_c = 1 + ½(r_c − 1)[R + 1 − cos θ − √(R² − sin²θ)].
        for theta in [15.0f64, 60.0, 123.0, 200.0] {
            let (s, c) = theta.to_radians().sin_cos();
            let eq26 = 1.0 + 0.5 * 16.0 * (3.5 + 1.0 - c - (3.5f64 * 3.5 - s * s).sqrt());
            assert!((g.volume_m3(theta) / vc - eq26).abs() < 1e-12);
        }
    }

    #[test]
    fn effective_compression_ratio_ivc_table() {
        // reference.md §2 IVC table, computed there (r_c = 17, R = 3.5): 20°→16.65, 30°→16.22, 40°→15.60.
        for (ivc, ratio) in [(20.0, 16.65), (30.0, 16.22), (40.0, 15.60)] {
            let r = check_case(ivc).effective_compression_ratio();
            assert!((r - ratio).abs() < 0.006, "IVC {ivc}: {r}");
        }
        assert!((check_case(0.0).effective_compression_ratio() - 17.0).abs() < 1e-12);
    }

    #[test]
    fn piston_speed_check_values() {
        // reference.md §3, computed there: S_p/S̄_p = π/2 at 90°, maximum 1.6340 (R = 3.5);
        // cranking example L = 0.16 m at 150 rpm gives S̄_p = 0.80 m/s.
        let g = check_case(0.0);
        let mean = g.mean_piston_speed_mps(150.0);
        assert!((mean - 0.80).abs() < 1e-12);
        assert!((g.piston_speed_mps(90.0, 150.0) / mean - PI / 2.0).abs() < 1e-12);
        let max = (0..=18_000)
            .map(|i| g.piston_speed_mps(f64::from(i) * 0.01, 150.0) / mean)
            .fold(f64::MIN, f64::max);
        assert!((max - 1.6340).abs() < 5e-5, "max {max}");
    }

    #[test]
    fn displacement_and_areas() {
        // Textbook: V_d = π/4 B² L (Heywood eq. 2.3). B = 0.13 m, L = 0.16 m → 2.1237 L per cylinder,
        // 12.742 L for six (hand-computed); V_c = V_d/16; at TDC the wall is head + crown, 2·πB²/4.
        let g = check_case(0.0);
        assert!((g.cylinder_displacement_m3() - 2.123_716e-3).abs() < 1e-9);
        assert!((g.displacement_m3() - 6.0 * g.cylinder_displacement_m3()).abs() < 1e-15);
        assert!((g.clearance_volume_m3() - 2.123_716e-3 / 16.0).abs() < 1e-9);
        assert!((g.wall_area_m2(0.0) - 2.0 * PI * 0.065 * 0.065).abs() < 1e-12);
        // At BDC the liner is exposed over the full stroke.
        assert!(
            (g.wall_area_m2(180.0) - (2.0 * PI * 0.065 * 0.065 + PI * 0.13 * 0.16)).abs() < 1e-12
        );
    }

    #[test]
    fn validate_rejects_hostile_and_inconsistent_inputs() {
        let good = check_case(30.0);
        assert!(good.validate().is_ok());
        let bad_values = [f64::NAN, f64::INFINITY, -0.1, 0.0, 5.0];
        for v in bad_values {
            assert!(EngineGeometry { bore_m: v, ..good }.validate().is_err());
            assert!(
                EngineGeometry {
                    stroke_m: v,
                    ..good
                }
                .validate()
                .is_err()
            );
            assert!(
                EngineGeometry {
                    con_rod_m: v,
                    ..good
                }
                .validate()
                .is_err()
            );
            assert!(
                EngineGeometry {
                    compression_ratio: v,
                    ..good
                }
                .validate()
                .is_err()
            );
        }
        for v in [f64::NAN, f64::INFINITY, -1.0, 91.0] {
            assert!(
                EngineGeometry {
                    ivc_deg_abdc: v,
                    ..good
                }
                .validate()
                .is_err()
            );
        }
        assert!(
            EngineGeometry {
                cylinders: 0,
                ..good
            }
            .validate()
            .is_err()
        );
        assert!(
            EngineGeometry {
                cylinders: 1000,
                ..good
            }
            .validate()
            .is_err()
        );
        assert!(matches!(
            EngineGeometry {
                con_rod_m: 0.07,
                ..good
            }
            .validate(),
            Err(ModelError::Inconsistent(_))
        ));
        assert!(
            EngineGeometry {
                con_rod_m: 0.12,
                ..good
            }
            .validate()
            .is_err()
        ); // R = 1.5
    }

    #[test]
    fn volume_rate_is_the_derivative_of_volume() {
        // Internal consistency: dV/dθ by central difference.
        let g = check_case(0.0);
        for theta in [-150.0f64, -90.0, -30.0, -1.0, 0.0, 45.0] {
            let d = 1e-4;
            let numeric =
                (g.volume_m3(theta + d) - g.volume_m3(theta - d)) / (2.0 * d.to_radians());
            assert!(
                (numeric - g.volume_rate_m3_per_rad(theta)).abs()
                    < 1e-9 * g.cylinder_displacement_m3()
            );
        }
    }

    fixed_proptest! {
        #[test]
        fn volume_bounded_symmetric_and_monotone(theta in 0.0f64..180.0, b in 0.05f64..0.2,
                                                  l_over_b in 0.8f64..1.4, r in 12.0f64..24.0,
                                                  rod in 2.5f64..6.0) {
            let g = EngineGeometry {
                bore_m: b, stroke_m: b * l_over_b, con_rod_m: rod * 0.5 * b * l_over_b,
                compression_ratio: r, cylinders: 4, ivc_deg_abdc: 30.0,
            };
            prop_assert!(g.validate().is_ok());
            let (vc, vd) = (g.clearance_volume_m3(), g.cylinder_displacement_m3());
            let v = g.volume_m3(theta);
            prop_assert!(v >= vc * (1.0 - 1e-12) && v <= (vc + vd) * (1.0 + 1e-12));
            prop_assert!((g.volume_m3(-theta) - v).abs() < 1e-12 * vd);
            prop_assert!(g.volume_m3(theta + 0.5) > v || theta + 0.5 > 180.0);
            prop_assert!(g.wall_area_m2(theta) >= 2.0 * g.piston_area_m2());
            let r_eff = g.effective_compression_ratio();
            prop_assert!(r_eff <= r + 1e-9 && r_eff > 1.0);
        }
    }
}
