//! The store folder and its commit protocol.
//!
//! A write never touches a file the current manifest lists. New parts are written under temporary
//! names and synced ([`crate::parquet_out`]); then, in order:
//! 1. `rename`: each part is renamed to its final name (names carry the new generation number, so
//!    they never collide with listed files) and the folders are synced;
//! 2. `manifest-temp`: the new manifest is written to `.tmp-manifest.json` and synced;
//! 3. `manifest-rename`: it is renamed over `manifest.json` and the folder is synced — the one
//!    atomic step that switches readers from the old store to the new one;
//! 4. `cleanup`: files no longer listed (older generations, leftovers of interrupted writes) are
//!    removed.
//!
//! A failure or kill before step 3 leaves the old manifest, and every file it lists, unchanged.

use crate::IngestError;
use crate::context::AcceptedIds;
use crate::extract::sha256_file;
use crate::parquet_out::{PartWriter, WrittenPart};
use arrow_array::cast::AsArray;
use arrow_array::{Array, BooleanArray};
use kcohort_model::Manifest;
use kcohort_model::manifest::StoredFile;
use kcohort_model::store_layout::{
    DERIVED_DIR, MANIFEST_FILE, REJECTS_DIR, TABLES_DIR, TEMP_PREFIX,
};
use std::collections::HashSet;
use std::fs::File;
use std::path::{Path, PathBuf};

/// The steps of a commit, for tests that inject a failure at each of them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CommitStep {
    /// All parts written and synced under temporary names.
    PartsWritten,
    /// Parts renamed to their final names.
    PartsRenamed,
    /// New manifest written under its temporary name.
    ManifestWritten,
    /// Manifest renamed into place (the store has switched); cleanup not yet done.
    ManifestRenamed,
}

impl CommitStep {
    pub const ALL: [CommitStep; 4] = [
        CommitStep::PartsWritten,
        CommitStep::PartsRenamed,
        CommitStep::ManifestWritten,
        CommitStep::ManifestRenamed,
    ];

    pub fn name(self) -> &'static str {
        match self {
            CommitStep::PartsWritten => "parts-written",
            CommitStep::PartsRenamed => "parts-renamed",
            CommitStep::ManifestWritten => "manifest-written",
            CommitStep::ManifestRenamed => "manifest-renamed",
        }
    }

    pub fn parse(name: &str) -> Option<CommitStep> {
        CommitStep::ALL.into_iter().find(|s| s.name() == name)
    }
}

/// Where to stop a commit on purpose: return an error, or abort the process as a kill would.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FailPoint {
    pub step: CommitStep,
    pub abort: bool,
}

fn reached(step: CommitStep, fail: Option<FailPoint>) -> Result<(), IngestError> {
    match fail {
        Some(f) if f.step == step && f.abort => std::process::abort(),
        Some(f) if f.step == step => Err(IngestError::Injected(step.name())),
        _ => Ok(()),
    }
}

/// Read the manifest of a store; None if the folder has none (a new store).
pub fn read_manifest(root: &Path) -> Result<Option<Manifest>, IngestError> {
    let path = root.join(MANIFEST_FILE);
    match std::fs::read_to_string(&path) {
        Ok(text) => Manifest::from_json(&text).map(Some).map_err(|e| {
            IngestError::store(root, format!("{MANIFEST_FILE} cannot be read ({e}); the store may be from another tool version"))
        }),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(IngestError::io(path, e)),
    }
}

fn sync_dir(dir: &Path) -> Result<(), IngestError> {
    File::open(dir)
        .and_then(|d| d.sync_all())
        .map_err(|e| IngestError::io(dir, e))
}

/// Make `parts` and `manifest` the store, following the protocol in the module docs.
pub fn commit(
    root: &Path,
    parts: &[WrittenPart],
    manifest: &Manifest,
    fail: Option<FailPoint>,
) -> Result<(), IngestError> {
    reached(CommitStep::PartsWritten, fail)?;
    let mut dirs: HashSet<PathBuf> = HashSet::new();
    for part in parts {
        let target = root.join(&part.relative);
        std::fs::rename(&part.temp_path, &target).map_err(|e| IngestError::io(&target, e))?;
        dirs.insert(target.parent().expect("in a folder").to_path_buf());
    }
    for dir in &dirs {
        sync_dir(dir)?;
    }
    reached(CommitStep::PartsRenamed, fail)?;

    let temp = root.join(format!("{TEMP_PREFIX}{MANIFEST_FILE}"));
    std::fs::write(&temp, manifest.to_json()).map_err(|e| IngestError::io(&temp, e))?;
    File::open(&temp)
        .and_then(|f| f.sync_all())
        .map_err(|e| IngestError::io(&temp, e))?;
    reached(CommitStep::ManifestWritten, fail)?;

    let target = root.join(MANIFEST_FILE);
    std::fs::rename(&temp, &target).map_err(|e| IngestError::io(&target, e))?;
    sync_dir(root)?;
    reached(CommitStep::ManifestRenamed, fail)?;

    remove_unlisted(root, manifest)
}

