//! `kcohort stats risk-ratio`: from one row per subject, the crude risk ratio, risk difference
//! (Wald and Newcombe) and odds ratio, and with strata the Mantel–Haenszel pooled ratios, their
//! homogeneity tests and the stratum-specific estimates.

use super::InputArgs;
use super::grouping::Grouping;
use super::report::{Outcome, Report, TextTable, ci_label, interval, num, p_value, to_json};
use anyhow::{Context, bail};
use clap::{Args, ValueEnum};
use kcohort_stats::mantel_haenszel::{self, HomogeneityMethod, PooledRatio};
use kcohort_stats::proportion::{ProportionMethod, proportion};
use kcohort_stats::risk_ratio::{
    RatioEstimate, RiskDifference, RiskDifferenceMethod, TwoByTwo, ZeroCellCorrection, odds_ratio,
    risk_difference, risk_ratio,
};
use kcohort_stats::{ConfidenceLevel, StatsError};
use serde::Serialize;
use serde_json::json;

#[derive(Debug, Args)]
pub struct RiskRatioArgs {
    /// Column with each subject's exposure: 1 (or true) exposed, 0 (or false) unexposed.
    #[arg(long, value_name = "COL")]
    pub exposure: String,
    /// Column with each subject's outcome: 1 (or true) a case, 0 (or false) not.
    #[arg(long, value_name = "COL")]
    pub outcome: String,
    /// Column naming each subject's stratum (e.g. age band): adds Mantel–Haenszel pooled ratios,
    /// homogeneity tests and the estimates of each stratum.
    #[arg(long, value_name = "COL")]
    pub strata: Option<String>,
    /// What to do when a cell the risk or odds ratio divides by is 0: report it as not
    /// estimable, or add 0.5 to all four cells (Haldane). The risk difference and the
    /// Mantel–Haenszel ratios never need it.
    #[arg(long, value_enum, default_value_t = ZeroCells::None)]
    pub zero_cells: ZeroCells,
    #[command(flatten)]
    pub input: InputArgs,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ZeroCells {
    /// Report a ratio with a needed zero cell as not estimable.
    None,
    /// Add 0.5 to every cell of a table with a zero cell.
    Haldane,
}

/// The estimates of one 2×2 table.
#[derive(Debug, Serialize)]
struct TableEstimates {
    table: TwoByTwo,
    risk_ratio: Outcome<RatioEstimate>,
    risk_difference_wald: Outcome<RiskDifference>,
    risk_difference_newcombe: Outcome<RiskDifference>,
    odds_ratio: Outcome<RatioEstimate>,
}

fn estimates(
    table: &TwoByTwo,
    zero_cells: ZeroCellCorrection,
    level: ConfidenceLevel,
) -> Result<TableEstimates, StatsError> {
    let lacking = match (table.exposed_total, table.unexposed_total) {
        (0, _) => Some("no exposed subjects, so no ratio or difference"),
        (_, 0) => Some("no unexposed subjects, so no ratio or difference"),
        _ => None,
    };
    if let Some(reason) = lacking {
        return Ok(TableEstimates {
            table: *table,
            risk_ratio: not_estimable(reason),
            risk_difference_wald: not_estimable(reason),
            risk_difference_newcombe: not_estimable(reason),
            odds_ratio: not_estimable(reason),
        });
    }
    Ok(TableEstimates {
        table: *table,
        risk_ratio: Outcome::from_result(risk_ratio(table, zero_cells, level))?,
        risk_difference_wald: Outcome::from_result(risk_difference(
            table,
            RiskDifferenceMethod::Wald,
            level,
        ))?,
        risk_difference_newcombe: Outcome::from_result(risk_difference(
            table,
            RiskDifferenceMethod::NewcombeHybridScore,
            level,
        ))?,
        odds_ratio: Outcome::from_result(odds_ratio(table, zero_cells, level))?,
    })
}

fn not_estimable<T>(reason: &str) -> Outcome<T> {
    Outcome::NotEstimable {
        not_estimable: reason.to_string(),
    }
}

fn two_by_two(exposed: &[bool], cases: &[bool], rows: &[usize]) -> Result<TwoByTwo, StatsError> {
    let (mut a, mut n1, mut c, mut n0) = (0, 0, 0, 0);
    for &row in rows {
        let case = u64::from(cases[row]);
        if exposed[row] {
            n1 += 1;
            a += case;
        } else {
            n0 += 1;
            c += case;
        }
    }
    TwoByTwo::new(a, n1, c, n0)
}

fn ratio_cells<T>(outcome: &Outcome<T>, get: impl Fn(&T) -> (f64, String)) -> [String; 2] {
    match outcome.estimated() {
        Some(value) => {
            let (estimate, interval) = get(value);
            [num(estimate), interval]
        }
        None => ["not estimable".to_string(), String::new()],
    }
}

pub fn run(args: &RiskRatioArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    let zero_cells = match args.zero_cells {
        ZeroCells::None => ZeroCellCorrection::None,
        ZeroCells::Haldane => ZeroCellCorrection::Haldane,
    };
    let mut columns = vec![args.exposure.as_str(), args.outcome.as_str()];
    columns.extend(args.strata.as_deref());
    let table = args.input.read(&columns)?;
    let exposed = table.flags(&args.exposure)?;
    let cases = table.flags(&args.outcome)?;
    let all_rows: Vec<usize> = (0..table.len()).collect();
    let crude = two_by_two(&exposed, &cases, &all_rows)?;
    if crude.exposed_total == 0 || crude.unexposed_total == 0 {
        bail!(
            "column `{}` has only {} subjects; a risk ratio compares exposed (1) with unexposed (0)",
            args.exposure,
            if crude.exposed_total == 0 {
                "unexposed (0)"
            } else {
                "exposed (1)"
            }
        );
    }
    let crude_estimates = estimates(&crude, zero_cells, level).context("crude estimates")?;
    let risks = [
        proportion(
            crude.exposed_cases,
            crude.exposed_total,
            ProportionMethod::Wilson,
            level,
        )?,
        proportion(
            crude.unexposed_cases,
            crude.unexposed_total,
            ProportionMethod::Wilson,
            level,
        )?,
    ];
    let ci = ci_label(level.value());

    let mut text = format!(
        "Risk ratio, risk difference and odds ratio: exposure `{}`, outcome `{}`\n\n",
        args.exposure, args.outcome
    );
    let mut risk_table =
        TextTable::new(&["group", "cases", "total", "risk", &format!("{ci} (Wilson)")]);
    for (name, risk) in ["exposed", "unexposed"].iter().zip(&risks) {
        risk_table.row(vec![
            name.to_string(),
            risk.events.to_string(),
            risk.total.to_string(),
            num(risk.estimate),
            interval(&risk.interval),
        ]);
    }
    text.push_str(&risk_table.render());
    text.push('\n');
    let mut measures = TextTable::new(&["crude measure", "estimate", &ci]);
    let ratio = |r: &RatioEstimate| (r.estimate, interval(&r.interval));
    let difference = |r: &RiskDifference| (r.estimate, interval(&r.interval));
    for (name, cells) in [
        (
            "risk ratio (Katz log)",
            ratio_cells(&crude_estimates.risk_ratio, ratio),
        ),
        (
            "risk difference (Wald)",
            ratio_cells(&crude_estimates.risk_difference_wald, difference),
        ),
        (
            "risk difference (Newcombe hybrid score)",
            ratio_cells(&crude_estimates.risk_difference_newcombe, difference),
        ),
        (
            "odds ratio (Woolf logit)",
            ratio_cells(&crude_estimates.odds_ratio, ratio),
        ),
    ] {
        let [estimate, interval] = cells;
        measures.row(vec![name.to_string(), estimate, interval]);
    }
    text.push_str(&measures.render());
    let mut notes = not_estimable_notes("crude", &crude_estimates);

    let mut stratified = serde_json::Value::Null;
    if let Some(strata_column) = &args.strata {
        let grouping = Grouping::new(&table.labels(strata_column)?);
        let tables: Vec<TwoByTwo> = grouping
            .rows()
            .iter()
            .map(|rows| two_by_two(&exposed, &cases, rows))
            .collect::<Result<_, _>>()?;
        let mut per_stratum = Vec::new();
        let mut stratum_table = TextTable::new(&[
            "stratum",
            "exposed cases/total",
            "unexposed cases/total",
            "risk ratio",
            &ci,
            "odds ratio",
            &ci,
            "risk difference",
            &format!("{ci} (Newcombe)"),
        ]);
        for (name, stratum) in grouping.levels.iter().zip(&tables) {
            let e = estimates(stratum, zero_cells, level)
                .with_context(|| format!("stratum `{name}`"))?;
            let [rr, rr_ci] = ratio_cells(&e.risk_ratio, ratio);
            let [or, or_ci] = ratio_cells(&e.odds_ratio, ratio);
            let [rd, rd_ci] = ratio_cells(&e.risk_difference_newcombe, difference);
            stratum_table.row(vec![
                name.clone(),
                format!("{}/{}", stratum.exposed_cases, stratum.exposed_total),
                format!("{}/{}", stratum.unexposed_cases, stratum.unexposed_total),
                rr,
                rr_ci,
                or,
                or_ci,
                rd,
                rd_ci,
            ]);
            notes.extend(not_estimable_notes(&format!("stratum `{name}`"), &e));
            per_stratum.push(json!({ "stratum": name, "estimates": to_json(&e) }));
        }
        let pooled_rr = Outcome::from_result(mantel_haenszel::risk_ratio(&tables, level))
            .context("Mantel–Haenszel risk ratio")?;
        let pooled_or = Outcome::from_result(mantel_haenszel::odds_ratio(&tables, level))
            .context("Mantel–Haenszel odds ratio")?;
        text.push_str(&format!("\nBy stratum of `{strata_column}`\n"));
        text.push_str(&stratum_table.render());
        text.push('\n');
        let mut pooled_table = TextTable::new(&[
            "Mantel–Haenszel pooled",
            "estimate",
            &ci,
            "homogeneity test",
            "chi-square",
            "df",
            "p-value",
        ]);
        for (name, pooled) in [("risk ratio", &pooled_rr), ("odds ratio", &pooled_or)] {
            pooled_table.row(pooled_row(name, pooled));
            if let Outcome::NotEstimable { not_estimable } = pooled {
                notes.push(format!("pooled {name} not estimable: {not_estimable}"));
            }
        }
        text.push_str(&pooled_table.render());
        stratified = json!({
            "strata_column": strata_column,
            "mantel_haenszel_risk_ratio": to_json(&pooled_rr),
            "mantel_haenszel_odds_ratio": to_json(&pooled_or),
            "strata": per_stratum,
        });
    }
    if zero_cells == ZeroCellCorrection::None && notes.iter().any(|n| n.contains("cell is 0")) {
        notes.push(
            "hint: --zero-cells haldane adds 0.5 to every cell of a table with a zero cell"
                .to_string(),
        );
    }
    if !notes.is_empty() {
        text.push('\n');
        for note in &notes {
            text.push_str(note);
            text.push('\n');
        }
    }
    let results = json!({
        "risk_exposed": to_json(&risks[0]),
        "risk_unexposed": to_json(&risks[1]),
        "crude": to_json(&crude_estimates),
        "stratified": stratified,
    });
    let settings = json!({
        "columns": {
            "exposure": args.exposure,
            "outcome": args.outcome,
            "strata": args.strata,
        },
        "zero_cells": to_json(&zero_cells),
        "level": level.value(),
    });
    Ok(Report::new("risk-ratio", &table, settings, results, text))
}

fn pooled_row(name: &str, pooled: &Outcome<PooledRatio>) -> Vec<String> {
    let Some(p) = pooled.estimated() else {
        return vec![
            name.to_string(),
            "not estimable".to_string(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
        ];
    };
    let (test, chi_square, df, p_text) = match &p.homogeneity {
        Some(h) => (
            match h.method {
                HomogeneityMethod::WoolfLogRatio => "Woolf (log ratios)",
                HomogeneityMethod::BreslowDay => "Breslow–Day",
                HomogeneityMethod::BreslowDayTarone => "Breslow–Day (Tarone)",
            },
            num(h.chi_square),
            h.degrees_of_freedom.to_string(),
            p_value(h.p_value),
        ),
        None => (
            "none (fewer than 2 usable strata)",
            String::new(),
            String::new(),
            String::new(),
        ),
    };
    vec![
        name.to_string(),
        num(p.estimate),
        interval(&p.interval),
        test.to_string(),
        chi_square,
        df,
        p_text,
    ]
}

/// One line per distinct reason an estimate of `e` is missing, and one when 0.5 was added to cells.
fn not_estimable_notes(place: &str, e: &TableEstimates) -> Vec<String> {
    let mut notes: Vec<String> = Vec::new();
    let reasons = [
        e.risk_ratio.reason(),
        e.odds_ratio.reason(),
        e.risk_difference_wald.reason(),
        e.risk_difference_newcombe.reason(),
    ];
    for reason in reasons.into_iter().flatten() {
        let note = format!("{place}: {reason}");
        if !notes.contains(&note) {
            notes.push(note);
        }
    }
    let corrected = [&e.risk_ratio, &e.odds_ratio]
        .iter()
        .any(|r| r.estimated().is_some_and(|r| r.zero_cell_corrected));
    if corrected {
        notes.push(format!(
            "{place}: 0.5 added to every cell for the risk and odds ratio (--zero-cells haldane)"
        ));
    }
    notes
}
