//! `potassium_episode_machine(...) OVER (ORDER BY patient_id, collected_at, result_id)`: rules 4–6
//! of the episode definition (queries/episodes.sql) as one pass of a per-patient state machine,
//! registered as a window function so the definition stays SQL while the sequential part runs at
//! the speed of a loop.
//!
//! Arguments: patient_id, collected_at, value, then the literals high_above, normal_at_or_below,
//! max_gap (microseconds, BIGINT) and rebound (microseconds, BIGINT). The rows must be one
//! patient's used potassium results after another, each patient's in definition order (the
//! window's ORDER BY, without PARTITION BY: one partition, read in one pass).
//!
//! The result is NULL on every row except the row of each episode's opening high value, where it
//! is a struct of the episode after rebound merging: onset_at, onset_value, peak_value, end_at,
//! n_results (decision b: every row of the patient collected from onset_at to end_at, both
//! inclusive), n_high, resolved, n_rebounds.

use datafusion::arrow::array::{
    Array, ArrayRef, AsArray, BooleanBuilder, Float64Builder, Int64Builder, StringArray,
    StringViewArray, StructArray, TimestampMicrosecondBuilder,
};
use datafusion::arrow::datatypes::{
    DataType, Field, FieldRef, Fields, Float64Type, Int64Type, TimeUnit, TimestampMicrosecondType,
};
use datafusion::common::exec_err;
use datafusion::error::Result;
use datafusion::logical_expr::function::{PartitionEvaluatorArgs, WindowUDFFieldArgs};
use datafusion::logical_expr::{PartitionEvaluator, Signature, Volatility, WindowUDFImpl};
use std::sync::Arc;

fn instant() -> DataType {
    DataType::Timestamp(TimeUnit::Microsecond, Some("UTC".into()))
}

fn fields() -> Fields {
    Fields::from(vec![
        Field::new("onset_at", instant(), false),
        Field::new("onset_value", DataType::Float64, false),
        Field::new("peak_value", DataType::Float64, false),
        Field::new("end_at", instant(), false),
        Field::new("n_results", DataType::Int64, false),
        Field::new("n_high", DataType::Int64, false),
        Field::new("resolved", DataType::Boolean, false),
        Field::new("n_rebounds", DataType::Int64, false),
    ])
}

/// The window function.
#[derive(Debug, PartialEq, Eq, Hash)]
pub(crate) struct PotassiumEpisodeMachine {
    signature: Signature,
}

impl PotassiumEpisodeMachine {
    pub(crate) fn new() -> Self {
        PotassiumEpisodeMachine {
            signature: Signature::any(7, Volatility::Immutable),
        }
    }
}

impl WindowUDFImpl for PotassiumEpisodeMachine {
    fn name(&self) -> &str {
        "potassium_episode_machine"
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn partition_evaluator(
        &self,
        _args: PartitionEvaluatorArgs,
    ) -> Result<Box<dyn PartitionEvaluator>> {
        Ok(Box::new(Machine))
    }

    fn field(&self, field_args: WindowUDFFieldArgs) -> Result<FieldRef> {
        Ok(Field::new(field_args.name(), DataType::Struct(fields()), true).into())
    }
}

#[derive(Debug)]
struct Machine;

/// Text of a string column, plain or view.
enum Strings<'a> {
    Plain(&'a StringArray),
    View(&'a StringViewArray),
}

impl Strings<'_> {
    fn of(array: &ArrayRef) -> Result<Strings<'_>> {
        match array.data_type() {
            DataType::Utf8 => Ok(Strings::Plain(array.as_string::<i32>())),
            DataType::Utf8View => Ok(Strings::View(array.as_string_view())),
            other => exec_err!("potassium_episode_machine: patient_id must be text, found {other}"),
        }
    }

    fn value(&self, i: usize) -> &str {
        match self {
            Strings::Plain(a) => a.value(i),
            Strings::View(a) => a.value(i),
        }
    }
}

/// One episode while its patient's rows are read.
struct Episode {
    onset_row: usize,
    peak: f64,
    latest_at: i64,
    end_at: i64,
    end_row: usize,
    resolved: bool,
    n_high: i64,
    n_rebounds: i64,
}

/// The rules of the definition (queries/episodes.sql, rules 4–6).
#[derive(Clone, Copy)]
pub(crate) struct Rules {
    pub high_above: f64,
    pub normal_at_or_below: f64,
    pub max_gap_us: i64,
    pub rebound_us: i64,
}

/// Episodes of one patient's rows `times[..]`/`values[..]` (already in order); row indices are
/// relative to the slice.
fn patient_episodes(times: &[i64], values: &[f64], rules: Rules) -> Vec<Episode> {
    let mut found: Vec<Episode> = Vec::new();
    let mut open = false;
    for (i, (&t, &v)) in times.iter().zip(values).enumerate() {
        let high = v > rules.high_above;
        let normal = v <= rules.normal_at_or_below;
        if open {
            let e = found.last_mut().expect("an open episode");
            if t > e.latest_at + rules.max_gap_us {
                e.end_at = e.latest_at;
                e.resolved = false;
                open = false;
            }
        }
        if open {
            let e = found.last_mut().expect("an open episode");
            e.latest_at = t;
            e.end_row = i;
            e.peak = e.peak.max(v);
            if high {
                e.n_high += 1;
            }
            if normal {
                e.end_at = t;
                e.resolved = true;
                open = false;
            }
        } else if high {
            let rebound = found
                .last()
                .is_some_and(|last| last.resolved && t < last.end_at + rules.rebound_us);
            if rebound {
                let e = found.last_mut().expect("a previous episode");
                e.n_rebounds += 1;
                e.n_high += 1;
                e.latest_at = t;
                e.end_row = i;
                e.peak = e.peak.max(v);
                e.resolved = false;
            } else {
                found.push(Episode {
                    onset_row: i,
                    peak: v,
                    latest_at: t,
                    end_at: t,
                    end_row: i,
                    resolved: false,
                    n_high: 1,
                    n_rebounds: 0,
                });
            }
            open = true;
        }
    }
    if open {
        let e = found.last_mut().expect("an open episode");
        e.end_at = e.latest_at;
        e.resolved = false;
    }
    found
}

