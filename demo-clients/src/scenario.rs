//! The evening-run scenario. EVERYTHING HERE IS INVENTED: the depot, its fleet, the readings and
//! the weather are made up for the demo; any likeness to a real place or fleet is accidental.
//!
//! Frostmere Municipal Works Yard (fictional), a mid-winter Tuesday evening. A cold front comes
//! through overnight: the hourly forecast falls from about +2 °C at 17:00 to −17 °C at 07:00 (an ordinary cold night for the region) while
//! the wind drops and the sky clears (clear, still nights cool parked vehicles fastest). Twelve
//! vehicles of seven archetypes were keyed off around 17:30 with warm engines and leave between
//! 04:30 and 07:30. Their fuels, batteries, oils and start aids differ on purpose: one truck still
//! carries summer No. 2, a sweeper runs B20 soy, a pickup's glow-plug relay is stuck, a van's
//! battery is at 55 %, a backhoe's battery is old. The shuttle bus sleeps in the shed, plugged in
//! all night; four yard vehicles have block heaters but the yard has only one free outlet on a
//! 2.6 kW circuit tonight, so the run asks the server for the depot's plug-in plan.
//!
//! Times: the yard keeps America/Winnipeg time (UTC−06:00 in January); the API gets UTC instants
//! and the zone's name, and every time shown to a person is local with its offset.
//! The forecast starts at 17:00 local, half an hour before the key-off readings, because the model
//! needs weather from the time of the readings onwards.

use std::time::{Duration, SystemTime, UNIX_EPOCH};

use startmargin_sdk::j1939::{self, J1939Error};
use startmargin_sdk::{
    BiodieselFeedstock, BuildError, FilterMount, FleetItem, Forecast, FuelGrade, GlowPlugHealth,
    Telemetry, VehicleNight, VehicleProfile, VehicleProfileBuilder,
};

/// Name shown in reports.
pub const DEPOT_NAME: &str = "Frostmere Municipal Works Yard (fictional)";
/// Zone id of the shared forecast on the fleet stream.
pub const ZONE_ID: &str = "frostmere-yard";
/// Depot id for the plug-in plan of the yard's block-heater outlets.
pub const DEPOT_ID: &str = "frostmere-yard";
/// Block-heater outlets free in the yard tonight.
pub const YARD_OUTLETS: u32 = 1;
/// Power the yard's outlet circuit may carry at once, kW.
pub const YARD_CIRCUIT_KW: f64 = 2.6;
/// IANA time zone of the yard (its offset is UTC−06:00 on the demo's winter night).
pub const DEPOT_TIME_ZONE: &str = "America/Winnipeg";
/// The evening's local date (year, month, day); the night runs into the next morning.
pub const LOCAL_DATE: (i32, u32, u32) = (2025, 1, 14);

/// Hourly forecast from 17:00 local: (air °C, wind m/s, cloud %). Invented.
const FORECAST: [(f64, f64, f64); 16] = [
    (2.0, 8.0, 100.0),  // 17:00
    (0.5, 7.5, 95.0),   // 18:00
    (-1.5, 7.0, 90.0),  // 19:00
    (-3.5, 6.0, 75.0),  // 20:00
    (-6.0, 5.0, 55.0),  // 21:00
    (-8.0, 4.0, 35.0),  // 22:00
    (-9.5, 3.5, 20.0),  // 23:00
    (-11.0, 3.0, 10.0), // 00:00
    (-12.5, 2.5, 5.0),  // 01:00
    (-13.5, 2.0, 0.0),  // 02:00
    (-15.0, 1.5, 0.0),  // 03:00
    (-15.5, 1.5, 0.0),  // 04:00
    (-16.0, 1.0, 0.0),  // 05:00
    (-17.0, 1.0, 0.0),  // 06:00
    (-17.5, 1.0, 0.0),  // 07:00
    (-16.5, 1.5, 0.0),  // 08:00, covers until 09:00
];

