//! `kcohort tables`: the tables a query can name, with rows, columns, types and descriptions.

use anyhow::Context;
use clap::Args;
use std::path::PathBuf;

#[derive(Debug, Args)]
pub struct TablesArgs {
    /// Store folder.
    #[arg(long)]
    pub store: PathBuf,
}

pub fn run(args: TablesArgs) -> anyhow::Result<()> {
    let tables = kcohort_engine::catalog::describe_store(&args.store)
        .with_context(|| format!("cannot describe the store {}", args.store.display()))?;
    for t in tables {
        println!(
            "{} ({}, {} rows): {}",
            t.name, t.kind, t.rows, t.description
        );
        for c in &t.columns {
            if c.description.is_empty() {
                println!("    {:<32} {}", c.name, c.data_type);
            } else {
                println!("    {:<32} {:<32} {}", c.name, c.data_type, c.description);
            }
        }
        println!();
    }
    Ok(())
}
