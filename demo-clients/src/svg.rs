//! A few hand-written SVG primitives and linear scales: enough for the demo's two charts without
//! a plotting crate.

use std::fmt::Write as _;

/// Stroke of a line: colour, width in px, optional dash pattern.
#[derive(Debug, Clone, Copy)]
pub struct Stroke<'a> {
    /// CSS colour.
    pub color: &'a str,
    /// Width, px.
    pub width_px: f64,
    /// `stroke-dasharray`, e.g. `"6 4"`.
    pub dash: Option<&'a str>,
}

impl<'a> Stroke<'a> {
    /// A solid stroke.
    pub fn solid(color: &'a str, width_px: f64) -> Self {
        Self {
            color,
            width_px,
            dash: None,
        }
    }

    /// A dashed stroke.
    pub fn dashed(color: &'a str, width_px: f64, dash: &'a str) -> Self {
        Self {
            color,
            width_px,
            dash: Some(dash),
        }
    }

    fn attrs(&self) -> String {
        let mut s = format!(
            r#"stroke="{}" stroke-width="{}""#,
            self.color, self.width_px
        );
        if let Some(d) = self.dash {
            // Round caps, so that a dot pattern ("0.1 4") draws round dots.
            let _ = write!(s, r#" stroke-dasharray="{d}" stroke-linecap="round""#);
        }
        s
    }
}

/// Text anchor.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Anchor {
    /// Left edge at x.
    Start,
    /// Centred on x.
    Middle,
    /// Right edge at x.
    End,
}

/// An SVG document being written.
#[derive(Debug)]
pub struct Svg {
    buf: String,
}

/// Escapes text for XML.
pub fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

impl Svg {
    /// A white canvas of `width_px` × `height_px`.
    pub fn new(width_px: f64, height_px: f64) -> Self {
        let mut buf = String::new();
        let _ = writeln!(
            buf,
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width_px}" height="{height_px}" viewBox="0 0 {width_px} {height_px}" font-family="DejaVu Sans, Helvetica, Arial, sans-serif">"#
        );
        let _ = writeln!(
            buf,
            r#"<rect x="0" y="0" width="{width_px}" height="{height_px}" fill="white"/>"#
        );
        Self { buf }
    }

    /// A straight line.
    pub fn line(&mut self, (x1, y1): (f64, f64), (x2, y2): (f64, f64), stroke: Stroke<'_>) {
        let _ = writeln!(
            self.buf,
            r#"<line x1="{x1:.1}" y1="{y1:.1}" x2="{x2:.1}" y2="{y2:.1}" {}/>"#,
            stroke.attrs()
        );
    }

    /// A polyline through the points.
    pub fn polyline(&mut self, points: &[(f64, f64)], stroke: Stroke<'_>) {
        let pts: Vec<String> = points
            .iter()
            .map(|(x, y)| format!("{x:.1},{y:.1}"))
            .collect();
        let _ = writeln!(
            self.buf,
            r#"<polyline fill="none" stroke-linejoin="round" points="{}" {}/>"#,
            pts.join(" "),
            stroke.attrs()
        );
    }

    /// A filled rectangle (width and height may come negative; they are normalised).
    pub fn rect(
        &mut self,
        (x, y): (f64, f64),
        (w, h): (f64, f64),
        fill: &str,
        stroke: Option<Stroke<'_>>,
    ) {
        let (x, w) = if w < 0.0 { (x + w, -w) } else { (x, w) };
        let (y, h) = if h < 0.0 { (y + h, -h) } else { (y, h) };
        let s = stroke.map_or_else(String::new, |s| s.attrs());
        let _ = writeln!(
            self.buf,
            r#"<rect x="{x:.1}" y="{y:.1}" width="{w:.1}" height="{h:.1}" fill="{fill}" {s}/>"#
        );
    }

    /// A filled circle.
    pub fn circle(&mut self, (cx, cy): (f64, f64), r: f64, fill: &str, stroke: Stroke<'_>) {
        let _ = writeln!(
            self.buf,
            r#"<circle cx="{cx:.1}" cy="{cy:.1}" r="{r}" fill="{fill}" {}/>"#,
            stroke.attrs()
        );
    }

    /// A filled closed polygon through the points.
    pub fn polygon(&mut self, points: &[(f64, f64)], fill: &str, stroke: Stroke<'_>) {
        let pts: Vec<String> = points
            .iter()
            .map(|(x, y)| format!("{x:.1},{y:.1}"))
            .collect();
        let _ = writeln!(
            self.buf,
            r#"<polygon stroke-linejoin="round" points="{}" fill="{fill}" {}/>"#,
            pts.join(" "),
            stroke.attrs()
        );
    }

    /// Text at a point (the baseline at y).
    pub fn text(
        &mut self,
        (x, y): (f64, f64),
        text: &str,
        size_px: f64,
        anchor: Anchor,
        fill: &str,
    ) {
        self.text_styled((x, y), text, size_px, anchor, fill, "normal");
    }

    /// Bold text.
    pub fn bold(&mut self, (x, y): (f64, f64), text: &str, size_px: f64, anchor: Anchor) {
        self.text_styled((x, y), text, size_px, anchor, "#222", "bold");
    }

    fn text_styled(
        &mut self,
        (x, y): (f64, f64),
        text: &str,
        size_px: f64,
        anchor: Anchor,
        fill: &str,
        weight: &str,
    ) {
        let a = match anchor {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        };
        let _ = writeln!(
            self.buf,
            r#"<text x="{x:.1}" y="{y:.1}" font-size="{size_px}" text-anchor="{a}" fill="{fill}" font-weight="{weight}">{}</text>"#,
            escape(text)
        );
    }

    /// Text rotated 90° counter-clockwise about its anchor (a y-axis label).
    pub fn vertical_text(&mut self, (x, y): (f64, f64), text: &str, size_px: f64) {
        let _ = writeln!(
            self.buf,
            r##"<text x="{x:.1}" y="{y:.1}" font-size="{size_px}" text-anchor="middle" fill="#333" transform="rotate(-90 {x:.1} {y:.1})">{}</text>"##,
            escape(text)
        );
    }

    /// The finished document.
    pub fn finish(mut self) -> String {
        self.buf.push_str("</svg>\n");
        self.buf
    }
}

