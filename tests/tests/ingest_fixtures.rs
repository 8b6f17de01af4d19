//! The malformed-input corpus: every case under `tests/fixtures/ingest/<case>/` is the base
//! extract (`_base/`) with some files replaced or removed, and an `expected.json` saying what
//! ingest must do — stop with a message naming the problem, or accept and reject exact counts by
//! reason. On every case that ingests, the reconciliation identity must hold, the rejects table
//! must hold one row per rejected row, and the store must verify against its manifest.

use arrow_array::cast::AsArray;
use arrow_array::types::UInt64Type;
use kcohort_ingest::{IngestOptions, Mode, NoProgress, ingest, store};
use kcohort_model::TableName;
use serde_json::Value;
use std::collections::BTreeMap;
use std::path::Path;

fn options() -> IngestOptions {
    IngestOptions {
        site_timezone: "Europe/Berlin".into(),
        extract_end: Some("2026-06-30T23:59".into()),
        mode: Mode::New,
        fail_point: None,
    }
}

/// Lines of rejected rows per table, from the store's rejects table.
fn reject_lines(
    store_dir: &Path,
    manifest: &kcohort_model::Manifest,
) -> BTreeMap<String, Vec<u64>> {
    let mut out: BTreeMap<String, Vec<u64>> = BTreeMap::new();
    for file in &manifest.rejects.files {
        let f = std::fs::File::open(store_dir.join(&file.path)).unwrap();
        let reader = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(f)
            .unwrap()
            .build()
            .unwrap();
        for batch in reader {
            let batch = batch.unwrap();
            let table = batch
                .column_by_name("table")
                .unwrap()
                .as_string::<i32>()
                .clone();
            let line = batch
                .column_by_name("line")
                .unwrap()
                .as_primitive::<UInt64Type>()
                .clone();
            for i in 0..batch.num_rows() {
                out.entry(table.value(i).to_string())
                    .or_default()
                    .push(line.value(i));
            }
        }
    }
    out
}

