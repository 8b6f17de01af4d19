//! `kcohort listing`: the drug-linked event listing of a drug-safety committee, one row per
//! high-potassium episode with the suspect drug class, from the derived table
//! `drug_event_listing`, as listing.html and listing.csv.

use crate::store_query::rows;
use anyhow::{Context, bail};
use chrono::NaiveDate;
use clap::Args;
use kcohort_model::site_zone::SiteZone;
use kcohort_report::listing_page::{ListingView, render_listing};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct ListingArgs {
    /// Store folder (after `kcohort derive`).
    #[arg(long)]
    pub store: PathBuf,
    /// Suspect drug class (a class of the study, e.g. mra; `kcohort init-study` lists them).
    #[arg(long)]
    pub class: String,
    /// First onset date, YYYY-MM-DD (site calendar).
    #[arg(long)]
    pub from: String,
    /// Last onset date, YYYY-MM-DD (site calendar), inclusive.
    #[arg(long)]
    pub to: String,
    /// The study file the store was derived with (for the class labels); default the defaults.
    #[arg(long)]
    pub study: Option<PathBuf>,
    /// Folder for listing.html and listing.csv (default: listing-CLASS-FROM-TO beside the store).
    #[arg(long)]
    pub out: Option<PathBuf>,
}

/// The notice every listing carries.
pub const NOTICE: &str = "Row-level listing for the drug-safety committee. It carries pseudonymous ids only (patient, episode, era); it must stay inside the committee and must not be used to re-identify anyone.";

const CAUTION: &str = "For drug-safety review and quality improvement; not for decisions about individual patients. A listed drug was in use at onset: that is a signal to review, not a finding of causation. Local policy and licensed practice decide.";

/// The columns of the CSV (the derived table's names) and of the page (headings).
const COLUMNS: &[(&str, &str)] = &[
    ("episode_id", "episode"),
    ("patient_id", "patient"),
    ("onset_local", "onset (site time)"),
    ("unit", "unit"),
    ("setting", "setting"),
    ("era_id", "suspect era"),
    ("era_start_local", "era start"),
    ("day_on_drug", "day on drug"),
    ("user_type", "user"),
    ("other_suspect_classes", "other potassium-raising drugs"),
    ("other_causes", "other causes"),
    ("baseline_egfr", "baseline eGFR"),
    ("baseline_gfr_category", "eGFR category"),
    ("aki_stage", "AKI stage"),
    ("peak_value", "peak K (mmol/L)"),
    ("severity", "severity"),
    ("ctcae_grade", "CTCAE grade"),
    ("unconfirmed", "unconfirmed"),
    ("treatments", "treatments (delay from onset)"),
    ("hypoglycemia", "hypoglycemia after insulin"),
    (
        "lowest_glucose_after_insulin",
        "lowest glucose after insulin (mg/dL)",
    ),
    ("rebound", "rebound"),
    ("died_within_window", "died within {death_days} days"),
    ("dechallenge", "suspect drug afterwards"),
    ("restarted_local", "restarted"),
];

const DEFINITIONS: &[(&str, &str)] = &[
    (
        "suspect era",
        "the era of the class in use at onset (or ended within the class's lookback before it); day 1 is its first day",
    ),
    (
        "user",
        "new user: no exposure to the class in the washout year before the era, with the patient observed that long; otherwise prevalent",
    ),
    (
        "other potassium-raising drugs / other causes",
        "the episode's other attributed causes (queries/episode_causes.sql)",
    ),
    (
        "baseline eGFR",
        "median CKD-EPI 2021 eGFR (mL/min/1.73 m²) of the year up to onset; AKI stage: KDIGO 2012 creatinine stage from 7 days before to 1 day after onset",
    ),
    (
        "severity",
        "peak potassium: mild below 6.0, moderate 6.0 to below 6.5, severe 6.5 mmol/L or more; CTCAE v5.0 grade of the peak",
    ),
    (
        "unconfirmed",
        "possible pseudohyperkalemia: one high value, normal again within 6 h, no potassium-lowering treatment",
    ),
    (
        "treatments",
        "potassium-lowering classes given from onset to 12 h after, with the minutes from onset to the first of each",
    ),
    (
        "hypoglycemia after insulin",
        "glucose below 70 mg/dL (3.9 mmol/L) within 6 h after an insulin administration of the treatment window",
    ),
    (
        "suspect drug afterwards",
        "dechallenge read from the recorded exposure {dechallenge_days} days after onset: continued, stopped, ended before onset, died, or not observable (the extract ends first); a dispensing covers its days of supply",
    ),
    (
        "restarted",
        "start of the first later era of the class (rechallenge), if any",
    ),
];

