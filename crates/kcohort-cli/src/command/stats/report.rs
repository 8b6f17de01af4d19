//! What a `kcohort stats` subcommand prints: a plain-text table for people, or JSON with every
//! number as a number for programs. Both are built from the same result structs of kcohort-stats.

use super::table_input::{InputSummary, Table};
use clap::ValueEnum;
use kcohort_stats::{Interval, StatsError};
use serde::Serialize;
use serde_json::{Map, Value};
use std::io::Write;

/// Output format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// A readable plain-text table.
    Table,
    /// One JSON object: the subcommand, the inputs used and every estimate, interval and test.
    Json,
}

/// One subcommand's finished output, in both forms.
#[derive(Debug)]
pub struct Report {
    pub command: &'static str,
    pub input: InputSummary,
    /// The columns and options used, as named fields.
    pub settings: Value,
    pub results: Value,
    pub text: String,
    /// For stderr: how many rows were left out for missing values, if any.
    pub note: Option<String>,
}

impl Report {
    /// The report of `command` on `table`; `text` is the text table, without the input line,
    /// which is added here.
    pub fn new(
        command: &'static str,
        table: &Table,
        settings: Value,
        results: Value,
        text: String,
    ) -> Self {
        let input = table.summary();
        let mut heading = format!(
            "input: {} ({} rows",
            input.file,
            amount(input.rows_used as f64)
        );
        if input.rows_dropped_missing > 0 {
            heading.push_str(&format!(
                "; {} more left out for missing values",
                amount(input.rows_dropped_missing as f64)
            ));
        }
        heading.push_str(")\n");
        Report {
            command,
            input,
            settings,
            results,
            text: text.replacen('\n', &format!("\n{heading}"), 1),
            note: table.dropped_note(),
        }
    }

    /// Writes the report in `format`; JSON is streamed, as a large curve makes a large document.
    pub fn write(&self, format: Format, out: &mut impl Write) -> std::io::Result<()> {
        match format {
            Format::Table => out.write_all(self.text.as_bytes())?,
            Format::Json => {
                let mut input = match serde_json::to_value(&self.input) {
                    Ok(Value::Object(map)) => map,
                    _ => Map::new(),
                };
                if let Value::Object(settings) = &self.settings {
                    input.extend(settings.clone());
                }
                #[derive(Serialize)]
                struct Document<'a> {
                    command: &'a str,
                    input: Map<String, Value>,
                    results: &'a Value,
                }
                let document = Document {
                    command: self.command,
                    input,
                    results: &self.results,
                };
                serde_json::to_writer_pretty(&mut *out, &document).map_err(std::io::Error::from)?;
                out.write_all(b"\n")?;
            }
        }
        out.flush()
    }
}

/// An estimate, or the reason the data cannot give it (a zero count where a ratio needs one).
/// Other library errors are not outcomes: they stop the command.
#[derive(Debug, Clone, Serialize)]
#[serde(untagged)]
pub enum Outcome<T> {
    Estimated(T),
    NotEstimable { not_estimable: String },
}

impl<T> Outcome<T> {
    pub fn from_result(result: Result<T, StatsError>) -> Result<Self, StatsError> {
        match result {
            Ok(value) => Ok(Outcome::Estimated(value)),
            Err(StatsError::NotEstimable(reason)) => Ok(Outcome::NotEstimable {
                // The hint lines are for the text output of an error, not for a cell.
                not_estimable: reason.lines().next().unwrap_or_default().to_string(),
            }),
            Err(other) => Err(other),
        }
    }

    /// Why the estimate is missing, if it is.
    pub fn reason(&self) -> Option<&str> {
        match self {
            Outcome::Estimated(_) => None,
            Outcome::NotEstimable { not_estimable } => Some(not_estimable),
        }
    }

    pub fn estimated(&self) -> Option<&T> {
        match self {
            Outcome::Estimated(value) => Some(value),
            Outcome::NotEstimable { .. } => None,
        }
    }
}

/// Serialises a result struct of kcohort-stats (they all derive Serialize).
pub fn to_json(value: &impl Serialize) -> Value {
    serde_json::to_value(value).expect("result structs serialise to JSON")
}

/// A plain-text table: the first column left-aligned (labels), the others right-aligned.
#[derive(Debug)]
pub struct TextTable {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

impl TextTable {
    pub fn new(header: &[&str]) -> Self {
        TextTable {
            header: header.iter().map(|h| h.to_string()).collect(),
            rows: Vec::new(),
        }
    }

    pub fn row(&mut self, cells: Vec<String>) {
        debug_assert_eq!(cells.len(), self.header.len());
        self.rows.push(cells);
    }

