//! `kcohort stats rate-ratio`: each group's rate against a reference group's, as a rate ratio
//! (Wald on the log scale and exact conditional) and a rate difference (Wald).

use super::InputArgs;
use super::rate::{grouped_counts, rate_table, rates};
use super::report::{Outcome, Report, TextTable, amount, ci_label, interval, num, to_json};
use anyhow::{Context, bail};
use clap::Args;
use kcohort_stats::rate_ratio::{PersonTimeCounts, RateRatioMethod, rate_difference, rate_ratio};
use serde_json::json;

#[derive(Debug, Args)]
pub struct RateRatioArgs {
    /// Column naming each row's group (exposure category, ward, period).
    #[arg(long, value_name = "COL")]
    pub group: String,
    /// Column with the number of events in each row (summed per group).
    #[arg(long, value_name = "COL")]
    pub events: String,
    /// Column with the person-time at risk in each row (summed per group), in any one unit.
    #[arg(long, value_name = "COL")]
    pub person_time: String,
    /// The group the others are compared with. Default: the first group, in numeric order when
    /// every group name is a number, otherwise in text order.
    #[arg(long, value_name = "VALUE")]
    pub reference: Option<String>,
    /// Report rates and rate differences per this many units of person-time.
    #[arg(long, default_value_t = 1000.0, value_name = "UNITS")]
    pub per: f64,
    #[command(flatten)]
    pub input: InputArgs,
}

pub fn run(args: &RateRatioArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    let table = args
        .input
        .read(&[&args.group, &args.events, &args.person_time])?;
    let counts = grouped_counts(&table, &args.events, &args.person_time, Some(&args.group))?;
    let levels = &counts.grouping.levels;
    let reference = match &args.reference {
        Some(value) => match levels.iter().position(|l| l == value) {
            Some(i) => i,
            None => bail!(
                "--reference {value}: column `{}` has no group `{value}`\nhint: the groups found are {}",
                args.group,
                levels
                    .iter()
                    .map(|l| format!("`{l}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        },
        None => 0,
    };
    if levels.len() < 2 {
        bail!(
            "column `{}` has only one group (`{}`); a rate ratio compares at least two",
            args.group,
            levels[0]
        );
    }
    let rates = rates(&counts, args.per, level, true)?;
    let reference_name = &levels[reference];
    let ci = ci_label(level.value());
    let mut comparisons = Vec::new();
    let mut notes: Vec<String> = Vec::new();
    let mut text_table = TextTable::new(&[
        "group vs reference",
        "rate ratio",
        &format!("{ci} (Wald, log)"),
        &format!("{ci} (exact conditional)"),
        &format!("rate difference per {}", amount(args.per)),
        &ci,
    ]);
    for (i, name) in levels.iter().enumerate() {
        if i == reference {
            continue;
        }
        let estimates = PersonTimeCounts::new(
            counts.events[i],
            counts.person_time[i],
            counts.events[reference],
            counts.person_time[reference],
        )
        .and_then(|pair| {
            Ok((
                Outcome::from_result(rate_ratio(&pair, RateRatioMethod::WaldLog, level))?,
                Outcome::from_result(rate_ratio(&pair, RateRatioMethod::ExactConditional, level))?,
                Outcome::from_result(rate_difference(&pair, args.per, level))?,
            ))
        })
        .with_context(|| format!("group `{name}` vs reference `{reference_name}`"))?;
        let (wald, exact, difference) = estimates;
        // The Wald estimate needs events in both groups; the exact one is also defined with one zero.
        let estimate = wald.estimated().or(exact.estimated()).map(|r| r.estimate);
        let missing = || "not estimable".to_string();
        text_table.row(vec![
            format!("{name} vs {reference_name}"),
            estimate.map_or_else(missing, num),
            wald.estimated()
                .map_or_else(missing, |r| interval(&r.interval)),
            exact
                .estimated()
                .map_or_else(missing, |r| interval(&r.interval)),
            difference
                .estimated()
                .map_or_else(missing, |r| num(r.estimate)),
            difference
                .estimated()
                .map_or_else(missing, |r| interval(&r.interval)),
        ]);
        for reason in [wald.reason(), exact.reason(), difference.reason()]
            .into_iter()
            .flatten()
        {
            let note = format!("{name} vs {reference_name}: {reason}");
            if !notes.contains(&note) {
                notes.push(note);
            }
        }
        comparisons.push(json!({
            "group": name,
            "reference": reference_name,
            "rate_ratio_wald_log": to_json(&wald),
            "rate_ratio_exact_conditional": to_json(&exact),
            "rate_difference": to_json(&difference),
        }));
    }
    let mut text = format!(
        "Rate ratio and rate difference vs reference group `{reference_name}`; person-time in the unit of `{}`\n\n",
        args.person_time
    );
    text.push_str(&rate_table(levels, &rates, args.per, level.value()));
    text.push('\n');
    text.push_str(&text_table.render());
    if !notes.is_empty() {
        text.push('\n');
        for note in notes {
            text.push_str(&note);
            text.push('\n');
        }
    }
    let results = json!({
        "reference": reference_name,
        "rates": levels.iter().zip(&rates).map(|(name, rate)| json!({
            "group": name,
            "rate": to_json(rate),
        })).collect::<Vec<_>>(),
        "comparisons": comparisons,
    });
    let settings = json!({
        "columns": {
            "group": args.group,
            "events": args.events,
            "person_time": args.person_time,
        },
        "reference": reference_name,
        "per": args.per,
        "level": level.value(),
    });
    Ok(Report::new("rate-ratio", &table, settings, results, text))
}
