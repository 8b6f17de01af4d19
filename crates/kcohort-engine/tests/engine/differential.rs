//! Differential test: the SQL definition (queries/episodes.sql, run by `derive` over a Parquet
//! store) and the plain Rust reading in `reference.rs` give exactly the same episodes table on
//! random patients. Times and values are drawn from grids that hit every boundary of the rules
//! (exactly 5.0, 5.5, 6.0, 6.5, 7.0; gaps of exactly 6, 24, 48 and 168 hours; ties in time).
//! Cases: `PROPTEST_CASES` (default 6), each with several hundred patients.

use crate::reference::{self, Encounter, Episode, LabResult, Medication};
use crate::store::{batch, format_time, write_store};
use datafusion::arrow::array::{Array, AsArray, RecordBatch};
use datafusion::arrow::datatypes::{Float64Type, Int32Type, Int64Type, TimestampMicrosecondType};
use datafusion::parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use kcohort_engine::{EngineOptions, read_manifest};
use kcohort_model::TableName;
use kcohort_model::study::Study;
use proptest::prelude::*;
use proptest::test_runner::FileFailurePersistence;
use std::collections::BTreeMap;
use std::path::Path;

const HOUR: i64 = 3_600_000_000;
/// 2024-03-01T00:00:00Z: the month of the European daylight-saving change.
const BASE: i64 = 1_709_251_200_000_000;

const DELTA_HOURS: &[f64] = &[
    0.0, 0.0, 0.5, 1.0, 3.0, 5.0, 6.0, 6.0, 7.0, 12.0, 23.0, 24.0, 24.0, 25.0, 47.0, 48.0, 49.0,
    100.0, 167.0, 168.0, 168.0, 169.0, 300.0,
];
const VALUES: &[f64] = &[
    3.5, 4.2, 4.9, 5.0, 5.0, 5.01, 5.3, 5.5, 5.5, 5.51, 5.6, 5.9, 6.0, 6.01, 6.4, 6.5, 6.9, 7.0,
    7.01, 8.5,
];
const HEMOLYSIS: &[Option<f64>] = &[
    None,
    None,
    None,
    None,
    None,
    None,
    Some(20.0),
    Some(99.9),
    Some(100.0),
    Some(250.0),
];
const LOINC: &[&str] = &["2823-3", "2823-3", "2823-3", "6298-4", "32713-0"];
const ID_PREFIX: &[&str] = &["a", "b", "B", "0", "_", "ab"];
const CLASSES: &[&str] = &["inpatient", "inpatient", "emergency", "outpatient"];
const ADMIT_HOURS: &[f64] = &[-100.0, -48.0, -47.0, -24.0, -1.0, 0.0, 2.0, 24.0, 48.0];
const STAY_HOURS: &[Option<f64>] = &[
    None,
    Some(1.0),
    Some(24.0),
    Some(48.0),
    Some(72.0),
    Some(200.0),
    Some(1000.0),
];
const ATC: &[&str] = &[
    "A10AB01", "C03CA01", "R03AC02", "C09AA02", "V03AE01", "B05XA02", "A12AA07",
];
const KINDS: &[&str] = &["administer", "administer", "dispense", "order"];
const MED_HOURS: &[f64] = &[-1.0, 0.0, 0.0, 1.0, 3.0, 6.0, 7.0];

#[derive(Debug, Clone)]
struct PatientSpec {
    start_hours: u32,
    results: Vec<(usize, usize, usize, usize, usize)>,
    encounters: Vec<(usize, usize, usize)>,
    medications: Vec<(usize, usize, usize, usize)>,
}

fn patient() -> impl Strategy<Value = PatientSpec> {
    (
        0u32..72,
        prop::collection::vec(
            (
                0..DELTA_HOURS.len(),
                0..VALUES.len(),
                0..HEMOLYSIS.len(),
                0..LOINC.len(),
                0..ID_PREFIX.len(),
            ),
            0..12,
        ),
        prop::collection::vec(
            (0..CLASSES.len(), 0..ADMIT_HOURS.len(), 0..STAY_HOURS.len()),
            0..3,
        ),
        prop::collection::vec(
            (0..ATC.len(), 0..KINDS.len(), 0..12usize, 0..MED_HOURS.len()),
            0..3,
        ),
    )
        .prop_map(
            |(start_hours, results, encounters, medications)| PatientSpec {
                start_hours,
                results,
                encounters,
                medications,
            },
        )
}

struct Data {
    results: Vec<LabResult>,
    encounters: Vec<Encounter>,
    medications: Vec<Medication>,
    extract_end: i64,
}

