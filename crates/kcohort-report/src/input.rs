//! What the report is made from: the month's numbers as the CLI reads them from the store's
//! derived tables (`unit_months`, `episode_register`, `potassium_quality`) and manifest.

use serde::Serialize;

/// One unit in one local month (`unit_months`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitMonth {
    pub month: String,
    pub unit: String,
    pub days_at_risk: f64,
    pub admissions: u64,
    /// Hospital-acquired, confirmed episodes with onset in the month, in the unit.
    pub episodes: u64,
    pub severe: u64,
    pub unconfirmed: u64,
}

/// One hospital-acquired episode with onset in the report month (`episode_register`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EpisodeFacts {
    pub unit: String,
    pub unconfirmed: bool,
    /// `mild`, `moderate` or `severe`.
    pub severity: String,
    pub ctcae_grade: Option<i32>,
    /// Causes found (cause names of episode_causes).
    pub causes: Vec<String>,
    /// Drug-class causes only.
    pub drug_classes: Vec<String>,
    pub severe_treated_1h: Option<bool>,
    pub severe_treated_4h: Option<bool>,
    pub repeat_within_4h: bool,
    pub insulin_given: bool,
    pub hypoglycemia_after_insulin: Option<bool>,
    pub rebound: bool,
    pub died_within_window: bool,
}

/// Rows rejected at ingest, by table and reason (from the manifest).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RejectCount {
    pub table: String,
    pub reason: String,
    pub rows: u64,
}

/// Rows read and accepted per table (from the manifest).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TableCount {
    pub table: String,
    pub read: u64,
    pub accepted: u64,
    pub rejected: u64,
}

/// One parameter of the study, for the methods section.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Parameter {
    pub key: String,
    pub value: String,
}

/// One input file of the store, for reproducibility.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InputFile {
    pub table: String,
    pub file: String,
    pub sha256: String,
    pub rows: u64,
}

/// Where the numbers come from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Provenance {
    pub tool_version: String,
    pub site_timezone: String,
    pub extract_end: String,
    pub store_generation: u64,
    pub derive_fingerprint: String,
    pub input_files: Vec<InputFile>,
    pub parameters: Vec<Parameter>,
    /// Labels of the drug classes (class name to label).
    pub drug_class_labels: Vec<(String, String)>,
}

/// Everything one report needs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReportInput {
    /// The report month, `YYYY-MM`.
    pub month: String,
    /// Months of the control chart, oldest first, ending with the report month (24 by default).
    pub months: Vec<String>,
    /// Every unit-month of those months.
    pub unit_months: Vec<UnitMonth>,
    /// The report month's hospital-acquired episodes (confirmed and unconfirmed).
    pub episodes: Vec<EpisodeFacts>,
    pub potassium_results: u64,
    pub hemolysed_results: u64,
    pub tables: Vec<TableCount>,
    pub rejects: Vec<RejectCount>,
    pub provenance: Provenance,
}
