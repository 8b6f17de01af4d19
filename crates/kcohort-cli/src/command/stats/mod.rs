//! `kcohort stats`: the statistics of kcohort-stats on a researcher's own table.

use clap::Args;

#[derive(Debug, Args)]
pub struct StatsArgs {}

pub fn run(_args: StatsArgs) -> anyhow::Result<()> {
    anyhow::bail!("kcohort stats is being written")
}
