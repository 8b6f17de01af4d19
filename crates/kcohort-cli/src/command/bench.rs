//! `kcohort bench`: figures for the benchmarks in BENCHMARKS.md (rows per second and peak memory
//! per table). Not a test: it prints what it measured and never fails on a threshold.

use anyhow::Context;
use clap::{Args, Subcommand};
use kcohort_ingest::{IngestOptions, Mode, Progress};
use kcohort_model::TableName;
use std::path::PathBuf;
use std::sync::Mutex;
use std::time::{Duration, Instant};

#[derive(Debug, Args)]
pub struct BenchArgs {
    #[command(subcommand)]
    pub what: BenchWhat,
}

#[derive(Debug, Subcommand)]
pub enum BenchWhat {
    /// Generate a synthetic extract (or take --extract), ingest it, print rows/s and peak memory per table.
    Ingest(BenchIngestArgs),
}

#[derive(Debug, Args)]
pub struct BenchIngestArgs {
    /// Patients in the generated extract.
    #[arg(long, default_value_t = 100_000)]
    pub patients: u64,
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Ingest this existing extract instead of generating one.
    #[arg(long)]
    pub extract: Option<PathBuf>,
    /// Site time zone of --extract (a generated extract records its own).
    #[arg(long, default_value = "UTC")]
    pub site_timezone: String,
    /// Extract end of --extract (default: the latest timestamp, which costs one more pass).
    #[arg(long)]
    pub extract_end: Option<String>,
    /// Work folder (kept afterwards); default: a temporary folder removed at the end.
    #[arg(long)]
    pub work_dir: Option<PathBuf>,
}

pub fn run(args: BenchArgs) -> anyhow::Result<()> {
    match args.what {
        BenchWhat::Ingest(a) => ingest(a),
    }
}

/// Per-table wall time and peak resident memory, taken from the progress callbacks.
struct Meter {
    started: Mutex<Option<Instant>>,
    tables: Mutex<Vec<(TableName, Duration, Option<u64>)>>,
}

impl Progress for Meter {
    fn table_started(&self, _table: TableName, _total: u64) {
        reset_peak_memory();
        *self.started.lock().expect("meter") = Some(Instant::now());
    }
    fn table_finished(&self, table: TableName) {
        let elapsed = self
            .started
            .lock()
            .expect("meter")
            .take()
            .map(|t| t.elapsed())
            .unwrap_or_default();
        self.tables
            .lock()
            .expect("meter")
            .push((table, elapsed, peak_memory_kib()));
    }
}

/// Linux: writing 5 to clear_refs resets the peak resident set size (VmHWM) of this process.
fn reset_peak_memory() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

fn peak_memory_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn ingest(args: BenchIngestArgs) -> anyhow::Result<()> {
    let temp;
    let work = match &args.work_dir {
        Some(d) => d.clone(),
        None => {
            temp = tempfile::tempdir().context("cannot create a temporary folder")?;
            temp.path().to_path_buf()
        }
    };
    let (extract, zone, end) = match &args.extract {
        Some(dir) => (
            dir.clone(),
            args.site_timezone.clone(),
            args.extract_end.clone(),
        ),
        None => {
            let dir = work.join("extract");
            let started = Instant::now();
            let truth = crate::command::synth::generate(args.patients, args.seed, &dir)?;
            let secs = started.elapsed().as_secs_f64();
            let bytes = folder_bytes(&dir);
            println!(
                "generated {} patients in {secs:.1} s ({:.0} MB of CSV)",
                args.patients,
                bytes as f64 / 1e6
            );
            (dir, truth.site_timezone, Some(truth.extract_end_local))
        }
    };
    let store = work.join("store");
    if store.exists() {
        std::fs::remove_dir_all(&store)
            .with_context(|| format!("cannot clear {}", store.display()))?;
    }
    let options = IngestOptions {
        site_timezone: zone,
        extract_end: end,
        mode: Mode::New,
        fail_point: None,
    };
    let meter = Meter {
        started: Mutex::new(None),
        tables: Mutex::new(Vec::new()),
    };
    reset_peak_memory();
    let started = Instant::now();
    let outcome = kcohort_ingest::ingest(&extract, &store, &options, &meter)?;
    let total = started.elapsed().as_secs_f64();
    let input_bytes: u64 = outcome.record.inputs.iter().map(|i| i.bytes).sum();
    println!(
        "\n{:<18} {:>12} {:>9} {:>14} {:>14}",
        "table", "rows", "seconds", "rows/s", "peak RSS MiB"
    );
    for (table, elapsed, peak) in meter.tables.lock().expect("meter").iter() {
        let rows = outcome
            .record
            .tables
            .get(table.as_str())
            .map_or(0, |c| c.rows_read);
        let secs = elapsed.as_secs_f64();
        println!(
            "{:<18} {:>12} {:>9.2} {:>14.0} {:>14}",
            table.as_str(),
            rows,
            secs,
            rows as f64 / secs.max(1e-9),
            peak.map_or("n/a".into(), |k| format!("{:.0}", k as f64 / 1024.0))
        );
    }
    let rows: u64 = outcome.record.tables.values().map(|c| c.rows_read).sum();
    // Peaks were reset per table; the run's peak is the largest of them (hashing before the
    // first table needs only a fixed buffer).
    let overall_peak = meter
        .tables
        .lock()
        .expect("meter")
        .iter()
        .filter_map(|t| t.2)
        .max();
    println!(
        "{:<18} {:>12} {:>9.2} {:>14.0} {:>14}   ({:.0} MB/s of input, hashing and commit included)",
        "all",
        rows,
        total,
        rows as f64 / total,
        overall_peak.map_or("n/a".into(), |k| format!("{:.0}", k as f64 / 1024.0)),
        input_bytes as f64 / 1e6 / total
    );
    Ok(())
}

fn folder_bytes(dir: &std::path::Path) -> u64 {
    std::fs::read_dir(dir)
        .map(|entries| {
            entries
                .flatten()
                .filter_map(|e| e.metadata().ok())
                .map(|m| m.len())
                .sum()
        })
        .unwrap_or(0)
}
