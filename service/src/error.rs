//! Errors of the API layer, and the one place they become `tonic::Status`.
//!
//! A small, deliberate set of codes: `INVALID_ARGUMENT` with `google.rpc.BadRequest` field
//! violations for bad input, `FAILED_PRECONDITION` when the forecast does not cover the departure,
//! `RESOURCE_EXHAUSTED` under overload, `UNAVAILABLE` while draining or when the store cannot be
//! reached, `ABORTED` when a stored calibration changed under a commit (reload and retry),
//! `INTERNAL` for defects. Never `UNKNOWN`.

use startmargin_model::ModelError;

use crate::store::StoreError;
use tonic::Code;
use tonic_types::{ErrorDetails, StatusExt};

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

    /// Maps a model error found while assessing `path` (the request's vehicle night).
    pub fn from_model(path: &str, e: ModelError) -> Self {
        match e {
            // Named at the request field the quantity comes from, never at a model-internal name.
            ModelError::OutOfRange { quantity, .. } => {
                match crate::convert::model_quantity_field(quantity) {
                    Some(field) => Self::field(format!("{path}.{field}"), e.to_string()),
                    None => Self::field(path.to_string(), e.to_string()),
                }
            }
            ModelError::Inconsistent(_) => Self::field(path.to_string(), e.to_string()),
            ModelError::ForecastTooShort { .. } => Self::FailedPrecondition(format!(
                "{path}: the forecast does not cover the time asked for ({e})"
            )),
            ModelError::NoConvergence(_) => Self::Internal(e.to_string()),
        }
    }

    /// The gRPC code of this error.
    pub fn code(&self) -> Code {
        match self {
            Self::InvalidArgument(_) => Code::InvalidArgument,
            Self::FailedPrecondition(_) => Code::FailedPrecondition,
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
}
