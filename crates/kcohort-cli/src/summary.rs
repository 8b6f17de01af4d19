//! The reconciliation summary printed after an ingest: counts only, never a patient-level value.

use kcohort_model::manifest::IngestRecord;
use kcohort_model::{Manifest, RejectReason, TableName};
use std::fmt::Write;

pub fn render(manifest: &Manifest, record: &IngestRecord, unchanged: bool) -> String {
    let mut out = String::new();
    if unchanged {
        let _ = writeln!(
            out,
            "extract `{}` is already in the store with the same inputs and settings: nothing to do",
            record.extract_name
        );
    }
    let _ = writeln!(
        out,
        "extract `{}` (ingest {} of the store, mode {}); extract end {} ({})",
        record.extract_name,
        record.seq,
        record.mode,
        kcohort_ingest::timestamp::describe_instant(&manifest.extract_end, &manifest.site_timezone),
        if manifest.extract_end_source == "given" {
            "as given"
        } else {
            "the latest timestamp in the extract"
        }
    );
    let _ = writeln!(out);
    let h = [
        "table",
        "rows read",
        "accepted",
        "rejected",
        "replaced",
        "in store",
        "check",
    ];
    let _ = writeln!(
        out,
        "{:<18} {:>12} {:>12} {:>10} {:>10} {:>12}  {}",
        h[0], h[1], h[2], h[3], h[4], h[5], h[6]
    );
    for table in TableName::ALL {
        let Some(c) = record.tables.get(table.as_str()) else {
            continue;
        };
        let in_store = manifest.tables.get(table.as_str()).map_or(0, |t| t.rows);
        let check = if c.reconciles() {
            "read = accepted + rejected"
        } else {
            "DOES NOT RECONCILE"
        };
        let _ = writeln!(
            out,
            "{:<18} {:>12} {:>12} {:>10} {:>10} {:>12}  {}",
            table.as_str(),
            c.rows_read,
            c.rows_accepted,
            c.rows_rejected,
            c.rows_replaced,
            in_store,
            check
        );
    }
    let mut reasons = Vec::new();
    for table in TableName::ALL {
        let Some(c) = record.tables.get(table.as_str()) else {
            continue;
        };
        for reason in RejectReason::ALL {
            if let Some(n) = c.rejected_by_reason.get(reason.code()) {
                reasons.push(format!(
                    "  {:<18} {:<24} {:>8}  {}",
                    table.as_str(),
                    reason.code(),
                    n,
                    reason.description()
                ));
            }
        }
    }
    if !reasons.is_empty() {
        let _ = writeln!(
            out,
            "\nrejected rows by reason (details, with line and column, in the store's rejects table):"
        );
        for r in reasons {
            let _ = writeln!(out, "{r}");
        }
    }
    let mut notes = Vec::new();
    for table in TableName::ALL {
        let Some(c) = record.tables.get(table.as_str()) else {
            continue;
        };
        let t = table.as_str();
        if c.had_bom {
            notes.push(format!(
                "{t}: byte-order mark at the start of the file removed"
            ));
        }
        if c.crlf_lines > 0 {
            notes.push(format!(
                "{t}: {} in CR LF (read as line ends)",
                count(c.crlf_lines, "line ends", "lines end")
            ));
        }
        if c.ambiguous_local_times > 0 {
            notes.push(format!(
                "{t}: {} in a daylight-saving overlap (the repeated hour); the earlier instant was taken",
                count(c.ambiguous_local_times, "local time falls", "local times fall")
            ));
        }
        if c.unmatched_encounter_refs > 0 {
            notes.push(format!(
                "{t}: {} an encounter not in the extract or store (kept)",
                count(
                    c.unmatched_encounter_refs,
                    "accepted row names",
                    "accepted rows name"
                )
            ));
        }
        if c.converted_units > 0 {
            notes.push(format!(
                "{t}: {} values converted to the analyte's canonical unit",
                c.converted_units
            ));
        }
        if c.unlisted_loinc > 0 {
            notes.push(format!(
                "{t}: {} results with a LOINC code kcohort does not interpret (kept, unconverted)",
                c.unlisted_loinc
            ));
        }
        if !c.ignored_columns.is_empty() {
            notes.push(format!(
                "{t}: columns not in the contract, ignored: {}",
                c.ignored_columns.join(", ")
            ));
        }
    }
    if !record.ignored_files.is_empty() {
        notes.push(format!(
            "files in the extract folder that are not tables, not read: {}",
            record.ignored_files.join(", ")
        ));
    }
    if !notes.is_empty() {
        let _ = writeln!(out, "\nnotes:");
        for n in notes {
            let _ = writeln!(out, "  {n}");
        }
    }
    out
}

/// "1 thing" / "2 things".
fn count(n: u64, one: &str, many: &str) -> String {
    if n == 1 {
        format!("1 {one}")
    } else {
        format!("{n} {many}")
    }
}
