//! `kcohort causes`: the table a drug-safety committee reads first. For each cause category the
//! share of confirmed high-potassium episodes attributed to it (multi-label, so shares add up to
//! more than 100%), and for each drug class the new-user risk ratio at a horizon against new
//! users of a comparator class (crude, and Mantel–Haenszel by eGFR category).

use super::compare::{
    CompareArgs, CompareFormat, FollowUpKind, parse_days, read_members, tables_at,
};
use crate::store_query::rows;
use anyhow::Context;
use clap::Args;
use kcohort_report::cause_table::{
    CauseRow, CauseTableView, RiskRatioCell, cause_table_csv, render_cause_table,
};
use kcohort_stats::ConfidenceLevel;
use kcohort_stats::proportion::wilson_interval;
use kcohort_stats::risk_ratio::{ZeroCellCorrection, risk_ratio};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct CausesArgs {
    /// Store folder (after `kcohort derive`).
    #[arg(long)]
    pub store: PathBuf,
    /// Comparator class of the new-user risk ratios (active comparator).
    #[arg(long, default_value = "calcium_channel_blocker")]
    pub comparator: String,
    /// Horizon of the risks, e.g. 30d or 90 (days).
    #[arg(long, default_value = "90d")]
    pub horizon: String,
    /// The study file the store was derived with (its drug classes); default the defaults.
    #[arg(long)]
    pub study: Option<PathBuf>,
    /// Folder for causes.html and causes.csv (default: causes-COMPARATOR beside the store).
    #[arg(long)]
    pub out: Option<PathBuf>,
}

const CAUTION: &str = "For drug-safety review, research and quality improvement on de-identified data; not for decisions about individual patients, and it defers to local policy and licensed practice. Attribution means the cause was present at onset, not that it caused the episode; risk ratios are observational (crude and eGFR-stratified only; see kcohort compare for the adjusted model).";

fn kind(group: &str) -> &'static str {
    match group {
        "drug" => "drug class",
        "kidney" | "lab" => "laboratory",
        "diagnosis" => "diagnosis",
        _ => "other",
    }
}

fn risk_ratio_cell(
    store: &Path,
    class: &str,
    comparator: &str,
    horizon_text: &str,
    horizon: f64,
    level: ConfidenceLevel,
) -> RiskRatioCell {
    let args = CompareArgs {
        store: store.to_path_buf(),
        exposure: class.into(),
        comparator: comparator.into(),
        horizon: horizon_text.into(),
        strata: "egfr_category".into(),
        follow_up: FollowUpKind::Itt,
        format: CompareFormat::Json,
        exclude_users_of: Vec::new(),
        out: None,
    };
    let members = match read_members(&args) {
        Ok(m) => m,
        Err(e) => {
            return RiskRatioCell {
                estimate: None,
                lower: None,
                upper: None,
                exposed_events: 0,
                exposed_n: 0,
                comparator_events: 0,
                comparator_n: 0,
                note: if format!("{e:#}").starts_with("no new users") {
                    "no new users of this class (or of the comparator) in the store".into()
                } else {
                    format!("{e:#}")
                },
            };
        }
    };
    let (_, crude, strata) = tables_at(&members, horizon);
    let rr = risk_ratio(&crude, ZeroCellCorrection::None, level).ok();
    let mh = kcohort_stats::mantel_haenszel::risk_ratio(&strata, level).ok();
    RiskRatioCell {
        estimate: rr.as_ref().map(|r| r.estimate),
        lower: rr.as_ref().map(|r| r.interval.lower),
        upper: rr.as_ref().map(|r| r.interval.upper),
        exposed_events: crude.exposed_cases,
        exposed_n: crude.exposed_total,
        comparator_events: crude.unexposed_cases,
        comparator_n: crude.unexposed_total,
        note: match (&rr, &mh) {
            (_, Some(m)) => format!(
                "crude; Mantel–Haenszel by eGFR category {:.2} ({:.2} to {:.2})",
                m.estimate, m.interval.lower, m.interval.upper
            ),
            (Some(_), None) => "crude; Mantel–Haenszel not estimable".into(),
            (None, _) => "not estimable (no episodes in one arm)".into(),
        },
    }
}