/// One vehicle of the depot with what the report needs besides its night.
#[derive(Debug, Clone)]
pub struct DepotVehicle {
    /// The request.
    pub night: VehicleNight,
    /// Its engine archetype id.
    pub archetype: &'static str,
    /// What it is, in a few words.
    pub role: &'static str,
    /// Planned departure.
    pub departure: SystemTime,
}

impl DepotVehicle {
    /// The vehicle id.
    pub fn id(&self) -> &str {
        self.night.vehicle_id()
    }
}

/// The whole evening: depot, forecast, fleet.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// Depot name.
    pub depot: &'static str,
    /// Start of the forecast (17:00 local).
    pub forecast_start: SystemTime,
    /// The shared forecast.
    pub forecast: Forecast,
    /// The fleet, in report order.
    pub vehicles: Vec<DepotVehicle>,
}

/// Why the scenario could not be built (a defect in this file, never user input).
#[derive(Debug)]
pub enum ScenarioError {
    /// A builder rejected a value.
    Build(BuildError),
    /// A J1939 frame did not decode.
    J1939(J1939Error),
}

impl std::fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::Build(e) => write!(f, "scenario: {e}"),
            Self::J1939(e) => write!(f, "scenario: {e}"),
        }
    }
}

impl std::error::Error for ScenarioError {}

impl From<BuildError> for ScenarioError {
    fn from(e: BuildError) -> Self {
        Self::Build(e)
    }
}

impl From<J1939Error> for ScenarioError {
    fn from(e: J1939Error) -> Self {
        Self::J1939(e)
    }
}

/// The yard's time zone (from the bundled tz database; UTC if it were ever missing).
pub fn depot_zone() -> jiff::tz::TimeZone {
    jiff::tz::TimeZone::get(DEPOT_TIME_ZONE).unwrap_or(jiff::tz::TimeZone::UTC)
}

/// A local wall-clock time on the evening (`next_day` = after midnight) as a UTC instant, by the
/// zone's rules (jiff's civil arithmetic, so a clock change would be honoured).
pub fn local(hour: u32, minute: u32, next_day: bool) -> SystemTime {
    let (y, m, d) = LOCAL_DATE;
    let zoned = jiff::civil::date(y as i16, m as i8, d as i8)
        .checked_add(jiff::Span::new().days(i64::from(next_day)))
        .and_then(|day| {
            day.at(hour as i8, minute as i8, 0, 0)
                .to_zoned(depot_zone())
        });
    match zoned {
        Ok(z) => {
            UNIX_EPOCH + Duration::from_secs(u64::try_from(z.timestamp().as_second()).unwrap_or(0))
        }
        Err(_) => UNIX_EPOCH,
    }
}

fn zoned(t: SystemTime) -> jiff::Zoned {
    let s = t
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| i64::try_from(d.as_secs()).unwrap_or(i64::MAX));
    jiff::Timestamp::from_second(s)
        .unwrap_or(jiff::Timestamp::UNIX_EPOCH)
        .to_zoned(depot_zone())
}

/// Local time of an instant with its offset, e.g. `17:30 -06:00` (tables, legends, console).
pub fn local_hhmm(t: SystemTime) -> String {
    zoned(t).strftime("%H:%M %:z").to_string()
}

/// Local wall-clock `HH:MM` alone, for chart axes whose title gives the offset.
pub fn local_clock(t: SystemTime) -> String {
    zoned(t).strftime("%H:%M").to_string()
}

/// The zone and its offset at an instant, e.g. `America/Winnipeg, UTC−06:00`, for axis titles.
pub fn zone_label(t: SystemTime) -> String {
    let z = zoned(t);
    let s = z.offset().seconds();
    format!(
        "{DEPOT_TIME_ZONE}, UTC{}{:02}:{:02}",
        if s < 0 { '−' } else { '+' },
        s.abs() / 3600,
        (s.abs() % 3600) / 60
    )
}

/// Common part of every profile of the depot.
fn base(id: &str, archetype: &'static str) -> VehicleProfileBuilder {
    VehicleProfile::builder(id).archetype(archetype)
}

