//! The evening table: one row per vehicle, columns declared in one list so that a new field of
//! the assessment (e.g. a no-start probability) is one more [`Column`] entry.

use startmargin_sdk::{Error, GelLevel, LimitingFactor, VehicleAssessment};

use crate::scenario::{DepotVehicle, local_hhmm};

/// One vehicle and its outcome.
#[derive(Debug, Clone, Copy)]
pub struct Row<'a> {
    /// The vehicle as the scenario describes it.
    pub vehicle: &'a DepotVehicle,
    /// The assessment, or the vehicle's own error.
    pub outcome: &'a Result<VehicleAssessment, Error>,
}

/// Horizontal alignment of a column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    /// Text.
    Left,
    /// Numbers.
    Right,
}

/// A table column: header, alignment and how to fill a cell.
#[derive(Debug, Clone, Copy)]
pub struct Column {
    /// Header text.
    pub header: &'static str,
    /// Alignment.
    pub align: Align,
    /// Cell text of a row.
    pub cell: fn(&Row<'_>) -> String,
}

/// Cell text from the assessment, or `on_error` when the vehicle failed.
fn ok_or(row: &Row<'_>, on_error: &str, f: impl Fn(&VehicleAssessment) -> String) -> String {
    row.outcome
        .as_ref()
        .map_or_else(|_| on_error.to_string(), f)
}

/// A protobuf enum value name as words: `GEL_LEVEL_FILTER_AT_RISK` → `filter at risk`.
pub fn words(name: &str, prefix: &str) -> String {
    name.strip_prefix(prefix)
        .unwrap_or(name)
        .to_ascii_lowercase()
        .replace('_', " ")
}

/// The gel level in words.
pub fn gel_words(a: &VehicleAssessment) -> String {
    let level = a.gel.as_ref().map_or(GelLevel::Unspecified, |g| g.level());
    words(level.as_str_name(), "GEL_LEVEL_")
}

/// The limiting factor in words.
pub fn limiting_words(a: &VehicleAssessment) -> String {
    words(a.limiting_factor().as_str_name(), "LIMITING_FACTOR_")
}

/// Margins farther than this from zero read as "far" (K or rpm): a figure beyond it means nothing
/// more to a dispatcher.
const FAR_MARGIN: f64 = 100.0;

/// The binding failure mode's margin with its unit: the headline every other column agrees with.
pub fn binding_margin(a: &VehicleAssessment) -> String {
    let Some(m) = a.modes.iter().find(|m| m.mode == a.binding_mode) else {
        return format!("{:+.1} K", a.start_margin_k);
    };
    let short = match m.mode() {
        startmargin_sdk::FailureMode::CrankingSpeed => "crank",
        startmargin_sdk::FailureMode::FrozenBattery => "battery",
        startmargin_sdk::FailureMode::FuelFlow => "fuel",
        _ => "charge",
    };
    if m.margin > FAR_MARGIN {
        format!("{short} >+{FAR_MARGIN:.0} {}", m.unit)
    } else if m.margin < -FAR_MARGIN {
        format!("{short} <-{FAR_MARGIN:.0} {}", m.unit)
    } else {
        format!("{short} {:+.1} {}", m.margin, m.unit)
    }
}

/// The first recommended action's summary, or "—".
pub fn first_action(a: &VehicleAssessment) -> String {
    a.actions
        .first()
        .map_or_else(|| "—".to_string(), |x| x.summary.clone())
}

/// Cuts `s` to at most `max` characters, marking the cut with "…".
pub fn clip(s: &str, max: usize) -> String {
    if s.chars().count() <= max {
        s.to_string()
    } else {
        let mut out: String = s.chars().take(max.saturating_sub(1)).collect();
        out.push('…');
        out
    }
}

/// The default columns of the evening table.
pub fn default_columns() -> Vec<Column> {
    vec![
        Column {
            header: "vehicle",
            align: Align::Left,
            cell: |r| r.vehicle.id().to_string(),
        },
        Column {
            header: "archetype",
            align: Align::Left,
            cell: |r| r.vehicle.archetype.to_string(),
        },
        Column {
            header: "departs",
            align: Align::Left,
            cell: |r| local_hhmm(r.vehicle.departure),
        },
        Column {
            header: "binding margin",
            align: Align::Right,
            cell: |r| ok_or(r, "error", binding_margin),
        },
        Column {
            header: "start expected",
            align: Align::Left,
            cell: |r| {
                ok_or(r, "—", |a| {
                    if a.start_expected { "yes" } else { "NO" }.into()
                })
            },
        },
        Column {
            header: "no-start %",
            align: Align::Right,
            cell: |r| ok_or(r, "—", |a| format!("{:.1}", a.no_start_pct)),
        },
        Column {
            header: "outlook",
            align: Align::Left,
            cell: |r| {
                ok_or(r, "—", |a| {
                    words(a.outlook().as_str_name(), "START_OUTLOOK_")
                })
            },
        },
        Column {
            header: "gel level",
            align: Align::Left,
            cell: |r| ok_or(r, "—", gel_words),
        },
        Column {
            header: "limiting factor",
            align: Align::Left,
            cell: |r| {
                ok_or(r, "—", |a| match a.limiting_factor() {
                    LimitingFactor::None => "none".into(),
                    _ => limiting_words(a),
                })
            },
        },
        Column {
            header: "first action",
            align: Align::Left,
            cell: |r| match r.outcome {
                Ok(a) => clip(&first_action(a), 48),
                Err(e) => clip(&format!("error: {e}"), 48),
            },
        },
    ]
}

/// Renders rows as a plain-text table with a header rule.
pub fn render(rows: &[Row<'_>], columns: &[Column]) -> String {
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|r| columns.iter().map(|c| (c.cell)(r)).collect())
        .collect();
    let widths: Vec<usize> = columns
        .iter()
        .enumerate()
        .map(|(i, c)| {
            cells
                .iter()
                .map(|row| row[i].chars().count())
                .chain([c.header.chars().count()])
                .max()
                .unwrap_or(0)
        })
        .collect();
    let line = |texts: Vec<&str>| -> String {
        let parts: Vec<String> = texts
            .iter()
            .zip(columns)
            .zip(&widths)
            .map(|((t, c), &w)| {
                let pad = " ".repeat(w - t.chars().count());
                match c.align {
                    Align::Left => format!("{t}{pad}"),
                    Align::Right => format!("{pad}{t}"),
                }
            })
            .collect();
        parts.join("  ").trim_end().to_string()
    };
    let mut out = line(columns.iter().map(|c| c.header).collect());
    out.push('\n');
    out.push_str(&"-".repeat(widths.iter().sum::<usize>() + 2 * (widths.len() - 1)));
    out.push('\n');
    for row in &cells {
        out.push_str(&line(row.iter().map(String::as_str).collect()));
        out.push('\n');
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::evening_cold_front;
    use startmargin_sdk::api;

    #[test]
    fn enum_names_become_words() {
        assert_eq!(
            words("GEL_LEVEL_FILTER_AT_RISK", "GEL_LEVEL_"),
            "filter at risk"
        );
        assert_eq!(
            words("LIMITING_FACTOR_COLD_CHARGE", "LIMITING_FACTOR_"),
            "cold charge"
        );
    }

    #[test]
    fn clip_marks_the_cut() {
        assert_eq!(clip("abcdef", 6), "abcdef");
        assert_eq!(clip("abcdefg", 6), "abcde…");
    }

    #[test]
    fn rows_align_and_show_errors() {
        let s = evening_cold_front().unwrap();
        let ok: Result<VehicleAssessment, Error> = Ok(VehicleAssessment {
            vehicle_id: "PL-01".into(),
            start_margin_k: -3.4,
            start_expected: false,
            no_start_pct: 87.5,
            outlook: api::StartOutlook::NoStartExpected as i32,
            limiting_factor: api::LimitingFactor::SlowCranking as i32,
            gel: Some(api::GelOutlook {
                level: api::GelLevel::WaxForming as i32,
                ..Default::default()
            }),
            actions: vec![api::Action {
                summary: "Plug in the block heater by 01:30".into(),
                ..Default::default()
            }],
            ..Default::default()
        });
        let err: Result<VehicleAssessment, Error> =
            Err(Error::FailedPrecondition("forecast too short".into()));
        let rows = [
            Row {
                vehicle: &s.vehicles[0],
                outcome: &ok,
            },
            Row {
                vehicle: &s.vehicles[1],
                outcome: &err,
            },
        ];
        let text = render(&rows, &default_columns());
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 4);
        assert!(lines[0].starts_with("vehicle  archetype"));
        assert!(lines[2].contains("-3.4"));
        assert!(lines[2].contains("NO"));
        assert!(lines[2].contains("87.5") && lines[2].contains("no start expected"));
        assert!(lines[2].contains("wax forming"));
        assert!(lines[2].contains("slow cranking"));
        assert!(lines[2].ends_with("Plug in the block heater by 01:30"));
        assert!(lines[3].contains("error: failed precondition: forecast too short"));
        // The margin column is right-aligned: both cells end at the same character column.
        let end = |l: &str, pat: &str| l.find(pat).map(|i| l[..i + pat.len()].chars().count());
        assert_eq!(end(lines[0], "binding margin"), end(lines[3], "error"));
    }
}
