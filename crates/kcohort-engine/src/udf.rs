//! The scalar functions the definitions may call beyond DataFusion's built-ins. [`udfs`] is the
//! one list: the session registers exactly these, and a distributed executor would have to
//! register the same list.

use datafusion::arrow::array::{Array, ArrayRef, AsArray, BooleanArray, Float64Array, Int32Array};
use datafusion::arrow::datatypes::DataType;
use datafusion::common::{ScalarValue, exec_err, plan_err};
use datafusion::error::Result;
use datafusion::logical_expr::{
    ColumnarValue, ScalarFunctionArgs, ScalarUDF, ScalarUDFImpl, Signature, Volatility,
};
use std::sync::Arc;

/// Every user-defined window function of kcohort.
pub fn udwfs() -> Vec<datafusion::logical_expr::WindowUDF> {
    vec![datafusion::logical_expr::WindowUDF::from(
        crate::episode_window::PotassiumEpisodeMachine::new(),
    )]
}

/// Every user-defined function of kcohort.
pub fn udfs() -> Vec<ScalarUDF> {
    vec![
        ScalarUDF::from(CtcaeHyperkalemiaGrade::new()),
        ScalarUDF::from(AtcMatchesAny::new()),
        ScalarUDF::from(crate::kidney_udf::CkdEpi2021::new()),
        ScalarUDF::from(crate::kidney_udf::KdigoGfrCategory::new()),
        ScalarUDF::from(crate::kidney_udf::KdigoAkiStage::new()),
    ]
}

/// Value-based CTCAE v5.0 grade of hyperkalemia (NCI CTCAE v5.0, 27 Nov 2017, term
/// "Hyperkalemia"; the same bands as v4.03): grade 1 above the upper limit of normal up to 5.5,
/// grade 2 above 5.5 up to 6.0, grade 3 above 6.0 up to 7.0, grade 4 above 7.0 mmol/L. The bands
/// are left-open (5.5 is grade 1, 5.51 grade 2). `None` at or below the upper limit of normal.
/// The clinical qualifiers of grades 2–5 (intervention, hospitalisation, death) are not in lab
/// data, so this is the value part only.
pub fn ctcae_hyperkalemia_grade(value: f64, upper_normal_limit: f64) -> Option<i32> {
    if value.is_nan() || value <= upper_normal_limit {
        None
    } else if value <= 5.5 {
        Some(1)
    } else if value <= 6.0 {
        Some(2)
    } else if value <= 7.0 {
        Some(3)
    } else {
        Some(4)
    }
}

/// `ctcae_hyperkalemia_grade(value DOUBLE, upper_normal_limit DOUBLE) -> INT` (NULL when not
/// above the limit or an argument is NULL).
#[derive(Debug, PartialEq, Eq, Hash)]
struct CtcaeHyperkalemiaGrade {
    signature: Signature,
}

impl CtcaeHyperkalemiaGrade {
    fn new() -> Self {
        CtcaeHyperkalemiaGrade {
            signature: Signature::exact(
                vec![DataType::Float64, DataType::Float64],
                Volatility::Immutable,
            ),
        }
    }
}

impl ScalarUDFImpl for CtcaeHyperkalemiaGrade {
    fn name(&self) -> &str {
        "ctcae_hyperkalemia_grade"
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _arg_types: &[DataType]) -> Result<DataType> {
        Ok(DataType::Int32)
    }

