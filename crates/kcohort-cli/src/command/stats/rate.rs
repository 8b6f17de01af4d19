//! `kcohort stats rate`: events per person-time with the exact Poisson (Garwood) interval.

use super::InputArgs;
use super::grouping::Grouping;
use super::report::{Report, TextTable, amount, ci_label, interval, num, per_label, to_json};
use anyhow::Context;
use clap::Args;
use kcohort_stats::poisson_rate::{PoissonRate, poisson_rate};
use serde_json::json;

#[derive(Debug, Args)]
pub struct RateArgs {
    /// Column with the number of events in each row (summed per group).
    #[arg(long, value_name = "COL")]
    pub events: String,
    /// Column with the person-time at risk in each row (summed per group), in any one unit.
    #[arg(long, value_name = "COL")]
    pub person_time: String,
    /// Report rates per this many units of person-time (1000 with days: per 1,000 patient-days).
    #[arg(long, default_value_t = 1000.0, value_name = "UNITS")]
    pub per: f64,
    /// Column whose values split the rows into groups, one rate each.
    #[arg(long, value_name = "COL")]
    pub group: Option<String>,
    #[command(flatten)]
    pub input: InputArgs,
}

/// Events and person-time summed per level of a grouping (absent: one level).
pub(super) struct GroupedCounts {
    pub grouping: Grouping,
    pub events: Vec<u64>,
    pub person_time: Vec<f64>,
}

pub(super) fn grouped_counts(
    table: &super::table_input::Table,
    events: &str,
    person_time: &str,
    group: Option<&str>,
) -> anyhow::Result<GroupedCounts> {
    let grouping = match group {
        Some(group) => Grouping::new(&table.labels(group)?),
        None => Grouping::single(table.len()),
    };
    let counts = table.counts(events)?;
    let times = table.non_negative_numbers(person_time)?;
    Ok(GroupedCounts {
        events: grouping.sum(&counts),
        person_time: grouping.sum(&times),
        grouping,
    })
}

/// The rate of each level, with context naming the group when one fails.
pub(super) fn rates(
    counts: &GroupedCounts,
    per: f64,
    level: kcohort_stats::ConfidenceLevel,
    grouped: bool,
) -> anyhow::Result<Vec<PoissonRate>> {
    counts
        .grouping
        .levels
        .iter()
        .enumerate()
        .map(|(i, name)| {
            poisson_rate(counts.events[i], counts.person_time[i], per, level).with_context(|| {
                if grouped {
                    format!("rate of group `{name}`")
                } else {
                    "rate over all rows".to_string()
                }
            })
        })
        .collect()
}

/// The text table of rates, one row per level.
pub(super) fn rate_table(names: &[String], rates: &[PoissonRate], per: f64, level: f64) -> String {
    let mut table = TextTable::new(&[
        "group",
        "events",
        "person-time",
        &per_label(per),
        &ci_label(level),
    ]);
    for (name, rate) in names.iter().zip(rates) {
        table.row(vec![
            name.clone(),
            rate.events.to_string(),
            amount(rate.person_time),
            num(rate.rate),
            interval(&rate.interval),
        ]);
    }
    table.render()
}

pub fn run(args: &RateArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    let mut columns = vec![args.events.as_str(), args.person_time.as_str()];
    columns.extend(args.group.as_deref());
    let table = args.input.read(&columns)?;
    let counts = grouped_counts(
        &table,
        &args.events,
        &args.person_time,
        args.group.as_deref(),
    )?;
    let rates = rates(&counts, args.per, level, args.group.is_some())?;
    let names: Vec<String> = match &args.group {
        Some(_) => counts.grouping.levels.clone(),
        None => vec!["all".to_string()],
    };
    let text = format!(
        "Event rate with exact Poisson (Garwood) interval; person-time in the unit of `{}`\n\n{}",
        args.person_time,
        rate_table(&names, &rates, args.per, level.value())
    );
    let results: Vec<_> = counts
        .grouping
        .levels
        .iter()
        .zip(&rates)
        .map(|(name, rate)| {
            json!({
                "group": args.group.as_ref().map(|_| name),
                "rate": to_json(rate),
            })
        })
        .collect();
    let settings = json!({
        "columns": {
            "events": args.events,
            "person_time": args.person_time,
            "group": args.group,
        },
        "per": args.per,
        "level": level.value(),
    });
    Ok(Report::new("rate", &table, settings, json!(results), text))
}
