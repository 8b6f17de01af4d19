//! `kcohort init-study`: write the default study file (every parameter with its default and a
//! comment saying what it does and what values it takes).

use anyhow::{Context, bail};
use clap::Args;
use kcohort_model::study::DEFAULT_STUDY_TOML;
use std::io::Write;
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct InitStudyArgs {
    /// Where to write the study file; `-` writes it to standard output.
    #[arg(long, default_value = "study.toml")]
    pub out: PathBuf,
    /// Replace the file if it exists.
    #[arg(long)]
    pub force: bool,
}

pub fn run(args: InitStudyArgs) -> anyhow::Result<()> {
    if args.out.as_os_str() == "-" {
        std::io::stdout()
            .write_all(DEFAULT_STUDY_TOML.as_bytes())
            .context("cannot write to standard output")?;
        return Ok(());
    }
    if args.out.exists() && !args.force {
        bail!(
            "{} already exists\nhint: pass --force to replace it, or --out to write elsewhere",
            args.out.display()
        );
    }
    std::fs::write(&args.out, DEFAULT_STUDY_TOML)
        .with_context(|| format!("cannot write {}", args.out.display()))?;
    eprintln!(
        "wrote the default study to {}; edit it, then run `kcohort derive --store DIR --study {}`",
        args.out.display(),
        args.out.display()
    );
    Ok(())
}
