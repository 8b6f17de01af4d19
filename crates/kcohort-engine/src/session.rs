//! The DataFusion session every definition runs in, and the store's tables registered in it.
//!
//! One function, [`session`], builds it: the UDF list of [`crate::udf::udfs`], a fair memory pool
//! with a limit that spills to disk instead of failing where an operator can spill, and
//! `target_partitions` = cores. Tables are only ever Parquet listing tables over files the
//! manifest lists ([`register_store`]), never in-memory tables, so a distributed executor could
//! read the same files.

use crate::EngineError;
use datafusion::arrow::datatypes::{DataType, Field, Schema, SchemaRef};
use datafusion::datasource::file_format::parquet::ParquetFormat;
use datafusion::datasource::listing::{
    ListingOptions, ListingTable, ListingTableConfig, ListingTableUrl,
};
use datafusion::execution::memory_pool::FairSpillPool;
use datafusion::execution::runtime_env::RuntimeEnvBuilder;
use datafusion::prelude::{SessionConfig, SessionContext};
use kcohort_model::store_schema::stored_schema;
use kcohort_model::{Manifest, TableName};
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// How the session may use the machine. None of it changes results.
#[derive(Debug, Clone, PartialEq)]
pub struct EngineOptions {
    /// Memory pool limit in bytes; operators that can spill (sorts, aggregations, joins) spill to
    /// disk beyond it, others fail with an error that says to raise it.
    pub memory_limit_bytes: usize,
    /// Parallel partitions; 0 = the number of cores.
    pub target_partitions: usize,
    /// Folder for spill files; `None` = the system's temporary folder.
    pub spill_dir: Option<PathBuf>,
}

/// Default memory pool limit: 2 GiB.
pub const DEFAULT_MEMORY_LIMIT_BYTES: usize = 2 << 30;

impl Default for EngineOptions {
    fn default() -> Self {
        EngineOptions {
            memory_limit_bytes: DEFAULT_MEMORY_LIMIT_BYTES,
            target_partitions: 0,
            spill_dir: None,
        }
    }
}

impl EngineOptions {
    /// The partition count the session will use.
    pub fn partitions(&self) -> usize {
        if self.target_partitions > 0 {
            self.target_partitions
        } else {
            std::thread::available_parallelism().map_or(1, |n| n.get())
        }
    }

    pub(crate) fn spill_dir_text(&self) -> String {
        self.spill_dir.as_ref().map_or_else(
            || "the system's temporary folder".to_string(),
            |d| d.display().to_string(),
        )
    }
}

/// Build the session: configuration, memory pool with spilling, and every UDF.
pub fn session(options: &EngineOptions) -> Result<SessionContext, EngineError> {
    let config = SessionConfig::new()
        .with_target_partitions(options.partitions())
        .with_information_schema(false);
    let mut runtime = RuntimeEnvBuilder::new()
        .with_memory_pool(Arc::new(FairSpillPool::new(options.memory_limit_bytes)));
    if let Some(dir) = &options.spill_dir {
        runtime = runtime.with_temp_file_path(dir);
    }
    let runtime = runtime.build_arc().map_err(|e| EngineError::Query {
        definition: "session".into(),
        source: Box::new(e),
    })?;
    let ctx = SessionContext::new_with_config_rt(config, runtime);
    for f in crate::udf::udfs() {
        ctx.register_udf(f);
    }
    for f in crate::udf::udwfs() {
        ctx.register_udwf(f);
    }
    Ok(ctx)
}

/// The schema a stored table has in the session: the stored schema with strings read as
/// `Utf8View` (DataFusion's default for Parquet strings).
pub fn session_schema(schema: &Schema) -> SchemaRef {
    let fields: Vec<Field> = schema
        .fields()
        .iter()
        .map(|f| match f.data_type() {
            DataType::Utf8 | DataType::LargeUtf8 => {
                f.as_ref().clone().with_data_type(DataType::Utf8View)
            }
            _ => f.as_ref().clone(),
        })
        .collect();
    Arc::new(Schema::new(fields))
}

/// Register a table over exactly these Parquet files (which may be none: an empty table).
pub fn register_parquet_files(
    ctx: &SessionContext,
    name: &str,
    files: &[PathBuf],
    schema: SchemaRef,
) -> Result<(), EngineError> {
    let fail = |e: datafusion::error::DataFusionError| EngineError::Query {
        definition: format!("registering table {name}"),
        source: Box::new(e),
    };
    let urls = files
        .iter()
        .map(|f| {
            ListingTableUrl::parse(
                f.to_str()
                    .ok_or_else(|| EngineError::store(f, "the path is not valid UTF-8"))?,
            )
            .map_err(fail)
        })
        .collect::<Result<Vec<_>, EngineError>>()?;
    let options =
        ListingOptions::new(Arc::new(ParquetFormat::default())).with_file_extension(".parquet");
    // Options are set through the field: `with_listing_options` debug-asserts that there are
    // paths, and an empty table (no files) is legitimate here.
    let mut config = ListingTableConfig::new_with_multi_paths(urls);
    config.options = Some(options);
    let config = config.with_schema(session_schema(&schema));
    let table = ListingTable::try_new(config).map_err(fail)?;
    ctx.deregister_table(name).map_err(fail)?;
    ctx.register_table(name, Arc::new(table)).map_err(fail)?;
    Ok(())
}

/// Register every contract table of the store by its name (`lab_results`, ...) over the files
/// the manifest lists; a table the store lacks is registered empty with its stored schema.
pub fn register_contract_tables(
    ctx: &SessionContext,
    root: &Path,
    manifest: &Manifest,
) -> Result<(), EngineError> {
    let root = std::path::absolute(root).map_err(|e| EngineError::io(root, e))?;
    for table in TableName::ALL {
        let files: Vec<PathBuf> = manifest
            .tables
            .get(table.as_str())
            .map(|t| t.files.iter().map(|f| root.join(&f.path)).collect())
            .unwrap_or_default();
        register_parquet_files(ctx, table.as_str(), &files, stored_schema(table))?;
    }
    Ok(())
}

/// Register the contract tables and every derived table the manifest lists (for reading a
/// derived store: analyses, reports, tests).
pub fn register_store(
    ctx: &SessionContext,
    root: &Path,
    manifest: &Manifest,
) -> Result<(), EngineError> {
    register_contract_tables(ctx, root, manifest)?;
    let root = std::path::absolute(root).map_err(|e| EngineError::io(root, e))?;
    for (name, table) in &manifest.derived {
        let files: Vec<PathBuf> = table.files.iter().map(|f| root.join(&f.path)).collect();
        let Some(first) = files.first() else {
            continue;
        };
        let schema = parquet_schema(first)?;
        register_parquet_files(ctx, name, &files, schema)?;
    }
    Ok(())
}

/// The Arrow schema stored in a Parquet file's footer.
pub(crate) fn parquet_schema(path: &Path) -> Result<SchemaRef, EngineError> {
    let file = std::fs::File::open(path).map_err(|e| EngineError::io(path, e))?;
    let builder =
        datafusion::parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(file)
            .map_err(|e| EngineError::ParquetOutput {
                path: path.to_path_buf(),
                message: e.to_string(),
            })?;
    Ok(builder.schema().clone())
}
