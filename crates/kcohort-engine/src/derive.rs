//! `kcohort derive`: run every definition over a store and commit the derived tables.
//!
//! The commit follows the store's protocol (`crates/kcohort-ingest/src/store.rs`): each derived
//! table is written under a temporary name and synced; then the files are renamed to their final
//! names and their folders synced; then the new manifest (generation + 1, `derived` replaced by
//! this run's tables) is written under a temporary name, synced, and renamed over
//! `manifest.json` (the one step that switches readers); then files under `derived/` that the
//! manifest no longer lists are removed. A failure before the manifest rename leaves the store
//! as it was.
//!
//! Final names are `derived/<table>/g<generation>-<fingerprint>.parquet`. The fingerprint is a
//! SHA-256 over the engine version, the store's input tables (each file's path, SHA-256 and
//! rows), its extract end and site time zone, the study (parsed, so comments and layout do not
//! matter) and the text of every definition. When every derived table in the manifest carries
//! the fingerprint of this run, derive does nothing.

use crate::EngineError;
use crate::definition::{DEFINITIONS, plan_definition};
use crate::derived_output::{WrittenTable, write_table};
use crate::parameter::{ParamValue, Parameters};
use crate::session::{EngineOptions, register_contract_tables, register_parquet_files, session};
use datafusion::error::DataFusionError;
use kcohort_model::Manifest;
use kcohort_model::manifest::{StoredFile, StoredTable};
use kcohort_model::site_zone::SiteZone;
use kcohort_model::store_layout::{DERIVED_DIR, MANIFEST_FILE, TEMP_PREFIX};
use kcohort_model::study::Study;
use kcohort_store::hex;
use sha2::{Digest, Sha256};
use std::collections::{BTreeMap, HashSet};
use std::fs::File;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Hex digits of the fingerprint kept in file names.
const FINGERPRINT_DIGITS: usize = 16;

/// One derived table of a run.
#[derive(Debug, Clone, PartialEq)]
pub struct DerivedTableReport {
    pub table: String,
    pub rows: u64,
    /// Wall time to plan, run and write it.
    pub seconds: f64,
    /// Path relative to the store.
    pub path: String,
}

/// What a derive run did.
#[derive(Debug, Clone, PartialEq)]
pub struct DeriveOutcome {
    /// True when the store already held this run's tables (nothing was written).
    pub unchanged: bool,
    /// The full fingerprint (64 hex digits); file names carry its first 16.
    pub fingerprint: String,
    /// The store's generation after the run.
    pub generation: u64,
    pub tables: Vec<DerivedTableReport>,
}

/// Read a store's manifest.
pub fn read_manifest(root: &Path) -> Result<Manifest, EngineError> {
    let path = root.join(MANIFEST_FILE);
    let text = std::fs::read_to_string(&path).map_err(|e| {
        if e.kind() == std::io::ErrorKind::NotFound {
            EngineError::store(
                root,
                "has no manifest.json: it is not a kcohort store (run `kcohort ingest` first)",
            )
        } else {
            EngineError::io(&path, e)
        }
    })?;
    Manifest::from_json(&text).map_err(|e| {
        EngineError::store(
            root,
            format!(
                "{MANIFEST_FILE} cannot be read ({e}); the store may be from another tool version"
            ),
        )
    })
}

/// The extract end of a manifest, in UTC microseconds.
pub fn extract_end_micros(root: &Path, manifest: &Manifest) -> Result<i64, EngineError> {
    chrono::DateTime::parse_from_rfc3339(&manifest.extract_end)
        .map(|t| t.timestamp_micros())
        .map_err(|e| {
            EngineError::store(
                root,
                format!(
                    "manifest extract_end `{}` is not an RFC 3339 time ({e})",
                    manifest.extract_end
                ),
            )
        })
}

/// The fingerprint of a derive run over this store with this study (see the module docs).
pub fn fingerprint(manifest: &Manifest, study: &Study) -> String {
    let mut h = Sha256::new();
    let mut line = |s: &str| {
        h.update(s.as_bytes());
        h.update(b"\n");
    };
    line(&format!("kcohort-engine {}", env!("CARGO_PKG_VERSION")));
    line(&format!("extract_end {}", manifest.extract_end));
    line(&format!("site_timezone {}", manifest.site_timezone));
    for (name, table) in &manifest.tables {
        line(&format!("table {name} rows {}", table.rows));
        for f in &table.files {
            line(&format!("file {} {} {}", f.path, f.sha256, f.rows));
        }
    }
    line(&format!("study {}", study.canonical_json()));
    for d in DEFINITIONS {
        line(&format!("definition {} {}", d.file, d.sql.len()));
        line(d.sql);
    }
    hex(&h.finalize())
}

