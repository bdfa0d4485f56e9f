//! Retry policy for idempotent unary calls: how many times, and how long to wait between tries.
//!
//! Exponential backoff capped at a maximum, with "equal jitter": the wait before retry `n`
//! (0-based) is `d/2 + j·d/2` where `d = min(max, base·2ⁿ)` and `j ∈ [0, 1)` comes from a small
//! hash of the attempt and a per-client jitter key. The jitter is deterministic for a given key
//! (reproducible tests and logs) yet spreads clients with different keys, so a fleet of clients
//! does not retry in lock step after a server restart.

use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Duration;

/// Exponential backoff with deterministic jitter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Backoff {
    /// Nominal wait before the first retry.
    pub base: Duration,
    /// Cap on the nominal wait.
    pub max: Duration,
}

impl Default for Backoff {
    /// 100 ms doubling to at most 2 s.
    fn default() -> Self {
        Self {
            base: Duration::from_millis(100),
            max: Duration::from_secs(2),
        }
    }
}

impl Backoff {
    /// The nominal (unjittered) wait before retry `attempt` (0 = first retry): `min(max, base·2ⁿ)`.
    pub fn nominal(&self, attempt: u32) -> Duration {
        let factor = 1u32.checked_shl(attempt.min(31)).unwrap_or(u32::MAX);
        self.base.saturating_mul(factor).min(self.max)
    }

    /// The jittered wait before retry `attempt`, in `[nominal/2, nominal)` (or zero when the
    /// nominal wait is zero). The same `attempt` and `jitter_key` always give the same wait.
    pub fn delay(&self, attempt: u32, jitter_key: u64) -> Duration {
        let d = self.nominal(attempt);
        let half = d / 2;
        half + half.mul_f64(unit_interval(jitter_key, attempt))
    }
}

/// A number in `[0, 1)` from the key and attempt (SplitMix64 finaliser).
fn unit_interval(key: u64, attempt: u32) -> f64 {
    let mut z = key ^ u64::from(attempt).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    // 53 high bits → an f64 in [0, 1).
    (z >> 11) as f64 / (1u64 << 53) as f64
}

/// A jitter key that differs between clients of one process and between processes.
pub(crate) fn default_jitter_key() -> u64 {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let pid = u64::from(std::process::id());
    (pid << 32) ^ n.wrapping_mul(0xD6E8_FEB8_6659_FD93)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ms(v: u64) -> Duration {
        Duration::from_millis(v)
    }

    #[test]
    fn nominal_doubles_then_caps() {
        let b = Backoff {
            base: ms(100),
            max: ms(1_000),
        };
        let got: Vec<_> = (0..6).map(|n| b.nominal(n)).collect();
        assert_eq!(
            got,
            [ms(100), ms(200), ms(400), ms(800), ms(1_000), ms(1_000)]
        );
        // Huge attempt numbers neither overflow nor exceed the cap.
        assert_eq!(b.nominal(u32::MAX), ms(1_000));
    }

    #[test]
    fn delay_stays_within_half_to_full_nominal() {
        let b = Backoff::default();
        for key in [0, 1, 42, u64::MAX] {
            for n in 0..12 {
                let d = b.delay(n, key);
                assert!(
                    d >= b.nominal(n) / 2 && d <= b.nominal(n),
                    "{n} {key} {d:?}"
                );
            }
        }
    }

    #[test]
    fn jitter_is_deterministic_per_key_and_differs_between_keys() {
        let b = Backoff::default();
        assert_eq!(b.delay(3, 7), b.delay(3, 7));
        let a: Vec<_> = (0..8).map(|n| b.delay(n, 1)).collect();
        let c: Vec<_> = (0..8).map(|n| b.delay(n, 2)).collect();
        assert_ne!(a, c);
    }

    #[test]
    fn jitter_spreads_over_the_interval() {
        // 1000 keys: the fractions should cover both halves of [0, 1).
        let xs: Vec<f64> = (0..1000).map(|k| unit_interval(k, 0)).collect();
        assert!(xs.iter().all(|x| (0.0..1.0).contains(x)));
        let low = xs.iter().filter(|&&x| x < 0.5).count();
        assert!((400..600).contains(&low), "{low}");
    }

    #[test]
    fn zero_backoff_means_no_wait() {
        let b = Backoff {
            base: Duration::ZERO,
            max: Duration::ZERO,
        };
        assert_eq!(b.delay(5, 9), Duration::ZERO);
    }

    #[test]
    fn default_keys_differ_between_clients() {
        assert_ne!(default_jitter_key(), default_jitter_key());
    }
}
