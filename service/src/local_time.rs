//! Local time of a depot: its IANA time zone from the request, and the times meant for a person
//! (action texts, alert reasons, error messages) written in that zone with their offset.
//!
//! Machine fields stay `google.protobuf.Timestamp` (UTC instants); only text is local. Civil
//! arithmetic (the local date, a given local hour of a night) is jiff's, so daylight-saving
//! changes are handled by the tz database rather than by adding 86 400 s. The database is the
//! one bundled into the binary (the container has no `/usr/share/zoneinfo`), so every host gives
//! the same answer.

use jiff::Timestamp;
use jiff::civil::Time;
use jiff::tz::TimeZone;

/// Longest zone name accepted, bytes (the longest IANA name is about 30).
pub const MAX_ZONE_NAME_LEN: usize = 64;

/// The zone of a request: UTC when the request names none.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Zone {
    /// The IANA name as given, or `"UTC"` when absent.
    pub name: String,
    /// The zone itself.
    pub tz: TimeZone,
    /// The request named no zone, so UTC was assumed.
    pub assumed: bool,
}

impl Default for Zone {
    fn default() -> Self {
        Self {
            name: "UTC".to_string(),
            tz: TimeZone::UTC,
            assumed: true,
        }
    }
}

impl Zone {
    /// The zone a request names (`""` means none: UTC, assumed). `Err` says why the name is
    /// refused, for a field violation.
    pub fn from_name(name: &str) -> Result<Self, String> {
        if name.is_empty() {
            return Ok(Self::default());
        }
        if name.len() > MAX_ZONE_NAME_LEN {
            return Err(format!(
                "is {} bytes; an IANA time-zone name (e.g. America/Denver) has at most {MAX_ZONE_NAME_LEN}",
                name.len()
            ));
        }
        match TimeZone::get(name) {
            Ok(tz) => Ok(Self {
                name: name.to_string(),
                tz,
                assumed: false,
            }),
            Err(_) => Err(format!(
                "{name:?} is not an IANA time-zone name (e.g. America/Denver, Europe/Oslo, UTC)"
            )),
        }
    }

    /// An instant (UTC seconds) as RFC 3339 in this zone, to the second, e.g.
    /// `2027-01-15T21:30:00-07:00`.
    pub fn rfc3339(&self, at_s: f64) -> String {
        match instant(at_s) {
            Some(t) => {
                let offset = self.tz.to_offset(t);
                t.display_with_offset(offset).to_string()
            }
            None => format!("{at_s} s"),
        }
    }

    /// A deadline for a person: RFC 3339 in this zone, floored to the minute (a person reads
    /// minutes; flooring keeps the written time at or before the real deadline).
    pub fn deadline(&self, at_s: f64) -> String {
        self.rfc3339((at_s / 60.0).floor() * 60.0)
    }

    /// An instant as a short local clock time with its offset, e.g. `21:30 -07:00` (tables).
    pub fn short(&self, at_s: f64) -> String {
        match instant(at_s) {
            Some(t) => t
                .to_zoned(self.tz.clone())
                .strftime("%H:%M %:z")
                .to_string(),
            None => format!("{at_s} s"),
        }
    }

    /// The last instant at or before `at_s` (UTC seconds) whose local time is `hour`:00, as UTC
    /// seconds. On a spring-forward night an hour that does not exist is read as the first
    /// instant after the gap; on a fall-back night a repeated hour is its first occurrence.
    pub fn last_local_hour_at_or_before(&self, at_s: i64, hour: u32) -> Option<i64> {
        let t = Timestamp::from_second(at_s).ok()?;
        let time = Time::new(i8::try_from(hour).ok()?, 0, 0, 0).ok()?;
        let day = t.to_zoned(self.tz.clone()).date();
        let at_day = |d: jiff::civil::Date| {
            d.to_datetime(time)
                .to_zoned(self.tz.clone())
                .ok()
                .map(|z| z.timestamp().as_second())
        };
        let today = at_day(day)?;
        if today <= at_s {
            Some(today)
        } else {
            at_day(day.yesterday().ok()?)
        }
    }
}

/// UTC seconds (rounded to the second) as a jiff instant, when in jiff's range.
fn instant(at_s: f64) -> Option<Timestamp> {
    if !at_s.is_finite() {
        return None;
    }
    let s = at_s.round();
    if s.abs() > 1e15 {
        return None;
    }
    Timestamp::from_second(s as i64).ok()
}

