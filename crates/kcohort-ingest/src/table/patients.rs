use super::{TableRows, TableRun, check_references, instant_builder};
use crate::context::{IdSet, IngestContext};
use crate::row_check::{Reject, RowCheck, index_of};
use arrow_array::builder::ArrayBuilder;
use arrow_array::builder::{Int32Builder, StringBuilder, TimestampMicrosecondBuilder};
use arrow_array::{ArrayRef, RecordBatch};
use kcohort_model::contract::SEX_VALUES;
use kcohort_model::store_schema::stored_schema;
use kcohort_model::{RejectReason, TableName};
use std::sync::Arc;

const T: TableName = TableName::Patients;
const PATIENT_ID: usize = index_of(T.columns(), "patient_id");
const SEX: usize = index_of(T.columns(), "sex");
const BIRTH_YEAR: usize = index_of(T.columns(), "birth_year");
const DEATH_AT: usize = index_of(T.columns(), "death_at");

pub struct PatientRows {
    patient_id: StringBuilder,
    sex: StringBuilder,
    birth_year: Int32Builder,
    death_at: TimestampMicrosecondBuilder,
}

impl Default for PatientRows {
    fn default() -> Self {
        PatientRows {
            patient_id: StringBuilder::new(),
            sex: StringBuilder::new(),
            birth_year: Int32Builder::new(),
            death_at: instant_builder(),
        }
    }
}

impl TableRows for PatientRows {
    fn accept(
        &mut self,
        fields: &[&str],
        ctx: &mut IngestContext,
        run: &mut TableRun,
    ) -> Result<(), Reject> {
        let mut c = RowCheck::new(T, fields);
        let id = c.required(PATIENT_ID);
        let sex = c.required(SEX);
        let sex = c.category(SEX, sex, SEX_VALUES);
        let year_text = c.required(BIRTH_YEAR);
        let year = match year_text {
            Some(v) => match v.parse::<i32>() {
                Ok(y) => Some(y),
                Err(_) => {
                    c.fail(
                        RejectReason::BadNumber,
                        BIRTH_YEAR,
                        format!("expected a year like 1957, found `{v}`"),
                        Some(v),
                    );
                    None
                }
            },
            None => None,
        };
        let death_text = c.optional(DEATH_AT);
        let death = c.time(DEATH_AT, death_text, ctx);
        if let Some(y) = year
            && !(1900..=ctx.extract_year).contains(&y)
        {
            c.fail(
                RejectReason::YearOutOfRange,
                BIRTH_YEAR,
                format!(
                    "expected a year from 1900 to {}, found {y}",
                    ctx.extract_year
                ),
                year_text,
            );
        }
        let claim = check_references(&mut c, id.map(|v| (PATIENT_ID, v)), None, ctx, run);
        c.finish()?;
        let (Some(id), Some(sex), Some(year), Some(claim)) = (id, sex, year, claim) else {
            unreachable!("an accepted row has every required value");
        };
        run.accepted_ids.insert(claim);
        ctx.patients.insert_hash(IdSet::hash(claim));
        self.patient_id.append_value(id);
        self.sex.append_value(sex);
        self.birth_year.append_value(year);
        self.death_at.append_option(death);
        Ok(())
    }

    fn pending(&self) -> usize {
        self.patient_id.len()
    }

    fn take_batch(&mut self) -> RecordBatch {
        let columns: Vec<ArrayRef> = vec![
            Arc::new(self.patient_id.finish()),
            Arc::new(self.sex.finish()),
            Arc::new(self.birth_year.finish()),
            Arc::new(self.death_at.finish()),
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
    fn patient_rules() {
        let got = verdicts(
            TableName::Patients,
            &[
                &["P2", "F", "1950", ""],
                &["P3", "M", "1900", "2026-01-02T03:04"],
                &["P4", "X", "1950", ""],
                &["P5", "F", "19x0", ""],
                &["P6", "F", "1899", ""],
                &["P7", "F", "2027", ""],
                &["P2", "M", "1960", ""],
                &["", "F", "1950", ""],
                &["P8", "F", "1950", "1899-12-31"],
                &["P9", "F", "1950", "02.01.2026"],
                // Several failures: the earliest rule wins (missing value before bad category).
                &["P10", "", "19x0", ""],
            ],
        );
        assert_eq!(
            got,
            vec![
                None,
                None,
                Some(BadCategory),
                Some(BadNumber),
                Some(YearOutOfRange),
                Some(YearOutOfRange),
                Some(DuplicateId),
                Some(MissingValue),
                Some(TimeOutOfRange),
                Some(BadTimestamp),
                Some(MissingValue),
            ]
        );
    }
}
