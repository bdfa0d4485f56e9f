//! In-cylinder gas-to-wall heat-transfer coefficient during compression.
//!
//! **What it models.** The spatially averaged convective coefficient h between the cylinder charge and
//! the combustion-chamber walls, so that the heat flux is q̇ = h (T_gas − T_wall) (reference.md §4).
//! Only the compression stroke of a motored (cranking) engine is covered: no combustion term.
//!
//! **Published methods** (reference.md §4.1–4.2):
//! - **Woschni (1967)**, SAE 670931, in its original bar form:
//!   h = 129.8 B^-0.2 p^0.8 T^-0.53 w^0.8 (h in W/(m² K), B in m, p in **bar**, T in K, w in m/s),
//!   **temperature exponent −0.53** (confirmed on the xarin cylinder-pressure-analysis page), with the
//!   compression-stroke velocity w = C1 S̄_p, C1 = 2.28, C2 = 0 (confirmed there). This is what
//!   [`WallHeatTransfer::Woschni`] uses. Heywood's restatement (eq. 12.19: 3.26, p in kPa, T^-0.55,
//!   from memory) is available as [`woschni_heywood_h_w_per_m2_k`] for comparison; it gives about 12 %
//!   less at cranking conditions.
//! - **Hohenberg (1979)**, SAE 790825 (number from memory):
//!   h = 130 V^-0.06 p^0.8 T^-0.4 (S̄_p + 1.4)^0.8 (V instantaneous cylinder volume in m³, p in bar,
//!   T in K, S̄_p in m/s; confirmed on the xarin page, which prints the coefficient as 129.8; 130 is
//!   Hohenberg's value and reproduces the reference.md §4.4 check value).
//!
//! **Default: Hohenberg.** Both correlations were fitted to warm engines at normal speeds (reference.md
//! §0.3). At cranking (S̄_p ≈ 0.5–1.5 m/s) Woschni's velocity term 2.28 S̄_p goes to zero with the
//! piston speed, so its h collapses as cranking slows; Hohenberg's +1.4 m/s offset keeps h finite and
//! represents the residual charge motion (intake swirl and squish) that does not vanish with S̄_p. At the
//! reference.md §4.4 cranking point Hohenberg gives about 3× Woschni. Either way the result is
//! extrapolated and carries a calibration multiplier (applied by the caller).
//!
//! **Units.** SI at the interface (Pa, K, m, m³, m/s); the conversion to bar is internal.
//!
//! **Validity.** The formulas are evaluated for any positive inputs; they were fitted for firing and
//! motored engines at ordinary speeds, so at cranking they are extrapolations (estimate, calibrate).
//! These are hot-path functions that return a plain `f64`: a non-finite or non-positive input gives
//! NaN (never a panic); callers validate their inputs (see `compression`).

/// Which in-cylinder correlation to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum WallHeatTransfer {
    /// Woschni (1967), original bar form, compression-stroke velocity w = 2.28 S̄_p.
    Woschni,
    /// Hohenberg (1979); the default because it stays finite as the piston speed falls at cranking.
    #[default]
    Hohenberg,
}

/// Woschni's C1 for the compression stroke (no swirl correction), reference.md §4.1, confirmed.
pub const WOSCHNI_C1_COMPRESSION: f64 = 2.28;

/// Pascal per bar.
const PA_PER_BAR: f64 = 1e5;

/// Returns `x` if it is finite and strictly positive, else NaN (so the result is NaN).
#[inline]
fn positive(x: f64) -> f64 {
    if x.is_finite() && x > 0.0 {
        x
    } else {
        f64::NAN
    }
}

/// Woschni (1967) coefficient, original bar form, for a given characteristic gas velocity, W/(m² K).
///
/// h = 129.8 B^-0.2 p^0.8 T^-0.53 w^0.8 with p converted to bar.
#[inline]
pub fn woschni_h_from_velocity_w_per_m2_k(
    bore_m: f64,
    p_pa: f64,
    t_k: f64,
    velocity_mps: f64,
) -> f64 {
    let (b, p, t, w) = (
        positive(bore_m),
        positive(p_pa),
        positive(t_k),
        positive(velocity_mps),
    );
    // One exp/ln pair instead of four powf calls (same value to rounding).
    129.8 * (-0.2 * b.ln() + 0.8 * (p / PA_PER_BAR).ln() - 0.53 * t.ln() + 0.8 * w.ln()).exp()
}

