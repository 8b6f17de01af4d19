//! `kcohort stats standardize`: directly standardised rates (e.g. by age band) with a Fay–Feuer
//! or Dobson interval, overall or per group.

use super::InputArgs;
use super::grouping::Grouping;
use super::report::{Report, TextTable, amount, ci_label, interval, num, to_json};
use anyhow::Context;
use clap::{Args, ValueEnum};
use kcohort_stats::standardize::{StandardizationMethod, direct_standardized_rate};
use serde_json::json;

#[derive(Debug, Args)]
#[command(
    after_long_help = "Directly standardised rate: one row per stratum (e.g. age band), with its events, \
its person-time or population at risk, and the standard population's weight for that stratum (any \
scale; weights are normalised). With --group, each group's rows are standardised separately."
)]
pub struct StandardizeArgs {
    /// Column with the events in each stratum.
    #[arg(long, value_name = "COL")]
    pub events: String,
    /// Column with the person-time (or population) at risk in each stratum.
    #[arg(long, value_name = "COL")]
    pub population: String,
    /// Column with the standard population of each stratum (e.g. European Standard Population).
    #[arg(long, value_name = "COL")]
    pub standard: String,
    /// Column whose values split the rows into groups, one standardised rate each.
    #[arg(long, value_name = "COL")]
    pub group: Option<String>,
    /// Interval: Fay–Feuer gamma, or Dobson et al.
    #[arg(long, value_enum, default_value_t = Method::FayFeuer)]
    pub method: Method,
    /// Report rates per this many units of person-time.
    #[arg(long, default_value_t = 100_000.0, value_name = "UNITS")]
    pub per: f64,
    #[command(flatten)]
    pub input: InputArgs,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Method {
    /// Fay & Feuer gamma interval.
    FayFeuer,
    /// Dobson et al. interval.
    Dobson,
}

pub fn run(args: &StandardizeArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    let mut columns = vec![
        args.events.as_str(),
        args.population.as_str(),
        args.standard.as_str(),
    ];
    columns.extend(args.group.as_deref());
    let table = args.input.read(&columns)?;
    let events = table.counts(&args.events)?;
    let population = table.positive_numbers(&args.population)?;
    let standard = table.non_negative_numbers(&args.standard)?;
    let grouping = match &args.group {
        Some(group) => Grouping::new(&table.labels(group)?),
        None => Grouping::single(table.len()),
    };
    let method = match args.method {
        Method::FayFeuer => StandardizationMethod::FayFeuer,
        Method::Dobson => StandardizationMethod::Dobson,
    };
    let ci = ci_label(level.value());
    let per = amount(args.per);
    let mut rows = TextTable::new(&[
        "group",
        "strata",
        "events",
        "person-time",
        &format!("crude rate per {per}"),
        &format!("standardised rate per {per}"),
        &ci,
    ]);
    let mut results = Vec::new();
    for (name, group_rows) in grouping.levels.iter().zip(grouping.rows()) {
        let pick = |values: &[f64]| group_rows.iter().map(|&r| values[r]).collect::<Vec<f64>>();
        let group_events: Vec<u64> = group_rows.iter().map(|&r| events[r]).collect();
        let rate = direct_standardized_rate(
            &group_events,
            &pick(&population),
            &pick(&standard),
            method,
            args.per,
            level,
        )
        .with_context(|| match &args.group {
            Some(_) => format!("standardised rate of group `{name}`"),
            None => "standardised rate".to_string(),
        })?;
        rows.row(vec![
            if args.group.is_some() {
                name.clone()
            } else {
                "all".to_string()
            },
            group_rows.len().to_string(),
            rate.events.to_string(),
            amount(rate.person_time),
            num(rate.crude_rate),
            num(rate.rate),
            interval(&rate.interval),
        ]);
        results.push(json!({
            "group": args.group.as_ref().map(|_| name),
            "n_strata": group_rows.len(),
            "rate": to_json(&rate),
        }));
    }
    let method_words = match method {
        StandardizationMethod::FayFeuer => "Fay–Feuer gamma interval",
        StandardizationMethod::Dobson => "Dobson et al. interval",
    };
    let text = format!(
        "Directly standardised rate with {method_words}; standard population `{}`\n\n{}",
        args.standard,
        rows.render()
    );
    let settings = json!({
        "columns": {
            "events": args.events,
            "population": args.population,
            "standard": args.standard,
            "group": args.group,
        },
        "method": to_json(&method),
        "per": args.per,
        "level": level.value(),
    });
    Ok(Report::new(
        "standardize",
        &table,
        settings,
        json!(results),
        text,
    ))
}
