//! The monthly report's numbers: rates with exact intervals, the u-chart of the network and of
//! each unit, the funnel of units, severity, causes, process and safety indicators and data
//! quality, each count passed through the report's [`Suppression`].

use crate::input::{EpisodeFacts, Provenance, ReportInput, UnitMonth};
use crate::suppression::{Count, Suppression};
use kcohort_stats::control_chart::{CentreLine, ChartOptions, Rule, u_chart};
use kcohort_stats::funnel::{FunnelClass, FunnelOptions, rate_funnel};
use kcohort_stats::poisson_rate::poisson_rate;
use kcohort_stats::proportion::{ProportionMethod, proportion};
use kcohort_stats::rate_ratio::{PersonTimeCounts, RateRatioMethod, rate_ratio};
use kcohort_stats::{ConfidenceLevel, StatsError};
use serde::Serialize;
use std::collections::BTreeMap;

/// Rates are per this many days at risk.
pub const PER_DAYS: f64 = 1000.0;

/// The cautions every report carries.
pub const CAUTIONS: &[&str] = &[
    "This report supports quality improvement and research on de-identified data. It is not for \
     decisions about individual patients.",
    "Follow local policy and licensed clinical practice; the definitions here are for counting \
     and comparing, not for diagnosis or treatment.",
    "Counts from routine data depend on how often potassium is measured and recorded; compare \
     units and months with that in mind.",
];

/// Choices of one report.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ReportOptions {
    pub suppression: Suppression,
    /// Level of every interval (0.95).
    pub level: f64,
}

impl Default for ReportOptions {
    fn default() -> Self {
        ReportOptions {
            suppression: Suppression::NONE,
            level: 0.95,
        }
    }
}

/// A rate per 1,000 days at risk; the rate and interval are `None` when the count is suppressed
/// or there is no time at risk.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RateCell {
    pub events: Count,
    pub days_at_risk: f64,
    pub rate: Option<f64>,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
}

/// A share with its Wilson interval; `None` parts when suppressed or the denominator is 0.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ShareCell {
    pub label: String,
    pub numerator: Count,
    pub denominator: Count,
    pub share: Option<f64>,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Headline {
    pub month: RateCell,
    pub previous_12_months: RateCell,
    /// This month's rate over the previous 12 months' (exact conditional interval).
    pub rate_ratio: Option<(f64, f64, f64)>,
    pub severe: Count,
    pub deaths_within_30_days: Count,
    pub unconfirmed: Count,
}

/// One month of a u-chart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChartMonth {
    pub month: String,
    pub cell: RateCell,
    pub centre: f64,
    pub lower_limit: f64,
    pub upper_limit: f64,
    pub signals: Vec<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MonthlyChart {
    pub laney: bool,
    pub sigma_z: Option<f64>,
    pub rule_set: String,
    pub points: Vec<ChartMonth>,
    /// The signals in words, month by month.
    pub explanation: Vec<String>,
}

