//! `kcohort stats km`: Kaplan–Meier survival, medians with their intervals, survival at chosen
//! times, and the log-rank test when grouped.

use super::InputArgs;
use super::follow_up::follow_up;
use super::grouping::Grouping;
use super::report::Format;
use super::report::{
    Report, TextTable, amount, ci_label, num, p_value, time as show_time, to_json,
};
use anyhow::Context;
use clap::Args;
use kcohort_stats::Interval;
use kcohort_stats::follow_up::FollowUp;
use kcohort_stats::kaplan_meier::{self, KaplanMeierOptions};
use kcohort_stats::log_rank;
use serde_json::json;

#[derive(Debug, Args)]
#[command(
    after_long_help = "Kaplan–Meier survival with Greenwood standard errors and pointwise intervals on the log \
scale (R survfit's default) and the log(−log) scale, the median with its Brookmeyer–Crowley interval, \
and with --group the log-rank test. One row per subject (or per (entry, time] interval with --entry). \
The text output lists the event times, or with --at the chosen times; the JSON output has every step."
)]
pub struct KaplanMeierArgs {
    /// Column with the time of the event or of censoring.
    #[arg(long, value_name = "COL")]
    pub time: String,
    /// Column with 1 (or true) for an event at that time, 0 (or false) for censoring.
    #[arg(long, value_name = "COL")]
    pub event: String,
    /// Column whose values split the rows into groups: one curve each, and the log-rank test.
    #[arg(long, value_name = "COL")]
    pub group: Option<String>,
    /// Column with the time each row enters the risk set (late entry); default: at risk from the start.
    #[arg(long, value_name = "COL")]
    pub entry: Option<String>,
    /// Report survival at these times, e.g. --at 30,90,365.
    #[arg(long, value_name = "T1,T2,...", value_delimiter = ',')]
    pub at: Vec<f64>,
    #[command(flatten)]
    pub input: InputArgs,
}

fn ci_text(interval: &Option<Interval>) -> String {
    match interval {
        Some(i) => format!("{} to {}", num(i.lower), num(i.upper)),
        None => "n/a".to_string(),
    }
}

fn time_text(time: Option<f64>) -> String {
    time.map_or("not reached".to_string(), show_time)
}

pub fn run(args: &KaplanMeierArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    let mut columns = vec![args.time.as_str(), args.event.as_str()];
    columns.extend(args.entry.as_deref());
    columns.extend(args.group.as_deref());
    let table = args.input.read(&columns)?;
    let data = follow_up(&table, &args.time, &args.event, args.entry.as_deref())?;
    let grouping = match &args.group {
        Some(group) => Grouping::new(&table.labels(group)?),
        None => Grouping::single(table.len()),
    };
    let options = KaplanMeierOptions {
        level,
        at_times: args.at.clone(),
    };
    let ci = ci_label(level.value());
    let mut text = format!(
        "Kaplan–Meier survival: time `{}`, event `{}`{}\n\n",
        args.time,
        args.event,
        args.entry
            .as_ref()
            .map_or(String::new(), |e| format!(", late entry `{e}`"))
    );
    let mut medians = TextTable::new(&[
        "group",
        "subjects",
        "events",
        "median",
        &format!("{ci} (log)"),
        &format!("{ci} (log-log)"),
    ]);
    let mut curves = Vec::new();
    let mut tables = String::new();
    for (name, rows) in grouping.levels.iter().zip(grouping.rows()) {
        let rows_data: Vec<FollowUp> = rows.iter().map(|&r| data[r]).collect();
        let curve =
            kaplan_meier::estimate(&rows_data, &options).with_context(|| match &args.group {
                Some(_) => format!("Kaplan–Meier curve of group `{name}`"),
                None => "Kaplan–Meier curve".to_string(),
            })?;
        let label = if args.group.is_some() {
            name.clone()
        } else {
            "all".to_string()
        };
        let m = &curve.median;
        medians.row(vec![
            label.clone(),
            curve.n_rows.to_string(),
            curve.n_events.to_string(),
            time_text(m.median),
            format!("{} to {}", time_text(m.log_lower), time_text(m.log_upper)),
            format!(
                "{} to {}",
                time_text(m.log_log_lower),
                time_text(m.log_log_upper)
            ),
        ]);
        let mut steps = TextTable::new(&[
            "time",
            "at risk",
            "events",
            "survival",
            "std error",
            &format!("{ci} (log)"),
            &format!("{ci} (log-log)"),
        ]);
        if args.at.is_empty() {
            for step in curve.steps.iter().filter(|s| s.n_events > 0) {
                steps.row(vec![
                    show_time(step.time),
                    step.n_at_risk.to_string(),
                    step.n_events.to_string(),
                    num(step.survival),
                    num(step.std_error),
                    ci_text(&step.log_interval),
                    ci_text(&step.log_log_interval),
                ]);
            }
        } else {
            for at in &curve.at_times {
                steps.row(vec![
                    show_time(at.time),
                    at.n_at_risk.to_string(),
                    String::new(),
                    num(at.survival),
                    num(at.std_error),
                    ci_text(&at.log_interval),
                    ci_text(&at.log_log_interval),
                ]);
            }
        }
        tables.push_str(&format!("\n{label}\n"));
        tables.push_str(&steps.render());
        // Every step of a large curve makes a large JSON tree: build it only when it is printed.
        if args.input.format == Format::Json {
            curves.push(json!({
                "group": args.group.as_ref().map(|_| name),
                "kaplan_meier": to_json(&curve),
            }));
        }
    }
    text.push_str(&medians.render());
    text.push_str(&tables);

    let mut log_rank_json = serde_json::Value::Null;
    if args.group.is_some() && grouping.levels.len() >= 2 {
        let codes: Vec<u32> = grouping.of_row.iter().map(|&g| g as u32).collect();
        let test = log_rank::test(&data, &codes, None).context("log-rank test")?;
        let mut groups = TextTable::new(&["log-rank", "observed", "expected"]);
        for g in &test.groups {
            groups.row(vec![
                grouping.levels[g.group as usize].clone(),
                amount(g.observed),
                num(g.expected),
            ]);
        }
        text.push('\n');
        text.push_str(&groups.render());
        text.push_str(&format!(
            "chi-square {} on {} df, p-value {}\n",
            num(test.chi_square),
            test.degrees_of_freedom,
            p_value(test.p_value)
        ));
        let mut value = to_json(&test);
        if let Some(list) = value["groups"].as_array_mut() {
            for g in list {
                let code = g["group"].as_u64().unwrap_or_default() as usize;
                g["group"] = json!(grouping.levels[code]);
            }
        }
        log_rank_json = value;
    }
    let results = json!({
        "curves": curves,
        "log_rank": log_rank_json,
    });
    let settings = json!({
        "columns": {
            "time": args.time,
            "event": args.event,
            "entry": args.entry,
            "group": args.group,
        },
        "at": args.at,
        "level": level.value(),
    });
    Ok(Report::new("km", &table, settings, results, text))
}
