//! End-to-end checks of a generated extract: files, contract, planted defects, planted effects.
//!
//! One 6,000-patient extract (seed 7) is generated once and read by every test; the environment
//! variables `KCOHORT_SYNTH_TEST_SEED` and `KCOHORT_SYNTH_TEST_PATIENTS` choose another one (to
//! sweep seeds or try a bigger extract; the tolerances are stated for 6,000). The files are
//! read back with plain, independent readings of the contract and of the episode rules in
//! truth.json, and what they find is compared with truth.json: exactly for counts the generator
//! controls, within a stated sampling interval for planted probabilities.

use chrono::{NaiveDateTime, TimeZone};
use chrono_tz::Tz;
use kcohort_model::{Analyte, ColumnKind, RejectReason, TableName, TimeRole, code};
use kcohort_synth::{SynthConfig, Truth, generate};
use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

const DEFAULT_PATIENTS: u64 = 6000;
const DEFAULT_SEED: u64 = 7;
const HOUR: i64 = 3600;
const DAY: i64 = 86_400;

struct Shared {
    patients: u64,
    seed: u64,
    dir: PathBuf,
    truth: Truth,
    tables: BTreeMap<TableName, Table>,
    reading: Reading,
}

struct Table {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

impl Table {
    fn col(&self, name: &str) -> usize {
        self.header
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("no column {name}"))
    }
}

fn shared() -> &'static Shared {
    static SHARED: OnceLock<Shared> = OnceLock::new();
    SHARED.get_or_init(|| {
        let number = |name: &str, default: u64| {
            std::env::var(name)
                .ok()
                .and_then(|v| v.parse().ok())
                .unwrap_or(default)
        };
        let patients = number("KCOHORT_SYNTH_TEST_PATIENTS", DEFAULT_PATIENTS);
        let seed = number("KCOHORT_SYNTH_TEST_SEED", DEFAULT_SEED);
        let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
            .join(format!("kcohort-synth-extract-{seed}-{patients}"));
        let config = SynthConfig {
            patients,
            seed,
            ..SynthConfig::default()
        };
        let truth = generate(&config, &dir).expect("generate");
        let tables: BTreeMap<TableName, Table> = TableName::ALL
            .iter()
            .map(|t| (*t, read_table(&dir, *t)))
            .collect();
        let reading = validate(&tables, &truth);
        Shared {
            patients,
            seed,
            dir,
            truth,
            tables,
            reading,
        }
    })
}

fn read_table(dir: &Path, table: TableName) -> Table {
    let path = dir.join(format!("{}.csv", table.as_str()));
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_path(&path)
        .expect("open");
    let header = reader
        .headers()
        .expect("header")
        .iter()
        .map(String::from)
        .collect();
    let rows = reader
        .records()
        .map(|r| r.expect("record").iter().map(String::from).collect())
        .collect();
    Table { header, rows }
}

// ---- a plain reading of the input contract ---------------------------------------------------

/// Rows accepted by the reading below, and the rejects by table and reason.
struct Reading {
    accepted: BTreeMap<TableName, Vec<usize>>,
    rejects: BTreeMap<TableName, BTreeMap<&'static str, u64>>,
}

fn zone(truth: &Truth) -> Tz {
    truth.site_timezone.parse().expect("zone")
}

/// Local time of the accepted forms to UTC seconds; ambiguous times read as the earlier instant.
fn parse_local(zone: Tz, text: &str) -> Result<i64, RejectReason> {
    let format = match text.len() {
        16 => "%Y-%m-%dT%H:%M",
        19 => "%Y-%m-%dT%H:%M:%S",
        _ => return Err(RejectReason::BadTimestamp),
    };
    let naive =
        NaiveDateTime::parse_from_str(text, format).map_err(|_| RejectReason::BadTimestamp)?;
    zone.from_local_datetime(&naive)
        .earliest()
        .map(|t| t.timestamp())
        .ok_or(RejectReason::NonexistentLocalTime)
}

fn parse_lab_value(text: &str) -> Option<f64> {
    let digits = text.trim_start_matches(['>', '<', '=']);
    digits.parse::<f64>().ok().filter(|v| v.is_finite())
}

/// What the reading needs to know about the extract.
struct Frame {
    zone: Tz,
    extract_end: i64,
    extract_year: i32,
}

