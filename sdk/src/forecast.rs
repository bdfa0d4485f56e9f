//! The forecast builder: equally spaced weather points from a start time, checked at build time
//! and produced as the API's `Forecast` message.

use std::time::{Duration, SystemTime};

use startmargin_proto::v1 as api;

use crate::time::{to_system_time, to_timestamp};
use crate::validate::{BuildError, Checker};

/// A checked forecast, ready to send. Build one with [`Forecast::hourly`] or [`Forecast::every`].
#[derive(Debug, Clone, PartialEq)]
pub struct Forecast(api::Forecast);

impl Forecast {
    /// Starts an hourly forecast whose first point begins at `start`.
    ///
    /// ```
    /// use std::time::{Duration, UNIX_EPOCH};
    /// use startmargin_sdk::Forecast;
    ///
    /// let start = UNIX_EPOCH + Duration::from_secs(1_736_899_200);
    /// let forecast = Forecast::hourly(start)
    ///     .point(2.0, 6.0, 90.0) // air °C, wind m/s, cloud %
    ///     .point(-3.0, 4.0, 60.0)
    ///     .point(-9.0, 2.5, 20.0)
    ///     .build()?;
    /// assert_eq!(forecast.len(), 3);
    /// assert_eq!(forecast.covered_until(), start + Duration::from_secs(3 * 3600));
    ///
    /// // A point with a negative wind speed is named by its index.
    /// let err = Forecast::hourly(start).point(1.0, -2.0, 50.0).build().unwrap_err();
    /// assert_eq!(err.violations[0].field, "forecast.points[0].wind_mps");
    /// # Ok::<(), startmargin_sdk::BuildError>(())
    /// ```
    pub fn hourly(start: SystemTime) -> ForecastBuilder {
        Self::every(start, Duration::from_secs(3600))
    }

    /// Starts a forecast with points every `step` from `start`.
    pub fn every(start: SystemTime, step: Duration) -> ForecastBuilder {
        ForecastBuilder {
            start,
            step,
            points: Vec::new(),
            barometric_kpa: None,
        }
    }

    /// Wraps a forecast message as it is, unchecked (the server still validates it).
    pub fn from_pb_unchecked(pb: api::Forecast) -> Self {
        Self(pb)
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.0.points.len()
    }

    /// Whether the forecast has no points (a built forecast never has).
    pub fn is_empty(&self) -> bool {
        self.0.points.is_empty()
    }

    /// Start of the first point.
    pub fn start(&self) -> SystemTime {
        self.0
            .start_time
            .as_ref()
            .and_then(to_system_time)
            .unwrap_or(SystemTime::UNIX_EPOCH)
    }

    /// Spacing of the points.
    pub fn step(&self) -> Duration {
        self.0
            .step
            .and_then(|d| Duration::try_from(d).ok())
            .unwrap_or(Duration::from_secs(3600))
    }

    /// Start of point `i`.
    pub fn point_time(&self, i: usize) -> SystemTime {
        self.start() + self.step() * u32::try_from(i).unwrap_or(u32::MAX)
    }

    /// End of the last point: the latest departure this forecast covers.
    pub fn covered_until(&self) -> SystemTime {
        self.point_time(self.len())
    }

    /// The message that will be sent.
    pub fn as_pb(&self) -> &api::Forecast {
        &self.0
    }

    /// The message, by value.
    pub fn into_pb(self) -> api::Forecast {
        self.0
    }
}

impl From<Forecast> for api::Forecast {
    fn from(f: Forecast) -> Self {
        f.0
    }
}

/// Builder of a [`Forecast`].
#[derive(Debug, Clone)]
pub struct ForecastBuilder {
    start: SystemTime,
    step: Duration,
    points: Vec<api::ForecastPoint>,
    barometric_kpa: Option<f64>,
}

impl ForecastBuilder {
    /// Appends a point: air temperature °C, wind speed at about 10 m m/s, cloud cover %.
    pub fn point(self, air_c: f64, wind_mps: f64, cloud_cover_pct: f64) -> Self {
        self.push(air_c, wind_mps, cloud_cover_pct, None)
    }

    /// Appends a point with the provider's one-sigma spread of the air temperature, K.
    pub fn point_with_spread(
        self,
        air_c: f64,
        wind_mps: f64,
        cloud_cover_pct: f64,
        air_spread_k: f64,
    ) -> Self {
        self.push(air_c, wind_mps, cloud_cover_pct, Some(air_spread_k))
    }

