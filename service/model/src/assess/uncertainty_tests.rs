//! Tests of the no-start probability (the checks of the issue "decisions"): Φ against the standard
//! normal table, sampling that converges at the rate its own standard error claims and repeats for
//! the same key, sigma points that agree with sampling, a wider forecast spread that raises the
//! risk of a vehicle expected to start, and a probability that stays in [0, 1] and rises as the
//! night gets colder.
//!
//! Nights come from `assess::tests::service_night` (a vehicle parked warm, soaked 12 h).

use super::*;
use crate::archetypes::find;
use crate::assess::tests::{FORECAST_STEPS, service_night};
use proptest::prelude::*;

fn night(id: &str, air_c: f64) -> VehicleNight {
    service_night(find(id).unwrap(), air_c)
}

fn probability(n: &VehicleNight, method: Method) -> NoStartProbability {
    let soc = assess(n).unwrap().state_of_charge;
    no_start_probability(n, soc, method).unwrap()
}

/// Nights whose probability lies inside (0, 1), near each archetype's threshold (probabilities
/// measured with 16 384 samples: 0.65, 0.06, 0.74, 0.07, 0.51, 0.04, 0.79, 0.18, 0.99, 0.48,
/// 0.009). The heavy-duty nights sit at the edge of slow cranking, where part of the inputs give a
/// hard failure: the hardest case for the sigma points.
const INFORMATIVE: [(&str, f64); 11] = [
    ("compact-di-i4", -10.0),
    ("compact-di-i4", -5.0),
    ("light-di-v8", -10.0),
    ("light-di-v8", -5.0),
    ("older-idi-v8", 5.0),
    ("older-idi-v8", 10.0),
    ("swirl-idi-i4", 0.0),
    ("swirl-idi-i4", 5.0),
    ("heavy-di-i6", -20.0),
    ("heavy-di-i6", -15.0),
    ("heavy-di-i6", -10.0),
];

// ---------------------------------------------------------------------------------------------
// Φ
// ---------------------------------------------------------------------------------------------

#[test]
fn normal_cdf_matches_the_standard_normal_table() {
    // Standard normal table (Abramowitz & Stegun 1964, Table 26.1), values as quoted in the task
    // brief; from memory to more digits: Φ(1) = 0.8413447461, Φ(1.96) = 0.9750021049,
    // Φ(−2.5) = 0.0062096653. Tolerance 1.5e-7: the erfc fit is good to 1.2e-7 (Numerical
    // Recipes, from memory), so Φ = erfc/2 is good to 0.6e-7, and the quoted values to 1e-9.
    let table = [
        (0.0, 0.5),
        (1.0, 0.841_344_746),
        (1.96, 0.975_002_1),
        (-2.5, 0.006_209_67),
    ];
    for (x, phi) in table {
        let got = normal_cdf(x);
        assert!((got - phi).abs() < 1.5e-7, "Φ({x}) = {got}, table {phi}");
    }
    // Tails: Φ(−10) ≈ 7.6e-24 (from memory), Φ(10) = 1 to double precision.
    assert!((0.0..1e-15).contains(&normal_cdf(-10.0)));
    assert!((normal_cdf(10.0) - 1.0).abs() < 1e-15);
}

/// Our erfc and Φ against a reference library from the registry (statrs, dev-dependency only:
/// the model keeps its one dependency) at 1 601 points from −8 to 8, and the quantile at 999
/// probabilities from 1e-9 to 1 − 1e-9. Why ours is kept: it is 12 lines with a published
/// error bound (Numerical Recipes `erfcc`, fractional error below 1.2e-7), far below any input
/// spread, and this test holds it to that bound everywhere the model uses it.
#[test]
fn erfc_and_the_normal_quantile_agree_with_a_reference_library() {
    use statrs::distribution::{ContinuousCDF, Normal};
    let reference = Normal::new(0.0, 1.0).unwrap();
    for i in 0..=1600 {
        let x = -8.0 + f64::from(i) * 0.01;
        let (ours, theirs) = (erfc(x), statrs::function::erf::erfc(x));
        assert!(
            (ours - theirs).abs() <= 1.2e-7 * theirs,
            "erfc({x}) = {ours}, statrs {theirs}"
        );
        let (ours, theirs) = (normal_cdf(x), reference.cdf(x));
        // Relative on the lower tail (probabilities of rare no-starts), absolute above.
        assert!(
            (ours - theirs).abs() <= 1.2e-7 * theirs.min(1.0 - theirs).max(1e-300) + 1e-15,
            "Φ({x}) = {ours}, statrs {theirs}"
        );
    }
    for i in 1..1000 {
        // Log-spaced into both tails, and linear through the middle.
        let u = f64::from(i) / 1000.0;
        for p in [u, 10f64.powf(-9.0 * u), 1.0 - 10f64.powf(-9.0 * u)] {
            if !(p > 0.0 && p < 1.0) {
                continue;
            }
            let (ours, theirs) = (
                crate::assess::actions::normal_quantile(p),
                reference.inverse_cdf(p),
            );
            assert!(
                (ours - theirs).abs() < 5e-7,
                "quantile({p}) = {ours}, statrs {theirs}"
            );
        }
    }
}

