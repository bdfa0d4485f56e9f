//! Conversions between `std::time::SystemTime` and the API's `google.protobuf.Timestamp` (UTC).

use std::time::SystemTime;

/// The API's timestamp type (`google.protobuf.Timestamp`).
pub use prost_types::Timestamp;

/// A `SystemTime` as a protobuf timestamp.
pub fn to_timestamp(t: SystemTime) -> Timestamp {
    Timestamp::from(t)
}

/// A protobuf timestamp as a `SystemTime`; `None` when it is out of range or not normalised.
pub fn to_system_time(ts: &Timestamp) -> Option<SystemTime> {
    SystemTime::try_from(*ts).ok()
}

/// Seconds since the Unix epoch of a protobuf timestamp (negative before 1970).
pub fn unix_s(ts: &Timestamp) -> f64 {
    ts.seconds as f64 + f64::from(ts.nanos) * 1e-9
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::{Duration, UNIX_EPOCH};

    #[test]
    fn round_trip_keeps_nanoseconds() {
        let t = UNIX_EPOCH + Duration::new(1_736_899_200, 250_000_000);
        let ts = to_timestamp(t);
        assert_eq!(ts.seconds, 1_736_899_200);
        assert_eq!(ts.nanos, 250_000_000);
        assert_eq!(to_system_time(&ts), Some(t));
        assert_eq!(unix_s(&ts), 1_736_899_200.25);
    }
}