    /// Appends many `(air_c, wind_mps, cloud_cover_pct)` points.
    pub fn points(mut self, points: impl IntoIterator<Item = (f64, f64, f64)>) -> Self {
        for (a, w, c) in points {
            self = self.push(a, w, c, None);
        }
        self
    }

    fn push(
        mut self,
        air_c: f64,
        wind_mps: f64,
        cloud_cover_pct: f64,
        spread: Option<f64>,
    ) -> Self {
        self.points.push(api::ForecastPoint {
            air_c,
            wind_mps,
            cloud_cover_pct,
            air_spread_k: spread,
        });
        self
    }

    /// Barometric pressure at the parking place, kPa (absent means 101.325).
    pub fn barometric_kpa(mut self, v: f64) -> Self {
        self.barometric_kpa = Some(v);
        self
    }

    /// Checks the points and produces the forecast; every bad field is reported.
    pub fn build(self) -> Result<Forecast, BuildError> {
        let mut c = Checker::default();
        if self.points.is_empty() {
            c.fail("forecast.points", "needs at least one point");
        }
        if self.step.is_zero() {
            c.fail("forecast.step", "must be longer than zero");
        }
        if self.start < SystemTime::UNIX_EPOCH {
            c.fail("forecast.start_time", "must not be before 1970");
        }
        for (i, p) in self.points.iter().enumerate() {
            c.finite(&format!("forecast.points[{i}].air_c"), p.air_c);
            c.non_negative(&format!("forecast.points[{i}].wind_mps"), p.wind_mps);
            c.percent(
                &format!("forecast.points[{i}].cloud_cover_pct"),
                p.cloud_cover_pct,
            );
            c.opt(
                &format!("forecast.points[{i}].air_spread_k"),
                p.air_spread_k,
                Checker::non_negative,
            );
        }
        c.opt(
            "forecast.barometric_kpa",
            self.barometric_kpa,
            Checker::positive,
        );
        let step = prost_types::Duration::try_from(self.step).ok();
        if step.is_none() {
            c.fail("forecast.step", "too long to encode");
        }
        let pb = api::Forecast {
            start_time: Some(to_timestamp(self.start)),
            step,
            points: self.points,
            barometric_kpa: self.barometric_kpa,
        };
        c.finish(Forecast(pb))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::UNIX_EPOCH;

    fn t0() -> SystemTime {
        UNIX_EPOCH + Duration::from_secs(1_736_899_200)
    }

    #[test]
    fn builds_the_message_with_explicit_step() {
        let f = Forecast::every(t0(), Duration::from_secs(1800))
            .points([(1.0, 5.0, 100.0), (0.0, 4.0, 80.0)])
            .point_with_spread(-1.0, 3.0, 40.0, 1.5)
            .barometric_kpa(95.0)
            .build()
            .unwrap();
        assert_eq!(f.step(), Duration::from_secs(1800));
        assert_eq!(f.point_time(2), t0() + Duration::from_secs(3600));
        assert_eq!(f.covered_until(), t0() + Duration::from_secs(5400));
        let pb = f.into_pb();
        assert_eq!(pb.start_time.unwrap().seconds, 1_736_899_200);
        assert_eq!(pb.step.unwrap().seconds, 1800);
        assert_eq!(pb.points.len(), 3);
        assert_eq!(pb.points[2].air_spread_k, Some(1.5));
        assert_eq!(pb.barometric_kpa, Some(95.0));
    }

    #[test]
    fn rejects_empty_and_bad_points() {
        let err = Forecast::every(t0(), Duration::ZERO).build().unwrap_err();
        let fields: Vec<_> = err.violations.iter().map(|v| v.field.as_str()).collect();
        assert_eq!(fields, ["forecast.points", "forecast.step"]);

        let err = Forecast::hourly(t0())
            .point(0.0, 1.0, 50.0)
            .point(f64::NAN, 1.0, 101.0)
            .point_with_spread(0.0, 1.0, 50.0, -1.0)
            .barometric_kpa(0.0)
            .build()
            .unwrap_err();
        let fields: Vec<_> = err.violations.iter().map(|v| v.field.as_str()).collect();
        assert_eq!(
            fields,
            [
                "forecast.points[1].air_c",
                "forecast.points[1].cloud_cover_pct",
                "forecast.points[2].air_spread_k",
                "forecast.barometric_kpa",
            ]
        );
    }
}
