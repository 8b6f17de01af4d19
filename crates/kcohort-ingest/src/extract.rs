//! An extract folder: which files are contract tables, which are ignored, and their hashes.

use crate::IngestError;
use kcohort_model::TableName;
use kcohort_model::manifest::InputFile;
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FileFormat {
    Csv,
    Parquet,
}

impl FileFormat {
    pub fn as_str(self) -> &'static str {
        match self {
            FileFormat::Csv => "csv",
            FileFormat::Parquet => "parquet",
        }
    }
}

/// One contract table found in the extract.
#[derive(Debug, Clone)]
pub struct TableFile {
    pub table: TableName,
    pub path: PathBuf,
    pub format: FileFormat,
    /// File name as shown in messages and stored in the rejects table.
    pub file_name: String,
}

#[derive(Debug, Clone)]
pub struct Extract {
    pub dir: PathBuf,
    /// Contract tables present, in ingest order.
    pub tables: Vec<TableFile>,
    /// Other entries of the folder, sorted; listed, never read.
    pub ignored: Vec<String>,
}

impl Extract {
    /// Find the contract tables in `dir` (`<table>.csv` or `<table>.parquet`).
    pub fn discover(dir: &Path) -> Result<Extract, IngestError> {
        if !dir.is_dir() {
            return Err(IngestError::NotAFolder {
                dir: dir.to_path_buf(),
            });
        }
        let entries = std::fs::read_dir(dir).map_err(|e| IngestError::io(dir, e))?;
        let mut found: Vec<TableFile> = Vec::new();
        let mut ignored = Vec::new();
        for entry in entries {
            let entry = entry.map_err(|e| IngestError::io(dir, e))?;
            let name = entry.file_name().to_string_lossy().into_owned();
            let path = entry.path();
            let table_file = path.is_file().then(|| classify(&name)).flatten();
            match table_file {
                Some((table, format)) => {
                    if found.iter().any(|f| f.table == table) {
                        return Err(IngestError::AmbiguousTable {
                            table: table.as_str(),
                        });
                    }
                    found.push(TableFile {
                        table,
                        path,
                        format,
                        file_name: name,
                    });
                }
                None => ignored.push(name),
            }
        }
        for table in TableName::ALL {
            if table.is_required() && !found.iter().any(|f| f.table == table) {
                return Err(IngestError::MissingTable {
                    dir: dir.to_path_buf(),
                    table: table.as_str(),
                });
            }
        }
        found.sort_by_key(|f| f.table);
        ignored.sort();
        Ok(Extract {
            dir: dir.to_path_buf(),
            tables: found,
            ignored,
        })
    }

    /// Last path component of the folder (no absolute paths go into the manifest).
    pub fn name(&self) -> String {
        self.dir
            .canonicalize()
            .ok()
            .and_then(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
            .unwrap_or_else(|| self.dir.display().to_string())
    }

    /// SHA-256 of every table file, in ingest order.
    pub fn hash_inputs(&self) -> Result<Vec<InputFile>, IngestError> {
        self.tables
            .iter()
            .map(|f| {
                let (bytes, sha256) = sha256_file(&f.path)?;
                Ok(InputFile {
                    file: f.file_name.clone(),
                    table: f.table.as_str().to_string(),
                    format: f.format.as_str().to_string(),
                    bytes,
                    sha256,
                })
            })
            .collect()
    }
}

fn classify(name: &str) -> Option<(TableName, FileFormat)> {
    let (stem, ext) = name.rsplit_once('.')?;
    let format = match ext {
        "csv" => FileFormat::Csv,
        "parquet" => FileFormat::Parquet,
        _ => return None,
    };
    Some((TableName::parse(stem)?, format))
}

/// Fingerprint of a set of inputs: SHA-256 over `name:sha256` lines, sorted by name.
pub fn fingerprint(inputs: &[InputFile]) -> String {
    let mut lines: Vec<String> = inputs
        .iter()
        .map(|i| format!("{}:{}\n", i.file, i.sha256))
        .collect();
    lines.sort();
    let mut h = Sha256::new();
    for l in lines {
        h.update(l.as_bytes());
    }
    kcohort_store::hex(&h.finalize())
}

/// Size and SHA-256 (lower-case hex, as `sha256sum` prints it) of a file.
pub fn sha256_file(path: &Path) -> Result<(u64, String), IngestError> {
    kcohort_store::sha256_file(path).map_err(|e| IngestError::io(path, e))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn classify_names() {
        assert_eq!(
            classify("lab_results.csv"),
            Some((TableName::LabResults, FileFormat::Csv))
        );
        assert_eq!(
            classify("patients.parquet"),
            Some((TableName::Patients, FileFormat::Parquet))
        );
        assert_eq!(classify("truth.json"), None);
        assert_eq!(classify("labs.csv"), None);
        assert_eq!(classify("Patients.csv"), None);
    }
}
