//! "A month of mornings": an invented history of start attempts for an invented fleet at the
//! invented depot, fed to the service so that it calibrates each vehicle from its own mornings.
//!
//! The fleet's records say every vehicle is as its archetype describes it. The vehicles
//! themselves differ, and only the demo knows how (a tired battery, worn rings, a failed glow
//! plug, a dragging starter). Each morning's outcome is drawn with a fixed random key from the
//! no-start probability the service gives for the vehicle *as it really is* (asked with
//! calibration ignored), and the attempt is reported with the vehicle *as recorded*. No physics
//! here: the service computes every probability, the demo only rolls the dice and keeps score.

use std::time::{Duration, SystemTime};

use anyhow::Context as _;
use startmargin_sdk::{
    Client, Forecast, FuelGrade, GlowPlugHealth, VehicleNight, VehicleProfile, api,
};

/// Mornings in the month.
pub const MORNINGS: usize = 30;
/// Departure hour of every morning, local (06:00), as seconds after local midnight.
const DEPARTURE_LOCAL_S: u64 = 6 * 3600;
/// The fixed random key of the invented history (weather, outcomes, sensor noise).
const HISTORY_KEY: u64 = 0x6d6f_726e_696e_6773;

/// How a vehicle really differs from its record (the demo's hidden truth).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Truth {
    /// As its archetype describes it.
    AsRecorded,
    /// The battery has aged to 55 % of a new one's capability.
    TiredBattery,
    /// Worn rings: cranking compression 1.9 MPa gauge.
    WornRings,
    /// One glow plug has failed open.
    FailedGlowPlug,
    /// The starter drags: 60 % of its rated power.
    DraggingStarter,
}

impl Truth {
    /// In a few words, for the table.
    pub fn words(self) -> &'static str {
        match self {
            Truth::AsRecorded => "as recorded",
            Truth::TiredBattery => "battery aged to 55 %",
            Truth::WornRings => "worn rings (1.9 MPa)",
            Truth::FailedGlowPlug => "a glow plug failed",
            Truth::DraggingStarter => "starter drags (60 %)",
        }
    }
}

/// One vehicle of the month: its record and what it really is.
#[derive(Debug, Clone)]
pub struct MorningVehicle {
    /// Vehicle id.
    pub id: String,
    /// Archetype id.
    pub archetype: &'static str,
    /// What the fleet's records say (sent with every report).
    pub recorded: VehicleProfile,
    /// The vehicle as it really is (only used to draw outcomes).
    pub truth_profile: VehicleProfile,
    /// How it differs.
    pub truth: Truth,
}

/// One morning: departure time and air temperature at the depot.
#[derive(Debug, Clone, Copy)]
pub struct Morning {
    /// Departure (UTC instant of 06:00 local).
    pub at: SystemTime,
    /// Air temperature, °C; the vehicles have soaked to it overnight.
    pub air_c: f64,
}

/// A keyed pseudo-random stream (SplitMix64): the same key gives the same history.
#[derive(Debug, Clone)]
pub struct Dice(u64);

impl Dice {
    /// A stream for `key`.
    pub fn new(key: u64) -> Self {
        Self(key)
    }

    /// The next value in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }

    /// A standard normal value (Box–Muller).
    pub fn normal(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-12);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

/// The archetypes of the month's fleet, with the battery, oil and aids each is recorded with.
struct Kind {
    archetype: &'static str,
    prefix: &'static str,
    cca: f64,
    nominal_v: f64,
    oil: &'static str,
    glow_plugs: bool,
    intake_heater_kw: Option<f64>,
    tank_l: f64,
}

const KINDS: [Kind; 4] = [
    Kind {
        archetype: "compact-di-i4",
        prefix: "VAN",
        cca: 640.0,
        nominal_v: 12.0,
        oil: "5W-30",
        glow_plugs: true,
        intake_heater_kw: None,
        tank_l: 75.0,
    },
    Kind {
        archetype: "light-di-v8",
        prefix: "PU",
        cca: 750.0,
        nominal_v: 12.0,
        oil: "5W-30",
        glow_plugs: true,
        intake_heater_kw: None,
        tank_l: 130.0,
    },
    Kind {
        archetype: "medium-di-i6",
        prefix: "TRK",
        cca: 1_100.0,
        nominal_v: 12.0,
        oil: "15W-40",
        glow_plugs: false,
        intake_heater_kw: Some(1.8),
        tank_l: 200.0,
    },
    Kind {
        archetype: "heavy-di-i6",
        prefix: "PL",
        cca: 1_900.0,
        nominal_v: 24.0,
        oil: "15W-40",
        glow_plugs: false,
        intake_heater_kw: Some(2.5),
        tank_l: 300.0,
    },
];

/// What each vehicle of a kind really is, in fleet order: most as recorded, some not.
const TRUTHS: [Truth; 10] = [
    Truth::AsRecorded,
    Truth::TiredBattery,
    Truth::AsRecorded,
    Truth::WornRings,
    Truth::DraggingStarter,
    Truth::AsRecorded,
    Truth::FailedGlowPlug,
    Truth::TiredBattery,
    Truth::AsRecorded,
    Truth::WornRings,
];

fn profile(id: &str, k: &Kind, truth: Truth) -> anyhow::Result<VehicleProfile> {
    let mut b = VehicleProfile::builder(id)
        .archetype(k.archetype)
        .battery(k.cca, k.nominal_v)
        .oil(k.oil)
        .fuel_grade(FuelGrade::UsWinterBlend)
        .tank_l(k.tank_l);
    if k.glow_plugs {
        let health = if truth == Truth::FailedGlowPlug {
            GlowPlugHealth::PlugFailed
        } else {
            GlowPlugHealth::Working
        };
        b = b.glow_plugs(health).glow_preheat_s(8.0);
    }
    if let Some(kw) = k.intake_heater_kw {
        b = b.intake_heater_kw(kw);
    }
    b = match truth {
        Truth::TiredBattery => b.battery_health_pct(55.0),
        Truth::WornRings => b.measured_compression_kpa(1_900.0),
        Truth::DraggingStarter => b.starter_power_kw(starter_kw(k) * 0.6),
        Truth::AsRecorded | Truth::FailedGlowPlug => b,
    };
    Ok(b.build()?)
}

/// Rated starter power the demo gives each kind, kW (invented, in the usual range of its size).
fn starter_kw(k: &Kind) -> f64 {
    match k.archetype {
        "compact-di-i4" => 2.2,
        "light-di-v8" => 3.0,
        "medium-di-i6" => 5.5,
        _ => 7.5,
    }
}

/// The month's fleet: ten vehicles of each kind.
pub fn fleet() -> anyhow::Result<Vec<MorningVehicle>> {
    let mut out = Vec::new();
    for k in &KINDS {
        for (i, &truth) in TRUTHS.iter().enumerate() {
            // Engines with an intake heater have no glow plug to fail: their starter drags.
            let truth = if truth == Truth::FailedGlowPlug && !k.glow_plugs {
                Truth::DraggingStarter
            } else {
                truth
            };
            let id = format!("{}-{:02}", k.prefix, i + 21);
            // Recorded with the same starter figure the demo gives the truth, so that only the
            // truth's difference differs.
            let recorded = profile(&id, k, Truth::AsRecorded)?;
            let recorded = with_starter(recorded, starter_kw(k));
            let truth_profile = profile(&id, k, truth)?;
            let truth_profile = if truth == Truth::DraggingStarter {
                truth_profile
            } else {
                with_starter(truth_profile, starter_kw(k))
            };
            out.push(MorningVehicle {
                id,
                archetype: k.archetype,
                recorded,
                truth_profile,
                truth,
            });
        }
    }
    Ok(out)
}

fn with_starter(p: VehicleProfile, kw: f64) -> VehicleProfile {
    let mut pb = p.into_pb();
    if let Some(e) = pb.engine.as_mut() {
        e.starter_power_kw = Some(kw);
    }
    VehicleProfile::from_pb_unchecked(pb)
}

/// Thirty mornings from `first_midnight_utc` (a local midnight as a UTC instant): air at 06:00
/// from a keyed first-order autoregressive walk around −8 °C (day-to-day persistence 0.7,
/// spread 5 K), the way cold spells come and go in an ordinary winter month.
pub fn mornings(first_midnight_utc: SystemTime) -> Vec<Morning> {
    let mut dice = Dice::new(HISTORY_KEY);
    let mut anomaly_k = 0.0;
    (0..MORNINGS)
        .map(|day| {
            anomaly_k = 0.7 * anomaly_k + 5.0 * (1.0f64 - 0.49).sqrt() * dice.normal();
            Morning {
                at: first_midnight_utc
                    + Duration::from_secs(day as u64 * 86_400 + DEPARTURE_LOCAL_S),
                air_c: (-8.0 + anomaly_k).clamp(-30.0, 4.0),
            }
        })
        .collect()
}

/// The night before a morning as the service sees it: soaked to the morning's air for twelve
/// hours, calm, clear.
pub fn night_for(profile: &VehicleProfile, m: &Morning) -> anyhow::Result<VehicleNight> {
    let start = m.at - Duration::from_secs(12 * 3600);
    let forecast = Forecast::hourly(start)
        .points((0..=12).map(|_| (m.air_c, 1.0, 10.0)))
        .build()?;
    Ok(VehicleNight::new(profile.clone(), forecast, m.at))
}

/// What one morning's attempt looked like, drawn from the truth.
#[derive(Debug, Clone)]
pub struct Drawn {
    /// The report sent to the service.
    pub attempt: api::StartAttempt,
    /// The truth's no-start probability, 0..1.
    pub truth_p: f64,
}

/// Draws one attempt from the service's assessment of the vehicle as it really is.
pub async fn draw(
    client: &Client,
    v: &MorningVehicle,
    m: &Morning,
    day: usize,
    index: usize,
) -> anyhow::Result<Drawn> {
    let truth = client
        .assess_vehicle(night_for(&v.truth_profile, m)?.ignore_calibration())
        .await
        .with_context(|| format!("assessing {} as it really is", v.id))?;
    let p = truth.no_start_pct / 100.0;
    // The service's probability spreads its model error over the mornings; most of that error
    // stays with a vehicle (its own unmodelled state), so each vehicle keeps one draw for the
    // month and adds a smaller one each morning (weights 0.8 and 0.6: 0.8² + 0.6² = 1, the
    // split the model's calibration assumes). u stays uniform, so each morning still fails
    // with probability p.
    let z_vehicle = Dice::new(HISTORY_KEY ^ 0x7e41_c1e0 ^ index as u64).normal();
    let mut dice = Dice::new(HISTORY_KEY ^ ((day as u64) << 32) ^ index as u64);
    let u = standard_normal_cdf(0.8 * z_vehicle + 0.6 * dice.normal());
    // A start that barely makes it takes several bursts: the nearer the truth is to a no-start,
    // the likelier (an invented rule of the demo, not of the model).
    let outcome = if u < p {
        api::AttemptOutcome::DidNotFire
    } else if u < (2.5 * p).min(0.97) {
        api::AttemptOutcome::FiredAfterRetries
    } else {
        api::AttemptOutcome::Fired
    };
    let cranking_s = match outcome {
        api::AttemptOutcome::Fired => 1.5 + 4.0 * p + 0.5 * dice.uniform(),
        api::AttemptOutcome::FiredAfterRetries => 8.0 + 8.0 * dice.uniform(),
        _ => 25.0 + 15.0 * dice.uniform(),
    };
    let cranking = truth.cranking.unwrap_or_default();
    // Sensors: speed within about 3 %, voltage within about 0.1 V.
    let peak_rpm = (cranking.cranking_rpm * (1.0 + 0.03 * dice.normal())).clamp(1.0, 1000.0);
    let low_v = (cranking.terminal_v + 0.1 * dice.normal()).clamp(1.0, 32.0);
    let attempt = api::StartAttempt {
        vehicle: Some(v.recorded.as_pb().clone()),
        attempted_at: Some(prost_types::Timestamp::from(m.at)),
        outcome: outcome as i32,
        cranking_duration: Some(prost_types::Duration {
            seconds: cranking_s.trunc() as i64,
            nanos: (cranking_s.fract() * 1e9) as i32,
        }),
        peak_cranking_rpm: (cranking.cranking_rpm > 0.0).then_some(peak_rpm),
        lowest_cranking_v: (cranking.cranking_rpm > 0.0).then_some(low_v),
        air_c: Some(m.air_c),
        coolant_c: Some(m.air_c),
        battery_rest_v: None,
        preheat: None,
        block_heater_on: false,
        in_service_since: None,
    };
    Ok(Drawn {
        attempt,
        truth_p: p,
    })
}

/// Φ(x) by Abramowitz and Stegun 7.1.26 (|error| < 1.5e-7): the dice's copula, not physics.
pub fn standard_normal_cdf(x: f64) -> f64 {
    let z = x.abs() / std::f64::consts::SQRT_2;
    let t = 1.0 / (1.0 + 0.327_591_1 * z);
    let poly = t
        * (0.254_829_592
            + t * (-0.284_496_736
                + t * (1.421_413_741 + t * (-1.453_152_027 + t * 1.061_405_429))));
    let erf = 1.0 - poly * (-z * z).exp();
    0.5 * (1.0 + erf.copysign(x))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_history_is_the_same_every_time() {
        let t0 = SystemTime::UNIX_EPOCH + Duration::from_secs(1_767_225_600);
        let a: Vec<f64> = mornings(t0).iter().map(|m| m.air_c).collect();
        let b: Vec<f64> = mornings(t0).iter().map(|m| m.air_c).collect();
        assert_eq!(a, b);
        assert_eq!(a.len(), MORNINGS);
        assert!(a.iter().all(|t| (-30.0..=4.0).contains(t)));
        let mean = a.iter().sum::<f64>() / a.len() as f64;
        assert!(
            (-14.0..-3.0).contains(&mean),
            "an ordinary winter month: mean {mean:.1} °C"
        );
    }

    #[test]
    fn the_normal_cdf_matches_its_table() {
        // Φ(0) = 0.5, Φ(1) = 0.841345, Φ(−1.959964) = 0.025 (standard normal table).
        assert!((standard_normal_cdf(0.0) - 0.5).abs() < 1e-7);
        assert!((standard_normal_cdf(1.0) - 0.841_345).abs() < 1e-6);
        assert!((standard_normal_cdf(-1.959_964) - 0.025).abs() < 1e-6);
    }

    #[test]
    fn dice_are_uniform_and_keyed() {
        let mut d = Dice::new(7);
        let xs: Vec<f64> = (0..10_000).map(|_| d.uniform()).collect();
        assert!(xs.iter().all(|x| (0.0..1.0).contains(x)));
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        assert!((mean - 0.5).abs() < 0.02);
        assert_ne!(Dice::new(7).uniform(), Dice::new(8).uniform());
    }

    #[test]
    fn the_fleet_differs_from_its_records_only_where_the_truth_says() {
        let fleet = fleet().unwrap();
        assert_eq!(fleet.len(), 40);
        for v in &fleet {
            let same = v.recorded.as_pb() == v.truth_profile.as_pb();
            assert_eq!(same, v.truth == Truth::AsRecorded, "{}", v.id);
        }
    }
}
