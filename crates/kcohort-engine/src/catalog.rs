//! What a store holds, for `kcohort tables`: every table a query can name (the input tables and
//! the derived tables), its rows, columns and types, with the descriptions of the input contract
//! and of each definition's header.

use crate::EngineError;
use crate::definition::DEFINITIONS;
use crate::derive::read_manifest;
use kcohort_model::TableName;
use kcohort_model::store_schema::stored_schema;
use std::path::Path;

/// One column.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnInfo {
    pub name: String,
    pub data_type: String,
    pub description: String,
}

/// One table.
#[derive(Debug, Clone, PartialEq)]
pub struct TableInfo {
    pub name: String,
    /// `input` or `derived`.
    pub kind: &'static str,
    pub rows: u64,
    pub description: String,
    pub columns: Vec<ColumnInfo>,
}

/// Columns the store adds to the input contract's (lab_results), and the converted meaning of
/// `value` and `unit` there.
fn stored_column_description(table: TableName, column: &str) -> Option<&'static str> {
    match (table, column) {
        (TableName::LabResults, "analyte") => Some(
            "analyte from the LOINC map (potassium, creatinine, ...); empty for codes kcohort does not interpret",
        ),
        (TableName::LabResults, "value") => Some(
            "the value's number in the analyte's canonical unit (empty for uninterpreted codes)",
        ),
        (TableName::LabResults, "unit") => {
            Some("the canonical unit of value (mmol/L, mg/dL, U/L, ...)")
        }
        (TableName::LabResults, "value_comparator") => {
            Some("`>`, `<`, `>=` or `<=` when the value was reported with one")
        }
        (TableName::LabResults, "reported_value") => Some("the value exactly as reported"),
        (TableName::LabResults, "reported_unit") => Some("the unit exactly as reported"),
        _ => None,
    }
}

/// The first line of a definition's header: `-- name: what it is` gives `what it is`.
fn definition_summary(sql: &str) -> String {
    let first = sql
        .lines()
        .next()
        .unwrap_or_default()
        .trim_start_matches("--")
        .trim();
    let text = first.split_once(": ").map_or(first, |(_, rest)| rest);
    let mut out = text.to_string();
    // Continuation lines of the first sentence.
    for line in sql.lines().skip(1) {
        let l = line.trim_start_matches("--").trim();
        if l.is_empty() || out.ends_with('.') {
            break;
        }
        out.push(' ');
        out.push_str(l);
    }
    out
}

/// Every table of the store at `root`.
pub fn describe_store(root: &Path) -> Result<Vec<TableInfo>, EngineError> {
    let manifest = read_manifest(root)?;
    let mut out = Vec::new();
    for table in TableName::ALL {
        let rows = manifest.tables.get(table.as_str()).map_or(0, |t| t.rows);
        let schema = stored_schema(table);
        let columns = schema
            .fields()
            .iter()
            .map(|f| ColumnInfo {
                name: f.name().clone(),
                data_type: f.data_type().to_string(),
                description: stored_column_description(table, f.name())
                    .or_else(|| {
                        let spec = table.columns().iter().find(|c| c.name == f.name());
                        spec.map(|c| c.description)
                    })
                    .unwrap_or("")
                    .to_string(),
            })
            .collect();
        out.push(TableInfo {
            name: table.as_str().to_string(),
            kind: "input",
            rows,
            description: format!("input table `{}` as validated at ingest", table.as_str()),
            columns,
        });
    }
    let root = std::path::absolute(root).map_err(|e| EngineError::io(root, e))?;
    for d in DEFINITIONS {
        let Some(stored) = manifest.derived.get(d.table) else {
            continue;
        };
        let columns = match stored.files.first() {
            Some(f) => crate::session::parquet_schema(&root.join(&f.path))?
                .fields()
                .iter()
                .map(|f| ColumnInfo {
                    name: f.name().clone(),
                    data_type: f.data_type().to_string(),
                    description: String::new(),
                })
                .collect(),
            None => Vec::new(),
        };
        out.push(TableInfo {
            name: d.table.to_string(),
            kind: "derived",
            rows: stored.rows,
            description: format!("{} (queries/{})", definition_summary(d.sql), d.file),
            columns,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::definition_summary;

    #[test]
    fn summaries_come_from_the_header() {
        let sql = "-- episodes: high-potassium episodes, one row per episode.\n--\n-- DEFINITION\n";
        assert_eq!(
            definition_summary(sql),
            "high-potassium episodes, one row per episode."
        );
        for d in crate::DEFINITIONS {
            assert!(!definition_summary(d.sql).is_empty(), "{}", d.file);
        }
    }
}