/// Woschni (1967) coefficient during compression of a motored engine (w = 2.28 S̄_p), W/(m² K).
#[inline]
pub fn woschni_h_w_per_m2_k(bore_m: f64, p_pa: f64, t_k: f64, mean_piston_speed_mps: f64) -> f64 {
    woschni_h_from_velocity_w_per_m2_k(
        bore_m,
        p_pa,
        t_k,
        WOSCHNI_C1_COMPRESSION * mean_piston_speed_mps,
    )
}

/// Woschni in Heywood's form (eq. 12.19, from memory): h = 3.26 B^-0.2 p^0.8 T^-0.55 w^0.8 with p in
/// kPa and w = 2.28 S̄_p, W/(m² K). For comparison only; the model uses the original form.
#[inline]
pub fn woschni_heywood_h_w_per_m2_k(
    bore_m: f64,
    p_pa: f64,
    t_k: f64,
    mean_piston_speed_mps: f64,
) -> f64 {
    let (b, p, t) = (positive(bore_m), positive(p_pa), positive(t_k));
    let w = positive(WOSCHNI_C1_COMPRESSION * mean_piston_speed_mps);
    3.26 * (-0.2 * b.ln() + 0.8 * (p / 1e3).ln() - 0.55 * t.ln() + 0.8 * w.ln()).exp()
}

/// Hohenberg (1979) coefficient, W/(m² K): h = 130 V^-0.06 p^0.8 T^-0.4 (S̄_p + 1.4)^0.8, p in bar.
#[inline]
pub fn hohenberg_h_w_per_m2_k(
    volume_m3: f64,
    p_pa: f64,
    t_k: f64,
    mean_piston_speed_mps: f64,
) -> f64 {
    let (v, p, t) = (positive(volume_m3), positive(p_pa), positive(t_k));
    // S̄_p may be zero (engine at rest): the offset keeps the velocity term positive.
    let s = if mean_piston_speed_mps.is_finite() && mean_piston_speed_mps >= 0.0 {
        mean_piston_speed_mps + 1.4
    } else {
        f64::NAN
    };
    130.0 * (-0.06 * v.ln() + 0.8 * (p / PA_PER_BAR).ln() - 0.4 * t.ln() + 0.8 * s.ln()).exp()
}

