//! The store over its life: crash safety at every commit step, re-runs that change nothing,
//! monthly appends that replace rows by id, full replacement, and Parquet input.

use arrow_array::{ArrayRef, Float64Array, RecordBatch, StringArray, TimestampMicrosecondArray};
use kcohort_ingest::store::{self, CommitStep, FailPoint};
use kcohort_ingest::{IngestError, IngestOptions, Mode, NoProgress, ingest};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;

fn options(mode: Mode) -> IngestOptions {
    IngestOptions {
        site_timezone: "Europe/Berlin".into(),
        extract_end: Some("2026-06-30T23:59".into()),
        mode,
        fail_point: None,
    }
}

fn base_extract(dir: &Path) -> PathBuf {
    let extract = dir.join("extract-2026-06");
    kcohort_tests::copy_folder(&kcohort_tests::fixtures().join("ingest/_base"), &extract).unwrap();
    extract
}

/// Every file of the store folder with its bytes (the whole visible state).
fn snapshot(store: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![store.to_path_buf()];
    while let Some(dir) = stack.pop() {
        for e in std::fs::read_dir(&dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(
                    p.strip_prefix(store).unwrap().display().to_string(),
                    std::fs::read(&p).unwrap(),
                );
            }
        }
    }
    out
}

/// The files the manifest lists, with their bytes: what a reader of the store sees.
fn listed(store: &Path) -> BTreeMap<String, Vec<u8>> {
    let m = store::read_manifest(store).unwrap().unwrap();
    let mut out: BTreeMap<String, Vec<u8>> = m
        .all_files()
        .map(|f| (f.path.clone(), std::fs::read(store.join(&f.path)).unwrap()))
        .collect();
    out.insert(
        "manifest.json".into(),
        std::fs::read(store.join("manifest.json")).unwrap(),
    );
    out
}

fn second_extract(dir: &Path) -> PathBuf {
    let extract = dir.join("extract-2026-07");
    std::fs::create_dir_all(&extract).unwrap();
    std::fs::write(
        extract.join("patients.csv"),
        "patient_id,sex,birth_year,death_at\nP4,M,1970,\n",
    )
    .unwrap();
    std::fs::write(
        extract.join("encounters.csv"),
        "encounter_id,patient_id,class,unit,admitted_at,discharged_at,discharge_status\nE5,P4,inpatient,Ward 4 North,2026-07-01T08:00,,\n",
    )
    .unwrap();
    // L2 is a corrected version of a stored result; L6 and L7 are new (L7 for a stored patient).
    std::fs::write(
        extract.join("lab_results.csv"),
        "result_id,patient_id,encounter_id,loinc,value,unit,collected_at,resulted_at,hemolysis_index\n\
         L2,P1,E1,2823-3,5.7,mmol/L,2026-03-04T06:00,2026-03-04T07:00,10\n\
         L6,P4,E5,2823-3,4.4,mmol/L,2026-07-02T06:00,,\n\
         L7,P2,,2823-3,4.9,mmol/L,2026-07-03T06:00,,\n",
    )
    .unwrap();
    std::fs::write(
        extract.join("medication_events.csv"),
        "event_id,patient_id,encounter_id,atc,drug_name,route,kind,start_at,end_at,days_supply,dose,dose_unit\n",
    )
    .unwrap();
    extract
}

fn july(mode: Mode) -> IngestOptions {
    IngestOptions {
        extract_end: Some("2026-07-31T23:59".into()),
        ..options(mode)
    }
}