fixed_proptest! {
    #[test]
    fn normal_cdf_is_a_symmetric_increasing_probability(x in -12.0..12.0_f64, dx in 0.0..3.0_f64) {
        // Laws of any cumulative distribution of a symmetric density.
        let p = normal_cdf(x);
        prop_assert!((0.0..=1.0).contains(&p));
        prop_assert!((p + normal_cdf(-x) - 1.0).abs() < 1e-15, "Φ(x) + Φ(−x) = 1");
        prop_assert!(normal_cdf(x + dx) >= p, "Φ increases");
    }
}

// ---------------------------------------------------------------------------------------------
// Sampling
// ---------------------------------------------------------------------------------------------

#[test]
fn sampling_converges_within_three_standard_errors() {
    // Monte Carlo theory: with 4× the samples the estimate moves by about one reported standard
    // error of the smaller run (the 4N run reuses the N samples of the same key; the difference
    // has standard deviation √(3/4)·SE_N), so 3·SE_N is a 3.5-sigma bound. The reported error must
    // also halve (1/√N): within 0.15–0.85 × SE_N (measured down to 0.22), since the delta-method error scales with the
    // sampled variance, which carries its own sampling noise.
    for (id, air_c) in INFORMATIVE {
        let n = night(id, air_c);
        let small = probability(
            &n,
            Method::Sampling {
                samples: 1024,
                key: 0x00c0_1d5e,
            },
        );
        let large = probability(
            &n,
            Method::Sampling {
                samples: 4096,
                key: 0x00c0_1d5e,
            },
        );
        assert_eq!((small.model_runs, large.model_runs), (1024, 4096));
        assert!(small.standard_error > 0.0, "{id} {air_c}: no spread at all");
        let moved = (large.probability - small.probability).abs();
        assert!(
            moved < 3.0 * small.standard_error,
            "{id} {air_c}: {} -> {} moved {moved:.4} > 3 × {:.4}",
            small.probability,
            large.probability,
            small.standard_error
        );
        let ratio = large.standard_error / small.standard_error;
        assert!(
            (0.15..=0.85).contains(&ratio),
            "{id} {air_c}: standard error ratio {ratio:.3}"
        );
    }
}

#[test]
fn sampling_is_deterministic_for_a_key() {
    let n = night("older-idi-v8", 5.0);
    let method = Method::Sampling {
        samples: 512,
        key: 42,
    };
    let first = probability(&n, method);
    let second = probability(&n.clone(), method);
    assert_eq!(first, second);
    assert_eq!(first.probability.to_bits(), second.probability.to_bits());
    // Another key draws other samples (the probability is near 0.5 here, so it must differ).
    let other = probability(
        &n,
        Method::Sampling {
            samples: 512,
            key: 43,
        },
    );
    assert_ne!(first.probability, other.probability);
    let sp = probability(&n, Method::SigmaPoints);
    assert_eq!(sp, probability(&n, Method::SigmaPoints));
    // Sigma points are deterministic too, with their 2d = 8 runs beyond the central one.
    assert_eq!((sp.model_runs, sp.standard_error), (8, 0.0));
}

// ---------------------------------------------------------------------------------------------
// Sigma points against sampling
// ---------------------------------------------------------------------------------------------

/// Largest bias allowed of the sigma points against the sampled expectation, absolute
/// probability. Measured against 65 536 samples (standard error ≤ 0.002) on [`INFORMATIVE`]: the
/// sigma points are high by 0.027 (light-di-v8, −10 °C: 0.760 vs 0.733), 0.026 (heavy-di-i6,
/// −15 °C, the slow-cranking cliff: 0.500 vs 0.474), 0.021 (compact-di-i4, −10 °C) and 0.018
/// (older-idi-v8, +5 °C); every other night within 0.010. The test compares with 4096 samples, so
/// it allows this bias plus three of that run's standard errors (≤ 0.008) for its noise. Measured
/// with the key of the test: largest difference 0.036 (light-di-v8, −10 °C, allowed 0.046).
const SIGMA_POINT_TOLERANCE: f64 = 0.03;

