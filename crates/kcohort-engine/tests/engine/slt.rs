//! Golden tests of the definitions: every `tests/slt/*.slt` file runs through the sqllogictest
//! crate against our own session and our own `derive`.
//!
//! Besides SQL, a statement may be one of these test commands (each a `statement ok` record):
//!
//! ```text
//! load lab_results (patient_id, result_id, collected_at, value, hemolysis_index)
//! p1 r1 2024-01-01T08:00 5.6 NULL
//! p1 r2 2024-01-01T09:00 4.8 NULL
//!
//! study
//! [episode]
//! rebound_hours = 12
//!
//! extract_end 2024-06-01T00:00
//! site_timezone Europe/Berlin
//! derive
//! reset
//! ```
//!
//! `load` adds rows to a table (columns left out take a default, see `store.rs`; values are
//! separated by spaces; `NULL` is null; times without a zone are UTC); `study` replaces the study
//! with a TOML snippet; `derive` writes the loaded tables as a Parquet store in a temporary
//! folder, runs `kcohort derive` on it, and registers the store with its derived tables in a new
//! session, where the following queries run; `reset` starts over with nothing loaded and the
//! default study. Patients are loaded into `patients` automatically from the other tables.

use crate::store::{batch, parse_time, write_store};
use datafusion::arrow::util::display::{ArrayFormatter, FormatOptions};
use datafusion::execution::context::SQLOptions;
use datafusion::prelude::SessionContext;
use kcohort_engine::{EngineOptions, derive_async, read_manifest, register_store, session};
use kcohort_model::TableName;
use kcohort_model::study::Study;
use sqllogictest::{DBOutput, DefaultColumnType};
use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

#[derive(Debug)]
pub struct SltError(String);

impl std::fmt::Display for SltError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for SltError {}

type Rows = Vec<BTreeMap<String, Option<String>>>;

pub struct KcohortSlt {
    runtime: tokio::runtime::Runtime,
    folder: tempfile::TempDir,
    tables: BTreeMap<TableName, Rows>,
    study: Study,
    extract_end: Option<i64>,
    site_timezone: String,
    ctx: Option<SessionContext>,
    derives: usize,
}

fn options() -> EngineOptions {
    EngineOptions {
        target_partitions: 2,
        ..EngineOptions::default()
    }
}

impl KcohortSlt {
    pub fn new() -> KcohortSlt {
        KcohortSlt {
            runtime: tokio::runtime::Builder::new_multi_thread()
                .worker_threads(2)
                .build()
                .unwrap(),
            folder: tempfile::tempdir().unwrap(),
            tables: BTreeMap::new(),
            study: Study::default(),
            extract_end: None,
            site_timezone: "UTC".into(),
            ctx: None,
            derives: 0,
        }
    }

    fn load(&mut self, text: &str) -> Result<(), String> {
        let mut lines = text.lines();
        let header = lines.next().unwrap_or_default();
        let rest = header.trim_start_matches("load").trim();
        let (name, columns) = rest.split_once('(').ok_or("load <table> (<column>, ...)")?;
        let table = TableName::parse(name.trim()).ok_or(format!("no table `{}`", name.trim()))?;
        let columns: Vec<String> = columns
            .trim_end_matches(')')
            .split(',')
            .map(|c| c.trim().to_string())
            .collect();
        let rows = self.tables.entry(table).or_default();
        for line in lines.filter(|l| !l.trim().is_empty()) {
            let values: Vec<&str> = line.split_whitespace().collect();
            if values.len() != columns.len() {
                return Err(format!(
                    "`{line}`: {} values for {} columns",
                    values.len(),
                    columns.len()
                ));
            }
            rows.push(
                columns
                    .iter()
                    .zip(values)
                    .map(|(c, v)| (c.clone(), Some(v.to_string())))
                    .collect(),
            );
        }
        Ok(())
    }

