//! The learning RPCs: start attempts in (a batch, a client stream), a vehicle's calibration and
//! the fleet's reliability out. Transport only: the work is [`crate::learning::Learning`]'s.

use std::time::Duration;

use startmargin_proto::v1 as pb;
use tonic::{Request, Response, Status};
use tracing::{Instrument, info_span};

use crate::codec::Inbound;
use crate::error::{ApiError, to_rpc_status};
use crate::learning::{MAX_LISTED_REFUSALS, STREAM_BATCH};
use crate::tenant::tenant_of;

use super::StartMarginApi;

/// Field path prefix of the attempts of a ReportStartAttempts request.
pub const ATTEMPTS_PATH: &str = "attempts";
/// Field path of a StreamStartAttempts item's attempt.
pub const ATTEMPT_PATH: &str = "attempt";

/// Longest a learning call may take (learning a full batch runs the model a few times per
/// attempt; the store commits durably).
const LEARNING_TIMEOUT: Duration = Duration::from_secs(60);

impl StartMarginApi {
    /// ReportStartAttempts.
    pub async fn report_start_attempts(
        &self,
        request: Request<pb::ReportStartAttemptsRequest>,
    ) -> Result<Response<pb::ReportStartAttemptsResponse>, Status> {
        let tenant = tenant_of(&request);
        let attempts = request.into_inner().attempts;
        let work = self.learning.report(tenant.as_str(), &attempts);
        let results = within_timeout(work)
            .instrument(info_span!(
                "report_start_attempts",
                attempts = attempts.len()
            ))
            .await?;
        Ok(Response::new(pb::ReportStartAttemptsResponse { results }))
    }

    /// StreamStartAttempts: attempts learned in batches as they arrive; a bad item is refused
    /// alone and listed in the summary.
    pub async fn stream_start_attempts(
        &self,
        request: Request<Inbound<pb::StreamStartAttemptsRequest>>,
    ) -> Result<Response<pb::StreamStartAttemptsResponse>, Status> {
        let tenant = tenant_of(&request);
        let _quota = self
            .quota
            .enter(&tenant, self.limits.max_streams_per_tenant)?;
        let mut inbound = request.into_inner();
        let mut summary = pb::StreamStartAttemptsResponse::default();
        let mut batch: Vec<pb::StartAttempt> = Vec::with_capacity(STREAM_BATCH);
        let mut batch_start = 0usize;
        let mut index = 0usize;
        let span = info_span!("stream_start_attempts");
        loop {
            if self.draining.is_cancelled() {
                return Err(super::draining_status());
            }
            let next = tokio::time::timeout(self.limits.stream_idle_timeout, inbound.message())
                .await
                .map_err(|_| {
                    Status::unavailable("the stream sent nothing for the server's idle timeout")
                })??;
            let done = next.is_none();
            match next {
                Some(Ok(item)) => match item.attempt {
                    Some(a) => batch.push(a),
                    None => {
                        let e = ApiError::field(ATTEMPT_PATH, "is required");
                        note_refusal(&mut summary, index, e);
                        // Keep the batch's indices contiguous: flush what came before.
                        self.flush(&tenant, &mut batch, batch_start, &mut summary)
                            .instrument(span.clone())
                            .await?;
                        batch_start = index + 1;
                    }
                },
                Some(Err(bad)) => {
                    note_refusal(&mut summary, index, bad.error);
                    self.flush(&tenant, &mut batch, batch_start, &mut summary)
                        .instrument(span.clone())
                        .await?;
                    batch_start = index + 1;
                }
                None => {}
            }
            if !done {
                index += 1;
            }
            if batch.len() >= STREAM_BATCH || (done && !batch.is_empty()) {
                self.flush(&tenant, &mut batch, batch_start, &mut summary)
                    .instrument(span.clone())
                    .await?;
                batch_start = index;
            }
            if done {
                return Ok(Response::new(summary));
            }
        }
    }

    /// Learns the stream's pending batch.
    async fn flush(
        &self,
        tenant: &crate::tenant::Tenant,
        batch: &mut Vec<pb::StartAttempt>,
        offset: usize,
        summary: &mut pb::StreamStartAttemptsResponse,
    ) -> Result<(), Status> {
        if batch.is_empty() {
            return Ok(());
        }
        let work = self
            .learning
            .report_streamed(tenant.as_str(), batch, offset);
        let results = within_timeout(work).await?;
        batch.clear();
        for r in results {
            match &r.outcome {
                Some(pb::attempt_result::Outcome::Recorded(rec)) if rec.duplicate => {
                    summary.duplicate_count += 1;
                }
                Some(pb::attempt_result::Outcome::Recorded(_)) => summary.recorded_count += 1,
                _ => {
                    summary.refused_count += 1;
                    if summary.refusals.len() < MAX_LISTED_REFUSALS {
                        summary.refusals.push(r);
                    }
                }
            }
        }
        Ok(())
    }

    /// GetVehicleCalibration.
    pub async fn get_vehicle_calibration(
        &self,
        request: Request<pb::GetVehicleCalibrationRequest>,
    ) -> Result<Response<pb::GetVehicleCalibrationResponse>, Status> {
        let tenant = tenant_of(&request);
        let answer = within_timeout(
            self.learning
                .vehicle_calibration(tenant.as_str(), request.get_ref()),
        )
        .instrument(info_span!("get_vehicle_calibration"))
        .await?;
        Ok(Response::new(answer))
    }

    /// GetFleetReliability.
    pub async fn get_fleet_reliability(
        &self,
        request: Request<pb::GetFleetReliabilityRequest>,
    ) -> Result<Response<pb::GetFleetReliabilityResponse>, Status> {
        let tenant = tenant_of(&request);
        let answer = within_timeout(
            self.learning
                .fleet_reliability(tenant.as_str(), request.get_ref()),
        )
        .instrument(info_span!("get_fleet_reliability"))
        .await?;
        Ok(Response::new(answer))
    }
}

fn note_refusal(summary: &mut pb::StreamStartAttemptsResponse, index: usize, e: ApiError) {
    summary.refused_count += 1;
    if summary.refusals.len() < MAX_LISTED_REFUSALS {
        summary.refusals.push(pb::AttemptResult {
            index: index as u32,
            outcome: Some(pb::attempt_result::Outcome::Error(to_rpc_status(e))),
        });
    }
}

async fn within_timeout<T>(work: impl Future<Output = Result<T, ApiError>>) -> Result<T, Status> {
    match tokio::time::timeout(LEARNING_TIMEOUT, work).await {
        Ok(result) => result.map_err(Status::from),
        Err(_) => Err(Status::deadline_exceeded(format!(
            "learning took longer than {} s",
            LEARNING_TIMEOUT.as_secs()
        ))),
    }
}
