//! The rejects table being written by one ingest: one row per rejected input row.

use crate::IngestError;
use crate::parquet_out::{PartWriter, WrittenPart};
use crate::row_check::Reject;
use arrow_array::builder::{StringBuilder, UInt32Builder, UInt64Builder};
use arrow_array::{ArrayRef, RecordBatch};
use kcohort_model::store_schema::rejects_schema;
use std::path::Path;
use std::sync::Arc;

const BATCH_ROWS: usize = 8192;

pub struct RejectsWriter {
    ingest_seq: u32,
    seq: UInt32Builder,
    table: StringBuilder,
    file: StringBuilder,
    line: UInt64Builder,
    column: StringBuilder,
    reason: StringBuilder,
    message: StringBuilder,
    value: StringBuilder,
    pending: usize,
    out: PartWriter,
}

impl RejectsWriter {
    pub fn create(
        root: &Path,
        relative: &str,
        ingest_seq: u32,
    ) -> Result<RejectsWriter, IngestError> {
        Ok(RejectsWriter {
            ingest_seq,
            seq: UInt32Builder::new(),
            table: StringBuilder::new(),
            file: StringBuilder::new(),
            line: UInt64Builder::new(),
            column: StringBuilder::new(),
            reason: StringBuilder::new(),
            message: StringBuilder::new(),
            value: StringBuilder::new(),
            pending: 0,
            out: PartWriter::create(root, relative, rejects_schema())?,
        })
    }

    pub fn push(
        &mut self,
        table: &str,
        file: &str,
        line: u64,
        reject: &Reject,
    ) -> Result<(), IngestError> {
        self.seq.append_value(self.ingest_seq);
        self.table.append_value(table);
        self.file.append_value(file);
        self.line.append_value(line);
        self.column.append_option(reject.column);
        self.reason.append_value(reject.reason.code());
        self.message.append_value(&reject.message);
        self.value.append_option(reject.value.as_deref());
        self.pending += 1;
        if self.pending >= BATCH_ROWS {
            self.flush()?;
        }
        Ok(())
    }

    fn flush(&mut self) -> Result<(), IngestError> {
        if self.pending == 0 {
            return Ok(());
        }
        let columns: Vec<ArrayRef> = vec![
            Arc::new(self.seq.finish()),
            Arc::new(self.table.finish()),
            Arc::new(self.file.finish()),
            Arc::new(self.line.finish()),
            Arc::new(self.column.finish()),
            Arc::new(self.reason.finish()),
            Arc::new(self.message.finish()),
            Arc::new(self.value.finish()),
        ];
        let batch = RecordBatch::try_new(rejects_schema(), columns)?;
        self.out.write(&batch)?;
        self.pending = 0;
        Ok(())
    }

    pub fn finish(mut self) -> Result<WrittenPart, IngestError> {
        self.flush()?;
        self.out.finish()
    }
}
