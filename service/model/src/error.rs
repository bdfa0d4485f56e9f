//! Errors of the physics model. One enum for the whole crate; the service maps it to gRPC
//! status codes in one place.

/// Why the model could not produce an answer for the inputs it was given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    /// An input is not a finite number or lies outside the range the model is valid for.
    #[error("{quantity} = {value} is out of range: {reason}")]
    OutOfRange {
        /// Name of the quantity, with its unit suffix (e.g. `air_t_k`).
        quantity: &'static str,
        /// The offending value.
        value: f64,
        /// What the valid range is and why.
        reason: &'static str,
    },
    /// Inputs that are each valid but contradict each other.
    #[error("inconsistent inputs: {0}")]
    Inconsistent(&'static str),
    /// The forecast does not cover the time the model was asked about.
    #[error("forecast covers up to {covered_until_s} s but {requested_s} s was requested")]
    ForecastTooShort {
        /// Last instant the forecast covers (seconds on the caller's time axis).
        covered_until_s: f64,
        /// Instant requested (seconds on the caller's time axis).
        requested_s: f64,
    },
    /// A numerical solver did not converge (a defect or an input far outside the validated range).
    #[error("solver did not converge: {0}")]
    NoConvergence(&'static str),
}

/// Checks that `value` is finite and within `[min, max]`, naming the quantity on failure.
pub fn check_range(
    quantity: &'static str,
    value: f64,
    min: f64,
    max: f64,
    reason: &'static str,
) -> Result<f64, ModelError> {
    if value.is_finite() && value >= min && value <= max {
        Ok(value)
    } else {
        Err(ModelError::OutOfRange {
            quantity,
            value,
            reason,
        })
    }
}
