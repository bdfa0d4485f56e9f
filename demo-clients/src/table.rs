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
    /// Widest line of the column, characters; longer text wraps onto more lines of the row.
    pub wrap_at: Option<usize>,
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

/// Breaks `s` into lines of at most `width` characters at spaces, keeping every word (a word
/// longer than `width` is split); never cuts text off.
pub fn wrap(s: &str, width: usize) -> Vec<String> {
    let width = width.max(1);
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in s.split_whitespace() {
        let mut word: Vec<char> = word.chars().collect();
        while word.len() > width {
            if !line.is_empty() {
                lines.push(std::mem::take(&mut line));
            }
            lines.push(word.drain(..width).collect());
        }
        let word: String = word.into_iter().collect();
        let needed = line.chars().count() + usize::from(!line.is_empty()) + word.chars().count();
        if !line.is_empty() && needed > width {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(&word);
    }
    if !line.is_empty() || lines.is_empty() {
        lines.push(line);
    }
    lines
}

/// The default columns of the evening table.
pub fn default_columns() -> Vec<Column> {
    vec![
        Column {
            header: "vehicle",
            align: Align::Left,
            cell: |r| r.vehicle.id().to_string(),
            wrap_at: None,
        },
        Column {
            header: "archetype",
            align: Align::Left,
            cell: |r| r.vehicle.archetype.to_string(),
            wrap_at: None,
        },
        Column {
            header: "departs",
            align: Align::Left,
            cell: |r| local_hhmm(r.vehicle.departure),
            wrap_at: None,
        },
        Column {
            header: "binding margin",
            align: Align::Right,
            cell: |r| ok_or(r, "error", binding_margin),
            wrap_at: None,
        },
        Column {
            header: "start expected",
            align: Align::Left,
            cell: |r| {
                ok_or(r, "—", |a| {
                    if a.start_expected { "yes" } else { "NO" }.into()
                })
            },
            wrap_at: None,
        },
        Column {
            header: "no-start %",
            align: Align::Right,
            cell: |r| ok_or(r, "—", |a| format!("{:.1}", a.no_start_pct)),
            wrap_at: None,
        },
        Column {
            header: "outlook",
            align: Align::Left,
            cell: |r| {
                ok_or(r, "—", |a| {
                    words(a.outlook().as_str_name(), "START_OUTLOOK_")
                })
            },
            wrap_at: None,
        },
        Column {
            header: "gel level",
            align: Align::Left,
            cell: |r| ok_or(r, "—", gel_words),
            wrap_at: None,
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
            wrap_at: None,
        },
        Column {
            header: "first action",
            align: Align::Left,
            cell: |r| match r.outcome {
                Ok(a) => first_action(a),
                Err(e) => format!("error: {e}"),
            },
            wrap_at: Some(48),
        },
    ]
}

/// Renders rows as a plain-text table with a header rule; a cell longer than its column's
/// `wrap_at` continues on the following lines of its row.
pub fn render(rows: &[Row<'_>], columns: &[Column]) -> String {
    let cells: Vec<Vec<Vec<String>>> = rows
        .iter()
        .map(|r| {
            columns
                .iter()
                .map(|c| {
                    let text = (c.cell)(r);
                    match c.wrap_at {
                        Some(width) => wrap(&text, width),
                        None => vec![text],
                    }
                })
                .collect()
        })
        .collect();
    let widths: Vec<usize> = columns
        .iter()
        .enumerate()
        .map(|(i, c)| {
            cells
                .iter()
                .flat_map(|row| row[i].iter().map(|l| l.chars().count()))
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
        let height = row.iter().map(Vec::len).max().unwrap_or(1);
        for k in 0..height {
            out.push_str(&line(
                row.iter()
                    .map(|cell| cell.get(k).map_or("", String::as_str))
                    .collect(),
            ));
            out.push('\n');
        }
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
    fn wrap_keeps_every_word() {
        assert_eq!(wrap("abcdef", 6), ["abcdef"]);
        assert_eq!(wrap("abc def ghi", 7), ["abc def", "ghi"]);
        assert_eq!(wrap("abcdefghij", 4), ["abcd", "efgh", "ij"]);
        assert_eq!(wrap("", 4), [""]);
        let text =
            "Blend No. 1 diesel or kerosene in before the fuel clouds: the only effective way";
        let lines = wrap(text, 20);
        assert!(lines.iter().all(|l| l.chars().count() <= 20), "{lines:?}");
        assert_eq!(lines.join(" "), text);
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

    #[test]
    fn long_first_actions_wrap_instead_of_being_cut() {
        let s = evening_cold_front().unwrap();
        let summary = "Blend No. 1 diesel or kerosene in before the fuel clouds: the only \
                       effective way to lower the cloud point (about 1-2 K per 10 %).";
        let ok: Result<VehicleAssessment, Error> = Ok(VehicleAssessment {
            actions: vec![api::Action {
                summary: summary.into(),
                ..Default::default()
            }],
            ..Default::default()
        });
        let rows = [Row {
            vehicle: &s.vehicles[0],
            outcome: &ok,
        }];
        let text = render(&rows, &default_columns());
        assert!(!text.contains('…'), "{text}");
        let lines: Vec<&str> = text.lines().skip(2).collect();
        assert!(lines.len() >= 3, "{text}");
        // The continuation lines start in the action's column, the other columns left blank.
        let column = lines[0].find("Blend").unwrap();
        let words: Vec<&str> = lines
            .iter()
            .map(|l| {
                assert!(l[..column].trim().is_empty() || l == &lines[0], "{text}");
                l[column..].trim()
            })
            .collect();
        assert_eq!(words.join(" "), summary);
        assert!(words.iter().all(|w| w.chars().count() <= 48));
    }
}
