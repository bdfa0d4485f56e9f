//! One watched vehicle's state on a WatchFleet stream, kept small: the profile as its protobuf
//! encoding, the last telemetry, a fixed ring of coolant readings since key-off (for the cool-down
//! fit), the heater state, the last score and the alerts it holds. Also builds the `VehicleNight`
//! that re-scores it, and decides which alerts rise and clear after a score.

use prost::Message;
use prost_types::Timestamp;
use startmargin_model::constants::celsius_to_kelvin;
use startmargin_model::soak::fit_cooldown_time_constant_s;
use startmargin_proto::v1 as pb;

use super::settings::WatchSettings;
use crate::local_time::Zone;

/// Coolant readings kept per vehicle for the cool-down fit.
pub const RING_LEN: usize = 12;
/// Readings from which the cool-down time constant is fitted.
pub const FIT_FROM_READINGS: usize = 4;
/// A coolant rise above the previous reading that means heat is going in (heater on), kelvin.
pub const HEATER_RISE_K: f64 = 2.0;
/// Shortest span of readings whose fit is learned from when its cool-down ends: a shorter one
/// sees too little of the decay to say much beyond tonight (our choice).
pub(crate) const LEARN_FROM_SPAN_S: f32 = 3_600.0;
/// Fitted time constants the model accepts, hours.
const TAU_RANGE_H: std::ops::RangeInclusive<f64> = 0.25..=24.0;

/// A cool-down that ended (the next key-off, or heat going in) with a fit worth learning from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct EndedCooldown {
    /// The first reading after key-off, UTC seconds: with the vehicle, the fit's key.
    pub(crate) keyed_off_at_s: i64,
    /// The fitted time constant, seconds.
    pub(crate) time_constant_s: f64,
    /// Readings behind the fit.
    pub(crate) readings: u32,
}

/// Coolant readings after key-off: (seconds since the first reading, coolant °C, ambient °C).
#[derive(Debug, Clone, Default)]
pub(crate) struct Ring {
    start_s: i64,
    len: u8,
    readings: [(f32, f32, f32); RING_LEN],
}

impl Ring {
    fn clear(&mut self) {
        self.len = 0;
    }

    fn last_coolant_c(&self) -> Option<f32> {
        (self.len > 0).then(|| self.readings[usize::from(self.len) - 1].1)
    }

    /// Adds a reading; when full, the oldest but the first is dropped (the first anchors the decay).
    fn push(&mut self, at_s: i64, coolant_c: f64, ambient_c: f64) {
        if self.len == 0 {
            self.start_s = at_s;
        }
        let entry = (
            (at_s - self.start_s) as f32,
            coolant_c as f32,
            ambient_c as f32,
        );
        if usize::from(self.len) == RING_LEN {
            self.readings.copy_within(2.., 1);
            self.readings[RING_LEN - 1] = entry;
        } else {
            self.readings[usize::from(self.len)] = entry;
            self.len += 1;
        }
    }

    /// The fit to learn from when this cool-down ends: from readings spanning at least
    /// [`LEARN_FROM_SPAN_S`], with a time constant the model accepts.
    fn ended(&self) -> Option<EndedCooldown> {
        let n = usize::from(self.len);
        if n < FIT_FROM_READINGS || self.readings[n - 1].0 < LEARN_FROM_SPAN_S {
            return None;
        }
        let tau_s = self.fit_s()?;
        TAU_RANGE_H
            .contains(&(tau_s / 3600.0))
            .then_some(EndedCooldown {
                keyed_off_at_s: self.start_s,
                time_constant_s: tau_s,
                readings: u32::from(self.len),
            })
    }

    /// Fits the cool-down time constant, seconds, from 4 readings on.
    fn fit_s(&self) -> Option<f64> {
        let n = usize::from(self.len);
        if n < FIT_FROM_READINGS {
            return None;
        }
        let mut points = [(0.0_f64, 0.0_f64); RING_LEN];
        let mut ambient_c = 0.0;
        for (i, &(t, c, a)) in self.readings[..n].iter().enumerate() {
            points[i] = (f64::from(t), celsius_to_kelvin(f64::from(c)));
            ambient_c += f64::from(a);
        }
        ambient_c /= n as f64;
        fit_cooldown_time_constant_s(&points[..n], celsius_to_kelvin(ambient_c)).ok()
    }
}

