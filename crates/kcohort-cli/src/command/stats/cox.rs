//! `kcohort stats cox`: Cox proportional-hazards regression with Efron or Breslow ties, optional
//! strata, late entry and a robust variance for clustered rows.

use super::InputArgs;
use super::follow_up::follow_up;
use super::grouping::Grouping;
use super::report::{Report, TextTable, interval, num, p_value, to_json};
use anyhow::{Context, anyhow, bail};
use clap::{Args, ValueEnum};
use kcohort_stats::cox::{self, ChiSquareTest, CoxData, CoxOptions, Ties};
use serde_json::json;

#[derive(Debug, Args)]
#[command(
    after_long_help = "Cox proportional-hazards regression, as R's coxph: Efron ties by default, one baseline \
hazard per --strata level, rows as (entry, time] intervals with --entry (late entry, time-varying \
covariates), and with --cluster the robust (sandwich) variance, whose standard errors are then used \
for z, p-values and intervals. Covariates are numeric columns; a column also named in --categorical \
is one-hot encoded against its first level (in numeric order when every level is a number, \
otherwise in text order), giving one covariate `column=level` per other level."
)]
pub struct CoxArgs {
    /// Column with the time of the event or of censoring.
    #[arg(long, value_name = "COL")]
    pub time: String,
    /// Column with 1 (or true) for an event at that time, 0 (or false) for censoring.
    #[arg(long, value_name = "COL")]
    pub event: String,
    /// Column with the time each row enters the risk set (late entry); default: at risk from the start.
    #[arg(long, value_name = "COL")]
    pub entry: Option<String>,
    /// How tied event times enter the partial likelihood.
    #[arg(long, value_enum, default_value_t = TiesArg::Efron)]
    pub ties: TiesArg,
    /// Column naming each row's stratum (a separate baseline hazard per stratum).
    #[arg(long, value_name = "COL")]
    pub strata: Option<String>,
    /// Column with a cluster id (e.g. patient) for the robust variance.
    #[arg(long, value_name = "COL")]
    pub cluster: Option<String>,
    /// Covariates to one-hot encode against their first level, e.g. a text column `ward`: one
    /// covariate `ward=level` per other level (each must also be listed as a COVARIATE).
    #[arg(long, value_name = "COL", value_delimiter = ',')]
    pub categorical: Vec<String>,
    /// Covariate columns: numbers, or any values for a column named in --categorical.
    #[arg(value_name = "COVARIATE", required = true)]
    pub covariates: Vec<String>,
    #[command(flatten)]
    pub input: InputArgs,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum TiesArg {
    /// Efron's approximation (R coxph's default).
    Efron,
    /// Breslow's approximation.
    Breslow,
}

pub fn run(args: &CoxArgs) -> anyhow::Result<Report> {
    let level = args.input.level()?;
    if let Some(c) = args
        .categorical
        .iter()
        .find(|c| !args.covariates.contains(c))
    {
        bail!("--categorical {c}: `{c}` is not among the covariates; list it as a COVARIATE too");
    }
    let mut columns = vec![args.time.as_str(), args.event.as_str()];
    columns.extend(args.entry.as_deref());
    columns.extend(args.strata.as_deref());
    columns.extend(args.cluster.as_deref());
    columns.extend(args.covariates.iter().map(String::as_str));
    let table = args.input.read(&columns)?;
    let data = follow_up(&table, &args.time, &args.event, args.entry.as_deref())?;

    // Design matrix, column by column, then laid out row-major.
    let mut names: Vec<String> = Vec::new();
    let mut design: Vec<Vec<f64>> = Vec::new();
    let mut encodings = Vec::new();
    for covariate in &args.covariates {
        if args.categorical.contains(covariate) {
            let grouping = Grouping::new(&table.labels(covariate)?);
            if grouping.levels.len() < 2 {
                bail!(
                    "categorical covariate `{covariate}` has a single level; it carries no information"
                );
            }
            for (level_index, level_name) in grouping.levels.iter().enumerate().skip(1) {
                names.push(format!("{covariate}={level_name}"));
                design.push(
                    grouping
                        .of_row
                        .iter()
                        .map(|&g| f64::from(u8::from(g == level_index)))
                        .collect(),
                );
            }
            encodings.push(json!({
                "covariate": covariate,
                "reference": grouping.levels[0],
                "levels": grouping.levels,
            }));
        } else {
            names.push(covariate.clone());
            design.push(table.numbers(covariate).map_err(|e| {
                anyhow!("{e}\nhint: name `{covariate}` in --categorical to one-hot encode a text covariate")
            })?);
        }
    }
    let p = names.len();
    let mut covariates = Vec::with_capacity(data.len() * p);
    for row in 0..data.len() {
        covariates.extend(design.iter().map(|column| column[row]));
    }
    let strata: Option<Vec<u32>> = match &args.strata {
        Some(column) => Some(
            Grouping::new(&table.labels(column)?)
                .of_row
                .into_iter()
                .map(|g| g as u32)
                .collect(),
        ),
        None => None,
    };
    let cluster: Option<Vec<u64>> = match &args.cluster {
        Some(column) => Some(
            Grouping::new(&table.labels(column)?)
                .of_row
                .into_iter()
                .map(|g| g as u64)
                .collect(),
        ),
        None => None,
    };
    let name_refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let model = CoxData {
        follow_up: &data,
        covariates: &covariates,
        names: &name_refs,
        strata: strata.as_deref(),
        cluster: cluster.as_deref(),
    };
    let options = CoxOptions {
        ties: match args.ties {
            TiesArg::Efron => Ties::Efron,
            TiesArg::Breslow => Ties::Breslow,
        },
        level,
        ..CoxOptions::default()
    };
    let fit = cox::fit(&model, &options).context("Cox model")?;

    let robust = fit.n_clusters.is_some();
    let ci = super::report::ci_label(level.value());
    let mut text = format!(
        "Cox proportional hazards: time `{}`, event `{}`, {} ties{}{}\n\n",
        args.time,
        args.event,
        match fit.ties {
            Ties::Efron => "Efron",
            Ties::Breslow => "Breslow",
        },
        args.strata
            .as_ref()
            .map_or(String::new(), |s| format!(", stratified by `{s}`")),
        args.cluster
            .as_ref()
            .map_or(String::new(), |c| format!(", robust variance by `{c}`"))
    );
    text.push_str(&format!(
        "{} rows, {} events, {} {}{}, {} iterations\n\n",
        fit.n_rows,
        fit.n_events,
        fit.n_strata,
        if fit.n_strata == 1 {
            "stratum"
        } else {
            "strata"
        },
        fit.n_clusters
            .map_or(String::new(), |c| format!(", {c} clusters")),
        fit.iterations
    ));
    let mut header = vec!["covariate", "coefficient", "std error"];
    if robust {
        header.push("robust std error");
    }
    let hazard_ci = format!("{ci} of hazard ratio");
    header.extend(["hazard ratio", &hazard_ci, "z", "p-value"]);
    let mut coefficients = TextTable::new(&header);
    for c in &fit.coefficients {
        let mut row = vec![c.name.clone(), num(c.coefficient), num(c.std_error)];
        if robust {
            row.push(c.robust_std_error.map_or("n/a".to_string(), num));
        }
        row.extend([
            num(c.hazard_ratio),
            interval(&c.hazard_ratio_interval),
            num(c.z),
            p_value(c.p_value),
        ]);
        coefficients.row(row);
    }
    text.push_str(&coefficients.render());
    text.push('\n');
    let mut tests = TextTable::new(&["test", "chi-square", "df", "p-value"]);
    let mut add = |name: &str, test: &ChiSquareTest| {
        tests.row(vec![
            name.to_string(),
            num(test.statistic),
            test.degrees_of_freedom.to_string(),
            p_value(test.p_value),
        ]);
    };
    add("likelihood ratio", &fit.likelihood_ratio);
    add("Wald", &fit.wald);
    add("score", &fit.score);
    if let Some(test) = &fit.robust_wald {
        add("robust Wald", test);
    }
    if let Some(test) = &fit.robust_score {
        add("robust score", test);
    }
    text.push_str(&tests.render());
    let results = json!({
        "categorical_encodings": encodings,
        "fit": to_json(&fit),
    });
    let settings = json!({
        "columns": {
            "time": args.time,
            "event": args.event,
            "entry": args.entry,
            "strata": args.strata,
            "cluster": args.cluster,
            "covariates": args.covariates,
            "categorical": args.categorical,
        },
        "ties": to_json(&fit.ties),
        "level": level.value(),
    });
    Ok(Report::new("cox", &table, settings, results, text))
}
