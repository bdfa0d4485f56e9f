//! Errors of the API layer, and the one place they become `tonic::Status`.
//!
//! A small, deliberate set of codes: `INVALID_ARGUMENT` with `google.rpc.BadRequest` field
//! violations for bad input, `FAILED_PRECONDITION` when the forecast does not cover the departure,
//! `RESOURCE_EXHAUSTED` under overload, `UNAVAILABLE` while draining or when the store cannot be
//! reached, `ABORTED` when a stored calibration changed under a commit (reload and retry),
//! `INTERNAL` for defects. Never `UNKNOWN`.

use std::collections::HashMap;

use startmargin_model::ModelError;

use crate::store::StoreError;
use tonic::Code;
use tonic_types::{ErrorDetails, StatusExt};

use crate::local_time::{Zone, utc_rfc3339};

/// `google.rpc.ErrorInfo.domain` of this API's errors.
pub const ERROR_DOMAIN: &str = "startmargin.v1";
/// `ErrorInfo.reason` (and `PreconditionFailure` type) when the forecast falls short. Its
/// metadata: `covered_until` and `requested` (RFC 3339, UTC), `covered_until_unix_s` and
/// `requested_unix_s` (seconds since 1970), `subject` (the forecast's field path).
pub const FORECAST_SHORT_REASON: &str = "FORECAST_TOO_SHORT";

/// One bad field: its path in the request (e.g. `night.vehicle.battery.capacity_cca`) and why.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FieldViolation {
    /// Field path in protobuf field names, dot separated, with `[i]` for repeated fields.
    pub field: String,
    /// What is wrong and what would be right.
    pub description: String,
}

/// Why an API call failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ApiError {
    /// The request has bad fields.
    #[error("invalid request: {}", summary(.0))]
    InvalidArgument(Vec<FieldViolation>),
    /// The request is valid but cannot be answered as it stands (e.g. forecast too short).
    #[error("{0}")]
    FailedPrecondition(String),
    /// The forecast does not reach the time asked for (`FAILED_PRECONDITION`). The message gives
    /// both times in the depot's local time (RFC 3339 with offset); the status details carry
    /// them as machine values (`google.rpc.ErrorInfo` and `google.rpc.PreconditionFailure`).
    #[error("{message}")]
    ForecastShort {
        /// The sentence for a person.
        message: String,
        /// The field path of the forecast that falls short.
        subject: String,
        /// Last instant the forecast covers, UTC seconds.
        covered_until_s: f64,
        /// Instant asked for, UTC seconds.
        requested_s: f64,
    },
    /// Too much work in flight; try again later.
    #[error("{0}")]
    ResourceExhausted(String),
    /// The server is draining or not ready, or the store cannot be reached.
    #[error("{0}")]
    Unavailable(String),
    /// A concurrent writer changed what this call read; retrying the call is safe.
    #[error("{0}")]
    Aborted(String),
    /// A defect: the model failed on input the API layer accepted.
    #[error("internal error: {0}")]
    Internal(String),
}

fn summary(v: &[FieldViolation]) -> String {
    v.iter()
        .map(|f| format!("{}: {}", f.field, f.description))
        .collect::<Vec<_>>()
        .join("; ")
}

impl ApiError {
    /// A single field violation.
    pub fn field(field: impl Into<String>, description: impl Into<String>) -> Self {
        Self::InvalidArgument(vec![FieldViolation {
            field: field.into(),
            description: description.into(),
        }])
    }

    /// Maps a model error found while assessing `path` (the request's vehicle night), with times
    /// for people in UTC.
    pub fn from_model(path: &str, e: ModelError) -> Self {
        Self::from_model_in(path, e, &Zone::default())
    }

