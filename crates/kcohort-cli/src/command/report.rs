//! `kcohort report`: the monthly quality report of a derived store, written as a folder with
//! index.html, report.json and the tables as CSV and Parquet.

use crate::store_query::rows;
use anyhow::{Context, bail};
use clap::Args;
use kcohort_model::Manifest;
use kcohort_model::site_zone::SiteZone;
use kcohort_model::study::Study;
use kcohort_report::input::{
    EpisodeFacts, InputFile, Parameter, Provenance, RejectCount, TableCount, UnitMonth,
};
use kcohort_report::{ReportInput, ReportOptions, Suppression, build_report};
use std::path::{Path, PathBuf};

#[derive(Debug, Args, Clone)]
pub struct ReportArgs {
    /// Store folder (after `kcohort derive`).
    #[arg(long)]
    pub store: PathBuf,
    #[command(flatten)]
    pub options: ReportSettings,
}

/// Report options shared with `kcohort run`.
#[derive(Debug, Args, Clone)]
pub struct ReportSettings {
    /// Report month, YYYY-MM (site time). Default: the last complete month of the extract.
    #[arg(long)]
    pub month: Option<String>,
    /// Months shown in the control chart, ending with the report month.
    #[arg(long, default_value_t = 24)]
    pub months_back: usize,
    /// Folder for the report (default: report-YYYY-MM beside the store).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Suppress counts from 1 to K-1 (and whatever would reveal them). For anything that leaves
    /// the team use 11, or your organisation's rule if it is stricter.
    #[arg(long, value_name = "K")]
    pub suppress_below: Option<u64>,
}

/// The last complete local month before the extract end.
pub fn last_complete_month(zone: &SiteZone, extract_end_us: i64) -> String {
    let last = extract_end_us - 1;
    let months = zone.local_months(last, last);
    let (name, start, end) = &months[0];
    if *end == extract_end_us {
        return name.clone();
    }
    let before = zone.local_months(start - 1, start - 1);
    before[0].0.clone()
}

fn month_window(month: &str, back: usize) -> anyhow::Result<Vec<String>> {
    let (y, m) = month
        .split_once('-')
        .and_then(|(y, m)| Some((y.parse::<i32>().ok()?, m.parse::<u32>().ok()?)))
        .filter(|(_, m)| (1..=12).contains(m) && month.len() == 7)
        .with_context(|| format!("--month `{month}`: expected YYYY-MM, e.g. 2025-12"))?;
    let mut out = Vec::new();
    let (mut y, mut m) = (y, m);
    for _ in 0..back.max(1) {
        out.push(format!("{y:04}-{m:02}"));
        (y, m) = if m == 1 { (y - 1, 12) } else { (y, m - 1) };
    }
    out.reverse();
    Ok(out)
}

fn quoted_list(items: &[String]) -> String {
    items
        .iter()
        .map(|m| format!("'{m}'"))
        .collect::<Vec<_>>()
        .join(", ")
}

fn split_list(text: Option<String>) -> Vec<String> {
    text.filter(|t| !t.is_empty())
        .map(|t| t.split(", ").map(str::to_string).collect())
        .unwrap_or_default()
}

