//! One module per contract table: the checks of its rows and the Arrow columns they fill.
//!
//! Every table follows the same order: per-column checks (missing values, categories, codes,
//! numbers, timestamps), then checks across columns (end before start, units, plausible values),
//! then the duplicate-id rule, then the unknown-patient rule. The verdict keeps the earliest rule
//! in that order (see `kcohort_model::RejectReason::ALL`).

mod diagnoses;
mod encounters;
mod lab_results;
mod medication_events;
mod patients;

use crate::context::{AcceptedIds, IngestContext};
use crate::row_check::{Reject, RowCheck};
use arrow_array::RecordBatch;
use arrow_array::builder::TimestampMicrosecondBuilder;
use kcohort_model::manifest::TableCounts;
use kcohort_model::{RejectReason, TableName};

/// The rows of one table being ingested.
pub trait TableRows: Send {
    /// Check one row (fields in contract order); append it when accepted.
    fn accept(
        &mut self,
        fields: &[&str],
        ctx: &mut IngestContext,
        run: &mut TableRun,
    ) -> Result<(), Reject>;
    /// Rows appended since the last batch was taken.
    fn pending(&self) -> usize;
    /// The appended rows as a batch of the stored schema.
    fn take_batch(&mut self) -> RecordBatch;
}

/// Per-table state of one ingest besides the columns: accepted ids and counters.
#[derive(Debug, Default)]
pub struct TableRun {
    /// Ids accepted from this extract (duplicates rule; replacement on append).
    pub accepted_ids: AcceptedIds,
    pub counts: TableCounts,
    /// The patient of the previous row that passed the reference rule: rows usually come grouped
    /// by patient, so most rows need no lookup.
    pub last_patient: String,
}

pub fn rows_for(table: TableName) -> Box<dyn TableRows> {
    match table {
        TableName::Patients => Box::new(patients::PatientRows::default()),
        TableName::Encounters => Box::new(encounters::EncounterRows::default()),
        TableName::LabResults => Box::new(lab_results::LabRows::default()),
        TableName::MedicationEvents => Box::new(medication_events::MedicationRows::default()),
        TableName::Diagnoses => Box::new(diagnoses::DiagnosisRows::default()),
    }
}

fn instant_builder() -> TimestampMicrosecondBuilder {
    TimestampMicrosecondBuilder::new().with_timezone("UTC")
}

/// The last two rules: the row's id must be new in this extract, and its patient known.
/// Returns the id to claim once the row is accepted.
fn check_references<'a>(
    check: &mut RowCheck<'_>,
    id: Option<(usize, &'a str)>,
    patient: Option<(usize, &str)>,
    ctx: &IngestContext,
    run: &mut TableRun,
) -> Option<&'a str> {
    let mut claim = None;
    if let Some((column, id)) = id
        && !check.failed_before(RejectReason::DuplicateId)
    {
        if run.accepted_ids.contains(id) {
            check.fail_reference(RejectReason::DuplicateId, column, id);
        }
        claim = Some(id);
    }
    if let Some((column, patient)) = patient
        && !check.failed_before(RejectReason::UnknownPatient)
        && run.last_patient != patient
    {
        if ctx.patients.contains(patient) {
            run.last_patient.clear();
            run.last_patient.push_str(patient);
        } else {
            check.fail_reference(RejectReason::UnknownPatient, column, patient);
        }
    }
    claim
}

/// An optional encounter reference that names no known encounter is kept and counted.
fn note_encounter_ref(encounter: Option<&str>, ctx: &IngestContext, run: &mut TableRun) {
    if let Some(e) = encounter
        && !ctx.encounters.contains(e)
    {
        run.counts.unmatched_encounter_refs += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::context::IdSet;
    use crate::timestamp::{SiteClock, SiteZone};

    pub(super) fn context() -> IngestContext {
        let mut patients = IdSet::default();
        patients.insert_hash(IdSet::hash("P1"));
        let mut encounters = IdSet::default();
        encounters.insert_hash(IdSet::hash("E1"));
        IngestContext {
            clock: SiteClock::new(SiteZone::parse("Europe/Berlin").unwrap()),
            extract_end: chrono::DateTime::parse_from_rfc3339("2026-06-30T22:00:00Z")
                .unwrap()
                .timestamp_micros(),
            extract_year: 2026,
            patients,
            encounters,
            ambiguous_local_times: 0,
        }
    }

    /// Run rows through a table and return the verdict of each: None accepted, Some(reason).
    pub(super) fn verdicts(table: TableName, rows: &[&[&str]]) -> Vec<Option<RejectReason>> {
        let mut ctx = context();
        let mut run = TableRun::default();
        let mut t = rows_for(table);
        rows.iter()
            .map(|r| {
                assert_eq!(r.len(), table.columns().len(), "test row width");
                t.accept(r, &mut ctx, &mut run).err().map(|e| e.reason)
            })
            .collect()
    }
}