#[test]
fn a_failure_at_any_commit_step_leaves_the_previous_store_readable_and_unchanged() {
    for step in CommitStep::ALL {
        let dir = tempfile::tempdir().unwrap();
        let store_dir = dir.path().join("store");
        ingest(
            &base_extract(dir.path()),
            &store_dir,
            &options(Mode::New),
            &NoProgress,
        )
        .unwrap();
        let before = listed(&store_dir);
        let mut opts = july(Mode::Append);
        opts.fail_point = Some(FailPoint { step, abort: false });
        let err = ingest(&second_extract(dir.path()), &store_dir, &opts, &NoProgress).unwrap_err();
        assert!(matches!(err, IngestError::Injected(_)), "{step:?}: {err}");
        assert!(
            store::verify(&store_dir).unwrap().is_empty(),
            "{step:?}: store must verify"
        );
        if step == CommitStep::ManifestRenamed {
            // The switch happened: the new generation is complete, only cleanup was skipped.
            let m = store::read_manifest(&store_dir).unwrap().unwrap();
            assert_eq!(m.generation, 2);
            assert_eq!(m.tables["lab_results"].rows, 7);
        } else {
            assert_eq!(
                listed(&store_dir),
                before,
                "{step:?}: what readers see must not change"
            );
        }
        // The next ingest succeeds and removes whatever the interrupted one left behind.
        let outcome = ingest(
            &second_extract(dir.path()),
            &store_dir,
            &july(Mode::Append),
            &NoProgress,
        )
        .unwrap();
        let m = outcome.manifest;
        assert!(store::verify(&store_dir).unwrap().is_empty());
        let on_disk: Vec<String> = snapshot(&store_dir)
            .into_keys()
            .filter(|k| k.ends_with(".parquet") || k.contains(".tmp-"))
            .collect();
        let mut listed_files: Vec<String> = m.all_files().map(|f| f.path.clone()).collect();
        listed_files.sort();
        assert_eq!(
            on_disk, listed_files,
            "{step:?}: leftovers must be cleaned up"
        );
    }
}

#[test]
fn re_running_the_same_extract_changes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let store_dir = dir.path().join("store");
    let extract = base_extract(dir.path());
    ingest(&extract, &store_dir, &options(Mode::New), &NoProgress).unwrap();
    let before = snapshot(&store_dir);
    for mode in [Mode::New, Mode::Append, Mode::Replace] {
        let again = ingest(&extract, &store_dir, &options(mode), &NoProgress).unwrap();
        assert!(again.unchanged, "{mode:?}");
        assert_eq!(snapshot(&store_dir), before, "{mode:?}");
    }
    // A different setting is not the same ingest.
    let other = IngestOptions {
        extract_end: Some("2026-07-01T00:00".into()),
        ..options(Mode::Replace)
    };
    assert!(
        !ingest(&extract, &store_dir, &other, &NoProgress)
            .unwrap()
            .unchanged
    );
}

#[test]
fn a_store_with_data_needs_append_or_replace() {
    let dir = tempfile::tempdir().unwrap();
    let store_dir = dir.path().join("store");
    ingest(
        &base_extract(dir.path()),
        &store_dir,
        &options(Mode::New),
        &NoProgress,
    )
    .unwrap();
    let err = ingest(
        &second_extract(dir.path()),
        &store_dir,
        &july(Mode::New),
        &NoProgress,
    )
    .unwrap_err();
    let text = err.to_string();
    assert!(
        text.contains("--append") && text.contains("--replace"),
        "{text}"
    );
}

#[test]
fn append_replaces_rows_by_id_and_resolves_patients_from_the_store() {
    let dir = tempfile::tempdir().unwrap();
    let store_dir = dir.path().join("store");
    ingest(
        &base_extract(dir.path()),
        &store_dir,
        &options(Mode::New),
        &NoProgress,
    )
    .unwrap();
    let outcome = ingest(
        &second_extract(dir.path()),
        &store_dir,
        &july(Mode::Append),
        &NoProgress,
    )
    .unwrap();
    let labs = &outcome.record.tables["lab_results"];
    assert_eq!(
        (
            labs.rows_read,
            labs.rows_accepted,
            labs.rows_rejected,
            labs.rows_replaced
        ),
        (3, 3, 0, 1)
    );
    let m = &outcome.manifest;
    // 5 stored - 1 replaced + 3 new.
    assert_eq!(m.tables["lab_results"].rows, 7);
    assert_eq!(m.tables["patients"].rows, 4);
    // Tables the new extract does not have are kept as stored.
    assert_eq!(m.tables["diagnoses"].rows, 1);
    assert_eq!(m.tables["medication_events"].rows, 3);
    assert_eq!(m.ingests.len(), 2);
    assert_eq!(m.extract_end, "2026-07-31T21:59:00.000000Z");
    assert!(store::verify(&store_dir).unwrap().is_empty());
}

#[test]
fn replace_rebuilds_from_the_new_extract_alone() {
    let dir = tempfile::tempdir().unwrap();
    let store_dir = dir.path().join("store");
    ingest(
        &base_extract(dir.path()),
        &store_dir,
        &options(Mode::New),
        &NoProgress,
    )
    .unwrap();
    let outcome = ingest(
        &second_extract(dir.path()),
        &store_dir,
        &july(Mode::Replace),
        &NoProgress,
    )
    .unwrap();
    let m = &outcome.manifest;
    assert_eq!(m.ingests.len(), 1);
    assert_eq!(m.tables["patients"].rows, 1);
    // L2 and L7 name patients that are no longer in the store.
    let labs = &outcome.record.tables["lab_results"];
    assert_eq!(labs.rejected_by_reason.get("unknown_patient"), Some(&2));
    assert!(!m.tables.contains_key("diagnoses"));
    assert!(store::verify(&store_dir).unwrap().is_empty());
}