fn derived_relative(table: &str, generation: u64, fingerprint: &str) -> String {
    format!(
        "{DERIVED_DIR}/{table}/g{generation:06}-{}.parquet",
        &fingerprint[..FINGERPRINT_DIGITS]
    )
}

/// True when the manifest lists exactly this run's tables, each one file carrying the
/// fingerprint, present with its recorded size.
fn up_to_date(root: &Path, manifest: &Manifest, fingerprint: &str) -> bool {
    let suffix = format!("-{}.parquet", &fingerprint[..FINGERPRINT_DIGITS]);
    manifest.derived.len() == DEFINITIONS.len()
        && DEFINITIONS.iter().all(|d| {
            manifest.derived.get(d.table).is_some_and(|t| {
                t.files.len() == 1
                    && t.files.iter().all(|f| {
                        f.path.ends_with(&suffix)
                            && std::fs::metadata(root.join(&f.path))
                                .is_ok_and(|m| m.len() == f.bytes)
                    })
            })
        })
}

/// Attribute a DataFusion error to a definition; a memory pool that ran out becomes
/// [`EngineError::OutOfMemory`] with a hint.
pub(crate) fn query_failure(
    definition: &str,
    options: &EngineOptions,
    error: DataFusionError,
) -> EngineError {
    if let DataFusionError::ResourcesExhausted(message) = error.find_root() {
        return EngineError::OutOfMemory {
            definition: definition.to_string(),
            limit_bytes: options.memory_limit_bytes,
            temp_dir: options.spill_dir_text(),
            message: message.clone(),
        };
    }
    EngineError::Query {
        definition: definition.to_string(),
        source: Box::new(error),
    }
}

/// Run every definition over the store at `root` and commit the derived tables (blocking; runs
/// its own async runtime with one worker per partition).
pub fn derive(
    root: &Path,
    study: &Study,
    options: &EngineOptions,
) -> Result<DeriveOutcome, EngineError> {
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(options.partitions())
        .enable_all()
        .build()
        .map_err(|e| EngineError::io(root, e))?;
    runtime.block_on(derive_async(root, study, options))
}

/// [`derive`] on the caller's async runtime.
pub async fn derive_async(
    root: &Path,
    study: &Study,
    options: &EngineOptions,
) -> Result<DeriveOutcome, EngineError> {
    study.validate()?;
    let manifest = read_manifest(root)?;
    if !study.site.timezone.is_empty() && study.site.timezone != manifest.site_timezone {
        return Err(EngineError::store(
            root,
            format!(
                "the study's site.timezone is `{}` but the store was ingested with `{}`; \
                 leave site.timezone empty or re-ingest with --site-timezone",
                study.site.timezone, manifest.site_timezone
            ),
        ));
    }
    let extract_end = extract_end_micros(root, &manifest)?;
    let fingerprint = fingerprint(&manifest, study);
    if up_to_date(root, &manifest, &fingerprint) {
        let tables = DEFINITIONS
            .iter()
            .map(|d| {
                let t = &manifest.derived[d.table];
                DerivedTableReport {
                    table: d.table.to_string(),
                    rows: t.rows,
                    seconds: 0.0,
                    path: t.files[0].path.clone(),
                }
            })
            .collect();
        return Ok(DeriveOutcome {
            unchanged: true,
            fingerprint,
            generation: manifest.generation,
            tables,
        });
    }

    let ctx = session(options)?;
    register_contract_tables(&ctx, root, &manifest)?;
    let mut parameters = Parameters::from_study(study, extract_end);
    let zone = SiteZone::parse(&manifest.site_timezone).map_err(|m| EngineError::store(root, m))?;
    let earliest = earliest_instant(&ctx, options)
        .await?
        .unwrap_or(extract_end);
    parameters.insert(
        "local_months",
        local_months_table(&zone, earliest, extract_end),
    );
    let generation = manifest.generation + 1;
    let mut written: Vec<WrittenTable> = Vec::new();
    let mut reports = Vec::new();
    let run = async {
        for d in DEFINITIONS {
            let started = Instant::now();
            let frame = plan_definition(&ctx, d, &parameters).await?;
            let on_error = |e| query_failure(d.file, options, e);
            let stream = frame.execute_stream().await.map_err(on_error)?;
            let relative = derived_relative(d.table, generation, &fingerprint);
            let table = write_table(root, &relative, stream, &on_error).await?;
            let schema = crate::session::parquet_schema(&table.temp_path)?;
            register_parquet_files(
                &ctx,
                d.table,
                std::slice::from_ref(&table.temp_path),
                schema,
            )?;
            reports.push(DerivedTableReport {
                table: d.table.to_string(),
                rows: table.rows,
                seconds: started.elapsed().as_secs_f64(),
                path: relative,
            });
            written.push(table);
        }
        Ok::<(), EngineError>(())
    };
    if let Err(e) = run.await {
        // Nothing was committed: remove this run's temporary files, so a failed derive leaves
        // the store exactly as it was.
        for d in DEFINITIONS {
            let relative = derived_relative(d.table, generation, &fingerprint);
            let _ =
                std::fs::remove_file(root.join(kcohort_model::store_layout::temp_name(&relative)));
        }
        return Err(e);
    }

    let mut next = manifest.clone();
    next.generation = generation;
    next.tool_version = env!("CARGO_PKG_VERSION").to_string();
    next.derived = written
        .iter()
        .zip(DEFINITIONS)
        .map(|(w, d)| {
            (
                d.table.to_string(),
                StoredTable {
                    rows: w.rows,
                    files: vec![StoredFile {
                        path: w.relative.clone(),
                        rows: w.rows,
                        bytes: w.bytes,
                        sha256: w.sha256.clone(),
                    }],
                },
            )
        })
        .collect::<BTreeMap<_, _>>();
    commit(root, &written, &manifest, &next)?;
    Ok(DeriveOutcome {
        unchanged: false,
        fingerprint,
        generation,
        tables: reports,
    })
}

