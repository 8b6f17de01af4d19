//! Planted truths through ingest: on a 10,000-patient synthetic extract, every planted malformed
//! row is rejected under the reason it was planted with, every clean row is accepted, and the
//! counts reconcile. (The generator records what it planted in truth.json.)

use kcohort_ingest::{IngestOptions, Mode, NoProgress, ingest, store};
use kcohort_synth::SynthConfig;

#[test]
fn ingest_recovers_exactly_the_planted_rejects_of_a_10000_patient_extract() {
    let dir = tempfile::tempdir().unwrap();
    let extract = dir.path().join("extract");
    let config = SynthConfig {
        patients: 10_000,
        seed: 20_261_201,
        ..Default::default()
    };
    let truth = kcohort_synth::generate(&config, &extract).unwrap();
    let options = IngestOptions {
        site_timezone: truth.site_timezone.clone(),
        extract_end: Some(truth.extract_end_local.clone()),
        mode: Mode::New,
        fail_point: None,
    };
    let store_dir = dir.path().join("store");
    let outcome = ingest(&extract, &store_dir, &options, &NoProgress).unwrap();
    let mut problems = Vec::new();
    for (table, planted) in &truth.files {
        let counts = &outcome.record.tables[table];
        if !counts.reconciles() {
            problems.push(format!("{table}: does not reconcile {counts:?}"));
        }
        if counts.rows_read != planted.rows {
            problems.push(format!(
                "{table}: read {} rows, the generator wrote {}",
                counts.rows_read, planted.rows
            ));
        }
        if counts.rows_accepted != planted.clean_rows {
            problems.push(format!(
                "{table}: accepted {}, the generator wrote {} clean rows",
                counts.rows_accepted, planted.clean_rows
            ));
        }
        if counts.rejected_by_reason != planted.planted_defects {
            problems.push(format!(
                "{table}: rejected {:?}, planted {:?}",
                counts.rejected_by_reason, planted.planted_defects
            ));
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
    assert!(
        truth
            .files
            .values()
            .map(|f| f.planted_defects.len())
            .sum::<usize>()
            >= 10,
        "the extract must plant many kinds of defect"
    );
    assert!(store::verify(&store_dir).unwrap().is_empty());
}
