//! Why a row was rejected. A row that breaks several rules is rejected once, under the first
//! rule it breaks in the order of [`RejectReason::ALL`] (which is the order ingest checks them).

use std::fmt;

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum RejectReason {
    /// The row's bytes are not valid UTF-8.
    InvalidUtf8,
    /// The row has more or fewer fields than the header.
    ColumnCount,
    /// A required column is empty.
    MissingValue,
    /// A value is not one of the allowed categories (sex, class, route, kind, status).
    BadCategory,
    /// A LOINC, ATC or ICD-10 code does not have the code system's shape.
    BadCode,
    /// A number (or lab value, or year) does not parse.
    BadNumber,
    /// A timestamp does not have one of the accepted forms.
    BadTimestamp,
    /// A zoneless time that does not exist in the site time zone (skipped by a DST change).
    NonexistentLocalTime,
    /// birth_year outside 1900 to the extract's year.
    YearOutOfRange,
    /// A start time before 1900 or after the extract end, or any time before 1900.
    TimeOutOfRange,
    /// An end time before its start (discharge before admission, result before collection,
    /// medication end before start).
    EndBeforeStart,
    /// The unit is not an accepted unit of the analyte.
    UnknownUnit,
    /// The value is outside the analyte's physiologically possible range.
    ImpossibleValue,
    /// A number that must not be negative is negative (days_supply, dose, hemolysis_index).
    NegativeNumber,
    /// The row's id was already taken by an earlier accepted row of the extract.
    DuplicateId,
    /// The row names a patient that is neither in this extract nor in the store.
    UnknownPatient,
}

impl RejectReason {
    pub const ALL: [RejectReason; 16] = [
        RejectReason::InvalidUtf8,
        RejectReason::ColumnCount,
        RejectReason::MissingValue,
        RejectReason::BadCategory,
        RejectReason::BadCode,
        RejectReason::BadNumber,
        RejectReason::BadTimestamp,
        RejectReason::NonexistentLocalTime,
        RejectReason::YearOutOfRange,
        RejectReason::TimeOutOfRange,
        RejectReason::EndBeforeStart,
        RejectReason::UnknownUnit,
        RejectReason::ImpossibleValue,
        RejectReason::NegativeNumber,
        RejectReason::DuplicateId,
        RejectReason::UnknownPatient,
    ];

    /// Stable code written into the rejects table and the manifest.
    pub fn code(self) -> &'static str {
        match self {
            RejectReason::InvalidUtf8 => "invalid_utf8",
            RejectReason::ColumnCount => "column_count",
            RejectReason::MissingValue => "missing_value",
            RejectReason::BadCategory => "bad_category",
            RejectReason::BadCode => "bad_code",
            RejectReason::BadNumber => "bad_number",
            RejectReason::BadTimestamp => "bad_timestamp",
            RejectReason::NonexistentLocalTime => "nonexistent_local_time",
            RejectReason::YearOutOfRange => "year_out_of_range",
            RejectReason::TimeOutOfRange => "time_out_of_range",
            RejectReason::EndBeforeStart => "end_before_start",
            RejectReason::UnknownUnit => "unknown_unit",
            RejectReason::ImpossibleValue => "impossible_value",
            RejectReason::NegativeNumber => "negative_number",
            RejectReason::DuplicateId => "duplicate_id",
            RejectReason::UnknownPatient => "unknown_patient",
        }
    }

    pub fn from_code(code: &str) -> Option<RejectReason> {
        RejectReason::ALL.into_iter().find(|r| r.code() == code)
    }

    /// One sentence for reports: what the rule is.
    pub fn description(self) -> &'static str {
        match self {
            RejectReason::InvalidUtf8 => "row is not valid UTF-8",
            RejectReason::ColumnCount => "row has a different number of fields than the header",
            RejectReason::MissingValue => "a required value is empty",
            RejectReason::BadCategory => "a value is not one of the allowed categories",
            RejectReason::BadCode => "a LOINC, ATC or ICD-10 code is malformed",
            RejectReason::BadNumber => "a number does not parse",
            RejectReason::BadTimestamp => "a timestamp is not in an accepted form",
            RejectReason::NonexistentLocalTime => "a local time falls in a daylight-saving gap",
            RejectReason::YearOutOfRange => "birth year outside 1900 to the extract year",
            RejectReason::TimeOutOfRange => {
                "a time before 1900, or a start time after the extract end"
            }
            RejectReason::EndBeforeStart => "an end time is before its start time",
            RejectReason::UnknownUnit => "the unit is not accepted for the analyte",
            RejectReason::ImpossibleValue => "the value is physiologically impossible",
            RejectReason::NegativeNumber => "a number that cannot be negative is negative",
            RejectReason::DuplicateId => "the id was already used by an earlier row",
            RejectReason::UnknownPatient => "the patient is not in the extract or the store",
        }
    }
}

impl fmt::Display for RejectReason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.code())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codes_are_unique_and_round_trip_in_order() {
        for (i, r) in RejectReason::ALL.iter().enumerate() {
            assert_eq!(RejectReason::from_code(r.code()), Some(*r));
            if i > 0 {
                assert!(
                    RejectReason::ALL[i - 1] < *r,
                    "ALL must list reasons in check order"
                );
            }
        }
    }
}