/// Read everything the report needs from the store.
pub fn read_input(
    store: &Path,
    manifest: &Manifest,
    month: &str,
    months: &[String],
    study: &Study,
) -> anyhow::Result<ReportInput> {
    if !manifest.derived.contains_key("unit_months")
        || !manifest.derived.contains_key("episode_register")
    {
        bail!(
            "the store {} has no derived tables; run `kcohort derive --store {}` first",
            store.display(),
            store.display()
        );
    }
    let list = quoted_list(months);
    let u = rows(
        store,
        &format!("SELECT * FROM unit_months WHERE month IN ({list}) ORDER BY month, unit"),
    )?;
    let (m, unit, days, adm, eps, sev, unc) = (
        u.text("month")?,
        u.text("unit")?,
        u.number("days_at_risk")?,
        u.count("admissions")?,
        u.count("ha_episodes")?,
        u.count("ha_severe")?,
        u.count("ha_unconfirmed")?,
    );
    let unit_months = (0..u.len())
        .map(|i| UnitMonth {
            month: m[i].clone().unwrap_or_default(),
            unit: unit[i].clone().unwrap_or_default(),
            days_at_risk: days[i].unwrap_or(0.0),
            admissions: adm[i],
            episodes: eps[i],
            severe: sev[i],
            unconfirmed: unc[i],
        })
        .collect();
    let e = rows(
        store,
        &format!(
            "SELECT * FROM episode_register WHERE month = '{month}' AND setting = 'hospital_acquired' ORDER BY episode_id"
        ),
    )?;
    let (unit, unconfirmed, severity, grade, causes, drugs) = (
        e.text("unit")?,
        e.flag("unconfirmed")?,
        e.text("severity")?,
        e.number("ctcae_grade")?,
        e.text("causes")?,
        e.text("drug_classes")?,
    );
    let (t1, t4, rep, ins, hypo, reb, died) = (
        e.flag("severe_treated_1h")?,
        e.flag("severe_treated_4h")?,
        e.flag("repeat_within_4h")?,
        e.flag("insulin_given")?,
        e.flag("hypoglycemia_after_insulin")?,
        e.flag("rebound")?,
        e.flag("died_within_window")?,
    );
    let episodes = (0..e.len())
        .map(|i| EpisodeFacts {
            unit: unit[i].clone().unwrap_or_default(),
            unconfirmed: unconfirmed[i].unwrap_or(false),
            severity: severity[i].clone().unwrap_or_default(),
            ctcae_grade: grade[i].map(|g| g as i32),
            causes: split_list(causes[i].clone()),
            drug_classes: split_list(drugs[i].clone()),
            severe_treated_1h: t1[i],
            severe_treated_4h: t4[i],
            repeat_within_4h: rep[i].unwrap_or(false),
            insulin_given: ins[i].unwrap_or(false),
            hypoglycemia_after_insulin: hypo[i],
            rebound: reb[i].unwrap_or(false),
            died_within_window: died[i].unwrap_or(false),
        })
        .collect();
    let q = rows(
        store,
        "SELECT CAST(SUM(n_hemolysed) AS BIGINT) AS h, CAST(SUM(n_hemolysed + n_used) AS BIGINT) AS n FROM potassium_quality",
    )?;
    let (hemolysed, potassium) = if q.len() > 0 {
        (q.count("h")?[0], q.count("n")?[0])
    } else {
        (0, 0)
    };

    let mut tables: std::collections::BTreeMap<String, TableCount> = Default::default();
    let mut rejects: std::collections::BTreeMap<(String, String), u64> = Default::default();
    for record in &manifest.ingests {
        for (name, c) in &record.tables {
            let t = tables.entry(name.clone()).or_insert(TableCount {
                table: name.clone(),
                read: 0,
                accepted: 0,
                rejected: 0,
            });
            t.read += c.rows_read;
            t.accepted += c.rows_accepted;
            t.rejected += c.rows_rejected;
            for (reason, n) in &c.rejected_by_reason {
                *rejects.entry((name.clone(), reason.clone())).or_default() += n;
            }
        }
    }
    let input_files = manifest
        .ingests
        .iter()
        .flat_map(|r| r.inputs.iter())
        .map(|f| InputFile {
            table: f.table.clone(),
            file: f.file.clone(),
            sha256: f.sha256.clone(),
            rows: manifest
                .ingests
                .iter()
                .rev()
                .find_map(|r| r.tables.get(&f.table).map(|c| c.rows_read))
                .unwrap_or(0),
        })
        .collect();
    let parameters = study_parameters(study);
    let fingerprint = manifest
        .derived
        .values()
        .next()
        .and_then(|t| t.files.first())
        .and_then(|f| f.path.rsplit('-').next())
        .map(|s| s.trim_end_matches(".parquet").to_string())
        .unwrap_or_default();
    Ok(ReportInput {
        month: month.to_string(),
        months: months.to_vec(),
        unit_months,
        episodes,
        potassium_results: potassium,
        hemolysed_results: hemolysed,
        tables: tables.into_values().collect(),
        rejects: rejects
            .into_iter()
            .map(|((table, reason), rows)| RejectCount {
                table,
                reason,
                rows,
            })
            .collect(),
        provenance: Provenance {
            tool_version: env!("CARGO_PKG_VERSION").to_string(),
            site_timezone: manifest.site_timezone.clone(),
            extract_end: manifest.extract_end.clone(),
            store_generation: manifest.generation,
            derive_fingerprint: fingerprint,
            input_files,
            parameters,
            drug_class_labels: study
                .drug_classes
                .iter()
                .map(|(k, v)| (k.clone(), v.label.clone()))
                .collect(),
        },
    })
}

