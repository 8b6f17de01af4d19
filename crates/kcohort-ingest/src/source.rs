//! Row sources: CSV and Parquet input files read as rows of byte fields, each with its line
//! number (CSV: the physical line the record starts on, header = line 1; Parquet: the row number,
//! first row = 1), mapped onto the contract's column order.

use crate::IngestError;
use crate::extract::{FileFormat, TableFile};
use arrow_array::{Array, RecordBatch, StringArray};
use csv::ByteRecord;
use kcohort_model::TableName;
use std::fs::File;
use std::io::{BufReader, Read};

/// Header facts of one input file.
#[derive(Debug, Clone, Default)]
pub struct FileFacts {
    pub had_bom: bool,
    pub ignored_columns: Vec<String>,
}

/// Reads the bytes of a CSV file, drops a leading UTF-8 BOM and counts CR LF line ends.
struct CountingReader<R> {
    inner: R,
    started: bool,
    had_bom: bool,
    last_was_cr: bool,
    crlf: u64,
    consumed: u64,
}

impl<R: Read> Read for CountingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        if !self.started {
            self.started = true;
            let mut head = [0u8; 3];
            let mut got = 0;
            while got < 3 {
                let n = self.inner.read(&mut head[got..])?;
                if n == 0 {
                    break;
                }
                got += n;
            }
            self.consumed += got as u64;
            let keep: &[u8] = if got == 3 && head == [0xEF, 0xBB, 0xBF] {
                self.had_bom = true;
                &[]
            } else {
                &head[..got]
            };
            if !keep.is_empty() {
                let n = keep.len().min(buf.len());
                buf[..n].copy_from_slice(&keep[..n]);
                // Buffers handed to us by the CSV reader are far larger than 3 bytes.
                debug_assert_eq!(n, keep.len());
                self.count(&buf[..n]);
                return Ok(n);
            }
        }
        let n = self.inner.read(buf)?;
        self.consumed += n as u64;
        self.count(&buf[..n]);
        Ok(n)
    }
}

impl<R> CountingReader<R> {
    fn count(&mut self, bytes: &[u8]) {
        for &b in bytes {
            if b == b'\n' && self.last_was_cr {
                self.crlf += 1;
            }
            self.last_was_cr = b == b'\r';
        }
    }
}

/// Maps file columns onto contract columns.
#[derive(Debug, Clone)]
pub struct ColumnMap {
    /// For each contract column, its index in the file (None: optional column absent).
    pub file_index: Vec<Option<usize>>,
    pub file_width: usize,
}

impl ColumnMap {
    /// Match a header against the contract (names trimmed, case-insensitive).
    pub fn from_header(
        table: TableName,
        file: &str,
        header: &[String],
    ) -> Result<(ColumnMap, Vec<String>), IngestError> {
        let norm: Vec<String> = header
            .iter()
            .map(|h| h.trim().to_ascii_lowercase())
            .collect();
        for (i, h) in norm.iter().enumerate() {
            if norm[..i].contains(h) {
                return Err(IngestError::DuplicateColumn {
                    file: file.to_string(),
                    column: h.clone(),
                });
            }
        }
        let columns = table.columns();
        let file_index: Vec<Option<usize>> = columns
            .iter()
            .map(|c| norm.iter().position(|h| h == c.name))
            .collect();
        let missing: Vec<String> = columns
            .iter()
            .zip(&file_index)
            .filter(|(c, i)| c.required && i.is_none())
            .map(|(c, _)| c.name.to_string())
            .collect();
        if !missing.is_empty() {
            return Err(IngestError::MissingColumns {
                file: file.to_string(),
                missing,
                found: header.iter().map(|h| h.trim().to_string()).collect(),
            });
        }
        let ignored = norm
            .iter()
            .zip(header)
            .filter(|(n, _)| !columns.iter().any(|c| c.name == n.as_str()))
            .map(|(_, h)| h.trim().to_string())
            .collect();
        Ok((
            ColumnMap {
                file_index,
                file_width: header.len(),
            },
            ignored,
        ))
    }
}

/// A source of rows from one input file.
pub enum RowSource {
    Csv(Box<CsvSource>),
    Parquet(Box<ParquetSource>),
}

pub struct CsvSource {
    reader: csv::Reader<CountingReader<BufReader<File>>>,
}

pub struct ParquetSource {
    batches: parquet::arrow::arrow_reader::ParquetRecordBatchReader,
    /// For each contract column, its index among the file's columns.
    column_positions: Vec<Option<usize>>,
    /// The contract columns of the current batch as text (None: column absent in the file).
    current: Vec<Option<StringArray>>,
    current_len: usize,
    pos: usize,
    row: u64,
    file: String,
}

impl RowSource {
    /// Open a file, read its header and map it onto the contract.
    pub fn open(file: &TableFile) -> Result<(RowSource, ColumnMap, FileFacts), IngestError> {
        match file.format {
            FileFormat::Csv => open_csv(file),
            FileFormat::Parquet => open_parquet(file),
        }
    }

    /// Read the next row into `record`; returns its line (or row) number, or None at the end.
    /// For Parquet input the record holds the contract columns in contract order.
    pub fn next_row(&mut self, record: &mut ByteRecord) -> Result<Option<u64>, IngestError> {
        match self {
            RowSource::Csv(s) => match s.reader.read_byte_record(record) {
                Ok(true) => Ok(Some(record.position().map_or(0, |p| p.line()))),
                Ok(false) => Ok(None),
                Err(e) => Err(IngestError::Csv {
                    file: String::new(),
                    message: e.to_string(),
                }),
            },
            RowSource::Parquet(s) => s.next_row(record),
        }
    }

