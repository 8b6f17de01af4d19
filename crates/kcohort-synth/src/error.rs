//! The one error type of the crate. Each variant says what was expected, what was found and
//! where, so the caller can fix the setting or the output folder.

use std::path::PathBuf;

#[derive(Debug, thiserror::Error)]
pub enum SynthError {
    /// A configuration value is outside what the generator accepts.
    #[error("synth setting `{field}`: expected {expected}, found `{found}`")]
    InvalidConfig {
        field: &'static str,
        expected: String,
        found: String,
    },

    /// The output folder could not be created or is not a folder.
    #[error(
        "could not create the output folder {path}: {source}\nhint: choose a folder you can write to"
    )]
    CreateDir {
        path: PathBuf,
        source: std::io::Error,
    },

    /// An output file could not be written.
    #[error(
        "could not write {path}: {source}\nhint: check free disk space and permissions of the output folder"
    )]
    Write {
        path: PathBuf,
        source: std::io::Error,
    },

    /// truth.json could not be serialised (an internal bug).
    #[error("could not serialise truth.json (internal error, please report): {source}")]
    Truth { source: serde_json::Error },
}
