//! The page of `kcohort compare`: the comparison's JSON turned into the plain view that
//! `kcohort_report::compare_page` draws.

use kcohort_report::compare_page::{
    ArmView, AtRisk, CoefficientRow, CompareView, CurvePoint, Estimate, ForestRow, RatioRow,
};
use serde_json::Value;

fn f(v: &Value) -> Option<f64> {
    v.as_f64().filter(|x| x.is_finite())
}

fn bounds(v: &Value) -> (Option<f64>, Option<f64>) {
    (f(&v[0]), f(&v[1]))
}

fn curve(v: &Value) -> Vec<CurvePoint> {
    v.as_array().map_or(Vec::new(), |points| {
        points
            .iter()
            .filter_map(|p| {
                Some(CurvePoint {
                    time_days: f(&p[0])?,
                    risk: f(&p[1])?,
                })
            })
            .collect()
    })
}

/// (estimate, lower, upper) of `{"estimate", "interval"}`.
fn ratio(v: &Value) -> (Option<f64>, Option<f64>, Option<f64>) {
    let (l, u) = bounds(&v["interval"]);
    (f(&v["estimate"]), l, u)
}

/// The exposure's hazard ratio of a Cox fit's JSON, as `{"estimate", "interval"}`.
fn first_hazard_ratio(fit: &Value) -> (Option<f64>, Option<f64>, Option<f64>, String) {
    match fit["coefficients"].as_array().and_then(|c| c.first()) {
        Some(c) => {
            let (l, u) = bounds(&c["interval"]);
            (f(&c["hazard_ratio"]), l, u, String::new())
        }
        None => (
            None,
            None,
            None,
            fit["error"].as_str().unwrap_or("not estimable").to_string(),
        ),
    }
}

