//! `kcohort sql`: one read-only query over a store's tables and derived tables, printed as a
//! table, CSV or JSON, or written to a Parquet or CSV file.

use anyhow::{Context, bail};
use clap::{Args, ValueEnum};
use kcohort_engine::{EngineOptions, QueryLimits};
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

/// Replace `$name` with the literal of a `--param name=value` (numbers as numbers, anything
/// else as a quoted string with quotes doubled). Strings and comments are left alone by the
/// engine's binder; this one is simpler: it refuses a `$` it cannot bind.
fn bind_params(sql: &str, params: &[String]) -> anyhow::Result<String> {
    let mut values = Vec::new();
    for p in params {
        let Some((name, value)) = p.split_once('=') else {
            bail!("--param `{p}`: expected NAME=VALUE");
        };
        if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            bail!("--param `{p}`: the name must be letters, digits and `_`");
        }
        let literal = if value.parse::<f64>().is_ok_and(f64::is_finite) {
            value.to_string()
        } else {
            format!("'{}'", value.replace('\'', "''"))
        };
        values.push((name.to_string(), literal));
    }
    // Longest names first, so `$ab` is not bound as `$a` followed by `b`.
    values.sort_by_key(|(n, _)| std::cmp::Reverse(n.len()));
    let mut out = sql.to_string();
    for (name, literal) in &values {
        out = out.replace(&format!("${name}"), literal);
    }
    if let Some(i) = out.find('$') {
        let rest: String = out[i..].chars().take(30).collect();
        bail!("the query has an unbound parameter near `{rest}`; give it with --param NAME=VALUE");
    }
    Ok(out)
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
            "v > 5.5 AND unit = 'Ward ''A'''"
        );
        assert!(bind_params("v > $missing", &[]).is_err());
        assert!(bind_params("x", &["bad".to_string()]).is_err());
    }
}