/// The first rule a row breaks, in the order of `RejectReason::ALL`.
fn reject_reason(
    table: TableName,
    t: &Table,
    row: &[String],
    frame: &Frame,
    ids: &HashSet<String>,
    patients: &HashSet<String>,
) -> Option<RejectReason> {
    let Frame {
        zone,
        extract_end,
        extract_year,
    } = *frame;
    let cols = table.columns();
    if row.len() != cols.len() {
        return Some(RejectReason::ColumnCount);
    }
    let value = |name: &str| row[t.col(name)].as_str();
    if cols
        .iter()
        .zip(row)
        .any(|(c, v)| c.required && v.is_empty())
    {
        return Some(RejectReason::MissingValue);
    }
    for (c, v) in cols.iter().zip(row) {
        if let ColumnKind::Category(allowed) = c.kind
            && !v.is_empty()
            && !allowed.contains(&v.as_str())
        {
            return Some(RejectReason::BadCategory);
        }
    }
    for (c, v) in cols.iter().zip(row) {
        let ok = v.is_empty()
            || match c.kind {
                ColumnKind::Loinc => code::is_valid_loinc(v),
                ColumnKind::Atc => code::is_valid_atc(v),
                ColumnKind::Icd10 => code::is_valid_icd10(v),
                _ => true,
            };
        if !ok {
            return Some(RejectReason::BadCode);
        }
    }
    for (c, v) in cols.iter().zip(row) {
        let ok = v.is_empty()
            || match c.kind {
                ColumnKind::Number => v.parse::<f64>().is_ok_and(f64::is_finite),
                ColumnKind::Year => v.parse::<i32>().is_ok(),
                ColumnKind::LabValue => parse_lab_value(v).is_some(),
                _ => true,
            };
        if !ok {
            return Some(RejectReason::BadNumber);
        }
    }
    let mut times: HashMap<&str, (i64, TimeRole)> = HashMap::new();
    for (c, v) in cols.iter().zip(row) {
        if let ColumnKind::Timestamp(role) = c.kind
            && !v.is_empty()
        {
            match parse_local(zone, v) {
                Ok(t) => {
                    times.insert(c.name, (t, role));
                }
                Err(RejectReason::BadTimestamp) => return Some(RejectReason::BadTimestamp),
                Err(_) => {}
            }
        }
    }
    for (c, v) in cols.iter().zip(row) {
        if matches!(c.kind, ColumnKind::Timestamp(_))
            && !v.is_empty()
            && !times.contains_key(c.name)
        {
            return Some(RejectReason::NonexistentLocalTime);
        }
    }
    if table == TableName::Patients {
        let y: i32 = value("birth_year").parse().expect("checked");
        if !(1900..=extract_year).contains(&y) {
            return Some(RejectReason::YearOutOfRange);
        }
    }
    let y1900 = -2_208_988_800;
    for (t, role) in times.values() {
        if *t < y1900 || (*role == TimeRole::Start && *t > extract_end) {
            return Some(RejectReason::TimeOutOfRange);
        }
    }
    let pair = match table {
        TableName::Encounters => Some(("admitted_at", "discharged_at")),
        TableName::LabResults => Some(("collected_at", "resulted_at")),
        TableName::MedicationEvents => Some(("start_at", "end_at")),
        _ => None,
    };
    if let Some((s, e)) = pair
        && let (Some(s), Some(e)) = (times.get(s), times.get(e))
        && e.0 < s.0
    {
        return Some(RejectReason::EndBeforeStart);
    }
    if table == TableName::LabResults
        && let Some(analyte) = Analyte::from_loinc(value("loinc"))
    {
        let Some(conversion) = analyte.conversion_for(value("unit")) else {
            return Some(RejectReason::UnknownUnit);
        };
        let canonical = parse_lab_value(value("value")).expect("checked") * conversion.factor;
        let (low, high) = analyte.plausible_range();
        if !(low..=high).contains(&canonical) {
            return Some(RejectReason::ImpossibleValue);
        }
    }
    for (c, v) in cols.iter().zip(row) {
        if c.kind == ColumnKind::Number && v.parse::<f64>().is_ok_and(|x| x < 0.0) {
            return Some(RejectReason::NegativeNumber);
        }
    }
    if let Some(id) = table.id_column()
        && ids.contains(value(id))
    {
        return Some(RejectReason::DuplicateId);
    }
    if table != TableName::Patients && !patients.contains(value("patient_id")) {
        return Some(RejectReason::UnknownPatient);
    }
    None
}

fn validate(tables: &BTreeMap<TableName, Table>, truth: &Truth) -> Reading {
    let zone = zone(truth);
    let extract_end = chrono::DateTime::parse_from_rfc3339(&truth.extract_end)
        .expect("rfc3339")
        .timestamp();
    let extract_year: i32 = truth.extract_end_local[..4].parse().unwrap();
    let frame = Frame {
        zone,
        extract_end,
        extract_year,
    };
    let mut accepted = BTreeMap::new();
    let mut rejects = BTreeMap::new();
    let mut patients = HashSet::new();
    for table in TableName::ALL {
        let t = &tables[&table];
        let mut ids = HashSet::new();
        let mut ok = Vec::new();
        let mut counts: BTreeMap<&'static str, u64> = BTreeMap::new();
        for (i, row) in t.rows.iter().enumerate() {
            match reject_reason(table, t, row, &frame, &ids, &patients) {
                Some(r) => *counts.entry(r.code()).or_default() += 1,
                None => {
                    if let Some(id) = table.id_column() {
                        ids.insert(row[t.col(id)].clone());
                    }
                    ok.push(i);
                }
            }
        }
        if table == TableName::Patients {
            patients = ids.clone();
        }
        accepted.insert(table, ok);
        rejects.insert(table, counts);
    }
    Reading { accepted, rejects }
}

fn accepted<'a>(s: &'a Shared, table: TableName) -> impl Iterator<Item = &'a Vec<String>> + 'a {
    let t = &s.tables[&table];
    s.reading.accepted[&table].iter().map(move |i| &t.rows[*i])
}

// ---- tests -----------------------------------------------------------------------------------

#[test]
fn same_seed_gives_the_same_bytes_and_another_seed_other_bytes() {
    let base = PathBuf::from(env!("CARGO_TARGET_TMPDIR"));
    let config = SynthConfig {
        patients: 300,
        seed: 11,
        ..SynthConfig::default()
    };
    let a = generate(&config, &base.join("determinism-a")).unwrap();
    let b = generate(&config, &base.join("determinism-b")).unwrap();
    assert_eq!(a, b);
    let other = SynthConfig {
        seed: 12,
        ..config.clone()
    };
    generate(&other, &base.join("determinism-c")).unwrap();
    let mut names: Vec<String> = TableName::ALL
        .iter()
        .map(|t| format!("{}.csv", t.as_str()))
        .collect();
    names.push("truth.json".into());
    for name in &names {
        let x = std::fs::read(base.join("determinism-a").join(name)).unwrap();
        let y = std::fs::read(base.join("determinism-b").join(name)).unwrap();
        assert!(x == y, "{name} differs between two runs with the same seed");
        let z = std::fs::read(base.join("determinism-c").join(name)).unwrap();
        assert!(x != z, "{name} is the same for seeds 11 and 12");
    }
}

#[test]
fn headers_are_the_contract_columns() {
    let s = shared();
    for table in TableName::ALL {
        let expected: Vec<&str> = table.columns().iter().map(|c| c.name).collect();
        assert_eq!(s.tables[&table].header, expected, "{table}");
        let raw = std::fs::read_to_string(s.dir.join(format!("{}.csv", table.as_str()))).unwrap();
        assert_eq!(raw.lines().next().unwrap(), expected.join(","), "{table}");
    }
}

