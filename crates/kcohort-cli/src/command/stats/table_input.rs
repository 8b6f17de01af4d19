//! A researcher's table, CSV (header row, UTF-8) or Parquet, read into the named columns one
//! subcommand uses, with cell parsers whose errors name the file, the line (or Parquet row), the
//! column and the value at fault.
//!
//! Only the columns asked for are kept. A cell is missing when it is empty, `NA` (R's
//! `write.csv` default) or a Parquet null; a missing cell in a used column is an error naming
//! its line, unless the caller asked to drop such rows, in which case the number dropped is
//! recorded and reported. No row is ever left out silently.

use anyhow::{Context, anyhow, bail};
use arrow_array::builder::LargeStringBuilder;
use arrow_array::types::{ByteArrayType, Utf8Type};
use arrow_array::{Array, LargeStringArray, StringArray};
use serde::Serialize;
use std::fs::File;
use std::io::BufReader;
use std::path::Path;

/// The file formats we read, told apart by the file name's extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FileFormat {
    Csv,
    Parquet,
}

/// The used columns of a table as text (null = missing), one entry per kept row. Arrow string
/// arrays keep a column in one buffer, so a table of millions of rows stays small.
#[derive(Debug)]
pub struct Table {
    file: String,
    format: FileFormat,
    names: Vec<String>,
    cells: Vec<LargeStringArray>,
    /// CSV line number (the header is line 1) or 1-based Parquet row of each kept row.
    positions: Vec<u64>,
    rows_read: usize,
    rows_dropped: usize,
}

/// What was read, for the JSON output and the stderr note on dropped rows.
#[derive(Debug, Clone, Serialize)]
pub struct InputSummary {
    pub file: String,
    pub format: FileFormat,
    pub rows_read: usize,
    pub rows_used: usize,
    pub rows_dropped_missing: usize,
}

/// Text cells per requested column, and the line (or row) number of each row.
type Cells = (Vec<LargeStringArray>, Vec<u64>);

/// Reads the columns `wanted` of the CSV or Parquet file at `path`. With `drop_missing`, rows with a
/// missing cell in any wanted column are left out and counted; otherwise they are kept and the
/// parsers below report them.
pub fn read(path: &Path, wanted: &[&str], drop_missing: bool) -> anyhow::Result<Table> {
    let file = path.file_name().map_or_else(
        || path.display().to_string(),
        |name| name.to_string_lossy().into_owned(),
    );
    let mut names: Vec<String> = Vec::new();
    for name in wanted {
        if !names.iter().any(|n| n == name) {
            names.push((*name).to_string());
        }
    }
    let extension = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    let (format, cells, positions) = match extension.as_deref() {
        Some("csv") => {
            let (cells, positions) = read_csv(path, &file, &names)?;
            (FileFormat::Csv, cells, positions)
        }
        Some("parquet") => {
            let (cells, positions) = read_parquet(path, &file, &names)?;
            (FileFormat::Parquet, cells, positions)
        }
        _ => bail!(
            "{}: expected a .csv or .parquet file\nhint: kcohort stats reads a CSV file with a header row or a Parquet file",
            path.display()
        ),
    };
    let mut table = Table {
        file,
        format,
        names,
        cells,
        rows_read: positions.len(),
        positions,
        rows_dropped: 0,
    };
    if drop_missing {
        table.drop_missing_rows();
    }
    if table.positions.is_empty() {
        if table.rows_read > 0 {
            bail!(
                "{}: all {} rows have a missing value in a used column ({})",
                table.file,
                table.rows_read,
                table.quoted_names()
            );
        }
        bail!("{} has a header but no data rows", table.file);
    }
    Ok(table)
}

fn read_csv(path: &Path, file: &str, names: &[String]) -> anyhow::Result<Cells> {
    let handle = File::open(path).with_context(|| format!("cannot open {}", path.display()))?;
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_reader(BufReader::new(handle));
    let header = reader
        .byte_headers()
        .with_context(|| format!("{file}: cannot read the header row"))?
        .clone();
    let mut header_names = Vec::with_capacity(header.len());
    for (i, field) in header.iter().enumerate() {
        let field = if i == 0 {
            field.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(field)
        } else {
            field
        };
        let name = std::str::from_utf8(field)
            .map_err(|_| anyhow!("{file} line 1: the header row is not valid UTF-8"))?;
        header_names.push(name.trim().to_string());
    }
    if header_names.iter().all(String::is_empty) {
        bail!("{file} is empty: expected a header row naming the columns");
    }
    let indices = locate(file, &header_names, names)?;
    let mut cells: Vec<LargeStringBuilder> =
        names.iter().map(|_| LargeStringBuilder::new()).collect();
    let mut positions = Vec::new();
    let mut record = csv::ByteRecord::new();
    loop {
        let more = reader
            .read_byte_record(&mut record)
            .with_context(|| format!("{file}: not readable as CSV"))?;
        if !more {
            break;
        }
        let line = record.position().map_or(0, |p| p.line());
        if record.len() == 1 && record[0].is_empty() {
            // A blank line carries no row; the csv reader already skips most of them.
            continue;
        }
        if record.len() != header_names.len() {
            bail!(
                "{file} line {line}: expected {} fields like the header row, found {}",
                header_names.len(),
                record.len()
            );
        }
        for (column, &index) in cells.iter_mut().zip(&indices) {
            let text = std::str::from_utf8(&record[index]).map_err(|_| {
                anyhow!(
                    "{file} line {line}, column `{}`: the value is not valid UTF-8",
                    header_names[index]
                )
            })?;
            column.append_option(cell(text));
        }
        positions.push(line);
    }
    Ok((cells.iter_mut().map(|c| c.finish()).collect(), positions))
}

