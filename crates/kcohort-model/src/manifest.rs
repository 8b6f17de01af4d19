//! The store manifest (`manifest.json`): which files make up the store (with SHA-256 and row
//! counts), which extracts were ingested (input file hashes and the row reconciliation of each),
//! the study parameters fixed at ingest, and the tool version. Reports copy its hashes into their
//! methods section so a result can be traced to its inputs.

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

pub const FORMAT_VERSION: u32 = 1;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    pub format_version: u32,
    /// Version of kcohort that wrote this generation.
    pub tool_version: String,
    /// Increases by one with every successful write.
    pub generation: u64,
    /// Site time zone used to read zoneless input times (IANA name or fixed offset).
    pub site_timezone: String,
    /// The time the data were pulled, RFC 3339 UTC; start times after it are rejected.
    pub extract_end: String,
    /// `given` (from `--extract-end`) or `latest_timestamp` (the latest accepted time of the extract).
    pub extract_end_source: String,
    /// Every ingest that built this store, oldest first.
    pub ingests: Vec<IngestRecord>,
    /// The contract tables as stored now.
    pub tables: BTreeMap<String, StoredTable>,
    /// The rejects table (all ingests).
    pub rejects: StoredTable,
    /// Derived tables written by the definitions (empty until they run).
    #[serde(default)]
    pub derived: BTreeMap<String, StoredTable>,
}

/// One ingest run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct IngestRecord {
    pub seq: u32,
    /// `new`, `append` or `replace`.
    pub mode: String,
    /// Name of the extract folder (its last path component only, no absolute path).
    pub extract_name: String,
    /// Hash over the sorted input files' names and SHA-256 values: equal inputs, equal fingerprint.
    pub input_fingerprint: String,
    pub inputs: Vec<InputFile>,
    /// Files in the extract folder that are not contract tables; listed, never read.
    pub ignored_files: Vec<String>,
    /// Reconciliation per table.
    pub tables: BTreeMap<String, TableCounts>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InputFile {
    pub file: String,
    pub table: String,
    /// `csv` or `parquet`.
    pub format: String,
    pub bytes: u64,
    pub sha256: String,
}

/// How the rows of one input table were accounted for: `rows_read = rows_accepted + rows_rejected`.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TableCounts {
    pub rows_read: u64,
    pub rows_accepted: u64,
    pub rows_rejected: u64,
    /// Rejected rows by reason code.
    pub rejected_by_reason: BTreeMap<String, u64>,
    /// Stored rows replaced by a newer version of the same id (append only).
    pub rows_replaced: u64,
    /// Accepted rows naming an encounter that is in neither the extract nor the store.
    pub unmatched_encounter_refs: u64,
    /// Zoneless times in a DST overlap, read as the earlier instant.
    pub ambiguous_local_times: u64,
    /// Accepted lab rows whose LOINC code kcohort does not interpret (kept unconverted).
    pub unlisted_loinc: u64,
    /// Accepted lab rows converted from a non-canonical unit.
    pub converted_units: u64,
    /// The file began with a UTF-8 byte-order mark (removed).
    pub had_bom: bool,
    /// Lines ending in CR LF (read like LF).
    pub crlf_lines: u64,
    /// Columns present in the file but not in the contract; ignored.
    pub ignored_columns: Vec<String>,
}

impl TableCounts {
    pub fn reconciles(&self) -> bool {
        self.rows_read == self.rows_accepted + self.rows_rejected
            && self.rows_rejected == self.rejected_by_reason.values().sum::<u64>()
    }
}

/// A table as stored: its files and total rows.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StoredTable {
    pub rows: u64,
    pub files: Vec<StoredFile>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StoredFile {
    /// Path relative to the store folder.
    pub path: String,
    pub rows: u64,
    pub bytes: u64,
    pub sha256: String,
}

impl Manifest {
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("manifest serialises")
    }

    pub fn from_json(text: &str) -> Result<Manifest, serde_json::Error> {
        serde_json::from_str(text)
    }

    /// Every file the store consists of, relative to the store folder.
    pub fn all_files(&self) -> impl Iterator<Item = &StoredFile> {
        self.tables
            .values()
            .chain(std::iter::once(&self.rejects))
            .chain(self.derived.values())
            .flat_map(|t| t.files.iter())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reconciliation_identity() {
        let mut c = TableCounts {
            rows_read: 10,
            rows_accepted: 7,
            rows_rejected: 3,
            ..Default::default()
        };
        c.rejected_by_reason.insert("bad_number".into(), 3);
        assert!(c.reconciles());
        c.rows_accepted = 6;
        assert!(!c.reconciles());
    }
}