pub fn view(result: &Value, follow_up: &str) -> CompareView {
    let text = |k: &str| result[k].as_str().unwrap_or("").to_string();
    let (exposure, comparator, strata_by) =
        (text("exposure"), text("comparator"), text("strata_by"));
    let arms: Vec<ArmView> = result["arms"]
        .as_array()
        .into_iter()
        .flatten()
        .zip(result["curves"].as_array().into_iter().flatten())
        .zip([&exposure, &comparator])
        .map(|((a, c), name)| {
            let (kl, ku) = bounds(&a["km_risk_interval"]);
            let (cl, cu) = bounds(&a["cumulative_incidence_interval"]);
            ArmView {
                name: name.clone(),
                n: a["n"].as_u64().unwrap_or(0),
                episodes: a["episodes"].as_u64().unwrap_or(0),
                deaths: a["deaths"].as_u64().unwrap_or(0),
                person_days: f(&a["person_days"]).unwrap_or(0.0),
                km_risk: f(&a["km_risk_at_horizon"]).map(|e| Estimate {
                    estimate: e,
                    lower: kl,
                    upper: ku,
                }),
                cumulative_incidence: f(&a["cumulative_incidence_at_horizon"]).map(|e| Estimate {
                    estimate: e,
                    lower: cl,
                    upper: cu,
                }),
                km_curve: curve(&c["km_risk"]),
                cif_curve: curve(&c["cumulative_incidence"]),
                at_risk: c["at_risk"].as_array().map_or(Vec::new(), |points| {
                    points
                        .iter()
                        .filter_map(|p| {
                            Some(AtRisk {
                                time_days: f(&p[0])?,
                                n: p[1].as_u64()?,
                            })
                        })
                        .collect()
                }),
            }
        })
        .collect();

    let counts = |e: &Value, c: &Value| {
        format!(
            "{}/{} vs {}/{}",
            e[0].as_u64().unwrap_or(0),
            e[1].as_u64().unwrap_or(0),
            c[0].as_u64().unwrap_or(0),
            c[1].as_u64().unwrap_or(0)
        )
    };
    // The crude table is the sum of the strata's tables.
    let sum = |arm: &str, k: usize| -> u64 {
        result["strata"]
            .as_array()
            .into_iter()
            .flatten()
            .map(|s| s[arm][k].as_u64().unwrap_or(0))
            .sum()
    };
    let crude_counts = format!(
        "{}/{} vs {}/{} by day {:.0}",
        sum("exposed", 0),
        sum("exposed", 1),
        sum("comparator", 0),
        sum("comparator", 1),
        f(&result["horizon_days"]).unwrap_or(0.0)
    );

    let mut ratios = Vec::new();
    let mut forest = Vec::new();
    let mut push = |measure: &str,
                    (e, l, u): (Option<f64>, Option<f64>, Option<f64>),
                    note: String,
                    in_forest: bool| {
        ratios.push(RatioRow {
            measure: measure.into(),
            estimate: e,
            lower: l,
            upper: u,
            note: note.clone(),
        });
        if in_forest {
            forest.push(ForestRow {
                group: "Overall".into(),
                label: measure.into(),
                estimate: e,
                lower: l,
                upper: u,
                // The forest's detail column is narrow: long notes stay in the ratios table.
                detail: if note.chars().count() > 40 {
                    String::new()
                } else {
                    note
                },
            });
        }
    };
    push(
        "crude risk ratio",
        ratio(&result["crude_risk_ratio"]),
        crude_counts,
        true,
    );
    push(
        &format!("Mantel–Haenszel risk ratio by {strata_by}"),
        ratio(&result["mantel_haenszel_risk_ratio"]),
        result["mantel_haenszel_risk_ratio"]["error"]
            .as_str()
            .unwrap_or("")
            .to_string(),
        true,
    );
    push(
        "risk difference",
        ratio(&result["crude_risk_difference"]),
        "exposed minus comparator, risk by counting".into(),
        false,
    );
    push(
        "rate ratio (person-time)",
        ratio(&result["rate_ratio"]),
        "exact conditional interval".into(),
        true,
    );
    let (e, l, u, note) = first_hazard_ratio(&result["cox"]);
    push(
        "Cox hazard ratio, adjusted",
        (e, l, u),
        if note.is_empty() {
            "baseline covariates".into()
        } else {
            note
        },
        true,
    );
    let (e, l, u, note) = first_hazard_ratio(&result["time_varying_cox"]);
    push(
        "Cox hazard ratio, time-varying exposure",
        (e, l, u),
        if note.is_empty() {
            result["time_varying_cox"]["note"]
                .as_str()
                .unwrap_or("on exposure drug vs on comparator drug, counting-process rows")
                .to_string()
        } else {
            note
        },
        true,
    );
    for s in result["strata"].as_array().into_iter().flatten() {
        let (l, u) = bounds(&s["interval"]);
        forest.push(ForestRow {
            group: format!("Risk ratio by {strata_by}"),
            label: s["stratum"].as_str().unwrap_or("").to_string(),
            estimate: f(&s["risk_ratio"]),
            lower: l,
            upper: u,
            detail: counts(&s["exposed"], &s["comparator"]),
        });
    }
    for s in result["strata_cox"].as_array().into_iter().flatten() {
        let (e, l, u, note) = first_hazard_ratio(s);
        forest.push(ForestRow {
            group: format!("Cox hazard ratio by {strata_by}"),
            label: s["stratum"].as_str().unwrap_or("").to_string(),
            estimate: e,
            lower: l,
            upper: u,
            detail: if note.is_empty() {
                format!("{} events", s["events"].as_u64().unwrap_or(0))
            } else {
                "not estimable in this stratum".into()
            },
        });
    }
    let cox: Vec<CoefficientRow> = result["cox"]["coefficients"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|c| {
            let (l, u) = bounds(&c["interval"]);
            Some(CoefficientRow {
                name: c["name"].as_str()?.to_string(),
                hazard_ratio: f(&c["hazard_ratio"])?,
                lower: l?,
                upper: u?,
                p_value: f(&c["p_value"]).unwrap_or(f64::NAN),
            })
        })
        .collect();
    let left_out = result["cox"]["left_out"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|v| v.as_str().map(str::to_string))
        .collect();
    let mut notes = vec![
        "Risks by counting count an episode by the horizon over everyone who entered the arm; Kaplan–Meier treats death as censoring, Aalen–Johansen treats it as a competing event.".to_string(),
    ];
    if let Some(e) = result["cox"]["error"].as_str() {
        notes.push(format!("Cox model: {e}"));
    }
    CompareView {
        title: format!(
            "{exposure} new users vs {comparator} new users: first high-potassium episode"
        ),
        exposure,
        comparator,
        horizon_days: f(&result["horizon_days"]).unwrap_or(0.0),
        follow_up: follow_up.into(),
        strata_by,
        caution: text("caution"),
        arms,
        ratios,
        forest,
        cox,
        left_out,
        notes,
    }
}