#[test]
fn truth_json_round_trips_and_its_row_counts_are_the_files() {
    let s = shared();
    let text = std::fs::read_to_string(s.dir.join("truth.json")).unwrap();
    let read: Truth = serde_json::from_str(&text).unwrap();
    assert_eq!(read, s.truth);
    assert_eq!(serde_json::to_string_pretty(&read).unwrap() + "\n", text);
    for table in TableName::ALL {
        let f = &s.truth.files[table.as_str()];
        assert_eq!(f.file, format!("{}.csv", table.as_str()));
        assert_eq!(f.rows, s.tables[&table].rows.len() as u64, "{table}");
        assert_eq!(
            f.clean_rows,
            s.reading.accepted[&table].len() as u64,
            "{table}"
        );
    }
    assert_eq!(s.truth.population.patients, s.patients);
    assert_eq!(s.truth.config.seed, s.seed);
    assert_eq!(s.truth.site_timezone, "Europe/Vienna");
    assert_eq!(s.truth.extract_end_local, "2026-01-05T00:00");
    assert_eq!(s.truth.extract_end, "2026-01-04T23:00:00Z");
    assert_eq!(s.truth.last_complete_month, "2025-12");
}

#[test]
fn a_reading_of_the_contract_rejects_exactly_the_planted_rows() {
    let s = shared();
    for table in TableName::ALL {
        let planted = &s.truth.files[table.as_str()].planted_defects;
        let found = &s.reading.rejects[&table];
        for reason in RejectReason::ALL {
            let p = planted.get(reason.code()).copied().unwrap_or(0);
            let f = found.get(reason.code()).copied().unwrap_or(0);
            assert_eq!(f, p, "{table} {}: found {f}, planted {p}", reason.code());
        }
        // At least one of each kind the table can carry.
        let kinds: &[&str] = match table {
            TableName::Patients => &["bad_number", "bad_timestamp", "duplicate_id"],
            TableName::Encounters => &[
                "bad_timestamp",
                "duplicate_id",
                "end_before_start",
                "unknown_patient",
            ],
            TableName::LabResults => &[
                "bad_number",
                "bad_timestamp",
                "duplicate_id",
                "end_before_start",
                "impossible_value",
                "unknown_patient",
                "unknown_unit",
            ],
            TableName::MedicationEvents => &[
                "bad_number",
                "bad_timestamp",
                "duplicate_id",
                "end_before_start",
                "unknown_patient",
            ],
            TableName::Diagnoses => &["bad_timestamp", "unknown_patient"],
        };
        let planted_kinds: Vec<&str> = planted.keys().map(String::as_str).collect();
        assert_eq!(planted_kinds, kinds, "{table}");
        assert!(planted.values().all(|n| *n >= 1));
    }
    // About 0.05% of rows in all.
    let rows: u64 = s.truth.files.values().map(|f| f.clean_rows).sum();
    let planted: u64 = s
        .truth
        .files
        .values()
        .flat_map(|f| f.planted_defects.values())
        .sum();
    // 21 forced rows plus Binomial(rows, 0.0005): mean 0.0005·rows, SD √(0.0005·rows); 5 SD.
    let expected = 21.0 + 0.0005 * rows as f64;
    let sd = (0.0005 * rows as f64).sqrt();
    assert!(
        (planted as f64 - expected).abs() < 5.0 * sd,
        "{planted} planted, expected ≈ {expected:.0}"
    );
}

#[test]
fn sex_ratio_and_population_counts() {
    let s = shared();
    let p = &s.truth.population;
    let t = &s.tables[&TableName::Patients];
    let sex = t.col("sex");
    let female = accepted(s, TableName::Patients)
        .filter(|r| r[sex] == "F")
        .count() as u64;
    let unknown = accepted(s, TableName::Patients)
        .filter(|r| r[sex] == "U")
        .count() as u64;
    assert_eq!((female, unknown), (p.female, p.unknown_sex));
    // Stated share 0.51; binomial SD at n = 6000 is 0.0065; 4 SD.
    let n = s.patients as f64;
    let share = female as f64 / n;
    assert!(
        (share - 0.51).abs() < 4.0 * (0.51f64 * 0.49 / n).sqrt(),
        "{share}"
    );
    let death = t.col("death_at");
    let deaths = accepted(s, TableName::Patients)
        .filter(|r| !r[death].is_empty())
        .count() as u64;
    assert_eq!(deaths, p.deaths);
    assert!(p.age_bands["90+"] > 0);
    let birth = t.col("birth_year");
    assert!(accepted(s, TableName::Patients).all(|r| {
        r[birth]
            .parse::<i32>()
            .is_ok_and(|y| (1900..=2006).contains(&y))
    }));
}

#[test]
fn deaths_in_hospital_are_linked_to_died_discharges() {
    let s = shared();
    let zone = zone(&s.truth);
    let p = &s.tables[&TableName::Patients];
    let death_at: HashMap<&str, &str> = accepted(s, TableName::Patients)
        .filter(|r| !r[p.col("death_at")].is_empty())
        .map(|r| (r[0].as_str(), r[p.col("death_at")].as_str()))
        .collect();
    let e = &s.tables[&TableName::Encounters];
    let (pid, dis, status) = (
        e.col("patient_id"),
        e.col("discharged_at"),
        e.col("discharge_status"),
    );
    let mut died = 0;
    let mut last_contact: HashMap<&str, i64> = HashMap::new();
    for r in accepted(s, TableName::Encounters) {
        if r[status] == "died" {
            died += 1;
            assert_eq!(
                death_at.get(r[pid].as_str()),
                Some(&r[dis].as_str()),
                "died encounter {}",
                r[0]
            );
        }
        let admitted = parse_local(zone, &r[e.col("admitted_at")]).unwrap();
        let entry = last_contact.entry(r[pid].as_str()).or_insert(admitted);
        *entry = (*entry).max(admitted);
    }
    assert!(died > 0);
    assert_eq!(died, s.truth.population.deaths_in_hospital);
    // Nobody is admitted after their death.
    for (patient, death) in &death_at {
        if let Some(last) = last_contact.get(patient) {
            assert!(*last <= parse_local(zone, death).unwrap(), "{patient}");
        }
    }
}

