//! How the charts tell their series apart: a palette of our own, line dash patterns and marker
//! shapes, combined so that every vehicle stays distinguishable without colour.
//!
//! The palette has two hue families, blues and oranges, each at three lightness steps. Blue
//! against orange is the contrast that the common colour-vision deficiencies (red–green) keep,
//! and the lightness steps keep the six apart in greyscale. Beyond six series the dash pattern
//! changes, and every series has its own pair of dash pattern and marker shape, so a greyscale
//! print still names each line through the legend.

use crate::svg::{Stroke, Svg};

/// The six series colours, ordered so that neighbours differ in hue and lightness.
pub const PALETTE: [&str; 6] = [
    "#16406e", // dark blue
    "#d9761c", // mid orange
    "#8ec3ea", // light blue
    "#7f3410", // dark rust
    "#3b7fc4", // mid blue
    "#e9b949", // light sand
];

/// Dash patterns by round of six series: solid, dashed, dash-dot.
pub const DASHES: [Option<&str>; 3] = [None, Some("8 4"), Some("10 3 2 3")];

/// Marker shapes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// A disc.
    Circle,
    /// A square.
    Square,
    /// A triangle pointing up.
    TriangleUp,
    /// A diamond.
    Diamond,
    /// A triangle pointing down.
    TriangleDown,
    /// A five-sided shape.
    Pentagon,
}

/// The six marker shapes in their order.
pub const MARKERS: [Marker; 6] = [
    Marker::Circle,
    Marker::Square,
    Marker::TriangleUp,
    Marker::Diamond,
    Marker::TriangleDown,
    Marker::Pentagon,
];

/// Outline of every marker: dark, so that the light colours stand out on white.
const MARKER_OUTLINE: &str = "#1a1a1a";

/// The look of one series.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SeriesStyle {
    /// Line and marker colour.
    pub color: &'static str,
    /// Dash pattern of the line, `None` for solid.
    pub dash: Option<&'static str>,
    /// Marker shape.
    pub marker: Marker,
}

impl SeriesStyle {
    /// The line stroke of this series at `width_px`.
    pub fn stroke(&self, width_px: f64) -> Stroke<'static> {
        match self.dash {
            Some(d) => Stroke::dashed(self.color, width_px, d),
            None => Stroke::solid(self.color, width_px),
        }
    }
}

/// The style of series `i`: colour cycles every six, the dash pattern changes every six, and the
/// marker is shifted by one each round so that two series of one colour differ in both dash and
/// marker.
pub fn series(i: usize) -> SeriesStyle {
    let round = i / PALETTE.len();
    SeriesStyle {
        color: PALETTE[i % PALETTE.len()],
        dash: DASHES[round % DASHES.len()],
        marker: MARKERS[(i + round) % MARKERS.len()],
    }
}

/// Draws `marker` centred on `(x, y)`, about `size_px` across.
pub fn draw_marker(svg: &mut Svg, marker: Marker, (x, y): (f64, f64), size_px: f64, fill: &str) {
    let r = size_px / 2.0;
    let outline = Stroke::solid(MARKER_OUTLINE, 1.0);
    let regular = |n: usize, start_rad: f64, radius: f64| -> Vec<(f64, f64)> {
        (0..n)
            .map(|k| {
                let a = start_rad + k as f64 * std::f64::consts::TAU / n as f64;
                (x + radius * a.cos(), y + radius * a.sin())
            })
            .collect()
    };
    let up = -std::f64::consts::FRAC_PI_2;
    match marker {
        Marker::Circle => svg.circle((x, y), r, fill, outline),
        Marker::Square => {
            let s = r * 0.9;
            svg.polygon(
                &[
                    (x - s, y - s),
                    (x + s, y - s),
                    (x + s, y + s),
                    (x - s, y + s),
                ],
                fill,
                outline,
            );
        }
        Marker::TriangleUp => svg.polygon(&regular(3, up, r * 1.2), fill, outline),
        Marker::TriangleDown => svg.polygon(&regular(3, -up, r * 1.2), fill, outline),
        Marker::Diamond => svg.polygon(&regular(4, up, r * 1.2), fill, outline),
        Marker::Pentagon => svg.polygon(&regular(5, up, r * 1.1), fill, outline),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::HashSet;

    /// Relative luminance (sRGB, as in WCAG 2) of `#rrggbb`.
    fn luminance(hex: &str) -> f64 {
        let channel = |i: usize| {
            let v = f64::from(u8::from_str_radix(&hex[i..i + 2], 16).unwrap()) / 255.0;
            if v <= 0.04045 {
                v / 12.92
            } else {
                ((v + 0.055) / 1.055).powf(2.4)
            }
        };
        0.2126 * channel(1) + 0.7152 * channel(3) + 0.0722 * channel(5)
    }

    #[test]
    fn twelve_series_differ_without_colour() {
        let styles: Vec<SeriesStyle> = (0..12).map(series).collect();
        let without_colour: HashSet<_> = styles.iter().map(|s| (s.dash, s.marker as u8)).collect();
        assert_eq!(
            without_colour.len(),
            12,
            "dash and marker name every series"
        );
        // Two series of one colour differ in both dash and marker.
        for i in 0..6 {
            assert_eq!(styles[i].color, styles[i + 6].color);
            assert_ne!(styles[i].dash, styles[i + 6].dash);
            assert_ne!(styles[i].marker, styles[i + 6].marker);
        }
    }

    #[test]
    fn palette_steps_apart_in_lightness_within_each_hue() {
        // Blues and oranges, each dark, mid and light: within a family the luminance ratio
        // (WCAG contrast of one against the other) is at least 1.7, so they part in greyscale.
        let blues = [PALETTE[0], PALETTE[4], PALETTE[2]];
        let oranges = [PALETTE[3], PALETTE[1], PALETTE[5]];
        for family in [blues, oranges] {
            for pair in family.windows(2) {
                let (dark, light) = (luminance(pair[0]) + 0.05, luminance(pair[1]) + 0.05);
                assert!(light / dark >= 1.7, "{pair:?}: {:.2}", light / dark);
            }
        }
        // And every colour stands off the white background (contrast at least 1.6).
        for c in PALETTE {
            assert!(1.05 / (luminance(c) + 0.05) >= 1.6, "{c} too pale on white");
        }
    }

    #[test]
    fn markers_draw_as_svg_shapes() {
        let mut svg = Svg::new(100.0, 100.0);
        for (i, m) in MARKERS.iter().enumerate() {
            draw_marker(
                &mut svg,
                *m,
                (10.0 + 15.0 * i as f64, 50.0),
                10.0,
                PALETTE[i],
            );
        }
        let text = svg.finish();
        assert_eq!(text.matches("<circle").count(), 1);
        assert_eq!(text.matches("<polygon").count(), 5);
    }
}
