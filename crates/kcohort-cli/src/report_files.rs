//! Where a command's output folder goes, and writing the report's flat tables as CSV and
//! Parquet files.

use anyhow::Context;
use arrow_array::{ArrayRef, Float64Array, RecordBatch, StringArray};
use arrow_schema::{DataType, Field, Schema};
use kcohort_report::tables::{Table, Value};
use std::path::Path;
use std::sync::Arc;

/// The output folder, created: `out` when given, otherwise `default_name` beside the store.
pub fn output_folder(
    store: &Path,
    out: Option<&Path>,
    default_name: &str,
) -> anyhow::Result<std::path::PathBuf> {
    let dir = out.map_or_else(
        || store.parent().unwrap_or(Path::new(".")).join(default_name),
        Path::to_path_buf,
    );
    std::fs::create_dir_all(&dir).with_context(|| format!("cannot create {}", dir.display()))?;
    Ok(dir)
}

/// `<name>.csv` and `<name>.parquet` in `dir`.
pub fn write_table(dir: &Path, table: &Table) -> anyhow::Result<()> {
    let csv_path = dir.join(format!("{}.csv", table.name));
    let mut w = csv::Writer::from_path(&csv_path)
        .with_context(|| format!("cannot write {}", csv_path.display()))?;
    w.write_record(&table.columns)?;
    for row in &table.rows {
        w.write_record(row.iter().map(|v| match v {
            Value::Text(t) => t.clone(),
            Value::Number(Some(x)) => x.to_string(),
            Value::Number(None) => String::new(),
        }))?;
    }
    w.flush()?;

    let fields: Vec<Field> = table
        .columns
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let t = if table.is_number(i) {
                DataType::Float64
            } else {
                DataType::Utf8
            };
            Field::new(*c, t, true)
        })
        .collect();
    let schema = Arc::new(Schema::new(fields));
    let columns: Vec<ArrayRef> = (0..table.columns.len())
        .map(|i| -> ArrayRef {
            if table.is_number(i) {
                Arc::new(Float64Array::from_iter(table.rows.iter().map(
                    |r| match &r[i] {
                        Value::Number(x) => *x,
                        Value::Text(_) => None,
                    },
                )))
            } else {
                Arc::new(StringArray::from_iter(table.rows.iter().map(
                    |r| match &r[i] {
                        Value::Text(t) => Some(t.clone()),
                        Value::Number(x) => x.map(|v| v.to_string()),
                    },
                )))
            }
        })
        .collect();
    let batch = RecordBatch::try_new(schema.clone(), columns)?;
    let path = dir.join(format!("{}.parquet", table.name));
    let file =
        std::fs::File::create(&path).with_context(|| format!("cannot write {}", path.display()))?;
    let mut writer = parquet::arrow::ArrowWriter::try_new(file, schema, None)?;
    writer.write(&batch)?;
    writer.close()?;
    Ok(())
}
