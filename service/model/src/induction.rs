//! Induction heating: how much the intake port and the cylinder walls warm the charge before the
//! intake valve closes, at cranking flow.
//!
//! **Why it matters.** At cranking speed the air dwells a long time in the port and the cylinder:
//! an intake stroke lasts about 0.2 s at 150 rpm against about 15 ms at 2000 rpm. A warm engine
//! (a hot restart, or one kept warm by a block heater) therefore hands a large share of its
//! wall-to-air temperature difference to the charge before compression starts; a cold-soaked
//! engine, whose walls sit at the air temperature, hands it nothing. Without this the engine's
//! warmth would act only through the (smaller) compression-stroke wall loss.
//!
//! **Method.** Two heat exchangers in series, each with the effectiveness of a stream exchanging
//! with a wall at uniform temperature, `ε = 1 − exp(−NTU)` (Incropera et al., *Fundamentals of Heat
//! and Mass Transfer*, §8.3, from memory, certain):
//! 1. **The intake port** in the cylinder head, a tube of diameter [`PORT_DIAMETER_PER_BORE`] × bore and
//!    length [`PORT_LENGTH_PER_BORE`] × bore (estimates), carrying one cylinder's charge during its
//!    intake event. Nusselt number by Gnielinski's correlation for turbulent tube flow
//!    (Re > 3000; Incropera eq. 8.62, from memory), laminar 3.66 below Re 2300 (Incropera eq. 8.55,
//!    from memory), linear between; a short-tube entry factor `1 + (D/L)^0.7` (from memory, a common
//!    developing-flow allowance). `NTU = h A / (ṁ c_p)`.
//! 2. **The cylinder during the intake stroke**: Hohenberg's in-cylinder correlation (SAE 790825,
//!    reference.md §4.2, confirmed) at intake pressure, the mean intake-stroke volume and area, and
//!    the mean piston speed; the charge grows linearly while it is inducted, so the mean mass exposed
//!    is half the trapped mass: `NTU = h A t_intake / (½ m c_p)`.
//!
//! Air properties: viscosity by Sutherland's law (μ_ref = 1.716e-5 Pa s at 273.15 K, S = 110.4 K;
//! White, *Viscous Fluid Flow*, Table 1-2, from memory; checked in the tests against the 300 K value
//! of Incropera Table A.4), conductivity from a Prandtl number of 0.71 (reference.md §4.3).
//!
//! **Left out.** Residual gas: before the first firing the residual is the previous cycle's air,
//! near the wall temperature, which the wall terms already represent. The manifold upstream of the
//! head (often plastic or a separate casting, cooler than the head) is not counted: a conservative
//! choice. The intake heater's air leaves the grid upstream of the port, so cold walls take part of
//! its rise back: the same exchanger does that.
//!
//! **Units.** K, Pa, m, s, kg, rpm. **Validity.** Intake 200–400 K, walls 200–420 K, 10–3000 rpm,
//! 30–300 kPa (the compression model's ranges). Estimates: the port proportions.

use crate::air;
use crate::error::{ModelError, check_range};
use crate::geometry::EngineGeometry;
use crate::heat_transfer::hohenberg_h_w_per_m2_k;
use std::f64::consts::PI;

/// Intake port diameter per bore (estimate: the inlet valve throat of a two- or four-valve diesel
/// head is about 0.35–0.45 bore, from memory).
pub const PORT_DIAMETER_PER_BORE: f64 = 0.4;
/// Heated intake port length per bore, in the cylinder head only (estimate).
pub const PORT_LENGTH_PER_BORE: f64 = 1.5;
/// Prandtl number of air (reference.md §4.3).
pub const AIR_PRANDTL: f64 = 0.71;

/// Sutherland's law for the dynamic viscosity of air, Pa s.
pub fn air_viscosity_pa_s(t_k: f64) -> f64 {
    const MU_REF_PA_S: f64 = 1.716e-5;
    const T_REF_K: f64 = 273.15;
    const S_K: f64 = 110.4;
    MU_REF_PA_S * (t_k / T_REF_K).powf(1.5) * (T_REF_K + S_K) / (t_k + S_K)
}

