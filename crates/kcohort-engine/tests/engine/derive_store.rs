//! `derive` and the store: the commit, the no-op re-run, the fingerprint, and the errors a user
//! can act on.

use crate::store::{batch, parse_time, write_store};
use kcohort_engine::definition::{Definition, plan_definition};
use kcohort_engine::{EngineError, EngineOptions, Parameters, derive, read_manifest, session};
use kcohort_model::TableName;
use kcohort_model::study::{DEFAULT_STUDY_TOML, Study};
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::path::Path;

fn small_store(root: &Path) {
    let rows = |pairs: &[&[(&str, &str)]]| -> Vec<BTreeMap<String, Option<String>>> {
        pairs
            .iter()
            .map(|r| {
                r.iter()
                    .map(|(k, v)| (k.to_string(), Some(v.to_string())))
                    .collect()
            })
            .collect()
    };
    let labs = rows(&[
        &[
            ("patient_id", "p1"),
            ("collected_at", "2024-01-01T08:00"),
            ("value", "6.1"),
        ],
        &[
            ("patient_id", "p1"),
            ("collected_at", "2024-01-01T12:00"),
            ("value", "4.4"),
        ],
        &[
            ("patient_id", "p2"),
            ("collected_at", "2024-01-02T08:00"),
            ("value", "7.1"),
        ],
    ]);
    let patients = rows(&[&[("patient_id", "p1")], &[("patient_id", "p2")]]);
    write_store(
        root,
        &[
            (
                TableName::Patients,
                batch(TableName::Patients, &patients).unwrap(),
            ),
            (
                TableName::LabResults,
                batch(TableName::LabResults, &labs).unwrap(),
            ),
        ],
        parse_time("2024-02-01T00:00").unwrap(),
        "Europe/Berlin",
    );
}

fn options() -> EngineOptions {
    EngineOptions {
        target_partitions: 2,
        ..EngineOptions::default()
    }
}

fn files_under(dir: &Path) -> Vec<String> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).into_iter().flatten().flatten() {
            let p = e.path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push(p.strip_prefix(dir).unwrap().display().to_string());
            }
        }
    }
    out.sort();
    out
}

#[test]
fn derive_commits_and_a_rerun_is_a_no_op() {
    let folder = tempfile::tempdir().unwrap();
    let root = folder.path();
    small_store(root);
    let study = Study::default();

    let first = derive(root, &study, &options()).unwrap();
    assert!(!first.unchanged);
    assert_eq!(first.generation, 2);
    let manifest = read_manifest(root).unwrap();
    assert_eq!(manifest.generation, 2);
    assert_eq!(manifest.derived["episodes"].rows, 2);
    assert_eq!(manifest.derived["potassium_quality"].rows, 1);
    for table in manifest.derived.values() {
        for f in &table.files {
            assert!(
                f.path
                    .ends_with(&format!("-{}.parquet", &first.fingerprint[..16])),
                "{}",
                f.path
            );
            let bytes = std::fs::read(root.join(&f.path)).unwrap();
            assert_eq!(bytes.len() as u64, f.bytes);
            let sha: String = Sha256::digest(&bytes)
                .iter()
                .map(|b| format!("{b:02x}"))
                .collect();
            assert_eq!(sha, f.sha256);
        }
    }
    let text = std::fs::read_to_string(root.join("manifest.json")).unwrap();

    // Same store, same study (also when written as the commented default file): nothing to do.
    let again = derive(
        root,
        &Study::from_toml(DEFAULT_STUDY_TOML).unwrap(),
        &options(),
    )
    .unwrap();
    assert!(again.unchanged);
    assert_eq!(again.fingerprint, first.fingerprint);
    assert_eq!(
        std::fs::read_to_string(root.join("manifest.json")).unwrap(),
        text
    );

    // A changed parameter re-derives; the older derived files are removed, as are leftovers.
    std::fs::write(
        root.join("derived/episodes/.tmp-g000009-0.parquet"),
        b"partial",
    )
    .unwrap();
    let mut changed = Study::default();
    changed.episode.high_above = 7.0;
    let third = derive(root, &changed, &options()).unwrap();
    assert!(!third.unchanged);
    assert_ne!(third.fingerprint, first.fingerprint);
    let manifest = read_manifest(root).unwrap();
    assert_eq!(manifest.generation, 3);
    assert_eq!(manifest.derived["episodes"].rows, 1);
    let listed: Vec<String> = manifest
        .derived
        .values()
        .flat_map(|t| {
            t.files
                .iter()
                .map(|f| f.path.trim_start_matches("derived/").to_string())
        })
        .collect::<std::collections::BTreeSet<_>>()
        .into_iter()
        .collect();
    assert_eq!(files_under(&root.join("derived")), listed);
}