/// Special-cause signals of one unit's own u-chart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitSignals {
    pub unit: String,
    pub months_with_signals: Vec<String>,
    pub rules: Vec<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitRow {
    pub unit: String,
    pub cell: RateCell,
    pub admissions: u64,
    /// Where the unit falls on the funnel (`within`, `above_inner`, `above_outer`, ...);
    /// `None` when its count is suppressed or it has no time at risk.
    pub funnel: Option<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FunnelSection {
    pub target_rate: Option<f64>,
    pub overdispersed: bool,
    /// Points of the 95% and 99.8% limits: (days at risk, lower95, upper95, lower998, upper998),
    /// rates per 1,000 days.
    pub limits: Vec<(f64, f64, f64, f64, f64)>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CauseRow {
    pub cause: String,
    pub label: String,
    pub share: ShareCell,
    pub rate: RateCell,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QualitySection {
    pub tables: Vec<crate::input::TableCount>,
    pub rejects: Vec<crate::input::RejectCount>,
    pub hemolysed: ShareCell,
    pub unconfirmed: ShareCell,
}

/// The whole report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Report {
    pub month: String,
    pub suppress_below: Option<u64>,
    pub level: f64,
    pub cautions: Vec<String>,
    pub headline: Headline,
    pub chart: MonthlyChart,
    pub unit_signals: Vec<UnitSignals>,
    pub units: Vec<UnitRow>,
    pub network: UnitRow,
    pub funnel: FunnelSection,
    pub severity: Vec<ShareCell>,
    pub grades: Vec<ShareCell>,
    pub causes: Vec<CauseRow>,
    pub drug_classes_at_onset: Vec<ShareCell>,
    pub indicators: Vec<ShareCell>,
    pub quality: QualitySection,
    pub provenance: Provenance,
}

fn level(options: &ReportOptions) -> Result<ConfidenceLevel, StatsError> {
    ConfidenceLevel::new(options.level)
}

fn rate_cell(events: Count, true_events: u64, days: f64, lv: ConfidenceLevel) -> RateCell {
    let computed = (days > 0.0 && events.shown().is_some())
        .then(|| poisson_rate(true_events, days, PER_DAYS, lv).ok())
        .flatten();
    RateCell {
        events,
        days_at_risk: days,
        rate: computed.as_ref().map(|r| r.rate),
        lower: computed.as_ref().map(|r| r.interval.lower),
        upper: computed.as_ref().map(|r| r.interval.upper),
    }
}

fn share_cell(
    label: &str,
    num: Count,
    n: u64,
    den: Count,
    d: u64,
    lv: ConfidenceLevel,
) -> ShareCell {
    let computed = (d > 0 && num.shown().is_some() && den.shown().is_some())
        .then(|| proportion(n, d, ProportionMethod::Wilson, lv).ok())
        .flatten();
    ShareCell {
        label: label.to_string(),
        numerator: num,
        denominator: den,
        share: computed.as_ref().map(|p| p.estimate),
        lower: computed.as_ref().map(|p| p.interval.lower),
        upper: computed.as_ref().map(|p| p.interval.upper),
    }
}

fn rule_words(rule: Rule) -> &'static str {
    match rule {
        Rule::BeyondLimits => "a point outside the control limits",
        Rule::Shift => "a shift: eight or more months in a row on one side of the centre line",
        Rule::Trend => "a trend: six or more months in a row rising or falling",
        Rule::TwoOfThreeBeyondTwoSigma => "two of three months beyond two sigma on one side",
    }
}

/// Per-month totals of a set of unit-months, over `months`.
fn monthly_totals(rows: &[&UnitMonth], months: &[String]) -> Vec<(u64, f64)> {
    months
        .iter()
        .map(|m| {
            rows.iter()
                .filter(|r| &r.month == m)
                .fold((0, 0.0), |(e, d), r| (e + r.episodes, d + r.days_at_risk))
        })
        .collect()
}

/// A u-chart of some months: whether Laney's variant is used, σ_z, and the points by month
/// index.
type MonthChart = (
    bool,
    Option<f64>,
    Vec<(usize, kcohort_stats::control_chart::ChartPoint)>,
);

/// u-chart over the months with time at risk; Laney's u′ when the data are over-dispersed
/// (σ_z above 1).
fn chart_of(totals: &[(u64, f64)]) -> Result<Option<MonthChart>, StatsError> {
    let used: Vec<usize> = (0..totals.len()).filter(|&i| totals[i].1 > 0.0).collect();
    if used.len() < 3 {
        return Ok(None);
    }
    let events: Vec<u64> = used.iter().map(|&i| totals[i].0).collect();
    let exposure: Vec<f64> = used.iter().map(|&i| totals[i].1 / PER_DAYS).collect();
    if events.iter().all(|&e| e == 0) {
        return Ok(None);
    }
    let mut options = ChartOptions {
        centre_line: CentreLine::AllPeriods,
        laney: true,
        sigma_multiplier: 3.0,
        period_label: "month".to_string(),
    };
    let sigma_z = u_chart(&events, &exposure, &options)
        .ok()
        .and_then(|c| c.sigma_z);
    let laney = sigma_z.is_some_and(|z| z > 1.0);
    options.laney = laney;
    let c = u_chart(&events, &exposure, &options)?;
    Ok(Some((
        laney,
        if laney { c.sigma_z } else { sigma_z },
        used.into_iter().zip(c.points).collect(),
    )))
}

fn count_by<'a>(
    episodes: &'a [&'a EpisodeFacts],
    key: impl Fn(&EpisodeFacts) -> Vec<String>,
) -> BTreeMap<String, u64> {
    let mut out = BTreeMap::new();
    for e in episodes {
        for k in key(e) {
            *out.entry(k).or_insert(0) += 1;
        }
    }
    out
}

