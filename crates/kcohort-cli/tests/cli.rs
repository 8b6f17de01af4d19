//! The `kcohort` binary as a user runs it: exit codes, what it prints, and a real process kill in
//! the middle of a commit.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn kcohort() -> Command {
    Command::new(env!("CARGO_BIN_EXE_kcohort"))
}

fn base_fixture() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/fixtures/ingest/_base")
}

fn ingest(extract: &Path, store: &Path, extra: &[&str]) -> Output {
    kcohort()
        .arg("ingest")
        .arg(extract)
        .arg("--store")
        .arg(store)
        .args([
            "--site-timezone",
            "Europe/Berlin",
            "--extract-end",
            "2026-06-30T23:59",
        ])
        .args(extra)
        .output()
        .unwrap()
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

#[test]
fn ingest_prints_a_reconciled_summary_and_no_patient_level_values() {
    let dir = tempfile::tempdir().unwrap();
    let out = ingest(&base_fixture(), &dir.path().join("store"), &[]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let stdout = text(&out.stdout);
    assert!(stdout.contains("lab_results"), "{stdout}");
    assert!(stdout.contains("read = accepted + rejected"), "{stdout}");
    assert!(!stdout.contains("DOES NOT RECONCILE"), "{stdout}");
    let all = stdout + &text(&out.stderr);
    for value in ["P1", "L2", "5.9", "Ward 4 North", "spironolactone"] {
        assert!(
            !all.contains(value),
            "printed a row-level value {value:?}:\n{all}"
        );
    }
}

#[test]
fn rejected_rows_are_counted_by_reason_without_their_values() {
    let dir = tempfile::tempdir().unwrap();
    let extract = dir.path().join("extract");
    std::fs::create_dir_all(&extract).unwrap();
    for e in std::fs::read_dir(base_fixture()).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), extract.join(e.file_name())).unwrap();
    }
    let labs = extract.join("lab_results.csv");
    let mut content = std::fs::read_to_string(&labs).unwrap();
    content.push_str("L9,P1,E1,2823-3,13.7,mmol/L,2026-03-05T06:00,,\n");
    std::fs::write(&labs, content).unwrap();
    let out = ingest(&extract, &dir.path().join("store"), &[]);
    assert!(out.status.success(), "{}", text(&out.stderr));
    let stdout = text(&out.stdout);
    assert!(stdout.contains("impossible_value"), "{stdout}");
    assert!(
        !stdout.contains("13.7") && !stdout.contains("L9"),
        "{stdout}"
    );
}