/// Remove files under the store's data folders that the manifest does not list.
pub fn remove_unlisted(root: &Path, manifest: &Manifest) -> Result<(), IngestError> {
    let listed: HashSet<PathBuf> = manifest.all_files().map(|f| root.join(&f.path)).collect();
    kcohort_store::remove_unlisted(root, &[TABLES_DIR, REJECTS_DIR, DERIVED_DIR], &listed)
        .map_err(|(path, e)| IngestError::io(path, e))?;
    let stray = root.join(format!("{TEMP_PREFIX}{MANIFEST_FILE}"));
    if stray.exists() {
        std::fs::remove_file(&stray).map_err(|e| IngestError::io(&stray, e))?;
    }
    Ok(())
}

/// A problem found by [`verify`].
#[derive(Debug, Clone, PartialEq)]
pub struct StoreProblem {
    pub path: String,
    pub problem: String,
}

/// Check every file the manifest lists: present, same size, same SHA-256, same row count.
pub fn verify(root: &Path) -> Result<Vec<StoreProblem>, IngestError> {
    let manifest = read_manifest(root)?.ok_or_else(|| {
        IngestError::store(root, "has no manifest.json: it is not a kcohort store")
    })?;
    let mut problems = Vec::new();
    for file in manifest.all_files() {
        let path = root.join(&file.path);
        if !path.is_file() {
            problems.push(StoreProblem {
                path: file.path.clone(),
                problem: "missing".into(),
            });
            continue;
        }
        let (bytes, sha) = sha256_file(&path)?;
        if bytes != file.bytes || sha != file.sha256 {
            problems.push(StoreProblem {
                path: file.path.clone(),
                problem: "content differs from the manifest".into(),
            });
            continue;
        }
        let rows = parquet_rows(&path)?;
        if rows != file.rows {
            problems.push(StoreProblem {
                path: file.path.clone(),
                problem: format!("has {rows} rows, the manifest says {}", file.rows),
            });
        }
    }
    Ok(problems)
}

/// Row count from a Parquet footer.
pub fn parquet_rows(path: &Path) -> Result<u64, IngestError> {
    let file = File::open(path).map_err(|e| IngestError::io(path, e))?;
    let reader = parquet::file::serialized_reader::SerializedFileReader::new(file)?;
    use parquet::file::reader::FileReader;
    Ok(reader.metadata().file_metadata().num_rows() as u64)
}

fn open_batches(
    path: &Path,
    columns: Option<&[&str]>,
) -> Result<parquet::arrow::arrow_reader::ParquetRecordBatchReader, IngestError> {
    let file = File::open(path).map_err(|e| IngestError::io(path, e))?;
    let builder = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(file)?;
    let builder = match columns {
        Some(names) => {
            let schema = builder.parquet_schema();
            let indices: Vec<usize> = names
                .iter()
                .filter_map(|n| schema.columns().iter().position(|c| c.name() == *n))
                .collect();
            let mask = parquet::arrow::ProjectionMask::roots(schema, indices);
            builder.with_projection(mask)
        }
        None => builder,
    };
    Ok(builder.with_batch_size(65_536).build()?)
}

/// Call `f` with every id in one column of a stored part.
pub fn for_each_id(
    root: &Path,
    file: &StoredFile,
    column: &str,
    mut f: impl FnMut(&str),
) -> Result<(), IngestError> {
    for batch in open_batches(&root.join(&file.path), Some(&[column]))? {
        let batch = batch?;
        let ids = batch.column(0).as_string::<i32>();
        for i in 0..ids.len() {
            f(ids.value(i));
        }
    }
    Ok(())
}

/// Copy a stored part into `out`, leaving out rows whose id is in `drop`. Returns rows left out.
pub fn copy_without(
    root: &Path,
    file: &StoredFile,
    column: &str,
    drop: &AcceptedIds,
    out: &mut PartWriter,
) -> Result<u64, IngestError> {
    let mut dropped = 0u64;
    for batch in open_batches(&root.join(&file.path), None)? {
        let batch = batch?;
        let ids = batch
            .column_by_name(column)
            .expect("id column in stored table")
            .as_string::<i32>();
        let keep: BooleanArray = (0..ids.len())
            .map(|i| Some(!drop.contains(ids.value(i))))
            .collect();
        dropped += keep.false_count() as u64;
        let kept = arrow_select_filter(&batch, &keep)?;
        out.write(&kept)?;
    }
    Ok(dropped)
}

fn arrow_select_filter(
    batch: &arrow_array::RecordBatch,
    keep: &BooleanArray,
) -> Result<arrow_array::RecordBatch, IngestError> {
    Ok(arrow_select::filter::filter_record_batch(batch, keep)?)
}