#[test]
fn parquet_input_with_text_or_typed_columns_gives_the_same_result_as_csv() {
    let dir = tempfile::tempdir().unwrap();
    let csv_store = dir.path().join("csv-store");
    let csv_outcome = ingest(
        &base_extract(dir.path()),
        &csv_store,
        &options(Mode::New),
        &NoProgress,
    )
    .unwrap();

    let extract = base_extract(dir.path());
    std::fs::remove_file(extract.join("lab_results.csv")).unwrap();
    let text = |v: &[&str]| Arc::new(StringArray::from(v.to_vec())) as ArrayRef;
    let opt = |v: &[Option<&str>]| Arc::new(StringArray::from(v.to_vec())) as ArrayRef;
    let micros = |s: &str| {
        chrono::DateTime::parse_from_rfc3339(s)
            .unwrap()
            .timestamp_micros()
    };
    // Typed columns: value as a float, collected_at as a UTC timestamp (same instants as the CSV's
    // Berlin local times, one hour ahead of UTC in March-May... and two from late March).
    let batch = RecordBatch::try_from_iter(vec![
        ("result_id", text(&["L1", "L2", "L3", "L4", "L5"])),
        ("patient_id", text(&["P1", "P1", "P1", "P2", "P3"])),
        ("encounter_id", text(&["E1", "E1", "E1", "E2", "E3"])),
        (
            "loinc",
            text(&["2823-3", "2823-3", "2823-3", "2160-0", "2345-7"]),
        ),
        (
            "value",
            Arc::new(Float64Array::from(vec![4.2, 5.9, 4.8, 1.1, 180.0])) as ArrayRef,
        ),
        (
            "unit",
            text(&["mmol/L", "mmol/L", "mmol/L", "mg/dL", "mg/dL"]),
        ),
        (
            "collected_at",
            Arc::new(
                TimestampMicrosecondArray::from(vec![
                    micros("2026-03-01T08:00:00Z"),
                    micros("2026-03-04T05:00:00Z"),
                    micros("2026-03-04T11:00:00Z"),
                    micros("2026-04-02T21:00:00Z"),
                    micros("2026-05-11T05:00:00Z"),
                ])
                .with_timezone("UTC"),
            ) as ArrayRef,
        ),
        (
            "hemolysis_index",
            opt(&[Some("5"), Some("10"), None, None, None]),
        ),
        (
            "lab_note",
            opt(&[None, None, None, None, Some("not a contract column")]),
        ),
    ])
    .unwrap();
    let file = std::fs::File::create(extract.join("lab_results.parquet")).unwrap();
    let mut w = parquet::arrow::ArrowWriter::try_new(file, batch.schema(), None).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();

    let pq_store = dir.path().join("parquet-store");
    let pq_outcome = ingest(&extract, &pq_store, &options(Mode::New), &NoProgress).unwrap();
    let csv_labs = &csv_outcome.record.tables["lab_results"];
    let pq_labs = &pq_outcome.record.tables["lab_results"];
    assert_eq!(
        (pq_labs.rows_read, pq_labs.rows_accepted),
        (csv_labs.rows_read, csv_labs.rows_accepted)
    );
    assert_eq!(pq_labs.ignored_columns, vec!["lab_note".to_string()]);
    // Same instants stored either way.
    let read_times = |store_dir: &Path, m: &kcohort_model::Manifest| -> Vec<i64> {
        let f =
            std::fs::File::open(store_dir.join(&m.tables["lab_results"].files[0].path)).unwrap();
        let r = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(f)
            .unwrap()
            .build()
            .unwrap();
        let mut out = Vec::new();
        for b in r {
            let b = b.unwrap();
            let c = b
                .column_by_name("collected_at")
                .unwrap()
                .as_any()
                .downcast_ref::<TimestampMicrosecondArray>()
                .unwrap()
                .clone();
            out.extend(c.values().iter().copied());
        }
        out
    };
    assert_eq!(
        read_times(&pq_store, &pq_outcome.manifest),
        read_times(&csv_store, &csv_outcome.manifest)
    );
}
