use super::{TableRows, TableRun, check_references, instant_builder, note_encounter_ref};
use crate::context::IngestContext;
use crate::row_check::{Reject, RowCheck, index_of};
use arrow_array::builder::ArrayBuilder;
use arrow_array::builder::{Float64Builder, StringBuilder, TimestampMicrosecondBuilder};
use arrow_array::{ArrayRef, RecordBatch};
use kcohort_model::TableName;
use kcohort_model::code::is_valid_atc;
use kcohort_model::contract::{MEDICATION_KINDS, ROUTES};
use kcohort_model::store_schema::stored_schema;
use std::sync::Arc;

const T: TableName = TableName::MedicationEvents;
const EVENT_ID: usize = index_of(T.columns(), "event_id");
const PATIENT_ID: usize = index_of(T.columns(), "patient_id");
const ENCOUNTER_ID: usize = index_of(T.columns(), "encounter_id");
const ATC: usize = index_of(T.columns(), "atc");
const DRUG_NAME: usize = index_of(T.columns(), "drug_name");
const ROUTE: usize = index_of(T.columns(), "route");
const KIND: usize = index_of(T.columns(), "kind");
const START_AT: usize = index_of(T.columns(), "start_at");
const END_AT: usize = index_of(T.columns(), "end_at");
const DAYS_SUPPLY: usize = index_of(T.columns(), "days_supply");
const DOSE: usize = index_of(T.columns(), "dose");
const DOSE_UNIT: usize = index_of(T.columns(), "dose_unit");

pub struct MedicationRows {
    event_id: StringBuilder,
    patient_id: StringBuilder,
    encounter_id: StringBuilder,
    atc: StringBuilder,
    drug_name: StringBuilder,
    route: StringBuilder,
    kind: StringBuilder,
    start_at: TimestampMicrosecondBuilder,
    end_at: TimestampMicrosecondBuilder,
    days_supply: Float64Builder,
    dose: Float64Builder,
    dose_unit: StringBuilder,
}

impl Default for MedicationRows {
    fn default() -> Self {
        MedicationRows {
            event_id: StringBuilder::new(),
            patient_id: StringBuilder::new(),
            encounter_id: StringBuilder::new(),
            atc: StringBuilder::new(),
            drug_name: StringBuilder::new(),
            route: StringBuilder::new(),
            kind: StringBuilder::new(),
            start_at: instant_builder(),
            end_at: instant_builder(),
            days_supply: Float64Builder::new(),
            dose: Float64Builder::new(),
            dose_unit: StringBuilder::new(),
        }
    }
}

impl TableRows for MedicationRows {
    fn accept(
        &mut self,
        fields: &[&str],
        ctx: &mut IngestContext,
        run: &mut TableRun,
    ) -> Result<(), Reject> {
        let mut c = RowCheck::new(T, fields);
        let id = c.required(EVENT_ID);
        let patient = c.required(PATIENT_ID);
        let encounter = c.optional(ENCOUNTER_ID);
        let atc = c.required(ATC);
        let atc = c.code(ATC, atc, is_valid_atc, "an ATC code like C03DA01");
        let drug_name = c.optional(DRUG_NAME);
        let route = c.required(ROUTE);
        let route = c.category(ROUTE, route, ROUTES);
        let kind = c.required(KIND);
        let kind = c.category(KIND, kind, MEDICATION_KINDS);
        let start_text = c.required(START_AT);
        let end_text = c.optional(END_AT);
        let days_text = c.optional(DAYS_SUPPLY);
        let dose_text = c.optional(DOSE);
        let days_supply = c.non_negative(DAYS_SUPPLY, days_text);
        let dose = c.non_negative(DOSE, dose_text);
        let dose_unit = c.optional(DOSE_UNIT);
        let start = c.time(START_AT, start_text, ctx);
        let end = c.time(END_AT, end_text, ctx);
        c.end_not_before(END_AT, start, end, START_AT);
        let claim = check_references(
            &mut c,
            id.map(|v| (EVENT_ID, v)),
            patient.map(|v| (PATIENT_ID, v)),
            ctx,
            run,
        );
        c.finish()?;
        let (Some(id), Some(patient), Some(atc), Some(route), Some(kind), Some(start), Some(claim)) =
            (id, patient, atc, route, kind, start, claim)
        else {
            unreachable!("an accepted row has every required value");
        };
        run.accepted_ids.insert(claim);
        note_encounter_ref(encounter, ctx, run);
        self.event_id.append_value(id);
        self.patient_id.append_value(patient);
        self.encounter_id.append_option(encounter);
        self.atc.append_value(atc);
        self.drug_name.append_option(drug_name);
        self.route.append_value(route);
        self.kind.append_value(kind);
        self.start_at.append_value(start);
        self.end_at.append_option(end);
        self.days_supply.append_option(days_supply);
        self.dose.append_option(dose);
        self.dose_unit.append_option(dose_unit);
        Ok(())
    }