    /// Bytes of the input consumed so far (for progress).
    pub fn bytes_read(&self) -> u64 {
        match self {
            RowSource::Csv(s) => s.reader.get_ref().consumed,
            RowSource::Parquet(s) => s.row,
        }
    }

    /// CR LF line count, known once the file is read to its end.
    pub fn crlf_lines(&self) -> u64 {
        match self {
            RowSource::Csv(s) => s.reader.get_ref().crlf,
            RowSource::Parquet(_) => 0,
        }
    }
}

fn open_csv(file: &TableFile) -> Result<(RowSource, ColumnMap, FileFacts), IngestError> {
    let f = File::open(&file.path).map_err(|e| IngestError::io(&file.path, e))?;
    if f.metadata()
        .map_err(|e| IngestError::io(&file.path, e))?
        .len()
        == 0
    {
        return Err(IngestError::EmptyFile {
            file: file.file_name.clone(),
        });
    }
    let counting = CountingReader {
        inner: BufReader::with_capacity(1 << 20, f),
        started: false,
        had_bom: false,
        last_was_cr: false,
        crlf: 0,
        consumed: 0,
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .buffer_capacity(1 << 20)
        .from_reader(counting);
    let header = reader
        .byte_headers()
        .map_err(|e| IngestError::Csv {
            file: file.file_name.clone(),
            message: e.to_string(),
        })?
        .clone();
    if header.is_empty() || (header.len() == 1 && header[0].is_empty()) {
        return Err(IngestError::EmptyFile {
            file: file.file_name.clone(),
        });
    }
    let names: Vec<String> = header
        .iter()
        .map(|h| std::str::from_utf8(h).map(str::to_string))
        .collect::<Result<_, _>>()
        .map_err(|_| IngestError::HeaderNotUtf8 {
            file: file.file_name.clone(),
        })?;
    let (map, ignored_columns) = ColumnMap::from_header(file.table, &file.file_name, &names)?;
    let facts = FileFacts {
        had_bom: reader.get_ref().had_bom,
        ignored_columns,
    };
    Ok((RowSource::Csv(Box::new(CsvSource { reader })), map, facts))
}

fn open_parquet(file: &TableFile) -> Result<(RowSource, ColumnMap, FileFacts), IngestError> {
    let bad = |e: String| IngestError::ParquetInput {
        file: file.file_name.clone(),
        message: e,
    };
    let f = File::open(&file.path).map_err(|e| IngestError::io(&file.path, e))?;
    let builder = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(f)
        .map_err(|e| bad(e.to_string()))?;
    let names: Vec<String> = builder
        .schema()
        .fields()
        .iter()
        .map(|f| f.name().clone())
        .collect();
    let (map, ignored_columns) = ColumnMap::from_header(file.table, &file.file_name, &names)?;
    let batches = builder
        .with_batch_size(8192)
        .build()
        .map_err(|e| bad(e.to_string()))?;
    let width = file.table.columns().len();
    let source = ParquetSource {
        batches,
        column_positions: map.file_index,
        current: Vec::new(),
        current_len: 0,
        pos: 0,
        row: 0,
        file: file.file_name.clone(),
    };
    // Parquet rows are handed on in contract order: the map becomes the identity.
    let identity = ColumnMap {
        file_index: (0..width).map(Some).collect(),
        file_width: width,
    };
    let facts = FileFacts {
        had_bom: false,
        ignored_columns,
    };
    Ok((RowSource::Parquet(Box::new(source)), identity, facts))
}

impl ParquetSource {
    fn load_batch(&mut self, batch: RecordBatch) -> Result<(), IngestError> {
        let mut current = Vec::with_capacity(self.column_positions.len());
        for pos in &self.column_positions {
            current.push(match pos {
                Some(i) => {
                    let column = batch.column(*i);
                    let text =
                        arrow_cast::cast(column, &arrow_schema::DataType::Utf8).map_err(|e| {
                            IngestError::ParquetInput {
                                file: self.file.clone(),
                                message: e.to_string(),
                            }
                        })?;
                    Some(
                        text.as_any()
                            .downcast_ref::<StringArray>()
                            .expect("cast to Utf8 gives strings")
                            .clone(),
                    )
                }
                None => None,
            });
        }
        self.current = current;
        self.current_len = batch.num_rows();
        self.pos = 0;
        Ok(())
    }

    fn next_row(&mut self, record: &mut ByteRecord) -> Result<Option<u64>, IngestError> {
        while self.pos >= self.current_len {
            match self.batches.next() {
                Some(Ok(batch)) => self.load_batch(batch)?,
                Some(Err(e)) => {
                    return Err(IngestError::ParquetInput {
                        file: self.file.clone(),
                        message: e.to_string(),
                    });
                }
                None => return Ok(None),
            }
        }
        record.clear();
        for column in &self.current {
            match column {
                Some(a) if !a.is_null(self.pos) => record.push_field(a.value(self.pos).as_bytes()),
                _ => record.push_field(b""),
            }
        }
        self.pos += 1;
        self.row += 1;
        Ok(Some(self.row))
    }
}
