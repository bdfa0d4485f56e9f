//! The telemetry builder: the latest readings from the vehicle, each optional so that "not
//! measured" differs from zero, produced as the API's `VehicleTelemetry` message. Readings decoded
//! from SAE J1939 frames fill it with [`TelemetryBuilder::j1939`].

use std::time::SystemTime;

use startmargin_proto::v1 as api;

use crate::j1939::{Spn, SpnReading};
use crate::time::to_timestamp;
use crate::validate::{BuildError, Checker};

/// Checked telemetry, ready to send. Build one with [`Telemetry::at`].
#[derive(Debug, Clone, PartialEq)]
pub struct Telemetry(api::VehicleTelemetry);

impl Telemetry {
    /// Starts readings taken at `observed_at`.
    ///
    /// ```
    /// use std::time::{Duration, UNIX_EPOCH};
    /// use startmargin_sdk::Telemetry;
    ///
    /// let key_off = UNIX_EPOCH + Duration::from_secs(1_736_897_400);
    /// let t = Telemetry::at(key_off).coolant_c(86.0).battery_rest_v(12.55).build()?;
    /// assert_eq!(t.as_pb().coolant_c, Some(86.0));
    /// assert_eq!(t.as_pb().oil_c, None); // not measured, not zero
    /// # Ok::<(), startmargin_sdk::BuildError>(())
    /// ```
    pub fn at(observed_at: SystemTime) -> TelemetryBuilder {
        TelemetryBuilder {
            pb: api::VehicleTelemetry {
                observed_at: Some(to_timestamp(observed_at)),
                ..Default::default()
            },
        }
    }

    /// Wraps a telemetry message as it is, unchecked (the server still validates it).
    pub fn from_pb_unchecked(pb: api::VehicleTelemetry) -> Self {
        Self(pb)
    }

    /// The message that will be sent.
    pub fn as_pb(&self) -> &api::VehicleTelemetry {
        &self.0
    }

    /// The message, by value.
    pub fn into_pb(self) -> api::VehicleTelemetry {
        self.0
    }
}

impl From<Telemetry> for api::VehicleTelemetry {
    fn from(t: Telemetry) -> Self {
        t.0
    }
}

/// Builder of [`Telemetry`].
#[derive(Debug, Clone)]
pub struct TelemetryBuilder {
    pb: api::VehicleTelemetry,
}

impl TelemetryBuilder {
    /// Engine coolant temperature (J1939 SPN 110), °C.
    pub fn coolant_c(mut self, v: f64) -> Self {
        self.pb.coolant_c = Some(v);
        self
    }

    /// Engine oil temperature (J1939 SPN 175), °C.
    pub fn oil_c(mut self, v: f64) -> Self {
        self.pb.oil_c = Some(v);
        self
    }

    /// Engine fuel temperature (J1939 SPN 174), °C.
    pub fn fuel_c(mut self, v: f64) -> Self {
        self.pb.fuel_c = Some(v);
        self
    }

    /// Ambient air temperature at the vehicle (J1939 SPN 171), °C.
    pub fn ambient_c(mut self, v: f64) -> Self {
        self.pb.ambient_c = Some(v);
        self
    }

    /// Battery voltage at rest, engine off (J1939 SPN 168), V.
    pub fn battery_rest_v(mut self, v: f64) -> Self {
        self.pb.battery_rest_v = Some(v);
        self
    }

    /// Fuel level (J1939 SPN 96), % of tank capacity.
    pub fn fuel_level_pct(mut self, v: f64) -> Self {
        self.pb.fuel_level_pct = Some(v);
        self
    }

