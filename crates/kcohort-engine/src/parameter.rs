//! Study parameters bound into the SQL definitions.
//!
//! A definition names a parameter as `$name`. [`Parameters::bind`] replaces each one with a
//! literal written from a typed value, and nothing else: numbers are finite `f64` written as
//! `CAST(<number> AS DOUBLE)`, windows are whole microseconds written as an `INTERVAL` with no
//! day or month part (so the DataFusion 55 comparison bug cannot bite, ECOSYSTEM.md §3), instants
//! are UTC microseconds, and code lists are quoted codes checked to consist only of letters,
//! digits, `.`, `-` and `_`. Text from a study file therefore never reaches the SQL as text.
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
    /// A non-empty list of codes (LOINC, ATC): written as `'a', 'b'` for `IN (...)` lists and
    /// variadic functions.
    Codes(Vec<String>),
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
        }
    }
}

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
                    let value = self.values.get(name).ok_or_else(|| {
                        let known: Vec<&str> = self.names().collect();
                        fail(format!(
                            "unknown parameter `${name}`; known: {}",
                            known.join(", ")
                        ))
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
    fn windows_never_have_a_day_part() {
        for hours in [0.0, 6.0, 24.0, 48.0, 168.0, 8760.0, 87600.0, 1.5] {
            let sql = ParamValue::Micros(hours_to_micros(hours)).to_sql().unwrap();
            assert!(sql.ends_with(" microseconds'"), "{sql}");
        }
        assert_eq!(hours_to_micros(1.5), 5_400_000_000);
    }
}
