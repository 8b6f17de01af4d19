//! Study parameters bound into the SQL definitions.
//!
//! A definition names a parameter as `$name`. [`Parameters::bind`] replaces each one with a
//! literal written from a typed value, and nothing else: numbers are finite `f64` written as
//! `CAST(<number> AS DOUBLE)`, windows are whole microseconds written as an `INTERVAL` with no
//! day or month part (so the DataFusion 55 comparison bug cannot bite, ECOSYSTEM.md §3), instants
//! are UTC microseconds, and code lists are quoted codes checked to consist only of letters,
//! digits, `.`, `-` and `_`. Text from a study file therefore never reaches the SQL as text.
//! A window `$name` is also available as `$name_us`, its whole microseconds as a `BIGINT`, for
//! definitions that do their time arithmetic in epoch microseconds (`CAST(t AS BIGINT)`).
//! `$` inside string literals, quoted identifiers and comments is left alone; an unknown name,
//! or a positional `$1`, is an error naming the definition.
//!
//! (DataFusion's own `$name` placeholders with `ScalarValue`s were not used because the
//! definitions create views, whose plans cannot hold unbound placeholders, and because list
//! values cannot be bound to an `IN (...)` list.)

use crate::EngineError;
use kcohort_model::study::Study;
use std::collections::BTreeMap;
use std::fmt::Write;

/// One typed parameter value.
#[derive(Debug, Clone, PartialEq)]
pub enum ParamValue {
    /// A number (thresholds, cut-offs).
    Number(f64),
    /// A window of elapsed time, in whole microseconds.
    Micros(i64),
    /// An instant, UTC microseconds since the epoch.
    Instant(i64),
    /// A whole number (`CAST(<n> AS BIGINT)`).
    Int(i64),
    /// Free text, written as a string literal with its quotes doubled (researchers' `--param`).
    Text(String),
    /// A non-empty list of codes (LOINC, ATC): written as `'a', 'b'` for `IN (...)` lists and
    /// variadic functions.
    Codes(Vec<String>),
    /// A small table of literals, written as a subquery over `VALUES` with named columns
    /// (the study's code sets: one row per class and code prefix). Every cell is itself a
    /// [`ParamValue`], so it is written by the same rules.
    Table {
        columns: Vec<&'static str>,
        rows: Vec<Vec<ParamValue>>,
    },
}

/// Hours as whole microseconds (windows are elapsed time).
pub fn hours_to_micros(hours: f64) -> i64 {
    (hours * 3_600_000_000.0).round() as i64
}

fn is_code_char(c: char) -> bool {
    c.is_ascii_alphanumeric() || matches!(c, '.' | '-' | '_')
}

impl ParamValue {
    /// The SQL literal of this value.
    pub fn to_sql(&self) -> Result<String, String> {
        match self {
            ParamValue::Number(x) if x.is_finite() => Ok(format!("CAST({x:?} AS DOUBLE)")),
            ParamValue::Number(x) => Err(format!("{x} is not a finite number")),
            ParamValue::Micros(us) => Ok(format!("INTERVAL '{us} microseconds'")),
            ParamValue::Int(n) => Ok(format!("CAST({n} AS BIGINT)")),
            ParamValue::Text(t) => Ok(format!("'{}'", t.replace('\'', "''"))),
            ParamValue::Instant(us) => Ok(format!(
                "arrow_cast(CAST({us} AS BIGINT), 'Timestamp(Microsecond, Some(\"UTC\"))')"
            )),
            ParamValue::Codes(codes) => {
                if codes.is_empty() {
                    return Err("an empty code list".into());
                }
                let mut out = String::new();
                for (i, code) in codes.iter().enumerate() {
                    if code.is_empty() || !code.chars().all(is_code_char) {
                        return Err(format!(
                            "code `{code}` has characters other than letters, digits, `.`, `-`, `_`"
                        ));
                    }
                    if i > 0 {
                        out.push_str(", ");
                    }
                    write!(out, "'{code}'").expect("write to a String");
                }
                Ok(out)
            }
            ParamValue::Table { columns, rows } => {
                if rows.is_empty() {
                    return Err("an empty table".into());
                }
                let mut out = String::from("(SELECT ");
                for (i, c) in columns.iter().enumerate() {
                    if !c.chars().all(|ch| ch.is_ascii_lowercase() || ch == '_') {
                        return Err(format!("column name `{c}`"));
                    }
                    if i > 0 {
                        out.push_str(", ");
                    }
                    write!(out, "column{} AS {c}", i + 1).expect("write to a String");
                }
                out.push_str(" FROM (VALUES ");
                for (r, row) in rows.iter().enumerate() {
                    if row.len() != columns.len() {
                        return Err(format!("row {} has {} cells", r + 1, row.len()));
                    }
                    if r > 0 {
                        out.push_str(", ");
                    }
                    out.push('(');
                    for (i, cell) in row.iter().enumerate() {
                        if matches!(cell, ParamValue::Table { .. }) {
                            return Err("a table inside a table".into());
                        }
                        if i > 0 {
                            out.push_str(", ");
                        }
                        out.push_str(&cell.to_sql()?);
                    }
                    out.push(')');
                }
                out.push_str("))");
                Ok(out)
            }
        }
    }
}

