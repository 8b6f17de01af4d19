use crate::progress_bar::TableProgress;
use crate::summary;
use anyhow::Context;
use clap::Args;
use kcohort_ingest::{CommitStep, FailPoint, IngestOptions, Mode};
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct IngestArgs {
    /// Folder with patients, encounters, lab_results, medication_events (and optionally
    /// diagnoses) as .csv or .parquet files.
    pub extract_dir: PathBuf,
    /// Store folder to create or update.
    #[arg(long)]
    pub store: PathBuf,
    #[command(flatten)]
    pub settings: ExtractSettings,
    /// Add this extract to the store; stored rows with the same id are replaced by its version.
    #[arg(long, conflicts_with = "replace")]
    pub append: bool,
    /// Rebuild the store from this extract alone.
    #[arg(long)]
    pub replace: bool,
}

/// Settings that say how to read an extract (shared with `kcohort run`).
#[derive(Debug, Args, Clone)]
pub struct ExtractSettings {
    /// Time zone of zoneless input times: an IANA name (Europe/Berlin) or a fixed offset (+01:00).
    #[arg(long, default_value = "UTC")]
    pub site_timezone: String,
    /// When the data were pulled (e.g. 2026-01-03T00:00); start times after it are rejected.
    /// Default: the latest timestamp in the extract.
    #[arg(long)]
    pub extract_end: Option<String>,
}

pub fn run(args: IngestArgs) -> anyhow::Result<()> {
    let mode = match (args.append, args.replace) {
        (true, _) => Mode::Append,
        (_, true) => Mode::Replace,
        _ => Mode::New,
    };
    let options = IngestOptions {
        site_timezone: args.settings.site_timezone.clone(),
        extract_end: args.settings.extract_end.clone(),
        mode,
        fail_point: fail_point_from_env()?,
    };
    let progress = TableProgress::new();
    let outcome = kcohort_ingest::ingest(&args.extract_dir, &args.store, &options, &progress)
        .with_context(|| {
            format!(
                "ingest of {} into {} failed; the store is unchanged",
                args.extract_dir.display(),
                args.store.display()
            )
        })?;
    print!(
        "{}",
        summary::render(&outcome.manifest, &outcome.record, outcome.unchanged)
    );
    eprintln!("store: {}", args.store.display());
    Ok(())
}

/// `KCOHORT_FAIL_AT=<step>[:abort]` stops a commit at a step (crash-safety tests only).
fn fail_point_from_env() -> anyhow::Result<Option<FailPoint>> {
    let Ok(value) = std::env::var("KCOHORT_FAIL_AT") else {
        return Ok(None);
    };
    let (step, abort) = match value.split_once(':') {
        Some((s, "abort")) => (s, true),
        _ => (value.as_str(), false),
    };
    let step = CommitStep::parse(step).with_context(|| {
        let names: Vec<&str> = CommitStep::ALL.iter().map(|s| s.name()).collect();
        format!(
            "KCOHORT_FAIL_AT={value}: expected one of {}",
            names.join(", ")
        )
    })?;
    Ok(Some(FailPoint { step, abort }))
}
