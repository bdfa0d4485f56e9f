//! The `[learning]` section of the configuration: how fast a tenant may report start attempts and
//! how long a replica trusts its in-memory calibrations before reloading them from the store.

use std::time::Duration;

use serde::{Deserialize, Serialize};

use super::LearningLimits;

/// The `[learning]` section.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct LearningSettings {
    /// Start attempts one tenant may report per minute (both report RPCs together); a unary
    /// report beyond it is refused with RESOURCE_EXHAUSTED, a stream is read more slowly.
    pub max_attempts_per_minute_per_tenant: u32,
    /// A replica reloads a tenant's calibrations from the store when they are older than this,
    /// seconds (other replicas' reports show within it; its own at once).
    pub calibration_refresh_s: f64,
}

impl Default for LearningSettings {
    fn default() -> Self {
        Self {
            // A 100,000-vehicle fleet's morning, twice over, in ten minutes.
            max_attempts_per_minute_per_tenant: 20_000,
            calibration_refresh_s: 30.0,
        }
    }
}

impl LearningSettings {
    /// Every problem of these keys, one message each (empty when valid).
    pub fn problems(&self) -> Vec<String> {
        let mut problems = Vec::new();
        if self.max_attempts_per_minute_per_tenant == 0 {
            problems
                .push("learning.max_attempts_per_minute_per_tenant must be at least 1".to_string());
        }
        let r = self.calibration_refresh_s;
        if !(r.is_finite() && (1.0..=86_400.0).contains(&r)) {
            problems.push(format!(
                "learning.calibration_refresh_s = {r} must be between 1 and 86400"
            ));
        }
        problems
    }

    /// The limits the service applies.
    pub fn limits(&self) -> LearningLimits {
        LearningLimits {
            max_attempts_per_minute_per_tenant: self.max_attempts_per_minute_per_tenant,
            book_refresh: Duration::from_secs_f64(self.calibration_refresh_s),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_valid_and_bad_values_are_named() {
        assert!(LearningSettings::default().problems().is_empty());
        let bad = LearningSettings {
            max_attempts_per_minute_per_tenant: 0,
            calibration_refresh_s: f64::NAN,
        };
        let p = bad.problems();
        assert_eq!(p.len(), 2);
        assert!(p[0].contains("max_attempts_per_minute_per_tenant"));
        assert!(p[1].contains("calibration_refresh_s"));
    }
}