fn parse_date(flag: &str, text: &str) -> anyhow::Result<NaiveDate> {
    NaiveDate::parse_from_str(text.trim(), "%Y-%m-%d")
        .with_context(|| format!("{flag} `{text}`: expected a date such as 2025-01-31"))
}

fn number_text(v: Option<f64>, digits: usize) -> String {
    v.map_or(String::new(), |x| format!("{x:.digits$}"))
}

fn yes_no(v: Option<bool>) -> String {
    match v {
        Some(true) => "yes".into(),
        Some(false) => "no".into(),
        None => String::new(),
    }
}

/// The listing's rows: one text per column of [`COLUMNS`].
pub fn read_listing(
    store: &Path,
    class: &str,
    zone: &SiteZone,
    from_us: i64,
    to_us: i64,
) -> anyhow::Result<Vec<Vec<String>>> {
    let sql = format!(
        "SELECT *, CAST(onset_at AS BIGINT) AS onset_us, CAST(era_start AS BIGINT) AS era_start_us, \
         CAST(restarted_at AS BIGINT) AS restarted_us \
         FROM drug_event_listing \
         WHERE suspect_class = '{class}' \
           AND CAST(onset_at AS BIGINT) >= {from_us} AND CAST(onset_at AS BIGINT) < {to_us} \
         ORDER BY onset_at, episode_id"
    );
    let r = rows(store, &sql)
        .context("reading drug_event_listing (run `kcohort derive` on this store first)")?;
    let text = |name: &str| r.text(name);
    let local = |name: &str| -> anyhow::Result<Vec<String>> {
        Ok(r.number(name)?
            .into_iter()
            .map(|v| v.map_or(String::new(), |us| zone.local_text(us as i64)))
            .collect())
    };
    let mut columns: BTreeMap<&str, Vec<String>> = BTreeMap::new();
    for (name, _) in COLUMNS {
        let values: Vec<String> = match *name {
            "onset_local" => local("onset_us")?,
            "era_start_local" => local("era_start_us")?,
            "restarted_local" => local("restarted_us")?,
            "baseline_egfr" | "peak_value" => r
                .number(name)?
                .into_iter()
                .map(|v| number_text(v, 1))
                .collect(),
            "lowest_glucose_after_insulin" => r
                .number(name)?
                .into_iter()
                .map(|v| number_text(v, 0))
                .collect(),
            "unconfirmed" | "hypoglycemia" | "rebound" | "died_within_window" => {
                r.flag(name)?.into_iter().map(yes_no).collect()
            }
            _ => text(name)?
                .into_iter()
                .map(Option::unwrap_or_default)
                .collect(),
        };
        columns.insert(name, values);
    }
    Ok((0..r.len())
        .map(|i| COLUMNS.iter().map(|(n, _)| columns[n][i].clone()).collect())
        .collect())
}