/// Labels of causes that are not drug classes.
fn cause_label(cause: &str, labels: &BTreeMap<String, String>) -> String {
    match cause {
        "acute_kidney_injury" => "acute kidney injury (KDIGO, creatinine)".into(),
        "ckd_g3b_or_worse" => "chronic kidney disease, baseline eGFR below 45".into(),
        "hyperglycemia" => "hyperglycemia".into(),
        "metabolic_acidosis" => "metabolic acidosis".into(),
        "hyperosmolality" => "hyperosmolality".into(),
        "rhabdomyolysis" => "rhabdomyolysis".into(),
        "tumour_lysis" => "laboratory tumour lysis".into(),
        "adrenal_insufficiency" => "adrenal insufficiency or hypoaldosteronism (diagnosis)".into(),
        "none_identified" => "none identified".into(),
        other => labels
            .get(other)
            .cloned()
            .unwrap_or_else(|| other.replace('_', " ")),
    }
}

/// Build the report from its input.
pub fn build_report(input: &ReportInput, options: &ReportOptions) -> Result<Report, StatsError> {
    let lv = level(options)?;
    let s = options.suppression;
    let k = s.below;
    let month_index = input
        .months
        .iter()
        .position(|m| m == &input.month)
        .ok_or_else(|| {
            StatsError::invalid(
                "report month",
                "one of the chart's months",
                input.month.clone(),
            )
        })?;

    // Network series and the headline.
    let all: Vec<&UnitMonth> = input.unit_months.iter().collect();
    let totals = monthly_totals(&all, &input.months);
    let (events_m, days_m) = totals[month_index];
    let previous: Vec<(u64, f64)> = totals[month_index.saturating_sub(12)..month_index].to_vec();
    let (events_p, days_p) = previous
        .iter()
        .fold((0, 0.0), |(e, d), (a, b)| (e + a, d + b));
    let (prev_cells, prev_total) =
        s.line(&previous.iter().map(|p| p.0).collect::<Vec<_>>(), events_p);
    let month_cell = rate_cell(s.count(events_m), events_m, days_m, lv);
    let rate_ratio = (days_m > 0.0
        && days_p > 0.0
        && month_cell.events.shown().is_some()
        && prev_total.shown().is_some())
    .then(|| {
        PersonTimeCounts::new(events_m, days_m, events_p, days_p)
            .and_then(|c| rate_ratio(&c, RateRatioMethod::ExactConditional, lv))
            .ok()
    })
    .flatten()
    .map(|r| (r.estimate, r.interval.lower, r.interval.upper));

    let month_episodes: Vec<&EpisodeFacts> = input.episodes.iter().collect();
    let confirmed: Vec<&EpisodeFacts> = month_episodes
        .iter()
        .copied()
        .filter(|e| !e.unconfirmed)
        .collect();
    let n = confirmed.len() as u64;
    let severe = confirmed.iter().filter(|e| e.severity == "severe").count() as u64;
    let deaths = confirmed.iter().filter(|e| e.died_within_window).count() as u64;
    let unconfirmed = month_episodes.len() as u64 - n;

    let headline = Headline {
        month: month_cell.clone(),
        previous_12_months: rate_cell(prev_total, events_p, days_p, lv),
        rate_ratio,
        severe: s.count(severe),
        deaths_within_30_days: s.count(deaths),
        unconfirmed: s.count(unconfirmed),
    };

    // The network u-chart.
    let mut points = Vec::new();
    let mut explanation = Vec::new();
    let mut by_rule: BTreeMap<&str, Vec<String>> = BTreeMap::new();
    let (laney, sigma_z) = match chart_of(&totals)? {
        None => {
            explanation
                .push("Too few months with time at risk or episodes for a control chart.".into());
            (false, None)
        }
        Some((laney, sigma_z, chart_points)) => {
            for (i, p) in chart_points {
                let shown = if i >= month_index.saturating_sub(12) && i < month_index {
                    prev_cells[i - month_index.saturating_sub(12)]
                } else if i == month_index {
                    month_cell.events
                } else {
                    s.count(totals[i].0)
                };
                let signals: Vec<String> =
                    p.signals.iter().map(|g| g.explanation.clone()).collect();
                for g in &p.signals {
                    by_rule
                        .entry(rule_words(g.rule))
                        .or_default()
                        .push(input.months[i].clone());
                }
                points.push(ChartMonth {
                    month: input.months[i].clone(),
                    cell: rate_cell(shown, totals[i].0, totals[i].1, lv),
                    centre: p.centre,
                    lower_limit: p.lower.max(0.0),
                    upper_limit: p.upper,
                    signals,
                });
            }
            for (rule, months) in &by_rule {
                let n = if months.len() == 1 {
                    "1 month".to_string()
                } else {
                    format!("{} months", months.len())
                };
                explanation.push(format!("{} ({n}): {rule}.", months.join(", ")));
            }
            if explanation.is_empty() {
                explanation.push(
                    "No special-cause signal: the months vary within what chance alone would give."
                        .into(),
                );
            }
            (laney, sigma_z)
        }
    };
    let chart = MonthlyChart {
        laney,
        sigma_z,
        rule_set: kcohort_stats::control_chart::RULE_SET.to_string(),
        points,
        explanation,
    };

    // Each unit's own chart.
    let mut unit_names: Vec<&str> = input.unit_months.iter().map(|u| u.unit.as_str()).collect();
    unit_names.sort();
    unit_names.dedup();
    let mut unit_signals = Vec::new();
    for unit in &unit_names {
        let rows: Vec<&UnitMonth> = input
            .unit_months
            .iter()
            .filter(|u| &u.unit == unit)
            .collect();
        let t = monthly_totals(&rows, &input.months);
        if let Some((_, _, pts)) = chart_of(&t)? {
            let flagged: Vec<(usize, Vec<Rule>)> = pts
                .iter()
                .filter(|(_, p)| !p.signals.is_empty())
                .map(|(i, p)| (*i, p.signals.iter().map(|g| g.rule).collect()))
                .collect();
            if !flagged.is_empty() {
                let mut rules: Vec<String> = flagged
                    .iter()
                    .flat_map(|(_, r)| r.iter().map(|x| rule_words(*x).to_string()))
                    .collect();
                rules.sort();
                rules.dedup();
                unit_signals.push(UnitSignals {
                    unit: unit.to_string(),
                    months_with_signals: flagged
                        .iter()
                        .map(|(i, _)| input.months[*i].clone())
                        .collect(),
                    rules,
                });
            }
        }
    }

    // Units of the month, the network row and the funnel.
    let month_units: Vec<&UnitMonth> = input
        .unit_months
        .iter()
        .filter(|u| u.month == input.month && (u.days_at_risk > 0.0 || u.episodes > 0))
        .collect();
    let (unit_cells, network_count) = s.line(
        &month_units.iter().map(|u| u.episodes).collect::<Vec<_>>(),
        events_m,
    );
    let with_time: Vec<usize> = (0..month_units.len())
        .filter(|&i| month_units[i].days_at_risk > 0.0)
        .collect();
    let funnel_result = if with_time.len() >= 2 && events_m > 0 {
        rate_funnel(
            &with_time
                .iter()
                .map(|&i| month_units[i].episodes)
                .collect::<Vec<_>>(),
            &with_time
                .iter()
                .map(|&i| month_units[i].days_at_risk)
                .collect::<Vec<_>>(),
            None,
            &FunnelOptions::default(),
        )
        .ok()
    } else {
        None
    };
    let class_name = |c: FunnelClass| match c {
        FunnelClass::Within => "within",
        FunnelClass::AboveInner => "above_95",
        FunnelClass::BelowInner => "below_95",
        FunnelClass::AboveOuter => "above_99.8",
        FunnelClass::BelowOuter => "below_99.8",
    };
    let units: Vec<UnitRow> = month_units
        .iter()
        .enumerate()
        .map(|(i, u)| {
            let cell = rate_cell(unit_cells[i], u.episodes, u.days_at_risk, lv);
            let funnel = funnel_result.as_ref().and_then(|f| {
                let pos = with_time.iter().position(|&j| j == i)?;
                cell.events.shown()?;
                Some(class_name(f.units[pos].class).to_string())
            });
            UnitRow {
                unit: u.unit.clone(),
                cell,
                admissions: u.admissions,
                funnel,
            }
        })
        .collect();
    let network = UnitRow {
        unit: "whole network".into(),
        cell: rate_cell(network_count, events_m, days_m, lv),
        admissions: month_units.iter().map(|u| u.admissions).sum(),
        funnel: None,
    };
    let funnel = match &funnel_result {
        Some(f) => {
            let max_days = with_time
                .iter()
                .map(|&i| month_units[i].days_at_risk)
                .fold(0.0, f64::max);
            let target = f.target * PER_DAYS;
            let limits = (1..=40)
                .map(|j| {
                    let days = max_days * 1.1 * j as f64 / 40.0;
                    let expected = f.target * days;
                    let lim = |p: f64| {
                        kcohort_stats::funnel::poisson_limit(expected, p)
                            .map(|x| x / days * PER_DAYS)
                            .unwrap_or(f64::NAN)
                    };
                    (days, lim(0.025), lim(0.975), lim(0.001), lim(0.999))
                })
                .collect();
            FunnelSection {
                target_rate: Some(target),
                overdispersed: f.overdispersed,
                limits,
            }
        }
        None => FunnelSection {
            target_rate: None,
            overdispersed: false,
            limits: Vec::new(),
        },
    };

    // Severity and grades (partitions of the confirmed episodes).
    let total_count = s.count(n);
    let partition = |labels: &[&str], counts: &[u64]| -> Vec<ShareCell> {
        let (cells, total) = s.line(counts, n);
        labels
            .iter()
            .zip(cells.iter().zip(counts))
            .map(|(l, (c, &x))| share_cell(l, *c, x, total, n, lv))
            .collect()
    };
    let bands = ["mild", "moderate", "severe"];
    let band_counts: Vec<u64> = bands
        .iter()
        .map(|b| confirmed.iter().filter(|e| e.severity == *b).count() as u64)
        .collect();
    let severity = partition(&bands, &band_counts);
    let grade_labels = ["grade 1", "grade 2", "grade 3", "grade 4", "no grade"];
    let grade_counts: Vec<u64> = (1..=5)
        .map(|g| {
            confirmed
                .iter()
                .filter(|e| {
                    if g == 5 {
                        e.ctcae_grade.is_none()
                    } else {
                        e.ctcae_grade == Some(g)
                    }
                })
                .count() as u64
        })
        .collect();
    let grades = partition(&grade_labels, &grade_counts);

    // Causes (multi-label: no partition) and drug classes at onset.
    let labels: BTreeMap<String, String> =
        input.provenance.drug_class_labels.iter().cloned().collect();
    let by_cause = count_by(&confirmed, |e| {
        if e.causes.is_empty() {
            vec!["none_identified".into()]
        } else {
            e.causes.clone()
        }
    });
    let mut causes: Vec<CauseRow> = by_cause
        .iter()
        .map(|(cause, &x)| {
            let c = s.count(x);
            CauseRow {
                cause: cause.clone(),
                label: cause_label(cause, &labels),
                share: share_cell(cause, c, x, total_count, n, lv),
                rate: rate_cell(c, x, days_m, lv),
            }
        })
        .collect();
    causes.sort_by(|a, b| {
        let x = by_cause[&b.cause].cmp(&by_cause[&a.cause]);
        x.then_with(|| a.cause.cmp(&b.cause))
    });
    // Most often active first, then by name.
    let mut by_drug: Vec<(String, u64)> = count_by(&confirmed, |e| e.drug_classes.clone())
        .into_iter()
        .collect();
    by_drug.sort_by(|(a, x), (b, y)| y.cmp(x).then_with(|| a.cmp(b)));
    let drug_classes_at_onset: Vec<ShareCell> = by_drug
        .iter()
        .map(|(class, x)| {
            share_cell(
                &cause_label(class, &labels),
                s.count(*x),
                *x,
                total_count,
                n,
                lv,
            )
        })
        .collect();

    // Process and safety indicators.
    let indicator = |label: &str, den: Vec<&&EpisodeFacts>, hit: &dyn Fn(&EpisodeFacts) -> bool| {
        let d = den.len() as u64;
        let x = den.iter().filter(|e| hit(e)).count() as u64;
        share_cell(label, s.count(x), x, s.count(d), d, lv)
    };
    let severe_eps: Vec<&&EpisodeFacts> = confirmed
        .iter()
        .filter(|e| e.severity == "severe")
        .collect();
    let insulin_eps: Vec<&&EpisodeFacts> = confirmed.iter().filter(|e| e.insulin_given).collect();
    let indicators = vec![
        indicator(
            "severe episodes treated within 1 h of the result",
            severe_eps.clone(),
            &|e| e.severe_treated_1h == Some(true),
        ),
        indicator(
            "severe episodes treated within 4 h of the result",
            severe_eps,
            &|e| e.severe_treated_4h == Some(true),
        ),
        indicator(
            "repeat potassium within 4 h of the high result",
            confirmed.iter().collect(),
            &|e| e.repeat_within_4h,
        ),
        indicator("low glucose within 6 h after insulin", insulin_eps, &|e| {
            e.hypoglycemia_after_insulin == Some(true)
        }),
        indicator("rebound within 24 h", confirmed.iter().collect(), &|e| {
            e.rebound
        }),
        indicator("death within 30 days", confirmed.iter().collect(), &|e| {
            e.died_within_window
        }),
    ];

    let quality = QualitySection {
        tables: input.tables.clone(),
        rejects: input.rejects.clone(),
        hemolysed: share_cell(
            "potassium results hemolysed (excluded)",
            Count::Shown(input.hemolysed_results),
            input.hemolysed_results,
            Count::Shown(input.potassium_results),
            input.potassium_results,
            lv,
        ),
        unconfirmed: share_cell(
            "hospital-acquired episodes unconfirmed (possible pseudohyperkalemia) this month",
            s.count(unconfirmed),
            unconfirmed,
            s.count(month_episodes.len() as u64),
            month_episodes.len() as u64,
            lv,
        ),
    };

    Ok(Report {
        month: input.month.clone(),
        suppress_below: k,
        level: options.level,
        cautions: CAUTIONS.iter().map(|c| c.to_string()).collect(),
        headline,
        chart,
        unit_signals,
        units,
        network,
        funnel,
        severity,
        grades,
        causes,
        drug_classes_at_onset,
        indicators,
        quality,
        provenance: input.provenance.clone(),
    })
}
