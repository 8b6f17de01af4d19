//! `kcohort stats funnel`: funnel-plot limits for comparing units against a target
//! (Spiegelhalter 2005), with the over-dispersion estimate and each unit's place on the funnel.

use super::InputArgs;
use super::report::{Report, TextTable, amount, interval, num, per_label, percent, to_json};
use anyhow::{Context, bail};
use clap::{Args, ValueEnum};
use kcohort_stats::ConfidenceLevel;
use kcohort_stats::funnel::{
    Dispersion, FunnelClass, FunnelOptions, proportion_funnel, rate_funnel, ratio_funnel,
};
use serde_json::json;
use std::collections::HashMap;

#[derive(Debug, Args)]
#[command(
    after_long_help = "Funnel-plot limits (Spiegelhalter, Stat Med 2005;24:1185) for comparing units such as \
wards or hospitals with a target, one row per unit. proportion: --count cases of --exposure people; \
rate: --count events over --exposure person-time, per --per units; ratio: --count observed over \
--exposure expected (e.g. standardised mortality ratios, target 1). Inner limits at --level (0.95), \
outer limits at --outer-level (0.998)."
)]
pub struct FunnelArgs {
    /// Column with each unit's numerator (cases, events, observed).
    #[arg(long, value_name = "COL")]
    pub count: String,
    /// Column with each unit's denominator: people, person-time or expected count.
    #[arg(long, value_name = "COL")]
    pub exposure: String,
    /// Column naming each unit (one row per unit).
    #[arg(long, value_name = "COL")]
    pub unit: String,
    /// What is compared.
    #[arg(long, value_enum, default_value_t = Kind::Proportion)]
    pub kind: Kind,
    /// The target: a proportion, a rate per --per units, or (ratio) 1. Default: pooled over units.
    #[arg(long, value_name = "VALUE")]
    pub target: Option<f64>,
    /// Rate funnels only: rates per this many units of person-time (default 1000).
    #[arg(long, value_name = "UNITS")]
    pub per: Option<f64>,
    /// Level of the outer limits.
    #[arg(long, default_value_t = 0.998, value_name = "LEVEL")]
    pub outer_level: f64,
    /// Widen the limits when the units are over-dispersed: by a factor (multiplicative) or a
    /// random-effects variance (additive).
    #[arg(long, value_enum, default_value_t = DispersionArg::None)]
    pub dispersion: DispersionArg,
    #[command(flatten)]
    pub input: InputArgs,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Kind {
    /// Proportions x/n.
    Proportion,
    /// Rates per person-time.
    Rate,
    /// Observed over expected counts.
    Ratio,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum DispersionArg {
    /// Exact limits, no adjustment.
    None,
    /// Multiplicative over-dispersion factor φ.
    Multiplicative,
    /// Additive random-effects variance τ².
    Additive,
}

pub fn run(args: &FunnelArgs) -> anyhow::Result<Report> {
    let inner = args.input.level()?;
    let outer = ConfidenceLevel::new(args.outer_level).context("--outer-level")?;
    if outer.value() <= inner.value() {
        bail!(
            "--outer-level {} must be above --level {}",
            outer.value(),
            inner.value()
        );
    }
    let table = args
        .input
        .read(&[&args.unit, &args.count, &args.exposure])?;
    let units = table.labels(&args.unit)?;
    let mut first_row: HashMap<&str, usize> = HashMap::new();
    for (row, unit) in units.iter().enumerate() {
        if let Some(&earlier) = first_row.get(unit.as_str()) {
            bail!(
                "{} {}, column `{}`: unit `{unit}` was already given on {}\nhint: give one row per unit",
                table.file(),
                table.place(row),
                args.unit,
                table.place(earlier)
            );
        }
        first_row.insert(unit, row);
    }
    let counts = table.counts(&args.count)?;
    let options = FunnelOptions {
        inner,
        outer,
        dispersion: match args.dispersion {
            DispersionArg::None => Dispersion::None,
            DispersionArg::Multiplicative => Dispersion::Multiplicative,
            DispersionArg::Additive => Dispersion::Additive,
        },
    };
    if args.per.is_some() && args.kind != Kind::Rate {
        bail!("--per applies to rate funnels (--kind rate)");
    }
    let (funnel, value_label, per) = match args.kind {
        Kind::Proportion => {
            let totals = table.counts(&args.exposure)?;
            (
                proportion_funnel(&counts, &totals, args.target, &options),
                "proportion".to_string(),
                None,
            )
        }
        Kind::Rate => {
            let per = args.per.unwrap_or(1000.0);
            if !(per.is_finite() && per > 0.0) {
                bail!("--per: expected a number greater than 0, e.g. 1000, found {per}");
            }
            let time: Vec<f64> = table
                .positive_numbers(&args.exposure)?
                .into_iter()
                .map(|t| t / per)
                .collect();
            (
                rate_funnel(&counts, &time, args.target, &options),
                per_label(per),
                Some(per),
            )
        }
        Kind::Ratio => {
            if args.target.is_some() {
                bail!("--target does not apply to ratio funnels, whose target is 1");
            }
            let expected = table.positive_numbers(&args.exposure)?;
            (
                ratio_funnel(&counts, &expected, &options),
                "observed/expected".to_string(),
                None,
            )
        }
    };
    let funnel = funnel.context("funnel limits")?;
    let mut text = format!(
        "Funnel plot of {value_label} against target {} ({})\n\n",
        num(funnel.target),
        if args.target.is_some() || args.kind == Kind::Ratio {
            "given"
        } else {
            "pooled over units"
        }
    );
    text.push_str(&format!(
        "over-dispersion phi: {} (threshold {}): {}\n\n",
        num(funnel.phi),
        num(funnel.phi_threshold),
        match (funnel.overdispersed, funnel.adjustment_applied) {
            (false, _) => "not over-dispersed, exact limits",
            (true, true) => "over-dispersed, limits widened as asked",
            (true, false) => {
                "over-dispersed; exact limits kept (see --dispersion multiplicative|additive)"
            }
        }
    ));
    let inner_label = format!("{} limits", percent(inner.value()));
    let outer_label = format!("{} limits", percent(outer.value()));
    let mut rows = TextTable::new(&[
        "unit",
        "count",
        "denominator",
        &value_label,
        "z",
        &inner_label,
        &outer_label,
        "position",
    ]);
    for (unit, name) in funnel.units.iter().zip(&units) {
        let denominator = match per {
            Some(per) => unit.denominator * per,
            None => unit.denominator,
        };
        rows.row(vec![
            name.clone(),
            unit.numerator.to_string(),
            amount(denominator),
            num(unit.value),
            num(unit.z_adjusted),
            interval(&unit.inner),
            interval(&unit.outer),
            match unit.class {
                FunnelClass::Within => "within",
                FunnelClass::AboveInner => "above inner",
                FunnelClass::BelowInner => "below inner",
                FunnelClass::AboveOuter => "above outer",
                FunnelClass::BelowOuter => "below outer",
            }
            .to_string(),
        ]);
    }
    text.push_str(&rows.render());
    let results = json!({
        "units": units,
        // On a rate funnel the library's denominators are the person-time divided by `per`, so
        // that values, target and limits are rates per `per` units.
        "denominator_scale": per.map_or(1.0, |per| 1.0 / per),
        "funnel": to_json(&funnel),
    });
    let settings = json!({
        "columns": {
            "count": args.count,
            "exposure": args.exposure,
            "unit": args.unit,
        },
        "kind": to_json(&funnel.measure),
        "target": args.target,
        "per": per,
        "level": inner.value(),
        "outer_level": outer.value(),
        "dispersion": to_json(&options.dispersion),
    });
    Ok(Report::new("funnel", &table, settings, results, text))
}
