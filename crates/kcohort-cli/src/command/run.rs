//! `kcohort run`: ingest an extract, derive the definitions and write the monthly report, in one
//! go. Each step is the command of the same name; a step with nothing new to do says so.

use super::derive::DeriveArgs;
use super::ingest::{ExtractSettings, IngestArgs};
use super::report::{ReportSettings, write_report};
use anyhow::Context;
use clap::Args;
use kcohort_model::study::Study;
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct RunArgs {
    /// Extract folder (patients, encounters, lab_results, medication_events, diagnoses).
    #[arg(long)]
    pub extract: PathBuf,
    /// Store folder to create or update.
    #[arg(long)]
    pub store: PathBuf,
    #[command(flatten)]
    pub settings: ExtractSettings,
    /// Study file (TOML); default: the defaults of `kcohort init-study`.
    #[arg(long)]
    pub study: Option<PathBuf>,
    #[command(flatten)]
    pub report: ReportSettings,
}

pub fn run(args: RunArgs) -> anyhow::Result<()> {
    eprintln!(
        "step 1 of 3: ingest {} into {}",
        args.extract.display(),
        args.store.display()
    );
    super::ingest::run(IngestArgs {
        extract_dir: args.extract.clone(),
        store: args.store.clone(),
        settings: args.settings.clone(),
        append: false,
        replace: false,
    })?;
    eprintln!("step 2 of 3: derive the definitions");
    super::derive::run(DeriveArgs {
        store: args.store.clone(),
        study: args.study.clone(),
        memory_limit: "2GiB".into(),
        spill_dir: None,
    })?;
    eprintln!("step 3 of 3: the monthly report");
    let study = match &args.study {
        Some(p) => Study::from_toml(
            &std::fs::read_to_string(p).with_context(|| format!("cannot read {}", p.display()))?,
        )
        .with_context(|| format!("study file {}", p.display()))?,
        None => Study::default(),
    };
    let out = write_report(&args.store, &args.report, &study)?;
    println!("report: {}", out.join("index.html").display());
    Ok(())
}
