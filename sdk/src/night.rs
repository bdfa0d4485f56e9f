//! One vehicle's night: its profile, its weather (a forecast, or a zone forecast sent earlier on a
//! fleet stream), its latest telemetry, a planned departure and the options, produced as the API's
//! `VehicleNight` message.

use std::time::SystemTime;

use startmargin_proto::v1 as api;

use crate::time::to_timestamp;
use crate::{DelayCorrelation, Forecast, ProbabilityMethod, Telemetry, VehicleProfile};

/// One vehicle, one planned departure, its weather and its latest telemetry.
///
/// ```
/// use std::time::{Duration, UNIX_EPOCH};
/// use startmargin_sdk::{Forecast, FuelGrade, Telemetry, VehicleNight, VehicleProfile};
///
/// let evening = UNIX_EPOCH + Duration::from_secs(1_736_895_600);
/// let hour = Duration::from_secs(3600);
/// let profile = VehicleProfile::builder("bus-12")
///     .archetype("medium-di-i6")
///     .battery(1_000.0, 24.0)
///     .oil("10W-30")
///     .fuel_grade(FuelGrade::UsWinterBlend)
///     .tank_l(250.0)
///     .intake_heater_kw(1.8)
///     .block_heater_w(1_000.0)
///     .build()?;
/// let forecast = Forecast::hourly(evening)
///     .points((0..14).map(|h| (1.0 - 2.0 * h as f64, 3.0, 20.0)))
///     .build()?;
/// let night = VehicleNight::new(profile, forecast, evening + 12 * hour)
///     .telemetry(Telemetry::at(evening + hour / 2).coolant_c(84.0).build()?)
///     .block_heater_plan(evening + 9 * hour, evening + 12 * hour)
///     .with_margin_path();
/// assert_eq!(night.vehicle_id(), "bus-12");
/// assert!(night.as_pb().options.as_ref().unwrap().include_margin_path);
/// # Ok::<(), startmargin_sdk::BuildError>(())
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct VehicleNight(api::VehicleNight);

impl VehicleNight {
    /// A night with its own forecast.
    pub fn new(profile: VehicleProfile, forecast: Forecast, departure: SystemTime) -> Self {
        Self(api::VehicleNight {
            vehicle: Some(profile.into_pb()),
            forecast: Some(forecast.into_pb()),
            departure_time: Some(to_timestamp(departure)),
            ..Default::default()
        })
    }

    /// A night on a fleet stream that uses a zone forecast sent earlier on the same stream
    /// (see [`crate::FleetItem::zone_forecast`]).
    pub fn in_zone(
        profile: VehicleProfile,
        zone_id: impl Into<String>,
        departure: SystemTime,
    ) -> Self {
        Self(api::VehicleNight {
            vehicle: Some(profile.into_pb()),
            forecast_zone_id: zone_id.into(),
            departure_time: Some(to_timestamp(departure)),
            ..Default::default()
        })
    }

    /// The latest telemetry (without it the engine is taken as soaked to ambient at the forecast start).
    pub fn telemetry(mut self, telemetry: Telemetry) -> Self {
        self.0.telemetry = Some(telemetry.into_pb());
        self
    }

    /// The block heater is planned to be plugged in from `from` until `until` (usually the departure).
    pub fn block_heater_plan(mut self, from: SystemTime, until: SystemTime) -> Self {
        self.0.block_heater_plan = Some(api::BlockHeaterPlan {
            on_from: Some(to_timestamp(from)),
            on_until: Some(to_timestamp(until)),
        });
        self
    }

    /// Also compute the start margin for a departure at each forecast step (the night's margin path).
    pub fn with_margin_path(mut self) -> Self {
        self.options_mut().include_margin_path = true;
        self
    }

    /// Ignition-delay correlation to use (default: the model's).
    pub fn delay_correlation(mut self, c: DelayCorrelation) -> Self {
        self.options_mut().delay_correlation = c as i32;
        self
    }

    /// The no-start probability the recommended actions aim for, % (default: the server's, 5 %).
    pub fn target_no_start_pct(mut self, pct: f64) -> Self {
        self.options_mut().target_no_start_pct = Some(pct);
        self
    }

    /// How the no-start probability is computed (default: the server's).
    pub fn probability_method(mut self, m: ProbabilityMethod) -> Self {
        self.options_mut().probability_method = m as i32;
        self
    }

    /// Assess with the archetype defaults only, ignoring what the vehicle's reported start
    /// attempts have taught the server (for a before/after comparison).
    pub fn ignore_calibration(mut self) -> Self {
        self.options_mut().ignore_calibration = true;
        self
    }

    /// The depot the vehicle parks at tonight, for the depot's plug-in plan on a fleet stream
    /// (see [`crate::FleetItem::depot_outlets`]).
    pub fn depot(mut self, depot_id: impl Into<String>) -> Self {
        self.0.depot_id = depot_id.into();
        self
    }

    /// The depot's IANA time zone (e.g. `America/Denver`): the answer's texts give times in it
    /// with their offset. Absent: UTC (the server names that in the answer's `assumed` list).
    pub fn time_zone(mut self, name: impl Into<String>) -> Self {
        self.0.time_zone = name.into();
        self
    }

    fn options_mut(&mut self) -> &mut api::AssessmentOptions {
        self.0.options.get_or_insert_with(Default::default)
    }

    /// Wraps a night message as it is, unchecked (the server still validates it).
    pub fn from_pb_unchecked(pb: api::VehicleNight) -> Self {
        Self(pb)
    }

    /// The vehicle id.
    pub fn vehicle_id(&self) -> &str {
        self.0
            .vehicle
            .as_ref()
            .map_or("", |v| v.vehicle_id.as_str())
    }

    /// The message that will be sent.
    pub fn as_pb(&self) -> &api::VehicleNight {
        &self.0
    }

    /// The message, by value.
    pub fn into_pb(self) -> api::VehicleNight {
        self.0
    }
}

impl From<VehicleNight> for api::VehicleNight {
    fn from(n: VehicleNight) -> Self {
        n.0
    }
}
