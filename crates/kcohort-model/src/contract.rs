//! The input contract: which tables an extract holds, their columns, and what each column must be.
//!
//! The prose version of this contract is `docs/input-contract.md`; a test checks that both name
//! the same columns.

use std::fmt;

/// The tables of an extract, in the order ingest reads them (a table may only refer to tables
/// read before it).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum TableName {
    Patients,
    Encounters,
    LabResults,
    MedicationEvents,
    Diagnoses,
}

impl TableName {
    /// All tables in ingest order.
    pub const ALL: [TableName; 5] = [
        TableName::Patients,
        TableName::Encounters,
        TableName::LabResults,
        TableName::MedicationEvents,
        TableName::Diagnoses,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            TableName::Patients => "patients",
            TableName::Encounters => "encounters",
            TableName::LabResults => "lab_results",
            TableName::MedicationEvents => "medication_events",
            TableName::Diagnoses => "diagnoses",
        }
    }

    pub fn parse(name: &str) -> Option<TableName> {
        TableName::ALL.into_iter().find(|t| t.as_str() == name)
    }

    /// Whether an extract must contain this table.
    pub fn is_required(self) -> bool {
        !matches!(self, TableName::Diagnoses)
    }

    /// The column holding the row's unique id, if the table has one.
    pub fn id_column(self) -> Option<&'static str> {
        match self {
            TableName::Patients => Some("patient_id"),
            TableName::Encounters => Some("encounter_id"),
            TableName::LabResults => Some("result_id"),
            TableName::MedicationEvents => Some("event_id"),
            TableName::Diagnoses => None,
        }
    }

    /// The contract columns of this table, in their documented order.
    pub const fn columns(self) -> &'static [ColumnSpec] {
        match self {
            TableName::Patients => PATIENTS,
            TableName::Encounters => ENCOUNTERS,
            TableName::LabResults => LAB_RESULTS,
            TableName::MedicationEvents => MEDICATION_EVENTS,
            TableName::Diagnoses => DIAGNOSES,
        }
    }

    pub fn column(self, name: &str) -> Option<&'static ColumnSpec> {
        self.columns().iter().find(|c| c.name == name)
    }
}

impl fmt::Display for TableName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// What a timestamp column means for the extract-end rules: start times after the extract end
/// are rejected, end times after it are kept (and cut at it by later definitions).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeRole {
    Start,
    End,
    /// A time that is neither (e.g. death_at): kept wherever it falls after 1900.
    Event,
}

/// The kind of value a column holds; ingest parses and checks each kind.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColumnKind {
    /// An opaque identifier (non-empty text, compared as bytes).
    Id,
    /// Free text.
    Text,
    /// One of a fixed list of values, matched exactly.
    Category(&'static [&'static str]),
    /// A calendar year.
    Year,
    /// A decimal number.
    Number,
    /// A timestamp (see the contract for the accepted forms).
    Timestamp(TimeRole),
    /// A lab value as reported, with an optional comparator (`>9.0`, `<1.5`).
    LabValue,
    /// A LOINC code (`NNNN-N`, check digit verified).
    Loinc,
    /// An ATC code or prefix (`C`, `C09`, `C09A`, `C09AA`, `C09AA02`).
    Atc,
    /// An ICD-10 code (`E87.5`, `N1832` or `N18.32`).
    Icd10,
    /// A unit string, checked against the analyte's accepted units.
    Unit,
}

/// One column of the contract.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ColumnSpec {
    pub name: &'static str,
    pub kind: ColumnKind,
    pub required: bool,
    pub description: &'static str,
}

const fn col(
    name: &'static str,
    kind: ColumnKind,
    required: bool,
    description: &'static str,
) -> ColumnSpec {
    ColumnSpec {
        name,
        kind,
        required,
        description,
    }
}

pub const SEX_VALUES: &[&str] = &["F", "M", "U"];
pub const ENCOUNTER_CLASSES: &[&str] = &["inpatient", "emergency", "outpatient"];
pub const DISCHARGE_STATUSES: &[&str] = &["home", "transfer", "died", "other"];
pub const ROUTES: &[&str] = &["PO", "IV", "SC", "IM", "INH", "TOP", "PR", "other"];
pub const MEDICATION_KINDS: &[&str] = &["dispense", "administer", "order"];

