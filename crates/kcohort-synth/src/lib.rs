//! Seeded synthetic extracts of Larkmoor Health, a fictional hospital network, with planted
//! effects whose truth is recorded beside the data.
//!
//! [`generate`] writes the five contract tables (`patients.csv`, `encounters.csv`,
//! `lab_results.csv`, `medication_events.csv`, `diagnoses.csv`, columns exactly as in
//! `kcohort_model::TableName::columns()`) and `truth.json` into a folder. The same
//! configuration and seed give byte-identical files. Patients are simulated and written one at a
//! time, so memory stays bounded at any size.
//!
//! Planted, each with its stated parameter and realised counts in [`Truth`]: a hazard of true
//! high-potassium episodes with hazard ratios for low eGFR, diabetes and drug classes (MRA with
//! an eGFR interaction, RAAS inhibitors against calcium-channel blockers); hospital-acquired and
//! present-on-admission onsets with an optional monthly rate step on one unit; hemolysed
//! specimens, spurious single highs refuted by a normal repeat, hypoglycemia after insulin,
//! 30-day mortality after severe episodes; and malformed rows, one defect each, for the rejects
//! machinery.
//!
//! It never prints, never reads the environment or the clock, and never uses names of real
//! hospitals or people: every site, unit and patient is invented. Its output describes no real
//! patient and must not be mistaken for clinical evidence.

mod config;
mod defect;
mod episode;
mod error;
mod exposure;
mod extract;
mod formulary;
mod hazard;
mod kidney;
mod network;
mod profile;
mod random;
mod record;
mod scenario;
mod site_time;
mod specimen;
mod table_writer;
mod timeline;
pub mod truth;

pub use config::{HazardRatios, SynthConfig};
pub use error::SynthError;
pub use network::NETWORK_NAME;
pub use truth::Truth;

use std::path::Path;

/// Generates an extract into `out_dir` (created if missing; the six files in it are replaced)
/// and returns what was planted.
pub fn generate(config: &SynthConfig, out_dir: &Path) -> Result<Truth, SynthError> {
    generate_with_progress(config, out_dir, &|_| {})
}

/// Like [`generate`], calling `progress` with the number of patients done every 1,000 patients
/// and once at the end.
pub fn generate_with_progress(
    config: &SynthConfig,
    out_dir: &Path,
    progress: &dyn Fn(u64),
) -> Result<Truth, SynthError> {
    extract::generate_with_progress(config, out_dir, progress)
}