/// An alert a vehicle holds: its id (FNV-1a), level and deadline.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Held {
    pub(crate) id: u64,
    pub(crate) outlook: i32,
}

/// The last score of a vehicle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct LastScore {
    pub(crate) outlook: i32,
    pub(crate) no_start_pct: f32,
    pub(crate) margin_k: f32,
}

/// A watched vehicle.
#[derive(Debug, Clone)]
pub(crate) struct Vehicle {
    /// `VehicleProfile` in its protobuf encoding (decoded only to score).
    pub(crate) profile: Box<[u8]>,
    pub(crate) zone: Box<str>,
    pub(crate) depot: Box<str>,
    /// IANA time-zone name of the depot (checked at the upsert; empty: UTC).
    pub(crate) time_zone: Box<str>,
    pub(crate) departure: Timestamp,
    pub(crate) telemetry: Option<pb::VehicleTelemetry>,
    pub(crate) ring: Ring,
    /// Fitted cool-down time constant, hours.
    pub(crate) tau_h: Option<f32>,
    /// The block heater is on from this time (UTC seconds).
    pub(crate) heater_from_s: Option<i64>,
    /// Whether the vehicle has a block heater.
    pub(crate) has_heater: bool,
    pub(crate) last: Option<LastScore>,
    /// When the act-by alert becomes due (UTC seconds), from the last score.
    pub(crate) act_due_s: Option<i64>,
    pub(crate) outlook_alert: Option<Held>,
    pub(crate) act_alert: Option<Held>,
}

impl Vehicle {
    /// A new vehicle from its upsert (already checked for an id and a departure).
    pub(crate) fn new(w: &pb::WatchedVehicle, profile: &pb::VehicleProfile) -> Self {
        let has_heater = profile
            .aids
            .as_ref()
            .and_then(|a| a.block_heater_w)
            .is_some_and(|w| w > 0.0);
        Self {
            profile: profile.encode_to_vec().into_boxed_slice(),
            zone: w.forecast_zone_id.as_str().into(),
            depot: w.depot_id.as_str().into(),
            time_zone: w.time_zone.as_str().into(),
            departure: w.departure_time.unwrap_or_default(),
            telemetry: None,
            ring: Ring::default(),
            tau_h: None,
            heater_from_s: None,
            has_heater,
            last: None,
            act_due_s: None,
            outlook_alert: None,
            act_alert: None,
        }
    }

    /// The vehicle's own clock: the time of its latest telemetry report (UTC seconds).
    pub(crate) fn clock_s(&self) -> Option<i64> {
        self.telemetry
            .as_ref()
            .and_then(|t| t.observed_at)
            .map(|t| t.seconds)
    }

    /// Bytes this vehicle holds on the heap (beyond `size_of::<Vehicle>()`).
    pub(crate) fn heap_bytes(&self) -> usize {
        self.profile.len() + self.zone.len() + self.depot.len() + self.time_zone.len()
    }

    /// Takes a telemetry report: buffers coolant readings since key-off, refits the cool-down
    /// time constant, and infers the heater from the report or a coolant rise. Returns the
    /// cool-down this report ended (a new key-off, or heat going in), when it is worth learning
    /// from.
    pub(crate) fn observe(&mut self, t: &pb::TelemetryUpdate, at_s: i64) -> Option<EndedCooldown> {
        let telemetry = t.telemetry.as_ref()?;
        let mut ended = None;
        if t.key_off {
            ended = self.ring.ended();
            self.ring.clear();
            self.tau_h = None;
            self.heater_from_s = None;
        }
        match t.block_heater_on {
            Some(true) if self.has_heater => {
                self.heater_from_s.get_or_insert(at_s);
            }
            Some(false) => self.heater_from_s = None,
            _ => {}
        }
        if let Some(coolant_c) = telemetry.coolant_c {
            let rising = self
                .ring
                .last_coolant_c()
                .is_some_and(|last| coolant_c > f64::from(last) + HEATER_RISE_K);
            if rising {
                // Heat is going in: the cool-down has ended; with a block heater, take it as on.
                ended = ended.or(self.ring.ended());
                self.ring.clear();
                if self.has_heater && t.block_heater_on != Some(false) {
                    self.heater_from_s.get_or_insert(at_s);
                }
            } else if self.heater_from_s.is_none()
                && let Some(ambient_c) = telemetry.ambient_c
            {
                self.ring.push(at_s, coolant_c, ambient_c);
                if let Some(tau_s) = self.ring.fit_s() {
                    let h = tau_s / 3600.0;
                    // Only values the model accepts; otherwise the profile's stays in use.
                    self.tau_h = TAU_RANGE_H.contains(&h).then_some(h as f32);
                }
            }
        }
        self.telemetry = Some(*telemetry);
        ended
    }