    fn pending(&self) -> usize {
        self.event_id.len()
    }

    fn take_batch(&mut self) -> RecordBatch {
        let columns: Vec<ArrayRef> = vec![
            Arc::new(self.event_id.finish()),
            Arc::new(self.patient_id.finish()),
            Arc::new(self.encounter_id.finish()),
            Arc::new(self.atc.finish()),
            Arc::new(self.drug_name.finish()),
            Arc::new(self.route.finish()),
            Arc::new(self.kind.finish()),
            Arc::new(self.start_at.finish()),
            Arc::new(self.end_at.finish()),
            Arc::new(self.days_supply.finish()),
            Arc::new(self.dose.finish()),
            Arc::new(self.dose_unit.finish()),
        ];
        RecordBatch::try_new(stored_schema(T), columns).expect("columns match the stored schema")
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::verdicts;
    use kcohort_model::RejectReason::*;
    use kcohort_model::TableName;

    const S: &str = "2026-01-01T08:00";

    #[test]
    fn medication_rules() {
        let got = verdicts(
            TableName::MedicationEvents,
            &[
                &[
                    "M1",
                    "P1",
                    "E1",
                    "C03DA01",
                    "spironolactone",
                    "PO",
                    "dispense",
                    S,
                    "",
                    "30",
                    "25",
                    "mg",
                ],
                &[
                    "M2",
                    "P1",
                    "",
                    "A10AB01",
                    "",
                    "IV",
                    "administer",
                    S,
                    "2026-01-01T08:15",
                    "",
                    "10",
                    "units",
                ],
                &[
                    "M3", "P1", "E1", "C03DA1", "", "PO", "dispense", S, "", "30", "", "",
                ],
                &[
                    "M4", "P1", "E1", "C03DA01", "", "oral", "dispense", S, "", "30", "", "",
                ],
                &[
                    "M5",
                    "P1",
                    "E1",
                    "C03DA01",
                    "",
                    "PO",
                    "prescribe",
                    S,
                    "",
                    "30",
                    "",
                    "",
                ],
                &[
                    "M6", "P1", "E1", "C03DA01", "", "PO", "dispense", S, "", "-30", "", "",
                ],
                &[
                    "M7",
                    "P1",
                    "E1",
                    "C03DA01",
                    "",
                    "PO",
                    "administer",
                    S,
                    "2025-12-31T08:00",
                    "",
                    "",
                    "",
                ],
                &[
                    "M1", "P1", "E1", "C03DA01", "", "PO", "dispense", S, "", "30", "", "",
                ],
                &[
                    "M8", "P3", "E1", "C03DA01", "", "PO", "dispense", S, "", "30", "", "",
                ],
                &[
                    "M9", "P1", "E1", "C03DA01", "", "PO", "dispense", S, "", "thirty", "", "",
                ],
            ],
        );
        assert_eq!(
            got,
            vec![
                None,
                None,
                Some(BadCode),
                Some(BadCategory),
                Some(BadCategory),
                Some(NegativeNumber),
                Some(EndBeforeStart),
                Some(DuplicateId),
                Some(UnknownPatient),
                Some(BadNumber),
            ]
        );
    }
}
