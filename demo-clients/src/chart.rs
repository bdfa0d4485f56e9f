//! The two SVG charts of the evening run: each vehicle's start margin through the night, and the
//! fuel temperature paths against each fuel's cloud point and CFPP (one small panel per vehicle).

use std::time::{SystemTime, UNIX_EPOCH};

use startmargin_sdk::VehicleAssessment;
use startmargin_sdk::time::unix_s;

use crate::scenario::{DepotVehicle, Scenario, local_clock, zone_label};
use crate::style::{self, draw_marker};
use crate::svg::{Anchor, Linear, Stroke, Svg, nice_ticks};
use crate::table::gel_words;

/// A vehicle that got an assessment.
#[derive(Debug, Clone, Copy)]
pub struct Assessed<'a> {
    /// The vehicle.
    pub vehicle: &'a DepotVehicle,
    /// Its assessment.
    pub assessment: &'a VehicleAssessment,
}

fn secs(t: SystemTime) -> f64 {
    t.duration_since(UNIX_EPOCH)
        .map_or(0.0, |d| d.as_secs_f64())
}

fn hhmm_of_s(s: f64) -> String {
    local_clock(UNIX_EPOCH + std::time::Duration::from_secs_f64(s.max(0.0)))
}

/// Time ticks every `every_h` hours from the forecast start to its end.
fn time_ticks(s: &Scenario, every_h: u32) -> Vec<f64> {
    let (t0, t1) = (secs(s.forecast_start), secs(s.forecast_end()));
    let step = f64::from(every_h) * 3600.0;
    let n = ((t1 - t0) / step).floor() as usize;
    (0..=n).map(|i| t0 + i as f64 * step).collect()
}

/// Low and high of the values with `pad` of the span (at least `min_pad`) added on each side.
fn padded(values: impl Iterator<Item = f64>, pad: f64, min_pad: f64) -> (f64, f64) {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if !lo.is_finite() {
        return (-1.0, 1.0);
    }
    let p = ((hi - lo) * pad).max(min_pad);
    (lo - p, hi + p)
}