    /// The night to score: the profile with the fitted time constant, the last telemetry, the
    /// zone, the departure and the heater from when it was taken as on.
    pub(crate) fn night(&self) -> Result<pb::VehicleNight, prost::DecodeError> {
        let mut profile = pb::VehicleProfile::decode(&*self.profile)?;
        if let (Some(tau_h), Some(engine)) = (self.tau_h, profile.engine.as_mut()) {
            engine.cooldown_time_constant_h = Some(f64::from(tau_h));
        }
        let block_heater_plan = self
            .heater_from_s
            .filter(|&from| from < self.departure.seconds)
            .map(|from| pb::BlockHeaterPlan {
                on_from: Some(Timestamp {
                    seconds: from,
                    nanos: 0,
                }),
                on_until: Some(self.departure),
            });
        Ok(pb::VehicleNight {
            vehicle: Some(profile),
            telemetry: self.telemetry,
            forecast: None,
            forecast_zone_id: self.zone.to_string(),
            departure_time: Some(self.departure),
            block_heater_plan,
            options: None,
            depot_id: self.depot.to_string(),
            time_zone: self.time_zone.to_string(),
        })
    }
}

/// Deterministic alert id: FNV-1a of (vehicle id, departure, kind, level). No tenant, no stream.
pub fn alert_id(vehicle_id: &str, departure: &Timestamp, kind: pb::AlertKind, outlook: i32) -> u64 {
    let mut h = 0xcbf2_9ce4_8422_2325_u64;
    let mut eat = |bytes: &[u8]| {
        for b in bytes {
            h = (h ^ u64::from(*b)).wrapping_mul(0x0100_0000_01b3);
        }
    };
    eat(vehicle_id.as_bytes());
    eat(&[0]);
    eat(&departure.seconds.to_le_bytes());
    eat(&departure.nanos.to_le_bytes());
    eat(&(kind as i32).to_le_bytes());
    eat(&outlook.to_le_bytes());
    h
}

/// Formats an alert id as 16 hex digits.
pub fn alert_id_hex(id: u64) -> String {
    format!("{id:016x}")
}

/// A vehicle's score as the watch needs it.
#[derive(Debug, Clone)]
pub(crate) struct Score {
    pub(crate) outlook: i32,
    pub(crate) no_start_pct: f64,
    pub(crate) margin_k: f64,
    pub(crate) explanation: String,
    pub(crate) actions: Vec<pb::Action>,
}

