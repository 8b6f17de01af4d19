//! Writing Arrow results for people and programs: a terminal table, CSV or JSON on stdout, or
//! a Parquet or CSV file.

use crate::command::sql::SqlFormat;
use anyhow::{Context, bail};
use arrow_array::RecordBatch;
use arrow_schema::SchemaRef;
use std::io::Write;
use std::path::Path;

pub fn write(
    schema: &SchemaRef,
    batches: &[RecordBatch],
    format: SqlFormat,
    out: Option<&Path>,
) -> anyhow::Result<()> {
    if let Some(path) = out {
        let file = std::fs::File::create(path)
            .with_context(|| format!("cannot create {}", path.display()))?;
        match path.extension().and_then(|e| e.to_str()) {
            Some("parquet") => {
                let mut w = parquet::arrow::ArrowWriter::try_new(file, schema.clone(), None)?;
                for b in batches {
                    w.write(b)?;
                }
                w.close()?;
            }
            Some("csv") => {
                let mut w = arrow_csv::Writer::new(file);
                for b in batches {
                    w.write(b)?;
                }
            }
            _ => bail!(
                "--out {}: give a .parquet or .csv file name",
                path.display()
            ),
        }
        eprintln!("wrote {}", path.display());
        return Ok(());
    }
    let stdout = std::io::stdout();
    let mut lock = stdout.lock();
    match format {
        SqlFormat::Table => {
            let text = arrow_cast::pretty::pretty_format_batches(batches)?;
            writeln!(lock, "{text}")?;
        }
        SqlFormat::Csv => {
            let mut w = arrow_csv::Writer::new(&mut lock);
            if batches.is_empty() {
                w.write(&RecordBatch::new_empty(schema.clone()))?;
            }
            for b in batches {
                w.write(b)?;
            }
        }
        SqlFormat::Json => {
            let mut w = arrow_json::ArrayWriter::new(&mut lock);
            for b in batches {
                w.write(b)?;
            }
            w.finish()?;
            writeln!(lock)?;
        }
    }
    Ok(())
}
