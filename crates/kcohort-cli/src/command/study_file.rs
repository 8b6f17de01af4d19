//! The study file as the commands read it: the file or the defaults, and its drug classes by the
//! name a user gives on the command line.

use anyhow::{Context, bail};
use kcohort_model::study::{DrugClass, Study};
use std::path::Path;

/// The study file, or the defaults without one.
pub fn load_study(path: Option<&Path>) -> anyhow::Result<Study> {
    Ok(match path {
        Some(path) => {
            let text = std::fs::read_to_string(path)
                .with_context(|| format!("cannot read the study file {}", path.display()))?;
            Study::from_toml(&text).with_context(|| format!("study file {}", path.display()))?
        }
        None => Study::default(),
    })
}

/// The drug class `name` given with `flag`, or an error that lists the study's classes.
pub fn drug_class<'a>(study: &'a Study, flag: &str, name: &str) -> anyhow::Result<&'a DrugClass> {
    match study.drug_classes.get(name) {
        Some(class) => Ok(class),
        None => bail!(
            "{flag} `{name}` is not a drug class of the study; classes: {}",
            study
                .drug_classes
                .keys()
                .cloned()
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}
