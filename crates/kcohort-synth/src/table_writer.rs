//! Writes the five contract tables as CSV: UTF-8, header row of the contract columns, RFC 4180
//! quoting where a field needs it, LF line ends, local times without offset. Rows are built in
//! a reused byte buffer and go through large buffered writers, so a million patients stream in
//! bounded memory. Planted defects are written here, right after the row they copy.

use crate::defect::{BAD_COUNTS, BAD_LAB_VALUES, BAD_YEARS, Defect, DefectPlanner};
use crate::error::SynthError;
use crate::network::{CreatinineReporting, SITES, UNITS};
use crate::record::{EncounterRec, LabRec, MedKind, MedRec, NO_ENCOUNTER, Reported, Test};
use crate::scenario::Scenario;
use crate::site_time::{BadTimeForm, SiteTime, TimeForm};
use crate::timeline::PatientRows;
use crate::truth::FileTruth;
use kcohort_model::TableName;
use std::collections::BTreeMap;
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

const BUFFER_BYTES: usize = 1 << 20;

struct TableFile {
    table: TableName,
    path: PathBuf,
    out: BufWriter<File>,
    rows: u64,
    clean_rows: u64,
}

impl TableFile {
    fn create(dir: &Path, table: TableName) -> Result<TableFile, SynthError> {
        let path = dir.join(format!("{}.csv", table.as_str()));
        let file = File::create(&path).map_err(|source| SynthError::Write {
            path: path.clone(),
            source,
        })?;
        let mut out = BufWriter::with_capacity(BUFFER_BYTES, file);
        let header: Vec<&str> = table.columns().iter().map(|c| c.name).collect();
        let mut line = header.join(",").into_bytes();
        line.push(b'\n');
        out.write_all(&line).map_err(|source| SynthError::Write {
            path: path.clone(),
            source,
        })?;
        Ok(TableFile {
            table,
            path,
            out,
            rows: 0,
            clean_rows: 0,
        })
    }

    fn write(&mut self, line: &[u8]) -> Result<(), SynthError> {
        self.rows += 1;
        self.out
            .write_all(line)
            .map_err(|source| SynthError::Write {
                path: self.path.clone(),
                source,
            })
    }
}

/// Writes patients one after another into the five files.
pub struct ExtractWriter<'a> {
    sc: &'a Scenario,
    files: Vec<TableFile>,
    defects: DefectPlanner,
    next_encounter: u64,
    next_result: u64,
    next_event: u64,
    /// Ids above the real patients: odd offsets for unknown-patient references, even for
    /// phantom patient rows.
    next_unknown: u64,
    next_phantom: u64,
    enc_ids: Vec<u64>,
    order: Vec<usize>,
    planned: Vec<Defect>,
    line: Vec<u8>,
    clean: Vec<u8>,
    patient_id: Vec<u8>,
}

impl std::fmt::Debug for ExtractWriter<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ExtractWriter")
            .field("next_encounter", &self.next_encounter)
            .finish_non_exhaustive()
    }
}