#[test]
fn sigma_points_agree_with_sampling() {
    let mut nights: Vec<(&str, f64)> = INFORMATIVE.to_vec();
    // Certain start and certain no-start at both ends.
    nights.extend([
        ("compact-di-i4", 10.0),
        ("compact-di-i4", -25.0),
        ("swirl-idi-i4", -15.0),
    ]);
    let mut worst = 0.0_f64;
    for (id, air_c) in nights {
        let n = night(id, air_c);
        let sp = probability(&n, Method::SigmaPoints);
        let mc = probability(
            &n,
            Method::Sampling {
                samples: 4096,
                key: 0xc0ffee,
            },
        );
        let d = sp.probability - mc.probability;
        println!(
            "{id:14} {air_c:6.1} °C  sigma points {:.4}  sampling {:.4} ± {:.4}  difference {d:+.4}",
            sp.probability, mc.probability, mc.standard_error
        );
        let allowed = SIGMA_POINT_TOLERANCE + 3.0 * mc.standard_error;
        assert!(d.abs() <= allowed, "{id} {air_c}: {d:+.4} > {allowed:.4}");
        // Both estimate the spread around the same central margin.
        assert_eq!(sp.binding_margin, mc.binding_margin, "{id} {air_c}");
        worst = worst.max(d.abs());
    }
    println!("largest |sigma points − sampling(4096)| = {worst:.4}");
}

// ---------------------------------------------------------------------------------------------
// Forecast spread and temperature
// ---------------------------------------------------------------------------------------------

#[test]
fn a_wider_forecast_spread_raises_the_risk_of_a_vehicle_expected_to_start() {
    // When the margin is positive a no-start needs the night to turn out colder than forecast; a
    // wider spread makes that likelier (Φ(−m/σ) is convex for m > 0: Jensen's inequality).
    for (id, air_c) in [
        ("compact-di-i4", -5.0),
        ("light-di-v8", -5.0),
        ("older-idi-v8", 10.0),
        ("swirl-idi-i4", 5.0),
        ("swirl-idi-i4", 10.0),
    ] {
        let mut narrow = night(id, air_c);
        assert!(
            assess(&narrow).unwrap().margin_k > 0.0,
            "{id} {air_c}: margin must be positive"
        );
        narrow.forecast.air_spread_k = vec![0.5; FORECAST_STEPS];
        let mut wide = narrow.clone();
        wide.forecast.air_spread_k = vec![5.0; FORECAST_STEPS];
        assert_eq!(uncertainties(&wide).forecast_sigma_k, 5.0);
        for method in [
            Method::SigmaPoints,
            Method::Sampling {
                samples: 1024,
                key: 9,
            },
        ] {
            let p_narrow = probability(&narrow, method).probability;
            let p_wide = probability(&wide, method).probability;
            assert!(
                p_wide > p_narrow,
                "{id} {air_c} {method:?}: wide {p_wide} vs narrow {p_narrow}"
            );
        }
    }
}

#[test]
fn the_default_forecast_spread_grows_with_lead_time() {
    // The module's own estimate (1 K at zero lead + 0.08 K/h, capped at 5 K), checked by hand:
    // 12 h → 1.96 K, 0 h → 1 K, 100 h → 5 K.
    let mut n = night("compact-di-i4", -5.0);
    assert!(n.forecast.air_spread_k.is_empty());
    assert!((uncertainties(&n).forecast_sigma_k - 1.96).abs() < 1e-12);
    n.departure_s = 0.0;
    n.telemetry = Default::default();
    assert!((uncertainties(&n).forecast_sigma_k - 1.0).abs() < 1e-12);
    n.departure_s = 100.0 * 3600.0;
    assert_eq!(uncertainties(&n).forecast_sigma_k, FORECAST_SIGMA_MAX_K);
}

#[test]
fn the_probability_is_a_probability_and_rises_as_the_night_gets_colder() {
    // Colder nights start harder (fact of the trade, common practice, no source), so the
    // probability cannot fall as the night gets colder. Every degree from −30 to +15 °C on the
    // four glow-plug archetypes (the intake-heater archetypes break the margin's own monotonicity,
    // see `assess::tests`), sigma points and sampling with a fixed key. Exact: both are
    // deterministic and every run's no-start probability is monotone in the temperature.
    for id in [
        "compact-di-i4",
        "light-di-v8",
        "older-idi-v8",
        "swirl-idi-i4",
    ] {
        let mut warmer: Option<(f64, f64)> = None;
        let mut seen = (false, false);
        for i in (0..=45).rev() {
            let air_c = -30.0 + f64::from(i);
            let n = night(id, air_c);
            let sp = probability(&n, Method::SigmaPoints).probability;
            let mc = probability(
                &n,
                Method::Sampling {
                    samples: 128,
                    key: 5,
                },
            )
            .probability;
            for p in [sp, mc] {
                assert!((0.0..=1.0).contains(&p), "{id} {air_c}: {p}");
            }
            if let Some((sp_w, mc_w)) = warmer {
                assert!(
                    sp >= sp_w,
                    "{id} {air_c} °C: sigma points {sp} < {sp_w} one degree warmer"
                );
                assert!(
                    mc >= mc_w,
                    "{id} {air_c} °C: sampling {mc} < {mc_w} one degree warmer"
                );
            }
            warmer = Some((sp, mc));
            seen.0 |= sp < 0.01;
            seen.1 |= sp > 0.99;
        }
        // Not vacuous: every archetype goes from a near-certain start to a near-certain no-start.
        assert_eq!(seen, (true, true), "{id}");
    }
}