fn read_parquet(path: &Path, file: &str, names: &[String]) -> anyhow::Result<Cells> {
    use parquet::arrow::ProjectionMask;
    use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

    let handle = File::open(path).with_context(|| format!("cannot open {}", path.display()))?;
    let builder = ParquetRecordBatchReaderBuilder::try_new(handle)
        .with_context(|| format!("{file}: not readable as Parquet"))?;
    let header_names: Vec<String> = builder
        .schema()
        .fields()
        .iter()
        .map(|f| f.name().clone())
        .collect();
    let indices = locate(file, &header_names, names)?;
    let mask = ProjectionMask::roots(builder.parquet_schema(), indices.iter().copied());
    let batches = builder
        .with_projection(mask)
        .with_batch_size(8192)
        .build()
        .with_context(|| format!("{file}: not readable as Parquet"))?;
    let mut cells: Vec<LargeStringBuilder> =
        names.iter().map(|_| LargeStringBuilder::new()).collect();
    let mut positions = Vec::new();
    for batch in batches {
        let batch = batch.with_context(|| format!("{file}: not readable as Parquet"))?;
        for (column, name) in cells.iter_mut().zip(names) {
            let array = batch
                .column_by_name(name)
                .with_context(|| format!("{file}: column `{name}` missing from a row group"))?;
            let text = arrow_cast::cast(array, &<Utf8Type as ByteArrayType>::DATA_TYPE)
                .with_context(|| {
                    format!(
                        "{file}, column `{name}`: its type {} cannot be read as text or numbers",
                        array.data_type()
                    )
                })?;
            let text = text
                .as_any()
                .downcast_ref::<StringArray>()
                .expect("a cast to Utf8 gives a StringArray");
            for i in 0..text.len() {
                column.append_option(if text.is_null(i) {
                    None
                } else {
                    cell(text.value(i))
                });
            }
        }
        let start = positions.len() as u64;
        positions.extend((1..=batch.num_rows() as u64).map(|i| start + i));
    }
    Ok((cells.iter_mut().map(|c| c.finish()).collect(), positions))
}

/// Positions of `names` among the file's columns; an unknown name lists the columns found.
fn locate(file: &str, header: &[String], names: &[String]) -> anyhow::Result<Vec<usize>> {
    names
        .iter()
        .map(|name| {
            let found: Vec<usize> = (0..header.len()).filter(|&i| header[i] == *name).collect();
            match found.as_slice() {
                [index] => Ok(*index),
                [] => {
                    let similar = header.iter().find(|h| h.eq_ignore_ascii_case(name));
                    let mut message = format!(
                        "{file} has no column `{name}`\nhint: the columns found are {}",
                        quoted(header)
                    );
                    if let Some(similar) = similar {
                        message.push_str(&format!(" (did you mean `{similar}`?)"));
                    }
                    Err(anyhow!(message))
                }
                _ => Err(anyhow!(
                    "{file} has {} columns named `{name}`; rename them so that each name is used once",
                    found.len()
                )),
            }
        })
        .collect()
}

