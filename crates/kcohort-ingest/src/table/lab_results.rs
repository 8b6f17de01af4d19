use super::{TableRows, TableRun, check_references, instant_builder, note_encounter_ref};
use crate::context::IngestContext;
use crate::lab_value::parse_lab_value;
use crate::row_check::{Reject, RowCheck, index_of};
use arrow_array::builder::ArrayBuilder;
use arrow_array::builder::{Float64Builder, StringBuilder, TimestampMicrosecondBuilder};
use arrow_array::{ArrayRef, RecordBatch};
use kcohort_model::code::is_valid_loinc;
use kcohort_model::store_schema::stored_schema;
use kcohort_model::{Analyte, RejectReason, TableName};
use std::sync::Arc;

const T: TableName = TableName::LabResults;
const RESULT_ID: usize = index_of(T.columns(), "result_id");
const PATIENT_ID: usize = index_of(T.columns(), "patient_id");
const ENCOUNTER_ID: usize = index_of(T.columns(), "encounter_id");
const LOINC: usize = index_of(T.columns(), "loinc");
const VALUE: usize = index_of(T.columns(), "value");
const UNIT: usize = index_of(T.columns(), "unit");
const COLLECTED_AT: usize = index_of(T.columns(), "collected_at");
const RESULTED_AT: usize = index_of(T.columns(), "resulted_at");
const HEMOLYSIS_INDEX: usize = index_of(T.columns(), "hemolysis_index");

/// What a LOINC code means to ingest (looked up once per distinct code).
#[derive(Clone, Copy)]
enum LoincInfo {
    Malformed,
    Unlisted,
    Listed(Analyte),
}

pub struct LabRows {
    result_id: StringBuilder,
    patient_id: StringBuilder,
    encounter_id: StringBuilder,
    loinc: StringBuilder,
    analyte: StringBuilder,
    value: Float64Builder,
    unit: StringBuilder,
    value_comparator: StringBuilder,
    reported_value: StringBuilder,
    reported_unit: StringBuilder,
    collected_at: TimestampMicrosecondBuilder,
    resulted_at: TimestampMicrosecondBuilder,
    hemolysis_index: Float64Builder,
    /// Meaning of each LOINC code seen so far (an extract uses a few dozen at most, so a short
    /// list scanned in order beats hashing).
    loinc_cache: Vec<(String, LoincInfo)>,
    /// Conversion factor per (analyte, unit as written); None = unit not accepted.
    unit_cache: Vec<(Analyte, String, Option<f64>)>,
}

impl Default for LabRows {
    fn default() -> Self {
        LabRows {
            result_id: StringBuilder::new(),
            patient_id: StringBuilder::new(),
            encounter_id: StringBuilder::new(),
            loinc: StringBuilder::new(),
            analyte: StringBuilder::new(),
            value: Float64Builder::new(),
            unit: StringBuilder::new(),
            value_comparator: StringBuilder::new(),
            reported_value: StringBuilder::new(),
            reported_unit: StringBuilder::new(),
            collected_at: instant_builder(),
            resulted_at: instant_builder(),
            hemolysis_index: Float64Builder::new(),
            loinc_cache: Vec::new(),
            unit_cache: Vec::new(),
        }
    }
}

impl LabRows {
    fn loinc_info(&mut self, code: &str) -> LoincInfo {
        if let Some((_, info)) = self.loinc_cache.iter().find(|(c, _)| c == code) {
            return *info;
        }
        let info = if !is_valid_loinc(code) {
            LoincInfo::Malformed
        } else {
            Analyte::from_loinc(code).map_or(LoincInfo::Unlisted, LoincInfo::Listed)
        };
        self.loinc_cache.push((code.to_string(), info));
        info
    }

    fn factor(&mut self, analyte: Analyte, unit: &str) -> Option<f64> {
        if let Some((_, _, f)) = self
            .unit_cache
            .iter()
            .find(|(a, u, _)| *a == analyte && u == unit)
        {
            return *f;
        }
        let f = analyte.conversion_for(unit).map(|c| c.factor);
        self.unit_cache.push((analyte, unit.to_string(), f));
        f
    }
}

