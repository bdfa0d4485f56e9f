//! The watch's operator settings, taken from the configuration: stream bounds, update rate, alert
//! lead, quiet hour and hysteresis, with the outlook thresholds they apply to; and the `[streams]`
//! section of the configuration (fair sharing of the compute pool between streams and tenants,
//! per-tenant stream quotas, the watch idle timeout).

use serde::{Deserialize, Serialize};
use startmargin_proto::v1 as pb;

use crate::config::Config;
use crate::convert::Policy;
use crate::local_time::Zone;

/// The `[streams]` section of the configuration: how streaming calls share the server.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct StreamSettings {
    /// Streaming calls (AssessFleet and WatchFleet together) one tenant may hold open at once;
    /// one more is refused with RESOURCE_EXHAUSTED.
    pub max_streams_per_tenant: usize,
    /// Share of `concurrency_limit` that streams (fleet vehicles and watch re-scores) may hold
    /// at once, percent; the rest stays free for unary calls.
    pub stream_share_pct: f64,
    /// Assessments one tenant's streams may have in flight at once.
    pub max_in_flight_per_tenant: usize,
    /// A WatchFleet stream that sends no update and whose reader takes no event for this long
    /// is ended with UNAVAILABLE, seconds.
    pub watch_idle_timeout_s: f64,
}

impl Default for StreamSettings {
    fn default() -> Self {
        Self {
            max_streams_per_tenant: 64,
            stream_share_pct: 50.0,
            max_in_flight_per_tenant: 16,
            watch_idle_timeout_s: 1800.0,
        }
    }
}

impl StreamSettings {
    /// Every problem of these keys, one message each (empty when valid).
    pub fn problems(&self) -> Vec<String> {
        let mut problems = Vec::new();
        if self.max_streams_per_tenant == 0 {
            problems.push("streams.max_streams_per_tenant must be at least 1".to_string());
        }
        let share = self.stream_share_pct;
        if !(share > 0.0 && share <= 100.0) {
            problems.push(format!(
                "streams.stream_share_pct = {share} must be above 0 and at most 100"
            ));
        }
        if self.max_in_flight_per_tenant == 0 {
            problems.push("streams.max_in_flight_per_tenant must be at least 1".to_string());
        }
        let idle = self.watch_idle_timeout_s;
        if !(idle.is_finite() && (1.0..=86_400.0).contains(&idle)) {
            problems.push(format!(
                "streams.watch_idle_timeout_s = {idle} must be between 1 and 86400"
            ));
        }
        problems
    }

    /// Assessments all streams together may hold: `stream_share_pct` of `concurrency_limit`,
    /// at least one.
    pub fn stream_permits(&self, concurrency_limit: usize) -> usize {
        ((concurrency_limit as f64 * self.stream_share_pct / 100.0).floor() as usize).max(1)
    }
}

/// Settings of every WatchFleet stream of a server.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WatchSettings {
    /// Most vehicles one stream may watch.
    pub max_vehicles: usize,
    /// Most updates per second one stream may send (faster input is read more slowly).
    pub max_updates_per_s: f64,
    /// An act-by alert goes out at the latest this long before the action's deadline, seconds.
    pub alert_lead_s: i64,
    /// Act-by alerts wait for this local hour (of each vehicle's time zone) of the departure's
    /// night unless the lead forces them.
    pub quiet_until_hour: Option<u32>,
    /// A raised outlook alert clears only below its level's threshold minus this, percent.
    pub hysteresis_pct: f64,
    /// Decision policy (outlook thresholds, action target).
    pub policy: Policy,
    /// Compute threads.
    pub threads: usize,
    /// Re-scores one stream has in flight at once (its budget on the compute pool).
    pub in_flight: usize,
    /// No update read and no event taken for this long ends the stream.
    pub idle_timeout: std::time::Duration,
}

impl WatchSettings {
    /// The settings of a configuration.
    pub fn from_config(config: &Config) -> Self {
        Self {
            max_vehicles: config.watch_max_vehicles_per_stream,
            max_updates_per_s: config.watch_max_updates_per_s,
            alert_lead_s: (config.watch_alert_lead_min * 60.0).round() as i64,
            quiet_until_hour: config.watch_quiet_until_hour,
            hysteresis_pct: config.watch_hysteresis_pct,
            policy: config.policy(),
            threads: config.effective_compute_threads(),
            in_flight: config.fleet_in_flight_per_stream(),
            idle_timeout: std::time::Duration::from_secs_f64(config.streams.watch_idle_timeout_s),
        }
    }