fn build(patients: &[PatientSpec]) -> Data {
    let mut d = Data {
        results: Vec::new(),
        encounters: Vec::new(),
        medications: Vec::new(),
        extract_end: BASE,
    };
    for (n, spec) in patients.iter().enumerate() {
        let patient_id = format!("p{n:04}");
        let mut t = BASE + i64::from(spec.start_hours) * HOUR;
        let mut times = Vec::new();
        for (i, &(delta, value, hemolysis, loinc, prefix)) in spec.results.iter().enumerate() {
            t += (DELTA_HOURS[delta] * HOUR as f64) as i64;
            times.push(t);
            d.results.push(LabResult {
                patient_id: patient_id.clone(),
                result_id: format!("{}{n}x{i}", ID_PREFIX[prefix]),
                loinc: LOINC[loinc].to_string(),
                collected_at: t,
                value: VALUES[value],
                hemolysis_index: HEMOLYSIS[hemolysis],
            });
        }
        let first = times.first().copied().unwrap_or(t);
        for (i, &(class, admit, stay)) in spec.encounters.iter().enumerate() {
            let admitted_at = first + (ADMIT_HOURS[admit] * HOUR as f64) as i64;
            d.encounters.push(Encounter {
                encounter_id: format!("e{}{n}", (b'z' - i as u8) as char),
                patient_id: patient_id.clone(),
                class: CLASSES[class].to_string(),
                unit: format!("U{class}{admit}"),
                admitted_at,
                discharged_at: STAY_HOURS[stay].map(|h| admitted_at + (h * HOUR as f64) as i64),
            });
        }
        for &(atc, kind, at, offset) in &spec.medications {
            let anchor = times.get(at % times.len().max(1)).copied().unwrap_or(first);
            d.medications.push(Medication {
                patient_id: patient_id.clone(),
                atc: ATC[atc].to_string(),
                kind: KINDS[kind].to_string(),
                start_at: anchor + (MED_HOURS[offset] * HOUR as f64) as i64,
            });
        }
    }
    // As ingest defaults it: the latest start time (discharges after it are cut by the rules).
    d.extract_end = d
        .results
        .iter()
        .map(|r| r.collected_at)
        .chain(d.encounters.iter().map(|e| e.admitted_at))
        .chain(d.medications.iter().map(|m| m.start_at))
        .max()
        .unwrap_or(BASE);
    d
}

fn row(pairs: &[(&str, Option<String>)]) -> BTreeMap<String, Option<String>> {
    pairs
        .iter()
        .map(|(k, v)| (k.to_string(), v.clone()))
        .collect()
}

fn write(root: &Path, d: &Data) {
    let mut patients: Vec<&str> = d.results.iter().map(|r| r.patient_id.as_str()).collect();
    patients.extend(d.encounters.iter().map(|e| e.patient_id.as_str()));
    patients.extend(d.medications.iter().map(|m| m.patient_id.as_str()));
    patients.sort();
    patients.dedup();
    let patients: Vec<_> = patients
        .iter()
        .map(|p| row(&[("patient_id", Some(p.to_string()))]))
        .collect();
    let labs: Vec<_> = d
        .results
        .iter()
        .map(|r| {
            row(&[
                ("patient_id", Some(r.patient_id.clone())),
                ("result_id", Some(r.result_id.clone())),
                ("loinc", Some(r.loinc.clone())),
                ("collected_at", Some(format_time(r.collected_at))),
                ("value", Some(format!("{:?}", r.value))),
                (
                    "hemolysis_index",
                    r.hemolysis_index.map(|h| format!("{h:?}")),
                ),
            ])
        })
        .collect();
    let encounters: Vec<_> = d
        .encounters
        .iter()
        .map(|e| {
            row(&[
                ("encounter_id", Some(e.encounter_id.clone())),
                ("patient_id", Some(e.patient_id.clone())),
                ("class", Some(e.class.clone())),
                ("unit", Some(e.unit.clone())),
                ("admitted_at", Some(format_time(e.admitted_at))),
                ("discharged_at", e.discharged_at.map(format_time)),
            ])
        })
        .collect();
    let medications: Vec<_> = d
        .medications
        .iter()
        .enumerate()
        .map(|(i, m)| {
            row(&[
                ("event_id", Some(format!("m{i}"))),
                ("patient_id", Some(m.patient_id.clone())),
                ("atc", Some(m.atc.clone())),
                ("kind", Some(m.kind.clone())),
                ("start_at", Some(format_time(m.start_at))),
            ])
        })
        .collect();
    let batches = vec![
        (
            TableName::Patients,
            batch(TableName::Patients, &patients).unwrap(),
        ),
        (
            TableName::Encounters,
            batch(TableName::Encounters, &encounters).unwrap(),
        ),
        (
            TableName::LabResults,
            batch(TableName::LabResults, &labs).unwrap(),
        ),
        (
            TableName::MedicationEvents,
            batch(TableName::MedicationEvents, &medications).unwrap(),
        ),
    ];
    write_store(root, &batches, d.extract_end, "UTC");
}