impl PartitionEvaluator for Machine {
    fn evaluate_all(&mut self, values: &[ArrayRef], num_rows: usize) -> Result<ArrayRef> {
        if values.len() != 7 {
            return exec_err!(
                "potassium_episode_machine takes 7 arguments, got {}",
                values.len()
            );
        }
        let patients = Strings::of(&values[0])?;
        let times = values[1]
            .as_primitive_opt::<TimestampMicrosecondType>()
            .map(|a| a.values());
        let Some(times) = times else {
            return exec_err!(
                "potassium_episode_machine: collected_at must be a microsecond timestamp"
            );
        };
        let number = |i: usize| -> Result<f64> {
            match values[i].as_primitive_opt::<Float64Type>() {
                Some(a) if !a.is_empty() && a.is_valid(0) => Ok(a.value(0)),
                Some(_) => Ok(f64::NAN),
                None => exec_err!(
                    "potassium_episode_machine: argument {} must be a DOUBLE",
                    i + 1
                ),
            }
        };
        let whole = |i: usize| -> Result<i64> {
            match values[i].as_primitive_opt::<Int64Type>() {
                Some(a) if !a.is_empty() && a.is_valid(0) => Ok(a.value(0)),
                Some(_) => Ok(0),
                None => exec_err!(
                    "potassium_episode_machine: argument {} must be a BIGINT",
                    i + 1
                ),
            }
        };
        let Some(value_array) = values[2].as_primitive_opt::<Float64Type>() else {
            return exec_err!("potassium_episode_machine: value must be a DOUBLE");
        };
        if values[1].null_count() > 0 || value_array.null_count() > 0 {
            return exec_err!("potassium_episode_machine: collected_at and value must not be NULL");
        }
        let rules = Rules {
            high_above: number(3)?,
            normal_at_or_below: number(4)?,
            max_gap_us: whole(5)?,
            rebound_us: whole(6)?,
        };
        let vals = value_array.values();

        let mut onset_at =
            TimestampMicrosecondBuilder::with_capacity(num_rows).with_timezone("UTC");
        let mut onset_value = Float64Builder::with_capacity(num_rows);
        let mut peak_value = Float64Builder::with_capacity(num_rows);
        let mut end_at = TimestampMicrosecondBuilder::with_capacity(num_rows).with_timezone("UTC");
        let mut n_results = Int64Builder::with_capacity(num_rows);
        let mut n_high = Int64Builder::with_capacity(num_rows);
        let mut resolved = BooleanBuilder::with_capacity(num_rows);
        let mut n_rebounds = Int64Builder::with_capacity(num_rows);
        let mut valid = Vec::with_capacity(num_rows);
        let mut start = 0;
        while start < num_rows {
            let patient = patients.value(start);
            let mut end = start + 1;
            while end < num_rows && patients.value(end) == patient {
                end += 1;
            }
            let t = &times[start..end];
            let episodes = patient_episodes(t, &vals[start..end], rules);
            let mut next = episodes.iter().peekable();
            for row in 0..(end - start) {
                match next.peek() {
                    Some(e) if e.onset_row == row => {
                        let e = next.next().expect("peeked");
                        // Decision b: every row of the patient collected from onset to end.
                        let mut first = e.onset_row;
                        while first > 0 && t[first - 1] == t[e.onset_row] {
                            first -= 1;
                        }
                        let mut last = e.end_row;
                        while last + 1 < t.len() && t[last + 1] == e.end_at {
                            last += 1;
                        }
                        onset_at.append_value(t[e.onset_row]);
                        onset_value.append_value(vals[start + e.onset_row]);
                        peak_value.append_value(e.peak);
                        end_at.append_value(e.end_at);
                        n_results.append_value((last - first + 1) as i64);
                        n_high.append_value(e.n_high);
                        resolved.append_value(e.resolved);
                        n_rebounds.append_value(e.n_rebounds);
                        valid.push(true);
                    }
                    _ => {
                        onset_at.append_value(0);
                        onset_value.append_value(0.0);
                        peak_value.append_value(0.0);
                        end_at.append_value(0);
                        n_results.append_value(0);
                        n_high.append_value(0);
                        resolved.append_value(false);
                        n_rebounds.append_value(0);
                        valid.push(false);
                    }
                }
            }
            start = end;
        }
        let columns: Vec<ArrayRef> = vec![
            Arc::new(onset_at.finish()),
            Arc::new(onset_value.finish()),
            Arc::new(peak_value.finish()),
            Arc::new(end_at.finish()),
            Arc::new(n_results.finish()),
            Arc::new(n_high.finish()),
            Arc::new(resolved.finish()),
            Arc::new(n_rebounds.finish()),
        ];
        Ok(Arc::new(StructArray::try_new(
            fields(),
            columns,
            Some(valid.into()),
        )?))
    }
}