    /// Sets every field for which a decoded J1939 reading holds a value; readings that are "not
    /// available" or "error" leave their field unset (a later reading of the same SPN wins).
    ///
    /// ```
    /// use std::time::{Duration, UNIX_EPOCH};
    /// use startmargin_sdk::{Telemetry, j1939};
    ///
    /// // ET1 frame (PGN 65262): coolant 0x7A → 82 °C, fuel temp 0xFF (not available),
    /// // oil 0x2CC0 → 85 °C; bytes 5–8 unused here.
    /// let et1 = [0x7A, 0xFF, 0xC0, 0x2C, 0xFF, 0xFF, 0xFF, 0xFF];
    /// let readings = j1939::decode_pgn(j1939::PGN_ET1, &et1)?;
    /// let t = Telemetry::at(UNIX_EPOCH + Duration::from_secs(1_736_897_400))
    ///     .j1939(readings)
    ///     .build()?;
    /// assert_eq!(t.as_pb().coolant_c, Some(82.0));
    /// assert_eq!(t.as_pb().oil_c, Some(85.0));
    /// assert_eq!(t.as_pb().fuel_c, None);
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn j1939(mut self, readings: impl IntoIterator<Item = SpnReading>) -> Self {
        for r in readings {
            let Some(v) = r.value.value() else { continue };
            let field = match r.spn {
                Spn::EngineCoolantTemperature => &mut self.pb.coolant_c,
                Spn::EngineFuelTemperature => &mut self.pb.fuel_c,
                Spn::EngineOilTemperature => &mut self.pb.oil_c,
                Spn::AmbientAirTemperature => &mut self.pb.ambient_c,
                Spn::BatteryPotential => &mut self.pb.battery_rest_v,
                Spn::FuelLevel => &mut self.pb.fuel_level_pct,
            };
            *field = Some(v);
        }
        self
    }

    /// Checks the readings and produces the telemetry; every bad field is reported.
    pub fn build(self) -> Result<Telemetry, BuildError> {
        let mut c = Checker::default();
        let p = &self.pb;
        c.opt("telemetry.coolant_c", p.coolant_c, Checker::finite);
        c.opt("telemetry.oil_c", p.oil_c, Checker::finite);
        c.opt("telemetry.fuel_c", p.fuel_c, Checker::finite);
        c.opt("telemetry.ambient_c", p.ambient_c, Checker::finite);
        c.opt(
            "telemetry.battery_rest_v",
            p.battery_rest_v,
            Checker::non_negative,
        );
        c.opt(
            "telemetry.fuel_level_pct",
            p.fuel_level_pct,
            Checker::percent,
        );
        if p.observed_at.as_ref().is_some_and(|t| t.seconds < 0) {
            c.fail("telemetry.observed_at", "must not be before 1970");
        }
        c.finish(Telemetry(self.pb))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::j1939::SpnValue;
    use std::time::{Duration, UNIX_EPOCH};

    fn t0() -> SystemTime {
        UNIX_EPOCH + Duration::from_secs(1_736_897_400)
    }

    #[test]
    fn setters_fill_only_their_fields() {
        let t = Telemetry::at(t0())
            .oil_c(88.0)
            .fuel_c(30.0)
            .ambient_c(1.5)
            .fuel_level_pct(62.0)
            .build()
            .unwrap()
            .into_pb();
        assert_eq!(t.observed_at.unwrap().seconds, 1_736_897_400);
        assert_eq!(
            (
                t.coolant_c,
                t.oil_c,
                t.fuel_c,
                t.ambient_c,
                t.battery_rest_v,
                t.fuel_level_pct
            ),
            (None, Some(88.0), Some(30.0), Some(1.5), None, Some(62.0))
        );
    }

    #[test]
    fn j1939_fills_values_and_skips_missing_ones() {
        let readings = [
            SpnReading {
                spn: Spn::EngineCoolantTemperature,
                value: SpnValue::Value(84.0),
            },
            SpnReading {
                spn: Spn::BatteryPotential,
                value: SpnValue::Value(12.6),
            },
            SpnReading {
                spn: Spn::FuelLevel,
                value: SpnValue::NotAvailable,
            },
            SpnReading {
                spn: Spn::AmbientAirTemperature,
                value: SpnValue::Error,
            },
        ];
        let t = Telemetry::at(t0())
            .fuel_level_pct(40.0)
            .j1939(readings)
            .build()
            .unwrap()
            .into_pb();
        assert_eq!(t.coolant_c, Some(84.0));
        assert_eq!(t.battery_rest_v, Some(12.6));
        // "Not available" keeps what was set before; "error" does not invent a value.
        assert_eq!(t.fuel_level_pct, Some(40.0));
        assert_eq!(t.ambient_c, None);
    }

    #[test]
    fn rejects_bad_readings() {
        let err = Telemetry::at(t0())
            .coolant_c(f64::NAN)
            .battery_rest_v(-1.0)
            .fuel_level_pct(101.0)
            .build()
            .unwrap_err();
        let fields: Vec<_> = err.violations.iter().map(|v| v.field.as_str()).collect();
        assert_eq!(
            fields,
            [
                "telemetry.coolant_c",
                "telemetry.battery_rest_v",
                "telemetry.fuel_level_pct"
            ]
        );
    }
}