impl TableRows for LabRows {
    fn accept(
        &mut self,
        fields: &[&str],
        ctx: &mut IngestContext,
        run: &mut TableRun,
    ) -> Result<(), Reject> {
        let mut c = RowCheck::new(T, fields);
        let id = c.required(RESULT_ID);
        let patient = c.required(PATIENT_ID);
        let encounter = c.optional(ENCOUNTER_ID);
        let loinc = c.required(LOINC);
        let value_text = c.required(VALUE);
        let unit = c.required(UNIT);
        let collected_text = c.required(COLLECTED_AT);
        let resulted_text = c.optional(RESULTED_AT);
        let hemolysis_text = c.optional(HEMOLYSIS_INDEX);

        let info = loinc.map(|code| self.loinc_info(code));
        if let (Some(LoincInfo::Malformed), Some(code)) = (info, loinc) {
            c.fail(
                RejectReason::BadCode,
                LOINC,
                format!(
                    "expected a LOINC code like 2823-3 (with a valid check digit), found `{code}`"
                ),
                Some(code),
            );
        }
        let value = match value_text {
            Some(v) => {
                let parsed = parse_lab_value(v);
                if parsed.is_none() {
                    c.fail(
                        RejectReason::BadNumber,
                        VALUE,
                        format!("expected a number, optionally with a comparator (5.8, >9.0, <1.5), found `{v}`"),
                        Some(v),
                    );
                }
                parsed
            }
            None => None,
        };
        let hemolysis = c.non_negative(HEMOLYSIS_INDEX, hemolysis_text);
        let collected = c.time(COLLECTED_AT, collected_text, ctx);
        let resulted = c.time(RESULTED_AT, resulted_text, ctx);
        c.end_not_before(RESULTED_AT, collected, resulted, COLLECTED_AT);

        let mut canonical = None;
        if let (Some(LoincInfo::Listed(analyte)), Some(unit_text)) = (info, unit) {
            match self.factor(analyte, unit_text) {
                None => {
                    let accepted: Vec<&str> =
                        analyte.conversions().iter().map(|c| c.unit).collect();
                    c.fail(
                        RejectReason::UnknownUnit,
                        UNIT,
                        format!(
                            "`{unit_text}` is not a unit of {} (LOINC {}); accepted: {}",
                            analyte.as_str(),
                            loinc.unwrap_or_default(),
                            accepted.join(", ")
                        ),
                        Some(unit_text),
                    );
                }
                Some(factor) => {
                    if let Some(v) = value {
                        let x = v.number * factor;
                        let (low, high) = analyte.plausible_range();
                        if !(low..=high).contains(&x) {
                            c.fail(
                                RejectReason::ImpossibleValue,
                                VALUE,
                                format!(
                                    "{} {x} {} is outside the possible range {low}–{high}",
                                    analyte.as_str(),
                                    analyte.canonical_unit()
                                ),
                                value_text,
                            );
                        }
                        canonical = Some((analyte, x, factor != 1.0));
                    }
                }
            }
        }
        let claim = check_references(
            &mut c,
            id.map(|v| (RESULT_ID, v)),
            patient.map(|v| (PATIENT_ID, v)),
            ctx,
            run,
        );
        c.finish()?;
        let (
            Some(id),
            Some(patient),
            Some(loinc),
            Some(value_text),
            Some(unit_text),
            Some(value),
            Some(collected),
            Some(claim),
        ) = (
            id, patient, loinc, value_text, unit, value, collected, claim,
        )
        else {
            unreachable!("an accepted row has every required value");
        };
        run.accepted_ids.insert(claim);
        note_encounter_ref(encounter, ctx, run);
        self.result_id.append_value(id);
        self.patient_id.append_value(patient);
        self.encounter_id.append_option(encounter);
        self.loinc.append_value(loinc);
        match canonical {
            Some((analyte, x, converted)) => {
                self.analyte.append_value(analyte.as_str());
                self.value.append_value(x);
                self.unit.append_value(analyte.canonical_unit());
                if converted {
                    run.counts.converted_units += 1;
                }
            }
            None => {
                run.counts.unlisted_loinc += 1;
                self.analyte.append_null();
                self.value.append_null();
                self.unit.append_null();
            }
        }
        self.value_comparator.append_option(value.comparator);
        self.reported_value.append_value(value_text);
        self.reported_unit.append_value(unit_text);
        self.collected_at.append_value(collected);
        self.resulted_at.append_option(resulted);
        self.hemolysis_index.append_option(hemolysis);
        Ok(())
    }

    fn pending(&self) -> usize {
        self.result_id.len()
    }

