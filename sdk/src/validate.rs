//! Client-side input checks of the builders: what is obviously wrong before anything is sent
//! (non-finite numbers, negative sizes, percentages outside 0–100, an empty id). The server stays
//! the authority on physical plausibility; these checks only save a round trip and name the field
//! with the same protobuf path the server would use.

use std::fmt;

/// One bad field: its path in protobuf field names (e.g. `vehicle.battery.capacity_cca`) and why.
///
/// The same type carries the server's `google.rpc.BadRequest` field violations in
/// [`crate::Error::InvalidArgument`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FieldViolation {
    /// Field path, dot separated, with `[i]` for repeated fields.
    pub field: String,
    /// What is wrong and what would be right.
    pub description: String,
}

impl fmt::Display for FieldViolation {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.field, self.description)
    }
}

/// A builder found bad input; every bad field is listed, not just the first.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("invalid input: {}", join(.violations))]
pub struct BuildError {
    /// The bad fields.
    pub violations: Vec<FieldViolation>,
}

fn join(v: &[FieldViolation]) -> String {
    v.iter()
        .map(ToString::to_string)
        .collect::<Vec<_>>()
        .join("; ")
}

/// Collects violations while a builder checks its fields.
#[derive(Debug, Default)]
pub(crate) struct Checker {
    violations: Vec<FieldViolation>,
}

impl Checker {
    pub(crate) fn fail(&mut self, field: impl Into<String>, description: impl Into<String>) {
        self.violations.push(FieldViolation {
            field: field.into(),
            description: description.into(),
        });
    }

    /// Any finite number.
    pub(crate) fn finite(&mut self, field: &str, v: f64) {
        if !v.is_finite() {
            self.fail(field, format!("must be a finite number, got {v}"));
        }
    }

    /// A finite number strictly above zero.
    pub(crate) fn positive(&mut self, field: &str, v: f64) {
        if !(v.is_finite() && v > 0.0) {
            self.fail(field, format!("must be a finite number above 0, got {v}"));
        }
    }

    /// A finite number at or above zero.
    pub(crate) fn non_negative(&mut self, field: &str, v: f64) {
        if !(v.is_finite() && v >= 0.0) {
            self.fail(
                field,
                format!("must be a finite number at or above 0, got {v}"),
            );
        }
    }

    /// A percentage in 0–100.
    pub(crate) fn percent(&mut self, field: &str, v: f64) {
        if !(v.is_finite() && (0.0..=100.0).contains(&v)) {
            self.fail(field, format!("must be a percentage in 0..=100, got {v}"));
        }
    }

    /// The optional value, when present, passes `check`.
    pub(crate) fn opt(&mut self, field: &str, v: Option<f64>, check: fn(&mut Self, &str, f64)) {
        if let Some(v) = v {
            check(self, field, v);
        }
    }

    /// `Ok(value)` when nothing failed.
    pub(crate) fn finish<T>(self, value: T) -> Result<T, BuildError> {
        if self.violations.is_empty() {
            Ok(value)
        } else {
            Err(BuildError {
                violations: self.violations,
            })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn collects_every_violation_with_its_path() {
        let mut c = Checker::default();
        c.finite("a_c", f64::NAN);
        c.positive("b_l", 0.0);
        c.non_negative("c_mps", -1.0);
        c.percent("d_pct", 100.5);
        c.percent("e_pct", 100.0);
        c.opt("f_pct", None, Checker::percent);
        let err = c.finish(()).unwrap_err();
        let fields: Vec<_> = err.violations.iter().map(|v| v.field.as_str()).collect();
        assert_eq!(fields, ["a_c", "b_l", "c_mps", "d_pct"]);
        assert!(
            err.to_string()
                .starts_with("invalid input: a_c: must be a finite number")
        );
    }

    #[test]
    fn clean_input_passes() {
        let mut c = Checker::default();
        c.positive("x_l", 1.0);
        c.percent("p_pct", 0.0);
        assert_eq!(c.finish(7).unwrap(), 7);
    }
}
