//! Simulated fleet: does calibration from observed starts make the no-start probabilities better?
//!
//! Each simulated vehicle has hidden truths that differ from its archetype's defaults: a larger
//! leak area (worn rings), a weaker battery, glow plugs that have lost part of their heat. Nights
//! come from a small weather generator; each morning's outcome is drawn from the model *at the
//! truth* plus noise (a morning-to-morning margin error and a noisy speed reading), with a fixed
//! random key. The service side sees only the archetype defaults and the observed outcomes: it
//! updates each vehicle's calibration (pooled per archetype) for 30 mornings. On held-out nights
//! the calibrated and uncalibrated no-start probabilities are scored against fresh outcomes.
//!
//! What it proves: the update, the pooling and the assessment's use of the posterior recover
//! per-vehicle differences that the physics model can express, and turn them into better
//! calibrated probabilities. What it does not prove: that the physics model is right about real
//! engines (the simulator shares it: the truths are the model's own inputs moved), nor that the
//! chosen noise levels are those of a real fleet. The simulator draws outcomes from its own
//! threshold on the truth margin, not through the update's likelihood or `no_start_probability`.

use startmargin_model::archetypes::{ARCHETYPES, AidConfig, EngineConfig};
use startmargin_model::assess::uncertainty::{Method, no_start_probability_from};
use startmargin_model::assess::{BatteryConfig, VehicleNight, assess, unassisted};
use startmargin_model::constants::celsius_to_kelvin;
use startmargin_model::learning::{
    AttemptConditions, AttemptOutcome, ObservedAttempt, VehicleCalibration, night_at_attempt,
    uncalibrated_pool, update, update_pool, vehicle_prior,
};

/// Fixed random key of the simulation.
const RANDOM_KEY: u64 = 0x0d1e_05e1_7a11_0c0d;
const VEHICLES_PER_ARCHETYPE: usize = 3;
const MORNINGS: usize = 30;
const HELD_OUT_NIGHTS: usize = 20;
/// Morning-to-morning margin noise of the simulated truth, K.
const TRUTH_NIGHT_SD_K: f64 = 5.0;
/// Noise of a peak cranking speed reading, as a log ratio.
const TRUTH_SPEED_NOISE: f64 = 0.05;