/// Every scalar parameter of the study as `section.key = value`, from its canonical form.
fn study_parameters(study: &Study) -> Vec<Parameter> {
    let value: serde_json::Value =
        serde_json::from_str(&study.canonical_json()).unwrap_or_default();
    let mut out = Vec::new();
    if let serde_json::Value::Object(sections) = value {
        for (section, v) in sections {
            match v {
                serde_json::Value::Object(keys)
                    if !matches!(
                        section.as_str(),
                        "drug_classes" | "potassium_lowering" | "lab_loinc"
                    ) =>
                {
                    for (k, x) in keys {
                        out.push(Parameter {
                            key: format!("{section}.{k}"),
                            value: x.to_string().trim_matches('"').to_string(),
                        });
                    }
                }
                serde_json::Value::Object(classes) => {
                    for (k, x) in classes {
                        let atc = x
                            .get("atc")
                            .map(|a| a.to_string())
                            .unwrap_or_else(|| x.to_string());
                        out.push(Parameter {
                            key: format!("{section}.{k}"),
                            value: atc.replace('"', ""),
                        });
                    }
                }
                other => out.push(Parameter {
                    key: section,
                    value: other.to_string(),
                }),
            }
        }
    }
    out
}

/// Build and write the report; returns the folder.
pub fn write_report(
    store: &Path,
    settings: &ReportSettings,
    study: &Study,
) -> anyhow::Result<PathBuf> {
    let manifest = kcohort_engine::read_manifest(store)?;
    let zone = SiteZone::parse(&manifest.site_timezone).map_err(anyhow::Error::msg)?;
    let end = kcohort_engine::derive::extract_end_micros(store, &manifest)?;
    let month = match &settings.month {
        Some(m) => m.clone(),
        None => last_complete_month(&zone, end),
    };
    let months = month_window(&month, settings.months_back)?;
    if let Some(k) = settings.suppress_below
        && k < 3
    {
        bail!("--suppress-below {k}: use 3 or more (with 2, `<2` would mean exactly 1)");
    }
    let input = read_input(store, &manifest, &month, &months, study)?;
    let options = ReportOptions {
        suppression: Suppression {
            below: settings.suppress_below,
        },
        level: 0.95,
    };
    let report = build_report(&input, &options)
        .with_context(|| format!("building the report for {month}"))?;
    let out = crate::report_files::output_folder(
        store,
        settings.out.as_deref(),
        &format!("report-{month}"),
    )?;
    let write = |name: &str, text: String| {
        let path = out.join(name);
        std::fs::write(&path, text).with_context(|| format!("cannot write {}", path.display()))
    };
    write("index.html", kcohort_report::html::render(&report))?;
    write("report.json", serde_json::to_string_pretty(&report)? + "\n")?;
    for t in kcohort_report::tables::tables(&report) {
        crate::report_files::write_table(&out, &t)?;
    }
    Ok(out)
}

pub fn run(args: ReportArgs) -> anyhow::Result<()> {
    let out = write_report(&args.store, &args.options, &Study::default())?;
    println!("report: {}", out.join("index.html").display());
    Ok(())
}
