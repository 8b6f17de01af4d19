//! Tiny Parquet stores for tests: rows given as text per column, written with the stored schemas
//! into `tables/<table>/g000001-000.parquet` with a manifest, as ingest would leave them.

use datafusion::arrow::array::{
    ArrayRef, Float64Builder, Int32Builder, RecordBatch, StringBuilder, TimestampMicrosecondBuilder,
};
use datafusion::arrow::datatypes::{DataType, TimeUnit};
use datafusion::parquet::arrow::ArrowWriter;
use kcohort_model::manifest::{StoredFile, StoredTable};
use kcohort_model::store_layout::{MANIFEST_FILE, table_file};
use kcohort_model::store_schema::stored_schema;
use kcohort_model::{Manifest, TableName};
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Arc;

/// A time as the tests write it: `2024-01-01T08:00`, `2024-01-01T08:00:30`, optionally followed by
/// `Z` or `±HH:MM` (no zone = UTC). Returns UTC microseconds.
pub fn parse_time(text: &str) -> Result<i64, String> {
    let (body, zone) = match text.find(['Z', '+']).or_else(|| {
        // A `-` after the time part is an offset sign.
        text.get(11..).and_then(|t| t.find('-')).map(|i| i + 11)
    }) {
        Some(i) => (&text[..i], &text[i..]),
        None => (text, "Z"),
    };
    let body = if body.len() == 16 {
        format!("{body}:00")
    } else {
        body.to_string()
    };
    chrono::DateTime::parse_from_rfc3339(&format!("{body}{zone}"))
        .map(|t| t.timestamp_micros())
        .map_err(|e| format!("time `{text}`: {e}"))
}

/// RFC 3339 text of UTC microseconds.
pub fn format_time(micros: i64) -> String {
    chrono::DateTime::from_timestamp_micros(micros)
        .expect("time in range")
        .to_rfc3339_opts(chrono::SecondsFormat::Secs, true)
}

/// Default text of a column a test leaves out.
fn default_value(
    table: TableName,
    column: &str,
    row: &BTreeMap<String, Option<String>>,
    i: usize,
) -> Option<String> {
    let v = |s: &str| Some(s.to_string());
    match (table, column) {
        (TableName::Patients, "sex") => v("U"),
        (TableName::Patients, "birth_year") => v("1960"),
        (TableName::Encounters, "class") => v("inpatient"),
        (TableName::Encounters, "unit") => v("W1"),
        (TableName::Encounters, "encounter_id") => Some(format!("e{i:04}")),
        (TableName::LabResults, "result_id") => Some(format!("r{i:04}")),
        (TableName::LabResults, "loinc") => v("2823-3"),
        (TableName::LabResults, "analyte") => v("potassium"),
        (TableName::LabResults, "unit") => v("mmol/L"),
        (TableName::LabResults, "reported_unit") => v("mmol/L"),
        (TableName::LabResults, "reported_value") => row.get("value").cloned().flatten().or(v("?")),
        (TableName::MedicationEvents, "event_id") => Some(format!("m{i:04}")),
        (TableName::MedicationEvents, "route") => v("IV"),
        (TableName::MedicationEvents, "kind") => v("administer"),
        _ => None,
    }
}

/// Build a batch of a stored table from rows of (column → text); `None` or `NULL` is null.
pub fn batch(
    table: TableName,
    rows: &[BTreeMap<String, Option<String>>],
) -> Result<RecordBatch, String> {
    let schema = stored_schema(table);
    let mut columns: Vec<ArrayRef> = Vec::new();
    for field in schema.fields() {
        let name = field.name().as_str();
        let texts: Vec<Option<String>> = rows
            .iter()
            .enumerate()
            .map(|(i, row)| match row.get(name) {
                Some(Some(t)) if t == "NULL" => None,
                Some(t) => t.clone(),
                None => default_value(table, name, row, i),
            })
            .collect();
        if !field.is_nullable() && texts.iter().any(Option::is_none) {
            return Err(format!("{table}.{name} needs a value in every row"));
        }
        let array: ArrayRef = match field.data_type() {
            DataType::Utf8 => {
                let mut b = StringBuilder::new();
                texts.iter().for_each(|t| b.append_option(t.as_deref()));
                Arc::new(b.finish())
            }
            DataType::Int32 => {
                let mut b = Int32Builder::new();
                for t in &texts {
                    b.append_option(
                        t.as_deref()
                            .map(|s| s.parse().map_err(|e| format!("{name} `{s}`: {e}")))
                            .transpose()?,
                    );
                }
                Arc::new(b.finish())
            }
            DataType::Float64 => {
                let mut b = Float64Builder::new();
                for t in &texts {
                    b.append_option(
                        t.as_deref()
                            .map(|s| s.parse().map_err(|e| format!("{name} `{s}`: {e}")))
                            .transpose()?,
                    );
                }
                Arc::new(b.finish())
            }
            DataType::Timestamp(TimeUnit::Microsecond, Some(_)) => {
                let mut b = TimestampMicrosecondBuilder::new().with_timezone("UTC");
                for t in &texts {
                    b.append_option(t.as_deref().map(parse_time).transpose()?);
                }
                Arc::new(b.finish())
            }
            other => return Err(format!("{name}: no test conversion for {other}")),
        };
        columns.push(array);
    }
    RecordBatch::try_new(schema, columns).map_err(|e| e.to_string())
}

fn write_parquet(path: &Path, batch: &RecordBatch) -> StoredFile {
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    let file = std::fs::File::create(path).unwrap();
    let mut writer = ArrowWriter::try_new(file, batch.schema(), None).unwrap();
    writer.write(batch).unwrap();
    writer.close().unwrap();
    let bytes = std::fs::read(path).unwrap();
    StoredFile {
        path: String::new(),
        rows: batch.num_rows() as u64,
        bytes: bytes.len() as u64,
        sha256: Sha256::digest(&bytes)
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect(),
    }
}

/// Write a store holding these batches (one file per table; tables not given have no files)
/// and its manifest.
pub fn write_store(
    root: &Path,
    batches: &[(TableName, RecordBatch)],
    extract_end_micros: i64,
    site_timezone: &str,
) {
    let mut tables = BTreeMap::new();
    for table in TableName::ALL {
        let mut stored = StoredTable::default();
        for (t, b) in batches.iter().filter(|(t, _)| *t == table) {
            let relative = table_file(*t, 1, stored.files.len());
            let mut file = write_parquet(&root.join(&relative), b);
            file.path = relative;
            stored.rows += file.rows;
            stored.files.push(file);
        }
        tables.insert(table.as_str().to_string(), stored);
    }
    let manifest = Manifest {
        format_version: kcohort_model::manifest::FORMAT_VERSION,
        tool_version: "test".into(),
        generation: 1,
        site_timezone: site_timezone.into(),
        extract_end: format_time(extract_end_micros),
        extract_end_source: "given".into(),
        ingests: Vec::new(),
        tables,
        rejects: StoredTable::default(),
        derived: BTreeMap::new(),
    };
    std::fs::write(root.join(MANIFEST_FILE), manifest.to_json()).unwrap();
}