#[test]
fn user_errors_exit_with_1_and_say_what_to_fix() {
    let dir = tempfile::tempdir().unwrap();
    let out = kcohort()
        .args(["ingest"])
        .arg(base_fixture())
        .arg("--store")
        .arg(dir.path().join("store"))
        .args(["--site-timezone", "Mars/Olympus"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let stderr = text(&out.stderr);
    assert!(
        stderr.contains("IANA") && stderr.contains("+01:00"),
        "{stderr}"
    );

    let missing = kcohort()
        .args(["ingest", "no/such/folder", "--store"])
        .arg(dir.path().join("s"))
        .output()
        .unwrap();
    assert_eq!(missing.status.code(), Some(1));
    assert!(
        text(&missing.stderr).contains("does not exist"),
        "{}",
        text(&missing.stderr)
    );

    // An unexposed comparator is refused with the reason and what to use instead.
    let unexposed = kcohort()
        .args(["compare", "--store"])
        .arg(dir.path().join("s"))
        .args(["--exposure", "ace_inhibitor", "--comparator", "unexposed"])
        .output()
        .unwrap();
    assert_eq!(unexposed.status.code(), Some(1));
    let stderr = text(&unexposed.stderr);
    assert!(
        stderr.contains("immortal time") && stderr.contains("--comparator calcium_channel_blocker"),
        "{stderr}"
    );

    // A comparator the study does not have: named, with the classes it has.
    let causes = kcohort()
        .args(["causes", "--store"])
        .arg(dir.path().join("s"))
        .args(["--comparator", "ccb"])
        .output()
        .unwrap();
    assert_eq!(causes.status.code(), Some(1));
    let stderr = text(&causes.stderr);
    assert!(
        stderr.contains("`ccb` is not a drug class") && stderr.contains("calcium_channel_blocker"),
        "{stderr}"
    );
}

#[test]
fn a_process_killed_during_the_commit_leaves_the_previous_store_intact() {
    let dir = tempfile::tempdir().unwrap();
    let store = dir.path().join("store");
    assert!(ingest(&base_fixture(), &store, &[]).status.success());
    let manifest_before = std::fs::read(store.join("manifest.json")).unwrap();
    for step in ["parts-written", "parts-renamed", "manifest-written"] {
        let out = kcohort()
            .env("KCOHORT_FAIL_AT", format!("{step}:abort"))
            .arg("ingest")
            .arg(base_fixture())
            .arg("--store")
            .arg(&store)
            .args([
                "--site-timezone",
                "Europe/Berlin",
                "--extract-end",
                "2026-07-31T23:59",
                "--replace",
            ])
            .output()
            .unwrap();
        assert!(
            !out.status.success(),
            "{step}: the process should have been aborted"
        );
        assert_eq!(
            out.status.code(),
            None,
            "{step}: killed by a signal, not an exit"
        );
        assert_eq!(
            std::fs::read(store.join("manifest.json")).unwrap(),
            manifest_before,
            "{step}"
        );
        let verify = kcohort_ingest::store::verify(&store).unwrap();
        assert!(verify.is_empty(), "{step}: {verify:?}");
    }
}

/// Every file under `dir` with its bytes.
fn snapshot(dir: &Path) -> std::collections::BTreeMap<PathBuf, Vec<u8>> {
    let mut out = std::collections::BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for entry in std::fs::read_dir(&d).unwrap() {
            let p = entry.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(p.clone(), std::fs::read(&p).unwrap());
            }
        }
    }
    out
}

/// The read-only gate of `kcohort sql`: plain queries run over input and derived tables; DDL,
/// DML, COPY, SET and the rest are refused (also inside CTEs, behind EXPLAIN and after a first
/// statement), a file path is never a table, and the store's files are byte-identical after.
#[test]
fn sql_is_read_only() {
    let dir = tempfile::tempdir().unwrap();
    let store = dir.path().join("store");
    assert!(ingest(&base_fixture(), &store, &[]).status.success());
    let derive = kcohort()
        .args(["derive", "--store"])
        .arg(&store)
        .output()
        .unwrap();
    assert!(
        derive.status.success(),
        "{}",
        String::from_utf8_lossy(&derive.stderr)
    );
    let before = snapshot(&store);

    let sql = |query: &str| {
        kcohort()
            .args(["sql", "--store"])
            .arg(&store)
            .arg(query)
            .output()
            .unwrap()
    };
    let ok = sql("SELECT COUNT(*) AS n FROM episodes JOIN patients USING (patient_id)");
    assert!(
        ok.status.success(),
        "{}",
        String::from_utf8_lossy(&ok.stderr)
    );
    let csv = kcohort()
        .args(["sql", "--store"])
        .arg(&store)
        .args([
            "--format",
            "csv",
            "SELECT sex, COUNT(*) AS n FROM patients GROUP BY sex ORDER BY sex",
        ])
        .output()
        .unwrap();
    assert!(String::from_utf8_lossy(&csv.stdout).starts_with("sex,n\n"));

    let outside = dir.path().join("written-by-sql.csv");
    let outside = outside.display();
    let forbidden = [
        "CREATE TABLE t AS SELECT 1".to_string(),
        "CREATE VIEW v AS SELECT * FROM patients".into(),
        "CREATE EXTERNAL TABLE t STORED AS CSV LOCATION '/etc/passwd'".into(),
        "CREATE SCHEMA s".into(),
        "CREATE FUNCTION f(x INT) RETURNS INT RETURN x".into(),
        "DROP TABLE episodes".into(),
        "DROP VIEW IF EXISTS v".into(),
        "INSERT INTO patients SELECT * FROM patients".into(),
        "DELETE FROM patients".into(),
        "UPDATE patients SET sex = 'F'".into(),
        "TRUNCATE TABLE patients".into(),
        "ALTER TABLE patients ADD COLUMN x INT".into(),
        format!("COPY (SELECT * FROM patients) TO '{outside}'"),
        format!("COPY patients TO '{outside}' STORED AS CSV"),
        format!("EXPLAIN COPY patients TO '{outside}'"),
        "SET datafusion.execution.target_partitions = 1".into(),
        "SHOW ALL".into(),
        "PREPARE q AS SELECT 1".into(),
        "EXECUTE q".into(),
        "WITH x AS (SELECT 1) INSERT INTO patients SELECT * FROM patients".into(),
        "SELECT 1; DROP TABLE episodes".into(),
        "SELECT * FROM '/etc/passwd'".into(),
        "SELECT * FROM 'manifest.json'".into(),
        format!("SELECT * FROM '{}'", store.join("tables").display()),
    ];
    for query in &forbidden {
        let out = sql(query);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(
            out.status.code(),
            Some(1),
            "`{query}` was not refused: {err}"
        );
        assert!(err.contains("error:"), "`{query}`: {err}");
    }
    assert!(forbidden.len() >= 20);
    assert!(!dir.path().join("written-by-sql.csv").exists());
    assert_eq!(before, snapshot(&store), "the store changed");
}

