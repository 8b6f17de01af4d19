//! One generation: the scenario, every patient in turn through the simulation and the writer,
//! and truth.json at the end.

use crate::config::SynthConfig;
use crate::error::SynthError;
use crate::random::{Rng, Stream};
use crate::scenario::Scenario;
use crate::table_writer::ExtractWriter;
use crate::timeline::{self, PatientRows};
use crate::truth::{Tally, Truth};
use std::path::Path;

/// How often the progress callback is called (patients).
const PROGRESS_EVERY: u64 = 1000;

pub fn generate_with_progress(
    config: &SynthConfig,
    out_dir: &Path,
    progress: &dyn Fn(u64),
) -> Result<Truth, SynthError> {
    let sc = Scenario::new(config)?;
    std::fs::create_dir_all(out_dir).map_err(|source| SynthError::CreateDir {
        path: out_dir.to_path_buf(),
        source,
    })?;
    let mut writer = ExtractWriter::create(out_dir, &sc)?;
    let mut tally = Tally::new(&sc);
    let mut rows = PatientRows::default();
    for index in 0..config.patients {
        let rng = Rng::for_item(config.seed, Stream::Patient, index);
        timeline::simulate(&sc, rng, &mut rows, &mut tally);
        writer.write_patient(index, &rows)?;
        if (index + 1) % PROGRESS_EVERY == 0 {
            progress(index + 1);
        }
    }
    let files = writer.finish()?;
    let truth = Truth::build(&sc, &tally, files);
    let path = out_dir.join("truth.json");
    let mut json =
        serde_json::to_vec_pretty(&truth).map_err(|source| SynthError::Truth { source })?;
    json.push(b'\n');
    std::fs::write(&path, json).map_err(|source| SynthError::Write { path, source })?;
    progress(config.patients);
    Ok(truth)
}