/// What a vehicle's new score changes: its outlook event and the alerts raised or cleared.
pub(crate) fn apply_score(
    vehicle_id: &str,
    v: &mut Vehicle,
    s: Score,
    // The vehicle's own clock ([`Vehicle::clock_s`]): no other vehicle's report moves it.
    now_s: Option<i64>,
    settings: &WatchSettings,
    alerts: &mut Vec<pb::Alert>,
) -> pb::OutlookChange {
    let at_risk = pb::StartOutlook::AtRisk as i32;
    // The name was checked when the vehicle came in; UTC only if it was absent.
    let zone = Zone::from_name(&v.time_zone).unwrap_or_default();
    let base = |v: &Vehicle, kind: pb::AlertKind, held: Held, state: pb::AlertState| pb::Alert {
        alert_id: alert_id_hex(held.id),
        vehicle_id: vehicle_id.to_string(),
        depot_id: v.depot.to_string(),
        departure_time: Some(v.departure),
        kind: kind as i32,
        outlook: held.outlook,
        state: state as i32,
        reason: String::new(),
        actions: Vec::new(),
        act_by: None,
        no_start_pct: s.no_start_pct,
    };

    // Outlook alert: raised at AT_RISK and above, cleared with hysteresis.
    if let Some(held) = v.outlook_alert {
        let threshold = settings.threshold_pct(held.outlook);
        let holds =
            s.outlook >= held.outlook || s.no_start_pct >= threshold - settings.hysteresis_pct;
        if !holds || s.outlook > held.outlook {
            let mut a = base(v, pb::AlertKind::OutlookRise, held, pb::AlertState::Cleared);
            a.reason = format!(
                "no-start probability {:.1} % is below {:.1} %: outlook back to {}",
                s.no_start_pct,
                threshold - settings.hysteresis_pct,
                outlook_name(s.outlook)
            );
            if s.outlook > held.outlook {
                a.reason = format!("superseded by {}", outlook_name(s.outlook));
            }
            alerts.push(a);
            v.outlook_alert = None;
        }
    }
    if v.outlook_alert.is_none() && s.outlook >= at_risk {
        let held = Held {
            id: alert_id(
                vehicle_id,
                &v.departure,
                pb::AlertKind::OutlookRise,
                s.outlook,
            ),
            outlook: s.outlook,
        };
        let mut a = base(v, pb::AlertKind::OutlookRise, held, pb::AlertState::Raised);
        a.reason = format!(
            "{}: {:.1} % chance of no start at departure {}. {}",
            outlook_name(s.outlook),
            s.no_start_pct,
            zone.rfc3339(v.departure.seconds as f64),
            s.explanation
        );
        a.act_by = earliest_act_by(&s.actions);
        a.actions = s.actions.clone();
        alerts.push(a);
        v.outlook_alert = Some(held);
    }

    // Act-by alert: due at the earlier of (deadline − lead) and the quiet hour's end. It holds
    // while the earliest deadline is due at this level, so it follows from the current state
    // alone (a replay on a new stream raises the same one).
    let act_by = earliest_act_by(&s.actions);
    v.act_due_s = act_by.map(|t| settings.act_due_s(t.seconds, v.departure.seconds, &zone));
    let due_now = matches!((v.act_due_s, now_s), (Some(due), Some(now)) if now >= due);
    if let Some(held) = v.act_alert
        && (!due_now || held.outlook != s.outlook)
    {
        let mut a = base(v, pb::AlertKind::ActByNear, held, pb::AlertState::Cleared);
        a.reason = if act_by.is_none() {
            "no timed action is needed any more".to_string()
        } else if due_now {
            format!("superseded at outlook {}", outlook_name(s.outlook))
        } else {
            "the deadline moved later: alerted again when it nears".to_string()
        };
        alerts.push(a);
        v.act_alert = None;
    }
    if v.act_alert.is_none()
        && due_now
        && let Some(act_by) = act_by
    {
        let held = Held {
            id: alert_id(
                vehicle_id,
                &v.departure,
                pb::AlertKind::ActByNear,
                s.outlook,
            ),
            outlook: s.outlook,
        };
        let mut a = base(v, pb::AlertKind::ActByNear, held, pb::AlertState::Raised);
        let first = s
            .actions
            .iter()
            .find(|x| x.act_by == Some(act_by))
            .map_or("", |x| x.summary.as_str());
        // The summary ends with the same deadline; the reason gives it first, once.
        let first = first
            .rsplit_once(" Act by ")
            .map_or(first, |(head, _)| head);
        a.reason = format!("act by {}: {first}", zone.deadline(act_by.seconds as f64));
        a.act_by = Some(act_by);
        a.actions = s.actions.clone();
        alerts.push(a);
        v.act_alert = Some(held);
    }

    v.last = Some(LastScore {
        outlook: s.outlook,
        no_start_pct: s.no_start_pct as f32,
        margin_k: s.margin_k as f32,
    });
    pb::OutlookChange {
        vehicle_id: vehicle_id.to_string(),
        departure_time: Some(v.departure),
        outlook: s.outlook,
        no_start_pct: s.no_start_pct,
        start_margin_k: s.margin_k,
        fitted_cooldown_time_constant_h: v.tau_h.map(f64::from),
        block_heater_on: v.heater_from_s.is_some(),
    }
}

/// Clears every alert a vehicle holds (removal, departure change).
pub(crate) fn clear_all(
    vehicle_id: &str,
    v: &mut Vehicle,
    reason: &str,
    alerts: &mut Vec<pb::Alert>,
) {
    let pct = v.last.map_or(0.0, |l| f64::from(l.no_start_pct));
    for (kind, held) in [
        (pb::AlertKind::OutlookRise, v.outlook_alert.take()),
        (pb::AlertKind::ActByNear, v.act_alert.take()),
    ] {
        if let Some(held) = held {
            alerts.push(pb::Alert {
                alert_id: alert_id_hex(held.id),
                vehicle_id: vehicle_id.to_string(),
                depot_id: v.depot.to_string(),
                departure_time: Some(v.departure),
                kind: kind as i32,
                outlook: held.outlook,
                state: pb::AlertState::Cleared as i32,
                reason: reason.to_string(),
                actions: Vec::new(),
                act_by: None,
                no_start_pct: pct,
            });
        }
    }
}