#[test]
fn encounters_stays_transfers_and_open_admissions() {
    let s = shared();
    let stays = stays(s);
    let t = &s.truth.encounters;
    assert_eq!(stays.count, t.hospital_stays);
    assert_eq!(stays.transfers, t.transfers);
    let e = &s.tables[&TableName::Encounters];
    let (class, dis) = (e.col("class"), e.col("discharged_at"));
    let open = accepted(s, TableName::Encounters)
        .filter(|r| r[class] == "inpatient" && r[dis].is_empty())
        .count() as u64;
    assert_eq!(open, t.open_admissions);
    assert!(open > 0 && t.transfers > 0);
    for (name, n) in [
        ("inpatient", t.inpatient),
        ("emergency", t.emergency),
        ("outpatient", t.outpatient),
    ] {
        assert_eq!(
            accepted(s, TableName::Encounters)
                .filter(|r| r[class] == name)
                .count() as u64,
            n,
            "{name}"
        );
    }
    // Length of stay: median about 4 days (lognormal median 4, σ 0.85, lengthened by episodes
    // and critical-care transfers); some stays beyond three weeks.
    let mut los: Vec<f64> = stays.lengths_days.clone();
    los.sort_by(f64::total_cmp);
    let median = los[los.len() / 2];
    assert!((3.3..5.5).contains(&median), "median stay {median:.2} days");
    assert!(los.iter().any(|d| *d > 21.0));
    // Every unit name is a unit of the network, and about a dozen are used.
    let units: HashSet<&str> = accepted(s, TableName::Encounters)
        .map(|r| r[e.col("unit")].as_str())
        .collect();
    assert!(units.len() >= 12, "{}", units.len());
    for u in units {
        assert!(s.truth.network.units.iter().any(|x| x.name == u), "{u}");
    }
}

#[test]
fn encounters_do_not_overlap_and_rows_fall_inside_their_encounter() {
    let s = shared();
    let zone = zone(&s.truth);
    let end = chrono::DateTime::parse_from_rfc3339(&s.truth.extract_end)
        .unwrap()
        .timestamp();
    let e = &s.tables[&TableName::Encounters];
    let (pid, adm, dis) = (
        e.col("patient_id"),
        e.col("admitted_at"),
        e.col("discharged_at"),
    );
    // Local times in the hour repeated at the autumn clock change read as its first occurrence,
    // so around them the order of events can look up to an hour off: allowed there, not
    // elsewhere.
    let repeated = |text: &str| {
        let format = if text.len() == 16 {
            "%Y-%m-%dT%H:%M"
        } else {
            "%Y-%m-%dT%H:%M:%S"
        };
        let naive = NaiveDateTime::parse_from_str(text, format).unwrap();
        matches!(
            zone.from_local_datetime(&naive),
            chrono::LocalResult::Ambiguous(..)
        )
    };
    let mut window: HashMap<&str, (i64, i64, bool)> = HashMap::new();
    let mut by_patient: HashMap<&str, Vec<(i64, i64, bool)>> = HashMap::new();
    for r in accepted(s, TableName::Encounters) {
        let a = parse_local(zone, &r[adm]).unwrap();
        let d = if r[dis].is_empty() {
            end
        } else {
            parse_local(zone, &r[dis]).unwrap()
        };
        let clock_change = repeated(&r[adm]) || (!r[dis].is_empty() && repeated(&r[dis]));
        assert!(d > a || clock_change, "{}", r[0]);
        window.insert(r[0].as_str(), (a, d, clock_change));
        by_patient
            .entry(r[pid].as_str())
            .or_default()
            .push((a, d, clock_change));
    }
    for list in by_patient.values_mut() {
        list.sort_unstable();
        for w in list.windows(2) {
            let slack = if w[0].2 || w[1].2 { HOUR } else { 0 };
            assert!(w[1].0 + slack >= w[0].1, "overlapping encounters {w:?}");
        }
    }
    let inside = |table: TableName, time_col: &str| {
        let t = &s.tables[&table];
        let (enc, at) = (t.col("encounter_id"), t.col(time_col));
        let mut n = 0;
        for r in accepted(s, table).filter(|r| !r[enc].is_empty()) {
            let (a, d, clock_change) = window[r[enc].as_str()];
            let x = parse_local(zone, &r[at]).unwrap();
            let slack = if clock_change || repeated(&r[at]) {
                HOUR
            } else {
                0
            };
            assert!(
                x + slack >= a && x <= d + slack,
                "{table} row {} at {} outside its encounter",
                r[0],
                r[at]
            );
            n += 1;
        }
        assert!(n > 0);
    };
    inside(TableName::LabResults, "collected_at");
    inside(TableName::MedicationEvents, "start_at");
    inside(TableName::Diagnoses, "recorded_at");
}

#[test]
fn timestamps_units_and_comparators_look_like_a_real_extract() {
    let s = shared();
    let l = &s.tables[&TableName::LabResults];
    let (collected, unit, value, loinc) = (
        l.col("collected_at"),
        l.col("unit"),
        l.col("value"),
        l.col("loinc"),
    );
    let lens: HashSet<usize> = accepted(s, TableName::LabResults)
        .map(|r| r[collected].len())
        .collect();
    assert_eq!(lens, HashSet::from([16, 19]), "both timestamp forms");
    let units: HashSet<&str> = accepted(s, TableName::LabResults)
        .map(|r| r[unit].as_str())
        .collect();
    for u in ["mmol/L", "mEq/L", "µmol/L", "umol/L", "mg/dL"] {
        assert!(units.contains(u), "{u}");
    }
    let loincs: HashSet<&str> = accepted(s, TableName::LabResults)
        .map(|r| r[loinc].as_str())
        .collect();
    for code in [
        "2823-3", "6298-4", "2160-0", "14682-9", "2345-7", "1963-8", "2157-6", "2951-2", "2075-0",
        "3094-0",
    ] {
        assert!(loincs.contains(code), "{code}");
    }
    let comparators = accepted(s, TableName::LabResults)
        .filter(|r| r[value].starts_with(['>', '<']))
        .count() as u64;
    let p = &s.truth.potassium;
    assert_eq!(
        comparators,
        p.reported_above_9
            + p.reported_below_1_5
            + p.glucose_reported_above_600
            + blood_gas_comparators(s)
    );
    assert!(comparators > 0);
    // Dispensings carry 30- or 90-day supplies; administrations have seconds.
    let m = &s.tables[&TableName::MedicationEvents];
    let (kind, supply, start) = (m.col("kind"), m.col("days_supply"), m.col("start_at"));
    let kinds: HashSet<&str> = accepted(s, TableName::MedicationEvents)
        .map(|r| r[kind].as_str())
        .collect();
    assert_eq!(kinds, HashSet::from(["dispense", "administer", "order"]));
    let supplies: HashSet<&str> = accepted(s, TableName::MedicationEvents)
        .filter(|r| r[kind] == "dispense")
        .map(|r| r[supply].as_str())
        .collect();
    assert!(supplies.contains("30") && supplies.contains("90"));
    assert!(
        accepted(s, TableName::MedicationEvents)
            .filter(|r| r[kind] == "administer")
            .all(|r| r[start].len() == 19)
    );
}

