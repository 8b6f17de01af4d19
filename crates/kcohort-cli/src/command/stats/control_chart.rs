//! `kcohort stats control-chart`: a p-chart (proportions) or u-chart (rates), optionally with
//! Laney's limits, and the run-rule signals of each period.

use super::InputArgs;
use super::report::{Report, TextTable, amount, num, per_label, to_json};
use anyhow::{Context, bail};
use clap::{Args, ValueEnum};
use kcohort_stats::control_chart::{
    CentreLine, ChartKind, ChartOptions, RULE_SET, p_chart, u_chart,
};
use serde_json::json;
use std::collections::HashMap;

#[derive(Debug, Args)]
#[command(
    after_long_help = "Shewhart control chart of one indicator over time, with the run rules of Provost & \
Murray (The Health Care Data Guide, 2011), rules 1-4. One row per period, in time order as in the \
file; a period named twice is an error. p-chart: --count cases of --exposure people (whole numbers). \
u-chart: --count events over --exposure person-time, charted per --per units."
)]
pub struct ControlChartArgs {
    /// Column with the numerator of each period (cases, events).
    #[arg(long, value_name = "COL")]
    pub count: String,
    /// Column with the denominator of each period: people (p-chart) or person-time (u-chart).
    #[arg(long, value_name = "COL")]
    pub exposure: String,
    /// Column naming each period (e.g. 2024-01); rows must be in time order.
    #[arg(long, value_name = "COL")]
    pub period: String,
    /// p-chart for proportions, u-chart for rates.
    #[arg(long, value_enum)]
    pub kind: Kind,
    /// Laney p′/u′ limits, for large denominators where plain limits flag almost every period.
    #[arg(long)]
    pub laney: bool,
    /// u-chart only: chart rates per this many units of exposure (default 1000).
    #[arg(long, value_name = "UNITS")]
    pub per: Option<f64>,
    /// Freeze the centre line (and Laney's σ_z) on the first N periods.
    #[arg(long, value_name = "N")]
    pub baseline: Option<usize>,
    /// Width of the control limits in σ.
    #[arg(long, default_value_t = 3.0, value_name = "K")]
    pub sigma: f64,
    /// Word for one period in signal explanations ("8 months in a row above the centre line").
    #[arg(long, default_value = "period", value_name = "WORD")]
    pub period_word: String,
    #[command(flatten)]
    pub input: InputArgs,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Kind {
    /// p-chart: proportions.
    P,
    /// u-chart: rates.
    U,
}

pub fn run(args: &ControlChartArgs) -> anyhow::Result<Report> {
    let table = args
        .input
        .read(&[&args.period, &args.count, &args.exposure])?;
    let periods = table.labels(&args.period)?;
    let mut first_row: HashMap<&str, usize> = HashMap::new();
    for (row, period) in periods.iter().enumerate() {
        if let Some(&earlier) = first_row.get(period.as_str()) {
            bail!(
                "{} {}, column `{}`: period `{period}` was already given on {}\nhint: give \
                 one row per period (sum the counts and exposures of a period first)",
                table.file(),
                table.place(row),
                args.period,
                table.place(earlier)
            );
        }
        first_row.insert(period, row);
    }
    let counts = table.counts(&args.count)?;
    let options = ChartOptions {
        centre_line: match args.baseline {
            Some(n) => CentreLine::Baseline { start: 0, end: n },
            None => CentreLine::AllPeriods,
        },
        laney: args.laney,
        sigma_multiplier: args.sigma,
        period_label: args.period_word.clone(),
    };
    let (chart, value_label, per) = match args.kind {
        Kind::P => {
            if args.per.is_some() {
                bail!("--per applies to u-charts (rates); a p-chart charts proportions");
            }
            let totals = table.counts(&args.exposure)?;
            (
                p_chart(&counts, &totals, &options),
                "proportion".to_string(),
                None,
            )
        }
        Kind::U => {
            let per = args.per.unwrap_or(1000.0);
            if !(per.is_finite() && per > 0.0) {
                bail!("--per: expected a number greater than 0, e.g. 1000, found {per}");
            }
            let exposure: Vec<f64> = table
                .positive_numbers(&args.exposure)?
                .into_iter()
                .map(|e| e / per)
                .collect();
            (
                u_chart(&counts, &exposure, &options),
                per_label(per),
                Some(per),
            )
        }
    };
    let chart = chart.context("control chart")?;
    let kind_words = match (chart.kind, chart.laney) {
        (ChartKind::P, false) => "p-chart",
        (ChartKind::P, true) => "Laney p′-chart",
        (ChartKind::U, false) => "u-chart",
        (ChartKind::U, true) => "Laney u′-chart",
    };
    let mut text = format!(
        "Control chart: {kind_words}, {}σ limits, run rules of {RULE_SET}\n\n",
        amount(chart.sigma_multiplier)
    );
    text.push_str(&format!(
        "centre line: {} ({})\n",
        num(chart.centre),
        value_label
    ));
    if let Some(n) = args.baseline {
        text.push_str(&format!(
            "centre line from the first {n} periods (baseline)\n"
        ));
    }
    if let Some(sigma_z) = chart.sigma_z {
        text.push_str(&format!("Laney sigma_z: {}\n", num(sigma_z)));
    }
    text.push('\n');
    let mut points = TextTable::new(&[
        "period",
        "count",
        match chart.kind {
            ChartKind::P => "denominator",
            ChartKind::U => "exposure",
        },
        &value_label,
        "lower limit",
        "upper limit",
        "signals",
    ]);
    let mut explanations = Vec::new();
    for (point, name) in chart.points.iter().zip(&periods) {
        let rules: Vec<String> = point
            .signals
            .iter()
            .map(|s| s.rule_number.to_string())
            .collect();
        for signal in &point.signals {
            explanations.push(format!(
                "{} {name}: rule {}: {}",
                args.period_word, signal.rule_number, signal.explanation
            ));
        }
        let denominator = match per {
            Some(per) => point.denominator * per,
            None => point.denominator,
        };
        points.row(vec![
            name.clone(),
            point.numerator.to_string(),
            amount(denominator),
            num(point.value),
            num(point.lower),
            num(point.upper),
            if rules.is_empty() {
                "-".to_string()
            } else {
                rules.join(",")
            },
        ]);
    }
    text.push_str(&points.render());
    text.push('\n');
    if explanations.is_empty() {
        text.push_str("no special-cause signals\n");
    } else {
        for line in explanations {
            text.push_str(&line);
            text.push('\n');
        }
    }
    let results = json!({
        "periods": periods,
        // On a u-chart the library's denominators are the exposure divided by `per`, so that
        // values and limits are rates per `per` units.
        "denominator_scale": per.map_or(1.0, |per| 1.0 / per),
        "chart": to_json(&chart),
    });
    let settings = json!({
        "columns": {
            "count": args.count,
            "exposure": args.exposure,
            "period": args.period,
        },
        "kind": to_json(&chart.kind),
        "laney": args.laney,
        "per": per,
        "baseline_periods": args.baseline,
        "sigma": args.sigma,
    });
    Ok(Report::new(
        "control-chart",
        &table,
        settings,
        results,
        text,
    ))
}
