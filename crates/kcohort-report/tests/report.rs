//! The report from hand-made inputs: its numbers against hand arithmetic and published values,
//! the suppression audit over the published tables, and snapshots of report.json and the HTML
//! structure.

use kcohort_report::input::{EpisodeFacts, Provenance, ReportInput, UnitMonth};
use kcohort_report::{Count, ReportOptions, Suppression, build_report};

fn unit_month(month: &str, unit: &str, days: f64, episodes: u64) -> UnitMonth {
    UnitMonth {
        month: month.into(),
        unit: unit.into(),
        days_at_risk: days,
        admissions: 10,
        episodes,
        severe: 0,
        unconfirmed: 0,
    }
}

fn episode(unit: &str, severity: &str, causes: &[&str]) -> EpisodeFacts {
    EpisodeFacts {
        unit: unit.into(),
        unconfirmed: false,
        severity: severity.into(),
        ctcae_grade: Some(if severity == "severe" { 3 } else { 2 }),
        causes: causes.iter().map(|c| c.to_string()).collect(),
        drug_classes: causes
            .iter()
            .filter(|c| c.ends_with("inhibitor"))
            .map(|c| c.to_string())
            .collect(),
        severe_treated_1h: (severity == "severe").then_some(true),
        severe_treated_4h: (severity == "severe").then_some(true),
        repeat_within_4h: true,
        insulin_given: false,
        hypoglycemia_after_insulin: None,
        rebound: false,
        died_within_window: false,
    }
}

/// Six months, three units. The report month 2025-06: W1 3 episodes in 500 days, W2 40 in
/// 1,000, W3 25 in 1,500: 68 in 3,000 days. Earlier months: 2, 20 and 22.
fn input() -> ReportInput {
    let months: Vec<String> = (1..=6).map(|m| format!("2025-{m:02}")).collect();
    let mut unit_months = Vec::new();
    for m in &months[..5] {
        unit_months.push(unit_month(m, "W1", 500.0, 2));
        unit_months.push(unit_month(m, "W2", 1000.0, 20));
        unit_months.push(unit_month(m, "W3", 1500.0, 22));
    }
    unit_months.push(unit_month("2025-06", "W1", 500.0, 3));
    unit_months.push(unit_month("2025-06", "W2", 1000.0, 40));
    unit_months.push(unit_month("2025-06", "W3", 1500.0, 25));
    let mut episodes = Vec::new();
    for i in 0..68 {
        let unit = if i < 3 {
            "W1"
        } else if i < 43 {
            "W2"
        } else {
            "W3"
        };
        let severity = if i % 10 == 0 {
            "severe"
        } else if i % 3 == 0 {
            "moderate"
        } else {
            "mild"
        };
        let causes: &[&str] = if i % 2 == 0 {
            &["ace_inhibitor", "ckd_g3b_or_worse"]
        } else {
            &[]
        };
        episodes.push(episode(unit, severity, causes));
    }
    ReportInput {
        month: "2025-06".into(),
        months,
        unit_months,
        episodes,
        potassium_results: 1000,
        hemolysed_results: 30,
        tables: Vec::new(),
        rejects: Vec::new(),
        provenance: Provenance {
            tool_version: "test".into(),
            site_timezone: "Europe/Vienna".into(),
            extract_end: "2025-07-01T00:00:00Z".into(),
            store_generation: 2,
            derive_fingerprint: "0123456789abcdef".into(),
            input_files: Vec::new(),
            parameters: Vec::new(),
            drug_class_labels: vec![("ace_inhibitor".into(), "ACE inhibitors".into())],
        },
    }
}

#[test]
fn the_month_rate_and_its_exact_interval() {
    let r = build_report(&input(), &ReportOptions::default()).unwrap();
    let h = &r.headline.month;
    // 68 episodes / 3,000 days x 1,000 = 22.667 per 1,000 days.
    assert_eq!(h.events, Count::Shown(68));
    assert!((h.rate.unwrap() - 68.0 / 3.0).abs() < 1e-9);
    // Garwood 95% limits for 68 events: 0.5 chi2(0.025; 136) = 52.80 and
    // 0.5 chi2(0.975; 138) = 86.20 (scipy.stats.chi2.ppf, values from memory and checked
    // against kcohort-stats' own scipy fixtures in tests/reference/rates).
    assert!(
        (h.lower.unwrap() - 52.80 / 3.0).abs() < 0.02,
        "{:?}",
        h.lower
    );
    assert!(
        (h.upper.unwrap() - 86.20 / 3.0).abs() < 0.02,
        "{:?}",
        h.upper
    );
    // Previous 5 months: 44 a month over 3,000 days each.
    let p = &r.headline.previous_12_months;
    assert_eq!(p.events, Count::Shown(220));
    assert!((p.rate.unwrap() - 220.0 / 15.0).abs() < 1e-9);
    // The W2 jump (20 to 40 in the same days) puts it above the funnel's 99.8% limit.
    let w2 = r.units.iter().find(|u| u.unit == "W2").unwrap();
    assert_eq!(w2.funnel.as_deref(), Some("above_99.8"));
    // The severity bands partition the episodes.
    let total: u64 = r
        .severity
        .iter()
        .map(|s| s.numerator.shown().unwrap())
        .sum();
    assert_eq!(total, 68);
}