/// Thermal conductivity of air from its viscosity and a Prandtl number of 0.71, W/(m K).
pub fn air_conductivity_w_per_m_k(t_k: f64) -> f64 {
    air::cp_j_per_kg_k(t_k) * air_viscosity_pa_s(t_k) / AIR_PRANDTL
}

/// Nusselt number of fully developed tube flow: laminar 3.66, Gnielinski above Re 3000, linear
/// blend in between.
pub fn tube_nusselt(reynolds: f64, prandtl: f64) -> f64 {
    let gnielinski = |re: f64| {
        let f = (0.790 * re.ln() - 1.64).powi(-2);
        (f / 8.0) * (re - 1000.0) * prandtl
            / (1.0 + 12.7 * (f / 8.0).sqrt() * (prandtl.powf(2.0 / 3.0) - 1.0))
    };
    if reynolds <= 2300.0 {
        3.66
    } else if reynolds >= 3000.0 {
        gnielinski(reynolds).max(3.66)
    } else {
        let s = (reynolds - 2300.0) / 700.0;
        3.66 + s * (gnielinski(3000.0) - 3.66)
    }
}

/// What the induction model gives.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Induction {
    /// Charge temperature at intake valve closing, K.
    pub ivc_t_k: f64,
    /// Share of the wall-to-air difference the charge takes up (0..1).
    pub effectiveness: f64,
}

/// Charge temperature at IVC from air entering the port at `air_in_t_k` past walls at `wall_t_k`.
pub fn ivc_charge(
    geometry: &EngineGeometry,
    crank_rpm: f64,
    air_in_t_k: f64,
    intake_p_pa: f64,
    wall_t_k: f64,
) -> Result<Induction, ModelError> {
    check_range("crank_rpm", crank_rpm, 10.0, 3000.0, "10–3000 rpm")?;
    check_range("air_in_t_k", air_in_t_k, 200.0, 400.0, "200–400 K")?;
    check_range("wall_t_k", wall_t_k, 200.0, 420.0, "200–420 K")?;
    check_range("intake_p_pa", intake_p_pa, 30e3, 300e3, "30–300 kPa")?;
    let effectiveness = effectiveness(geometry, crank_rpm, air_in_t_k, intake_p_pa, wall_t_k);
    Ok(Induction {
        ivc_t_k: air_in_t_k + effectiveness * (wall_t_k - air_in_t_k),
        effectiveness,
    })
}