fn quoted(names: &[String]) -> String {
    names
        .iter()
        .map(|n| format!("`{n}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A cell's text, trimmed, or None when missing.
fn cell(text: &str) -> Option<&str> {
    let text = text.trim();
    if text.is_empty() || text == "NA" {
        None
    } else {
        Some(text)
    }
}

impl Table {
    /// Number of rows used.
    pub fn len(&self) -> usize {
        self.positions.len()
    }

    pub fn summary(&self) -> InputSummary {
        InputSummary {
            file: self.file.clone(),
            format: self.format,
            rows_read: self.rows_read,
            rows_used: self.len(),
            rows_dropped_missing: self.rows_dropped,
        }
    }

    /// A note for stderr when rows were dropped, None otherwise.
    pub fn dropped_note(&self) -> Option<String> {
        (self.rows_dropped > 0).then(|| {
            format!(
                "note: {} of {} rows of {} were left out for a missing value in {}",
                self.rows_dropped,
                self.rows_read,
                self.file,
                self.quoted_names()
            )
        })
    }

    fn quoted_names(&self) -> String {
        quoted(&self.names)
    }

    fn drop_missing_rows(&mut self) {
        let keep: Vec<bool> = (0..self.positions.len())
            .map(|row| self.cells.iter().all(|column| column.is_valid(row)))
            .collect();
        let mut kept = keep.iter();
        self.positions
            .retain(|_| *kept.next().expect("one flag per row"));
        for column in &mut self.cells {
            let mut builder = LargeStringBuilder::new();
            for (row, &keep) in keep.iter().enumerate() {
                if keep {
                    builder.append_value(column.value(row));
                }
            }
            *column = builder.finish();
        }
        self.rows_dropped = self.rows_read - self.positions.len();
    }

    /// The file name as given.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// "line 14" for CSV, "row 13" for Parquet.
    pub fn place(&self, row: usize) -> String {
        match self.format {
            FileFormat::Csv => format!("line {}", self.positions[row]),
            FileFormat::Parquet => format!("row {}", self.positions[row]),
        }
    }

    /// Parses every cell of `column` (which must be one of those read); a missing cell or one
    /// that `parse` rejects is an error naming its place.
    fn parse<T>(
        &self,
        column: &str,
        expected: &str,
        parse: impl Fn(&str) -> Option<T>,
    ) -> anyhow::Result<Vec<T>> {
        let index = self
            .names
            .iter()
            .position(|n| n == column)
            .unwrap_or_else(|| panic!("column `{column}` was not asked for when reading"));
        self.cells[index]
            .iter()
            .enumerate()
            .map(|(row, value)| {
                let Some(text) = value else {
                    bail!(
                        "{} {}, column `{column}`: the value is missing\nhint: fill it in, or pass \
                         --drop-missing to leave out (and count) rows with a missing value in a used column",
                        self.file,
                        self.place(row)
                    );
                };
                parse(text).ok_or_else(|| {
                    anyhow!(
                        "{} {}, column `{column}`: expected {expected}, found `{text}`",
                        self.file,
                        self.place(row)
                    )
                })
            })
            .collect()
    }

    /// Text labels (group names, period names), missing cells being errors.
    pub fn labels(&self, column: &str) -> anyhow::Result<Vec<String>> {
        self.parse(column, "a label", |text| Some(text.to_string()))
    }

    /// Finite numbers.
    pub fn numbers(&self, column: &str) -> anyhow::Result<Vec<f64>> {
        self.parse(column, "a number", finite)
    }

    /// Finite numbers of 0 or more (person-time, standard population).
    pub fn non_negative_numbers(&self, column: &str) -> anyhow::Result<Vec<f64>> {
        self.parse(column, "a number, 0 or more", |text| {
            finite(text).filter(|x| *x >= 0.0)
        })
    }

    /// Finite numbers greater than 0 (a period's exposure, a unit's denominator).
    pub fn positive_numbers(&self, column: &str) -> anyhow::Result<Vec<f64>> {
        self.parse(column, "a number greater than 0", |text| {
            finite(text).filter(|x| *x > 0.0)
        })
    }

    /// Whole numbers of 0 or more ("12", or "12.0" as a Parquet float column is written).
    pub fn counts(&self, column: &str) -> anyhow::Result<Vec<u64>> {
        self.parse(column, "a whole number, 0 or more (a count)", count)
    }

    /// 0/1 or true/false (any case).
    pub fn flags(&self, column: &str) -> anyhow::Result<Vec<bool>> {
        self.parse(column, "0 or 1 (or false or true)", flag)
    }
}

fn finite(text: &str) -> Option<f64> {
    text.parse::<f64>().ok().filter(|x| x.is_finite())
}

fn count(text: &str) -> Option<u64> {
    if let Ok(n) = text.parse::<u64>() {
        return Some(n);
    }
    // Up to 2^53 a float holds every whole number exactly.
    finite(text)
        .filter(|x| *x >= 0.0 && x.fract() == 0.0 && *x <= 9_007_199_254_740_992.0)
        .map(|x| x as u64)
}

fn flag(text: &str) -> Option<bool> {
    match text.to_ascii_lowercase().as_str() {
        "true" => Some(true),
        "false" => Some(false),
        _ => match finite(text) {
            Some(0.0) => Some(false),
            Some(1.0) => Some(true),
            _ => None,
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_parse_as_documented() {
        assert_eq!(count("12"), Some(12));
        assert_eq!(count("12.0"), Some(12));
        for bad in ["-1", "2.5", "abc", "inf"] {
            assert_eq!(count(bad), None, "{bad}");
        }
        assert_eq!(flag("TRUE"), Some(true));
        assert_eq!(flag("0"), Some(false));
        assert_eq!(flag("1.0"), Some(true));
        assert_eq!(flag("2"), None);
        assert_eq!(finite("NaN"), None);
        assert_eq!(cell("  NA "), None);
        assert_eq!(cell(" 3 "), Some("3"));
    }
}
