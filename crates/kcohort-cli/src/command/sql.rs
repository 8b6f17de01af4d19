//! `kcohort sql`: one read-only query over a store's tables and derived tables, printed as a
//! table, CSV or JSON, or written to a Parquet or CSV file.

use anyhow::{Context, bail};
use clap::{Args, ValueEnum};
use kcohort_engine::{EngineOptions, ParamValue, Parameters, QueryLimits};
use std::path::PathBuf;
use std::time::Duration;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SqlFormat {
    Table,
    Csv,
    Json,
}

#[derive(Debug, Args)]
pub struct SqlArgs {
    /// Store folder (after `kcohort ingest` and, for derived tables, `kcohort derive`).
    #[arg(long)]
    pub store: PathBuf,
    /// The query (SELECT ...); or give --file.
    pub query: Option<String>,
    /// Read the query from a file (e.g. one of queries/ adapted to your question).
    #[arg(long, conflicts_with = "query")]
    pub file: Option<PathBuf>,
    /// Bind `$name` in the query to a value: a number, or text (quoted as a string literal).
    #[arg(long = "param", value_name = "NAME=VALUE")]
    pub params: Vec<String>,
    /// Output on stdout.
    #[arg(long, value_enum, default_value = "table")]
    pub format: SqlFormat,
    /// Write the result to this file instead (.parquet or .csv).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Stop after this many rows.
    #[arg(long, default_value_t = 100_000)]
    pub max_rows: usize,
    /// Give up after this many seconds.
    #[arg(long, default_value_t = 300)]
    pub time_limit: u64,
}

/// Bind `$name` to each `--param name=value` with the engine's binder (numbers as numbers,
/// anything else as a quoted string; `$` inside strings and comments is left alone; an unbound
/// `$name` is an error naming the known ones).
fn bind_params(sql: &str, params: &[String]) -> anyhow::Result<String> {
    let mut bound = Parameters::new();
    for p in params {
        let Some((name, value)) = p.split_once('=') else {
            bail!("--param `{p}`: expected NAME=VALUE");
        };
        if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            bail!("--param `{p}`: the name must be letters, digits and `_`");
        }
        let literal = match value.parse::<f64>() {
            Ok(x) if x.is_finite() => ParamValue::Number(x),
            _ => ParamValue::Text(value.to_string()),
        };
        bound.insert(name, literal);
    }
    // An unbound name is the user's to fix (exit 1), not a fault of a shipped definition.
    bound.bind("the query", sql).map_err(|e| match e {
        kcohort_engine::EngineError::Parameter { message, .. } => {
            anyhow::anyhow!("{message}; give each one with --param NAME=VALUE")
        }
        other => anyhow::anyhow!("{other}"),
    })
}

pub fn run(args: SqlArgs) -> anyhow::Result<()> {
    let text = match (&args.query, &args.file) {
        (Some(q), _) => q.clone(),
        (None, Some(f)) => std::fs::read_to_string(f)
            .with_context(|| format!("cannot read the query file {}", f.display()))?,
        (None, None) => bail!("give a query (kcohort sql --store DIR \"SELECT ...\") or --file"),
    };
    let sql = bind_params(&text, &args.params)?;
    let limits = QueryLimits {
        time: Duration::from_secs(args.time_limit.max(1)),
        rows: args.max_rows.max(1),
    };
    let result = kcohort_engine::query(&args.store, &sql, &EngineOptions::default(), &limits)
        .with_context(|| format!("query on {} failed", args.store.display()))?;
    crate::table_output::write(
        &result.schema,
        &result.batches,
        args.format,
        args.out.as_deref(),
    )?;
    if result.truncated {
        eprintln!(
            "note: more than {} rows; only the first {} are shown (raise --max-rows)",
            limits.rows, limits.rows
        );
    } else {
        eprintln!("{} row(s)", result.rows());
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::bind_params;

    #[test]
    fn binds_numbers_and_quoted_text() {
        let p = vec!["k=5.5".to_string(), "unit=Ward 'A'".to_string()];
        assert_eq!(
            bind_params("v > $k AND unit = $unit", &p).unwrap(),
            "v > CAST(5.5 AS DOUBLE) AND unit = 'Ward ''A'''"
        );
        assert!(bind_params("v > $missing", &[]).is_err());
        assert!(bind_params("x", &["bad".to_string()]).is_err());
    }
}