/// Start margin through the night: one line per vehicle (the margin if it left at that hour), the
/// zero line, each vehicle's planned departure marked, and a legend.
pub fn margin_chart(s: &Scenario, rows: &[Assessed<'_>]) -> String {
    let (w, h) = (1180.0, 640.0);
    let (x0, x1, y0, y1) = (80.0, 850.0, 84.0, 560.0);
    let mut svg = Svg::new(w, h);
    svg.bold(
        (x0, 34.0),
        &format!("Charge-temperature margin through the night — {}", s.depot),
        18.0,
        Anchor::Start,
    );
    svg.text(
        (x0, 58.0),
        "Margin if the vehicle left at each hour (from the forecast and its key-off readings); the vehicle's marker \
         sits at its planned departure.",
        12.0,
        Anchor::Start,
        "#555",
    );
    svg.text(
        (x0, 74.0),
        "Below 0 K the charge is too cold to fire; a vehicle above it can still fail on cranking, battery or fuel: \
         the legend gives each vehicle's binding margin.",
        12.0,
        Anchor::Start,
        "#555",
    );

    let (lo, hi) = padded(
        rows.iter().flat_map(|r| {
            r.assessment
                .margin_path
                .iter()
                .map(|m| m.margin_k)
                .chain([r.assessment.start_margin_k, 0.0])
        }),
        0.06,
        1.0,
    );
    let xs = Linear::new((secs(s.forecast_start), secs(s.forecast_end())), (x0, x1));
    let ys = Linear::new((lo, hi), (y1, y0));

    // Below zero: no start expected.
    svg.rect(
        (x0, ys.map(0.0)),
        (x1 - x0, y1 - ys.map(0.0)),
        "#fdecea",
        None,
    );
    for t in nice_ticks(lo, hi, 8) {
        let y = ys.map(t);
        svg.line((x0, y), (x1, y), Stroke::solid("#e4e4e4", 1.0));
        svg.text(
            (x0 - 8.0, y + 4.0),
            &if t == 0.0 {
                "0".to_string()
            } else {
                format!("{t:+}")
            },
            11.0,
            Anchor::End,
            "#444",
        );
    }
    for t in time_ticks(s, 2) {
        let x = xs.map(t);
        svg.line((x, y0), (x, y1), Stroke::solid("#eeeeee", 1.0));
        svg.text((x, y1 + 18.0), &hhmm_of_s(t), 11.0, Anchor::Middle, "#444");
    }
    svg.rect(
        (x0, y0),
        (x1 - x0, y1 - y0),
        "none",
        Some(Stroke::solid("#999", 1.0)),
    );
    svg.line(
        (x0, ys.map(0.0)),
        (x1, ys.map(0.0)),
        Stroke::solid("#222", 1.6),
    );
    svg.text(
        (x0 + 8.0, ys.map(0.0) + 16.0),
        "below 0 K: charge too cold to fire (other modes: see legend)",
        11.0,
        Anchor::Start,
        "#b71c1c",
    );

    for (i, r) in rows.iter().enumerate() {
        let pts: Vec<(f64, f64)> = r
            .assessment
            .margin_path
            .iter()
            .filter_map(|m| {
                m.at.as_ref()
                    .map(|at| (xs.map(unix_s(at)), ys.map(m.margin_k)))
            })
            .collect();
        svg.polyline(&pts, style::series(i).stroke(2.0));
    }
    for (i, r) in rows.iter().enumerate() {
        let at = (
            xs.map(secs(r.vehicle.departure)),
            ys.map(r.assessment.start_margin_k),
        );
        let st = style::series(i);
        draw_marker(&mut svg, st.marker, at, 11.0, st.color);
    }

    svg.text(
        ((x0 + x1) / 2.0, y1 + 42.0),
        &format!(
            "local time ({}), invented evening and night",
            zone_label(s.forecast_start)
        ),
        12.0,
        Anchor::Middle,
        "#333",
    );
    svg.vertical_text(
        (26.0, (y0 + y1) / 2.0),
        "charge-temperature margin, K",
        12.0,
    );

    let lx = x1 + 24.0;
    svg.bold(
        (lx, y0 + 4.0),
        "vehicle · departs · binding margin",
        12.0,
        Anchor::Start,
    );
    for (i, r) in rows.iter().enumerate() {
        let y = y0 + 30.0 + i as f64 * 36.0;
        // The same line, dash and marker as in the plot.
        let st = style::series(i);
        svg.line((lx - 4.0, y - 4.0), (lx + 26.0, y - 4.0), st.stroke(2.0));
        draw_marker(&mut svg, st.marker, (lx + 11.0, y - 4.0), 10.0, st.color);
        svg.bold((lx + 34.0, y), r.vehicle.id(), 12.0, Anchor::Start);
        svg.text(
            (lx + 34.0, y + 14.0),
            &format!(
                "{} · {} · {}{}",
                r.vehicle.archetype,
                // The offset is in the axis title; the legend keeps to its width.
                local_clock(r.vehicle.departure),
                crate::table::binding_margin(r.assessment),
                if r.assessment.start_expected {
                    ""
                } else {
                    " · NO START"
                }
            ),
            10.5,
            Anchor::Start,
            "#555",
        );
    }
    svg.finish()
}

// The fuel chart's lines, shared by its legend and its panels so that the two cannot disagree.
// Tank and filter part by lightness and dash as well as hue; the limits by dash pattern.
/// Tank temperature: dark blue, solid.
const TANK: Stroke<'static> = Stroke {
    color: style::PALETTE[0],
    width_px: 2.0,
    dash: None,
};
/// Filter temperature: mid orange, dashed.
const FILTER: Stroke<'static> = Stroke {
    color: style::PALETTE[1],
    width_px: 2.0,
    dash: Some("7 3"),
};
/// Cloud point: ochre, short dashes.
const CLOUD_POINT: Stroke<'static> = Stroke {
    color: "#9a7400",
    width_px: 1.4,
    dash: Some("4 3"),
};
/// CFPP: deep red, dash-dot.
const CFPP: Stroke<'static> = Stroke {
    color: "#a3231b",
    width_px: 1.4,
    dash: Some("10 3 2 3"),
};
/// Departure: dark grey, dotted (round dots).
const DEPARTURE: Stroke<'static> = Stroke {
    color: "#333333",
    width_px: 1.8,
    dash: Some("0.1 4"),
};

