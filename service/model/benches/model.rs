//! Benchmarks of the assembled model: one deterministic assessment of a light and a heavy
//! archetype (target under 20 µs each), the same with the night's margin path, the no-start
//! probability by sigma points against sampling at 64, 256 and 1024 samples (cost; their accuracy
//! against 16 384 samples is printed once, outside the timing), and the action search for a
//! vehicle at risk with a block heater.
//!
//! The nights are illustrative: a vehicle parked with its coolant at 80 °C, 14 hourly forecast
//! steps at a constant air temperature with a 3 m/s breeze and half cloud, departure after 12 h.

use criterion::{Criterion, criterion_group, criterion_main};
use startmargin_model::archetypes::find;
use startmargin_model::assess::decision::{DecisionPolicy, decide};
use startmargin_model::assess::unassisted::reference_night;
use startmargin_model::assess::uncertainty::{Method, no_start_probability};
use startmargin_model::assess::{Telemetry, VehicleNight, assess};
use startmargin_model::oil::SaeGrade;
use startmargin_model::soak::ForecastHour;
use std::hint::black_box;

const HOUR_S: f64 = 3_600.0;

/// A vehicle of archetype `id` with its own aids, parked warm, soaked 12 h at `air_c`.
fn night(id: &str, air_c: f64) -> VehicleNight {
    let a = find(id).expect("built-in archetype");
    let air_t_k = air_c + 273.15;
    let mut n = reference_night(&a.engine, air_t_k);
    n.aids = a.aids;
    n.forecast.hours = vec![
        ForecastHour {
            air_t_k,
            wind_mps: 3.0,
            cloud_fraction: 0.5
        };
        14
    ];
    n.telemetry = Telemetry {
        observed_at_s: Some(0.0),
        coolant_t_k: Some(353.15),
        ..Telemetry::default()
    };
    n.departure_s = 12.0 * HOUR_S;
    n.battery.state_of_charge = Some(0.9);
    n.battery.health_fraction = 0.9;
    n.oil = SaeGrade {
        winter: Some(15),
        hot: 40,
    };
    n
}

fn with_margin_path(mut n: VehicleNight) -> VehicleNight {
    n.options.include_margin_path = true;
    n
}

fn bench_assess(c: &mut Criterion) {
    let light = night("compact-di-i4", -15.0);
    let heavy = night("heavy-di-i6", -15.0);
    let mut g = c.benchmark_group("assess");
    g.bench_function("light compact-di-i4", |b| {
        b.iter(|| assess(black_box(&light)))
    });
    g.bench_function("heavy heavy-di-i6 (intake heater)", |b| {
        b.iter(|| assess(black_box(&heavy)))
    });
    let light_path = with_margin_path(light);
    let heavy_path = with_margin_path(heavy);
    g.bench_function("light with margin path (15 points)", |b| {
        b.iter(|| assess(black_box(&light_path)))
    });
    g.bench_function("heavy with margin path (15 points)", |b| {
        b.iter(|| assess(black_box(&heavy_path)))
    });
    g.finish();
}

/// Nights whose no-start probability lies inside (0, 1).
const PROBABILITY_NIGHTS: [(&str, f64); 3] = [
    ("compact-di-i4", -10.0),
    ("older-idi-v8", 5.0),
    ("swirl-idi-i4", 5.0),
];

/// Keys over which the sampling error is averaged in the accuracy table.
const ACCURACY_KEYS: u64 = 16;

/// Prints, once, how close each method comes to 16 384 samples: the sigma points' difference and,
/// for sampling, the mean absolute difference over 16 keys with the mean reported standard error.
fn print_accuracy() {
    eprintln!("\nno-start probability accuracy against sampling at 16384 samples (key 1):");
    eprintln!(
        "{:<22} {:>10} {:>13} {:>22} {:>22} {:>22}",
        "night", "reference", "sigma points", "sampling 64", "sampling 256", "sampling 1024"
    );
    for (id, air_c) in PROBABILITY_NIGHTS {
        let n = night(id, air_c);
        let soc = assess(&n).expect("valid night").state_of_charge;
        let p = |m: Method| no_start_probability(&n, soc, m).expect("valid night");
        let reference = p(Method::Sampling {
            samples: 16_384,
            key: 1,
        })
        .probability;
        let sigma = p(Method::SigmaPoints).probability - reference;
        let mut cells = Vec::new();
        for samples in [64, 256, 1024] {
            let (mut abs_err, mut se) = (0.0, 0.0);
            for key in 100..100 + ACCURACY_KEYS {
                let r = p(Method::Sampling { samples, key });
                abs_err += (r.probability - reference).abs();
                se += r.standard_error;
            }
            let k = ACCURACY_KEYS as f64;
            cells.push(format!("|Δ| {:.4} (SE {:.4})", abs_err / k, se / k));
        }
        eprintln!(
            "{:<22} {:>10.4} {:>+13.4} {:>22} {:>22} {:>22}",
            format!("{id} {air_c} °C"),
            reference,
            sigma,
            cells[0],
            cells[1],
            cells[2]
        );
    }
    eprintln!("(9 model runs for the sigma points; sampling costs one run per sample)\n");
}

fn bench_probability(c: &mut Criterion) {
    print_accuracy();
    let n = night("compact-di-i4", -10.0);
    let soc = assess(&n).expect("valid night").state_of_charge;
    let mut g = c.benchmark_group("no-start probability");
    g.bench_function("sigma points (9 runs)", |b| {
        b.iter(|| no_start_probability(black_box(&n), soc, Method::SigmaPoints))
    });
    for samples in [64, 256, 1024] {
        g.bench_function(format!("sampling {samples}"), |b| {
            b.iter(|| {
                no_start_probability(black_box(&n), soc, Method::Sampling { samples, key: 7 })
            })
        });
    }
    g.finish();
}

fn bench_actions(c: &mut Criterion) {
    // A light truck at risk: −15 °C on 15W-40, a 1 kW block heater, no plug-in planned. The whole
    // decision: assessment, probability, heater search and the other actions.
    let mut n = night("light-di-v8", -15.0);
    n.aids.block_heater_w = 1_000.0;
    let policy = DecisionPolicy::default();
    let d = decide(&n, &policy).expect("valid night");
    eprintln!(
        "decision: {} actions for light-di-v8 at −15 °C, {:.1} % no-start",
        d.actions.len(),
        d.probability.probability * 100.0
    );
    c.bench_function("decide (vehicle at risk, block heater)", |b| {
        b.iter(|| decide(black_box(&n), &policy))
    });
}

criterion_group!(benches, bench_assess, bench_probability, bench_actions);
criterion_main!(benches);
