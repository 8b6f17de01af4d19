//! `kcohort synth`: write a synthetic extract of the fictional Larkmoor Health network.

use anyhow::Context;
use clap::Args;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct SynthArgs {
    /// Number of patients (streamed: a million fit in bounded memory).
    #[arg(long, default_value_t = 3_000)]
    pub patients: u64,
    /// Seed: the same seed and settings give byte-identical files.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Folder to write the tables and truth.json into (created if missing).
    #[arg(long)]
    pub out: PathBuf,
    /// JSON file overriding generator settings (field names as in truth.json's `config`).
    #[arg(long)]
    pub settings: Option<PathBuf>,
}

pub fn run(args: SynthArgs) -> anyhow::Result<()> {
    let mut config = match &args.settings {
        Some(path) => {
            let text = std::fs::read_to_string(path)
                .with_context(|| format!("cannot read {}", path.display()))?;
            serde_json::from_str(&text).with_context(|| {
                format!(
                    "{}: not valid generator settings (see the `config` object of a truth.json)",
                    path.display()
                )
            })?
        }
        None => kcohort_synth::SynthConfig::default(),
    };
    config.patients = args.patients;
    config.seed = args.seed;
    let truth = write(&config, &args.out)?;
    println!(
        "wrote {} patients of {} to {} (site time zone {}, extract end {} local; planted truths in truth.json)",
        config.patients,
        truth.network.name,
        args.out.display(),
        truth.site_timezone,
        truth.extract_end_local
    );
    Ok(())
}

/// Generate with the default settings (used by `kcohort bench`).
pub fn generate(patients: u64, seed: u64, out: &Path) -> anyhow::Result<kcohort_synth::Truth> {
    let config = kcohort_synth::SynthConfig {
        patients,
        seed,
        ..Default::default()
    };
    write(&config, out)
}

fn write(config: &kcohort_synth::SynthConfig, out: &Path) -> anyhow::Result<kcohort_synth::Truth> {
    let show = std::io::stderr().is_terminal();
    let total = config.patients;
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(total),
        if show {
            indicatif::ProgressDrawTarget::stderr()
        } else {
            indicatif::ProgressDrawTarget::hidden()
        },
    );
    let result = kcohort_synth::generate_with_progress(config, out, &|done| bar.set_position(done));
    bar.finish_and_clear();
    result.with_context(|| format!("cannot write the synthetic extract to {}", out.display()))
}