    fn take_batch(&mut self) -> RecordBatch {
        let columns: Vec<ArrayRef> = vec![
            Arc::new(self.result_id.finish()),
            Arc::new(self.patient_id.finish()),
            Arc::new(self.encounter_id.finish()),
            Arc::new(self.loinc.finish()),
            Arc::new(self.analyte.finish()),
            Arc::new(self.value.finish()),
            Arc::new(self.unit.finish()),
            Arc::new(self.value_comparator.finish()),
            Arc::new(self.reported_value.finish()),
            Arc::new(self.reported_unit.finish()),
            Arc::new(self.collected_at.finish()),
            Arc::new(self.resulted_at.finish()),
            Arc::new(self.hemolysis_index.finish()),
        ];
        RecordBatch::try_new(stored_schema(T), columns).expect("columns match the stored schema")
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::{context, verdicts};
    use super::super::{TableRun, rows_for};
    use arrow_array::cast::AsArray;
    use arrow_array::{Array, Float64Array};
    use kcohort_model::RejectReason::*;
    use kcohort_model::TableName;

    const C: &str = "2026-01-01T08:00";
    const R: &str = "2026-01-01T09:00";

    #[test]
    fn lab_rules() {
        let got = verdicts(
            TableName::LabResults,
            &[
                &["L1", "P1", "E1", "2823-3", "5.8", "mmol/L", C, R, "12"],
                &["L2", "P1", "", "2823-3", ">9.0", "mEq/L", C, "", ""],
                &["L3", "P1", "E9", "2823-3", "4.1", "MMOL/L", C, "", ""],
                &["L4", "P1", "E1", "2823-3", "12.5", "mmol/L", C, "", ""],
                &["L5", "P1", "E1", "2823-3", "0.9", "mmol/L", C, "", ""],
                &["L6", "P1", "E1", "2823-3", "5.8", "mg/dL", C, "", ""],
                &["L7", "P1", "E1", "2823-4", "5.8", "mmol/L", C, "", ""],
                &["L8", "P1", "E1", "2823-3", "5,8", "mmol/L", C, "", ""],
                &["L9", "P1", "E1", "2823-3", "5.8", "mmol/L", R, C, ""],
                &["L1", "P1", "E1", "2823-3", "5.8", "mmol/L", C, R, ""],
                &["L10", "P2", "E1", "2823-3", "5.8", "mmol/L", C, R, ""],
                &["L11", "P1", "E1", "2823-3", "5.8", "mmol/L", C, R, "-3"],
                // Unlisted but well-formed LOINC (hemoglobin A1c 4548-4): kept unconverted.
                &["L12", "P1", "E1", "4548-4", "6.1", "%", C, "", ""],
                &["L13", "P1", "E1", "2160-0", "97", "µmol/L", C, "", ""],
                // Creatinine 4000 µmol/L = 45 mg/dL: impossible.
                &["L14", "P1", "E1", "2160-0", "4000", "umol/L", C, "", ""],
                // Bad unit and bad value: the earlier rule (bad number) is reported.
                &["L15", "P1", "E1", "2823-3", "high", "mg/dL", C, "", ""],
                // Exactly at the limits is possible.
                &["L16", "P1", "E1", "2823-3", "12.0", "mmol/L", C, "", ""],
                &["L17", "P1", "E1", "2823-3", "1.0", "mmol/L", C, "", ""],
            ],
        );
        assert_eq!(
            got,
            vec![
                None,
                None,
                None,
                Some(ImpossibleValue),
                Some(ImpossibleValue),
                Some(UnknownUnit),
                Some(BadCode),
                Some(BadNumber),
                Some(EndBeforeStart),
                Some(DuplicateId),
                Some(UnknownPatient),
                Some(NegativeNumber),
                None,
                None,
                Some(ImpossibleValue),
                Some(BadNumber),
                None,
                None,
            ]
        );
    }

    #[test]
    fn canonical_values_and_counters() {
        let mut ctx = context();
        let mut run = TableRun::default();
        let mut t = rows_for(TableName::LabResults);
        let rows: [&[&str]; 4] = [
            &["L1", "P1", "E1", "2823-3", ">9.0", "mEq/L", C, "", ""],
            // 88.4 µmol/L = 1.0 mg/dL (KDIGO 2012 conversion factor).
            &["L2", "P1", "E9", "2160-0", "88.4", "μmol/L", C, "", ""],
            // 5.5 mmol/L glucose = 99 mg/dL (factor 18.0, ADA).
            &["L3", "P1", "E1", "2345-7", "5.5", "mmol/L", C, "", ""],
            &["L4", "P1", "E1", "4548-4", "6.1", "%", C, "", ""],
        ];
        for r in rows {
            t.accept(r, &mut ctx, &mut run).unwrap();
        }
        let batch = t.take_batch();
        let value = batch
            .column_by_name("value")
            .unwrap()
            .as_any()
            .downcast_ref::<Float64Array>()
            .unwrap();
        assert_eq!(value.value(0), 9.0);
        assert!((value.value(1) - 1.0).abs() < 1e-12);
        assert!((value.value(2) - 99.0).abs() < 1e-9);
        assert!(value.is_null(3));
        let comparator = batch
            .column_by_name("value_comparator")
            .unwrap()
            .as_string::<i32>();
        assert_eq!(comparator.value(0), ">");
        assert!(comparator.is_null(1));
        assert_eq!(run.counts.converted_units, 2);
        assert_eq!(run.counts.unlisted_loinc, 1);
        assert_eq!(run.counts.unmatched_encounter_refs, 1);
    }
}
