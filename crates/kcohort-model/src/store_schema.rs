//! Arrow schemas of the tables in the store. Instants are UTC microseconds; strings are `Utf8`.
//! The stored tables keep every contract column and add the columns ingest derives (canonical lab
//! value and unit, comparator, analyte).

use crate::contract::TableName;
use arrow_schema::{DataType, Field, Schema, SchemaRef, TimeUnit};
use std::sync::Arc;

/// The timestamp type of every stored instant.
pub fn instant_type() -> DataType {
    DataType::Timestamp(TimeUnit::Microsecond, Some("UTC".into()))
}

fn text(name: &str, nullable: bool) -> Field {
    Field::new(name, DataType::Utf8, nullable)
}

fn instant(name: &str, nullable: bool) -> Field {
    Field::new(name, instant_type(), nullable)
}

fn number(name: &str, nullable: bool) -> Field {
    Field::new(name, DataType::Float64, nullable)
}

/// Schema of a stored contract table.
pub fn stored_schema(table: TableName) -> SchemaRef {
    let fields = match table {
        TableName::Patients => vec![
            text("patient_id", false),
            text("sex", false),
            Field::new("birth_year", DataType::Int32, false),
            instant("death_at", true),
        ],
        TableName::Encounters => vec![
            text("encounter_id", false),
            text("patient_id", false),
            text("class", false),
            text("unit", false),
            instant("admitted_at", false),
            instant("discharged_at", true),
            text("discharge_status", true),
        ],
        TableName::LabResults => vec![
            text("result_id", false),
            text("patient_id", false),
            text("encounter_id", true),
            text("loinc", false),
            // Analyte name from the LOINC map; empty for codes kcohort does not interpret.
            text("analyte", true),
            // Numeric part of the value in the canonical unit (empty for unlisted LOINC codes).
            number("value", true),
            text("unit", true),
            // `>`, `<`, `>=` or `<=` when the value was reported with a comparator.
            text("value_comparator", true),
            // The value and unit exactly as reported.
            text("reported_value", false),
            text("reported_unit", false),
            instant("collected_at", false),
            instant("resulted_at", true),
            number("hemolysis_index", true),
        ],
        TableName::MedicationEvents => vec![
            text("event_id", false),
            text("patient_id", false),
            text("encounter_id", true),
            text("atc", false),
            text("drug_name", true),
            text("route", false),
            text("kind", false),
            instant("start_at", false),
            instant("end_at", true),
            number("days_supply", true),
            number("dose", true),
            text("dose_unit", true),
        ],
        TableName::Diagnoses => vec![
            text("patient_id", false),
            text("encounter_id", true),
            text("icd10", false),
            instant("recorded_at", false),
        ],
    };
    Arc::new(Schema::new(fields))
}

/// Schema of the rejects table: one row per rejected input row. It holds the offending value, so
/// it is as protected as the store itself and never printed.
pub fn rejects_schema() -> SchemaRef {
    Arc::new(Schema::new(vec![
        Field::new("ingest_seq", DataType::UInt32, false),
        text("table", false),
        text("file", false),
        Field::new("line", DataType::UInt64, false),
        text("column", true),
        text("reason", false),
        text("message", false),
        text("value", true),
    ]))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_contract_column_is_stored_under_its_name_or_as_reported() {
        for table in TableName::ALL {
            let schema = stored_schema(table);
            for column in table.columns() {
                let stored = match (table, column.name) {
                    (TableName::LabResults, "value") => "reported_value",
                    (TableName::LabResults, "unit") => "reported_unit",
                    (_, name) => name,
                };
                assert!(schema.field_with_name(stored).is_ok(), "{table}.{stored}");
            }
        }
    }
}
