//! Read-only SQL for researchers (`kcohort sql`): one query over the store's tables and
//! derived tables, refused unless it is a plain query.
//!
//! The gate has three layers: the text must parse as exactly one statement and that statement
//! must be a query (`SELECT`, `WITH ... SELECT`, `VALUES`, `EXPLAIN` of a query); the plan is
//! checked by DataFusion's `SQLOptions` with DDL, DML and statements all refused (this also
//! catches anything hidden inside CTEs or subqueries); and the session reads only the Parquet
//! files the manifest lists (URL tables stay off, so a file path is never a table). A query runs
//! under a time limit and stops after a row limit.

use crate::EngineError;
use crate::derive::read_manifest;
use crate::session::{EngineOptions, register_store, session};
use datafusion::arrow::array::RecordBatch;
use datafusion::arrow::datatypes::SchemaRef;
use datafusion::execution::context::SQLOptions;
use datafusion::sql::parser::{DFParser, Statement};
use datafusion::sql::sqlparser::ast::Statement as SqlStatement;
use futures::StreamExt;
use std::path::Path;
use std::time::Duration;

/// Limits of one read-only query.
#[derive(Debug, Clone, PartialEq)]
pub struct QueryLimits {
    /// Wall-clock limit.
    pub time: Duration,
    /// Rows returned at most; the result says when more were left out.
    pub rows: usize,
}

impl Default for QueryLimits {
    fn default() -> Self {
        QueryLimits {
            time: Duration::from_secs(300),
            rows: 100_000,
        }
    }
}

/// The result of a read-only query.
#[derive(Debug, Clone)]
pub struct QueryResult {
    pub schema: SchemaRef,
    pub batches: Vec<RecordBatch>,
    /// True when the query had more rows than the row limit.
    pub truncated: bool,
}

impl QueryResult {
    pub fn rows(&self) -> usize {
        self.batches.iter().map(RecordBatch::num_rows).sum()
    }
}

const REFUSAL: &str = "only a query (SELECT, WITH ... SELECT, VALUES, EXPLAIN) may run here; \
    the store is read-only (no CREATE, INSERT, UPDATE, DELETE, DROP, COPY, SET, PREPARE)";

fn refused(message: impl Into<String>) -> EngineError {
    EngineError::UserQuery {
        message: message.into(),
    }
}

/// Check that `sql` is exactly one query (the first two layers of the gate need no store).
pub fn check_read_only(sql: &str) -> Result<(), EngineError> {
    let statements = DFParser::parse_sql(sql).map_err(|e| refused(format!("{e}")))?;
    if statements.len() != 1 {
        return Err(refused(format!(
            "{} statements found; give exactly one query",
            statements.len()
        )));
    }
    if is_query(&statements[0]) {
        Ok(())
    } else {
        Err(refused(REFUSAL))
    }
}

fn is_query(statement: &Statement) -> bool {
    match statement {
        Statement::Statement(s) => match s.as_ref() {
            SqlStatement::Query(_) => true,
            SqlStatement::Explain { statement, .. } => {
                matches!(statement.as_ref(), SqlStatement::Query(_))
            }
            _ => false,
        },
        Statement::Explain(e) => is_query(&e.statement),
        _ => false,
    }
}

/// Run one read-only query over the store at `root` (blocking; its own runtime).
pub fn query(
    root: &Path,
    sql: &str,
    options: &EngineOptions,
    limits: &QueryLimits,
) -> Result<QueryResult, EngineError> {
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(options.partitions())
        .enable_all()
        .build()
        .map_err(|e| EngineError::io(root, e))?;
    runtime.block_on(query_async(root, sql, options, limits))
}

/// [`query`] on the caller's runtime.
pub async fn query_async(
    root: &Path,
    sql: &str,
    options: &EngineOptions,
    limits: &QueryLimits,
) -> Result<QueryResult, EngineError> {
    check_read_only(sql)?;
    let manifest = read_manifest(root)?;
    let ctx = session(options)?;
    register_store(&ctx, root, &manifest)?;
    let fail = |e: datafusion::error::DataFusionError| match crate::derive::query_failure(
        "query", options, e,
    ) {
        EngineError::Query { source, .. } => refused(format!("the query failed: {source}")),
        other => other,
    };
    let gate = SQLOptions::new()
        .with_allow_ddl(false)
        .with_allow_dml(false)
        .with_allow_statements(false);
    let run = async {
        let frame = ctx.sql_with_options(sql, gate).await.map_err(fail)?;
        let schema = SchemaRef::from(frame.schema().as_arrow().clone());
        let mut stream = frame.execute_stream().await.map_err(fail)?;
        let mut batches = Vec::new();
        let mut rows = 0usize;
        let mut truncated = false;
        while let Some(batch) = stream.next().await {
            let batch = batch.map_err(fail)?;
            let room = limits.rows - rows;
            if batch.num_rows() > room {
                batches.push(batch.slice(0, room));
                truncated = true;
                break;
            }
            rows += batch.num_rows();
            batches.push(batch);
        }
        Ok::<_, EngineError>(QueryResult {
            schema,
            batches,
            truncated,
        })
    };
    tokio::time::timeout(limits.time, run)
        .await
        .unwrap_or_else(|_| {
            Err(refused(format!(
                "the query ran longer than the time limit ({} s); raise --time-limit or narrow it",
                limits.time.as_secs()
            )))
        })
}

#[cfg(test)]
mod tests {
    use super::check_read_only;

    #[test]
    fn plain_queries_pass() {
        for sql in [
            "SELECT 1",
            "WITH a AS (SELECT 1 AS x) SELECT x FROM a",
            "VALUES (1), (2)",
            "EXPLAIN SELECT 1",
            "SELECT * FROM episodes WHERE patient_id IN (SELECT patient_id FROM patients)",
        ] {
            assert!(check_read_only(sql).is_ok(), "{sql}");
        }
    }
}