/// Key-off readings at 17:30 local: coolant, oil, fuel temperatures (°C) and fuel level (%).
fn key_off(
    coolant_c: f64,
    oil_c: f64,
    fuel_c: f64,
    level_pct: f64,
) -> Result<Telemetry, BuildError> {
    Telemetry::at(local(17, 30, false))
        .coolant_c(coolant_c)
        .oil_c(oil_c)
        .fuel_c(fuel_c)
        .ambient_c(2.0)
        .fuel_level_pct(level_pct)
        .build()
}

struct Entry {
    profile: VehicleProfile,
    role: &'static str,
    archetype: &'static str,
    telemetry: Telemetry,
    departure: SystemTime,
    heater_plan: Option<(SystemTime, SystemTime)>,
    /// Parks in the yard and competes for its outlets (the shed has its own).
    in_yard: bool,
}

/// The invented evening at the invented depot.
pub fn evening_cold_front() -> Result<Scenario, ScenarioError> {
    let forecast_start = local(17, 0, false);
    let forecast = Forecast::hourly(forecast_start)
        .points(FORECAST)
        .barometric_kpa(97.5)
        .build()?;

    // The lead plow reports over J1939: ET1 (coolant 0x7E → 86 °C, fuel 0x46 → 30 °C, oil
    // 0x2D20 → 88.0 °C) and DD (fuel level 0xB4 → 72 %), decoded by the SDK's adapters.
    let et1 = [0x7E, 0x46, 0x20, 0x2D, 0xFF, 0xFF, 0xFF, 0xFF];
    let dd = [0xFF, 0xB4, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF];
    let plow_readings = j1939::decode_pgn(j1939::PGN_ET1, &et1)?
        .into_iter()
        .chain(j1939::decode_pgn(j1939::PGN_DD, &dd)?);
    let plow_telemetry = Telemetry::at(local(17, 30, false))
        .j1939(plow_readings)
        .ambient_c(2.0)
        .build()?;

    let entries = vec![
        Entry {
            profile: base("PL-01", "heavy-di-i6")
                .battery(1_900.0, 24.0)
                .oil("15W-40")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .tank_l(300.0)
                .intake_heater_kw(2.5)
                .block_heater_w(1_500.0)
                .build()?,
            role: "plow truck, block heater, yard outlet if planned",
            archetype: "heavy-di-i6",
            telemetry: plow_telemetry,
            departure: local(4, 30, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("PL-02", "heavy-di-i6")
                .battery(1_900.0, 24.0)
                .oil("15W-40")
                .fuel_grade(FuelGrade::UsNo2) // still on the summer fill
                .tank_l(300.0)
                .filter_mount(FilterMount::Frame)
                .build()?,
            role: "plow truck, summer No. 2 still in tank",
            archetype: "heavy-di-i6",
            telemetry: key_off(85.0, 88.0, 28.0, 45.0)?,
            departure: local(4, 30, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("SW-03", "medium-di-i6")
                .battery(1_100.0, 12.0)
                .oil("10W-30")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .biodiesel_pct(20.0)
                .biodiesel_feedstock(BiodieselFeedstock::Soy)
                .tank_l(200.0)
                .build()?,
            role: "street sweeper on B20 soy",
            archetype: "medium-di-i6",
            telemetry: key_off(82.0, 86.0, 25.0, 60.0)?,
            departure: local(5, 30, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("BUS-04", "medium-di-i6")
                .battery(1_000.0, 24.0)
                .oil("5W-40")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .tank_l(380.0)
                .intake_heater_kw(1.8)
                .block_heater_w(1_000.0)
                .sheltered(true)
                .build()?,
            role: "shuttle bus, plugged in all night, in the shed",
            archetype: "medium-di-i6",
            telemetry: key_off(88.0, 90.0, 30.0, 80.0)?,
            departure: local(5, 0, true),
            heater_plan: Some((local(18, 0, false), local(5, 0, true))),
            in_yard: false,
        },
        Entry {
            profile: base("PU-05", "light-di-v8")
                .battery(750.0, 12.0)
                .oil("5W-40")
                .fuel_grade(FuelGrade::En590Arctic1)
                .tank_l(130.0)
                .build()?,
            role: "crew pickup on arctic-class diesel",
            archetype: "light-di-v8",
            telemetry: key_off(86.0, 89.0, 27.0, 70.0)?,
            departure: local(6, 0, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("PU-06", "older-idi-v8")
                .battery(850.0, 12.0)
                .battery_health_pct(70.0)
                .oil("15W-40")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .tank_l(110.0)
                .glow_plugs(GlowPlugHealth::RelayStuck)
                .glow_preheat_s(10.0)
                .block_heater_w(1_000.0)
                .build()?,
            role: "older pickup, glow-plug relay stuck, block heater, yard outlet if planned",
            archetype: "older-idi-v8",
            telemetry: key_off(84.0, 87.0, 26.0, 50.0)?,
            departure: local(6, 30, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("VAN-07", "compact-di-i4")
                .battery(640.0, 12.0)
                .state_of_charge_pct(55.0)
                .oil("5W-40")
                .fuel_grade(FuelGrade::En590ClassB)
                .tank_l(75.0)
                .build()?,
            role: "parts van, battery at 55 %, class B fuel",
            archetype: "compact-di-i4",
            telemetry: key_off(83.0, 85.0, 24.0, 35.0)?,
            departure: local(7, 0, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("VAN-08", "swirl-idi-i4")
                .battery(700.0, 12.0)
                .oil("10W-30")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .tank_l(80.0)
                .sheltered(true)
                .build()?,
            role: "inspection van, in the shed",
            archetype: "swirl-idi-i4",
            telemetry: key_off(80.0, 82.0, 22.0, 65.0)?,
            departure: local(7, 30, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("LDR-09", "offroad-di-i4")
                .battery(950.0, 12.0)
                .oil("15W-40")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .tank_l(150.0)
                .intake_heater_kw(1.5)
                .block_heater_w(1_000.0)
                .build()?,
            role: "wheel loader, block heater, yard outlet if planned",
            archetype: "offroad-di-i4",
            telemetry: key_off(87.0, 90.0, 29.0, 55.0)?,
            departure: local(6, 0, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("BH-10", "offroad-di-i4")
                .battery(800.0, 12.0)
                .battery_health_pct(60.0)
                .oil("10W-30")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .tank_l(120.0)
                .build()?,
            role: "backhoe, old battery",
            archetype: "offroad-di-i4",
            telemetry: key_off(84.0, 86.0, 26.0, 40.0)?,
            departure: local(7, 0, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("PU-11", "light-di-v8")
                .battery(750.0, 12.0)
                .state_of_charge_pct(75.0)
                .oil("15W-40")
                .fuel_grade(FuelGrade::UsWinterBlend)
                .tank_l(130.0)
                .glow_plugs(GlowPlugHealth::Working)
                .block_heater_w(750.0)
                .build()?,
            role: "supervisor pickup, 15W-40, block heater",
            archetype: "light-di-v8",
            telemetry: key_off(85.0, 88.0, 27.0, 90.0)?,
            departure: local(5, 0, true),
            heater_plan: None,
            in_yard: true,
        },
        Entry {
            profile: base("DT-12", "medium-di-i6")
                .battery(1_100.0, 12.0)
                .oil("15W-40")
                // Supplier's certificate for this load of winter blend.
                .measured_cold_flow(-18.0, -26.0, -33.0)
                .tank_l(250.0)
                .build()?,
            role: "dump truck, fuel with certificate",
            archetype: "medium-di-i6",
            telemetry: key_off(86.0, 89.0, 28.0, 75.0)?,
            departure: local(6, 30, true),
            heater_plan: None,
            in_yard: true,
        },
    ];

    let vehicles = entries
        .into_iter()
        .map(|e| {
            let mut night = VehicleNight::in_zone(e.profile, ZONE_ID, e.departure)
                .telemetry(e.telemetry)
                .with_margin_path();
            if let Some((from, until)) = e.heater_plan {
                night = night.block_heater_plan(from, until);
            }
            if e.in_yard {
                night = night.depot(DEPOT_ID);
            }
            night = night.time_zone(DEPOT_TIME_ZONE);
            DepotVehicle {
                night,
                archetype: e.archetype,
                role: e.role,
                departure: e.departure,
            }
        })
        .collect();
    Ok(Scenario {
        depot: DEPOT_NAME,
        forecast_start,
        forecast,
        vehicles,
    })
}

impl Scenario {
    /// The fleet stream: the zone forecast and the yard's outlets first, then every vehicle.
    pub fn fleet_items(&self) -> Vec<FleetItem> {
        [
            FleetItem::zone_forecast(ZONE_ID, self.forecast.clone()),
            FleetItem::depot_outlets(DEPOT_ID, YARD_OUTLETS, Some(YARD_CIRCUIT_KW)),
        ]
        .into_iter()
        .chain(
            self.vehicles
                .iter()
                .map(|v| FleetItem::vehicle(v.night.clone())),
        )
        .collect()
    }

    /// End of the forecast (09:00 local).
    pub fn forecast_end(&self) -> SystemTime {
        self.forecast.covered_until()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn local_times_round_trip() {
        let t = local(17, 30, false);
        // 17:30 CST (UTC−6) on 2025-01-14 is 23:30 UTC that day; 2025-01-14 is day 20102 since
        // 1970-01-01 (checked with `date -u -d 2025-01-14 +%s` = 1736812800).
        assert_eq!(
            t.duration_since(UNIX_EPOCH).unwrap().as_secs(),
            20_102 * 86_400 + 23 * 3600 + 1800
        );
        assert_eq!(local_hhmm(t), "17:30 -06:00");
        assert_eq!(local_clock(local(4, 30, true)), "04:30");
        assert_eq!(zone_label(t), "America/Winnipeg, UTC−06:00");
    }

    #[test]
    fn scenario_is_complete_and_consistent() {
        let s = evening_cold_front().unwrap();
        assert_eq!(s.vehicles.len(), 12);
        assert_eq!(local_hhmm(s.forecast_start), "17:00 -06:00");
        assert_eq!(local_hhmm(s.forecast_end()), "09:00 -06:00");
        let archetypes: std::collections::BTreeSet<_> =
            s.vehicles.iter().map(|v| v.archetype).collect();
        assert_eq!(archetypes.len(), 7, "every archetype appears");
        for v in &s.vehicles {
            assert!(v.departure > local(4, 29, true) && v.departure < local(7, 31, true));
            assert!(v.departure < s.forecast_end());
            let pb = v.night.as_pb();
            assert_eq!(
                pb.vehicle
                    .as_ref()
                    .unwrap()
                    .engine
                    .as_ref()
                    .unwrap()
                    .archetype_id,
                v.archetype
            );
        }
        // The plow's J1939 readings arrived in the telemetry.
        let t = s.vehicles[0].night.as_pb().telemetry.unwrap();
        assert_eq!(
            (t.coolant_c, t.fuel_c, t.oil_c),
            (Some(86.0), Some(30.0), Some(88.0))
        );
        assert!((t.fuel_level_pct.unwrap() - 72.0).abs() < 1e-9);
        // Zone forecast and outlets first, then one item per vehicle.
        let items = s.fleet_items();
        assert_eq!(items.len(), 14);
        assert_eq!(items[0].item_id(), "zone:frostmere-yard");
        assert_eq!(items[1].item_id(), "depot:frostmere-yard");
        // Four yard vehicles have block heaters and compete for two outlets; the bus in the
        // shed keeps its own plan.
        let yard_heaters = s
            .vehicles
            .iter()
            .filter(|v| {
                let pb = v.night.as_pb();
                pb.depot_id == DEPOT_ID
                    && pb
                        .vehicle
                        .as_ref()
                        .unwrap()
                        .aids
                        .as_ref()
                        .is_some_and(|a| a.block_heater_w.unwrap_or(0.0) > 0.0)
            })
            .count();
        assert_eq!(yard_heaters, 4);
        assert!(s.vehicles[3].night.as_pb().block_heater_plan.is_some());
    }
}