fixed_proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn colder_never_lowers_the_probability(
        i in 0..4_usize,
        air_c in -30.0..15.0_f64,
        colder_k in 0.05..6.0_f64,
        soc in 0.5..1.0_f64,
    ) {
        let id = ["compact-di-i4", "light-di-v8", "older-idi-v8", "swirl-idi-i4"][i];
        let mut warm = night(id, air_c);
        warm.battery.state_of_charge = Some(soc);
        let mut cold = warm.clone();
        cold.forecast.hours.iter_mut().for_each(|h| h.air_t_k -= colder_k);
        let p_warm = probability(&warm, Method::SigmaPoints);
        let p_cold = probability(&cold, Method::SigmaPoints);
        prop_assert!(p_cold.probability >= p_warm.probability);
        // The charge mode alone gets no likelier to start either (the binding mode may switch
        // between the two nights, so its margins are not comparable).
        let charge = crate::assess::FailureMode::ChargeTemperature;
        prop_assert!(p_cold.of_mode(charge) >= p_warm.of_mode(charge) - 1e-6);
        // The spread includes the model's own error, so it is at least that.
        prop_assert!(p_warm.margin_spread_k >= MODEL_MARGIN_SIGMA_K);
    }
}

#[test]
fn a_hostile_forecast_spread_is_an_error() {
    let base = night("compact-di-i4", -5.0);
    for v in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY, 1e300, -1e300] {
        let mut n = base.clone();
        n.forecast.air_spread_k = vec![v; FORECAST_STEPS];
        for method in [
            Method::SigmaPoints,
            Method::Sampling {
                samples: 16,
                key: 1,
            },
        ] {
            assert!(
                no_start_probability(&n, 0.9, method).is_err(),
                "spread {v:e} {method:?}"
            );
        }
    }
}

// ---------------------------------------------------------------------------------------------
// The fuel axis
// ---------------------------------------------------------------------------------------------

#[test]
fn the_fuel_axis_moves_the_cold_flow_limits_and_nothing_else() {
    use crate::fuel::{FuelGrade, TemperateClass, cetane_number};
    // EN 590 grades carry a cetane number of 51, a measured base alone reads as 40 (fuel.rs): a
    // shifted fuel keeps the fuel's own.
    let mut n = night("compact-di-i4", -10.0);
    n.fuel.description.base = FuelBase::Grade(FuelGrade::En590Temperate(TemperateClass::F));
    n.fuel.description.cetane_number = None;
    let shifted = shifted_fuel(&n.fuel.description, 2.0).unwrap();
    assert_eq!(cetane_number(&shifted).unwrap(), 51.0);
    let before = cold_flow_properties(&n.fuel.description).unwrap();
    let after = cold_flow_properties(&shifted).unwrap();
    assert_eq!(after.cfpp_k, before.cfpp_k + 2.0);
    assert_eq!(after.cloud_point_k, before.cloud_point_k + 2.0);
    assert_eq!(after.pour_point_k, before.pour_point_k + 2.0);

    // The fuel-only points give what a full run of the shifted night gives, on every mode.
    for grade in [
        FuelGrade::UsNo2,
        FuelGrade::En590Temperate(TemperateClass::F),
    ] {
        n.fuel.description.base = FuelBase::Grade(grade);
        let centre = assess(&n).unwrap();
        for d_k in [3.0, -3.0] {
            let mut full = n.clone();
            full.fuel.description = shifted_fuel(&n.fuel.description, d_k).unwrap();
            let whole = assess(&full).unwrap();
            let mut ctx = NightContext::new();
            let fuel_only = fuel_flow_margin_in(
                &n,
                &cold_flow_properties(&full.fuel.description).unwrap(),
                &mut ctx,
            )
            .unwrap();
            assert_eq!(fuel_only, whole.modes.fuel_flow_k, "{grade:?} {d_k}");
            assert_eq!(
                whole.modes.charge_k, centre.modes.charge_k,
                "{grade:?} {d_k}"
            );
            assert_eq!(whole.modes.cranking_rpm, centre.modes.cranking_rpm);
            assert_eq!(whole.modes.battery_freeze_k, centre.modes.battery_freeze_k);
        }
    }
}
