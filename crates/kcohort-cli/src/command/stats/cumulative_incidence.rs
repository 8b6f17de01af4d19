//! `kcohort stats cif`: Aalen–Johansen cumulative incidence of competing events, and Gray's test
//! for each event type when grouped.

use super::InputArgs;
use super::follow_up::competing_follow_up;
use super::grouping::Grouping;
use super::report::Format;
use super::report::{Report, TextTable, ci_label, num, p_value, time as show_time, to_json};
use anyhow::Context;
use clap::Args;
use kcohort_stats::aalen_johansen::{self, gray_test};
use kcohort_stats::follow_up::CompetingFollowUp;
use serde_json::json;

#[derive(Debug, Args)]
#[command(
    after_long_help = "Cumulative incidence of competing events (Aalen–Johansen) with delta-method standard \
errors and log(−log) intervals, one row per subject. The event column holds 0 for censored and 1, 2, \
... for the event types. With --group, one set of curves per group and Gray's test for each event type. \
The text output lists the times with an event; the JSON output has every step."
)]
pub struct CumulativeIncidenceArgs {
    /// Column with the time of the event or of censoring.
    #[arg(long, value_name = "COL")]
    pub time: String,
    /// Column with 0 (censored) or the event type 1, 2, ... at that time.
    #[arg(long, value_name = "COL")]
    pub event: String,
    /// Column whose values split the rows into groups: curves per group and Gray's test.
    #[arg(long, value_name = "COL")]
    pub group: Option<String>,
    #[command(flatten)]
    pub input: InputArgs,
}

pub fn run(args: &CumulativeIncidenceArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    let mut columns = vec![args.time.as_str(), args.event.as_str()];
    columns.extend(args.group.as_deref());
    let table = args.input.read(&columns)?;
    let data = competing_follow_up(&table, &args.time, &args.event, None)?;
    let grouping = match &args.group {
        Some(group) => Grouping::new(&table.labels(group)?),
        None => Grouping::single(table.len()),
    };
    let ci = ci_label(level.value());
    let mut text = format!(
        "Cumulative incidence (Aalen–Johansen): time `{}`, event type `{}` (0 = censored)\n",
        args.time, args.event
    );
    let mut curves = Vec::new();
    for (name, rows) in grouping.levels.iter().zip(grouping.rows()) {
        let rows_data: Vec<CompetingFollowUp> = rows.iter().map(|&r| data[r]).collect();
        let curve =
            aalen_johansen::estimate(&rows_data, level).with_context(|| match &args.group {
                Some(_) => format!("cumulative incidence of group `{name}`"),
                None => "cumulative incidence".to_string(),
            })?;
        let mut header = vec![
            "time".to_string(),
            "at risk".to_string(),
            "event-free".to_string(),
        ];
        for cause in &curve.causes {
            header.push(format!("events {cause}"));
            header.push(format!("incidence {cause}"));
            header.push(format!("{ci} {cause}"));
        }
        let header: Vec<&str> = header.iter().map(String::as_str).collect();
        let mut steps = TextTable::new(&header);
        for step in curve
            .steps
            .iter()
            .filter(|s| s.n_events.iter().any(|&d| d > 0))
        {
            let mut row = vec![
                show_time(step.time),
                step.n_at_risk.to_string(),
                num(step.event_free),
            ];
            for k in 0..curve.causes.len() {
                row.push(step.n_events[k].to_string());
                row.push(num(step.cumulative_incidence[k]));
                row.push(match &step.interval[k] {
                    Some(i) => format!("{} to {}", num(i.lower), num(i.upper)),
                    None => "n/a".to_string(),
                });
            }
            steps.row(row);
        }
        let label = if args.group.is_some() {
            name.clone()
        } else {
            "all".to_string()
        };
        text.push_str(&format!(
            "\n{label}: {} subjects, event types {}\n",
            curve.n_rows,
            curve
                .causes
                .iter()
                .map(u32::to_string)
                .collect::<Vec<_>>()
                .join(", ")
        ));
        text.push_str(&steps.render());
        // Every step of a large curve makes a large JSON tree: build it only when it is printed.
        if args.input.format == Format::Json {
            curves.push(json!({
                "group": args.group.as_ref().map(|_| name),
                "aalen_johansen": to_json(&curve),
            }));
        }
    }
    let mut gray = Vec::new();
    if args.group.is_some() && grouping.levels.len() >= 2 {
        let codes: Vec<u32> = grouping.of_row.iter().map(|&g| g as u32).collect();
        let max_cause = data.iter().map(|r| r.cause).max().unwrap_or(0);
        let mut tests = TextTable::new(&["Gray's test", "chi-square", "df", "p-value"]);
        for cause in 1..=max_cause {
            let test = gray_test(&data, &codes, None, cause, 0.0)
                .with_context(|| format!("Gray's test for event type {cause}"))?;
            tests.row(vec![
                format!("event type {cause}"),
                num(test.chi_square),
                test.degrees_of_freedom.to_string(),
                p_value(test.p_value),
            ]);
            let mut value = to_json(&test);
            value["groups"] = json!(grouping.levels);
            gray.push(value);
        }
        text.push('\n');
        text.push_str(&tests.render());
    }
    let results = json!({
        "curves": curves,
        "gray_tests": gray,
    });
    let settings = json!({
        "columns": {
            "time": args.time,
            "event": args.event,
            "group": args.group,
        },
        "level": level.value(),
    });
    Ok(Report::new("cif", &table, settings, results, text))
}