    pub fn render(&self) -> String {
        let width = |column: usize| {
            std::iter::once(&self.header)
                .chain(&self.rows)
                .map(|row| row[column].chars().count())
                .max()
                .unwrap_or(0)
        };
        let widths: Vec<usize> = (0..self.header.len()).map(width).collect();
        let mut out = String::new();
        for row in std::iter::once(&self.header).chain(&self.rows) {
            let mut line = String::new();
            for (i, (cell, &w)) in row.iter().zip(&widths).enumerate() {
                let pad = w - cell.chars().count();
                if i == 0 {
                    line.push_str(cell);
                    line.push_str(&" ".repeat(pad));
                } else {
                    line.push_str("   ");
                    line.push_str(&" ".repeat(pad));
                    line.push_str(cell);
                }
            }
            out.push_str(line.trim_end());
            out.push('\n');
        }
        out
    }
}

/// A number to 4 significant digits, plain notation between 0.0001 and 10 million.
pub fn num(x: f64) -> String {
    if x.is_nan() {
        return "n/a".to_string();
    }
    if x.is_infinite() {
        return if x > 0.0 { "infinite" } else { "-infinite" }.to_string();
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let magnitude = x.abs().log10().floor() as i32;
    if !(-4..7).contains(&magnitude) {
        return format!("{x:.3e}");
    }
    let decimals = (3 - magnitude).max(0) as usize;
    format!("{x:.decimals$}")
}

/// A time as the input wrote it (shortest form that reads back the same number: 9, 0.5, 365.25).
pub fn time(x: f64) -> String {
    if x.is_finite() {
        format!("{x}")
    } else {
        num(x)
    }
}

/// An amount such as person-time: up to 2 decimals, thousands separated (51,477.5).
pub fn amount(x: f64) -> String {
    if !x.is_finite() {
        return num(x);
    }
    let text = format!("{:.2}", x.abs());
    let (whole, fraction) = text.split_once('.').expect("formatted with decimals");
    let fraction = fraction.trim_end_matches('0');
    let mut grouped = String::new();
    for (i, digit) in whole.chars().enumerate() {
        if i > 0 && (whole.len() - i) % 3 == 0 {
            grouped.push(',');
        }
        grouped.push(digit);
    }
    let sign = if x < 0.0 { "-" } else { "" };
    if fraction.is_empty() {
        format!("{sign}{grouped}")
    } else {
        format!("{sign}{grouped}.{fraction}")
    }
}

/// "0.2553 to 0.3662".
pub fn interval(interval: &Interval) -> String {
    format!("{} to {}", num(interval.lower), num(interval.upper))
}

/// "95% CI" for level 0.95, "99.8% CI" for 0.998.
pub fn ci_label(level: f64) -> String {
    format!("{} CI", percent(level))
}

/// "95%" for 0.95.
pub fn percent(level: f64) -> String {
    let text = format!("{:.4}", level * 100.0);
    let text = text.trim_end_matches('0').trim_end_matches('.');
    format!("{text}%")
}

/// "rate per 1,000" for 1000.
pub fn per_label(per: f64) -> String {
    format!("rate per {}", amount(per))
}

/// A p-value to 4 decimals, "<0.0001" below that.
pub fn p_value(p: f64) -> String {
    if p < 0.0001 {
        "<0.0001".to_string()
    } else {
        format!("{p:.4}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_written_for_reading() {
        for (x, expected) in [
            (2.10999757, "2.110"),
            (0.25531, "0.2553"),
            (1234.56, "1235"),
            (0.0, "0"),
            (f64::INFINITY, "infinite"),
            (-0.0381, "-0.03810"),
            (3.2e-6, "3.200e-6"),
        ] {
            assert_eq!(num(x), expected, "{x}");
        }
        assert_eq!(amount(51477.5), "51,477.5");
        assert_eq!(amount(100000.0), "100,000");
        assert_eq!(amount(-1234.567), "-1,234.57");
        assert_eq!(ci_label(0.95), "95% CI");
        assert_eq!(ci_label(0.998), "99.8% CI");
        assert_eq!(per_label(1000.0), "rate per 1,000");
        assert_eq!(p_value(0.065_31), "0.0653");
        assert_eq!(p_value(1e-9), "<0.0001");
    }

    #[test]
    fn text_tables_align_columns() {
        let mut table = TextTable::new(&["group", "n"]);
        table.row(vec!["long name".to_string(), "1".to_string()]);
        table.row(vec!["b".to_string(), "100".to_string()]);
        assert_eq!(
            table.render(),
            "group         n\nlong name     1\nb           100\n"
        );
    }
}