/// A one-code literal (a class name or one ATC prefix; checked like every code).
fn code(text: &str) -> ParamValue {
    ParamValue::Codes(vec![text.to_string()])
}

/// Longest window a missing per-class limit stands for: 100 years.
const NO_LIMIT_HOURS: f64 = 876_000.0;

/// The named parameters of one derive run.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Parameters {
    values: BTreeMap<String, ParamValue>,
}

impl Parameters {
    pub fn new() -> Parameters {
        Parameters::default()
    }

    pub fn insert(&mut self, name: &str, value: ParamValue) {
        self.values.insert(name.to_string(), value);
    }

    pub fn get(&self, name: &str) -> Option<&ParamValue> {
        self.values.get(name)
    }

    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.values.keys().map(String::as_str)
    }

    /// Every parameter a study defines, plus the store's extract end.
    ///
    /// Names: the study key without its section (`$high_above`, `$max_gap_hours`,
    /// `$hemolysis_cutoff`), `$potassium_loinc`, `$potassium_lowering_atc` (union of the
    /// treatment classes), `$potassium_lowering_<class>_atc`, `$drug_class_<class>_atc`, and
    /// `$extract_end`.
    pub fn from_study(study: &Study, extract_end_micros: i64) -> Parameters {
        let mut p = Parameters::new();
        let e = &study.episode;
        for (name, value) in [
            ("hemolysis_cutoff", study.potassium.hemolysis_cutoff),
            ("high_above", e.high_above),
            ("normal_at_or_below", e.normal_at_or_below),
            ("upper_normal_limit", e.upper_normal_limit),
            ("severity_moderate_from", e.severity_moderate_from),
            ("severity_severe_from", e.severity_severe_from),
        ] {
            p.insert(name, ParamValue::Number(value));
        }
        for (name, hours) in [
            ("max_gap_hours", e.max_gap_hours),
            ("rebound_hours", e.rebound_hours),
            ("spurious_repeat_hours", e.spurious_repeat_hours),
            (
                "hospital_acquired_after_hours",
                e.hospital_acquired_after_hours,
            ),
        ] {
            p.insert(name, ParamValue::Micros(hours_to_micros(hours)));
        }
        p.insert(
            "potassium_loinc",
            ParamValue::Codes(study.potassium.loinc.clone()),
        );
        p.insert(
            "potassium_lowering_atc",
            ParamValue::Codes(study.potassium_lowering_atc()),
        );
        for (class, set) in &study.potassium_lowering {
            p.insert(
                &format!("potassium_lowering_{class}_atc"),
                ParamValue::Codes(set.atc.clone()),
            );
        }
        for (class, set) in &study.drug_classes {
            p.insert(
                &format!("drug_class_{class}_atc"),
                ParamValue::Codes(set.atc.clone()),
            );
        }
        p.insert("extract_end", ParamValue::Instant(extract_end_micros));
        context_parameters(&mut p, study);
        p
    }

    /// Replace every `$name` in `sql` with the literal of its value (see the module docs).
    pub fn bind(&self, definition: &str, sql: &str) -> Result<String, EngineError> {
        let fail = |message: String| EngineError::Parameter {
            definition: definition.to_string(),
            message,
        };
        let mut out = String::with_capacity(sql.len());
        let mut chars = sql.char_indices().peekable();
        while let Some((i, c)) = chars.next() {
            match c {
                // String literal or quoted identifier: copied as is, quotes doubled inside.
                '\'' | '"' => {
                    out.push(c);
                    for (_, d) in chars.by_ref() {
                        out.push(d);
                        if d == c {
                            break;
                        }
                    }
                }
                // Comments: copied as is up to their end.
                '-' | '/' if sql[i..].starts_with("--") || sql[i..].starts_with("/*") => {
                    let end = if c == '-' {
                        sql[i..].find('\n').map_or(sql.len(), |j| i + j + 1)
                    } else {
                        sql[i + 2..].find("*/").map_or(sql.len(), |j| i + 2 + j + 2)
                    };
                    out.push_str(&sql[i..end]);
                    while chars.peek().is_some_and(|(j, _)| *j < end) {
                        chars.next();
                    }
                }
                '$' => {
                    let start = i + 1;
                    let mut end = start;
                    while let Some((j, d)) = chars.peek().copied() {
                        if d.is_ascii_alphanumeric() || d == '_' {
                            end = j + d.len_utf8();
                            chars.next();
                        } else {
                            break;
                        }
                    }
                    let name = &sql[start..end];
                    if name.is_empty() || name.starts_with(|d: char| d.is_ascii_digit()) {
                        return Err(fail(format!(
                            "`${name}`: parameters are named (`$high_above`), never positional"
                        )));
                    }
                    let as_micros =
                        name.strip_suffix("_us")
                            .and_then(|base| match self.values.get(base) {
                                Some(ParamValue::Micros(us)) => Some(ParamValue::Int(*us)),
                                _ => None,
                            });
                    let value = as_micros
                        .as_ref()
                        .or(self.values.get(name))
                        .ok_or_else(|| {
                            let known: Vec<&str> = self.names().collect();
                            fail(if known.is_empty() {
                                format!("unknown parameter `${name}`: none is given")
                            } else {
                                format!("unknown parameter `${name}`; known: {}", known.join(", "))
                            })
                        })?;
                    let literal = value
                        .to_sql()
                        .map_err(|m| fail(format!("parameter `${name}`: {m}")))?;
                    out.push_str(&literal);
                }
                _ => out.push(c),
            }
        }
        Ok(out)
    }
}