/// A linear map from a data interval onto a pixel interval.
#[derive(Debug, Clone, Copy)]
pub struct Linear {
    d0: f64,
    d1: f64,
    r0: f64,
    r1: f64,
}

impl Linear {
    /// Maps `[d0, d1]` onto `[r0, r1]` (an empty data interval is widened by one unit).
    pub fn new((d0, d1): (f64, f64), (r0, r1): (f64, f64)) -> Self {
        let d1 = if d1 == d0 { d0 + 1.0 } else { d1 };
        Self { d0, d1, r0, r1 }
    }

    /// The pixel position of `v`.
    pub fn map(&self, v: f64) -> f64 {
        self.r0 + (v - self.d0) / (self.d1 - self.d0) * (self.r1 - self.r0)
    }
}

/// Round tick values (1, 2 or 5 × 10ⁿ apart) covering `[lo, hi]`, about `target` of them.
pub fn nice_ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite()) || hi <= lo || target == 0 {
        return vec![lo];
    }
    let raw = (hi - lo) / target as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    // Rounded to 1e-9 so that 3 × 0.2 prints as 0.6.
    (first..=last)
        .map(|i| (i as f64 * step * 1e9).round() / 1e9)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_and_inside() {
        assert_eq!(
            nice_ticks(-23.0, 12.0, 7),
            [-20.0, -15.0, -10.0, -5.0, 0.0, 5.0, 10.0]
        );
        assert_eq!(nice_ticks(0.0, 1.0, 5), [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]);
        assert_eq!(nice_ticks(3.0, 3.0, 5), [3.0]);
    }

    #[test]
    fn linear_maps_ends_and_inverts_axes() {
        let y = Linear::new((-10.0, 10.0), (400.0, 0.0));
        assert_eq!(y.map(-10.0), 400.0);
        assert_eq!(y.map(10.0), 0.0);
        assert_eq!(y.map(0.0), 200.0);
    }

    #[test]
    fn document_is_well_formed_and_escaped() {
        let mut s = Svg::new(100.0, 50.0);
        s.text((1.0, 2.0), "a < b & c", 10.0, Anchor::Start, "black");
        s.rect((10.0, 10.0), (-5.0, -5.0), "red", None);
        let doc = s.finish();
        assert!(doc.starts_with("<svg "));
        assert!(doc.ends_with("</svg>\n"));
        assert!(doc.contains("a &lt; b &amp; c"));
        assert!(doc.contains(r#"<rect x="5.0" y="5.0" width="5.0" height="5.0""#));
    }
}
