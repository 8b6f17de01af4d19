//! Follow-up columns (time, event, optional entry) read into the survival estimators' input, each
//! row checked here so that an error names its line rather than a 0-based row index.

use super::table_input::Table;
use anyhow::bail;
use kcohort_stats::follow_up::{CompetingFollowUp, FollowUp};

/// Exit times and optional entry times, checked row by row: entry < exit.
fn times(table: &Table, time: &str, entry: Option<&str>) -> anyhow::Result<(Vec<f64>, Vec<f64>)> {
    let exits = table.numbers(time)?;
    let entries = match entry {
        Some(column) => {
            let entries = table.numbers(column)?;
            for (row, (&start, &stop)) in entries.iter().zip(&exits).enumerate() {
                if start >= stop {
                    bail!(
                        "{} {}: entry `{column}` = {start} is not before time `{time}` = {stop}\nhint: \
                         a row is at risk on (entry, time]; entry must be earlier than time",
                        table.file(),
                        table.place(row)
                    );
                }
            }
            entries
        }
        None => vec![f64::NEG_INFINITY; exits.len()],
    };
    Ok((entries, exits))
}

/// One (entry, exit] interval per row, ending in the event when `event` is 1 (or true).
pub fn follow_up(
    table: &Table,
    time: &str,
    event: &str,
    entry: Option<&str>,
) -> anyhow::Result<Vec<FollowUp>> {
    let (entries, exits) = times(table, time, entry)?;
    let events = table.flags(event)?;
    Ok(entries
        .into_iter()
        .zip(exits)
        .zip(events)
        .map(|((entry, exit), event)| FollowUp::with_entry(entry, exit, event))
        .collect())
}

/// One (entry, exit] interval per row ending in censoring (0) or an event type 1..k.
pub fn competing_follow_up(
    table: &Table,
    time: &str,
    event: &str,
    entry: Option<&str>,
) -> anyhow::Result<Vec<CompetingFollowUp>> {
    let (entries, exits) = times(table, time, entry)?;
    let causes = table.counts(event)?;
    let mut rows = Vec::with_capacity(causes.len());
    for (row, ((entry, exit), cause)) in entries.into_iter().zip(exits).zip(causes).enumerate() {
        let Ok(cause) = u32::try_from(cause) else {
            bail!(
                "{} {}, column `{event}`: expected an event type 0 (censored) or 1, 2, ..., found `{cause}`",
                table.file(),
                table.place(row)
            );
        };
        rows.push(CompetingFollowUp::with_entry(entry, exit, cause));
    }
    Ok(rows)
}