    /// Lowest no-start probability of an outlook level, percent.
    pub fn threshold_pct(&self, outlook: i32) -> f64 {
        let t = &self.policy.thresholds;
        match pb::StartOutlook::try_from(outlook) {
            Ok(pb::StartOutlook::NoStartExpected) => t.no_start_from * 100.0,
            Ok(pb::StartOutlook::AtRisk) => t.at_risk_from * 100.0,
            Ok(pb::StartOutlook::Watch) => t.watch_from * 100.0,
            _ => 0.0,
        }
    }

    /// When an act-by alert for `act_by_s` becomes due: at the latest `alert_lead_s` before the
    /// deadline, earlier at the quiet hour of the departure's night when one is set. The quiet
    /// hour is a local hour of `zone`: the last `hour`:00 local at or before the departure, by
    /// the zone's rules (a night that changes the clocks is 23 or 25 hours long).
    pub fn act_due_s(&self, act_by_s: i64, departure_s: i64, zone: &Zone) -> i64 {
        let lead_due = act_by_s - self.alert_lead_s;
        match self
            .quiet_until_hour
            .and_then(|hour| zone.last_local_hour_at_or_before(departure_s, hour))
        {
            None => lead_due,
            Some(quiet_end) => lead_due.min(quiet_end.max(lead_due - 86_400)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lead_and_quiet_hour() {
        let mut s = WatchSettings::from_config(&Config::default());
        s.alert_lead_s = 3600;
        s.quiet_until_hour = None;
        let utc = Zone::default();
        let dep = 1_800_000_000 - 1_800_000_000 % 86_400 + 6 * 3600; // 06:00 UTC
        let act_by = dep - 3 * 3600; // 03:00
        assert_eq!(s.act_due_s(act_by, dep, &utc), act_by - 3600);
        s.quiet_until_hour = Some(1);
        assert_eq!(s.act_due_s(act_by, dep, &utc), dep - 5 * 3600, "at 01:00");
        s.quiet_until_hour = Some(4);
        assert_eq!(
            s.act_due_s(act_by, dep, &utc),
            act_by - 3600,
            "the lead wins"
        );
    }

    /// The quiet hour is local: on the America/Denver fall-back night (2026-11-01, clocks back
    /// from 02:00 MDT to 01:00 MST at 08:00 UTC; US federal rule, common practice (no source))
    /// and on the spring-forward night (2027-03-14, 02:00 MST to 03:00 MDT at 09:00 UTC).
    #[test]
    fn the_quiet_hour_is_a_local_hour_across_clock_changes() {
        let mut s = WatchSettings::from_config(&Config::default());
        s.alert_lead_s = 3600;
        let denver = Zone::from_name("America/Denver").unwrap();
        // Fall back: departure 06:00 MST = 13:00 UTC; deadline 05:00 MST = 12:00 UTC.
        let fall_back_s = 1_793_520_000;
        let dep = fall_back_s + 5 * 3600;
        let act_by = dep - 3600;
        s.quiet_until_hour = Some(3);
        // 03:00 MST is 10:00 UTC (a fixed UTC-6 reading would say 09:00, a UTC hour 03:00).
        assert_eq!(s.act_due_s(act_by, dep, &denver), fall_back_s + 2 * 3600);
        s.quiet_until_hour = Some(1);
        // 01:00 happens twice; the first (01:00 MDT, 07:00 UTC) ends the quiet.
        assert_eq!(s.act_due_s(act_by, dep, &denver), fall_back_s - 3600);
        // Spring forward: departure 06:00 MDT = 12:00 UTC; 04:00 MDT = 10:00 UTC.
        let spring_s = 1_805_014_800;
        let dep = spring_s + 3 * 3600;
        let act_by = dep - 3600;
        s.quiet_until_hour = Some(4);
        assert_eq!(s.act_due_s(act_by, dep, &denver), spring_s + 3600);
        // 02:00 does not exist that night: the quiet ends when the clocks jump, 09:00 UTC.
        s.quiet_until_hour = Some(2);
        assert_eq!(s.act_due_s(act_by, dep, &denver), spring_s);
        // The same hour in UTC would be a different instant altogether.
        assert_ne!(s.act_due_s(act_by, dep, &Zone::default()), spring_s);
    }
}
