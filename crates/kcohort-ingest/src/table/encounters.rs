use super::{TableRows, TableRun, check_references, instant_builder};
use crate::context::{IdSet, IngestContext};
use crate::row_check::{Reject, RowCheck, index_of};
use arrow_array::builder::ArrayBuilder;
use arrow_array::builder::{StringBuilder, TimestampMicrosecondBuilder};
use arrow_array::{ArrayRef, RecordBatch};
use kcohort_model::TableName;
use kcohort_model::contract::{DISCHARGE_STATUSES, ENCOUNTER_CLASSES};
use kcohort_model::store_schema::stored_schema;
use std::sync::Arc;

const T: TableName = TableName::Encounters;
const ENCOUNTER_ID: usize = index_of(T.columns(), "encounter_id");
const PATIENT_ID: usize = index_of(T.columns(), "patient_id");
const CLASS: usize = index_of(T.columns(), "class");
const UNIT: usize = index_of(T.columns(), "unit");
const ADMITTED_AT: usize = index_of(T.columns(), "admitted_at");
const DISCHARGED_AT: usize = index_of(T.columns(), "discharged_at");
const DISCHARGE_STATUS: usize = index_of(T.columns(), "discharge_status");

pub struct EncounterRows {
    encounter_id: StringBuilder,
    patient_id: StringBuilder,
    class: StringBuilder,
    unit: StringBuilder,
    admitted_at: TimestampMicrosecondBuilder,
    discharged_at: TimestampMicrosecondBuilder,
    discharge_status: StringBuilder,
}

impl Default for EncounterRows {
    fn default() -> Self {
        EncounterRows {
            encounter_id: StringBuilder::new(),
            patient_id: StringBuilder::new(),
            class: StringBuilder::new(),
            unit: StringBuilder::new(),
            admitted_at: instant_builder(),
            discharged_at: instant_builder(),
            discharge_status: StringBuilder::new(),
        }
    }
}

impl TableRows for EncounterRows {
    fn accept(
        &mut self,
        fields: &[&str],
        ctx: &mut IngestContext,
        run: &mut TableRun,
    ) -> Result<(), Reject> {
        let mut c = RowCheck::new(T, fields);
        let id = c.required(ENCOUNTER_ID);
        let patient = c.required(PATIENT_ID);
        let class = c.required(CLASS);
        let class = c.category(CLASS, class, ENCOUNTER_CLASSES);
        let unit = c.required(UNIT);
        let admitted_text = c.required(ADMITTED_AT);
        let discharged_text = c.optional(DISCHARGED_AT);
        let status = c.optional(DISCHARGE_STATUS);
        let status = match status {
            Some(_) => c.category(DISCHARGE_STATUS, status, DISCHARGE_STATUSES),
            None => None,
        };
        let admitted = c.time(ADMITTED_AT, admitted_text, ctx);
        let discharged = c.time(DISCHARGED_AT, discharged_text, ctx);
        c.end_not_before(DISCHARGED_AT, admitted, discharged, ADMITTED_AT);
        let claim = check_references(
            &mut c,
            id.map(|v| (ENCOUNTER_ID, v)),
            patient.map(|v| (PATIENT_ID, v)),
            ctx,
            run,
        );
        c.finish()?;
        let (Some(id), Some(patient), Some(class), Some(unit), Some(admitted), Some(claim)) =
            (id, patient, class, unit, admitted, claim)
        else {
            unreachable!("an accepted row has every required value");
        };
        run.accepted_ids.insert(claim);
        ctx.encounters.insert_hash(IdSet::hash(claim));
        self.encounter_id.append_value(id);
        self.patient_id.append_value(patient);
        self.class.append_value(class);
        self.unit.append_value(unit);
        self.admitted_at.append_value(admitted);
        self.discharged_at.append_option(discharged);
        self.discharge_status.append_option(status);
        Ok(())
    }

    fn pending(&self) -> usize {
        self.encounter_id.len()
    }

    fn take_batch(&mut self) -> RecordBatch {
        let columns: Vec<ArrayRef> = vec![
            Arc::new(self.encounter_id.finish()),
            Arc::new(self.patient_id.finish()),
            Arc::new(self.class.finish()),
            Arc::new(self.unit.finish()),
            Arc::new(self.admitted_at.finish()),
            Arc::new(self.discharged_at.finish()),
            Arc::new(self.discharge_status.finish()),
        ];
        RecordBatch::try_new(stored_schema(T), columns).expect("columns match the stored schema")
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::verdicts;
    use kcohort_model::RejectReason::*;
    use kcohort_model::TableName;

    #[test]
    fn encounter_rules() {
        let got = verdicts(
            TableName::Encounters,
            &[
                &[
                    "E2",
                    "P1",
                    "inpatient",
                    "W1",
                    "2026-01-01T08:00",
                    "2026-01-03T10:00",
                    "home",
                ],
                &["E3", "P1", "emergency", "ED", "2026-01-01T08:00", "", ""],
                &[
                    "E4",
                    "P1",
                    "inpatient",
                    "W1",
                    "2026-01-01T08:00",
                    "2026-01-01T08:00",
                    "",
                ],
                &[
                    "E5",
                    "P1",
                    "inpatient",
                    "W1",
                    "2026-01-03T08:00",
                    "2026-01-01T08:00",
                    "home",
                ],
                &["E6", "P9", "inpatient", "W1", "2026-01-01T08:00", "", ""],
                &["E7", "P1", "day-case", "W1", "2026-01-01T08:00", "", ""],
                &["E8", "P1", "inpatient", "W1", "2026-07-02T08:00", "", ""],
                // End times after the extract end are kept (later cut at it).
                &[
                    "E9",
                    "P1",
                    "inpatient",
                    "W1",
                    "2026-06-01T08:00",
                    "2026-08-01T08:00",
                    "",
                ],
                &[
                    "E10",
                    "P1",
                    "inpatient",
                    "W1",
                    "2026-01-01T08:00",
                    "",
                    "deceased",
                ],
                &["E2", "P1", "inpatient", "W1", "2026-01-01T08:00", "", ""],
                &["E11", "P1", "inpatient", "", "2026-01-01T08:00", "", ""],
                // In the spring-forward gap of Europe/Berlin (2026-03-29 02:00-03:00).
                &["E12", "P1", "inpatient", "W1", "2026-03-29T02:30", "", ""],
            ],
        );
        assert_eq!(
            got,
            vec![
                None,
                None,
                None,
                Some(EndBeforeStart),
                Some(UnknownPatient),
                Some(BadCategory),
                Some(TimeOutOfRange),
                None,
                Some(BadCategory),
                Some(DuplicateId),
                Some(MissingValue),
                Some(NonexistentLocalTime),
            ]
        );
    }
}