impl<'a> ExtractWriter<'a> {
    pub fn create(dir: &Path, sc: &'a Scenario) -> Result<ExtractWriter<'a>, SynthError> {
        let files = TableName::ALL
            .iter()
            .map(|t| TableFile::create(dir, *t))
            .collect::<Result<Vec<_>, _>>()?;
        let patients = sc.config.patients;
        Ok(ExtractWriter {
            sc,
            files,
            defects: DefectPlanner::new(sc.config.seed, sc.config.defect_rate, patients),
            next_encounter: 1,
            next_result: 1,
            next_event: 1,
            next_unknown: patients + 1,
            next_phantom: patients + 2,
            enc_ids: Vec::new(),
            order: Vec::new(),
            planned: Vec::new(),
            line: Vec::with_capacity(256),
            clean: Vec::with_capacity(256),
            patient_id: Vec::with_capacity(16),
        })
    }

    /// Flushes the files; returns per-table counts for truth.json.
    pub fn finish(self) -> Result<BTreeMap<String, FileTruth>, SynthError> {
        let mut result = BTreeMap::new();
        for mut f in self.files {
            f.out.flush().map_err(|source| SynthError::Write {
                path: f.path.clone(),
                source,
            })?;
            let file = f
                .path
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            result.insert(
                f.table.as_str().to_string(),
                FileTruth {
                    file,
                    rows: f.rows,
                    clean_rows: f.clean_rows,
                    planted_defects: self.defects.counts_of(f.table),
                },
            );
        }
        Ok(result)
    }

    fn unknown_patient(&mut self) -> u64 {
        let id = self.next_unknown;
        self.next_unknown += 2;
        id
    }

    fn phantom_patient(&mut self) -> u64 {
        let id = self.next_phantom;
        self.next_phantom += 2;
        id
    }

    /// Writes the clean row in `self.line`, then the defects planned after it.
    fn emit_clean(&mut self, table: TableName) -> Result<(), SynthError> {
        let f = &mut self.files[table_index(table)];
        f.clean_rows += 1;
        f.write(&self.line)?;
        std::mem::swap(&mut self.line, &mut self.clean);
        self.defects.after_row(table, &mut self.planned);
        Ok(())
    }

    fn emit_defect(&mut self, table: TableName) -> Result<(), SynthError> {
        self.files[table_index(table)].write(&self.line)
    }

    pub fn write_patient(&mut self, index: u64, rows: &PatientRows) -> Result<(), SynthError> {
        self.defects.start_patient(index);
        let pid = index + 1;
        self.patient_id.clear();
        push_id(&mut self.patient_id, b'P', pid, 7);
        self.write_patient_row(pid, rows)?;
        // Encounter ids in admission order.
        self.order.clear();
        self.order.extend(0..rows.encounters.len());
        self.order
            .sort_by_key(|i| (rows.encounters[*i].admitted_at, *i));
        self.enc_ids.clear();
        self.enc_ids.resize(rows.encounters.len(), 0);
        for k in 0..self.order.len() {
            let i = self.order[k];
            self.enc_ids[i] = self.next_encounter;
            self.next_encounter += 1;
            self.write_encounter(&rows.encounters[i], self.enc_ids[i])?;
        }
        for lab in &rows.labs {
            self.write_lab(lab)?;
        }
        for med in &rows.meds {
            self.write_med(med)?;
        }
        for diag in &rows.diags {
            self.line.clear();
            let pid_bytes = std::mem::take(&mut self.patient_id);
            self.diag_line(
                &pid_bytes,
                diag.encounter,
                diag.code,
                diag.recorded_at,
                None,
            );
            self.patient_id = pid_bytes;
            self.emit_clean(TableName::Diagnoses)?;
            for k in 0..self.planned.len() {
                let d = self.planned[k];
                self.line.clear();
                match d {
                    Defect::UnknownPatient => {
                        let mut other = Vec::new();
                        push_id(&mut other, b'P', self.unknown_patient(), 7);
                        self.diag_line(&other, NO_ENCOUNTER, diag.code, diag.recorded_at, None);
                    }
                    _ => {
                        let form = self.bad_form();
                        let pid_bytes = std::mem::take(&mut self.patient_id);
                        self.diag_line(
                            &pid_bytes,
                            diag.encounter,
                            diag.code,
                            diag.recorded_at,
                            Some(form),
                        );
                        self.patient_id = pid_bytes;
                    }
                }
                self.emit_defect(TableName::Diagnoses)?;
            }
        }
        Ok(())
    }

    fn bad_form(&mut self) -> BadTimeForm {
        if self.defects.rng.bernoulli(0.5) {
            BadTimeForm::DaySlashMonth
        } else {
            BadTimeForm::DayDotMonth
        }
    }

    fn encounter_ref(&mut self, index: u32) {
        if index != NO_ENCOUNTER {
            push_id(&mut self.line, b'E', self.enc_ids[index as usize], 8);
        }
    }

    // ---- patients -----------------------------------------------------------------------

    fn write_patient_row(&mut self, pid: u64, rows: &PatientRows) -> Result<(), SynthError> {
        let profile = rows.profile.as_ref().expect("simulated");
        self.line.clear();
        push_id(&mut self.line, b'P', pid, 7);
        self.line.push(b',');
        self.line.extend_from_slice(profile.sex.code().as_bytes());
        self.line.push(b',');
        push_u64(&mut self.line, profile.birth_year as u64);
        self.line.push(b',');
        if let Some(d) = rows.death_at {
            self.sc.time.write(&mut self.line, d, TimeForm::Minutes);
        }
        self.line.push(b'\n');
        self.emit_clean(TableName::Patients)?;
        for k in 0..self.planned.len() {
            let d = self.planned[k];
            self.line.clear();
            match d {
                Defect::DuplicateId => self.line.extend_from_slice(&self.clean),
                Defect::BadNumber => {
                    let id = self.phantom_patient();
                    push_id(&mut self.line, b'P', id, 7);
                    self.line.extend_from_slice(b",F,");
                    let year = *self.defects.rng.pick(&BAD_YEARS);
                    self.line.extend_from_slice(year.as_bytes());
                    self.line.extend_from_slice(b",\n");
                }
                _ => {
                    let id = self.phantom_patient();
                    push_id(&mut self.line, b'P', id, 7);
                    self.line.extend_from_slice(b",M,");
                    push_u64(&mut self.line, profile.birth_year as u64);
                    self.line.push(b',');
                    let at = self.sc.period_start
                        + self
                            .defects
                            .rng
                            .below((self.sc.months_end - self.sc.period_start) as u64)
                            as i64;
                    let form = self.bad_form();
                    self.sc.time.write_bad(&mut self.line, at, form);
                    self.line.push(b'\n');
                }
            }
            self.emit_defect(TableName::Patients)?;
        }
        Ok(())
    }

    // ---- encounters ---------------------------------------------------------------------

    fn encounter_line(&mut self, id: u64, pid: &[u8], e: &EncounterRec, variant: Option<Defect>) {
        let time = &self.sc.time;
        let line = &mut self.line;
        push_id(line, b'E', id, 8);
        line.push(b',');
        line.extend_from_slice(pid);
        line.push(b',');
        line.extend_from_slice(e.class.code().as_bytes());
        line.push(b',');
        push_text(line, UNITS[e.unit].name);
        line.push(b',');
        match variant {
            Some(Defect::BadTimestamp) => {
                time.write_bad(line, e.admitted_at, BadTimeForm::DaySlashMonth)
            }
            _ => time.write(line, e.admitted_at, TimeForm::Minutes),
        }
        line.push(b',');
        match variant {
            Some(Defect::EndBeforeStart) => {
                let hours = 1 + e.admitted_at.rem_euclid(47);
                let end = before(
                    time,
                    e.admitted_at,
                    TimeForm::Minutes,
                    e.admitted_at - hours * 3600,
                    TimeForm::Minutes,
                );
                time.write(line, end, TimeForm::Minutes);
            }
            _ => {
                if let Some(d) = e.discharged_at {
                    let d = after(time, e.admitted_at, TimeForm::Minutes, d, TimeForm::Minutes);
                    time.write(line, d, TimeForm::Minutes);
                }
            }
        }
        line.push(b',');
        match (variant, e.status) {
            (Some(Defect::EndBeforeStart), _) => line.extend_from_slice(b"home"),
            (_, Some(s)) => line.extend_from_slice(s.code().as_bytes()),
            (_, None) => {}
        }
        line.push(b'\n');
    }

    fn write_encounter(&mut self, e: &EncounterRec, id: u64) -> Result<(), SynthError> {
        self.line.clear();
        let pid = std::mem::take(&mut self.patient_id);
        self.encounter_line(id, &pid, e, None);
        self.emit_clean(TableName::Encounters)?;
        for k in 0..self.planned.len() {
            let d = self.planned[k];
            self.line.clear();
            match d {
                Defect::DuplicateId => self.line.extend_from_slice(&self.clean),
                Defect::UnknownPatient => {
                    let mut other = Vec::new();
                    push_id(&mut other, b'P', self.unknown_patient(), 7);
                    let fresh = self.fresh_encounter();
                    self.encounter_line(fresh, &other, e, None);
                }
                _ => {
                    let fresh = self.fresh_encounter();
                    self.encounter_line(fresh, &pid, e, Some(d));
                }
            }
            self.emit_defect(TableName::Encounters)?;
        }
        self.patient_id = pid;
        Ok(())
    }

    fn fresh_encounter(&mut self) -> u64 {
        let id = self.next_encounter;
        self.next_encounter += 1;
        id
    }

    // ---- lab results --------------------------------------------------------------------

    fn lab_line(&mut self, id: u64, pid: &[u8], lab: &LabRec, variant: Option<Defect>) {
        let site = &SITES[lab.site];
        let collected_form = if site.collection_seconds {
            TimeForm::Seconds
        } else {
            TimeForm::Minutes
        };
        push_id(&mut self.line, b'L', id, 9);
        self.line.push(b',');
        self.line.extend_from_slice(pid);
        self.line.push(b',');
        if variant != Some(Defect::UnknownPatient) {
            self.encounter_ref(lab.encounter);
        }
        self.line.push(b',');
        let (loinc, unit) = match variant {
            Some(Defect::ImpossibleValue) => ("2823-3", site.electrolyte_unit),
            Some(Defect::UnknownUnit) => {
                ("2823-3", *self.defects.rng.pick(&["mg/dL", "mg/L", "g/L"]))
            }
            _ => (
                loinc_of(lab.test, lab.site),
                unit_of(lab.test, lab.site, lab.unit_spelling),
            ),
        };
        self.line.extend_from_slice(loinc.as_bytes());
        self.line.push(b',');
        match variant {
            Some(Defect::BadNumber) => {
                let v = *self.defects.rng.pick(&BAD_LAB_VALUES);
                self.line.extend_from_slice(v.as_bytes());
            }
            Some(Defect::ImpossibleValue) => {
                // Above the 12.0 mmol/L limit of the contract.
                let v = self.defects.rng.range(12.5, 25.0);
                push_reported(&mut self.line, &Reported::new(v, 1));
            }
            Some(Defect::UnknownUnit) => {
                let v = self.defects.rng.range(3.6, 5.0);
                push_reported(&mut self.line, &Reported::new(v, 1));
            }
            _ => push_reported(&mut self.line, &lab.value),
        }
        self.line.push(b',');
        push_text(&mut self.line, unit);
        self.line.push(b',');
        let time = &self.sc.time;
        match variant {
            Some(Defect::BadTimestamp) => {
                let form = if lab.collected_at % 2 == 0 {
                    BadTimeForm::DaySlashMonth
                } else {
                    BadTimeForm::DayDotMonth
                };
                time.write_bad(&mut self.line, lab.collected_at, form);
            }
            _ => time.write(&mut self.line, lab.collected_at, collected_form),
        }
        self.line.push(b',');
        match variant {
            Some(Defect::EndBeforeStart) => {
                let minutes = 5 + lab.collected_at.rem_euclid(115);
                let end = before(
                    time,
                    lab.collected_at,
                    collected_form,
                    lab.collected_at - minutes * 60,
                    TimeForm::Seconds,
                );
                time.write(&mut self.line, end, TimeForm::Seconds);
            }
            _ => {
                if let Some(r) = lab.resulted_at {
                    let r = after(time, lab.collected_at, collected_form, r, TimeForm::Seconds);
                    time.write(&mut self.line, r, TimeForm::Seconds);
                }
            }
        }
        self.line.push(b',');
        if let Some(h) = lab.hemolysis_index {
            push_u64(&mut self.line, u64::from(h));
        }
        self.line.push(b'\n');
    }

    fn write_lab(&mut self, lab: &LabRec) -> Result<(), SynthError> {
        let id = self.next_result;
        self.next_result += 1;
        self.line.clear();
        let pid = std::mem::take(&mut self.patient_id);
        self.lab_line(id, &pid, lab, None);
        self.emit_clean(TableName::LabResults)?;
        for k in 0..self.planned.len() {
            let d = self.planned[k];
            self.line.clear();
            match d {
                Defect::DuplicateId => self.line.extend_from_slice(&self.clean),
                Defect::UnknownPatient => {
                    let mut other = Vec::new();
                    push_id(&mut other, b'P', self.unknown_patient(), 7);
                    let fresh = self.fresh_result();
                    self.lab_line(fresh, &other, lab, Some(d));
                }
                _ => {
                    let fresh = self.fresh_result();
                    self.lab_line(fresh, &pid, lab, Some(d));
                }
            }
            self.emit_defect(TableName::LabResults)?;
        }
        self.patient_id = pid;
        Ok(())
    }

    fn fresh_result(&mut self) -> u64 {
        let id = self.next_result;
        self.next_result += 1;
        id
    }

    // ---- medication events --------------------------------------------------------------

    fn med_line(&mut self, id: u64, pid: &[u8], m: &MedRec, variant: Option<Defect>) {
        let form = if m.kind == MedKind::Administer {
            TimeForm::Seconds
        } else {
            TimeForm::Minutes
        };
        push_id(&mut self.line, b'M', id, 9);
        self.line.push(b',');
        self.line.extend_from_slice(pid);
        self.line.push(b',');
        if variant != Some(Defect::UnknownPatient) {
            self.encounter_ref(m.encounter);
        }
        self.line.push(b',');
        self.line.extend_from_slice(m.drug.atc.as_bytes());
        self.line.push(b',');
        push_text(&mut self.line, m.drug.name);
        self.line.push(b',');
        self.line.extend_from_slice(m.drug.route.as_bytes());
        self.line.push(b',');
        self.line.extend_from_slice(m.kind.code().as_bytes());
        self.line.push(b',');
        let time = &self.sc.time;
        match variant {
            Some(Defect::BadTimestamp) => {
                time.write_bad(&mut self.line, m.start_at, BadTimeForm::DaySlashMonth)
            }
            _ => time.write(&mut self.line, m.start_at, form),
        }
        self.line.push(b',');
        match variant {
            Some(Defect::EndBeforeStart) => {
                let minutes = 10 + m.start_at.rem_euclid(110);
                let end = before(time, m.start_at, form, m.start_at - minutes * 60, form);
                time.write(&mut self.line, end, form);
            }
            _ => {
                if let Some(e) = m.end_at {
                    let e = after(time, m.start_at, form, e, form);
                    time.write(&mut self.line, e, form);
                }
            }
        }
        self.line.push(b',');
        let bad_number = variant == Some(Defect::BadNumber);
        match m.days_supply {
            Some(_) if bad_number => {
                let v = *self.defects.rng.pick(&BAD_COUNTS);
                self.line.extend_from_slice(v.as_bytes());
            }
            Some(d) => push_u64(&mut self.line, u64::from(d)),
            None => {}
        }
        self.line.push(b',');
        if bad_number && m.days_supply.is_none() {
            let v = *self.defects.rng.pick(&BAD_LAB_VALUES);
            self.line.extend_from_slice(v.as_bytes());
        } else {
            self.line.extend_from_slice(m.drug.dose.as_bytes());
        }
        self.line.push(b',');
        push_text(&mut self.line, m.drug.dose_unit);
        self.line.push(b'\n');
    }

    fn write_med(&mut self, m: &MedRec) -> Result<(), SynthError> {
        let id = self.next_event;
        self.next_event += 1;
        self.line.clear();
        let pid = std::mem::take(&mut self.patient_id);
        self.med_line(id, &pid, m, None);
        self.emit_clean(TableName::MedicationEvents)?;
        for k in 0..self.planned.len() {
            let d = self.planned[k];
            self.line.clear();
            match d {
                Defect::DuplicateId => self.line.extend_from_slice(&self.clean),
                Defect::UnknownPatient => {
                    let mut other = Vec::new();
                    push_id(&mut other, b'P', self.unknown_patient(), 7);
                    let fresh = self.fresh_event();
                    self.med_line(fresh, &other, m, Some(d));
                }
                _ => {
                    let fresh = self.fresh_event();
                    self.med_line(fresh, &pid, m, Some(d));
                }
            }
            self.emit_defect(TableName::MedicationEvents)?;
        }
        self.patient_id = pid;
        Ok(())
    }

    fn fresh_event(&mut self) -> u64 {
        let id = self.next_event;
        self.next_event += 1;
        id
    }

    // ---- diagnoses ----------------------------------------------------------------------

    fn diag_line(
        &mut self,
        pid: &[u8],
        encounter: u32,
        code: &str,
        at: i64,
        bad: Option<BadTimeForm>,
    ) {
        self.line.extend_from_slice(pid);
        self.line.push(b',');
        self.encounter_ref(encounter);
        self.line.push(b',');
        self.line.extend_from_slice(code.as_bytes());
        self.line.push(b',');
        match bad {
            Some(form) => self.sc.time.write_bad(&mut self.line, at, form),
            None => self.sc.time.write(&mut self.line, at, TimeForm::Minutes),
        }
        self.line.push(b'\n');
    }
}

fn table_index(table: TableName) -> usize {
    TableName::ALL
        .iter()
        .position(|t| *t == table)
        .expect("listed")
}

/// `end`, moved an hour later if, as written, it would not read after `start` (possible only
/// across the autumn clock change, where the repeated hour reads as its first occurrence).
fn after(time: &SiteTime, start: i64, start_form: TimeForm, end: i64, end_form: TimeForm) -> i64 {
    let mut end = end;
    while time.written_local(end, end_form) <= time.written_local(start, start_form) {
        end += 3600;
    }
    end
}

/// `end` for a planted end-before-start row: moved earlier until, as written, it reads before
/// `start`.
fn before(time: &SiteTime, start: i64, start_form: TimeForm, end: i64, end_form: TimeForm) -> i64 {
    let mut end = end;
    while time.written_local(end, end_form) >= time.written_local(start, start_form) {
        end -= 3600;
    }
    end
}

fn loinc_of(test: Test, site: usize) -> &'static str {
    match test {
        Test::Potassium => "2823-3",
        Test::PotassiumBloodGas => "6298-4",
        Test::Sodium => "2951-2",
        Test::Chloride => "2075-0",
        // Ashby Vale reports total CO₂ (2028-9) in the bicarbonate slot; the others bicarbonate.
        Test::Bicarbonate => {
            if SITES[site].creatinine == CreatinineReporting::MolesPerVolume {
                "2028-9"
            } else {
                "1963-8"
            }
        }
        Test::Creatinine => match SITES[site].creatinine {
            CreatinineReporting::MassPerVolume => "2160-0",
            CreatinineReporting::MolesPerVolume => "14682-9",
        },
        Test::UreaNitrogen => "3094-0",
        Test::Glucose => "2345-7",
        Test::CreatineKinase => "2157-6",
    }
}