fn blood_gas_comparators(s: &Shared) -> u64 {
    let l = &s.tables[&TableName::LabResults];
    accepted(s, TableName::LabResults)
        .filter(|r| r[l.col("loinc")] == "6298-4" && r[l.col("value")].starts_with(['>', '<']))
        .count() as u64
}

#[test]
fn hemolysed_share_is_the_planted_share() {
    let s = shared();
    let l = &s.tables[&TableName::LabResults];
    let (loinc, index) = (l.col("loinc"), l.col("hemolysis_index"));
    let k: Vec<&Vec<String>> = accepted(s, TableName::LabResults)
        .filter(|r| r[loinc] == "2823-3")
        .collect();
    let h = &s.truth.potassium.hemolysis;
    let with_index = k.iter().filter(|r| !r[index].is_empty()).count() as u64;
    let hemolysed = k
        .iter()
        .filter(|r| r[index].parse::<f64>().is_ok_and(|x| x >= 100.0))
        .count() as u64;
    assert_eq!(k.len() as u64, s.truth.potassium.serum_plasma_results);
    assert_eq!(with_index, s.truth.potassium.with_hemolysis_index);
    assert_eq!(hemolysed, h.hemolysed_results);
    assert_eq!(
        hemolysed, h.eligible_hemolysed,
        "only eligible specimens are hemolysed"
    );
    // Most potassium results carry an index.
    assert!(with_index as f64 > 0.85 * k.len() as f64);
    // Binomial(eligible, 3%): 99.9% interval ±3.29 SD.
    let n = h.eligible_specimens as f64;
    let sd = (n * h.stated_share * (1.0 - h.stated_share)).sqrt();
    assert!(
        (hemolysed as f64 - n * h.stated_share).abs() < 3.29 * sd,
        "{hemolysed} of {n}"
    );
}

#[test]
fn baseline_potassium_is_about_normal_4_3_sd_0_4() {
    let s = shared();
    // From the file: non-hemolysed serum results of outpatient visits (almost all background;
    // inpatient results include episode tails), with a standard error robust to the clustering
    // of results in patients (each patient has a usual level: SD 0.25 of the total 0.4).
    let e = &s.tables[&TableName::Encounters];
    let outpatient: HashSet<&str> = accepted(s, TableName::Encounters)
        .filter(|r| r[e.col("class")] == "outpatient")
        .map(|r| r[0].as_str())
        .collect();
    let l = &s.tables[&TableName::LabResults];
    let (pid, loinc, value, index) = (
        l.col("patient_id"),
        l.col("loinc"),
        l.col("value"),
        l.col("hemolysis_index"),
    );
    let enc = l.col("encounter_id");
    let mut by_patient: HashMap<&str, (f64, f64)> = HashMap::new();
    for r in accepted(s, TableName::LabResults) {
        if r[loinc] != "2823-3"
            || r[index].parse::<f64>().is_ok_and(|x| x >= 100.0)
            || !outpatient.contains(r[enc].as_str())
        {
            continue;
        }
        let Ok(v) = r[value].parse::<f64>() else {
            continue;
        };
        if v < 5.5 {
            let e = by_patient.entry(r[pid].as_str()).or_default();
            e.0 += v;
            e.1 += 1.0;
        }
    }
    let (sum, n) = by_patient
        .values()
        .fold((0.0, 0.0), |a, b| (a.0 + b.0, a.1 + b.1));
    let mean = sum / n;
    let robust_se = by_patient
        .values()
        .map(|(s_i, n_i)| (s_i - n_i * mean).powi(2))
        .sum::<f64>()
        .sqrt()
        / n;
    // Allowed: 0.01 for the truncation at 5.34 (−0.003 computed from the model) and episode
    // tails, plus 4 robust standard errors.
    assert!(
        (mean - 4.3).abs() < 0.01 + 4.0 * robust_se,
        "file mean {mean}, SE {robust_se}"
    );
    let b = &s.truth.potassium.baseline;
    assert!(
        (b.mean - 4.3).abs() < 0.005 + 4.0 * robust_se,
        "truth mean {}",
        b.mean
    );
    assert!((b.sd - 0.4).abs() < 0.02, "sd {}", b.sd);
    assert!(b.results as f64 > 0.8 * s.truth.potassium.serum_plasma_results as f64);
}

/// Per patient: serum potassium (time, value, hemolysed, encounter), treatment times, and
/// encounter facts, from the accepted rows.
struct PatientData {
    potassium: Vec<(i64, f64, bool, String, String)>,
    treatments: Vec<i64>,
}

