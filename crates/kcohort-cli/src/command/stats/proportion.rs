//! `kcohort stats proportion`: x/n with a Wilson score or Clopper–Pearson exact interval.

use super::InputArgs;
use super::grouping::Grouping;
use super::report::{Report, TextTable, ci_label, interval, num, to_json};
use anyhow::Context;
use clap::{ArgGroup, Args, ValueEnum};
use kcohort_stats::proportion::{ProportionMethod, proportion};
use serde_json::json;

#[derive(Debug, Args)]
#[command(group(ArgGroup::new("counts").required(true).args(["cases", "outcome"])))]
pub struct ProportionArgs {
    /// Column with the number of cases in each row (rows are counts, summed per group); use with --total.
    #[arg(long, value_name = "COL", requires = "total")]
    pub cases: Option<String>,
    /// Column with the number of people in each row (the denominator); use with --cases.
    #[arg(long, value_name = "COL", requires = "cases")]
    pub total: Option<String>,
    /// Column with one 0/1 (or false/true) per subject instead: the proportion is the share of 1s.
    #[arg(long, value_name = "COL", conflicts_with_all = ["cases", "total"])]
    pub outcome: Option<String>,
    /// Column whose values split the rows into groups, one proportion each.
    #[arg(long, value_name = "COL")]
    pub group: Option<String>,
    /// Interval: Wilson score, or Clopper–Pearson exact.
    #[arg(long, value_enum, default_value_t = Method::Wilson)]
    pub method: Method,
    #[command(flatten)]
    pub input: InputArgs,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Method {
    /// Wilson score interval.
    Wilson,
    /// Clopper–Pearson exact interval.
    Exact,
}

pub fn run(args: &ProportionArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    let mut columns: Vec<&str> = match (&args.cases, &args.total, &args.outcome) {
        (Some(cases), Some(total), _) => vec![cases, total],
        (_, _, Some(outcome)) => vec![outcome],
        _ => unreachable!("clap requires --cases with --total, or --outcome"),
    };
    columns.extend(args.group.as_deref());
    let table = args.input.read(&columns)?;
    let grouping = match &args.group {
        Some(group) => Grouping::new(&table.labels(group)?),
        None => Grouping::single(table.len()),
    };
    let (cases, totals) = match (&args.cases, &args.total, &args.outcome) {
        (Some(cases), Some(total), _) => {
            let x = table.counts(cases)?;
            let n = table.counts(total)?;
            (grouping.sum(&x), grouping.sum(&n))
        }
        (_, _, Some(outcome)) => {
            let flags: Vec<u64> = table.flags(outcome)?.into_iter().map(u64::from).collect();
            (grouping.sum(&flags), grouping.sum(&vec![1u64; flags.len()]))
        }
        _ => unreachable!("clap requires --cases with --total, or --outcome"),
    };
    let method = match args.method {
        Method::Wilson => ProportionMethod::Wilson,
        Method::Exact => ProportionMethod::ClopperPearson,
    };
    let mut results = Vec::new();
    let mut text_table = TextTable::new(&[
        "group",
        "cases",
        "total",
        "proportion",
        &ci_label(level.value()),
    ]);
    for (i, name) in grouping.levels.iter().enumerate() {
        let p =
            proportion(cases[i], totals[i], method, level).with_context(|| match &args.group {
                Some(_) => format!("proportion of group `{name}`"),
                None => "proportion".to_string(),
            })?;
        text_table.row(vec![
            if args.group.is_some() {
                name.clone()
            } else {
                "all".to_string()
            },
            cases[i].to_string(),
            totals[i].to_string(),
            num(p.estimate),
            interval(&p.interval),
        ]);
        results.push(json!({
            "group": args.group.as_ref().map(|_| name),
            "proportion": to_json(&p),
        }));
    }
    let method_words = match method {
        ProportionMethod::Wilson => "Wilson score interval",
        ProportionMethod::ClopperPearson => "Clopper–Pearson exact interval",
    };
    let text = format!("Proportion with {method_words}\n\n{}", text_table.render());
    let settings = json!({
        "columns": {
            "cases": args.cases,
            "total": args.total,
            "outcome": args.outcome,
            "group": args.group,
        },
        "method": to_json(&method),
        "level": level.value(),
    });
    Ok(Report::new(
        "proportion",
        &table,
        settings,
        json!(results),
        text,
    ))
}