fn effectiveness(
    g: &EngineGeometry,
    crank_rpm: f64,
    air_in_t_k: f64,
    intake_p_pa: f64,
    wall_t_k: f64,
) -> f64 {
    // Film temperature for the properties; the charge density at the inlet for the mass.
    let film_t_k = 0.5 * (air_in_t_k + wall_t_k);
    let cp = air::cp_j_per_kg_k(film_t_k);
    let rho_kg_m3 = intake_p_pa / (air::R_AIR_J_PER_KG_K * air_in_t_k);
    let ivc_deg = g.ivc_crank_deg_from_tdc();
    let v_ivc_m3 = g.volume_m3(ivc_deg);
    let trapped_kg = rho_kg_m3 * v_ivc_m3;
    // The intake event runs from TDC to IVC: (180 + IVC ABDC) degrees at 6 N degrees per second.
    let intake_s = (180.0 + g.ivc_deg_abdc) / (6.0 * crank_rpm);
    let flow_kg_s = trapped_kg / intake_s;

    // 1. The port.
    let d_m = PORT_DIAMETER_PER_BORE * g.bore_m;
    let l_m = PORT_LENGTH_PER_BORE * g.bore_m;
    let mu = air_viscosity_pa_s(film_t_k);
    let reynolds = 4.0 * flow_kg_s / (PI * d_m * mu);
    let nusselt = tube_nusselt(reynolds, AIR_PRANDTL) * (1.0 + (d_m / l_m).powf(0.7));
    let h_port = nusselt * air_conductivity_w_per_m_k(film_t_k) / d_m;
    let ntu_port = h_port * PI * d_m * l_m / (flow_kg_s * cp);

    // 2. The cylinder while it fills: mean volume and area of the intake stroke.
    let mid_deg = 0.5 * (ivc_deg - 360.0); // between gas-exchange TDC (−360°) and IVC
    let v_mid_m3 = g.volume_m3(mid_deg);
    let area_m2 = g.wall_area_m2(mid_deg);
    let h_cyl = hohenberg_h_w_per_m2_k(
        v_mid_m3,
        intake_p_pa,
        film_t_k,
        g.mean_piston_speed_mps(crank_rpm),
    );
    let ntu_cyl = h_cyl * area_m2 * intake_s / (0.5 * trapped_kg * cp);

    let passed = (-ntu_port).exp() * (-ntu_cyl).exp();
    if passed.is_finite() {
        1.0 - passed
    } else {
        0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::archetypes::ARCHETYPES;

    #[test]
    fn sutherland_matches_the_handbook_at_300_k() {
        // Incropera Table A.4 (from memory): air at 300 K, μ = 184.6e-7 Pa s, k = 26.3e-3 W/(m K).
        assert!((air_viscosity_pa_s(300.0) - 184.6e-7).abs() < 0.5e-7);
        assert!((air_conductivity_w_per_m_k(300.0) - 26.3e-3).abs() < 0.6e-3);
    }

    #[test]
    fn gnielinski_matches_its_published_form_at_a_computed_point() {
        // Re = 10 000, Pr = 0.7: f = (0.790 ln 1e4 − 1.64)^−2 = 0.03148, Nu = 29.8 (computed here
        // by hand from Incropera eq. 8.62).
        assert!((tube_nusselt(10_000.0, 0.7) - 29.8).abs() < 0.1);
        assert_eq!(tube_nusselt(1000.0, 0.7), 3.66);
    }

    #[test]
    fn a_cold_soaked_engine_does_not_warm_the_charge() {
        for a in ARCHETYPES {
            let i = ivc_charge(&a.engine.geometry, 150.0, 250.0, 101_325.0, 250.0).unwrap();
            assert_eq!(i.ivc_t_k, 250.0, "{}", a.id);
        }
    }

    #[test]
    fn a_warm_engine_warms_the_charge_more_at_cranking_than_running() {
        for a in ARCHETYPES {
            let g = &a.engine.geometry;
            let crank = ivc_charge(g, 150.0, 243.15, 101_325.0, 358.15).unwrap();
            let run = ivc_charge(g, 2000.0, 243.15, 101_325.0, 358.15).unwrap();
            assert!(crank.ivc_t_k > 243.15 && crank.ivc_t_k < 358.15, "{}", a.id);
            assert!(crank.effectiveness > run.effectiveness, "{}", a.id);
            // Order of magnitude (estimate): at cranking a large share, at 2000 rpm a small one
            // (the running-engine intake temperature rise of some tens of kelvin, from memory).
            assert!(
                (0.2..0.8).contains(&crank.effectiveness),
                "{} {}",
                a.id,
                crank.effectiveness
            );
            assert!(run.effectiveness < 0.3, "{} {}", a.id, run.effectiveness);
        }
    }

    #[test]
    fn hostile_inputs_are_refused() {
        let g = ARCHETYPES[0].engine.geometry;
        for (rpm, t, p, w) in [
            (f64::NAN, 250.0, 1e5, 250.0),
            (150.0, f64::INFINITY, 1e5, 250.0),
            (150.0, 250.0, -1.0, 250.0),
            (150.0, 250.0, 1e5, 1e9),
            (0.0, 250.0, 1e5, 250.0),
        ] {
            assert!(ivc_charge(&g, rpm, t, p, w).is_err());
        }
    }
}
