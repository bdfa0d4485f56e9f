//! The SDK's one error type, and the one place a gRPC status (a call's status, or the
//! `google.rpc.Status` inside a fleet result) becomes it.
//!
//! `INVALID_ARGUMENT` carries the server's `google.rpc.BadRequest` field violations, decoded with
//! tonic-types; input the SDK's own builders reject arrives as the same variant, so callers handle
//! bad input in one place.

use startmargin_proto::google::rpc::Status as RpcStatus;
use tonic::Code;
use tonic_types::{RpcStatusExt, StatusExt};

use crate::validate::{BuildError, FieldViolation};

/// Why a call (or one item of a fleet stream) failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The request has bad fields: the server's field violations (or the SDK's, before sending).
    #[error("invalid argument: {message}")]
    InvalidArgument {
        /// The server's (or builder's) summary.
        message: String,
        /// Every bad field with its path and reason.
        violations: Vec<FieldViolation>,
    },
    /// The request is valid but cannot be answered as it stands (e.g. the forecast does not cover
    /// the departure).
    #[error("failed precondition: {0}")]
    FailedPrecondition(String),
    /// The server is unreachable, draining or not ready, after the retries allowed.
    #[error("unavailable: {0}")]
    Unavailable(String),
    /// The server is overloaded; try again later.
    #[error("resource exhausted: {0}")]
    ResourceExhausted(String),
    /// The call's deadline passed before an answer came.
    #[error("deadline exceeded: {0}")]
    DeadlineExceeded(String),
    /// The client could not be set up (bad endpoint URI, no endpoint reachable at build).
    #[error("transport error: {0}")]
    Transport(String),
    /// Any other status code, with the server's message.
    #[error("{0:?}: {1}")]
    Other(Code, String),
}

impl Error {
    /// The gRPC code this error corresponds to (`Transport` reports `Unavailable`).
    pub fn code(&self) -> Code {
        match self {
            Self::InvalidArgument { .. } => Code::InvalidArgument,
            Self::FailedPrecondition(_) => Code::FailedPrecondition,
            Self::Unavailable(_) | Self::Transport(_) => Code::Unavailable,
            Self::ResourceExhausted(_) => Code::ResourceExhausted,
            Self::DeadlineExceeded(_) => Code::DeadlineExceeded,
            Self::Other(code, _) => *code,
        }
    }

    /// The field violations, when this is an `InvalidArgument` (empty otherwise).
    pub fn field_violations(&self) -> &[FieldViolation] {
        match self {
            Self::InvalidArgument { violations, .. } => violations,
            _ => &[],
        }
    }

    /// Converts the `google.rpc.Status` inside a fleet result (the per-item error).
    pub fn from_rpc_status(status: &RpcStatus) -> Self {
        // Same wire type as tonic-types' own `google.rpc.Status`; reuse its detail decoding.
        let pb = tonic_types::pb::Status {
            code: status.code,
            message: status.message.clone(),
            details: status.details.clone(),
        };
        let violations = bad_request(pb.get_details_bad_request());
        from_parts(Code::from(status.code), status.message.clone(), violations)
    }
}

fn bad_request(br: Option<tonic_types::BadRequest>) -> Vec<FieldViolation> {
    br.map(|br| {
        br.field_violations
            .into_iter()
            .map(|v| FieldViolation {
                field: v.field,
                description: v.description,
            })
            .collect()
    })
    .unwrap_or_default()
}

fn from_parts(code: Code, message: String, violations: Vec<FieldViolation>) -> Error {
    match code {
        Code::InvalidArgument => Error::InvalidArgument {
            message,
            violations,
        },
        Code::FailedPrecondition => Error::FailedPrecondition(message),
        Code::Unavailable => Error::Unavailable(message),
        Code::ResourceExhausted => Error::ResourceExhausted(message),
        Code::DeadlineExceeded => Error::DeadlineExceeded(message),
        other => Error::Other(other, message),
    }
}

impl From<tonic::Status> for Error {
    fn from(status: tonic::Status) -> Self {
        let violations = bad_request(status.get_details_bad_request());
        from_parts(status.code(), status.message().to_string(), violations)
    }
}

impl From<BuildError> for Error {
    fn from(e: BuildError) -> Self {
        Self::InvalidArgument {
            message: format!("rejected by the SDK before sending: {e}"),
            violations: e.violations,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use prost::Message;
    use tonic_types::ErrorDetails;

    #[test]
    fn invalid_argument_status_yields_field_violations() {
        let mut details = ErrorDetails::new();
        details.add_bad_request_violation("night.vehicle.battery.capacity_cca", "must be above 0");
        let status = tonic::Status::with_error_details(Code::InvalidArgument, "bad", details);
        let e = Error::from(status);
        assert_eq!(e.code(), Code::InvalidArgument);
        assert_eq!(e.field_violations().len(), 1);
        assert_eq!(
            e.field_violations()[0].field,
            "night.vehicle.battery.capacity_cca"
        );
        assert_eq!(e.field_violations()[0].description, "must be above 0");
    }

    #[test]
    fn per_item_rpc_status_decodes_like_a_call_status() {
        // Build the per-item status the way the server does: the encoded status of a call.
        let mut details = ErrorDetails::new();
        details.add_bad_request_violation("vehicle.fuel.biodiesel_pct", "must be in 0..=100");
        let call = tonic::Status::with_error_details(Code::InvalidArgument, "bad item", details);
        let rpc = RpcStatus::decode(call.details()).expect("encoded google.rpc.Status");
        let e = Error::from_rpc_status(&rpc);
        match &e {
            Error::InvalidArgument { violations, .. } => {
                assert_eq!(violations[0].field, "vehicle.fuel.biodiesel_pct")
            }
            other => panic!("expected InvalidArgument, got {other:?}"),
        }
    }

    #[test]
    fn codes_map_to_their_variants() {
        let cases = [
            (Code::FailedPrecondition, Code::FailedPrecondition),
            (Code::Unavailable, Code::Unavailable),
            (Code::ResourceExhausted, Code::ResourceExhausted),
            (Code::DeadlineExceeded, Code::DeadlineExceeded),
            (Code::Internal, Code::Internal),
        ];
        for (sent, expected) in cases {
            let e = Error::from(tonic::Status::new(sent, "m"));
            assert_eq!(e.code(), expected);
            assert!(e.field_violations().is_empty());
        }
        assert!(matches!(
            Error::from(tonic::Status::new(Code::Unavailable, "draining")),
            Error::Unavailable(m) if m == "draining"
        ));
        assert!(matches!(
            Error::from_rpc_status(&RpcStatus { code: 9, message: "short".into(), details: vec![] }),
            Error::FailedPrecondition(m) if m == "short"
        ));
    }

    #[test]
    fn build_errors_become_invalid_argument() {
        let e = Error::from(BuildError {
            violations: vec![FieldViolation {
                field: "vehicle.vehicle_id".into(),
                description: "must not be empty".into(),
            }],
        });
        assert_eq!(e.code(), Code::InvalidArgument);
        assert_eq!(e.field_violations()[0].field, "vehicle.vehicle_id");
    }
}