/// `kcohort listing` on a hand-made extract (tests/fixtures/listing; the same patients as
/// crates/kcohort-engine/tests/slt/drug_event_listing.slt, whose comments work every value out),
/// checked field by field in the CSV, with local times in the site zone (Vienna, UTC+1 in
/// winter and UTC+2 from 31 March 2024: the extract's times are local and come back as given).
#[test]
fn listing_of_a_hand_made_case_field_by_field() {
    let dir = tempfile::tempdir().unwrap();
    let store = dir.path().join("store");
    let extract = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/fixtures/listing");
    let out = kcohort()
        .arg("ingest")
        .arg(&extract)
        .arg("--store")
        .arg(&store)
        .args([
            "--site-timezone",
            "Europe/Vienna",
            "--extract-end",
            "2024-06-01T00:00",
        ])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", text(&out.stderr));
    let out = kcohort()
        .args(["derive", "--store"])
        .arg(&store)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", text(&out.stderr));

    let listing = |class: &str, folder: &str| {
        kcohort()
            .args(["listing", "--store"])
            .arg(&store)
            .args([
                "--class",
                class,
                "--from",
                "2024-02-01",
                "--to",
                "2024-03-01",
            ])
            .arg("--out")
            .arg(dir.path().join(folder))
            .output()
            .unwrap()
    };
    let read = |folder: &str| -> Vec<std::collections::BTreeMap<String, String>> {
        let mut r = csv::Reader::from_path(dir.path().join(folder).join("listing.csv")).unwrap();
        let headers = r.headers().unwrap().clone();
        r.records()
            .map(|rec| {
                headers
                    .iter()
                    .zip(rec.unwrap().iter())
                    .map(|(h, v)| (h.to_string(), v.to_string()))
                    .collect()
            })
            .collect()
    };

    let out = listing("mra", "mra");
    assert!(out.status.success(), "{}", text(&out.stderr));
    assert!(text(&out.stderr).contains("must stay inside the committee"));
    let rows = read("mra");
    assert_eq!(rows.len(), 1);
    let expected = [
        ("episode_id", "hk-K1"),
        ("patient_id", "P1"),
        ("onset_local", "2024-02-03 08:00"),
        ("unit", "Ward 7"),
        ("setting", "hospital_acquired"),
        ("era_id", "mra-M3"),
        ("era_start_local", "2024-02-01 00:00"),
        ("day_on_drug", "3"),
        ("user_type", "new user"),
        ("other_suspect_classes", "ace_inhibitor"),
        ("other_causes", "acute_kidney_injury"),
        ("baseline_egfr", "47.8"),
        ("baseline_gfr_category", "G3a"),
        ("aki_stage", "1"),
        ("peak_value", "6.6"),
        ("severity", "severe"),
        ("ctcae_grade", "3"),
        ("unconfirmed", "no"),
        ("treatments", "calcium +30 min; insulin +60 min"),
        ("hypoglycemia", "yes"),
        ("lowest_glucose_after_insulin", "60"),
        ("rebound", "no"),
        ("died_within_window", "no"),
        ("dechallenge", "stopped"),
        ("restarted_local", "2024-04-01 00:00"),
    ];
    for (field, value) in expected {
        assert_eq!(rows[0][field], value, "field {field}");
    }
    assert_eq!(rows[0].len(), expected.len(), "no unchecked column");
    let html = std::fs::read_to_string(dir.path().join("mra").join("listing.html")).unwrap();
    for needle in [
        "must stay inside the committee",
        "not for decisions about individual patients",
        "calcium +30 min; insulin +60 min",
        "mineralocorticoid receptor antagonists",
    ] {
        assert!(html.contains(needle), "listing.html lacks {needle:?}");
    }

    // The ARB patient: died 3 days after onset (dechallenge `died`), no treatment.
    let out = listing("arb", "arb");
    assert!(out.status.success(), "{}", text(&out.stderr));
    let rows = read("arb");
    assert_eq!(rows.len(), 1);
    for (field, value) in [
        ("episode_id", "hk-K3"),
        ("onset_local", "2024-03-01 10:00"),
        ("setting", "community"),
        ("day_on_drug", "11"),
        ("user_type", "prevalent user"),
        ("baseline_gfr_category", "unknown"),
        ("baseline_egfr", ""),
        ("severity", "moderate"),
        ("treatments", ""),
        ("died_within_window", "yes"),
        ("dechallenge", "died"),
    ] {
        assert_eq!(rows[0][field], value, "field {field}");
    }

    // The --to date is inclusive in the site calendar: 2024-02-02 leaves the Feb 3 onset out.
    let out = kcohort()
        .args(["listing", "--store"])
        .arg(&store)
        .args([
            "--class",
            "mra",
            "--from",
            "2024-01-01",
            "--to",
            "2024-02-02",
        ])
        .arg("--out")
        .arg(dir.path().join("none"))
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", text(&out.stderr));
    assert!(read("none").is_empty());

    // A class the study does not have, and a comparator-only class: user errors.
    for (class, says) in [
        ("statins", "is not a drug class of the study"),
        ("calcium_channel_blocker", "comparator-only"),
    ] {
        let out = listing(class, "bad");
        assert_eq!(out.status.code(), Some(1), "{}", text(&out.stderr));
        assert!(text(&out.stderr).contains(says), "{}", text(&out.stderr));
    }
}