    /// Maps a model error found while assessing `path`, writing times in `zone`.
    pub fn from_model_in(path: &str, e: ModelError, zone: &Zone) -> Self {
        match e {
            // Named at the request field the quantity comes from, never at a model-internal name.
            ModelError::OutOfRange { quantity, .. } => {
                match crate::convert::model_quantity_field(quantity) {
                    Some(field) => Self::field(format!("{path}.{field}"), e.to_string()),
                    None => Self::field(path.to_string(), e.to_string()),
                }
            }
            ModelError::Inconsistent(_) => Self::field(path.to_string(), e.to_string()),
            ModelError::ForecastTooShort {
                covered_until_s,
                requested_s,
            } => Self::ForecastShort {
                message: format!(
                    "{path}: the forecast covers up to {} but {} was requested",
                    zone.rfc3339(covered_until_s),
                    zone.rfc3339(requested_s)
                ),
                subject: format!("{path}.forecast"),
                covered_until_s,
                requested_s,
            },
            ModelError::NoConvergence(_) => Self::Internal(e.to_string()),
        }
    }

    /// The gRPC code of this error.
    pub fn code(&self) -> Code {
        match self {
            Self::InvalidArgument(_) => Code::InvalidArgument,
            Self::FailedPrecondition(_) | Self::ForecastShort { .. } => Code::FailedPrecondition,
            Self::ResourceExhausted(_) => Code::ResourceExhausted,
            Self::Unavailable(_) => Code::Unavailable,
            Self::Aborted(_) => Code::Aborted,
            Self::Internal(_) => Code::Internal,
        }
    }
}

impl From<StoreError> for ApiError {
    /// The store's errors as API errors. Store messages hold no URL or credential; internal
    /// ones are still reduced to a fixed text, with the detail left to the server's log.
    fn from(e: StoreError) -> Self {
        match e {
            StoreError::InvalidArgument { field, reason } => Self::field(field, reason),
            StoreError::Concurrent(what) => {
                Self::Aborted(format!("{what}; nothing was written, retry the call"))
            }
            StoreError::Unavailable(why) => Self::Unavailable(format!("store unavailable: {why}")),
            StoreError::Config(_) | StoreError::Schema(_) | StoreError::Internal(_) => {
                tracing::error!(error = %e, "store error");
                Self::Internal("the store failed; see the server log".to_string())
            }
        }
    }
}

impl From<StoreError> for tonic::Status {
    fn from(e: StoreError) -> Self {
        ApiError::from(e).into()
    }
}

impl From<ApiError> for tonic::Status {
    fn from(e: ApiError) -> Self {
        let code = e.code();
        let message = e.to_string();
        match e {
            ApiError::InvalidArgument(violations) => {
                let mut details = ErrorDetails::new();
                for v in &violations {
                    details.add_bad_request_violation(v.field.clone(), v.description.clone());
                }
                tonic::Status::with_error_details(code, message, details)
            }
            ApiError::ForecastShort {
                subject,
                covered_until_s,
                requested_s,
                ..
            } => {
                let mut details = ErrorDetails::new();
                let metadata: HashMap<String, String> = [
                    ("covered_until", utc_rfc3339(covered_until_s)),
                    ("requested", utc_rfc3339(requested_s)),
                    ("covered_until_unix_s", format!("{covered_until_s}")),
                    ("requested_unix_s", format!("{requested_s}")),
                    ("subject", subject.clone()),
                ]
                .into_iter()
                .map(|(k, v)| (k.to_string(), v))
                .collect();
                details.set_error_info(FORECAST_SHORT_REASON, ERROR_DOMAIN, metadata);
                details.add_precondition_failure_violation(
                    FORECAST_SHORT_REASON,
                    subject,
                    "the forecast must reach the departure (and every time asked about)",
                );
                tonic::Status::with_error_details(code, message, details)
            }
            _ => tonic::Status::new(code, message),
        }
    }
}