fn summary(rows: &[Vec<String>]) -> Vec<(String, String)> {
    let at = |name: &str| COLUMNS.iter().position(|(n, _)| *n == name).unwrap();
    let count = |name: &str, value: &str| rows.iter().filter(|r| r[at(name)] == value).count();
    let patients: std::collections::BTreeSet<&str> =
        rows.iter().map(|r| r[at("patient_id")].as_str()).collect();
    let mut out = vec![
        ("episodes".to_string(), rows.len().to_string()),
        ("patients".to_string(), patients.len().to_string()),
        (
            "new users / prevalent users".to_string(),
            format!(
                "{} / {}",
                count("user_type", "new user"),
                count("user_type", "prevalent user")
            ),
        ),
        (
            "severe (peak 6.5 mmol/L or more)".to_string(),
            count("severity", "severe").to_string(),
        ),
        (
            "unconfirmed (possible pseudohyperkalemia)".to_string(),
            count("unconfirmed", "yes").to_string(),
        ),
        (
            "hypoglycemia after insulin".to_string(),
            count("hypoglycemia", "yes").to_string(),
        ),
        (
            "died within 30 days".to_string(),
            count("died_within_window", "yes").to_string(),
        ),
    ];
    let mut dechallenge: BTreeMap<&str, usize> = BTreeMap::new();
    for r in rows {
        *dechallenge
            .entry(r[at("dechallenge")].as_str())
            .or_default() += 1;
    }
    out.push((
        "suspect drug afterwards".to_string(),
        dechallenge
            .iter()
            .map(|(k, n)| format!("{k} {n}"))
            .collect::<Vec<_>>()
            .join(", "),
    ));
    out
}

pub fn run(args: ListingArgs) -> anyhow::Result<()> {
    let study = super::study_file::load_study(args.study.as_deref())?;
    let class = super::study_file::drug_class(&study, "--class", &args.class)?;
    if !class.is_cause() {
        bail!(
            "--class `{}` is a comparator-only class (cause = false in the study): it is never a suspect",
            args.class
        );
    }
    let (from, to) = (
        parse_date("--from", &args.from)?,
        parse_date("--to", &args.to)?,
    );
    if to < from {
        bail!("--to {to} is before --from {from}");
    }
    let manifest = kcohort_engine::read_manifest(&args.store)?;
    let zone = SiteZone::parse(&manifest.site_timezone).map_err(anyhow::Error::msg)?;
    let midnight = |d: NaiveDate| zone.instant_of_local(d.and_hms_opt(0, 0, 0).expect("midnight"));
    let next_day = to
        .succ_opt()
        .context("--to is the last representable date")?;
    let rows = read_listing(
        &args.store,
        &args.class,
        &zone,
        midnight(from),
        midnight(next_day),
    )?;
    // The headings and definitions name the study's windows.
    let windows = |text: &str| {
        text.replace(
            "{death_days}",
            &study.outcomes.death_within_days.to_string(),
        )
        .replace(
            "{dechallenge_days}",
            &study.outcomes.dechallenge_days.to_string(),
        )
    };
    let view = ListingView {
        class: args.class.clone(),
        class_label: class.label.clone(),
        from: from.to_string(),
        to: to.to_string(),
        site_timezone: manifest.site_timezone.clone(),
        extract_end: manifest.extract_end.clone(),
        notice: NOTICE.into(),
        cautions: vec![CAUTION.into()],
        summary: summary(&rows),
        columns: COLUMNS.iter().map(|(_, h)| windows(h)).collect(),
        rows,
        definitions: DEFINITIONS
            .iter()
            .map(|(a, b)| ((*a).to_string(), windows(b)))
            .collect(),
    };
    let out = crate::report_files::output_folder(
        &args.store,
        args.out.as_deref(),
        &format!("listing-{}-{from}-{to}", args.class),
    )?;
    let html = out.join("listing.html");
    std::fs::write(&html, render_listing(&view))
        .with_context(|| format!("cannot write {}", html.display()))?;
    let csv_path = out.join("listing.csv");
    let mut w = csv::Writer::from_path(&csv_path)
        .with_context(|| format!("cannot write {}", csv_path.display()))?;
    w.write_record(COLUMNS.iter().map(|(n, _)| *n))?;
    for r in &view.rows {
        w.write_record(r)?;
    }
    w.flush()?;
    eprintln!("{NOTICE}");
    println!(
        "{} episodes with {} as suspect from {from} to {to}",
        view.rows.len(),
        args.class
    );
    println!("listing: {}", html.display());
    println!("table:   {}", csv_path.display());
    Ok(())
}
