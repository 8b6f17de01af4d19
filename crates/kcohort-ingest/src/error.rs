//! Fatal ingest errors: problems with a whole file, the extract folder or the store, which stop
//! the ingest before the store changes. Problems with single rows are not errors but rejects.

use std::path::PathBuf;

#[derive(Debug, thiserror::Error)]
pub enum IngestError {
    #[error("{path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },

    #[error("extract folder {dir} does not exist or is not a folder")]
    NotAFolder { dir: PathBuf },

    #[error(
        "extract {dir} has no `{table}` table\nhint: expected a file named {table}.csv or {table}.parquet"
    )]
    MissingTable { dir: PathBuf, table: &'static str },

    #[error("extract has both {table}.csv and {table}.parquet\nhint: keep one of them")]
    AmbiguousTable { table: &'static str },

    #[error(
        "{file}: the file is empty\nhint: a table needs at least a header row naming its columns"
    )]
    EmptyFile { file: String },

    #[error(
        "{file}: missing required column(s) {}\nfound: {}\nhint: the header must name these columns (see docs/input-contract.md)",
        quote_list(missing),
        quote_list(found)
    )]
    MissingColumns {
        file: String,
        missing: Vec<String>,
        found: Vec<String>,
    },

    #[error("{file}: column `{column}` appears twice in the header\nhint: give each column once")]
    DuplicateColumn { file: String, column: String },

    #[error("{file}: the header row is not valid UTF-8\nhint: save the file as UTF-8")]
    HeaderNotUtf8 { file: String },

    #[error("{file}: {message}")]
    Csv { file: String, message: String },

    #[error("{file}: cannot read Parquet: {message}")]
    ParquetInput { file: String, message: String },

    #[error("{0}")]
    BadOption(String),

    #[error("store {dir}: {message}")]
    Store { dir: PathBuf, message: String },

    #[error("writing the store failed: {0}")]
    ParquetOutput(String),

    /// A failure injected by a test at a commit step.
    #[error("injected failure at commit step `{0}`")]
    Injected(&'static str),
}

fn quote_list(items: &[String]) -> String {
    items
        .iter()
        .map(|c| format!("`{c}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

impl IngestError {
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> IngestError {
        IngestError::Io {
            path: path.into(),
            source,
        }
    }

    pub fn store(dir: impl Into<PathBuf>, message: impl Into<String>) -> IngestError {
        IngestError::Store {
            dir: dir.into(),
            message: message.into(),
        }
    }
}

impl From<parquet::errors::ParquetError> for IngestError {
    fn from(e: parquet::errors::ParquetError) -> Self {
        IngestError::ParquetOutput(e.to_string())
    }
}

impl From<arrow_schema::ArrowError> for IngestError {
    fn from(e: arrow_schema::ArrowError) -> Self {
        IngestError::ParquetOutput(e.to_string())
    }
}
