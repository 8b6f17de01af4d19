//! The one error type of the engine.

use std::path::PathBuf;

#[derive(Debug, thiserror::Error)]
pub enum EngineError {
    #[error("study: {0}")]
    Study(#[from] kcohort_model::study::StudyError),

    /// The store folder is not a readable kcohort store, or does not fit the study.
    #[error("store {path}: {message}")]
    Store { path: PathBuf, message: String },

    #[error("{path}: {source}")]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },

    /// A definition names a parameter the study does not provide, or a parameter cannot be
    /// written as a literal of its type.
    #[error("definition {definition}: {message}")]
    Parameter { definition: String, message: String },

    /// A definition file holds something other than `CREATE VIEW` statements and one final query.
    #[error("definition {definition}: {message}")]
    Definition { definition: String, message: String },

    /// A researcher's query (`kcohort sql`) was refused by the read-only gate, or failed to plan
    /// or run: the user's to fix.
    #[error("{message}")]
    UserQuery { message: String },

    /// DataFusion failed to plan or run a definition.
    #[error("definition {definition} failed: {source}")]
    Query {
        definition: String,
        #[source]
        source: Box<datafusion::error::DataFusionError>,
    },

    /// The memory pool was too small and the operation could not spill.
    #[error(
        "definition {definition} ran out of memory under the {} limit: {message}\n\
         hint: raise --memory-limit, or free disk space for spill files in {temp_dir}",
        human_bytes(*.limit_bytes)
    )]
    OutOfMemory {
        definition: String,
        limit_bytes: usize,
        temp_dir: String,
        message: String,
    },

    #[error("writing Parquet {path}: {message}")]
    ParquetOutput { path: PathBuf, message: String },

    /// Another write changed the store while derive ran; nothing was committed.
    #[error(
        "store {path} changed while derive ran (generation {expected} became {found}); run derive again"
    )]
    Concurrent {
        path: PathBuf,
        expected: u64,
        found: u64,
    },
}

/// `2 GiB`, `512 MiB`, `4 KiB`, `100 bytes`.
pub(crate) fn human_bytes(n: usize) -> String {
    for (unit, shift) in [("GiB", 30), ("MiB", 20), ("KiB", 10)] {
        if n >= 1 << shift {
            let value = n as f64 / (1u64 << shift) as f64;
            return if value.fract() == 0.0 {
                format!("{value} {unit}")
            } else {
                format!("{value:.1} {unit}")
            };
        }
    }
    format!("{n} bytes")
}

impl EngineError {
    pub(crate) fn io(path: impl Into<PathBuf>, source: std::io::Error) -> EngineError {
        EngineError::Io {
            path: path.into(),
            source,
        }
    }

    pub(crate) fn store(path: impl Into<PathBuf>, message: impl Into<String>) -> EngineError {
        EngineError::Store {
            path: path.into(),
            message: message.into(),
        }
    }
}