fn earliest_act_by(actions: &[pb::Action]) -> Option<Timestamp> {
    actions
        .iter()
        .filter_map(|a| a.act_by)
        .min_by_key(|t| (t.seconds, t.nanos))
}

fn outlook_name(o: i32) -> &'static str {
    match pb::StartOutlook::try_from(o) {
        Ok(pb::StartOutlook::Assured) => "ASSURED",
        Ok(pb::StartOutlook::Watch) => "WATCH",
        Ok(pb::StartOutlook::AtRisk) => "AT_RISK",
        Ok(pb::StartOutlook::NoStartExpected) => "NO_START_EXPECTED",
        _ => "UNSPECIFIED",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reading(at_s: i64, coolant_c: f64, key_off: bool) -> pb::TelemetryUpdate {
        pb::TelemetryUpdate {
            vehicle_id: "v1".into(),
            telemetry: Some(pb::VehicleTelemetry {
                observed_at: Some(Timestamp {
                    seconds: at_s,
                    nanos: 0,
                }),
                coolant_c: Some(coolant_c),
                ambient_c: Some(-10.0),
                ..Default::default()
            }),
            block_heater_on: None,
            key_off,
        }
    }

    /// Newton cooling towards −10 °C from 85 °C with τ = 2 h, readings every 15 min.
    fn cooling_c(t_s: i64) -> f64 {
        -10.0 + 95.0 * (-(t_s as f64) / 7_200.0).exp()
    }

    fn vehicle() -> Vehicle {
        let profile = pb::VehicleProfile {
            vehicle_id: "v1".into(),
            ..Default::default()
        };
        let w = pb::WatchedVehicle {
            vehicle: Some(profile.clone()),
            ..Default::default()
        };
        Vehicle::new(&w, &profile)
    }

    #[test]
    fn a_cool_down_is_learned_from_when_it_ends_and_only_from_an_hour_of_readings() {
        let start_s = 1_800_000_000;
        // 45 min of readings (4 of them), then the next key-off: too short to learn from.
        let mut v = vehicle();
        for k in 0..4 {
            assert_eq!(
                v.observe(
                    &reading(start_s + k * 900, cooling_c(k * 900), k == 0),
                    start_s + k * 900
                ),
                None
            );
        }
        assert!(
            v.tau_h.is_some(),
            "tonight's fit is used from the 4th reading"
        );
        assert_eq!(
            v.observe(&reading(start_s + 3_700, 80.0, true), start_s + 3_700),
            None
        );

        // 2 h of readings: the next key-off ends it with its fit, keyed by the first reading.
        let mut v = vehicle();
        for k in 0..9 {
            let at_s = start_s + k * 900;
            assert_eq!(
                v.observe(&reading(at_s, cooling_c(k * 900), k == 0), at_s),
                None
            );
        }
        let ended = v
            .observe(&reading(start_s + 9_000, 85.0, true), start_s + 9_000)
            .expect("ended by the key-off");
        assert_eq!((ended.keyed_off_at_s, ended.readings), (start_s, 9));
        assert!((ended.time_constant_s - 7_200.0).abs() < 1.0, "{ended:?}");

        // The same readings ended by heat going in (a coolant rise) instead.
        let mut v = vehicle();
        for k in 0..9 {
            let at_s = start_s + k * 900;
            v.observe(&reading(at_s, cooling_c(k * 900), k == 0), at_s);
        }
        let rise_c = cooling_c(8 * 900) + HEATER_RISE_K + 1.0;
        let by_rise = v
            .observe(&reading(start_s + 8_500, rise_c, false), start_s + 8_500)
            .expect("ended by the rise");
        assert_eq!(by_rise, ended);
        // Nothing more until the next cool-down has an hour of its own.
        assert_eq!(
            v.observe(&reading(start_s + 9_400, 30.0, false), start_s + 9_400),
            None
        );
    }

    #[test]
    fn alert_ids_are_deterministic_and_distinct() {
        let dep = Timestamp {
            seconds: 1_800_000_000,
            nanos: 0,
        };
        let a = alert_id("v1", &dep, pb::AlertKind::OutlookRise, 3);
        assert_eq!(a, alert_id("v1", &dep, pb::AlertKind::OutlookRise, 3));
        assert_ne!(a, alert_id("v1", &dep, pb::AlertKind::OutlookRise, 4));
        assert_ne!(a, alert_id("v1", &dep, pb::AlertKind::ActByNear, 3));
        assert_ne!(a, alert_id("v2", &dep, pb::AlertKind::OutlookRise, 3));
    }

    /// An act-by alert of a vehicle at an America/Denver depot on the nights the clocks change
    /// (US federal rule, common practice (no source)): 2026-11-01, back from 02:00 MDT to 01:00
    /// MST at 08:00 UTC; 2027-03-14, forward from 02:00 MST to 03:00 MDT at 09:00 UTC.
    #[test]
    fn act_by_text_and_quiet_hour_are_local_across_clock_changes() {
        use crate::config::Config;
        let settings = {
            let mut s = WatchSettings::from_config(&Config::default());
            s.alert_lead_s = 30 * 60;
            s
        };
        let raise = |departure_s: i64, act_by_s: i64, quiet_hour: u32, now_s: i64| {
            let mut settings = settings;
            settings.quiet_until_hour = Some(quiet_hour);
            let w = pb::WatchedVehicle {
                vehicle: None,
                forecast_zone_id: "hill".into(),
                depot_id: "north".into(),
                departure_time: Some(Timestamp {
                    seconds: departure_s,
                    nanos: 0,
                }),
                time_zone: "America/Denver".into(),
            };
            let mut v = Vehicle::new(&w, &pb::VehicleProfile::default());
            let score = Score {
                outlook: pb::StartOutlook::AtRisk as i32,
                no_start_pct: 30.0,
                margin_k: -5.0,
                explanation: "cold".into(),
                actions: vec![pb::Action {
                    summary: "Plug in the block heater. Act by then.".into(),
                    act_by: Some(Timestamp {
                        seconds: act_by_s,
                        nanos: 0,
                    }),
                    ..Default::default()
                }],
            };
            let mut alerts = Vec::new();
            apply_score("u1", &mut v, score, Some(now_s), &settings, &mut alerts);
            alerts
                .into_iter()
                .filter(|a| a.kind == pb::AlertKind::ActByNear as i32)
                .map(|a| a.reason)
                .collect::<Vec<_>>()
        };
        // Fall back: departure 06:00 MST (13:00 UTC), deadline 01:30 MST, the second 01:30 of the
        // night (08:30 UTC). The quiet hour 01:00 is its first occurrence, 01:00 MDT = 07:00 UTC.
        let fall_back_s = 1_793_520_000;
        let (dep, act_by) = (fall_back_s + 5 * 3600, fall_back_s + 1800);
        assert!(raise(dep, act_by, 1, fall_back_s - 3601).is_empty());
        assert_eq!(
            raise(dep, act_by, 1, fall_back_s - 3600),
            ["act by 2026-11-01T01:30:00-07:00: Plug in the block heater."],
            "the deadline is given once"
        );
        // Spring forward: departure 06:00 MDT (12:00 UTC), deadline 03:30 MDT (09:30 UTC). The
        // quiet hour 02:00 does not exist that night: it ends when the clocks jump, 09:00 UTC.
        let spring_s = 1_805_014_800;
        let (dep, act_by) = (spring_s + 3 * 3600, spring_s + 1800);
        assert!(raise(dep, act_by, 2, spring_s - 1).is_empty());
        assert_eq!(
            raise(dep, act_by, 2, spring_s),
            ["act by 2027-03-14T03:30:00-06:00: Plug in the block heater."]
        );
    }

    #[test]
    fn ring_keeps_the_first_reading_and_the_latest() {
        let mut r = Ring::default();
        for i in 0..(RING_LEN as i64 + 3) {
            r.push(1000 + i * 60, 80.0 - i as f64, -10.0);
        }
        assert_eq!(usize::from(r.len), RING_LEN);
        assert_eq!(r.readings[0].0, 0.0);
        assert_eq!(
            r.readings[RING_LEN - 1].0,
            ((RING_LEN as i64 + 2) * 60) as f32
        );
    }
}
