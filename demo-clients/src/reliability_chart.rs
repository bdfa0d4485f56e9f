//! The reliability chart of the month of mornings: predicted no-start probability against the
//! observed no-start rate, per probability bin, for the archetype defaults (before calibration)
//! and for the calibrated predictions (after), with the diagonal of perfect reliability. Marker
//! area grows with the attempts in the bin; Brier score and log loss are in the legend.

use startmargin_sdk::api;

use crate::style::{self, Marker, draw_marker};
use crate::svg::{Anchor, Linear, Stroke, Svg};

/// One curve: its label and the service's score.
#[derive(Debug, Clone, Copy)]
pub struct Curve<'a> {
    /// Legend label.
    pub label: &'a str,
    /// The scores.
    pub score: &'a api::ReliabilityScore,
}

/// The chart, as an SVG document.
pub fn reliability_chart(title: &str, subtitle: &str, curves: &[Curve<'_>]) -> String {
    let (w, h) = (900.0, 640.0);
    let (x0, x1, y0, y1) = (90.0, 560.0, 90.0, 560.0);
    let mut svg = Svg::new(w, h);
    svg.bold((x0, 34.0), title, 18.0, Anchor::Start);
    // One line per `\n` of the subtitle.
    for (i, line) in subtitle.lines().enumerate() {
        svg.text(
            (x0, 58.0 + 15.0 * i as f64),
            line,
            12.0,
            Anchor::Start,
            "#555",
        );
    }
    let xs = Linear::new((0.0, 100.0), (x0, x1));
    let ys = Linear::new((0.0, 100.0), (y1, y0));
    for t in (0..=10).map(|i| f64::from(i) * 10.0) {
        let (x, y) = (xs.map(t), ys.map(t));
        svg.line((x0, y), (x1, y), Stroke::solid("#e4e4e4", 1.0));
        svg.line((x, y0), (x, y1), Stroke::solid("#eeeeee", 1.0));
        svg.text(
            (x0 - 8.0, y + 4.0),
            &format!("{t:.0}"),
            11.0,
            Anchor::End,
            "#444",
        );
        svg.text(
            (x, y1 + 18.0),
            &format!("{t:.0}"),
            11.0,
            Anchor::Middle,
            "#444",
        );
    }
    svg.rect(
        (x0, y0),
        (x1 - x0, y1 - y0),
        "none",
        Some(Stroke::solid("#999", 1.0)),
    );
    svg.text(
        ((x0 + x1) / 2.0, y1 + 42.0),
        "predicted no-start probability, % (mean of the bin)",
        13.0,
        Anchor::Middle,
        "#222",
    );
    svg.vertical_text(
        (x0 - 46.0, (y0 + y1) / 2.0),
        "observed no-start rate, %",
        13.0,
    );
    // Perfect reliability.
    svg.line(
        (xs.map(0.0), ys.map(0.0)),
        (xs.map(100.0), ys.map(100.0)),
        Stroke::dashed("#222", 1.2, "2 4"),
    );

    let largest = curves
        .iter()
        .flat_map(|c| c.score.bins.iter().map(|b| b.attempt_count))
        .max()
        .unwrap_or(1)
        .max(1) as f64;
    let styles = [
        (style::series(1), Marker::Square),
        (style::series(0), Marker::Circle),
    ];
    for (i, c) in curves.iter().enumerate() {
        let (st, marker) = styles[i % styles.len()];
        let points: Vec<(f64, f64)> = c
            .score
            .bins
            .iter()
            .filter(|b| b.attempt_count > 0)
            .map(|b| {
                (
                    xs.map(b.mean_predicted_pct),
                    ys.map(b.observed_no_start_pct),
                )
            })
            .collect();
        svg.polyline(&points, st.stroke(2.0));
        for b in c.score.bins.iter().filter(|b| b.attempt_count > 0) {
            // Marker area in proportion to the bin's attempts (6 to 22 px across).
            let size = 6.0 + 16.0 * (b.attempt_count as f64 / largest).sqrt();
            draw_marker(
                &mut svg,
                marker,
                (
                    xs.map(b.mean_predicted_pct),
                    ys.map(b.observed_no_start_pct),
                ),
                size,
                st.color,
            );
        }
        // Legend.
        let ly = y0 + 12.0 + i as f64 * 64.0;
        let lx = x1 + 30.0;
        svg.line((lx, ly), (lx + 34.0, ly), st.stroke(2.0));
        draw_marker(&mut svg, marker, (lx + 17.0, ly), 10.0, st.color);
        svg.bold((lx + 44.0, ly + 4.0), c.label, 13.0, Anchor::Start);
        svg.text(
            (lx + 44.0, ly + 22.0),
            &format!(
                "Brier {:.4}, log loss {:.3}",
                c.score.brier_score, c.score.log_loss
            ),
            12.0,
            Anchor::Start,
            "#333",
        );
        svg.text(
            (lx + 44.0, ly + 38.0),
            &format!("largest bin gap {:.1} points", c.score.largest_bin_gap_pct),
            12.0,
            Anchor::Start,
            "#333",
        );
    }
    let ly = y0 + 12.0 + curves.len() as f64 * 64.0;
    svg.line(
        (x1 + 30.0, ly),
        (x1 + 64.0, ly),
        Stroke::dashed("#222", 1.2, "2 4"),
    );
    svg.text(
        (x1 + 74.0, ly + 4.0),
        "dotted: perfect reliability",
        12.0,
        Anchor::Start,
        "#333",
    );
    svg.text(
        (x1 + 30.0, ly + 26.0),
        "marker size: attempts in the bin",
        12.0,
        Anchor::Start,
        "#333",
    );
    svg.finish()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_chart_draws_every_non_empty_bin_and_names_its_scores() {
        let score = api::ReliabilityScore {
            bins: vec![
                api::ReliabilityBin {
                    from_pct: 0.0,
                    to_pct: 50.0,
                    attempt_count: 90,
                    mean_predicted_pct: 5.0,
                    observed_no_start_pct: 6.0,
                },
                api::ReliabilityBin {
                    from_pct: 50.0,
                    to_pct: 100.0,
                    attempt_count: 0,
                    ..Default::default()
                },
            ],
            brier_score: 0.0412,
            log_loss: 0.2,
            largest_bin_gap_pct: 1.0,
        };
        let svg = reliability_chart(
            "t",
            "s",
            &[Curve {
                label: "calibrated",
                score: &score,
            }],
        );
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("Brier 0.0412"));
        assert!(svg.contains("calibrated"));
        assert!(svg.contains("dotted: perfect reliability"));
    }
}