    fn derive(&mut self) -> Result<(), String> {
        // Every patient named anywhere is a patient.
        let mut patients = BTreeSet::new();
        for rows in self.tables.values() {
            for row in rows {
                if let Some(Some(p)) = row.get("patient_id") {
                    patients.insert(p.clone());
                }
            }
        }
        let mut tables = self.tables.clone();
        let listed = tables.entry(TableName::Patients).or_default();
        for p in patients {
            if !listed
                .iter()
                .any(|r| r.get("patient_id") == Some(&Some(p.clone())))
            {
                listed.push(BTreeMap::from([("patient_id".to_string(), Some(p))]));
            }
        }
        let mut latest = i64::MIN;
        let mut batches = Vec::new();
        for (table, rows) in &tables {
            let b = batch(*table, rows)?;
            for row in rows {
                for (column, value) in row {
                    if column.ends_with("_at")
                        && let Some(v) = value.as_deref().filter(|v| *v != "NULL")
                    {
                        latest = latest.max(parse_time(v)?);
                    }
                }
            }
            batches.push((*table, b));
        }
        self.derives += 1;
        let root: PathBuf = self.folder.path().join(format!("store{}", self.derives));
        std::fs::create_dir_all(&root).map_err(|e| e.to_string())?;
        let extract_end = self.extract_end.unwrap_or(latest.max(0));
        write_store(&root, &batches, extract_end, &self.site_timezone);
        let study = self.study.clone();
        let ctx = self.runtime.block_on(async {
            derive_async(&root, &study, &options())
                .await
                .map_err(|e| format!("{e}"))?;
            let manifest = read_manifest(&root).map_err(|e| e.to_string())?;
            let ctx = session(&options()).map_err(|e| e.to_string())?;
            register_store(&ctx, &root, &manifest).map_err(|e| e.to_string())?;
            Ok::<_, String>(ctx)
        })?;
        self.ctx = Some(ctx);
        Ok(())
    }

    fn query(&mut self, sql: &str) -> Result<DBOutput<DefaultColumnType>, String> {
        let ctx = self.ctx.as_ref().ok_or("run `derive` before queries")?;
        let result = self.runtime.block_on(async {
            // Queries in .slt files only read.
            let read_only = SQLOptions::new()
                .with_allow_ddl(false)
                .with_allow_dml(false)
                .with_allow_statements(false);
            let frame = ctx.sql_with_options(sql, read_only).await?;
            let n_columns = frame.schema().fields().len();
            Ok::<_, datafusion::error::DataFusionError>((n_columns, frame.collect().await?))
        });
        let (n_columns, batches) = result.map_err(|e| e.to_string())?;
        if n_columns == 0 {
            return Ok(DBOutput::StatementComplete(0));
        }
        let options = FormatOptions::default().with_null("NULL");
        let mut rows = Vec::new();
        for b in &batches {
            let formatters = b
                .columns()
                .iter()
                .map(|c| ArrayFormatter::try_new(c.as_ref(), &options))
                .collect::<Result<Vec<_>, _>>()
                .map_err(|e| e.to_string())?;
            for i in 0..b.num_rows() {
                rows.push(formatters.iter().map(|f| f.value(i).to_string()).collect());
            }
        }
        Ok(DBOutput::Rows {
            types: vec![DefaultColumnType::Any; n_columns],
            rows,
        })
    }
}

impl sqllogictest::DB for KcohortSlt {
    type Error = SltError;
    type ColumnType = DefaultColumnType;

    fn run(&mut self, sql: &str) -> Result<DBOutput<Self::ColumnType>, Self::Error> {
        let trimmed = sql.trim();
        let first = trimmed.split_whitespace().next().unwrap_or_default();
        let result = match first {
            "load" => self.load(trimmed).map(|_| DBOutput::StatementComplete(0)),
            "study" => {
                let text = trimmed.trim_start_matches("study");
                Study::from_toml(text)
                    .map(|s| {
                        self.study = s;
                        DBOutput::StatementComplete(0)
                    })
                    .map_err(|e| e.to_string())
            }
            "extract_end" => parse_time(trimmed[first.len()..].trim()).map(|t| {
                self.extract_end = Some(t);
                DBOutput::StatementComplete(0)
            }),
            "site_timezone" => {
                self.site_timezone = trimmed[first.len()..].trim().to_string();
                Ok(DBOutput::StatementComplete(0))
            }
            "derive" => self.derive().map(|_| DBOutput::StatementComplete(0)),
            "reset" => {
                self.tables.clear();
                self.study = Study::default();
                self.extract_end = None;
                self.site_timezone = "UTC".into();
                self.ctx = None;
                Ok(DBOutput::StatementComplete(0))
            }
            _ => self.query(trimmed),
        };
        result.map_err(SltError)
    }

    fn engine_name(&self) -> &str {
        "kcohort"
    }
}

/// Run every `.slt` file; report all failures at once.
#[test]
fn golden_slt_files() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/slt");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "slt"))
        // KCOHORT_SLT=name runs only the files whose name contains it (while iterating).
        .filter(|p| {
            std::env::var("KCOHORT_SLT")
                .map_or(true, |only| p.to_string_lossy().contains(only.as_str()))
        })
        .collect();
    files.sort();
    assert!(!files.is_empty(), "no .slt files in {}", dir.display());
    let mut failures = Vec::new();
    for file in &files {
        let mut runner = sqllogictest::Runner::new(|| async { Ok(KcohortSlt::new()) });
        if let Err(e) = runner.run_file(file) {
            failures.push(format!("{}\n{}", file.display(), e.display(false)));
        }
    }
    assert!(
        failures.is_empty(),
        "{} slt file(s) failed:\n{}",
        failures.len(),
        failures.join("\n")
    );
}