/// Read the derived episodes table back from its Parquet file.
pub fn read_episodes(root: &Path) -> Vec<Episode> {
    let manifest = read_manifest(root).unwrap();
    let mut out = Vec::new();
    for f in &manifest.derived["episodes"].files {
        let file = std::fs::File::open(root.join(&f.path)).unwrap();
        let reader = ParquetRecordBatchReaderBuilder::try_new(file)
            .unwrap()
            .build()
            .unwrap();
        for b in reader {
            let b: RecordBatch = b.unwrap();
            let text = |name: &str, i: usize| {
                let c = b.column_by_name(name).unwrap().as_string::<i32>();
                (!c.is_null(i)).then(|| c.value(i).to_string())
            };
            let time = |name: &str, i: usize| {
                let c = b
                    .column_by_name(name)
                    .unwrap()
                    .as_primitive::<TimestampMicrosecondType>();
                (!c.is_null(i)).then(|| c.value(i))
            };
            let float = |name: &str, i: usize| {
                b.column_by_name(name)
                    .unwrap()
                    .as_primitive::<Float64Type>()
                    .value(i)
            };
            let int = |name: &str, i: usize| {
                b.column_by_name(name)
                    .unwrap()
                    .as_primitive::<Int64Type>()
                    .value(i)
            };
            let flag = |name: &str, i: usize| b.column_by_name(name).unwrap().as_boolean().value(i);
            let grades = b
                .column_by_name("ctcae_grade")
                .unwrap()
                .as_primitive::<Int32Type>();
            for i in 0..b.num_rows() {
                out.push(Episode {
                    episode_id: text("episode_id", i).unwrap(),
                    patient_id: text("patient_id", i).unwrap(),
                    onset_at: time("onset_at", i).unwrap(),
                    onset_value: float("onset_value", i),
                    peak_value: float("peak_value", i),
                    end_at: time("end_at", i).unwrap(),
                    n_results: int("n_results", i),
                    n_high: int("n_high", i),
                    resolved: flag("resolved", i),
                    n_rebounds: int("n_rebounds", i),
                    unconfirmed: flag("unconfirmed", i),
                    ctcae_grade: (!grades.is_null(i)).then(|| grades.value(i)),
                    severity: text("severity", i).unwrap(),
                    encounter_id: text("encounter_id", i),
                    encounter_class: text("encounter_class", i),
                    unit: text("unit", i),
                    setting: text("setting", i).unwrap(),
                    onset_result_id: text("onset_result_id", i).unwrap(),
                    first_treatment_at: time("first_treatment_at", i),
                });
            }
        }
    }
    out
}

/// The default study and two others that move the boundaries (no rebounds and a short gap; high
/// and normal meeting at 5.0 with hospital-acquired from admission).
fn studies() -> Vec<Study> {
    let mut short = Study::default();
    short.episode.rebound_hours = 0.0;
    short.episode.max_gap_hours = 24.0;
    short.episode.spurious_repeat_hours = 0.0;
    let mut touching = Study::default();
    touching.episode.high_above = 5.0;
    touching.episode.normal_at_or_below = 5.0;
    touching.episode.upper_normal_limit = 5.5;
    touching.episode.hospital_acquired_after_hours = 0.0;
    touching.potassium.hemolysis_cutoff = 99.9;
    vec![Study::default(), short, touching]
}

fn cases() -> u32 {
    std::env::var("PROPTEST_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(6)
}

proptest! {
    #![proptest_config(ProptestConfig {
        cases: cases(),
        max_shrink_iters: 200,
        failure_persistence: Some(Box::new(FileFailurePersistence::Direct(
            "tests/proptest-regressions/differential.txt",
        ))),
        ..ProptestConfig::default()
    })]

    #[test]
    fn sql_episodes_equal_the_reference(
        patients in prop::collection::vec(patient(), 300..700),
        study_index in 0..3usize,
    ) {
        let study = &studies()[study_index];
        let data = build(&patients);
        let folder = tempfile::tempdir().unwrap();
        write(folder.path(), &data);
        let options = EngineOptions { target_partitions: 2, ..EngineOptions::default() };
        kcohort_engine::derive(folder.path(), study, &options).unwrap();
        let sql = read_episodes(folder.path());
        let expected = reference::episodes(&data.results, &data.encounters, &data.medications, study, data.extract_end);
        prop_assert!(!expected.is_empty());
        if sql != expected {
            let first = sql.iter().zip(&expected).position(|(a, b)| a != b).unwrap_or(sql.len().min(expected.len()));
            prop_assert!(
                false,
                "study {study_index}: {} SQL vs {} reference episodes; first difference at {first}:\nSQL       {:?}\nreference {:?}",
                sql.len(), expected.len(), sql.get(first), expected.get(first)
            );
        }
    }
}
