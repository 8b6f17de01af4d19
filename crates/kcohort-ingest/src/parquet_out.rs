//! Writing Parquet parts of the store: each part is written under a temporary name while its
//! SHA-256 is computed from the bytes as they go out, then synced to disk. Renaming it into place
//! is the store's job (see `store`).

use crate::IngestError;
use arrow_array::RecordBatch;
use arrow_schema::SchemaRef;
use kcohort_store::HashingWriter;
use parquet::arrow::ArrowWriter;
use parquet::basic::{Compression, ZstdLevel};
use parquet::file::properties::WriterProperties;
use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};
use std::sync::mpsc::{Receiver, SyncSender, sync_channel};
use std::thread::JoinHandle;

/// Rows per row group: large enough for good compression, small enough to bound writer memory.
const ROW_GROUP_ROWS: usize = 1 << 20;

/// A finished part, synced, still under its temporary name.
#[derive(Debug, Clone)]
pub struct WrittenPart {
    pub temp_path: PathBuf,
    /// Final path relative to the store folder.
    pub relative: String,
    pub rows: u64,
    pub bytes: u64,
    pub sha256: String,
}

type HashingFile = HashingWriter<BufWriter<File>>;

pub fn writer_properties() -> WriterProperties {
    WriterProperties::builder()
        .set_compression(Compression::ZSTD(
            ZstdLevel::try_new(1).expect("valid zstd level"),
        ))
        .set_max_row_group_row_count(Some(ROW_GROUP_ROWS))
        .build()
}

/// Writes one part on the calling thread.
pub struct PartWriter {
    temp_path: PathBuf,
    relative: String,
    writer: ArrowWriter<HashingFile>,
    rows: u64,
}

impl PartWriter {
    pub fn create(
        root: &Path,
        relative: &str,
        schema: SchemaRef,
    ) -> Result<PartWriter, IngestError> {
        let final_path = root.join(relative);
        let dir = final_path.parent().expect("parts live in a folder");
        std::fs::create_dir_all(dir).map_err(|e| IngestError::io(dir, e))?;
        let temp_path = root.join(kcohort_model::store_layout::temp_name(relative));
        let file = File::create(&temp_path).map_err(|e| IngestError::io(&temp_path, e))?;
        let sink = HashingWriter::new(BufWriter::with_capacity(1 << 20, file));
        let writer = ArrowWriter::try_new(sink, schema, Some(writer_properties()))?;
        Ok(PartWriter {
            temp_path,
            relative: relative.to_string(),
            writer,
            rows: 0,
        })
    }

    pub fn write(&mut self, batch: &RecordBatch) -> Result<(), IngestError> {
        self.rows += batch.num_rows() as u64;
        self.writer.write(batch)?;
        Ok(())
    }

    pub fn finish(self) -> Result<WrittenPart, IngestError> {
        // `into_inner` flushes the last row group and writes the footer.
        let sink = self.writer.into_inner()?;
        let (inner, bytes, sha256) = sink.finish();
        let file = inner
            .into_inner()
            .map_err(|e| IngestError::io(&self.temp_path, e.into_error()))?;
        file.sync_all()
            .map_err(|e| IngestError::io(&self.temp_path, e))?;
        Ok(WrittenPart {
            temp_path: self.temp_path,
            relative: self.relative,
            rows: self.rows,
            bytes,
            sha256,
        })
    }
}

/// Writes one part on a background thread, so encoding and compression overlap with parsing.
pub struct BackgroundPartWriter {
    sender: Option<SyncSender<RecordBatch>>,
    handle: Option<JoinHandle<Result<WrittenPart, IngestError>>>,
}

impl BackgroundPartWriter {
    pub fn create(
        root: &Path,
        relative: &str,
        schema: SchemaRef,
    ) -> Result<BackgroundPartWriter, IngestError> {
        let mut part = PartWriter::create(root, relative, schema)?;
        let (sender, receiver): (SyncSender<RecordBatch>, Receiver<RecordBatch>) = sync_channel(2);
        let handle = std::thread::Builder::new()
            .name("kcohort-parquet".into())
            .spawn(move || {
                for batch in receiver {
                    part.write(&batch)?;
                }
                part.finish()
            })
            .map_err(|e| {
                IngestError::ParquetOutput(format!("cannot start the writer thread: {e}"))
            })?;
        Ok(BackgroundPartWriter {
            sender: Some(sender),
            handle: Some(handle),
        })
    }

    pub fn write(&mut self, batch: RecordBatch) -> Result<(), IngestError> {
        let sent = self.sender.as_ref().expect("writer open").send(batch);
        if sent.is_err() {
            // The writer thread stopped early: its error says why.
            return Err(self
                .join()
                .err()
                .unwrap_or_else(|| IngestError::ParquetOutput("writer stopped".into())));
        }
        Ok(())
    }

    pub fn finish(mut self) -> Result<WrittenPart, IngestError> {
        self.join()
    }

    fn join(&mut self) -> Result<WrittenPart, IngestError> {
        drop(self.sender.take());
        match self.handle.take().expect("joined once").join() {
            Ok(result) => result,
            Err(_) => Err(IngestError::ParquetOutput(
                "the Parquet writer thread panicked (a bug)".into(),
            )),
        }
    }
}