#[test]
fn suppressed_tables_cannot_be_solved() {
    let options = ReportOptions {
        suppression: Suppression { below: Some(11) },
        ..ReportOptions::default()
    };
    let r = build_report(&input(), &options).unwrap();
    let w1 = r.units.iter().find(|u| u.unit == "W1").unwrap();
    assert_eq!(w1.cell.events, Count::Small);
    assert_eq!(w1.cell.rate, None, "a rate would reveal the count");
    // Solve the published units line: the hidden cells sum to total - shown; each small cell is
    // 1..10, each withheld one at least 1. A hidden cell is disclosed when only one value fits.
    let published: Vec<Count> = r.units.iter().map(|u| u.cell.events).collect();
    let hidden: Vec<Count> = published
        .iter()
        .copied()
        .filter(|c| c.shown().is_none())
        .collect();
    assert!(hidden.len() >= 2, "{published:?}");
    if let Count::Shown(total) = r.network.cell.events {
        let shown: u64 = published.iter().filter_map(|c| c.shown()).sum();
        let rest = total - shown;
        for (i, c) in hidden.iter().enumerate() {
            let (lo, hi) = if *c == Count::Small {
                (1, 10)
            } else {
                (1, rest)
            };
            let feasible: Vec<u64> = (lo..=hi)
                .filter(|v| {
                    let others: Vec<&Count> = hidden
                        .iter()
                        .enumerate()
                        .filter(|(j, _)| *j != i)
                        .map(|(_, c)| c)
                        .collect();
                    let low: u64 = others.len() as u64;
                    let high: u64 = others
                        .iter()
                        .map(|c| if **c == Count::Small { 10 } else { rest })
                        .sum();
                    *v <= rest && rest - v >= low && rest - v <= high
                })
                .collect();
            assert!(
                feasible.len() > 1,
                "hidden cell {i} is pinned to {feasible:?}"
            );
        }
    }
    let html = kcohort_report::html::render(&r);
    assert!(html.contains("&lt;11"), "the page marks suppressed counts");
    let row = html.lines().find(|l| l.contains("<td>W1</td>")).unwrap();
    assert!(!row.contains("<td>3</td>"), "{row}");
}

fn rounded(v: &mut serde_json::Value) {
    match v {
        serde_json::Value::Number(n) if n.is_f64() => {
            let x = (n.as_f64().unwrap() * 1e6).round() / 1e6;
            *v = serde_json::json!(x);
        }
        serde_json::Value::Array(a) => a.iter_mut().for_each(rounded),
        serde_json::Value::Object(o) => o.values_mut().for_each(rounded),
        _ => {}
    }
}

#[test]
fn report_json_snapshot() {
    let r = build_report(&input(), &ReportOptions::default()).unwrap();
    let mut value = serde_json::to_value(&r).unwrap();
    // Floats rounded, so the snapshot is about the numbers, not their last binary digit.
    rounded(&mut value);
    insta::assert_json_snapshot!("report_json", value);
}

#[test]
fn html_structure_snapshot() {
    let r = build_report(&input(), &ReportOptions::default()).unwrap();
    let html = kcohort_report::html::render(&r);
    // The outline: headings, cautions, charts and tables in order.
    let mut outline = Vec::new();
    let tags = ["<h1", "<h2", "<svg", "<table", "<p class=\"caution\""];
    let mut rest = html.as_str();
    while let Some((i, tag)) = tags
        .iter()
        .filter_map(|t| rest.find(t).map(|i| (i, *t)))
        .min()
    {
        let end = rest[i..].find('>').map_or(rest.len(), |e| i + e + 1);
        let text_end = rest[end..].find('<').map_or(end, |e| end + e);
        outline.push(format!(
            "{} {}",
            tag.trim_start_matches('<'),
            rest[end..text_end].trim()
        ));
        rest = &rest[end..];
    }
    insta::assert_debug_snapshot!("html_outline", outline);
    // Self-contained: no scripts, stylesheets or fonts from anywhere; the only URL is the SVG
    // namespace.
    for forbidden in ["<script", "https://", "@import", "<link", "url("] {
        assert!(!html.contains(forbidden), "{forbidden}");
    }
    assert_eq!(
        html.matches("http://").count(),
        html.matches("http://www.w3.org/2000/svg").count()
    );
}