/// A small deterministic generator (SplitMix64, Steele, Lea & Flood 2014, from memory).
struct Keyed(u64);
impl Keyed {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

/// What the service knows of a vehicle, and its hidden truth.
struct Vehicle {
    archetype: usize,
    known: (EngineConfig, AidConfig, BatteryConfig),
    truth: (EngineConfig, AidConfig, BatteryConfig),
    calibration: VehicleCalibration,
}

fn fleet(rng: &mut Keyed) -> Vec<Vehicle> {
    let mut out = Vec::new();
    for (k, a) in ARCHETYPES.iter().enumerate() {
        for _ in 0..VEHICLES_PER_ARCHETYPE {
            let known_battery =
                unassisted::reference_night(&a.engine, celsius_to_kelvin(0.0)).battery;
            let mut engine = a.engine;
            engine.leak_area_m2 *= (0.5 + 0.3 * rng.normal()).exp().clamp(0.5, 4.0);
            let mut aids = a.aids;
            if let Some(g) = aids.glow_plugs.as_mut() {
                g.plateau_gain_k *= 0.7 + 0.3 * rng.uniform();
            }
            let battery = BatteryConfig {
                health_fraction: 0.4 + 0.5 * rng.uniform(),
                ..known_battery
            };
            out.push(Vehicle {
                archetype: k,
                known: (a.engine, a.aids, known_battery),
                truth: (engine, aids, battery),
                calibration: VehicleCalibration::uncalibrated(),
            });
        }
    }
    out
}

/// One night's air at the attempt, °C: a cold spell generator.
fn night_air_c(rng: &mut Keyed) -> f64 {
    (-12.0 + 10.0 * rng.normal()).clamp(-40.0, 15.0)
}

fn night(parts: (EngineConfig, AidConfig, BatteryConfig), air_c: f64) -> VehicleNight {
    let (engine, aids, battery) = parts;
    let r = unassisted::reference_night(&engine, celsius_to_kelvin(air_c));
    night_at_attempt(
        engine,
        aids,
        battery,
        r.oil,
        r.fuel,
        false,
        &AttemptConditions {
            at_s: 0.0,
            air_t_k: celsius_to_kelvin(air_c),
            coolant_t_k: None,
            oil_t_k: None,
            fuel_t_k: None,
            battery_rest_v: None,
            preheat_s: aids.glow_preheat_s,
            block_heater_on: false,
        },
    )
    .unwrap()
}

/// The morning as it happens at the truth.
fn morning(v: &Vehicle, air_c: f64, rng: &mut Keyed) -> ObservedAttempt {
    let t = assess(&night(v.truth, air_c)).unwrap();
    let margin_k = t.margin_k + TRUTH_NIGHT_SD_K * rng.normal();
    let rpm = t.cranking.result.crank_rpm * (TRUTH_SPEED_NOISE * rng.normal()).exp();
    let cranks = rpm >= v.truth.0.min_start_speed_rpm && !t.cranking.result.battery_frozen;
    let (outcome, cranking_s) = match (cranks, margin_k) {
        (true, m) if m > 4.0 => (AttemptOutcome::Fired, 1.5),
        (true, m) if m > 0.0 => (AttemptOutcome::FiredAfterRetries, 8.0),
        _ => (AttemptOutcome::DidNotFire, 15.0),
    };
    ObservedAttempt {
        outcome,
        cranking_s,
        peak_cranking_rpm: (rpm > 0.0).then_some(rpm.min(1_000.0)),
        lowest_cranking_v: None,
    }
}

fn probability(v: &Vehicle, air_c: f64, calibration: VehicleCalibration) -> f64 {
    let mut n = night(v.known, air_c);
    n.options.calibration = calibration;
    let centre = assess(&n).unwrap();
    no_start_probability_from(&n, &centre, Method::SigmaPoints)
        .unwrap()
        .probability
}

/// The truths as the calibrated factors see them, averaged over a set of nights: the thermal
/// offset (truth margin − model margin) and ln(truth speed / model speed).
fn effective_truth(v: &Vehicle, airs_c: &[f64]) -> (f64, f64) {
    let (mut off, mut crank, mut n) = (0.0_f64, 0.0_f64, 0.0_f64);
    for &air_c in airs_c {
        let t = assess(&night(v.truth, air_c)).unwrap();
        let m = assess(&night(v.known, air_c)).unwrap();
        let (tr, mr) = (t.cranking.result.crank_rpm, m.cranking.result.crank_rpm);
        if tr > 0.0 && mr > 0.0 && tr >= v.truth.0.min_start_speed_rpm {
            off += t.margin_k - m.margin_k;
            crank += (tr / mr).ln();
            n += 1.0;
        }
    }
    (off / n.max(1.0), crank / n.max(1.0))
}

struct Score {
    brier: f64,
    log_loss: f64,
}

fn score(pairs: &[(f64, bool)]) -> Score {
    let n = pairs.len() as f64;
    let mut brier = 0.0;
    let mut log_loss = 0.0;
    for &(p, failed) in pairs {
        let y = if failed { 1.0 } else { 0.0 };
        brier += (p - y) * (p - y);
        let q = p.clamp(1e-6, 1.0 - 1e-6);
        log_loss -= y * q.ln() + (1.0 - y) * (1.0 - q).ln();
    }
    Score {
        brier: brier / n,
        log_loss: log_loss / n,
    }
}

/// Largest |mean predicted − observed rate| over five equal bins holding at least 40 nights.
fn largest_bin_gap(pairs: &[(f64, bool)]) -> (f64, Vec<(f64, f64, usize)>) {
    let mut bins = [(0.0, 0.0, 0usize); 5];
    for &(p, failed) in pairs {
        let b = ((p * 5.0) as usize).min(4);
        bins[b].0 += p;
        bins[b].1 += if failed { 1.0 } else { 0.0 };
        bins[b].2 += 1;
    }
    let table: Vec<_> = bins
        .iter()
        .map(|&(sp, sf, n)| (sp / n.max(1) as f64, sf / n.max(1) as f64, n))
        .collect();
    let gap = table
        .iter()
        .filter(|b| b.2 >= 40)
        .map(|b| (b.0 - b.1).abs())
        .fold(0.0, f64::max);
    (gap, table)
}

#[test]
fn calibration_from_thirty_mornings_beats_the_archetype_defaults() {
    let mut rng = Keyed(RANDOM_KEY);
    let mut vehicles = fleet(&mut rng);
    let mut pools = vec![uncalibrated_pool(); ARCHETYPES.len()];
    let evaluation_airs_c: Vec<f64> = (0..8).map(|k| -30.0 + 5.0 * k as f64).collect();
    let truths: Vec<_> = vehicles
        .iter()
        .map(|v| effective_truth(v, &evaluation_airs_c))
        .collect();
    // Mean |recovered − truth| of the thermal offset and cranking factor after 0, 5, 15, 30 mornings.
    let checkpoints = [0usize, 5, 15, 30];
    let mut errors = vec![(0.0, 0.0); checkpoints.len()];
    let record = |errors: &mut Vec<(f64, f64)>, i: usize, vs: &[Vehicle]| {
        for (v, t) in vs.iter().zip(&truths) {
            errors[i].0 += (v.calibration.thermal_offset_k.mean - t.0).abs() / vs.len() as f64;
            errors[i].1 += (v.calibration.cranking_log_factor.mean - t.1).abs() / vs.len() as f64;
        }
    };
    record(&mut errors, 0, &vehicles);
    for day in 1..=MORNINGS {
        for v in vehicles.iter_mut() {
            let air_c = night_air_c(&mut rng);
            let observed = morning(v, air_c, &mut rng);
            if v.calibration.observations == 0 {
                v.calibration = vehicle_prior(&pools[v.archetype]);
            }
            let u = update(&v.calibration, &night(v.known, air_c), &observed).unwrap();
            pools[v.archetype] = update_pool(&pools[v.archetype], &u);
            v.calibration = u.posterior;
        }
        if let Some(i) = checkpoints.iter().position(|&c| c == day) {
            record(&mut errors, i, &vehicles);
        }
    }

    let mut calibrated = Vec::new();
    let mut uncalibrated = Vec::new();
    for v in &vehicles {
        for _ in 0..HELD_OUT_NIGHTS {
            let air_c = night_air_c(&mut rng);
            let failed = morning(v, air_c, &mut rng).outcome == AttemptOutcome::DidNotFire;
            calibrated.push((probability(v, air_c, v.calibration), failed));
            uncalibrated.push((
                probability(v, air_c, VehicleCalibration::uncalibrated()),
                failed,
            ));
        }
    }
    let (after, before) = (score(&calibrated), score(&uncalibrated));
    let (gap, bins) = largest_bin_gap(&calibrated);
    let (gap_before, bins_before) = largest_bin_gap(&uncalibrated);
    println!(
        "held-out nights: {} ({} vehicles × {HELD_OUT_NIGHTS})",
        calibrated.len(),
        vehicles.len()
    );
    println!(
        "Brier: uncalibrated {:.4}, calibrated {:.4}; log loss: uncalibrated {:.4}, calibrated {:.4}",
        before.brier, after.brier, before.log_loss, after.log_loss
    );
    println!("reliability bins (mean predicted, observed, count), calibrated: {bins:.3?}");
    println!("reliability bins, uncalibrated: {bins_before:.3?}");
    println!(
        "largest bin gap (bins ≥ 40 nights): calibrated {gap:.3}, uncalibrated {gap_before:.3}"
    );
    for (c, e) in checkpoints.iter().zip(&errors) {
        println!(
            "after {c:2} mornings: mean |offset − truth| {:.2} K, mean |cranking factor − truth| {:.3}",
            e.0, e.1
        );
    }

    assert!(
        after.brier < 0.8 * before.brier,
        "Brier {} vs {}",
        after.brier,
        before.brier
    );
    assert!(
        after.log_loss < 0.8 * before.log_loss,
        "log loss {} vs {}",
        after.log_loss,
        before.log_loss
    );
    assert!(gap < 0.15, "largest reliability gap {gap}");
    assert!(errors[3].0 < 0.6 * errors[0].0 && errors[3].0 <= errors[1].0 + 0.5);
    assert!(errors[3].1 < 0.5 * errors[0].1 && errors[3].1 <= errors[1].1 + 0.01);
}
