//! Checking one row: field accessors that parse a value or record why they could not, keeping the
//! finding of the earliest rule in the documented order (ties: the earliest column).
//!
//! Values are trimmed of surrounding ASCII white space before they are checked; an empty value is
//! a missing value.

use crate::context::IngestContext;
use crate::lab_value::parse_decimal;
use crate::timestamp::{EARLIEST_MICROS, Resolved, TIMESTAMP_FORMS, format_instant, parse_written};
use kcohort_model::{ColumnSpec, RejectReason, TableName, TimeRole};

/// Why one row was rejected: the rule, the column, a message saying what was expected, and the
/// offending value (kept only in the protected rejects table).
#[derive(Debug, Clone, PartialEq)]
pub struct Reject {
    pub reason: RejectReason,
    pub column: Option<&'static str>,
    pub message: String,
    pub value: Option<String>,
}

/// A row's fields in contract column order, already known to be UTF-8.
pub struct RowCheck<'a> {
    table: TableName,
    fields: &'a [&'a str],
    reject: Option<Reject>,
}

impl<'a> RowCheck<'a> {
    pub fn new(table: TableName, fields: &'a [&'a str]) -> RowCheck<'a> {
        RowCheck {
            table,
            fields,
            reject: None,
        }
    }

    fn spec(&self, i: usize) -> &'static ColumnSpec {
        &self.table.columns()[i]
    }

    /// Record a finding unless an earlier rule has already failed.
    pub fn fail(
        &mut self,
        reason: RejectReason,
        column: usize,
        message: String,
        value: Option<&str>,
    ) {
        if self.reject.as_ref().is_none_or(|r| reason < r.reason) {
            self.reject = Some(Reject {
                reason,
                column: Some(self.spec(column).name),
                message: format!("column `{}`: {message}", self.spec(column).name),
                value: value.map(str::to_string),
            });
        }
    }

    /// Whether a rule earlier than `reason` (or `reason` itself) has already failed, so checking it
    /// cannot change the verdict.
    pub fn failed_before(&self, reason: RejectReason) -> bool {
        self.reject.as_ref().is_some_and(|r| r.reason <= reason)
    }

    pub fn finish(self) -> Result<(), Reject> {
        match self.reject {
            Some(r) => Err(r),
            None => Ok(()),
        }
    }

    /// The trimmed value, or None when empty.
    pub fn optional(&self, i: usize) -> Option<&'a str> {
        let v = self.fields[i].trim_matches([' ', '\t']);
        (!v.is_empty()).then_some(v)
    }

    /// The trimmed value; an empty one is a missing value.
    pub fn required(&mut self, i: usize) -> Option<&'a str> {
        let v = self.optional(i);
        if v.is_none() {
            self.fail(
                RejectReason::MissingValue,
                i,
                "a value is required".into(),
                None,
            );
        }
        v
    }

    pub fn category(
        &mut self,
        i: usize,
        value: Option<&'a str>,
        allowed: &[&str],
    ) -> Option<&'a str> {
        let v = value?;
        if allowed.contains(&v) {
            Some(v)
        } else {
            self.fail(
                RejectReason::BadCategory,
                i,
                format!("expected one of {}, found `{v}`", allowed.join(", ")),
                Some(v),
            );
            None
        }
    }

    pub fn code(
        &mut self,
        i: usize,
        value: Option<&'a str>,
        valid: fn(&str) -> bool,
        what: &str,
    ) -> Option<&'a str> {
        let v = value?;
        if valid(v) {
            Some(v)
        } else {
            self.fail(
                RejectReason::BadCode,
                i,
                format!("expected {what}, found `{v}`"),
                Some(v),
            );
            None
        }
    }

    pub fn number(&mut self, i: usize, value: Option<&'a str>) -> Option<f64> {
        let v = value?;
        match parse_decimal(v) {
            Some(n) => Some(n),
            None => {
                self.fail(
                    RejectReason::BadNumber,
                    i,
                    format!("expected a number like 12.5, found `{v}`"),
                    Some(v),
                );
                None
            }
        }
    }

    /// A number that must not be negative.
    pub fn non_negative(&mut self, i: usize, value: Option<&'a str>) -> Option<f64> {
        let n = self.number(i, value)?;
        if n < 0.0 {
            self.fail(
                RejectReason::NegativeNumber,
                i,
                format!("expected zero or more, found {n}"),
                value,
            );
            return None;
        }
        Some(n)
    }

    /// A timestamp resolved to UTC microseconds, with the 1900 and extract-end rules.
    pub fn time(
        &mut self,
        i: usize,
        value: Option<&'a str>,
        ctx: &mut IngestContext,
    ) -> Option<i64> {
        let v = value?;
        let Some(written) = parse_written(v.as_bytes()) else {
            self.fail(
                RejectReason::BadTimestamp,
                i,
                format!("expected a timestamp like {TIMESTAMP_FORMS}; found `{v}`"),
                Some(v),
            );
            return None;
        };
        let us = match ctx.clock.resolve(written) {
            Resolved::Exact(us) => us,
            Resolved::Earlier(us) => {
                ctx.ambiguous_local_times += 1;
                us
            }
            Resolved::Nonexistent => {
                self.fail(
                    RejectReason::NonexistentLocalTime,
                    i,
                    format!(
                        "`{v}` does not exist in time zone {} (clocks skip it at a daylight-saving change)",
                        ctx.clock.zone().name()
                    ),
                    Some(v),
                );
                return None;
            }
        };
        if us < EARLIEST_MICROS {
            self.fail(
                RejectReason::TimeOutOfRange,
                i,
                format!("`{v}` is before 1900"),
                Some(v),
            );
            return None;
        }
        let end = ctx.extract_end;
        if time_role(self.spec(i)) == TimeRole::Start && us > end {
            self.fail(
                RejectReason::TimeOutOfRange,
                i,
                format!("`{v}` is after the extract end {}", format_instant(end)),
                Some(v),
            );
            return None;
        }
        Some(us)
    }

    /// End must not be before start (equal is allowed).
    pub fn end_not_before(
        &mut self,
        end_column: usize,
        start: Option<i64>,
        end: Option<i64>,
        start_column: usize,
    ) {
        if let (Some(s), Some(e)) = (start, end)
            && e < s
        {
            let start_name = self.spec(start_column).name;
            let v = self.optional(end_column);
            self.fail(
                RejectReason::EndBeforeStart,
                end_column,
                format!("is before `{start_name}`"),
                v,
            );
        }
    }

    /// Duplicate and unknown-patient rules come last; they need no message beyond the id.
    pub fn fail_reference(&mut self, reason: RejectReason, i: usize, value: &str) {
        let message = match reason {
            RejectReason::DuplicateId => {
                format!("id `{value}` was already used by an earlier row of this extract")
            }
            _ => format!(
                "patient `{value}` is not in the patients table of this extract or the store"
            ),
        };
        self.fail(reason, i, message, Some(value));
    }
}

fn time_role(spec: &ColumnSpec) -> TimeRole {
    match spec.kind {
        kcohort_model::ColumnKind::Timestamp(role) => role,
        _ => TimeRole::Event,
    }
}

/// Index of a contract column by name (used to name column positions once, checked by tests).
pub const fn index_of(columns: &[ColumnSpec], name: &str) -> usize {
    let mut i = 0;
    while i < columns.len() {
        if str_eq(columns[i].name, name) {
            return i;
        }
        i += 1;
    }
    panic!("column not in contract");
}

const fn str_eq(a: &str, b: &str) -> bool {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    if a.len() != b.len() {
        return false;
    }
    let mut i = 0;
    while i < a.len() {
        if a[i] != b[i] {
            return false;
        }
        i += 1;
    }
    true
}