fn run_case(case_dir: &Path) -> Result<(), String> {
    let expected: Value =
        serde_json::from_str(&std::fs::read_to_string(case_dir.join("expected.json")).unwrap())
            .unwrap();
    let work = tempfile::tempdir().unwrap();
    let extract = work.path().join("extract");
    kcohort_tests::copy_folder(&kcohort_tests::fixtures().join("ingest/_base"), &extract).unwrap();
    for entry in std::fs::read_dir(case_dir).unwrap() {
        let entry = entry.unwrap();
        if entry.file_name() != "expected.json" {
            std::fs::copy(entry.path(), extract.join(entry.file_name())).unwrap();
        }
    }
    for removed in expected["remove"].as_array().into_iter().flatten() {
        std::fs::remove_file(extract.join(removed.as_str().unwrap())).unwrap();
    }
    let store_dir = work.path().join("store");
    let result = ingest(&extract, &store_dir, &options(), &NoProgress);

    if let Some(fatal) = expected["fatal"].as_str() {
        return match result {
            Ok(_) => Err(format!(
                "expected a fatal error containing {fatal:?}, but the ingest succeeded"
            )),
            Err(e) if e.to_string().contains(fatal) => {
                if store_dir.join("manifest.json").exists() {
                    Err("a failed ingest left a manifest".into())
                } else {
                    Ok(())
                }
            }
            Err(e) => Err(format!("expected an error containing {fatal:?}, got: {e}")),
        };
    }
    let outcome = result.map_err(|e| format!("ingest failed: {e}"))?;
    let record = &outcome.record;
    let mut problems = Vec::new();
    for (table, counts) in &record.tables {
        if !counts.reconciles() {
            problems.push(format!("{table}: does not reconcile: {counts:?}"));
        }
        let stored = outcome.manifest.tables[table].rows;
        if stored != counts.rows_accepted {
            problems.push(format!(
                "{table}: {stored} rows stored, {} accepted",
                counts.rows_accepted
            ));
        }
        let want = &expected["tables"][table.as_str()];
        let rejected: BTreeMap<String, u64> = want["rejected"]
            .as_object()
            .map(|m| {
                m.iter()
                    .map(|(k, v)| (k.clone(), v.as_u64().unwrap()))
                    .collect()
            })
            .unwrap_or_default();
        if rejected != counts.rejected_by_reason {
            problems.push(format!(
                "{table}: rejected {:?}, expected {rejected:?}",
                counts.rejected_by_reason
            ));
        }
        let check = |name: &str, got: u64, default: u64, problems: &mut Vec<String>| {
            let want = want[name].as_u64().unwrap_or(default);
            if got != want {
                problems.push(format!("{table}: {name} = {got}, expected {want}"));
            }
        };
        if !want.is_null() {
            check("read", counts.rows_read, u64::MAX, &mut problems);
            check("accepted", counts.rows_accepted, u64::MAX, &mut problems);
        }
        check("crlf_lines", counts.crlf_lines, 0, &mut problems);
        check("ambiguous", counts.ambiguous_local_times, 0, &mut problems);
        check(
            "unmatched",
            counts.unmatched_encounter_refs,
            0,
            &mut problems,
        );
        if want["converted"].is_u64() {
            check("converted", counts.converted_units, 0, &mut problems);
        }
        if counts.had_bom != want["had_bom"].as_bool().unwrap_or(false) {
            problems.push(format!("{table}: had_bom = {}", counts.had_bom));
        }
        let ignored: Vec<String> = want["ignored_columns"]
            .as_array()
            .map(|a| a.iter().map(|v| v.as_str().unwrap().to_string()).collect())
            .unwrap_or_default();
        if ignored != counts.ignored_columns {
            problems.push(format!(
                "{table}: ignored columns {:?}, expected {ignored:?}",
                counts.ignored_columns
            ));
        }
    }
    for table in expected["tables"]
        .as_object()
        .into_iter()
        .flatten()
        .map(|(k, _)| k)
    {
        if !record.tables.contains_key(table) {
            problems.push(format!("{table}: expected in the ingest record"));
        }
    }
    let total_rejected: u64 = record.tables.values().map(|c| c.rows_rejected).sum();
    if outcome.manifest.rejects.rows != total_rejected {
        problems.push(format!(
            "rejects table has {} rows, {} rows were rejected",
            outcome.manifest.rejects.rows, total_rejected
        ));
    }
    if let Some(lines) = expected["reject_lines"].as_object() {
        let got = reject_lines(&store_dir, &outcome.manifest);
        for (table, want) in lines {
            let want: Vec<u64> = want
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_u64().unwrap())
                .collect();
            if got.get(table) != Some(&want) {
                problems.push(format!(
                    "{table}: reject lines {:?}, expected {want:?}",
                    got.get(table)
                ));
            }
        }
    }
    let verify = store::verify(&store_dir).map_err(|e| e.to_string())?;
    if !verify.is_empty() {
        problems.push(format!("store does not verify: {verify:?}"));
    }
    if problems.is_empty() {
        Ok(())
    } else {
        Err(problems.join("\n  "))
    }
}

#[test]
fn malformed_input_corpus() {
    let root = kcohort_tests::fixtures().join("ingest");
    let mut cases: Vec<_> = std::fs::read_dir(&root)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_dir() && !p.file_name().unwrap().to_string_lossy().starts_with('_'))
        .collect();
    cases.sort();
    assert!(
        cases.len() >= 30,
        "the corpus must hold at least 30 cases, found {}",
        cases.len()
    );
    let failures: Vec<String> = cases
        .iter()
        .filter_map(|case| {
            let name = case.file_name().unwrap().to_string_lossy().into_owned();
            let outcome = std::panic::catch_unwind(|| run_case(case));
            match outcome {
                Ok(Ok(())) => None,
                Ok(Err(msg)) => Some(format!("{name}:\n  {msg}")),
                Err(_) => Some(format!("{name}: PANICKED")),
            }
        })
        .collect();
    assert!(
        failures.is_empty(),
        "{} of {} cases failed:\n{}",
        failures.len(),
        cases.len(),
        failures.join("\n")
    );
}

#[test]
fn every_table_appears_in_the_base_fixture() {
    let base = kcohort_tests::fixtures().join("ingest/_base");
    for table in TableName::ALL {
        assert!(
            base.join(format!("{}.csv", table.as_str())).is_file(),
            "{table}"
        );
    }
}