fn patient_data(s: &Shared) -> HashMap<String, PatientData> {
    let zone = zone(&s.truth);
    let mut out: HashMap<String, PatientData> = HashMap::new();
    let l = &s.tables[&TableName::LabResults];
    let (pid, loinc, value, collected, index, enc) = (
        l.col("patient_id"),
        l.col("loinc"),
        l.col("value"),
        l.col("collected_at"),
        l.col("hemolysis_index"),
        l.col("encounter_id"),
    );
    for r in accepted(s, TableName::LabResults).filter(|r| r[loinc] == "2823-3") {
        let v = parse_lab_value(&r[value]).unwrap();
        let hemolysed = r[index].parse::<f64>().is_ok_and(|x| x >= 100.0);
        let t = parse_local(zone, &r[collected]).unwrap();
        out.entry(r[pid].clone())
            .or_insert_with(|| PatientData {
                potassium: Vec::new(),
                treatments: Vec::new(),
            })
            .potassium
            .push((
                t,
                v,
                hemolysed,
                r[enc].clone(),
                r[collected][..7].to_string(),
            ));
    }
    let m = &s.tables[&TableName::MedicationEvents];
    let (mpid, atc, kind, start) = (
        m.col("patient_id"),
        m.col("atc"),
        m.col("kind"),
        m.col("start_at"),
    );
    const TREATMENTS: [&str; 8] = [
        "A12AA03", "A10AB01", "R03AC02", "B05XA02", "V03AE01", "V03AE09", "V03AE10", "C03CA01",
    ];
    for r in accepted(s, TableName::MedicationEvents) {
        if r[kind] == "administer" && TREATMENTS.contains(&r[atc].as_str()) {
            let t = parse_local(zone, &r[start]).unwrap();
            out.entry(r[mpid].clone())
                .or_insert_with(|| PatientData {
                    potassium: Vec::new(),
                    treatments: Vec::new(),
                })
                .treatments
                .push(t);
        }
    }
    for d in out.values_mut() {
        d.potassium.sort_by_key(|k| k.0);
        d.treatments.sort_unstable();
    }
    out
}

struct Stays {
    count: u64,
    transfers: u64,
    /// encounter id → (stay start, unit)
    start_of: HashMap<String, (i64, String)>,
    lengths_days: Vec<f64>,
}

fn stays(s: &Shared) -> Stays {
    let zone = zone(&s.truth);
    let end = chrono::DateTime::parse_from_rfc3339(&s.truth.extract_end)
        .unwrap()
        .timestamp();
    let e = &s.tables[&TableName::Encounters];
    let (pid, class, unit, adm, dis, status) = (
        e.col("patient_id"),
        e.col("class"),
        e.col("unit"),
        e.col("admitted_at"),
        e.col("discharged_at"),
        e.col("discharge_status"),
    );
    // (admitted, discharged, status, encounter id, unit)
    type Inpatient<'a> = (i64, Option<i64>, &'a str, &'a str, &'a str);
    let mut by_patient: HashMap<&str, Vec<Inpatient>> = HashMap::new();
    for r in accepted(s, TableName::Encounters).filter(|r| r[class] == "inpatient") {
        let a = parse_local(zone, &r[adm]).unwrap();
        let d = (!r[dis].is_empty()).then(|| parse_local(zone, &r[dis]).unwrap());
        by_patient.entry(r[pid].as_str()).or_default().push((
            a,
            d,
            r[status].as_str(),
            r[0].as_str(),
            r[unit].as_str(),
        ));
    }
    let mut result = Stays {
        count: 0,
        transfers: 0,
        start_of: HashMap::new(),
        lengths_days: Vec::new(),
    };
    for list in by_patient.values_mut() {
        list.sort_by_key(|x| x.0);
        let mut current: Option<(i64, Option<i64>, &str)> = None;
        for &(a, d, st, id, u) in list.iter() {
            let joined = matches!(current, Some((_, Some(prev_end), "transfer")) if prev_end == a);
            let start = if joined {
                result.transfers += 1;
                current.unwrap().0
            } else {
                if let Some((s0, e0, _)) = current {
                    result
                        .lengths_days
                        .push((e0.unwrap_or(end) - s0) as f64 / DAY as f64);
                }
                result.count += 1;
                a
            };
            result
                .start_of
                .insert(id.to_string(), (start, u.to_string()));
            current = Some((start, d, st));
        }
        if let Some((s0, e0, _)) = current {
            result
                .lengths_days
                .push((e0.unwrap_or(end) - s0) as f64 / DAY as f64);
        }
    }
    result
}

#[derive(Default, Debug, PartialEq)]
struct EpisodeCounts {
    total: u64,
    hospital_acquired: u64,
    present_on_admission: u64,
    rebounds: u64,
    spurious_refuted: u64,
    hemolysed_high: u64,
    hemolysed_high_refuted: u64,
    monthly: BTreeMap<String, (u64, u64)>,
    step_before: u64,
    step_after: u64,
}

/// The reading of truth.json's `episodes.definition`, applied to the files.
fn read_episodes(s: &Shared) -> EpisodeCounts {
    let data = patient_data(s);
    let stays = stays(s);
    let step_unit = &s.truth.rate_step.unit;
    let step_month = &s.truth.rate_step.month;
    let mut c = EpisodeCounts::default();
    for d in data.values() {
        let k = &d.potassium;
        let confirmed = |i: usize| {
            let t = k[i].0;
            k[i + 1..]
                .iter()
                .take_while(|x| x.0 - t <= 6 * HOUR)
                .any(|x| x.1 >= 5.5)
                || d.treatments.iter().any(|x| *x >= t && *x - t <= 6 * HOUR)
        };
        // (normalised at, last high, rebound counted)
        let mut episode: Option<(Option<i64>, i64, bool)> = None;
        for i in 0..k.len() {
            let (t, v, hemolysed, enc, month) = (&k[i].0, k[i].1, k[i].2, &k[i].3, &k[i].4);
            let t = *t;
            if let Some((norm, last_high, rebound)) = episode.as_mut() {
                let anchor = norm.unwrap_or(*last_high);
                if t - anchor < 7 * DAY {
                    if v >= 5.5 {
                        if let Some(n) = norm
                            && t - *n <= DAY
                            && !*rebound
                        {
                            *rebound = true;
                            c.rebounds += 1;
                        }
                        *last_high = t;
                    } else if v < 5.0 && norm.is_none() {
                        *norm = Some(t);
                    }
                    continue;
                }
                episode = None;
            }
            if v < 5.5 {
                continue;
            }
            if confirmed(i) {
                episode = Some((None, t, false));
                c.total += 1;
                let hospital = stays
                    .start_of
                    .get(enc)
                    .filter(|(start, _)| t - start >= 48 * HOUR);
                let entry = c.monthly.entry(month.clone()).or_default();
                if let Some((_, unit)) = hospital {
                    c.hospital_acquired += 1;
                    entry.0 += 1;
                    if unit == step_unit {
                        if month >= step_month {
                            c.step_after += 1;
                        } else {
                            c.step_before += 1;
                        }
                    }
                } else {
                    c.present_on_admission += 1;
                    entry.1 += 1;
                }
            } else {
                let refuted = k[i + 1..]
                    .iter()
                    .take_while(|x| x.0 - t <= 6 * HOUR)
                    .any(|x| x.1 < 5.0);
                if hemolysed {
                    c.hemolysed_high += 1;
                    c.hemolysed_high_refuted += u64::from(refuted);
                } else {
                    c.spurious_refuted += u64::from(refuted);
                }
            }
        }
    }
    c
}