/// Fuel temperatures through the night against cloud point and CFPP: one panel per vehicle with
/// the tank and filter paths, the bands where wax forms (below cloud point) and where the filter
/// plugs (below CFPP), and the departure.
pub fn fuel_chart(s: &Scenario, rows: &[Assessed<'_>]) -> String {
    let cols = 4usize;
    let n_rows = rows.len().div_ceil(cols).max(1);
    let (left, right, top, bottom, gap_x, gap_y) = (56.0, 24.0, 128.0, 36.0, 40.0, 58.0);
    let w = 1180.0;
    let pw = (w - left - right - gap_x * (cols as f64 - 1.0)) / cols as f64;
    let ph = 150.0;
    let h = top + n_rows as f64 * ph + (n_rows as f64 - 1.0) * gap_y + bottom + 20.0;
    let mut svg = Svg::new(w, h);
    svg.bold(
        (left, 34.0),
        &format!(
            "Fuel temperature against cloud point and CFPP — {}",
            s.depot
        ),
        18.0,
        Anchor::Start,
    );
    svg.text(
        (left, 56.0),
        "Tank and filter temperature through the night (°C). Shaded bands: below cloud point (wax forms), \
         below CFPP (the filter plugs). Dotted vertical line: departure.",
        12.0,
        Anchor::Start,
        "#555",
    );
    // Legend.
    let ly = 84.0;
    let items: [(&str, Stroke<'_>); 5] = [
        ("tank", TANK),
        ("filter", FILTER),
        ("cloud point", CLOUD_POINT),
        ("CFPP", CFPP),
        ("departure", DEPARTURE),
    ];
    let mut lx = left;
    for (label, stroke) in items {
        svg.line((lx, ly - 4.0), (lx + 26.0, ly - 4.0), stroke);
        svg.text((lx + 32.0, ly), label, 11.0, Anchor::Start, "#333");
        lx += 56.0 + label.len() as f64 * 7.5;
    }

    let (lo, hi) = padded(
        rows.iter().flat_map(|r| {
            let g = r.assessment.gel.clone().unwrap_or_default();
            let path: Vec<f64> = g.path.iter().flat_map(|p| [p.tank_c, p.filter_c]).collect();
            path.into_iter().chain([g.cloud_point_c, g.cfpp_c])
        }),
        0.04,
        2.0,
    );
    let (t0, t1) = (secs(s.forecast_start), secs(s.forecast_end()));
    let y_ticks = nice_ticks(lo, hi, 5);
    let x_ticks = time_ticks(s, 4);

    for (i, r) in rows.iter().enumerate() {
        let (col, row) = (i % cols, i / cols);
        let px = left + col as f64 * (pw + gap_x);
        let py = top + row as f64 * (ph + gap_y);
        let xs = Linear::new((t0, t1), (px, px + pw));
        let ys = Linear::new((lo, hi), (py + ph, py));
        let g = r.assessment.gel.clone().unwrap_or_default();

        svg.rect(
            (px, ys.map(g.cfpp_c)),
            (pw, py + ph - ys.map(g.cfpp_c)),
            "#fde0dc",
            None,
        );
        svg.rect(
            (px, ys.map(g.cloud_point_c)),
            (pw, ys.map(g.cfpp_c) - ys.map(g.cloud_point_c)),
            "#fff3cd",
            None,
        );
        for &t in &y_ticks {
            svg.line(
                (px, ys.map(t)),
                (px + pw, ys.map(t)),
                Stroke::solid("#e8e8e8", 0.8),
            );
            svg.text(
                (px - 5.0, ys.map(t) + 3.5),
                &format!("{t}"),
                9.0,
                Anchor::End,
                "#555",
            );
        }
        for (k, &t) in x_ticks.iter().enumerate() {
            // End labels sit inside the panel so neighbouring panels' labels never touch.
            let anchor = match k {
                0 => Anchor::Start,
                _ if k + 1 == x_ticks.len() => Anchor::End,
                _ => Anchor::Middle,
            };
            svg.text(
                (xs.map(t), py + ph + 13.0),
                &hhmm_of_s(t),
                9.0,
                anchor,
                "#555",
            );
        }
        svg.line(
            (px, ys.map(g.cloud_point_c)),
            (px + pw, ys.map(g.cloud_point_c)),
            CLOUD_POINT,
        );
        svg.line((px, ys.map(g.cfpp_c)), (px + pw, ys.map(g.cfpp_c)), CFPP);
        let dx = xs.map(secs(r.vehicle.departure));
        svg.line((dx, py), (dx, py + ph), DEPARTURE);
        let path = |f: fn(&startmargin_sdk::api::FuelTemperaturePoint) -> f64| -> Vec<(f64, f64)> {
            g.path
                .iter()
                .filter_map(|p| p.at.as_ref().map(|at| (xs.map(unix_s(at)), ys.map(f(p)))))
                .collect()
        };
        svg.polyline(&path(|p| p.tank_c), TANK);
        svg.polyline(&path(|p| p.filter_c), FILTER);
        svg.rect((px, py), (pw, ph), "none", Some(Stroke::solid("#999", 1.0)));

        svg.bold(
            (px, py - 22.0),
            &format!("{}  {}", r.vehicle.id(), r.vehicle.archetype),
            12.0,
            Anchor::Start,
        );
        svg.text(
            (px, py - 7.0),
            &format!(
                "{} · CP {:.0} / CFPP {:.0} · low {:.1} °C",
                gel_words(r.assessment),
                g.cloud_point_c,
                g.cfpp_c,
                g.lowest_fuel_c
            ),
            10.0,
            Anchor::Start,
            if g.blocks_start { "#b71c1c" } else { "#555" },
        );
    }
    svg.text(
        (w / 2.0, h - 10.0),
        &format!(
            "local time ({}), invented evening and night",
            zone_label(s.forecast_start)
        ),
        12.0,
        Anchor::Middle,
        "#333",
    );
    svg.finish()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{evening_cold_front, local};
    use startmargin_sdk::api;
    use startmargin_sdk::time::to_timestamp;

    fn fake(v: &DepotVehicle, s: &Scenario) -> VehicleAssessment {
        let hours: Vec<SystemTime> = (0..16).map(|i| s.forecast.point_time(i)).collect();
        VehicleAssessment {
            vehicle_id: v.id().to_string(),
            start_margin_k: -2.0,
            margin_path: hours
                .iter()
                .enumerate()
                .map(|(i, t)| api::MarginPoint {
                    at: Some(to_timestamp(*t)),
                    margin_k: 20.0 - 2.0 * i as f64,
                })
                .collect(),
            gel: Some(api::GelOutlook {
                cloud_point_c: -12.0,
                cfpp_c: -20.0,
                path: hours
                    .iter()
                    .enumerate()
                    .map(|(i, t)| api::FuelTemperaturePoint {
                        at: Some(to_timestamp(*t)),
                        tank_c: 25.0 - 2.5 * i as f64,
                        filter_c: 20.0 - 3.0 * i as f64,
                    })
                    .collect(),
                ..Default::default()
            }),
            ..Default::default()
        }
    }

    #[test]
    fn charts_draw_one_line_per_vehicle_and_mark_departures() {
        let s = evening_cold_front().unwrap();
        let assessments: Vec<_> = s.vehicles.iter().map(|v| fake(v, &s)).collect();
        let rows: Vec<_> = s
            .vehicles
            .iter()
            .zip(&assessments)
            .map(|(vehicle, assessment)| Assessed {
                vehicle,
                assessment,
            })
            .collect();
        let m = margin_chart(&s, &rows);
        assert_eq!(m.matches("<polyline").count(), 12);
        // A departure marker per vehicle and one per legend entry, in six shapes.
        assert_eq!(
            m.matches("<circle").count() + m.matches("<polygon").count(),
            24
        );
        assert_eq!(m.matches("<circle").count(), 4, "two circle series");
        assert!(m.contains("planned departure"));
        // The fuel legend names the departure's pattern as it is drawn: dotted.
        assert!(f_legend_says_dotted(&fuel_chart(&s, &rows)));
        assert!(m.contains(">PL-01<") && m.contains(">DT-12<"));
        assert!(m.contains("below 0 K"));
        let f = fuel_chart(&s, &rows);
        assert_eq!(
            f.matches("<polyline").count(),
            24,
            "tank and filter per vehicle"
        );
        assert!(f.contains("CP -12 / CFPP -20 · low"));
        assert!(f.trim_end().ends_with("</svg>"));
    }

    fn f_legend_says_dotted(f: &str) -> bool {
        f.contains("Dotted vertical line: departure")
            && !f.contains("Dashed line: departure")
            && f.contains(r#"stroke-dasharray="0.1 4""#)
    }

    #[test]
    fn time_ticks_span_the_forecast() {
        let s = evening_cold_front().unwrap();
        let t = time_ticks(&s, 2);
        assert_eq!(t.len(), 9); // 17:00 … 09:00
        assert_eq!(hhmm_of_s(t[0]), "17:00");
        assert_eq!(hhmm_of_s(*t.last().unwrap()), "09:00");
        assert_eq!(secs(local(17, 0, false)), t[0]);
    }
}
