//! The commands of `kcohort` and their arguments.

mod bench;
mod causes;
mod compare;
mod compare_view;
pub mod derive;
mod ingest;
mod init_study;
mod listing;
pub mod report;
mod run;
pub mod sql;
mod stats;
mod study_file;
mod synth;
mod tables;

use clap::{Parser, Subcommand};

#[derive(Debug, Parser)]
#[command(
    name = "kcohort",
    version,
    about = "High-potassium episodes from de-identified hospital lab and medication tables",
    long_about = "kcohort turns de-identified hospital lab and medication extracts into counts, rates and \
cohorts of high-potassium (hyperkalemia) episodes. Its output supports quality improvement and research; \
it is not for decisions about individual patients, and it defers to local policy and licensed practice."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Check every row of an extract and write it into a Parquet store (rejects kept with reasons).
    Ingest(ingest::IngestArgs),
    /// Write the default study file (every parameter with its default and a comment).
    InitStudy(init_study::InitStudyArgs),
    /// Run the SQL definitions over a store: episodes and the other derived tables.
    Derive(derive::DeriveArgs),
    /// Write a synthetic extract of the fictional Larkmoor Health network, with planted truths.
    Synth(synth::SynthArgs),
    /// Print speed and memory figures (rows/s, peak RSS) for the benchmarks.
    Bench(bench::BenchArgs),
    /// Write the monthly quality report of a derived store (HTML, JSON, CSV and Parquet tables).
    Report(report::ReportArgs),
    /// Ingest, derive and report in one go: the monthly job on a new extract.
    Run(run::RunArgs),
    /// Compare new users of a drug class with new users of a comparator class: risks, ratios, Cox.
    Compare(compare::CompareArgs),
    /// Causes of confirmed episodes (shares) with new-user risk ratios per drug class (HTML, CSV).
    Causes(causes::CausesArgs),
    /// The drug-linked event listing of a drug-safety committee for one suspect class (HTML, CSV).
    Listing(listing::ListingArgs),
    /// Run one read-only SQL query over a store's tables and derived tables.
    Sql(sql::SqlArgs),
    /// List the tables of a store a query can name, with their columns and descriptions.
    Tables(tables::TablesArgs),
    /// Statistics on any table of your own (CSV or Parquet): proportions, rates, ratios, survival, Cox, charts.
    Stats(stats::StatsArgs),
}

pub fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Ingest(args) => ingest::run(args),
        Command::InitStudy(args) => init_study::run(args),
        Command::Derive(args) => derive::run(args),
        Command::Sql(args) => sql::run(args),
        Command::Compare(args) => compare::run(args),
        Command::Tables(args) => tables::run(args),
        Command::Listing(args) => listing::run(args),
        Command::Causes(args) => causes::run(args),
        Command::Report(args) => report::run(args),
        Command::Run(args) => run::run(args),
        Command::Stats(args) => stats::run(args),
        Command::Synth(args) => synth::run(args),
        Command::Bench(args) => bench::run(args),
    }
}