#[test]
fn the_episode_reading_of_the_files_finds_exactly_the_planted_episodes() {
    let s = shared();
    let found = read_episodes(s);
    let t = &s.truth;
    let mut expected = EpisodeCounts {
        total: t.episodes.total,
        hospital_acquired: t.episodes.hospital_acquired,
        present_on_admission: t.episodes.present_on_admission,
        rebounds: t.episodes.rebounds,
        spurious_refuted: t.potassium.spurious.refuted_by_normal_repeat,
        hemolysed_high: t.potassium.hemolysis.hemolysed_high,
        hemolysed_high_refuted: t.potassium.hemolysis.hemolysed_high_refuted,
        step_before: t.rate_step.before.hospital_acquired,
        step_after: t.rate_step.after.hospital_acquired,
        ..EpisodeCounts::default()
    };
    for m in &t.monthly {
        if m.hospital_acquired + m.present_on_admission > 0 {
            expected.monthly.insert(
                m.month.clone(),
                (m.hospital_acquired, m.present_on_admission),
            );
        }
    }
    assert_eq!(found, expected);
    assert_eq!(
        t.potassium.spurious.planted,
        t.potassium.spurious.refuted_by_normal_repeat
    );
    assert!(t.potassium.spurious.planted > 0 && t.episodes.rebounds > 0);
    let severity: u64 = t.episodes.by_severity.values().sum();
    let causes: u64 = t.episodes.by_cause.values().sum();
    assert_eq!((severity, causes), (t.episodes.total, t.episodes.total));
}

#[test]
fn hypoglycemia_after_insulin_is_the_planted_share() {
    let s = shared();
    let zone = zone(&s.truth);
    let m = &s.tables[&TableName::MedicationEvents];
    let mut insulin: HashMap<&str, Vec<i64>> = HashMap::new();
    for r in accepted(s, TableName::MedicationEvents) {
        if r[m.col("atc")] == "A10AB01" && r[m.col("kind")] == "administer" {
            insulin
                .entry(r[m.col("patient_id")].as_str())
                .or_default()
                .push(parse_local(zone, &r[m.col("start_at")]).unwrap());
        }
    }
    let l = &s.tables[&TableName::LabResults];
    let mut glucose: HashMap<&str, Vec<(i64, f64)>> = HashMap::new();
    for r in accepted(s, TableName::LabResults) {
        if r[l.col("loinc")] == "2345-7" {
            let v = parse_lab_value(&r[l.col("value")]).unwrap();
            glucose
                .entry(r[l.col("patient_id")].as_str())
                .or_default()
                .push((parse_local(zone, &r[l.col("collected_at")]).unwrap(), v));
        }
    }
    let (mut treatments, mut checked, mut low) = (0u64, 0u64, 0u64);
    for (patient, times) in &insulin {
        for t in times {
            treatments += 1;
            let window: Vec<f64> = glucose
                .get(patient)
                .map(|g| {
                    g.iter()
                        .filter(|(x, _)| *x > *t && *x - *t <= 6 * HOUR)
                        .map(|(_, v)| *v)
                        .collect()
                })
                .unwrap_or_default();
            checked += u64::from(!window.is_empty());
            low += u64::from(window.iter().any(|v| *v < 70.0));
        }
    }
    let h = &s.truth.hypoglycemia;
    assert_eq!(
        (treatments, checked, low),
        (h.insulin_treatments, h.with_glucose_check, h.hypoglycemic)
    );
    // Binomial(checked, 10%): 99.9% interval ±3.29 SD.
    let n = checked as f64;
    let sd = (n * h.stated_share * (1.0 - h.stated_share)).sqrt();
    assert!(n > 100.0, "{n}");
    assert!(
        (low as f64 - n * h.stated_share).abs() < 3.29 * sd,
        "{low} of {n}"
    );
}

#[test]
fn severe_deaths_follow_the_planted_probability() {
    let s = shared();
    let d = &s.truth.severe_death_30d;
    let n = d.severe_episodes as f64;
    let sd = (n * d.stated * (1.0 - d.stated)).sqrt();
    assert!(
        (d.planted_deaths as f64 - n * d.stated).abs() < 3.29 * sd,
        "{} of {n}",
        d.planted_deaths
    );
    // Realised deaths from any cause: at least the planted ones that fell inside the extract.
    assert!(d.deaths_within_30_days + 3 >= d.planted_deaths);
    assert_eq!(d.severe_episodes, s.truth.episodes.by_severity["severe"]);
}

/// Mantel–Haenszel rate ratio (Greenland–Robins 1985, domain reference §5.6) of `exposed`
/// strata against their partner strata without the exposure; returns (IRR, SE of ln IRR).
fn mantel_haenszel(
    truth: &Truth,
    exposed: impl Fn(&[String]) -> Option<Vec<String>>,
) -> (f64, f64) {
    let key = |setting: &str, f: &[String]| {
        let mut f = f.to_vec();
        f.sort();
        format!("{setting}|{}", f.join(","))
    };
    let cells: HashMap<String, (f64, u64)> = truth
        .hazard
        .strata
        .iter()
        .map(|s| (key(&s.setting, &s.factors), (s.person_days, s.episodes)))
        .collect();
    let (mut num, mut den, mut var) = (0.0, 0.0, 0.0);
    for s in &truth.hazard.strata {
        let Some(partner) = exposed(&s.factors) else {
            continue;
        };
        let Some(&(t0, b)) = cells.get(&key(&s.setting, &partner)) else {
            continue;
        };
        let (t1, a) = (s.person_days, s.episodes);
        let t = t0 + t1;
        num += a as f64 * t0 / t;
        den += b as f64 * t1 / t;
        var += (a + b) as f64 * t1 * t0 / (t * t);
    }
    (num / den, (var / (num * den)).sqrt())
}