/// The same error as a `google.rpc.Status` message, for per-item errors inside a fleet stream.
pub fn to_rpc_status(e: ApiError) -> startmargin_proto::google::rpc::Status {
    let status: tonic::Status = e.into();
    // `details()` holds an encoded google.rpc.Status with the BadRequest in its details.
    let decoded =
        <startmargin_proto::google::rpc::Status as prost::Message>::decode(status.details());
    match decoded {
        Ok(mut s) if s.code != 0 => {
            s.message = status.message().to_string();
            s
        }
        _ => startmargin_proto::google::rpc::Status {
            code: status.code() as i32,
            message: status.message().to_string(),
            details: Vec::new(),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn invalid_argument_carries_field_violations() {
        let s: tonic::Status =
            ApiError::field("night.forecast.points[2].air_c", "must be finite").into();
        assert_eq!(s.code(), Code::InvalidArgument);
        let details = s.get_error_details();
        let br = details.bad_request().expect("BadRequest details");
        assert_eq!(
            br.field_violations[0].field,
            "night.forecast.points[2].air_c"
        );
    }

    #[test]
    fn rpc_status_keeps_code_and_details() {
        let s = to_rpc_status(ApiError::field("night.departure_time", "missing"));
        assert_eq!(s.code, Code::InvalidArgument as i32);
        assert_eq!(s.details.len(), 1);
        let s = to_rpc_status(ApiError::FailedPrecondition("short".into()));
        assert_eq!(s.code, Code::FailedPrecondition as i32);
    }

    #[test]
    fn store_errors_map_to_their_codes_without_detail() {
        let code = |e: StoreError| tonic::Status::from(e).code();
        assert_eq!(
            code(StoreError::Unavailable("connection lost".into())),
            Code::Unavailable
        );
        assert_eq!(
            code(StoreError::Concurrent("changed".into())),
            Code::Aborted
        );
        let s: tonic::Status = StoreError::InvalidArgument {
            field: "tenant".into(),
            reason: "too long".into(),
        }
        .into();
        assert_eq!(s.code(), Code::InvalidArgument);
        let br = s
            .get_error_details()
            .bad_request()
            .cloned()
            .expect("BadRequest");
        assert_eq!(br.field_violations[0].field, "tenant");
        let s: tonic::Status =
            StoreError::Internal("database error XX000: postgres://u:pw@h/db".into()).into();
        assert_eq!(s.code(), Code::Internal);
        assert!(!s.message().contains("pw"), "{}", s.message());
    }

    #[test]
    fn forecast_too_short_is_failed_precondition() {
        let e = ApiError::from_model(
            "night",
            ModelError::ForecastTooShort {
                covered_until_s: 1.0,
                requested_s: 2.0,
            },
        );
        assert_eq!(e.code(), Code::FailedPrecondition);
    }

    #[test]
    fn forecast_too_short_gives_local_times_and_machine_values() {
        let zone = Zone::from_name("America/Denver").unwrap();
        // 2027-01-15T04:00:00Z and 2027-01-15T13:00:00Z (MST, UTC-7 in January).
        let e = ApiError::from_model_in(
            "night",
            ModelError::ForecastTooShort {
                covered_until_s: 1_799_985_600.0,
                requested_s: 1_800_018_000.0,
            },
            &zone,
        );
        assert_eq!(
            e.to_string(),
            "night: the forecast covers up to 2027-01-14T21:00:00-07:00 but 2027-01-15T06:00:00-07:00 was requested"
        );
        let s: tonic::Status = e.clone().into();
        assert_eq!(s.code(), Code::FailedPrecondition);
        let d = s.get_error_details();
        let info = d.error_info().expect("ErrorInfo");
        assert_eq!(info.reason, FORECAST_SHORT_REASON);
        assert_eq!(info.domain, ERROR_DOMAIN);
        assert_eq!(info.metadata["covered_until"], "2027-01-15T04:00:00Z");
        assert_eq!(info.metadata["requested"], "2027-01-15T13:00:00Z");
        assert_eq!(info.metadata["requested_unix_s"], "1800018000");
        let pf = d.precondition_failure().expect("PreconditionFailure");
        assert_eq!(pf.violations[0].subject, "night.forecast");
        // In a fleet stream the same details travel inside the item's google.rpc.Status.
        let r = to_rpc_status(e);
        assert_eq!(r.code, Code::FailedPrecondition as i32);
        assert_eq!(r.details.len(), 2);
    }
}