    fn invoke_with_args(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue> {
        let n = args.number_rows;
        let values = args.args[0].to_array(n)?;
        let limits = args.args[1].to_array(n)?;
        let values: &Float64Array = values.as_primitive();
        let limits: &Float64Array = limits.as_primitive();
        let grades: Int32Array = values
            .iter()
            .zip(limits.iter())
            .map(|(v, uln)| ctcae_hyperkalemia_grade(v?, uln?))
            .collect();
        Ok(ColumnarValue::Array(Arc::new(grades)))
    }
}

/// `atc_matches_any(atc, 'A10AB', 'R03AC02', ...) -> BOOLEAN`: true when the code starts with
/// one of the prefixes (ATC codes are hierarchical, so a prefix names a class). The prefixes
/// must be string literals; NULL code gives NULL.
#[derive(Debug, PartialEq, Eq, Hash)]
struct AtcMatchesAny {
    signature: Signature,
}

impl AtcMatchesAny {
    fn new() -> Self {
        AtcMatchesAny {
            signature: Signature::variadic_any(Volatility::Immutable),
        }
    }
}

fn string_literal(value: &ColumnarValue) -> Option<&str> {
    match value {
        ColumnarValue::Scalar(
            ScalarValue::Utf8(Some(s))
            | ScalarValue::Utf8View(Some(s))
            | ScalarValue::LargeUtf8(Some(s)),
        ) => Some(s),
        _ => None,
    }
}

fn matches_strings<'a>(
    codes: impl Iterator<Item = Option<&'a str>>,
    prefixes: &[&str],
) -> BooleanArray {
    codes
        .map(|code| code.map(|c| prefixes.iter().any(|p| c.starts_with(p))))
        .collect()
}

impl ScalarUDFImpl for AtcMatchesAny {
    fn name(&self) -> &str {
        "atc_matches_any"
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, arg_types: &[DataType]) -> Result<DataType> {
        if arg_types.len() < 2 {
            return plan_err!(
                "atc_matches_any(code, prefix, ...) needs a code and at least one prefix"
            );
        }
        Ok(DataType::Boolean)
    }

    fn invoke_with_args(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue> {
        let mut prefixes = Vec::with_capacity(args.args.len() - 1);
        for arg in &args.args[1..] {
            match string_literal(arg) {
                Some(p) => prefixes.push(p),
                None => return exec_err!("atc_matches_any: every prefix must be a string literal"),
            }
        }
        let codes: ArrayRef = args.args[0].to_array(args.number_rows)?;
        let result = match codes.data_type() {
            DataType::Utf8 => matches_strings(codes.as_string::<i32>().iter(), &prefixes),
            DataType::LargeUtf8 => matches_strings(codes.as_string::<i64>().iter(), &prefixes),
            DataType::Utf8View => matches_strings(codes.as_string_view().iter(), &prefixes),
            DataType::Null => BooleanArray::new_null(codes.len()),
            other => return exec_err!("atc_matches_any: the code must be text, found {other}"),
        };
        Ok(ColumnarValue::Array(Arc::new(result)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// CTCAE v5.0 "Hyperkalemia" (NCI, 27 Nov 2017): G1 >ULN–5.5, G2 >5.5–6.0, G3 >6.0–7.0,
    /// G4 >7.0 mmol/L; ULN 5.0 here (the study default).
    #[test]
    fn ctcae_grades_at_every_boundary() {
        let cases: &[(f64, Option<i32>)] = &[
            (4.9, None),
            (5.0, None),
            (5.01, Some(1)),
            (5.5, Some(1)),
            (5.51, Some(2)),
            (6.0, Some(2)),
            (6.01, Some(3)),
            (7.0, Some(3)),
            (7.01, Some(4)),
            (12.0, Some(4)),
        ];
        for &(value, grade) in cases {
            assert_eq!(ctcae_hyperkalemia_grade(value, 5.0), grade, "K {value}");
        }
        // Another upper limit of normal moves only the lower edge of grade 1.
        assert_eq!(ctcae_hyperkalemia_grade(5.2, 5.3), None);
        assert_eq!(ctcae_hyperkalemia_grade(5.4, 5.3), Some(1));
        assert_eq!(ctcae_hyperkalemia_grade(5.8, 5.6), Some(2));
        assert_eq!(ctcae_hyperkalemia_grade(f64::NAN, 5.0), None);
    }

    #[test]
    fn the_list_has_unique_names() {
        let mut names: Vec<String> = udfs().iter().map(|f| f.name().to_string()).collect();
        let n = names.len();
        names.sort();
        names.dedup();
        assert_eq!(names.len(), n);
    }
}
