//! The start outlook a dispatcher acts on: a level of our own naming from the no-start probability
//! and the fuel gel outlook, with thresholds the operator may change.

use crate::gel_risk::GelRiskLevel;

/// Outlook levels, ordered from best to worst.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum StartOutlook {
    /// A start is assured.
    Assured,
    /// Worth watching.
    Watch,
    /// Act tonight.
    AtRisk,
    /// A no-start is expected unless something is done.
    NoStartExpected,
}

/// Thresholds: the probability (0..1) from which each level applies, and the gel level that
/// raises a vehicle to it regardless of its probability.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OutlookThresholds {
    /// From this probability: Watch.
    pub watch_from: f64,
    /// From this probability: AtRisk.
    pub at_risk_from: f64,
    /// From this probability: NoStartExpected.
    pub no_start_from: f64,
    /// Gel levels that raise the outlook: (gel level, outlook at least).
    pub gel_watch: GelRiskLevel,
    /// Gel level that makes a vehicle at risk.
    pub gel_at_risk: GelRiskLevel,
    /// Gel level that makes a no-start expected.
    pub gel_no_start: GelRiskLevel,
}

impl Default for OutlookThresholds {
    /// Defaults (estimates, operator-configurable): 2 % watch, 10 % act tonight, 50 % no-start
    /// expected; wax forming → watch, filter at risk → act, no flow → no-start.
    fn default() -> Self {
        Self {
            watch_from: 0.02,
            at_risk_from: 0.10,
            no_start_from: 0.50,
            gel_watch: GelRiskLevel::WaxForming,
            gel_at_risk: GelRiskLevel::FilterAtRisk,
            gel_no_start: GelRiskLevel::NoFlow,
        }
    }
}

impl OutlookThresholds {
    /// Checks that the thresholds are ordered probabilities.
    pub fn validate(&self) -> Result<(), &'static str> {
        let ok = |p: f64| p.is_finite() && (0.0..=1.0).contains(&p);
        if !(ok(self.watch_from) && ok(self.at_risk_from) && ok(self.no_start_from)) {
            return Err("outlook thresholds must be probabilities between 0 and 1");
        }
        if self.no_start_from != 0.5 {
            // "No start expected" means a no-start is more likely than not: it must agree with the
            // sign of the binding margin (see `uncertainty`), so it is not a free threshold.
            return Err("the no-start-expected threshold is fixed at 50 %");
        }
        if !(self.watch_from <= self.at_risk_from && self.at_risk_from <= self.no_start_from) {
            return Err("outlook thresholds must satisfy watch <= at_risk <= no_start");
        }
        if !(self.gel_watch <= self.gel_at_risk && self.gel_at_risk <= self.gel_no_start) {
            return Err("gel thresholds must be ordered");
        }
        Ok(())
    }

    /// The outlook of a vehicle.
    pub fn outlook(&self, no_start_probability: f64, gel: GelRiskLevel) -> StartOutlook {
        let by_p = if no_start_probability >= self.no_start_from {
            StartOutlook::NoStartExpected
        } else if no_start_probability >= self.at_risk_from {
            StartOutlook::AtRisk
        } else if no_start_probability >= self.watch_from {
            StartOutlook::Watch
        } else {
            StartOutlook::Assured
        };
        let by_gel = if gel >= self.gel_no_start {
            StartOutlook::NoStartExpected
        } else if gel >= self.gel_at_risk {
            StartOutlook::AtRisk
        } else if gel >= self.gel_watch {
            StartOutlook::Watch
        } else {
            StartOutlook::Assured
        };
        by_p.max(by_gel)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levels_follow_thresholds_and_gel_raises_them() {
        let t = OutlookThresholds::default();
        t.validate().unwrap();
        assert_eq!(t.outlook(0.0, GelRiskLevel::Clear), StartOutlook::Assured);
        assert_eq!(t.outlook(0.05, GelRiskLevel::Clear), StartOutlook::Watch);
        assert_eq!(t.outlook(0.2, GelRiskLevel::Clear), StartOutlook::AtRisk);
        assert_eq!(
            t.outlook(0.9, GelRiskLevel::Clear),
            StartOutlook::NoStartExpected
        );
        assert_eq!(
            t.outlook(0.0, GelRiskLevel::NoFlow),
            StartOutlook::NoStartExpected
        );
        assert_eq!(
            t.outlook(0.0, GelRiskLevel::FilterAtRisk),
            StartOutlook::AtRisk
        );
    }

    #[test]
    fn outlook_is_monotonic_in_probability() {
        let t = OutlookThresholds::default();
        let mut last = StartOutlook::Assured;
        for i in 0..=1000 {
            let o = t.outlook(f64::from(i) / 1000.0, GelRiskLevel::Clear);
            assert!(o >= last);
            last = o;
        }
    }

    #[test]
    fn unordered_thresholds_are_rejected() {
        let t = OutlookThresholds {
            watch_from: 0.5,
            at_risk_from: 0.1,
            ..Default::default()
        };
        assert!(t.validate().is_err());
        let t = OutlookThresholds {
            no_start_from: f64::NAN,
            ..Default::default()
        };
        assert!(t.validate().is_err());
    }
}