/// `kcohort sql ... | head -2`: the reader closes the pipe early; kcohort stops quietly (exit 0,
/// no panic or error message), whether the write fails in `println!` (table format) or in the
/// CSV writer. Two million rows are far more than a pipe buffers, so the write does fail.
#[test]
fn a_reader_that_stops_early_is_not_an_error() {
    use std::io::{BufRead, BufReader};
    use std::process::Stdio;
    let dir = tempfile::tempdir().unwrap();
    let store = dir.path().join("store");
    assert!(ingest(&base_fixture(), &store, &[]).status.success());
    for format in ["table", "csv"] {
        let mut child = kcohort()
            .args(["sql", "--store"])
            .arg(&store)
            .args(["--format", format, "--max-rows", "3000000"])
            .arg("SELECT value FROM generate_series(1, 2000000) AS t(value)")
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let mut first = String::new();
        BufReader::new(child.stdout.take().unwrap())
            .read_line(&mut first)
            .unwrap();
        assert!(!first.is_empty());
        // The reader is gone now (its end of the pipe was dropped above).
        let out = child.wait_with_output().unwrap();
        let stderr = text(&out.stderr);
        assert!(out.status.success(), "{format}: {:?} {stderr}", out.status);
        assert!(
            !stderr.contains("panicked") && !stderr.contains("error"),
            "{format}: {stderr}"
        );
    }
}