#[test]
fn errors_name_the_problem() {
    let folder = tempfile::tempdir().unwrap();
    let err = derive(folder.path(), &Study::default(), &options()).unwrap_err();
    assert!(err.to_string().contains("not a kcohort store"), "{err}");

    small_store(folder.path());
    let mut study = Study::default();
    study.site.timezone = "UTC".into();
    let err = derive(folder.path(), &study, &options()).unwrap_err();
    assert!(
        err.to_string().contains("ingested with `Europe/Berlin`"),
        "{err}"
    );

    study.site.timezone = "Europe/Berlin".into();
    assert!(derive(folder.path(), &study, &options()).is_ok());

    let mut bad = Study::default();
    bad.episode.max_gap_hours = -1.0;
    let err = derive(folder.path(), &bad, &options()).unwrap_err();
    assert!(err.to_string().contains("episode.max_gap_hours"), "{err}");
}

#[test]
fn a_definition_holds_only_views_and_one_query() {
    let runtime = tokio::runtime::Builder::new_current_thread()
        .build()
        .unwrap();
    let ctx = session(&options()).unwrap();
    let parameters = Parameters::from_study(&Study::default(), 0);
    for sql in [
        "COPY (SELECT 1) TO '/tmp/kcohort-never.parquet'",
        "CREATE TABLE t AS SELECT 1",
        "SET datafusion.execution.batch_size = 1",
        "SELECT 1; SELECT 2",
        "CREATE VIEW v AS SELECT 1",
    ] {
        let definition = Definition {
            table: "t",
            file: "t.sql",
            sql,
            settings: &[],
        };
        let result = runtime.block_on(plan_definition(&ctx, &definition, &parameters));
        assert!(
            matches!(result, Err(EngineError::Definition { .. })),
            "{sql}: {:?}",
            result.err()
        );
    }
    assert!(!Path::new("/tmp/kcohort-never.parquet").exists());
}

#[test]
fn a_tiny_memory_pool_spills_or_fails_with_a_hint() {
    let folder = tempfile::tempdir().unwrap();
    small_store(folder.path());
    let tiny = EngineOptions {
        memory_limit_bytes: 4 << 10,
        target_partitions: 2,
        spill_dir: Some(folder.path().join("spill")),
    };
    std::fs::create_dir_all(folder.path().join("spill")).unwrap();
    match derive(folder.path(), &Study::default(), &tiny) {
        Ok(outcome) => assert!(!outcome.unchanged),
        Err(e @ EngineError::OutOfMemory { .. }) => {
            let text = e.to_string();
            assert!(
                text.contains("under the 4 KiB limit")
                    && text.contains("hint: raise --memory-limit"),
                "{text}"
            );
        }
        Err(other) => panic!("expected success or a memory error, got: {other}"),
    }
    // Nothing was committed on failure, or all was; a failure leaves no temporary file behind.
    let manifest = read_manifest(folder.path()).unwrap();
    assert!(
        manifest.generation == 1 || manifest.derived.len() == kcohort_engine::DEFINITIONS.len()
    );
    if manifest.generation == 1 {
        let mut left = Vec::new();
        let mut stack = vec![folder.path().join("derived")];
        while let Some(dir) = stack.pop() {
            for entry in std::fs::read_dir(&dir).into_iter().flatten().flatten() {
                let path = entry.path();
                if path.is_dir() {
                    stack.push(path);
                } else {
                    left.push(path);
                }
            }
        }
        assert!(left.is_empty(), "left behind: {left:?}");
    }
}
