//! The report's tables in flat form, for CSV and Parquet files beside the page. Counts are text
//! (a suppressed count reads `<K` or `withheld`); numbers are numbers or empty.

use crate::monthly::{RateCell, Report, ShareCell};
use crate::suppression::Count;
use serde::Serialize;

/// One cell.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(untagged)]
pub enum Value {
    Text(String),
    Number(Option<f64>),
}

/// One flat table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Table {
    pub name: &'static str,
    pub columns: Vec<&'static str>,
    pub rows: Vec<Vec<Value>>,
}

impl Table {
    /// Whether column `i` holds numbers (else text).
    pub fn is_number(&self, i: usize) -> bool {
        self.rows
            .first()
            .is_some_and(|r| matches!(r[i], Value::Number(_)))
    }
}

fn t(s: &str) -> Value {
    Value::Text(s.to_string())
}

fn c(count: Count, k: Option<u64>) -> Value {
    Value::Text(count.text(k))
}

fn n(v: Option<f64>) -> Value {
    Value::Number(v)
}

fn rate(cell: &RateCell, k: Option<u64>) -> Vec<Value> {
    vec![
        c(cell.events, k),
        n(Some(cell.days_at_risk)),
        n(cell.rate),
        n(cell.lower),
        n(cell.upper),
    ]
}

fn share(cell: &ShareCell, k: Option<u64>) -> Vec<Value> {
    vec![
        t(&cell.label),
        c(cell.numerator, k),
        c(cell.denominator, k),
        n(cell.share),
        n(cell.lower),
        n(cell.upper),
    ]
}

const RATE_COLUMNS: [&str; 5] = [
    "episodes",
    "days_at_risk",
    "rate_per_1000_days",
    "lower",
    "upper",
];
const SHARE_COLUMNS: [&str; 6] = [
    "label",
    "numerator",
    "denominator",
    "share",
    "lower",
    "upper",
];

/// Every table of the report.
pub fn tables(report: &Report) -> Vec<Table> {
    let k = report.suppress_below;
    let monthly = Table {
        name: "monthly_rates",
        columns: [
            &["month"][..],
            &RATE_COLUMNS,
            &["centre", "lower_limit", "upper_limit", "signals"],
        ]
        .concat(),
        rows: report
            .chart
            .points
            .iter()
            .map(|p| {
                let mut r = vec![t(&p.month)];
                r.extend(rate(&p.cell, k));
                r.extend([
                    n(Some(p.centre)),
                    n(Some(p.lower_limit)),
                    n(Some(p.upper_limit)),
                    t(&p.signals.join("; ")),
                ]);
                r
            })
            .collect(),
    };
    let units = Table {
        name: "units",
        columns: [&["unit"][..], &RATE_COLUMNS, &["admissions", "funnel"]].concat(),
        rows: report
            .units
            .iter()
            .chain(std::iter::once(&report.network))
            .map(|u| {
                let mut r = vec![t(&u.unit)];
                r.extend(rate(&u.cell, k));
                r.extend([
                    n(Some(u.admissions as f64)),
                    t(u.funnel.as_deref().unwrap_or("")),
                ]);
                r
            })
            .collect(),
    };
    let shares = |name: &'static str, rows: &[ShareCell]| Table {
        name,
        columns: SHARE_COLUMNS.to_vec(),
        rows: rows.iter().map(|s| share(s, k)).collect(),
    };
    let causes = Table {
        name: "causes",
        columns: [&["cause"][..], &SHARE_COLUMNS, &["rate_per_1000_days"]].concat(),
        rows: report
            .causes
            .iter()
            .map(|cause| {
                let mut r = vec![t(&cause.cause)];
                let mut s = share(&cause.share, k);
                s[0] = t(&cause.label);
                r.extend(s);
                r.push(n(cause.rate.rate));
                r
            })
            .collect(),
    };
    let rejects = Table {
        name: "rejected_rows",
        columns: vec!["table", "reason", "rows"],
        rows: report
            .quality
            .rejects
            .iter()
            .map(|r| vec![t(&r.table), t(&r.reason), n(Some(r.rows as f64))])
            .collect(),
    };
    vec![
        monthly,
        units,
        shares("severity", &report.severity),
        shares("ctcae_grades", &report.grades),
        causes,
        shares("drug_classes_at_onset", &report.drug_classes_at_onset),
        shares("indicators", &report.indicators),
        rejects,
    ]
}
