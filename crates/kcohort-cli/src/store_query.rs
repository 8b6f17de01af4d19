//! Reading small results of the store's derived tables into plain Rust values, column by name
//! (every column is cast once to text, a number or a flag).

use anyhow::{Context, bail};
use arrow_array::cast::AsArray;
use arrow_array::types::{Float64Type, Int64Type};
use arrow_array::{Array, ArrayRef, RecordBatch};
use arrow_schema::DataType;
use kcohort_engine::{EngineOptions, QueryLimits};
use std::path::Path;

/// The rows of a query, as columns of one type each.
pub struct Rows {
    batches: Vec<RecordBatch>,
}

/// Run a query over the store (read-only) and keep its rows.
pub fn rows(store: &Path, sql: &str) -> anyhow::Result<Rows> {
    let limits = QueryLimits {
        rows: usize::MAX / 2,
        ..QueryLimits::default()
    };
    let result = kcohort_engine::query(store, sql, &EngineOptions::default(), &limits)
        .with_context(|| format!("reading the store {}", store.display()))?;
    Ok(Rows {
        batches: result.batches,
    })
}

impl Rows {
    pub fn len(&self) -> usize {
        self.batches.iter().map(RecordBatch::num_rows).sum()
    }

    fn column(&self, name: &str, to: &DataType) -> anyhow::Result<Vec<ArrayRef>> {
        self.batches
            .iter()
            .map(|b| {
                let c = b
                    .column_by_name(name)
                    .with_context(|| format!("no column `{name}`"))?;
                Ok(arrow_cast::cast(c, to)?)
            })
            .collect()
    }

    pub fn text(&self, name: &str) -> anyhow::Result<Vec<Option<String>>> {
        Ok(self
            .column(name, &DataType::Utf8)?
            .iter()
            .flat_map(|a| {
                a.as_string::<i32>()
                    .iter()
                    .map(|v| v.map(str::to_string))
                    .collect::<Vec<_>>()
            })
            .collect())
    }

    pub fn number(&self, name: &str) -> anyhow::Result<Vec<Option<f64>>> {
        Ok(self
            .column(name, &DataType::Float64)?
            .iter()
            .flat_map(|a| a.as_primitive::<Float64Type>().iter().collect::<Vec<_>>())
            .collect())
    }

    pub fn count(&self, name: &str) -> anyhow::Result<Vec<u64>> {
        self.column(name, &DataType::Int64)?
            .iter()
            .flat_map(|a| a.as_primitive::<Int64Type>().iter().collect::<Vec<_>>())
            .map(|v| match v {
                Some(n) if n >= 0 => Ok(n as u64),
                other => bail!("column `{name}`: expected a count, found {other:?}"),
            })
            .collect()
    }

    pub fn flag(&self, name: &str) -> anyhow::Result<Vec<Option<bool>>> {
        Ok(self
            .column(name, &DataType::Boolean)?
            .iter()
            .flat_map(|a| {
                let b = a.as_boolean();
                (0..b.len())
                    .map(|i| (!b.is_null(i)).then(|| b.value(i)))
                    .collect::<Vec<_>>()
            })
            .collect())
    }
}
