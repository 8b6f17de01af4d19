//! SQL functions over the kidney formulas of `kcohort_model::kidney` (CKD-EPI 2021 eGFR, KDIGO
//! GFR categories and AKI stages); registered through [`crate::udf::udfs`].

use datafusion::arrow::array::{Array, ArrayRef, AsArray, Float64Array, Int32Array, StringArray};
use datafusion::arrow::datatypes::DataType;
use datafusion::common::exec_err;
use datafusion::error::Result;
use datafusion::logical_expr::{
    ColumnarValue, ScalarFunctionArgs, ScalarUDFImpl, Signature, Volatility,
};
use kcohort_model::kidney::{Sex, ckd_epi_2021, kdigo_aki_stage, kdigo_gfr_category};
use std::sync::Arc;

fn texts(array: &ArrayRef) -> Result<Vec<Option<&str>>> {
    Ok(match array.data_type() {
        DataType::Utf8 => array.as_string::<i32>().iter().collect(),
        DataType::LargeUtf8 => array.as_string::<i64>().iter().collect(),
        DataType::Utf8View => array.as_string_view().iter().collect(),
        DataType::Null => vec![None; array.len()],
        other => return exec_err!("expected text, found {other}"),
    })
}

/// `ckd_epi_2021(creatinine_mg_dl DOUBLE, age_years DOUBLE, sex TEXT) -> DOUBLE`: NULL for a
/// child, an unknown sex (`U`) or a NULL argument.
#[derive(Debug, PartialEq, Eq, Hash)]
pub(crate) struct CkdEpi2021 {
    signature: Signature,
}

impl CkdEpi2021 {
    pub(crate) fn new() -> Self {
        CkdEpi2021 {
            signature: Signature::exact(
                vec![DataType::Float64, DataType::Float64, DataType::Utf8View],
                Volatility::Immutable,
            ),
        }
    }
}

impl ScalarUDFImpl for CkdEpi2021 {
    fn name(&self) -> &str {
        "ckd_epi_2021"
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _arg_types: &[DataType]) -> Result<DataType> {
        Ok(DataType::Float64)
    }

    fn invoke_with_args(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue> {
        let n = args.number_rows;
        let scr = args.args[0].to_array(n)?;
        let age = args.args[1].to_array(n)?;
        let sex = args.args[2].to_array(n)?;
        let scr: &Float64Array = scr.as_primitive();
        let age: &Float64Array = age.as_primitive();
        let sex = texts(&sex)?;
        let out: Float64Array = (0..n)
            .map(|i| {
                if scr.is_null(i) || age.is_null(i) {
                    return None;
                }
                let sex = Sex::from_code(sex[i]?)?;
                ckd_epi_2021(scr.value(i), age.value(i), sex)
            })
            .collect();
        Ok(ColumnarValue::Array(Arc::new(out)))
    }
}

/// `kdigo_gfr_category(egfr DOUBLE) -> TEXT` (`G1` ... `G5`; NULL for NULL).
#[derive(Debug, PartialEq, Eq, Hash)]
pub(crate) struct KdigoGfrCategory {
    signature: Signature,
}

impl KdigoGfrCategory {
    pub(crate) fn new() -> Self {
        KdigoGfrCategory {
            signature: Signature::exact(vec![DataType::Float64], Volatility::Immutable),
        }
    }
}

impl ScalarUDFImpl for KdigoGfrCategory {
    fn name(&self) -> &str {
        "kdigo_gfr_category"
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _arg_types: &[DataType]) -> Result<DataType> {
        Ok(DataType::Utf8)
    }

    fn invoke_with_args(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue> {
        let egfr = args.args[0].to_array(args.number_rows)?;
        let egfr: &Float64Array = egfr.as_primitive();
        let out: StringArray = egfr.iter().map(|e| kdigo_gfr_category(e?)).collect();
        Ok(ColumnarValue::Array(Arc::new(out)))
    }
}

/// `kdigo_aki_stage(ratio DOUBLE, creatinine_mg_dl DOUBLE, stage3_creatinine DOUBLE) -> INT`
/// for a result that meets the AKI definition (a NULL ratio: no baseline); NULL when the
/// creatinine or the stage-3 limit is NULL.
#[derive(Debug, PartialEq, Eq, Hash)]
pub(crate) struct KdigoAkiStage {
    signature: Signature,
}

impl KdigoAkiStage {
    pub(crate) fn new() -> Self {
        KdigoAkiStage {
            signature: Signature::exact(
                vec![DataType::Float64, DataType::Float64, DataType::Float64],
                Volatility::Immutable,
            ),
        }
    }
}

impl ScalarUDFImpl for KdigoAkiStage {
    fn name(&self) -> &str {
        "kdigo_aki_stage"
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _arg_types: &[DataType]) -> Result<DataType> {
        Ok(DataType::Int32)
    }

    fn invoke_with_args(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue> {
        let n = args.number_rows;
        let ratio = args.args[0].to_array(n)?;
        let scr = args.args[1].to_array(n)?;
        let limit = args.args[2].to_array(n)?;
        let ratio: &Float64Array = ratio.as_primitive();
        let scr: &Float64Array = scr.as_primitive();
        let limit: &Float64Array = limit.as_primitive();
        let out: Int32Array = (0..n)
            .map(|i| {
                if scr.is_null(i) || limit.is_null(i) {
                    return None;
                }
                let r = (!ratio.is_null(i)).then(|| ratio.value(i));
                Some(i32::from(kdigo_aki_stage(r, scr.value(i), limit.value(i))))
            })
            .collect();
        Ok(ColumnarValue::Array(Arc::new(out)))
    }
}
