//! `kcohort derive`: run every SQL definition over a store and write the derived tables
//! (episodes, ...) into it. Re-running with the same store and study does nothing.

use anyhow::{Context, bail};
use clap::Args;
use kcohort_engine::EngineOptions;
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct DeriveArgs {
    /// Store folder written by `kcohort ingest`.
    #[arg(long)]
    pub store: PathBuf,
    /// Study file (TOML); `kcohort init-study` writes the default one. Without it, the defaults.
    #[arg(long)]
    pub study: Option<PathBuf>,
    /// Memory limit of the SQL engine (e.g. 2GiB, 512MiB); sorts and joins spill to disk beyond it.
    #[arg(long, default_value = "2GiB")]
    pub memory_limit: String,
    /// Folder for spill files (default: the system's temporary folder).
    #[arg(long)]
    pub spill_dir: Option<PathBuf>,
}

/// `2GiB`, `512MiB`, `64KiB`, `1G`, `100M` or a number of bytes.
fn parse_bytes(text: &str) -> anyhow::Result<usize> {
    let t = text.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (number, unit) = t.split_at(split);
    let shift = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 0,
        "k" | "kb" | "kib" => 10,
        "m" | "mb" | "mib" => 20,
        "g" | "gb" | "gib" => 30,
        _ => bail!("--memory-limit `{text}`: expected a size such as 2GiB, 512MiB or 1073741824"),
    };
    let value: f64 = number
        .parse()
        .ok()
        .filter(|v: &f64| v.is_finite() && *v > 0.0)
        .with_context(|| {
            format!("--memory-limit `{text}`: expected a positive size such as 2GiB")
        })?;
    Ok((value * (1u64 << shift) as f64) as usize)
}

pub fn run(args: DeriveArgs) -> anyhow::Result<()> {
    let study = super::study_file::load_study(args.study.as_deref())?;
    let options = EngineOptions {
        memory_limit_bytes: parse_bytes(&args.memory_limit)?,
        target_partitions: 0,
        spill_dir: args.spill_dir.clone(),
    };
    let outcome = kcohort_engine::derive(&args.store, &study, &options).with_context(|| {
        format!(
            "derive on {} failed; the store is unchanged",
            args.store.display()
        )
    })?;
    let short = &outcome.fingerprint[..16];
    if outcome.unchanged {
        println!(
            "derived tables are up to date (generation {}, fingerprint {short}); nothing to do",
            outcome.generation
        );
    } else {
        println!(
            "derived tables (generation {}, fingerprint {short}):",
            outcome.generation
        );
    }
    for t in &outcome.tables {
        if outcome.unchanged {
            println!("  {:<20} {:>12} rows", t.table, t.rows);
        } else {
            println!("  {:<20} {:>12} rows {:>8.2} s", t.table, t.rows, t.seconds);
        }
    }
    eprintln!("store: {}", args.store.display());
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::parse_bytes;

    #[test]
    fn sizes() {
        assert_eq!(parse_bytes("2GiB").unwrap(), 2 << 30);
        assert_eq!(parse_bytes("512MiB").unwrap(), 512 << 20);
        assert_eq!(parse_bytes("1.5G").unwrap(), 3 << 29);
        assert_eq!(parse_bytes("4096").unwrap(), 4096);
        assert!(parse_bytes("lots").is_err());
        assert!(parse_bytes("0").is_err());
    }
}
