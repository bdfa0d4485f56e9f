//! The fleet's reliability read-out: how well predicted no-start probabilities matched what
//! happened. Scores, not physics: equal-width probability bins against observed failure rates
//! (a reliability diagram), the Brier score (Brier 1950, *Monthly Weather Review* 78:1–3: the mean
//! squared difference between forecast probability and outcome) and the log loss (mean negative
//! log likelihood, with probabilities bounded away from 0 and 1 so that one confident miss is
//! finite).

/// Probabilities are bounded to [`LOG_LOSS_FLOOR`, 1 − floor] in the log loss.
pub const LOG_LOSS_FLOOR: f64 = 0.001;

/// One scored prediction: the probability of a no-start (0..1) and whether it happened.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scored {
    /// Predicted no-start probability, 0..1.
    pub probability: f64,
    /// The engine did not fire.
    pub failed: bool,
}

/// One bin of the reliability diagram.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Bin {
    /// Lower edge, 0..1.
    pub from: f64,
    /// Upper edge, 0..1.
    pub to: f64,
    /// Predictions in the bin.
    pub count: u64,
    /// Their mean predicted probability, 0..1 (0 when empty).
    pub mean_predicted: f64,
    /// Their observed failure rate, 0..1 (0 when empty).
    pub observed_rate: f64,
}

/// The scores of one set of predictions.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Reliability {
    /// Equal-width bins over 0..1.
    pub bins: Vec<Bin>,
    /// Brier score (0 is perfect).
    pub brier_score: f64,
    /// Mean negative log likelihood, nats.
    pub log_loss: f64,
    /// Largest |mean predicted − observed rate| over the non-empty bins, 0..1.
    pub largest_bin_gap: f64,
}

/// Scores `predictions` in `bin_count` equal-width bins (at least 1). Non-finite probabilities
/// never reach here (the service stores only validated model output); they are skipped if they do.
pub fn score(predictions: &[Scored], bin_count: usize) -> Reliability {
    let bin_count = bin_count.max(1);
    let width = 1.0 / bin_count as f64;
    let mut sums = vec![(0u64, 0.0f64, 0u64); bin_count];
    let (mut brier, mut log_loss, mut n) = (0.0, 0.0, 0u64);
    for s in predictions.iter().filter(|s| s.probability.is_finite()) {
        let p = s.probability.clamp(0.0, 1.0);
        let y = if s.failed { 1.0 } else { 0.0 };
        brier += (p - y) * (p - y);
        let pb = p.clamp(LOG_LOSS_FLOOR, 1.0 - LOG_LOSS_FLOOR);
        log_loss -= if s.failed { pb.ln() } else { (1.0 - pb).ln() };
        n += 1;
        let i = ((p / width) as usize).min(bin_count - 1);
        sums[i].0 += 1;
        sums[i].1 += p;
        sums[i].2 += u64::from(s.failed);
    }
    let bins: Vec<Bin> = sums
        .iter()
        .enumerate()
        .map(|(i, &(count, p_sum, failures))| Bin {
            from: i as f64 * width,
            to: (i + 1) as f64 * width,
            count,
            mean_predicted: if count == 0 {
                0.0
            } else {
                p_sum / count as f64
            },
            observed_rate: if count == 0 {
                0.0
            } else {
                failures as f64 / count as f64
            },
        })
        .collect();
    let largest_bin_gap = bins
        .iter()
        .filter(|b| b.count > 0)
        .map(|b| (b.mean_predicted - b.observed_rate).abs())
        .fold(0.0, f64::max);
    let nf = n.max(1) as f64;
    Reliability {
        bins,
        brier_score: if n == 0 { 0.0 } else { brier / nf },
        log_loss: if n == 0 { 0.0 } else { log_loss / nf },
        largest_bin_gap,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn s(probability: f64, failed: bool) -> Scored {
        Scored {
            probability,
            failed,
        }
    }

    #[test]
    fn brier_of_a_climatological_forecast_is_rate_times_one_minus_rate() {
        // Always forecasting the base rate r scores r(1 − r) (Brier 1950; a standard identity).
        let mut v = vec![s(0.2, true); 20];
        v.extend(vec![s(0.2, false); 80]);
        let r = score(&v, 10);
        assert!((r.brier_score - 0.16).abs() < 1e-12);
        assert!(r.largest_bin_gap < 1e-12, "bin 0.2 holds 20 % failures");
        // Log loss of a calibrated constant forecast is the binary entropy of the rate, nats.
        let h = -(0.2f64 * 0.2f64.ln() + 0.8 * 0.8f64.ln());
        assert!((r.log_loss - h).abs() < 1e-12);
        assert_eq!(r.bins[2].count, 100);
    }

    #[test]
    fn perfect_and_worst_forecasts() {
        let perfect = score(&[s(1.0, true), s(0.0, false)], 4);
        assert_eq!(perfect.brier_score, 0.0);
        let worst = score(&[s(0.0, true), s(1.0, false)], 4);
        assert_eq!(worst.brier_score, 1.0);
        // Bounded: a confident miss costs −ln(0.001) ≈ 6.9 nats, not infinity.
        assert!((worst.log_loss - (-(LOG_LOSS_FLOOR.ln()))).abs() < 1e-9);
        assert!((worst.largest_bin_gap - 1.0).abs() < 1e-12);
    }

    #[test]
    fn bins_cover_zero_to_one_and_take_the_top_edge() {
        let r = score(&[s(1.0, true), s(0.0, false), s(0.5, false)], 2);
        assert_eq!(r.bins.len(), 2);
        assert_eq!((r.bins[0].from, r.bins[1].to), (0.0, 1.0));
        assert_eq!(r.bins[0].count, 1);
        assert_eq!(r.bins[1].count, 2, "0.5 and 1.0 fall in the upper bin");
    }

    #[test]
    fn hostile_input_is_skipped_or_bounded() {
        let r = score(
            &[s(f64::NAN, true), s(f64::INFINITY, false), s(2.0, true)],
            0,
        );
        assert_eq!(r.bins.len(), 1);
        assert_eq!(
            r.bins[0].count, 1,
            "only the finite one counts, clamped to 1"
        );
        assert_eq!(r.brier_score, 0.0);
        let empty = score(&[], 10);
        assert_eq!(empty.brier_score, 0.0);
        assert!(empty.bins.iter().all(|b| b.count == 0));
    }
}
