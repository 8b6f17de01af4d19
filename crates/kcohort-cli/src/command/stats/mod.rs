//! `kcohort stats`: the statistics of kcohort-stats on a researcher's own table.
//!
//! Each subcommand reads the columns it names from one CSV or Parquet file
//! ([`table_input`]), turns them into the plain slices and structs kcohort-stats takes, and prints
//! the result as a text table or as JSON ([`report`]). Data go to stdout; notes (rows dropped) go
//! to stderr.

mod control_chart;
mod cox;
mod cumulative_incidence;
mod follow_up;
mod funnel;
mod grouping;
mod kaplan_meier;
mod proportion;
mod rate;
mod rate_ratio;
mod report;
mod risk_ratio;
mod standardize;
mod table_input;

use anyhow::Context;
use clap::{Args, Subcommand};
use kcohort_stats::ConfidenceLevel;
use report::Format;
use std::path::PathBuf;
use table_input::Table;

#[derive(Debug, Args)]
#[command(
    after_long_help = "Each subcommand reads the columns you name from one CSV file (header row, \
UTF-8) or Parquet file and prints estimates with confidence intervals and tests, as a text table or as \
JSON (--format json). A missing value (empty cell, NA, or Parquet null) in a used column is an error \
naming its line, unless --drop-missing is given."
)]
pub struct StatsArgs {
    #[command(subcommand)]
    pub command: StatsCommand,
}

#[derive(Debug, Subcommand)]
pub enum StatsCommand {
    /// Proportion x/n with a Wilson score or Clopper–Pearson exact interval, overall or by group.
    Proportion(proportion::ProportionArgs),
    /// Event rate per person-time with the exact Poisson (Garwood) interval, overall or by group.
    Rate(rate::RateArgs),
    /// Rate ratio (Wald-log and exact conditional) and rate difference of each group vs a reference.
    RateRatio(rate_ratio::RateRatioArgs),
    /// Risk ratio, risk difference and odds ratio from one row per subject; Mantel–Haenszel over strata.
    RiskRatio(risk_ratio::RiskRatioArgs),
    /// Kaplan–Meier survival with medians and intervals; the log-rank test when grouped.
    Km(kaplan_meier::KaplanMeierArgs),
    /// Cumulative incidence of competing events (Aalen–Johansen); Gray's test when grouped.
    Cif(cumulative_incidence::CumulativeIncidenceArgs),
    /// Cox proportional-hazards regression (Efron or Breslow ties, strata, late entry, clusters).
    Cox(cox::CoxArgs),
    /// Shewhart p- or u-chart (optionally Laney p′/u′) with run-rule signals, one row per period.
    ControlChart(control_chart::ControlChartArgs),
    /// Funnel-plot limits for comparing units (wards, hospitals) against a target, one row per unit.
    Funnel(funnel::FunnelArgs),
    /// Directly standardised rate (e.g. by age band) with a Fay–Feuer or Dobson interval.
    Standardize(standardize::StandardizeArgs),
}

/// The input options every subcommand takes.
#[derive(Debug, Args)]
pub struct InputArgs {
    /// Table to read: a .csv file with a header row (UTF-8) or a .parquet file.
    #[arg(long, value_name = "FILE")]
    pub input: PathBuf,
    /// Output: a text table for reading, or JSON with every number as a number.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    pub format: Format,
    /// Confidence level of the intervals, strictly between 0 and 1.
    #[arg(long, default_value_t = 0.95, value_name = "LEVEL")]
    pub level: f64,
    /// Leave out rows with a missing value in a used column, and say on stderr how many were left
    /// out. Without it, a missing value is an error naming its line.
    #[arg(long)]
    pub drop_missing: bool,
}

impl InputArgs {
    pub fn level(&self) -> anyhow::Result<ConfidenceLevel> {
        ConfidenceLevel::new(self.level).context("--level")
    }

    /// Reads the named columns of the input file.
    pub fn read(&self, columns: &[&str]) -> anyhow::Result<Table> {
        table_input::read(&self.input, columns, self.drop_missing)
    }
}

pub fn run(args: StatsArgs) -> anyhow::Result<()> {
    let (report, format) = match &args.command {
        StatsCommand::Proportion(a) => (proportion::run(a)?, a.input.format),
        StatsCommand::Rate(a) => (rate::run(a)?, a.input.format),
        StatsCommand::RateRatio(a) => (rate_ratio::run(a)?, a.input.format),
        StatsCommand::RiskRatio(a) => (risk_ratio::run(a)?, a.input.format),
        StatsCommand::Km(a) => (kaplan_meier::run(a)?, a.input.format),
        StatsCommand::Cif(a) => (cumulative_incidence::run(a)?, a.input.format),
        StatsCommand::Cox(a) => (cox::run(a)?, a.input.format),
        StatsCommand::ControlChart(a) => (control_chart::run(a)?, a.input.format),
        StatsCommand::Funnel(a) => (funnel::run(a)?, a.input.format),
        StatsCommand::Standardize(a) => (standardize::run(a)?, a.input.format),
    };
    if let Some(note) = &report.note {
        eprintln!("{note}");
    }
    let mut stdout = std::io::BufWriter::new(std::io::stdout().lock());
    match report.write(format, &mut stdout) {
        // A reader that stops early (`| head`) has all it wanted.
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        other => other.context("cannot write the output to stdout"),
    }
}