use ColumnKind::*;

const PATIENTS: &[ColumnSpec] = &[
    col(
        "patient_id",
        Id,
        true,
        "pseudonymous patient identifier, unique",
    ),
    col("sex", Category(SEX_VALUES), true, "F, M or U (unknown)"),
    col(
        "birth_year",
        Year,
        true,
        "year of birth, 1900 to the extract's year",
    ),
    col(
        "death_at",
        Timestamp(TimeRole::Event),
        false,
        "time of death, empty if alive at extract",
    ),
];

const ENCOUNTERS: &[ColumnSpec] = &[
    col("encounter_id", Id, true, "encounter identifier, unique"),
    col("patient_id", Id, true, "the patient (must be in patients)"),
    col(
        "class",
        Category(ENCOUNTER_CLASSES),
        true,
        "inpatient, emergency or outpatient",
    ),
    col(
        "unit",
        Text,
        true,
        "ward or clinic the encounter is attributed to",
    ),
    col(
        "admitted_at",
        Timestamp(TimeRole::Start),
        true,
        "start of the encounter",
    ),
    col(
        "discharged_at",
        Timestamp(TimeRole::End),
        false,
        "end of the encounter; empty = still admitted at extract time",
    ),
    col(
        "discharge_status",
        Category(DISCHARGE_STATUSES),
        false,
        "home, transfer, died or other",
    ),
];

const LAB_RESULTS: &[ColumnSpec] = &[
    col("result_id", Id, true, "result identifier, unique"),
    col("patient_id", Id, true, "the patient (must be in patients)"),
    col("encounter_id", Id, false, "the encounter, if known"),
    col("loinc", Loinc, true, "LOINC code of the test"),
    col(
        "value",
        LabValue,
        true,
        "value as reported: 5.8, >9.0, <1.5",
    ),
    col(
        "unit",
        Unit,
        true,
        "unit as reported (matched case-insensitively)",
    ),
    col(
        "collected_at",
        Timestamp(TimeRole::Start),
        true,
        "specimen collection time",
    ),
    col(
        "resulted_at",
        Timestamp(TimeRole::End),
        false,
        "time the result was released",
    ),
    col(
        "hemolysis_index",
        Number,
        false,
        "laboratory hemolysis index of the specimen",
    ),
];

const MEDICATION_EVENTS: &[ColumnSpec] = &[
    col("event_id", Id, true, "medication event identifier, unique"),
    col("patient_id", Id, true, "the patient (must be in patients)"),
    col("encounter_id", Id, false, "the encounter, if known"),
    col("atc", Atc, true, "WHO ATC code of the drug"),
    col("drug_name", Text, false, "drug name as recorded"),
    col(
        "route",
        Category(ROUTES),
        true,
        "PO, IV, SC, IM, INH, TOP, PR or other",
    ),
    col(
        "kind",
        Category(MEDICATION_KINDS),
        true,
        "dispense, administer or order",
    ),
    col(
        "start_at",
        Timestamp(TimeRole::Start),
        true,
        "dispensing, administration or order start",
    ),
    col(
        "end_at",
        Timestamp(TimeRole::End),
        false,
        "end of administration or order",
    ),
    col(
        "days_supply",
        Number,
        false,
        "days supplied by a dispensing",
    ),
    col("dose", Number, false, "dose amount"),
    col("dose_unit", Text, false, "unit of the dose"),
];

const DIAGNOSES: &[ColumnSpec] = &[
    col("patient_id", Id, true, "the patient (must be in patients)"),
    col("encounter_id", Id, false, "the encounter, if known"),
    col("icd10", Icd10, true, "ICD-10 code"),
    col(
        "recorded_at",
        Timestamp(TimeRole::Start),
        true,
        "time the diagnosis was recorded",
    ),
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_table_has_its_id_column_first_and_required() {
        for table in TableName::ALL {
            if let Some(id) = table.id_column() {
                let first = &table.columns()[0];
                assert_eq!(first.name, id, "{table}");
                assert!(first.required, "{table}");
            }
        }
    }

    #[test]
    fn table_names_round_trip() {
        for table in TableName::ALL {
            assert_eq!(TableName::parse(table.as_str()), Some(table));
        }
        assert_eq!(TableName::parse("labs"), None);
    }
}
