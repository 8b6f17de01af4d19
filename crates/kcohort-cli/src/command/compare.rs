//! `kcohort compare`: new users of one drug class against new users of a comparator class
//! (active comparator), from the derived table `new_user_cohorts`: risk of a first
//! high-potassium episode at a horizon in each arm (Kaplan–Meier, and Aalen–Johansen with death
//! competing), crude and Mantel–Haenszel risk ratios and differences by a stratum, the rate
//! ratio from person-time, and the Cox hazard ratio adjusted for the baseline covariates.

use crate::store_query::rows;
use anyhow::{Context, bail};
use clap::{Args, ValueEnum};
use kcohort_stats::ConfidenceLevel;
use kcohort_stats::follow_up::{CompetingFollowUp, FollowUp};
use kcohort_stats::risk_ratio::{RiskDifferenceMethod, TwoByTwo, ZeroCellCorrection};
use serde_json::{Value, json};
use std::collections::BTreeMap;
use std::path::PathBuf;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FollowUpKind {
    /// Intention to treat: to the horizon whatever happens to the drug.
    Itt,
    /// As treated: to the end of the era plus grace.
    AsTreated,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum CompareFormat {
    Table,
    Json,
}

#[derive(Debug, Args)]
pub struct CompareArgs {
    /// Store folder (after `kcohort derive`).
    #[arg(long)]
    pub store: PathBuf,
    /// Drug class of the exposed arm (a class of the study, e.g. ace_inhibitor).
    #[arg(long)]
    pub exposure: String,
    /// Drug class of the comparator arm (active comparator, e.g. calcium_channel_blocker). An
    /// unexposed arm is refused on purpose: see `kcohort compare --comparator unexposed`.
    #[arg(long)]
    pub comparator: String,
    /// Horizon of the risks, e.g. 30d or 90 (days).
    #[arg(long, default_value = "90d")]
    pub horizon: String,
    /// Baseline column to stratify the Mantel–Haenszel estimates by.
    #[arg(long, default_value = "egfr_category")]
    pub strata: String,
    /// Which follow-up of the cohort table to use.
    #[arg(long, value_enum, default_value = "itt")]
    pub follow_up: FollowUpKind,
    #[arg(long, value_enum, default_value = "table")]
    pub format: CompareFormat,
    /// Leave out, in both arms, new users who were also using these classes at entry
    /// (comma-separated; e.g. `arb` when comparing ACE inhibitors, so that neither arm holds
    /// another RAAS inhibitor). Users of the other arm's class at entry are always left out.
    #[arg(long, value_delimiter = ',')]
    pub exclude_users_of: Vec<String>,
    /// Also write compare.html (curves, numbers at risk, forest plot), compare.json and arms.csv
    /// into this folder.
    #[arg(long)]
    pub out: Option<PathBuf>,
}

/// One cohort member.
#[derive(Debug, Clone)]
pub struct Member {
    pub exposed: bool,
    pub days: f64,
    /// 0 censored, 1 episode, 2 death.
    pub cause: u32,
    pub stratum: String,
    pub covariates: Vec<f64>,
    /// Days from entry to the end of the era plus grace (time on drug).
    pub on_drug_days: f64,
}

/// Names of the Cox covariates after the exposure.
pub const COVARIATES: &[&str] = &[
    "age per 10 years",
    "female",
    "eGFR G3a",
    "eGFR G3b",
    "eGFR G4-G5",
    "eGFR unknown",
    "recent AKI",
    "diabetes",
    "other potassium-raising classes",
];

pub fn parse_days(text: &str) -> anyhow::Result<f64> {
    let t = text.trim().trim_end_matches('d');
    t.parse::<f64>()
        .ok()
        .filter(|d| d.is_finite() && *d > 0.0)
        .with_context(|| format!("--horizon `{text}`: expected days such as 30d or 90"))
}

fn quote(text: &str) -> anyhow::Result<String> {
    if text.is_empty()
        || !text
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
    {
        bail!("`{text}`: a class or column name is lowercase letters, digits and `_`");
    }
    Ok(text.to_string())
}

/// Read both arms. Left out: entries inside an episode; patients who enter both arms (they would
/// be their own comparators); new users of one arm's class who were using the other arm's class
/// at entry; and users of the `--exclude-users-of` classes at entry.
pub fn read_members(args: &CompareArgs) -> anyhow::Result<Vec<Member>> {
    let (x, c, strata) = (
        quote(&args.exposure)?,
        quote(&args.comparator)?,
        quote(&args.strata)?,
    );
    if x == c {
        bail!("--exposure and --comparator are the same class `{x}`");
    }
    if c == "unexposed" {
        bail!(
            "--comparator unexposed is not supported: people who do not start a drug have no \
             start date to follow them from, and choosing one invites immortal time and \
             confounding by the reason for prescribing\nhint: compare with new users of \
             another class given for the same reason (an active comparator), e.g. \
             --comparator calcium_channel_blocker for RAAS inhibitors"
        );
    }
    let (days, event) = match args.follow_up {
        FollowUpKind::Itt => ("itt_days", "itt_event"),
        FollowUpKind::AsTreated => ("as_treated_days", "as_treated_event"),
    };
    let in_use = |class: &str| format!("(', ' || other_classes || ', ') LIKE '%, {class}, %'");
    let mut excluded = format!(
        "NOT ((drug_class = '{x}' AND {}) OR (drug_class = '{c}' AND {}))",
        in_use(&c),
        in_use(&x)
    );
    for other in &args.exclude_users_of {
        excluded.push_str(&format!(" AND NOT {}", in_use(&quote(other.trim())?)));
    }
    let sql = format!(
        "SELECT drug_class = '{x}' AS exposed, {days} AS days, {event} AS event, \
         CAST({strata} AS VARCHAR) AS stratum, age_years, sex, egfr_category, recent_aki, diabetes, \
         n_other_classes, on_drug_days \
         FROM new_user_cohorts \
         WHERE drug_class IN ('{x}', '{c}') AND NOT in_episode_at_entry AND {excluded} \
           AND patient_id NOT IN (SELECT patient_id FROM new_user_cohorts \
                                  WHERE drug_class = '{x}' \
                                  INTERSECT SELECT patient_id FROM new_user_cohorts \
                                  WHERE drug_class = '{c}') \
         ORDER BY drug_class, patient_id"
    );
    let r = rows(&args.store, &sql).with_context(|| {
        format!("reading new_user_cohorts (is `{strata}` a column of it? see `kcohort tables`)")
    })?;
    let (exposed, d, e, s) = (
        r.flag("exposed")?,
        r.number("days")?,
        r.text("event")?,
        r.text("stratum")?,
    );
    let (age, sex, egfr, aki, dm, other) = (
        r.number("age_years")?,
        r.text("sex")?,
        r.text("egfr_category")?,
        r.flag("recent_aki")?,
        r.flag("diabetes")?,
        r.number("n_other_classes")?,
    );
    let on_drug = r.number("on_drug_days")?;
    let mut out = Vec::new();
    for i in 0..r.len() {
        let g = egfr[i].as_deref().unwrap_or("unknown");
        let covariates = vec![
            age[i].unwrap_or(0.0) / 10.0,
            f64::from(u8::from(sex[i].as_deref() == Some("F"))),
            f64::from(u8::from(g == "G3a")),
            f64::from(u8::from(g == "G3b")),
            f64::from(u8::from(g == "G4" || g == "G5")),
            f64::from(u8::from(g == "unknown")),
            f64::from(u8::from(aki[i] == Some(true))),
            f64::from(u8::from(dm[i] == Some(true))),
            other[i].unwrap_or(0.0),
        ];
        out.push(Member {
            exposed: exposed[i] == Some(true),
            days: d[i].unwrap_or(0.0).max(0.0),
            cause: match e[i].as_deref() {
                Some("episode") => 1,
                Some("death") => 2,
                _ => 0,
            },
            stratum: s[i].clone().unwrap_or_else(|| "missing".into()),
            covariates,
            on_drug_days: on_drug[i].unwrap_or(0.0).max(0.0),
        });
    }
    for (arm, flag) in [(&x, true), (&c, false)] {
        if !out.iter().any(|m| m.exposed == flag) {
            bail!(
                "no new users of `{arm}` in new_user_cohorts (is it a class of the study, with eras in this store?)"
            );
        }
    }
    Ok(out)
}

fn interval(i: &kcohort_stats::Interval) -> Value {
    json!([i.lower, i.upper])
}

/// Members by stratum, and the two-by-two tables of an episode by the horizon (risk by
/// counting: over everyone who entered the arm), overall and per stratum in the same order.
pub fn tables_at(
    members: &[Member],
    horizon: f64,
) -> (BTreeMap<&str, Vec<&Member>>, TwoByTwo, Vec<TwoByTwo>) {
    let table_of = |ms: &[&Member]| {
        let cases = |e: bool| {
            ms.iter()
                .filter(|m| m.exposed == e && m.cause == 1 && m.days <= horizon)
                .count() as u64
        };
        let total = |e: bool| ms.iter().filter(|m| m.exposed == e).count() as u64;
        TwoByTwo {
            exposed_cases: cases(true),
            exposed_total: total(true),
            unexposed_cases: cases(false),
            unexposed_total: total(false),
        }
    };
    let all: Vec<&Member> = members.iter().collect();
    let mut by_stratum: BTreeMap<&str, Vec<&Member>> = BTreeMap::new();
    for m in members {
        by_stratum.entry(m.stratum.as_str()).or_default().push(m);
    }
    let tables = by_stratum.values().map(|ms| table_of(ms)).collect();
    (by_stratum, table_of(&all), tables)
}

/// Every estimate of the comparison, as JSON.
pub fn analyse(members: &[Member], horizon: f64, level: ConfidenceLevel) -> anyhow::Result<Value> {
    let arm = |exposed: bool| members.iter().filter(move |m| m.exposed == exposed);
    let mut arms = Vec::new();
    let mut curves = Vec::new();
    let ticks: Vec<f64> = kcohort_report::svg::ticks(0.0, horizon, 6)
        .into_iter()
        .filter(|t| *t >= 0.0 && *t <= horizon)
        .collect();
    for exposed in [true, false] {
        let m: Vec<&Member> = arm(exposed).collect();
        let follow: Vec<FollowUp> = m
            .iter()
            .map(|x| FollowUp::new(x.days, x.cause == 1))
            .collect();
        let km = kcohort_stats::kaplan_meier::estimate(
            &follow,
            &kcohort_stats::kaplan_meier::KaplanMeierOptions {
                level,
                at_times: vec![horizon],
            },
        )?;
        let at = &km.at_times[0];
        let competing: Vec<CompetingFollowUp> = m
            .iter()
            .map(|x| CompetingFollowUp {
                entry: f64::NEG_INFINITY,
                exit: x.days,
                cause: x.cause,
            })
            .collect();
        let aj = kcohort_stats::aalen_johansen::estimate(&competing, level)?;
        let step = aj.steps.iter().rev().find(|s| s.time <= horizon);
        let cif = step.map_or(0.0, |s| {
            s.cumulative_incidence.first().copied().unwrap_or(0.0)
        });
        let km_curve: Vec<(f64, f64)> = std::iter::once((0.0, 0.0))
            .chain(
                km.steps
                    .iter()
                    .filter(|s| s.time <= horizon && s.n_events > 0)
                    .map(|s| (s.time, 1.0 - s.survival)),
            )
            .collect();
        let cif_curve: Vec<(f64, f64)> = std::iter::once((0.0, 0.0))
            .chain(
                aj.steps
                    .iter()
                    .filter(|s| s.time <= horizon && s.n_events.first().is_some_and(|&e| e > 0))
                    .map(|s| {
                        (
                            s.time,
                            s.cumulative_incidence.first().copied().unwrap_or(0.0),
                        )
                    }),
            )
            .collect();
        let at_risk: Vec<(f64, usize)> = ticks
            .iter()
            .map(|&t| (t, m.iter().filter(|x| x.days >= t).count()))
            .collect();
        curves.push(json!({
            "km_risk": thin(&km_curve, 600),
            "cumulative_incidence": thin(&cif_curve, 600),
            "at_risk": at_risk,
        }));
        let person_days: f64 = m.iter().map(|x| x.days).sum();
        arms.push(json!({
            "exposed": exposed,
            "n": m.len(),
            "episodes": m.iter().filter(|x| x.cause == 1).count(),
            "deaths": m.iter().filter(|x| x.cause == 2).count(),
            "person_days": person_days,
            "km_risk_at_horizon": 1.0 - at.survival,
            "km_risk_interval": at.log_log_interval.as_ref().map(|i| json!([1.0 - i.upper, 1.0 - i.lower])),
            "n_at_risk_at_horizon": at.n_at_risk,
            "cumulative_incidence_at_horizon": cif,
            "cumulative_incidence_interval": step.and_then(|s| s.interval.first().cloned().flatten()).map(|i| interval(&i)),
        }));
    }

    let (by_stratum, crude, tables) = tables_at(members, horizon);
    let rr = kcohort_stats::risk_ratio::risk_ratio(&crude, ZeroCellCorrection::None, level).ok();
    let rd = kcohort_stats::risk_ratio::risk_difference(
        &crude,
        RiskDifferenceMethod::NewcombeHybridScore,
        level,
    )
    .ok();
    let mh = kcohort_stats::mantel_haenszel::risk_ratio(&tables, level);
    let strata: Vec<Value> = by_stratum
        .iter()
        .zip(&tables)
        .map(|((name, _), t)| {
            let r = kcohort_stats::risk_ratio::risk_ratio(t, ZeroCellCorrection::None, level).ok();
            json!({
                "stratum": name,
                "exposed": [t.exposed_cases, t.exposed_total],
                "comparator": [t.unexposed_cases, t.unexposed_total],
                "risk_ratio": r.as_ref().map(|r| r.estimate),
                "interval": r.as_ref().map(|r| interval(&r.interval)),
            })
        })
        .collect();

    // Rate ratio from person-time.
    let events = |e: bool| arm(e).filter(|m| m.cause == 1).count() as u64;
    let time = |e: bool| arm(e).map(|m| m.days).sum::<f64>();
    let rate = kcohort_stats::rate_ratio::PersonTimeCounts::new(
        events(true),
        time(true),
        events(false),
        time(false),
    )
    .and_then(|c| {
        kcohort_stats::rate_ratio::rate_ratio(
            &c,
            kcohort_stats::rate_ratio::RateRatioMethod::ExactConditional,
            level,
        )
    })
    .ok();

    // Cox: exposure plus the baseline covariates, one row per member; then the same model
    // within each stratum (effect modification: e.g. a larger hazard ratio at low eGFR).
    // Covariates constant within a stratum are left out by `cox_json`.
    let mut names = vec!["exposure"];
    names.extend_from_slice(COVARIATES);
    let baseline_cox = |ms: &[&Member]| {
        let follow: Vec<FollowUp> = ms
            .iter()
            .map(|m| FollowUp::new(m.days, m.cause == 1))
            .collect();
        let mut x = Vec::with_capacity(ms.len() * names.len());
        for m in ms {
            x.push(f64::from(u8::from(m.exposed)));
            x.extend_from_slice(&m.covariates);
        }
        cox_json(&follow, &x, &names, 1, None, level)
    };
    let all: Vec<&Member> = members.iter().collect();
    let cox = baseline_cox(&all);
    let strata_cox: Vec<Value> = by_stratum
        .iter()
        .map(|(name, ms)| {
            let mut fit = baseline_cox(ms);
            fit["stratum"] = json!(name);
            fit
        })
        .collect();

    // Time-varying exposure: counting-process rows (entry, exit] split where the time on drug
    // ends, so each member is `on drug` up to era end + grace and `off drug` after it. The
    // contrast is time on the exposure drug against time on the comparator drug; time off
    // either drug is its own category. Robust variance clustered by member.
    let time_varying_rows = |with_off: bool| {
        let (mut follow, mut x, mut cluster) = (Vec::new(), Vec::new(), Vec::new());
        for (id, m) in members.iter().enumerate() {
            let on_until = m.on_drug_days.min(m.days);
            let mut row = |f: FollowUp, on_exposure: bool, off: bool| {
                follow.push(f);
                x.push(f64::from(u8::from(on_exposure)));
                if with_off {
                    x.push(f64::from(u8::from(off)));
                }
                x.extend_from_slice(&m.covariates);
                cluster.push(id as u64);
            };
            row(
                FollowUp::new(on_until, m.cause == 1 && m.days <= on_until),
                m.exposed,
                false,
            );
            if with_off && m.days > on_until {
                row(
                    FollowUp::with_entry(on_until, m.days, m.cause == 1),
                    false,
                    true,
                );
            }
        }
        (follow, x, cluster)
    };
    const ON: &str = "on exposure drug (time-varying)";
    const OFF: &str = "off drug (either arm)";
    let mut tv_names = vec![ON, OFF];
    tv_names.extend_from_slice(COVARIATES);
    let (f, x, c) = time_varying_rows(true);
    let mut time_varying = cox_json(&f, &x, &tv_names, 1, Some(&c), level);
    // Without an estimable hazard off drug (e.g. no episode in time off either drug), the
    // off-drug time is censored instead: an as-treated model on the same rows.
    let off_left_out = time_varying["left_out"]
        .as_array()
        .is_some_and(|l| l.iter().any(|v| v == OFF));
    if off_left_out {
        tv_names.remove(1);
        let (f, x, c) = time_varying_rows(false);
        time_varying = cox_json(&f, &x, &tv_names, 1, Some(&c), level);
        time_varying["note"] = json!(
            "time off either drug had no estimable hazard, so it is censored (on-drug time only)"
        );
    }

    Ok(json!({
        "horizon_days": horizon,
        "level": level.value(),
        "arms": arms,
        "crude_risk_ratio": rr.as_ref().map(|r| json!({"estimate": r.estimate, "interval": interval(&r.interval)})),
        "crude_risk_difference": rd.as_ref().map(|r| json!({"estimate": r.estimate, "interval": interval(&r.interval)})),
        "mantel_haenszel_risk_ratio": match &mh {
            Ok(r) => json!({"estimate": r.estimate, "interval": interval(&r.interval), "strata_informative": r.n_strata_informative}),
            Err(e) => json!({"error": e.to_string()}),
        },
        "strata": strata,
        "rate_ratio": rate.as_ref().map(|r| json!({"estimate": r.estimate, "interval": interval(&r.interval)})),
        "cox": cox,
        "strata_cox": strata_cox,
        "time_varying_cox": time_varying,
        "curves": curves,
    }))
}

/// At most about `max` points of a rising step curve for drawing: the last point of each of
/// `max` equal time bins (the curve's value at each bin's end is kept exactly).
fn thin(curve: &[(f64, f64)], max: usize) -> Vec<(f64, f64)> {
    let Some(&(last, _)) = curve.last() else {
        return Vec::new();
    };
    if curve.len() <= max || last <= 0.0 {
        return curve.to_vec();
    }
    let bin = |t: f64| ((t / last) * max as f64).floor() as usize;
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(max + 2);
    for (i, &(t, v)) in curve.iter().enumerate() {
        let next_bin = curve.get(i + 1).map(|&(u, _)| bin(u));
        if i == 0 || next_bin != Some(bin(t)) {
            out.push((t, v));
        }
    }
    out
}

/// A Cox fit as JSON. The first `keep_first` columns always stay; any other column that cannot
/// be estimated is left out and reported: a constant column, and a yes/no column whose events
/// all fall on one side (monotone likelihood: a hazard ratio of 0 or infinity).
fn cox_json(
    follow: &[FollowUp],
    x: &[f64],
    names: &[&str],
    keep_first: usize,
    cluster: Option<&[u64]>,
    level: ConfidenceLevel,
) -> Value {
    let (n, p) = (follow.len(), names.len());
    let column = |i: usize, j: usize| x[i * p + j];
    let n_events = follow.iter().filter(|f| f.event).count();
    let mut dropped = Vec::new();
    let keep: Vec<usize> = (0..p)
        .filter(|&j| {
            let varies = (0..n).any(|i| column(i, j) != column(0, j));
            let binary = (0..n).all(|i| column(i, j) == 0.0 || column(i, j) == 1.0);
            let events_with = (0..n)
                .filter(|&i| follow[i].event && column(i, j) == 1.0)
                .count();
            let separated = binary && (events_with == 0 || events_with == n_events);
            let ok = j < keep_first || (varies && !separated);
            if !ok {
                dropped.push(names[j]);
            }
            ok
        })
        .collect();
    // A covariate that still cannot be estimated in the fit (separation within risk sets, or
    // collinearity) is left out too, and the model fitted again; never the first columns.
    let mut keep = keep;
    let fit = loop {
        let xk: Vec<f64> = (0..n)
            .flat_map(|i| keep.iter().map(move |&j| (i, j)))
            .map(|(i, j)| column(i, j))
            .collect();
        let nk: Vec<&str> = keep.iter().map(|&j| names[j]).collect();
        let fit = kcohort_stats::cox::fit(
            &kcohort_stats::cox::CoxData {
                follow_up: follow,
                covariates: &xk,
                names: &nk,
                strata: None,
                cluster,
            },
            &kcohort_stats::cox::CoxOptions {
                level,
                ..Default::default()
            },
        );
        if let Err(kcohort_stats::StatsError::NotEstimableCovariate { covariate, .. }) = &fit
            && let Some(pos) = keep
                .iter()
                .position(|&j| names[j] == covariate.as_str() && j >= keep_first)
        {
            dropped.push(names[keep[pos]]);
            keep.remove(pos);
            continue;
        }
        break fit;
    };
    match fit {
        Ok(f) => json!({
            "rows": f.n_rows,
            "events": f.n_events,
            "left_out": dropped,
            "robust": f.robust_variance.is_some(),
            "coefficients": f.coefficients.iter().map(|c| json!({
                "name": c.name, "hazard_ratio": c.hazard_ratio,
                "interval": interval(&c.hazard_ratio_interval),
                "p_value": c.p_value,
                "log_std_error": c.robust_std_error.unwrap_or(c.std_error),
            })).collect::<Vec<_>>(),
        }),
        Err(e) => json!({ "error": e.to_string() }),
    }
}

fn fmt_ratio(v: &Value) -> String {
    match (
        v.get("estimate").and_then(Value::as_f64),
        v.get("interval").and_then(Value::as_array),
    ) {
        (Some(e), Some(i)) => format!(
            "{e:.2} ({:.2} to {:.2})",
            i[0].as_f64().unwrap_or(f64::NAN),
            i[1].as_f64().unwrap_or(f64::NAN)
        ),
        _ => "not estimable".into(),
    }
}

pub fn run(args: CompareArgs) -> anyhow::Result<()> {
    let horizon = parse_days(&args.horizon)?;
    let members = read_members(&args)?;
    let level = ConfidenceLevel::NINETY_FIVE;
    let mut result = analyse(&members, horizon, level)?;
    result["exposure"] = json!(args.exposure);
    result["comparator"] = json!(args.comparator);
    result["strata_by"] = json!(args.strata);
    result["caution"] = json!(
        "For research and drug-safety review on de-identified data; not for decisions about individual patients, and it defers to local policy and licensed practice. Observational estimates: confounding beyond the adjusted covariates remains possible."
    );
    if let Some(dir) = &args.out {
        std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
        std::fs::write(
            dir.join("compare.json"),
            serde_json::to_string_pretty(&result)? + "\n",
        )?;
        let follow_up = match args.follow_up {
            FollowUpKind::Itt => "intention to treat",
            FollowUpKind::AsTreated => "as treated",
        };
        std::fs::write(
            dir.join("compare.html"),
            kcohort_report::compare_page::render_compare(&super::compare_view::view(
                &result, follow_up,
            )),
        )?;
        let mut w = csv::Writer::from_path(dir.join("arms.csv"))?;
        w.write_record([
            "arm",
            "n",
            "episodes",
            "deaths",
            "person_days",
            "km_risk_at_horizon",
            "cumulative_incidence_at_horizon",
        ])?;
        for (a, name) in result["arms"]
            .as_array()
            .unwrap()
            .iter()
            .zip([&args.exposure, &args.comparator])
        {
            w.write_record([
                name.clone(),
                a["n"].to_string(),
                a["episodes"].to_string(),
                a["deaths"].to_string(),
                a["person_days"].to_string(),
                a["km_risk_at_horizon"].to_string(),
                a["cumulative_incidence_at_horizon"].to_string(),
            ])?;
        }
        w.flush()?;
    }
    match args.format {
        CompareFormat::Json => println!("{}", serde_json::to_string_pretty(&result)?),
        CompareFormat::Table => {
            println!(
                "{} new users vs {} new users, first high-potassium episode, {horizon} days ({:?})",
                args.exposure, args.comparator, args.follow_up
            );
            for (a, name) in result["arms"]
                .as_array()
                .unwrap()
                .iter()
                .zip([&args.exposure, &args.comparator])
            {
                println!(
                    "  {name:<28} n {:>7}  episodes {:>6}  deaths {:>6}  risk (KM) {:.4}  cumulative incidence (death competing) {:.4}",
                    a["n"],
                    a["episodes"],
                    a["deaths"],
                    a["km_risk_at_horizon"].as_f64().unwrap_or(f64::NAN),
                    a["cumulative_incidence_at_horizon"]
                        .as_f64()
                        .unwrap_or(f64::NAN)
                );
            }
            println!(
                "  crude risk ratio            {}",
                fmt_ratio(&result["crude_risk_ratio"])
            );
            println!(
                "  risk difference             {}",
                fmt_ratio(&result["crude_risk_difference"])
            );
            println!(
                "  Mantel-Haenszel risk ratio  {} (by {})",
                fmt_ratio(&result["mantel_haenszel_risk_ratio"]),
                args.strata
            );
            println!(
                "  rate ratio                  {}",
                fmt_ratio(&result["rate_ratio"])
            );
            if let Some(coefs) = result["cox"]["coefficients"].as_array() {
                for c in coefs {
                    let i = c["interval"].as_array().unwrap();
                    println!(
                        "  Cox hazard ratio, {:<26} {:.2} ({:.2} to {:.2})",
                        c["name"].as_str().unwrap_or(""),
                        c["hazard_ratio"].as_f64().unwrap_or(f64::NAN),
                        i[0].as_f64().unwrap_or(f64::NAN),
                        i[1].as_f64().unwrap_or(f64::NAN)
                    );
                }
                if let Some(left) = result["cox"]["left_out"]
                    .as_array()
                    .filter(|l| !l.is_empty())
                {
                    let names: Vec<&str> = left.iter().filter_map(Value::as_str).collect();
                    println!(
                        "  (left out of the Cox model, not estimable here: {})",
                        names.join(", ")
                    );
                }
            } else {
                println!("  Cox model: {}", result["cox"]["error"]);
            }
            match result["time_varying_cox"]["coefficients"]
                .as_array()
                .and_then(|c| c.first())
            {
                Some(c) => println!(
                    "  time-varying Cox, on exposure vs on comparator drug {}",
                    fmt_ratio(&json!({"estimate": c["hazard_ratio"], "interval": c["interval"]}))
                ),
                None => println!(
                    "  time-varying Cox model: {}",
                    result["time_varying_cox"]["error"]
                ),
            }
            println!("  {}", result["caution"].as_str().unwrap_or(""));
        }
    }
    Ok(())
}
