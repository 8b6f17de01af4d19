//! Where things live inside a store folder. Only files listed in the manifest belong to the store;
//! anything else (temporary files of an interrupted write, files of older generations) is ignored
//! by readers and cleaned up by the next successful write.

use crate::contract::TableName;

/// The manifest: replaced last (atomically) by every write, so it always describes a complete store.
pub const MANIFEST_FILE: &str = "manifest.json";
/// Folder of the contract tables: `tables/<table>/g<generation>-<part>.parquet`.
pub const TABLES_DIR: &str = "tables";
/// Folder of the rejects table.
pub const REJECTS_DIR: &str = "rejects";
/// Folder of derived tables written by the definitions (later issues).
pub const DERIVED_DIR: &str = "derived";
/// Prefix of files being written; never read.
pub const TEMP_PREFIX: &str = ".tmp-";

/// Relative path of one Parquet part of a contract table in a generation.
pub fn table_file(table: TableName, generation: u64, part: usize) -> String {
    format!(
        "{TABLES_DIR}/{}/g{generation:06}-{part:03}.parquet",
        table.as_str()
    )
}

/// Relative path of a rejects part written by one ingest.
pub fn rejects_file(generation: u64, part: usize) -> String {
    format!("{REJECTS_DIR}/g{generation:06}-{part:03}.parquet")
}

/// Relative path of the temporary name a file is written under before it is renamed.
pub fn temp_name(relative: &str) -> String {
    match relative.rsplit_once('/') {
        Some((dir, file)) => format!("{dir}/{TEMP_PREFIX}{file}"),
        None => format!("{TEMP_PREFIX}{relative}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_paths() {
        assert_eq!(
            table_file(TableName::LabResults, 3, 0),
            "tables/lab_results/g000003-000.parquet"
        );
        assert_eq!(rejects_file(12, 1), "rejects/g000012-001.parquet");
        assert_eq!(
            temp_name("tables/patients/g000001-000.parquet"),
            "tables/patients/.tmp-g000001-000.parquet"
        );
        assert_eq!(temp_name(MANIFEST_FILE), ".tmp-manifest.json");
    }
}