/// RFC 3339 in UTC with a `Z`, for machine values in error details.
pub fn utc_rfc3339(at_s: f64) -> String {
    match instant(at_s) {
        Some(t) => t.to_string(),
        None => format!("{at_s} s"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn denver() -> Zone {
        Zone::from_name("America/Denver").unwrap()
    }

    /// 2026-11-01: US daylight time ends at 02:00 MDT (08:00 UTC), clocks go back to 01:00 MST.
    /// 2027-03-14: it starts at 02:00 MST (09:00 UTC), clocks go to 03:00 MDT. US federal rule
    /// (second Sunday of March, first Sunday of November), common practice (no source).
    const FALL_BACK_S: i64 = 1_793_520_000; // 2026-11-01T08:00:00Z
    const SPRING_FORWARD_S: i64 = 1_805_014_800; // 2027-03-14T09:00:00Z

    #[test]
    fn names_are_checked_against_the_bundled_database() {
        assert!(denver().tz != TimeZone::UTC);
        assert!(!denver().assumed);
        let absent = Zone::from_name("").unwrap();
        assert!(absent.assumed);
        assert_eq!(absent.name, "UTC");
        assert!(!Zone::from_name("UTC").unwrap().assumed);
        for bad in [
            "Mars/Olympus",
            "America/denver ",
            "+07:00",
            "../../etc/passwd",
            "\0",
        ] {
            assert!(Zone::from_name(bad).is_err(), "{bad:?}");
        }
        assert!(Zone::from_name(&"A/".repeat(100)).is_err());
    }

    #[test]
    fn times_for_people_carry_the_local_offset_on_both_sides_of_a_change() {
        let d = denver();
        // Half an hour before and after the fall-back instant: 01:30 MDT, then 01:30 MST.
        assert_eq!(
            d.rfc3339((FALL_BACK_S - 1800) as f64),
            "2026-11-01T01:30:00-06:00"
        );
        assert_eq!(
            d.rfc3339((FALL_BACK_S + 1800) as f64),
            "2026-11-01T01:30:00-07:00"
        );
        assert_eq!(d.short((FALL_BACK_S + 1800) as f64), "01:30 -07:00");
        // Spring forward: 01:59 MST is followed by 03:00 MDT.
        assert_eq!(
            d.rfc3339((SPRING_FORWARD_S - 60) as f64),
            "2027-03-14T01:59:00-07:00"
        );
        assert_eq!(
            d.rfc3339(SPRING_FORWARD_S as f64),
            "2027-03-14T03:00:00-06:00"
        );
        assert_eq!(utc_rfc3339(FALL_BACK_S as f64), "2026-11-01T08:00:00Z");
        assert_eq!(
            d.deadline((FALL_BACK_S + 1859) as f64),
            "2026-11-01T01:30:00-07:00"
        );
        assert_eq!(d.rfc3339(f64::NAN), "NaN s");
    }

    #[test]
    fn a_local_hour_of_the_night_follows_the_zone_rules() {
        let d = denver();
        // Departure 06:00 MST on the fall-back morning (13:00 UTC): 04:00 local that morning is
        // 11:00 UTC (after the change), 01:00 local is its first occurrence, 07:00 UTC (MDT).
        let dep = FALL_BACK_S + 5 * 3600;
        assert_eq!(
            d.last_local_hour_at_or_before(dep, 4),
            Some(FALL_BACK_S + 3 * 3600)
        );
        assert_eq!(
            d.last_local_hour_at_or_before(dep, 1),
            Some(FALL_BACK_S - 3600)
        );
        // 22:00 is the evening before (22:00 MDT = 04:00 UTC).
        assert_eq!(
            d.last_local_hour_at_or_before(dep, 22),
            Some(FALL_BACK_S - 4 * 3600)
        );
        // Spring forward, departure 06:00 MDT (12:00 UTC): 02:00 local does not exist and reads
        // as 03:00 MDT (09:00 UTC); 04:00 MDT is 10:00 UTC; 01:00 MST is 08:00 UTC.
        let dep = SPRING_FORWARD_S + 3 * 3600;
        assert_eq!(
            d.last_local_hour_at_or_before(dep, 2),
            Some(SPRING_FORWARD_S)
        );
        assert_eq!(
            d.last_local_hour_at_or_before(dep, 4),
            Some(SPRING_FORWARD_S + 3600)
        );
        assert_eq!(
            d.last_local_hour_at_or_before(dep, 1),
            Some(SPRING_FORWARD_S - 3600)
        );
        assert_eq!(d.last_local_hour_at_or_before(dep, 24), None);
        // UTC: the plain UTC hour.
        let u = Zone::default();
        assert_eq!(
            u.last_local_hour_at_or_before(dep, 1),
            Some(dep - 11 * 3600)
        );
    }
}
