//! Gaussian arithmetic of the calibration update: the inverse Mills ratio φ(z)/Φ(z) from ln Φ (finite
//! in both tails), the probit moment match, and the conjugate Gaussian update.

use super::Belief;

/// ln Φ(x) for every finite x. For x ≥ 0, Φ is near 1 and `ln(Φ)` loses nothing; for x < 0 the
/// complementary error function is written as t·exp(P(t)) (Numerical Recipes `erfcc`, fractional
/// error < 1.2e-7 everywhere), so its logarithm is ln t + P(t): no underflow however far the tail.
pub(crate) fn ln_normal_cdf(x: f64) -> f64 {
    let z = -x / std::f64::consts::SQRT_2;
    if z <= 0.0 {
        // Φ(x) = 1 − ½ erfc(|z|): at least ½, computed directly.
        let (ln_t, p) = ln_erfc_parts(-z);
        (1.0 - 0.5 * (ln_t + p).exp()).ln()
    } else {
        let (ln_t, p) = ln_erfc_parts(z);
        ln_t + p - std::f64::consts::LN_2
    }
}

/// ln t and P(z) of erfc(z) = t·exp(P) for z ≥ 0 (Numerical Recipes `erfcc` coefficients).
fn ln_erfc_parts(z: f64) -> (f64, f64) {
    let t = 1.0 / (1.0 + 0.5 * z);
    let p = -z * z - 1.265_512_23
        + t * (1.000_023_68
            + t * (0.374_091_96
                + t * (0.096_784_18
                    + t * (-0.186_288_06
                        + t * (0.278_868_07
                            + t * (-1.135_203_98
                                + t * (1.488_515_87 + t * (-0.822_152_23 + t * 0.170_872_77))))))));
    (t.ln(), p)
}

/// The inverse Mills ratio λ(z) = φ(z)/Φ(z), finite for every finite z (≈ −z far in the left tail,
/// → 0 in the right).
pub(crate) fn inverse_mills(z: f64) -> f64 {
    let ln_pdf = -0.5 * z * z - 0.5 * (2.0 * std::f64::consts::PI).ln();
    (ln_pdf - ln_normal_cdf(z)).exp()
}

/// Assumed-density filtering of a Gaussian belief N(μ, s²) about θ under a probit likelihood
/// P(y | θ) = Φ(y (m + θ)/σ_n), y = +1 or −1: the Gaussian with the posterior's mean and
/// variance (module doc), the spread floored at `sd_floor`.
pub(crate) fn probit_update(
    prior: Belief,
    margin: f64,
    noise_sd: f64,
    fired: bool,
    sd_floor: f64,
) -> Belief {
    let y = if fired { 1.0 } else { -1.0 };
    let s2 = prior.sd * prior.sd;
    let total_sd = (noise_sd * noise_sd + s2).sqrt();
    let z = y * (margin + prior.mean) / total_sd;
    let lambda = inverse_mills(z);
    let mean = prior.mean + y * s2 * lambda / total_sd;
    // 0 < λ(z + λ) < 1 for a Gaussian; clamp against rounding so the variance never grows or
    // turns negative.
    let shrink = (lambda * (z + lambda)).clamp(0.0, 1.0);
    let var = s2 * (1.0 - s2 / (total_sd * total_sd) * shrink);
    Belief {
        mean,
        sd: var.max(0.0).sqrt().max(sd_floor),
    }
}

/// Conjugate update of N(μ, s²) by one observation of θ with Gaussian noise `noise_sd`.
pub(crate) fn conjugate_update(
    prior: Belief,
    observed: f64,
    noise_sd: f64,
    sd_floor: f64,
) -> Belief {
    let prior_precision = 1.0 / (prior.sd * prior.sd);
    let obs_precision = 1.0 / (noise_sd * noise_sd);
    let precision = prior_precision + obs_precision;
    let mean = (prior.mean * prior_precision + observed * obs_precision) / precision;
    Belief {
        mean,
        sd: (1.0 / precision).sqrt().max(sd_floor),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Check values of Φ from standard tables (Abramowitz & Stegun 26.2, from memory):
    /// Φ(−1.96) = 0.024998, Φ(1) = 0.841345; far tail ln Φ(−40) ≈ −804.608 (asymptotic
    /// −x²/2 − ln(−x √(2π))).
    #[test]
    fn ln_cdf_matches_tables_and_stays_finite() {
        assert!((ln_normal_cdf(-1.96).exp() - 0.024_998).abs() < 1e-6);
        assert!((ln_normal_cdf(1.0).exp() - 0.841_345).abs() < 1e-6);
        let asymptotic = -800.0 - (40.0 * (2.0 * std::f64::consts::PI).sqrt()).ln();
        assert!((ln_normal_cdf(-40.0) - asymptotic).abs() < 1e-3);
        assert!(ln_normal_cdf(40.0) <= 0.0 && ln_normal_cdf(40.0) > -1e-12);
    }

    #[test]
    fn inverse_mills_is_finite_and_tends_to_minus_z() {
        for z in [-1e3, -40.0, -5.0, 0.0, 5.0, 40.0, 1e3] {
            let l = inverse_mills(z);
            assert!(l.is_finite() && l >= 0.0, "λ({z}) = {l}");
        }
        assert!((inverse_mills(-40.0) / 40.0 - 1.0).abs() < 1e-3);
        // λ(0) = φ(0)/½ = 2/√(2π).
        assert!((inverse_mills(0.0) - 2.0 / (2.0 * std::f64::consts::PI).sqrt()).abs() < 1e-6);
    }

    #[test]
    fn probit_update_moves_towards_the_evidence_and_narrows() {
        let prior = Belief { mean: 0.0, sd: 8.0 };
        let fired = probit_update(prior, 0.0, 6.0, true, 0.5);
        let failed = probit_update(prior, 0.0, 6.0, false, 0.5);
        assert!(fired.mean > 0.0 && failed.mean < 0.0);
        assert!(
            (fired.mean + failed.mean).abs() < 1e-9,
            "symmetric at zero margin"
        );
        assert!(fired.sd < prior.sd && failed.sd < prior.sd);
        // An expected outcome teaches little; a surprise teaches much.
        let expected = probit_update(prior, 30.0, 6.0, true, 0.5);
        let surprise = probit_update(prior, 30.0, 6.0, false, 0.5);
        assert!(expected.mean.abs() < 0.1 && surprise.mean < -20.0);
        // An impossible surprise stays finite and above the floor.
        let extreme = probit_update(prior, 1e4, 6.0, false, 0.5);
        assert!(extreme.mean.is_finite() && extreme.sd >= 0.5);
    }
}