/// The earliest admission or lab result of the store (UTC microseconds), if any.
async fn earliest_instant(
    ctx: &datafusion::prelude::SessionContext,
    options: &EngineOptions,
) -> Result<Option<i64>, EngineError> {
    let sql = "SELECT CAST(MIN(t) AS BIGINT) FROM (\
               SELECT MIN(admitted_at) AS t FROM encounters \
               UNION ALL SELECT MIN(collected_at) AS t FROM lab_results) AS firsts";
    let on_error = |e| query_failure("the calendar of local months", options, e);
    let batches = ctx
        .sql(sql)
        .await
        .map_err(on_error)?
        .collect()
        .await
        .map_err(on_error)?;
    Ok(batches.iter().find(|b| b.num_rows() > 0).and_then(|b| {
        use datafusion::arrow::array::{Array, AsArray};
        let column = b
            .column(0)
            .as_primitive::<datafusion::arrow::datatypes::Int64Type>();
        (!column.is_null(0)).then(|| column.value(0))
    }))
}

/// `$local_months`: one row per local calendar month (month, start_us, end_us) from the month
/// of `from_us` to that of `to_us`.
pub fn local_months_table(zone: &SiteZone, from_us: i64, to_us: i64) -> ParamValue {
    ParamValue::Table {
        columns: vec!["month", "start_us", "end_us"],
        rows: zone
            .local_months(from_us, to_us)
            .into_iter()
            .map(|(month, start, end)| {
                vec![
                    ParamValue::Codes(vec![month]),
                    ParamValue::Int(start),
                    ParamValue::Int(end),
                ]
            })
            .collect(),
    }
}

fn sync_dir(dir: &Path) -> Result<(), EngineError> {
    kcohort_store::sync_dir(dir).map_err(|e| EngineError::io(dir, e))
}

/// Make `written` and `next` the store (see the module docs). `previous` is the manifest the run
/// started from: if the store moved on meanwhile, nothing is committed.
fn commit(
    root: &Path,
    written: &[WrittenTable],
    previous: &Manifest,
    next: &Manifest,
) -> Result<(), EngineError> {
    let mut dirs: HashSet<PathBuf> = HashSet::new();
    for w in written {
        let target = root.join(&w.relative);
        std::fs::rename(&w.temp_path, &target).map_err(|e| EngineError::io(&target, e))?;
        dirs.insert(target.parent().expect("in a folder").to_path_buf());
    }
    for dir in &dirs {
        sync_dir(dir)?;
    }
    let current = read_manifest(root)?;
    if current.generation != previous.generation {
        return Err(EngineError::Concurrent {
            path: root.to_path_buf(),
            expected: previous.generation,
            found: current.generation,
        });
    }
    let temp = root.join(format!("{TEMP_PREFIX}{MANIFEST_FILE}"));
    std::fs::write(&temp, next.to_json()).map_err(|e| EngineError::io(&temp, e))?;
    File::open(&temp)
        .and_then(|f| f.sync_all())
        .map_err(|e| EngineError::io(&temp, e))?;
    let target = root.join(MANIFEST_FILE);
    std::fs::rename(&temp, &target).map_err(|e| EngineError::io(&target, e))?;
    sync_dir(root)?;
    remove_unlisted_derived(root, next)
}

/// Remove files under `derived/` that the manifest does not list (older runs, leftovers of
/// interrupted ones).
fn remove_unlisted_derived(root: &Path, manifest: &Manifest) -> Result<(), EngineError> {
    let listed: HashSet<PathBuf> = manifest.all_files().map(|f| root.join(&f.path)).collect();
    kcohort_store::remove_unlisted(root, &[DERIVED_DIR], &listed)
        .map_err(|(path, e)| EngineError::io(&path, e))?;
    Ok(())
}