impl WallHeatTransfer {
    /// Coefficient of the selected correlation during compression, W/(m² K). `volume_m3` is the
    /// instantaneous cylinder volume (Hohenberg), `bore_m` the bore (Woschni).
    #[inline]
    pub fn h_w_per_m2_k(
        self,
        bore_m: f64,
        volume_m3: f64,
        p_pa: f64,
        t_k: f64,
        mean_piston_speed_mps: f64,
    ) -> f64 {
        match self {
            Self::Woschni => woschni_h_w_per_m2_k(bore_m, p_pa, t_k, mean_piston_speed_mps),
            Self::Hohenberg => hohenberg_h_w_per_m2_k(volume_m3, p_pa, t_k, mean_piston_speed_mps),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    // reference.md §4.4 cranking TDC point (computed there): p = 5374 kPa, T = 757 K, B = 0.13 m,
    // S̄_p = 0.80 m/s (w = 1.824 m/s), V = V_c = 1.287e-4 m³.
    const P_PA: f64 = 5.374e6;
    const T_K: f64 = 757.0;
    const B_M: f64 = 0.13;
    const SP_MPS: f64 = 0.80;
    const VC_M3: f64 = 1.287e-4;

    #[test]
    fn woschni_original_form_check_value() {
        // reference.md §4.4, computed there: Woschni (a), 129.8 form (confirmed form): 227.8 W/(m² K).
        let h = woschni_h_w_per_m2_k(B_M, P_PA, T_K, SP_MPS);
        assert!((h - 227.8).abs() < 0.1, "{h}");
        assert!(
            (WallHeatTransfer::Woschni.h_w_per_m2_k(B_M, VC_M3, P_PA, T_K, SP_MPS) - h).abs()
                < 1e-12
        );
        // Characteristic velocity 2.28 × 0.80 = 1.824 m/s (reference.md §4.4).
        assert!((woschni_h_from_velocity_w_per_m2_k(B_M, P_PA, T_K, 1.824) - h).abs() < 1e-9);
    }

    #[test]
    fn woschni_heywood_form_check_value() {
        // reference.md §4.4, computed there: Woschni (b), 3.26 kPa form (from memory): 199.5 W/(m² K).
        let h = woschni_heywood_h_w_per_m2_k(B_M, P_PA, T_K, SP_MPS);
        assert!((h - 199.5).abs() < 0.1, "{h}");
    }

    #[test]
    fn hohenberg_check_value() {
        // reference.md §4.4, computed there: Hohenberg with V = V_c = 1.287e-4 m³: 714 W/(m² K).
        let h = hohenberg_h_w_per_m2_k(VC_M3, P_PA, T_K, SP_MPS);
        assert!((h - 714.0).abs() < 0.5, "{h}");
        assert_eq!(WallHeatTransfer::default(), WallHeatTransfer::Hohenberg);
        assert!(
            (WallHeatTransfer::Hohenberg.h_w_per_m2_k(B_M, VC_M3, P_PA, T_K, SP_MPS) - h).abs()
                < 1e-12
        );
    }

    #[test]
    fn hohenberg_finite_at_rest_woschni_not() {
        // reference.md §4.2: the +1.4 m/s offset keeps Hohenberg finite at low piston speed, while
        // Woschni's compression-stroke h vanishes with S̄_p (w = 2.28 S̄_p).
        assert!(hohenberg_h_w_per_m2_k(VC_M3, P_PA, T_K, 0.0) > 300.0);
        assert!(woschni_h_w_per_m2_k(B_M, P_PA, T_K, 1e-6) < 1.0);
    }

    #[test]
    fn hostile_inputs_give_nan_not_panic() {
        for bad in [f64::NAN, f64::INFINITY, -1.0, 0.0] {
            assert!(hohenberg_h_w_per_m2_k(bad, P_PA, T_K, SP_MPS).is_nan());
            assert!(hohenberg_h_w_per_m2_k(VC_M3, bad, T_K, SP_MPS).is_nan());
            assert!(hohenberg_h_w_per_m2_k(VC_M3, P_PA, bad, SP_MPS).is_nan());
            assert!(woschni_h_w_per_m2_k(bad, P_PA, T_K, SP_MPS).is_nan());
            assert!(woschni_h_w_per_m2_k(B_M, bad, T_K, SP_MPS).is_nan());
            assert!(woschni_h_w_per_m2_k(B_M, P_PA, bad, SP_MPS).is_nan());
            assert!(woschni_h_w_per_m2_k(B_M, P_PA, T_K, bad).is_nan());
        }
        assert!(hohenberg_h_w_per_m2_k(VC_M3, P_PA, T_K, -1.0).is_nan());
    }

    fixed_proptest! {
        #[test]
        fn exponents_as_published(p in 1e5f64..1e7, t in 250.0f64..1200.0, sp in 0.2f64..15.0,
                                  v in 1e-5f64..1e-3, k in 1.1f64..3.0) {
            // Scaling laws of the published forms: h ∝ p^0.8, ∝ T^-0.53 / T^-0.4, ∝ V^-0.06.
            let w = woschni_h_w_per_m2_k(B_M, p, t, sp);
            prop_assert!((woschni_h_w_per_m2_k(B_M, k * p, t, sp) / w - k.powf(0.8)).abs() < 1e-9);
            prop_assert!((woschni_h_w_per_m2_k(B_M, p, k * t, sp) / w - k.powf(-0.53)).abs() < 1e-9);
            prop_assert!((woschni_h_w_per_m2_k(B_M, p, t, k * sp) / w - k.powf(0.8)).abs() < 1e-9);
            let h = hohenberg_h_w_per_m2_k(v, p, t, sp);
            prop_assert!((hohenberg_h_w_per_m2_k(k * v, p, t, sp) / h - k.powf(-0.06)).abs() < 1e-9);
            prop_assert!((hohenberg_h_w_per_m2_k(v, k * p, t, sp) / h - k.powf(0.8)).abs() < 1e-9);
            prop_assert!((hohenberg_h_w_per_m2_k(v, p, k * t, sp) / h - k.powf(-0.4)).abs() < 1e-9);
            prop_assert!(hohenberg_h_w_per_m2_k(v, p, t, sp * k) > h);
        }
    }
}
