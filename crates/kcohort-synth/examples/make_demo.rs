//! Generates an extract with the library API (no CLI needed) and reports its size and speed.
//!
//! The bundled demo:
//!     cargo run --release -p kcohort-synth --example make_demo
//! Any size, seed and folder:
//!     cargo run --release -p kcohort-synth --example make_demo -- --patients 100000 --seed 7 --out /tmp/big

use kcohort_synth::{SynthConfig, generate};
use std::path::PathBuf;
use std::time::Instant;

/// Seed of the bundled demo extract.
const DEMO_SEED: u64 = 20261201;
const DEMO_PATIENTS: u64 = 3000;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut config = SynthConfig {
        patients: DEMO_PATIENTS,
        seed: DEMO_SEED,
        ..SynthConfig::default()
    };
    let mut out =
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../synthetic_data/larkmoor-demo");
    let mut args = std::env::args().skip(1);
    while let Some(arg) = args.next() {
        let mut value = || args.next().ok_or_else(|| format!("{arg} needs a value"));
        match arg.as_str() {
            "--patients" => config.patients = value()?.parse()?,
            "--seed" => config.seed = value()?.parse()?,
            "--out" => out = PathBuf::from(value()?),
            other => {
                return Err(format!(
                    "unknown argument `{other}`; expected --patients, --seed or --out"
                )
                .into());
            }
        }
    }
    let started = Instant::now();
    let truth = generate(&config, &out)?;
    let seconds = started.elapsed().as_secs_f64();
    let rows: u64 = truth.files.values().map(|f| f.rows).sum();
    let mut bytes = 0;
    for f in truth.files.values() {
        bytes += std::fs::metadata(out.join(&f.file))?.len();
    }
    let shown = out.canonicalize().unwrap_or_else(|_| out.clone());
    eprintln!("wrote {} patients to {}", config.patients, shown.display());
    for (table, f) in &truth.files {
        eprintln!("  {table:<18} {:>11} rows", f.rows);
    }
    eprintln!(
        "  {rows} rows, {:.1} MB of CSV in {seconds:.2} s: {:.2} M rows/s, {:.0} MB/s",
        bytes as f64 / 1e6,
        rows as f64 / seconds / 1e6,
        bytes as f64 / seconds / 1e6
    );
    eprintln!(
        "  episodes {} (hospital-acquired {}, present on admission {})",
        truth.episodes.total, truth.episodes.hospital_acquired, truth.episodes.present_on_admission
    );
    Ok(())
}
