use super::{TableRows, TableRun, check_references, instant_builder, note_encounter_ref};
use crate::context::IngestContext;
use crate::row_check::{Reject, RowCheck, index_of};
use arrow_array::builder::ArrayBuilder;
use arrow_array::builder::{StringBuilder, TimestampMicrosecondBuilder};
use arrow_array::{ArrayRef, RecordBatch};
use kcohort_model::TableName;
use kcohort_model::code::is_valid_icd10;
use kcohort_model::store_schema::stored_schema;
use std::sync::Arc;

const T: TableName = TableName::Diagnoses;
const PATIENT_ID: usize = index_of(T.columns(), "patient_id");
const ENCOUNTER_ID: usize = index_of(T.columns(), "encounter_id");
const ICD10: usize = index_of(T.columns(), "icd10");
const RECORDED_AT: usize = index_of(T.columns(), "recorded_at");

pub struct DiagnosisRows {
    patient_id: StringBuilder,
    encounter_id: StringBuilder,
    icd10: StringBuilder,
    recorded_at: TimestampMicrosecondBuilder,
}

impl Default for DiagnosisRows {
    fn default() -> Self {
        DiagnosisRows {
            patient_id: StringBuilder::new(),
            encounter_id: StringBuilder::new(),
            icd10: StringBuilder::new(),
            recorded_at: instant_builder(),
        }
    }
}

impl TableRows for DiagnosisRows {
    fn accept(
        &mut self,
        fields: &[&str],
        ctx: &mut IngestContext,
        run: &mut TableRun,
    ) -> Result<(), Reject> {
        let mut c = RowCheck::new(T, fields);
        let patient = c.required(PATIENT_ID);
        let encounter = c.optional(ENCOUNTER_ID);
        let code = c.required(ICD10);
        let code = c.code(ICD10, code, is_valid_icd10, "an ICD-10 code like E87.5");
        let recorded_text = c.required(RECORDED_AT);
        let recorded = c.time(RECORDED_AT, recorded_text, ctx);
        check_references(&mut c, None, patient.map(|v| (PATIENT_ID, v)), ctx, run);
        c.finish()?;
        let (Some(patient), Some(code), Some(recorded)) = (patient, code, recorded) else {
            unreachable!("an accepted row has every required value");
        };
        note_encounter_ref(encounter, ctx, run);
        self.patient_id.append_value(patient);
        self.encounter_id.append_option(encounter);
        self.icd10.append_value(code);
        self.recorded_at.append_value(recorded);
        Ok(())
    }

    fn pending(&self) -> usize {
        self.patient_id.len()
    }

    fn take_batch(&mut self) -> RecordBatch {
        let columns: Vec<ArrayRef> = vec![
            Arc::new(self.patient_id.finish()),
            Arc::new(self.encounter_id.finish()),
            Arc::new(self.icd10.finish()),
            Arc::new(self.recorded_at.finish()),
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
    fn diagnosis_rules() {
        let got = verdicts(
            TableName::Diagnoses,
            &[
                &["P1", "E1", "E87.5", "2026-01-01T08:00"],
                &["P1", "", "N18.32", "2026-01-01"],
                &["P1", "E1", "E87.5", "2026-01-01T08:00"],
                &["P1", "E1", "hyperkalemia", "2026-01-01T08:00"],
                &["P2", "E1", "E87.5", "2026-01-01T08:00"],
            ],
        );
        // Diagnoses have no id: an identical row is kept.
        assert_eq!(
            got,
            vec![None, None, None, Some(BadCode), Some(UnknownPatient)]
        );
    }
}