fn unit_of(test: Test, site: usize, spelling: u8) -> &'static str {
    let s = &SITES[site];
    match test {
        Test::Potassium
        | Test::PotassiumBloodGas
        | Test::Sodium
        | Test::Chloride
        | Test::Bicarbonate => s.electrolyte_unit,
        Test::Creatinine => match (s.creatinine, spelling) {
            (CreatinineReporting::MassPerVolume, _) => "mg/dL",
            (CreatinineReporting::MolesPerVolume, 0) => "µmol/L",
            (CreatinineReporting::MolesPerVolume, _) => "umol/L",
        },
        Test::UreaNitrogen | Test::Glucose => "mg/dL",
        Test::CreatineKinase => {
            if s.creatinine == CreatinineReporting::MolesPerVolume {
                "IU/L"
            } else {
                "U/L"
            }
        }
    }
}

/// RFC 4180: a field with a comma, quote or line break is quoted, its quotes doubled.
pub fn push_text(out: &mut Vec<u8>, text: &str) {
    if text
        .bytes()
        .any(|b| matches!(b, b',' | b'"' | b'\n' | b'\r'))
    {
        out.push(b'"');
        for b in text.bytes() {
            if b == b'"' {
                out.push(b'"');
            }
            out.push(b);
        }
        out.push(b'"');
    } else {
        out.extend_from_slice(text.as_bytes());
    }
}

