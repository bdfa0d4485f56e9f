//! Observed start attempts in, calibration and reliability out: the client side of
//! `ReportStartAttempts`, `StreamStartAttempts`, `GetVehicleCalibration` and
//! `GetFleetReliability`. No physics: the server learns; the SDK sends what the vehicles saw.
//!
//! A report is idempotent per vehicle and attempt time, so [`Client::report_start_attempts`]
//! retries on `UNAVAILABLE` like the other unary calls and splits a long list into batches of
//! [`MAX_ATTEMPTS_PER_REPORT`].

use std::time::SystemTime;

use startmargin_proto::v1 as api;
use tokio_stream::{Stream, StreamExt};

use crate::client::map_status;
use crate::{Client, Error};

/// The server's limit of attempts in one `ReportStartAttempts` call.
pub const MAX_ATTEMPTS_PER_REPORT: usize = 1000;

impl Client {
    /// Reports start attempts; returns one result per attempt, in the order given (indices count
    /// from the start of `attempts`, across batches). A refused attempt has its own error; the
    /// others are recorded durably.
    ///
    /// ```no_run
    /// # use startmargin_sdk::{Client, api};
    /// # async fn run(client: Client, attempts: Vec<api::StartAttempt>) -> Result<(), startmargin_sdk::Error> {
    /// for r in client.report_start_attempts(attempts).await? {
    ///     match r.outcome {
    ///         Some(api::attempt_result::Outcome::Recorded(rec)) => println!(
    ///             "{}: predicted {:.1} % before learning, {} observations now",
    ///             rec.vehicle_id,
    ///             rec.predicted_no_start_pct,
    ///             rec.calibration.map_or(0, |c| c.observations)
    ///         ),
    ///         Some(api::attempt_result::Outcome::Error(e)) => println!("attempt {} refused: {}", r.index, e.message),
    ///         None => {}
    ///     }
    /// }
    /// # Ok(()) }
    /// ```
    pub async fn report_start_attempts(
        &self,
        attempts: Vec<api::StartAttempt>,
    ) -> Result<Vec<api::AttemptResult>, Error> {
        let mut results = Vec::with_capacity(attempts.len());
        let mut offset = 0u32;
        for batch in attempts.chunks(MAX_ATTEMPTS_PER_REPORT) {
            let request = api::ReportStartAttemptsRequest {
                attempts: batch.to_vec(),
            };
            let response = self
                .unary(request, |mut c, r| async move {
                    c.report_start_attempts(r).await
                })
                .await?;
            results.extend(response.results.into_iter().map(|mut r| {
                r.index += offset;
                r
            }));
            offset += batch.len() as u32;
        }
        Ok(results)
    }

    /// Streams a backlog of start attempts; the summary comes when `attempts` ends. Not retried
    /// (resending the same attempts later is harmless: they are recognised as duplicates).
    pub async fn stream_start_attempts<S>(
        &self,
        attempts: S,
    ) -> Result<api::StreamStartAttemptsResponse, Error>
    where
        S: Stream<Item = api::StartAttempt> + Send + 'static,
    {
        let mut client = self.pick();
        let mut request =
            tonic::Request::new(attempts.map(|attempt| api::StreamStartAttemptsRequest {
                attempt: Some(attempt),
            }));
        if let Some(t) = self.stream_timeout() {
            request.set_timeout(t);
        }
        client
            .stream_start_attempts(request)
            .await
            .map(tonic::Response::into_inner)
            .map_err(map_status)
    }

    /// A vehicle's calibration and its latest `attempt_limit` attempts (0: the server's default).
    pub async fn vehicle_calibration(
        &self,
        vehicle_id: &str,
        attempt_limit: u32,
    ) -> Result<api::GetVehicleCalibrationResponse, Error> {
        let request = api::GetVehicleCalibrationRequest {
            vehicle_id: vehicle_id.to_string(),
            attempt_limit,
        };
        self.unary(request, |mut c, r| async move {
            c.get_vehicle_calibration(r).await
        })
        .await
    }

    /// The fleet's reliability read-out: attempts since `since` (all when `None`) in `bin_count`
    /// probability bins (0: the server's default).
    pub async fn fleet_reliability(
        &self,
        since: Option<SystemTime>,
        bin_count: u32,
    ) -> Result<api::GetFleetReliabilityResponse, Error> {
        let request = api::GetFleetReliabilityRequest {
            since: since.map(prost_types::Timestamp::from),
            bin_count,
        };
        self.unary(request, |mut c, r| async move {
            c.get_fleet_reliability(r).await
        })
        .await
    }
}

impl crate::DetectedAttempt {
    /// The report of this attempt for `profile` (the vehicle as in its assessments), with the
    /// aids the detector cannot see: the preheat given and whether the block heater was on.
    /// The air temperature is required by the API: `None` when the samples carried none.
    ///
    /// ```
    /// use startmargin_sdk::{DetectedAttempt, DetectedOutcome, FuelGrade, VehicleProfile};
    /// let profile = VehicleProfile::builder("PL-01").archetype("heavy-di-i6").battery(1900.0, 24.0)
    ///     .oil("15W-40").fuel_grade(FuelGrade::UsWinterBlend).tank_l(300.0).build()?;
    /// let seen = DetectedAttempt {
    ///     started_at_s: 1_799_046_000.0 + 6.0 * 3600.0, outcome: DetectedOutcome::FiredAfterRetries,
    ///     bursts: 2, cranking_s: 11.5, peak_cranking_rpm: Some(96.0), lowest_cranking_v: Some(17.8),
    ///     battery_rest_v: Some(25.1), coolant_c: Some(-19.0), air_c: Some(-21.0),
    /// };
    /// let report = seen.to_start_attempt(&profile, None, false).expect("air temperature known");
    /// assert_eq!(report.outcome, startmargin_sdk::api::AttemptOutcome::FiredAfterRetries as i32);
    /// # Ok::<(), startmargin_sdk::BuildError>(())
    /// ```
    pub fn to_start_attempt(
        &self,
        profile: &crate::VehicleProfile,
        preheat: Option<std::time::Duration>,
        block_heater_on: bool,
    ) -> Option<api::StartAttempt> {
        let air_c = self.air_c?;
        let outcome = match self.outcome {
            crate::DetectedOutcome::Fired => api::AttemptOutcome::Fired,
            crate::DetectedOutcome::FiredAfterRetries => api::AttemptOutcome::FiredAfterRetries,
            crate::DetectedOutcome::DidNotFire => api::AttemptOutcome::DidNotFire,
        };
        let secs = |s: f64| prost_types::Duration {
            seconds: s.trunc() as i64,
            nanos: (s.fract() * 1e9).round().min(999_999_999.0) as i32,
        };
        Some(api::StartAttempt {
            vehicle: Some(profile.as_pb().clone()),
            attempted_at: Some(prost_types::Timestamp {
                seconds: self.started_at_s.floor() as i64,
                nanos: ((self.started_at_s - self.started_at_s.floor()) * 1e9)
                    .round()
                    .min(999_999_999.0) as i32,
            }),
            outcome: outcome as i32,
            cranking_duration: Some(secs(self.cranking_s)),
            peak_cranking_rpm: self.peak_cranking_rpm,
            lowest_cranking_v: self.lowest_cranking_v,
            air_c: Some(air_c),
            coolant_c: self.coolant_c,
            battery_rest_v: self.battery_rest_v,
            preheat: preheat.map(|d| secs(d.as_secs_f64())),
            block_heater_on,
            in_service_since: None,
        })
    }
}