fn swap(factors: &[String], has: &str, lacks: &str, to: &str) -> Option<Vec<String>> {
    if !factors.iter().any(|f| f == has) || factors.iter().any(|f| f == lacks) {
        return None;
    }
    Some(
        factors
            .iter()
            .map(|f| if f == has { to.to_string() } else { f.clone() })
            .filter(|f| !f.is_empty())
            .collect(),
    )
}

#[test]
fn planted_hazard_ratios_are_recovered_from_the_recorded_strata() {
    let s = shared();
    let h = &s.truth.hazard.hazard_ratios;
    let z = 3.29; // 99.9% interval
    let covers = |name: &str, (irr, se): (f64, f64), stated: f64| {
        let (lo, hi) = ((irr.ln() - z * se).exp(), (irr.ln() + z * se).exp());
        assert!(
            lo <= stated && stated <= hi,
            "{name}: IRR {irr:.2} ({lo:.2}–{hi:.2}) does not cover {stated}"
        );
        assert!(
            hi / lo < 6.0,
            "{name}: interval {lo:.2}–{hi:.2} too wide to mean anything"
        );
    };
    // MRA against none, separately by eGFR (the planted interaction).
    let mra_high = mantel_haenszel(&s.truth, |f| swap(f, "mra", "egfr_below_45", ""));
    covers("MRA, eGFR ≥ 45", mra_high, h.mra);
    let mra_low = mantel_haenszel(&s.truth, |f| {
        f.iter()
            .any(|x| x == "egfr_below_45")
            .then(|| swap(f, "mra", "", ""))
            .flatten()
    });
    let (irr, se) = mra_low;
    let (lo, hi) = ((irr.ln() - z * se).exp(), (irr.ln() + z * se).exp());
    assert!(
        lo <= h.mra_egfr_below_45 && h.mra_egfr_below_45 <= hi,
        "MRA, eGFR < 45: {irr:.2} ({lo:.2}–{hi:.2})"
    );
    // RAAS inhibitor exposure against calcium-channel blocker exposure.
    let raas = mantel_haenszel(&s.truth, |f| {
        swap(
            f,
            "raas_inhibitor",
            "calcium_channel_blocker",
            "calcium_channel_blocker",
        )
    });
    covers("RAAS vs CCB", raas, s.truth.hazard.raas_vs_ccb);
    covers(
        "eGFR < 45",
        mantel_haenszel(&s.truth, |f| swap(f, "egfr_below_45", "mra", "")),
        h.egfr_below_45,
    );
    covers(
        "diabetes",
        mantel_haenszel(&s.truth, |f| swap(f, "diabetes", "", "")),
        h.diabetes,
    );
    // Hospital against community baseline: episodes in strata without any factor.
    let none = |setting: &str| {
        s.truth
            .hazard
            .strata
            .iter()
            .find(|x| x.setting == setting && x.factors.is_empty())
            .map(|x| (x.episodes, x.person_days))
    };
    let (a, t) = none("hospital").unwrap();
    let rate = a as f64 / t;
    let se = 1.0 / (a as f64).sqrt();
    let stated = s.truth.hazard.inpatient_per_day;
    assert!(
        (rate.ln() - stated.ln()).abs() < z * se,
        "hospital baseline {rate} vs {stated}"
    );
    let (a, t) = none("community").unwrap();
    let rate = a as f64 / t;
    let stated = s.truth.hazard.community_per_day;
    assert!(
        (rate.ln() - stated.ln()).abs() < z / (a as f64).sqrt(),
        "community baseline {rate} vs {stated}"
    );
}

#[test]
fn the_monthly_rate_step_is_visible() {
    let s = shared();
    let r = &s.truth.rate_step;
    // Observed over expected-without-step, after against before: the standardised ratio. (A
    // crude rate ratio is diluted: patients of high hazard leave the risk set early, more so
    // after the step.) Its log has SE √(1/a + 1/b) given the expected counts.
    let (a, e1) = (
        r.after.hospital_acquired as f64,
        r.after.expected_without_step,
    );
    let (b, e0) = (
        r.before.hospital_acquired as f64,
        r.before.expected_without_step,
    );
    let ratio = (a / e1) / (b / e0);
    let se = (1.0 / a + 1.0 / b).sqrt();
    // 99.9% interval covers the planted factor and excludes 1.
    assert!(
        (ratio.ln() - r.factor.ln()).abs() < 3.29 * se,
        "step ratio {ratio:.2}, planted {}",
        r.factor
    );
    assert!(
        ratio.ln() - 3.29 * se > 0.0,
        "step not visible: {ratio:.2} ± {se:.2} on the log scale"
    );
    // The file's reading counts the same episodes in the unit on each side of the step (see
    // the episode test); the crude rate per at-risk day is higher after the step too.
    let crude = (a / r.after.at_risk_days) / (b / r.before.at_risk_days);
    assert!(crude > 1.3, "crude rate ratio {crude:.2}");
    // Monthly counts network-wide are visible every complete month.
    for m in &s.truth.monthly[..24] {
        assert!(
            m.hospital_acquired >= 5,
            "{} has {} hospital-acquired episodes",
            m.month,
            m.hospital_acquired
        );
    }
}

#[test]
fn the_bundled_demo_is_what_the_generator_writes_today() {
    // synthetic_data/larkmoor-demo was written by `cargo run --release -p kcohort-synth
    // --example make_demo` (3,000 patients, seed 20261201, defaults). If this fails after a
    // change to the generator, run that command again and update synthetic_data/README.md.
    let demo = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../synthetic_data/larkmoor-demo");
    let fresh = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bundled-demo-check");
    let config = SynthConfig {
        patients: 3000,
        seed: 20261201,
        ..SynthConfig::default()
    };
    generate(&config, &fresh).unwrap();
    let mut names: Vec<String> = TableName::ALL
        .iter()
        .map(|t| format!("{}.csv", t.as_str()))
        .collect();
    names.push("truth.json".into());
    for name in names {
        let bundled = std::fs::read(demo.join(&name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        let now = std::fs::read(fresh.join(&name)).unwrap();
        assert!(
            bundled == now,
            "synthetic_data/larkmoor-demo/{name} is out of date"
        );
    }
}