pub fn run(args: CausesArgs) -> anyhow::Result<()> {
    let study = super::study_file::load_study(args.study.as_deref())?;
    let horizon = parse_days(&args.horizon)?;
    super::study_file::drug_class(&study, "--comparator", &args.comparator)?;
    let level = ConfidenceLevel::NINETY_FIVE;
    let r = rows(
        &args.store,
        "SELECT c.cause, min(c.cause_group) AS cause_group, \
                CAST(count(DISTINCT c.episode_id) AS BIGINT) AS n \
         FROM episode_causes c JOIN episodes e ON e.episode_id = c.episode_id \
         WHERE NOT e.unconfirmed GROUP BY c.cause",
    )
    .context("reading episode_causes (run `kcohort derive` on this store first)")?;
    let total = rows(
        &args.store,
        "SELECT CAST(count(*) AS BIGINT) AS n FROM episodes WHERE NOT unconfirmed",
    )?
    .count("n")?
    .first()
    .copied()
    .unwrap_or(0);
    let (cause, group, n) = (r.text("cause")?, r.text("cause_group")?, r.count("n")?);
    let mut attributed: BTreeMap<String, (String, u64)> = BTreeMap::new();
    for i in 0..r.len() {
        attributed.insert(
            cause[i].clone().unwrap_or_default(),
            (group[i].clone().unwrap_or_default(), n[i]),
        );
    }
    // Every cause drug class of the study gets a row, attributed or not.
    for (name, class) in &study.drug_classes {
        if class.is_cause() {
            attributed.entry(name.clone()).or_insert(("drug".into(), 0));
        }
    }
    let mut out_rows = Vec::new();
    for (name, (group, n)) in &attributed {
        let share = |n: u64| {
            if total == 0 {
                (0.0, 0.0, 0.0)
            } else {
                let i = wilson_interval(n, total, level).expect("n <= total");
                (n as f64 / total as f64, i.lower, i.upper)
            }
        };
        let (s, lo, hi) = share(*n);
        let rr = (group == "drug" && study.drug_classes.contains_key(name)).then(|| {
            risk_ratio_cell(
                &args.store,
                name,
                &args.comparator,
                &args.horizon,
                horizon,
                level,
            )
        });
        out_rows.push(CauseRow {
            cause: name.clone(),
            kind: kind(group).into(),
            episodes_attributed: *n,
            share: s,
            share_lower: lo,
            share_upper: hi,
            risk_ratio: rr,
        });
    }
    out_rows.sort_by(|a, b| {
        b.episodes_attributed
            .cmp(&a.episodes_attributed)
            .then(a.cause.cmp(&b.cause))
    });
    let view = CauseTableView {
        title: format!(
            "Causes of confirmed high-potassium episodes, and new-user risk ratios against {}",
            args.comparator
        ),
        caution: CAUTION.into(),
        comparator: args.comparator.clone(),
        horizon_days: horizon,
        n_episodes: total,
        rows: out_rows,
        notes: vec![
            "Share: confirmed episodes with the cause present at onset (queries/episode_causes.sql), over all confirmed episodes, with a 95% Wilson interval; an episode may have several causes.".into(),
            format!(
                "Risk ratio: new users of the class against new users of {} (queries/new_user_cohorts.sql), a first confirmed episode within {horizon} days of entry, intention to treat; users of the other arm's class at entry and patients in both cohorts left out; 95% interval (log method).",
                args.comparator
            ),
        ],
    };
    let out = crate::report_files::output_folder(
        &args.store,
        args.out.as_deref(),
        &format!("causes-{}", args.comparator),
    )?;
    std::fs::write(out.join("causes.html"), render_cause_table(&view))?;
    std::fs::write(out.join("causes.csv"), cause_table_csv(&view))?;
    println!(
        "{:<26} {:<12} {:>9} {:>7}   risk ratio vs {} ({} days)",
        "cause", "kind", "episodes", "share", args.comparator, horizon
    );
    for row in &view.rows {
        let rr = row.risk_ratio.as_ref().map_or(String::new(), |c| {
            match (c.estimate, c.lower, c.upper) {
                (Some(e), Some(l), Some(u)) => format!(
                    "{e:.2} ({l:.2} to {u:.2})  {}/{} vs {}/{}",
                    c.exposed_events, c.exposed_n, c.comparator_events, c.comparator_n
                ),
                _ => format!(
                    "not estimable  {}/{} vs {}/{}",
                    c.exposed_events, c.exposed_n, c.comparator_events, c.comparator_n
                ),
            }
        });
        println!(
            "{:<26} {:<12} {:>9} {:>6.1}%   {rr}",
            row.cause,
            row.kind,
            row.episodes_attributed,
            row.share * 100.0
        );
    }
    println!("of {total} confirmed episodes");
    println!("table: {}", out.join("causes.html").display());
    Ok(())
}