/// The parameters of the context definitions (eras, conditions, causes, treatments, outcomes):
/// the keys of `[exposure]`, `[conditions]`, `[attribution]` and `[outcomes]` without their
/// section; windows in days or hours become intervals (`$washout_days`, `$lab_window_hours`);
/// `$drug_class_codes` (drug_class, atc_prefix, and the class's windows in microseconds:
/// administer_us, lookback_us, started_within_us, min_exposure_us, and is_cause (1, or 0 for a
/// comparator class); one row per class and code), `$potassium_lowering_codes`
/// (treatment_class, atc_prefix) and `$adrenal_icd10` (codes without their dot).
fn context_parameters(p: &mut Parameters, study: &Study) {
    let x = &study.exposure;
    let k = &study.conditions;
    let a = &study.attribution;
    let o = &study.outcomes;
    let days = |d: f64| ParamValue::Micros(hours_to_micros(d * 24.0));
    let hours = |h: f64| ParamValue::Micros(hours_to_micros(h));
    let micros = |h: f64| ParamValue::Int(hours_to_micros(h));
    for (name, value) in [
        ("dispense_default_days", days(x.dispense_default_days)),
        (
            "administer_default_hours",
            hours(x.administer_default_hours),
        ),
        ("order_default_hours", hours(x.order_default_hours)),
        ("dispense_grace_days", days(x.dispense_grace_days)),
        ("administer_grace_hours", hours(x.administer_grace_hours)),
        ("washout_days", days(x.washout_days)),
        (
            "aki_absolute_window_hours",
            hours(k.aki_absolute_window_hours),
        ),
        ("aki_baseline_days", days(k.aki_baseline_days)),
        ("tls_window_hours", hours(k.tls_window_hours)),
        ("drug_lookback_hours", hours(a.drug_lookback_hours)),
        ("aki_before_hours", hours(a.aki_before_hours)),
        ("aki_after_hours", hours(a.aki_after_hours)),
        ("lab_window_hours", hours(a.lab_window_hours)),
        ("baseline_egfr_days", days(a.baseline_egfr_days)),
        ("treatment_window_hours", hours(o.treatment_window_hours)),
        (
            "hypoglycemia_window_hours",
            hours(o.hypoglycemia_window_hours),
        ),
        ("death_within_days", days(o.death_within_days)),
        ("dechallenge_days", days(o.dechallenge_days)),
        ("cohort_horizon_days", days(study.cohort.horizon_days)),
        ("cohort_baseline_days", days(study.cohort.baseline_days)),
        ("cohort_recent_aki_days", days(study.cohort.recent_aki_days)),
    ] {
        p.insert(name, value);
    }
    for (name, value) in [
        ("aki_absolute_rise_mg_dl", k.aki_absolute_rise_mg_dl),
        ("aki_ratio", k.aki_ratio),
        ("aki_stage3_creatinine_mg_dl", k.aki_stage3_creatinine_mg_dl),
        ("hyperglycemia_above_mg_dl", k.hyperglycemia_above_mg_dl),
        ("acidosis_bicarbonate_below", k.acidosis_bicarbonate_below),
        ("hyperosmolality_above", k.hyperosmolality_above),
        ("ck_upper_normal_limit", k.ck_upper_normal_limit),
        ("rhabdomyolysis_ck_multiple", k.rhabdomyolysis_ck_multiple),
        ("tls_urate_mg_dl", k.tls_urate_mg_dl),
        ("tls_potassium", k.tls_potassium),
        ("tls_phosphate_mg_dl", k.tls_phosphate_mg_dl),
        ("tls_calcium_mg_dl", k.tls_calcium_mg_dl),
        ("ckd_egfr_below", a.ckd_egfr_below),
        ("hypoglycemia_below_mg_dl", o.hypoglycemia_below_mg_dl),
    ] {
        p.insert(name, ParamValue::Number(value));
    }
    // The eGFR threshold as text for labels ('below 45'): Rust's shortest form of the number.
    p.insert(
        "ckd_egfr_below_text",
        ParamValue::Text(a.ckd_egfr_below.to_string()),
    );
    for (analyte, codes) in study.lab_loinc_sets() {
        p.insert(&format!("{analyte}_loinc"), ParamValue::Codes(codes));
    }
    p.insert(
        "adrenal_icd10",
        ParamValue::Codes(a.adrenal_icd10.iter().map(|c| c.replace('.', "")).collect()),
    );
    let mut drug_rows = Vec::new();
    for (class, set) in &study.drug_classes {
        for prefix in &set.atc {
            drug_rows.push(vec![
                code(class),
                code(prefix),
                micros(set.administer_hours.unwrap_or(x.administer_default_hours)),
                micros(set.lookback_hours.unwrap_or(a.drug_lookback_hours)),
                micros(24.0 * set.started_within_days.unwrap_or(NO_LIMIT_HOURS / 24.0)),
                micros(24.0 * set.min_exposure_days.unwrap_or(0.0)),
                ParamValue::Int(i64::from(set.is_cause())),
            ]);
        }
    }
    p.insert(
        "drug_class_codes",
        ParamValue::Table {
            columns: vec![
                "drug_class",
                "atc_prefix",
                "administer_us",
                "lookback_us",
                "started_within_us",
                "min_exposure_us",
                "is_cause",
            ],
            rows: drug_rows,
        },
    );
    let treatment_rows = study
        .potassium_lowering
        .iter()
        .flat_map(|(class, set)| set.atc.iter().map(move |c| vec![code(class), code(c)]))
        .collect();
    p.insert(
        "potassium_lowering_codes",
        ParamValue::Table {
            columns: vec!["treatment_class", "atc_prefix"],
            rows: treatment_rows,
        },
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params() -> Parameters {
        let mut p = Parameters::new();
        p.insert("high_above", ParamValue::Number(5.5));
        p.insert("cut", ParamValue::Number(100.0));
        p.insert("gap_hours", ParamValue::Micros(hours_to_micros(168.0)));
        p.insert(
            "codes",
            ParamValue::Codes(vec!["2823-3".into(), "6298-4".into()]),
        );
        p.insert("end", ParamValue::Instant(1_700_000_000_000_000));
        p
    }

    fn check(sql: &str, expected: &str) {
        assert_eq!(params().bind("t", sql).unwrap(), expected);
    }

    #[test]
    fn binds_typed_literals() {
        check("v > $high_above", "v > CAST(5.5 AS DOUBLE)");
        check("h >= $cut", "h >= CAST(100.0 AS DOUBLE)");
        check(
            "b > a + $gap_hours",
            "b > a + INTERVAL '604800000000 microseconds'",
        );
        check("l IN ($codes)", "l IN ('2823-3', '6298-4')");
        check(
            "t < $end",
            "t < arrow_cast(CAST(1700000000000000 AS BIGINT), 'Timestamp(Microsecond, Some(\"UTC\"))')",
        );
    }

    #[test]
    fn leaves_strings_comments_and_identifiers_alone() {
        check(
            "'$high_above' -- $x\n$cut",
            "'$high_above' -- $x\nCAST(100.0 AS DOUBLE)",
        );
        check(
            "\"$col\" /* $y */ $cut",
            "\"$col\" /* $y */ CAST(100.0 AS DOUBLE)",
        );
        check("'it''s $x' || $cut", "'it''s $x' || CAST(100.0 AS DOUBLE)");
        check("a - b -- end", "a - b -- end");
    }

    #[test]
    fn refuses_unknown_positional_and_unsafe_values() {
        let p = params();
        assert!(
            p.bind("t", "$nope")
                .unwrap_err()
                .to_string()
                .contains("unknown parameter `$nope`")
        );
        assert!(
            p.bind("t", "$1")
                .unwrap_err()
                .to_string()
                .contains("positional")
        );
        let mut bad = Parameters::new();
        bad.insert("c", ParamValue::Codes(vec!["x') OR ('1".into()]));
        assert!(bad.bind("t", "$c").is_err());
        bad.insert("n", ParamValue::Number(f64::NAN));
        assert!(bad.bind("t", "$n").is_err());
        bad.insert("e", ParamValue::Codes(vec![]));
        assert!(bad.bind("t", "$e").is_err());
    }

    #[test]
    fn text_is_a_quoted_literal() {
        let mut p = Parameters::new();
        p.insert("unit", ParamValue::Text("Ward 'A'".into()));
        assert_eq!(
            p.bind("q", "u = $unit -- '$unit'").unwrap(),
            "u = 'Ward ''A''' -- '$unit'"
        );
    }

    #[test]
    fn a_window_is_also_its_microseconds() {
        check("t > $gap_hours_us", "t > CAST(604800000000 AS BIGINT)");
        assert!(params().bind("t", "$cut_us").is_err());
    }

    #[test]
    fn binds_a_table_of_literals() {
        let mut p = Parameters::new();
        p.insert(
            "t",
            ParamValue::Table {
                columns: vec!["class", "window"],
                rows: vec![
                    vec![code("mra"), ParamValue::Micros(1)],
                    vec![code("arb"), ParamValue::Micros(2)],
                ],
            },
        );
        assert_eq!(
            p.bind("d", "SELECT * FROM $t").unwrap(),
            "SELECT * FROM (SELECT column1 AS class, column2 AS window FROM (VALUES \
             ('mra', INTERVAL '1 microseconds'), ('arb', INTERVAL '2 microseconds')))"
        );
        p.insert(
            "bad",
            ParamValue::Table {
                columns: vec!["c"],
                rows: vec![vec![code("x'y")]],
            },
        );
        assert!(p.bind("d", "$bad").is_err());
    }

    #[test]
    fn windows_never_have_a_day_part() {
        for hours in [0.0, 6.0, 24.0, 48.0, 168.0, 8760.0, 87600.0, 1.5] {
            let sql = ParamValue::Micros(hours_to_micros(hours)).to_sql().unwrap();
            assert!(sql.ends_with(" microseconds'"), "{sql}");
        }
        assert_eq!(hours_to_micros(1.5), 5_400_000_000);
    }
}
