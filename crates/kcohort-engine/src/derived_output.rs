//! Writing one derived table: the query's batches stream into a Parquet file under a temporary
//! name while its SHA-256 is computed from the bytes as they go out; the file is then synced.
//! Strings are written as `Utf8`, like every stored table. Renaming it into place is the
//! commit's job (`derive`).
//!
//! This mirrors `kcohort-ingest`'s `parquet_out` (same compression and row groups); the engine
//! does not depend on ingest, see ARCHITECTURE.md.

use crate::EngineError;
use datafusion::arrow::array::{ArrayRef, RecordBatch};
use datafusion::arrow::compute::cast;
use datafusion::arrow::datatypes::{DataType, Field, Schema, SchemaRef};
use datafusion::execution::SendableRecordBatchStream;
use datafusion::parquet::arrow::ArrowWriter;
use datafusion::parquet::basic::{Compression, ZstdLevel};
use datafusion::parquet::file::properties::WriterProperties;
use futures::StreamExt;
use kcohort_store::HashingWriter;
use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Rows per row group (as ingest writes them).
const ROW_GROUP_ROWS: usize = 1 << 20;

/// A derived table written and synced under its temporary name.
#[derive(Debug, Clone)]
pub struct WrittenTable {
    pub temp_path: PathBuf,
    /// Final path relative to the store folder.
    pub relative: String,
    pub rows: u64,
    pub bytes: u64,
    pub sha256: String,
}

/// The stored form of a result schema: view strings become `Utf8`.
fn stored_schema(schema: &Schema) -> SchemaRef {
    let fields: Vec<Field> = schema
        .fields()
        .iter()
        .map(|f| match f.data_type() {
            DataType::Utf8View | DataType::LargeUtf8 => {
                f.as_ref().clone().with_data_type(DataType::Utf8)
            }
            _ => f.as_ref().clone(),
        })
        .collect();
    Arc::new(Schema::new(fields))
}

fn to_stored(batch: &RecordBatch, schema: &SchemaRef) -> Result<RecordBatch, String> {
    let columns = batch
        .columns()
        .iter()
        .zip(schema.fields())
        .map(|(c, f)| {
            if c.data_type() == f.data_type() {
                Ok(Arc::clone(c))
            } else {
                cast(c, f.data_type()).map_err(|e| e.to_string())
            }
        })
        .collect::<Result<Vec<ArrayRef>, String>>()?;
    RecordBatch::try_new(Arc::clone(schema), columns).map_err(|e| e.to_string())
}

/// Stream `stream` into `root/<temp name of relative>`, sync it, and return what was written.
/// `query_error` turns a DataFusion error of the running query into the caller's error.
pub async fn write_table(
    root: &Path,
    relative: &str,
    mut stream: SendableRecordBatchStream,
    query_error: &(dyn Fn(datafusion::error::DataFusionError) -> EngineError + Sync),
) -> Result<WrittenTable, EngineError> {
    let final_path = root.join(relative);
    let dir = final_path
        .parent()
        .expect("derived tables live in a folder");
    std::fs::create_dir_all(dir).map_err(|e| EngineError::io(dir, e))?;
    let temp_path = root.join(kcohort_model::store_layout::temp_name(relative));
    let fail = |message: String| EngineError::ParquetOutput {
        path: temp_path.clone(),
        message,
    };
    let file = File::create(&temp_path).map_err(|e| EngineError::io(&temp_path, e))?;
    let sink = HashingWriter::new(BufWriter::with_capacity(1 << 20, file));
    let schema = stored_schema(&stream.schema());
    let properties = WriterProperties::builder()
        .set_compression(Compression::ZSTD(
            ZstdLevel::try_new(1).expect("valid zstd level"),
        ))
        .set_max_row_group_row_count(Some(ROW_GROUP_ROWS))
        .build();
    let mut writer = ArrowWriter::try_new(sink, Arc::clone(&schema), Some(properties))
        .map_err(|e| fail(e.to_string()))?;
    let mut rows = 0u64;
    while let Some(batch) = stream.next().await {
        let batch = batch.map_err(query_error)?;
        rows += batch.num_rows() as u64;
        let stored = to_stored(&batch, &schema).map_err(&fail)?;
        writer.write(&stored).map_err(|e| fail(e.to_string()))?;
    }
    let (inner, bytes, sha256) = writer
        .into_inner()
        .map_err(|e| fail(e.to_string()))?
        .finish();
    let file = inner
        .into_inner()
        .map_err(|e| EngineError::io(&temp_path, e.into_error()))?;
    file.sync_all()
        .map_err(|e| EngineError::io(&temp_path, e))?;
    Ok(WrittenTable {
        temp_path: temp_path.clone(),
        relative: relative.to_string(),
        rows,
        bytes,
        sha256,
    })
}