pub fn push_u64(out: &mut Vec<u8>, v: u64) {
    let mut digits = [0u8; 20];
    let mut n = v;
    let mut i = digits.len();
    loop {
        i -= 1;
        digits[i] = b'0' + (n % 10) as u8;
        n /= 10;
        if n == 0 {
            break;
        }
    }
    out.extend_from_slice(&digits[i..]);
}

fn push_id(out: &mut Vec<u8>, prefix: u8, v: u64, width: usize) {
    out.push(prefix);
    let mut digits = [0u8; 20];
    let mut n = v;
    let mut i = digits.len();
    loop {
        i -= 1;
        digits[i] = b'0' + (n % 10) as u8;
        n /= 10;
        if n == 0 {
            break;
        }
    }
    for _ in (digits.len() - i)..width {
        out.push(b'0');
    }
    out.extend_from_slice(&digits[i..]);
}

pub fn push_reported(out: &mut Vec<u8>, r: &Reported) {
    if let Some(c) = r.comparator {
        out.extend_from_slice(c.as_bytes());
    }
    let scaled = r.scaled.unsigned_abs();
    if r.scaled < 0 {
        out.push(b'-');
    }
    let scale = 10u64.pow(u32::from(r.decimals));
    push_u64(out, scaled / scale);
    if r.decimals > 0 {
        out.push(b'.');
        let frac = scaled % scale;
        let mut div = scale / 10;
        while div > 0 {
            out.push(b'0' + (frac / div % 10) as u8);
            div /= 10;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn text(f: impl Fn(&mut Vec<u8>)) -> String {
        let mut v = Vec::new();
        f(&mut v);
        String::from_utf8(v).unwrap()
    }

    #[test]
    fn rfc4180_quoting() {
        let cases = [
            ("plain", "plain"),
            (
                "Birch Ward, general medicine",
                "\"Birch Ward, general medicine\"",
            ),
            ("say \"hi\"", "\"say \"\"hi\"\"\""),
            ("two\nlines", "\"two\nlines\""),
            ("µmol/L", "µmol/L"),
        ];
        for (input, expected) in cases {
            assert_eq!(text(|v| push_text(v, input)), expected);
        }
    }

    #[test]
    fn numbers_and_ids() {
        assert_eq!(text(|v| push_id(v, b'P', 42, 7)), "P0000042");
        assert_eq!(text(|v| push_id(v, b'P', 123_456_789, 7)), "P123456789");
        assert_eq!(text(|v| push_u64(v, 0)), "0");
        let cases = [
            (Reported::new(5.8, 1), "5.8"),
            (Reported::new(1.05, 2), "1.05"),
            (Reported::new(0.07, 2), "0.07"),
            (Reported::new(109.4, 0), "109"),
            (Reported::with_comparator(9.0, 1, ">"), ">9.0"),
            (Reported::with_comparator(600.0, 0, ">"), ">600"),
            (Reported::with_comparator(1.5, 1, "<"), "<1.5"),
        ];
        for (r, expected) in cases {
            assert_eq!(text(|v| push_reported(v, &r)), expected);
        }
    }

    #[test]
    fn reported_units_and_codes_are_accepted_by_the_contract() {
        use kcohort_model::Analyte;
        let tests = [
            Test::Potassium,
            Test::PotassiumBloodGas,
            Test::Sodium,
            Test::Chloride,
            Test::Bicarbonate,
            Test::Creatinine,
            Test::UreaNitrogen,
            Test::Glucose,
            Test::CreatineKinase,
        ];
        for site in 0..SITES.len() {
            for test in tests {
                for spelling in 0..2 {
                    let loinc = loinc_of(test, site);
                    let analyte =
                        Analyte::from_loinc(loinc).unwrap_or_else(|| panic!("{loinc} unlisted"));
                    let unit = unit_of(test, site, spelling);
                    assert!(analyte.conversion_for(unit).is_some(), "{loinc} {unit}");
                }
            }
        }
    }
}
