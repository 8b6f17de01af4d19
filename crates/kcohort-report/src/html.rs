//! The report as one self-contained HTML page: inline CSS and SVG, no scripts, nothing fetched.
//! Readable on screen and in print; every chart has a title, a description and a table beside it.

use crate::monthly::{ChartMonth, PER_DAYS, RateCell, Report, ShareCell, UnitRow};
use crate::suppression::Count;
use crate::svg::{Chart, escape, trim_number};
use std::fmt::Write;

pub(crate) const STYLE: &str = r#"
body { font: 15px/1.45 Georgia, 'Times New Roman', serif; color: #1d2330; margin: 0 auto; max-width: 980px; padding: 24px; background: #fbfaf7; }
h1 { font-size: 26px; margin: 0 0 4px; } h2 { font-size: 19px; margin: 32px 0 8px; border-bottom: 1px solid #c9c3b6; padding-bottom: 4px; }
.caution { border-left: 5px solid #7a5c00; background: #f6efd9; padding: 8px 12px; margin: 12px 0; }
.figures { display: flex; flex-wrap: wrap; gap: 12px; } .figure { border: 1px solid #c9c3b6; padding: 10px 14px; min-width: 200px; background: #fff; }
.figure .big { font-size: 28px; font-weight: bold; } .figure .small { color: #4a4f5c; font-size: 13px; }
table { border-collapse: collapse; margin: 8px 0; font-size: 14px; } th, td { border-bottom: 1px solid #dcd7cc; padding: 3px 8px; text-align: right; }
th:first-child, td:first-child { text-align: left; } th { background: #efebe2; }
svg { background: #fff; border: 1px solid #c9c3b6; max-width: 100%; height: auto; }
svg text { font: 11px sans-serif; fill: #1d2330; } svg .axis-title { font-size: 12px; }
svg .axes line { stroke: #1d2330; } svg .grid { stroke: #e4e0d6; }
svg .rate { fill: none; stroke: #1d2330; stroke-width: 1.5; } svg .centre { fill: none; stroke: #3d6b4f; stroke-width: 1.5; }
svg .limit { fill: none; stroke: #8a3b12; stroke-dasharray: 5 3; } svg .inner { fill: none; stroke: #8a3b12; stroke-dasharray: 2 3; }
svg .point { fill: #1d2330; } svg .signal { fill: #b8860b; stroke: #1d2330; } svg .suppressed { fill: #c9c3b6; }
svg .unit { fill: #fff; stroke: #1d2330; stroke-width: 1.5; } svg .outlier { fill: #b8860b; stroke: #1d2330; }
.note { color: #4a4f5c; font-size: 13px; } code { font-size: 13px; }
@media print { body { background: #fff; max-width: none; } h2 { break-after: avoid; } svg, table { break-inside: avoid; } }
"#;

fn count(c: Count, k: Option<u64>) -> String {
    c.text(k)
}

fn num(v: Option<f64>, digits: usize) -> String {
    v.map_or("–".to_string(), |x| format!("{x:.digits$}"))
}

fn rate_text(c: &RateCell) -> String {
    match (c.rate, c.lower, c.upper) {
        (Some(r), Some(l), Some(u)) => format!("{r:.2} ({l:.2} to {u:.2})"),
        _ => "–".into(),
    }
}

fn share_text(c: &ShareCell) -> String {
    match (c.share, c.lower, c.upper) {
        (Some(s), Some(l), Some(u)) => {
            format!("{:.1}% ({:.1} to {:.1})", s * 100.0, l * 100.0, u * 100.0)
        }
        _ => "–".into(),
    }
}

fn share_table(out: &mut String, title: &str, rows: &[ShareCell], k: Option<u64>, level: f64) {
    writeln!(
        out,
        "<table><tr><th>{}</th><th>episodes</th><th>of</th><th>share ({:.0}% interval)</th></tr>",
        escape(title),
        level * 100.0
    )
    .unwrap();
    for r in rows {
        writeln!(
            out,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&r.label),
            count(r.numerator, k),
            count(r.denominator, k),
            share_text(r)
        )
        .unwrap();
    }
    out.push_str("</table>\n");
}

fn u_chart_svg(points: &[ChartMonth], k: Option<u64>) -> String {
    let n = points.len().max(1) as f64;
    let top = points
        .iter()
        .map(|p| p.upper_limit.max(p.cell.rate.unwrap_or(0.0)))
        .fold(0.0, f64::max)
        .max(1.0)
        * 1.1;
    let mut c = Chart::new(900.0, 340.0, (-0.5, n - 0.5), (0.0, top));
    let labels: Vec<(f64, String)> = points
        .iter()
        .enumerate()
        .map(|(i, p)| (i as f64, p.month.clone()))
        .collect();
    c.axes(
        &labels,
        "month of onset (site time)",
        "episodes per 1,000 days at risk",
    );
    let xy = |f: &dyn Fn(&ChartMonth) -> f64| {
        points
            .iter()
            .enumerate()
            .map(|(i, p)| (i as f64, f(p)))
            .collect::<Vec<_>>()
    };
    c.line(&xy(&|p| p.upper_limit), "limit", true);
    c.line(&xy(&|p| p.lower_limit), "limit", true);
    c.line(&xy(&|p| p.centre), "centre", false);
    c.line(&xy(&|p| p.cell.rate.unwrap_or(f64::NAN)), "rate", false);
    for (i, p) in points.iter().enumerate() {
        let x = i as f64;
        match (p.cell.rate, k) {
            (Some(r), _) => {
                let title = format!(
                    "{}: {} episodes, {:.0} days at risk, rate {:.2}{}",
                    p.month,
                    count(p.cell.events, k),
                    p.cell.days_at_risk,
                    r,
                    if p.signals.is_empty() {
                        String::new()
                    } else {
                        format!("; signal: {}", p.signals.join("; "))
                    }
                );
                let (shape, class) = if p.signals.is_empty() {
                    ("circle", "point")
                } else {
                    ("diamond", "signal")
                };
                c.marker(x, r, shape, class, &title);
            }
            (None, Some(k)) if p.cell.days_at_risk > 0.0 && p.cell.events == Count::Small => {
                let lo = PER_DAYS / p.cell.days_at_risk;
                let hi = (k - 1) as f64 * PER_DAYS / p.cell.days_at_risk;
                c.range_bar(x, lo, hi, "suppressed", &format!("{}: fewer than {k} episodes (suppressed); the bar spans the possible rates", p.month));
            }
            _ => {}
        }
    }
    c.finish(
        "u-chart of hospital-acquired high-potassium episodes per 1,000 inpatient days at risk",
        "Monthly rate (line with dots), centre line (solid), 3-sigma control limits (dashed, varying with the days at risk). Diamonds mark months with a special-cause signal.",
    )
}

fn funnel_svg(report: &Report, k: Option<u64>) -> String {
    let f = &report.funnel;
    let max_days = f.limits.last().map_or(1.0, |l| l.0);
    let top = report
        .units
        .iter()
        .filter_map(|u| u.cell.rate)
        .chain(f.limits.iter().skip(3).map(|l| l.4))
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max)
        .max(1.0)
        * 1.1;
    let mut c = Chart::new(900.0, 380.0, (0.0, max_days), (0.0, top));
    let step = crate::svg::ticks(0.0, max_days, 6);
    let labels: Vec<(f64, String)> = step.iter().map(|t| (*t, trim_number(*t))).collect();
    c.axes(
        &labels,
        "inpatient days at risk in the month",
        "episodes per 1,000 days at risk",
    );
    c.line(
        &f.limits.iter().map(|l| (l.0, l.1)).collect::<Vec<_>>(),
        "inner",
        false,
    );
    c.line(
        &f.limits.iter().map(|l| (l.0, l.2)).collect::<Vec<_>>(),
        "inner",
        false,
    );
    c.line(
        &f.limits.iter().map(|l| (l.0, l.3)).collect::<Vec<_>>(),
        "limit",
        false,
    );
    c.line(
        &f.limits.iter().map(|l| (l.0, l.4)).collect::<Vec<_>>(),
        "limit",
        false,
    );
    if let Some(t) = f.target_rate {
        c.line(&[(0.0, t), (max_days, t)], "centre", false);
    }
    for u in &report.units {
        if let Some(r) = u.cell.rate {
            let outside = u.funnel.as_deref().is_some_and(|x| x.ends_with("99.8"));
            let title = format!(
                "{}: {} episodes, {:.0} days, rate {:.2} ({})",
                u.unit,
                count(u.cell.events, k),
                u.cell.days_at_risk,
                r,
                u.funnel
                    .as_deref()
                    .unwrap_or("not classed")
                    .replace('_', " ")
            );
            c.marker(
                u.cell.days_at_risk,
                r,
                if outside { "diamond" } else { "square" },
                if outside { "outlier" } else { "unit" },
                &title,
            );
        }
    }
    c.finish(
        "Funnel plot of units against the network rate",
        "Each square is a unit (diamond: outside the 99.8% limits); the solid line is the network rate, dotted lines the 95% and dashed lines the 99.8% limits.",
    )
}

fn unit_rows(out: &mut String, rows: &[UnitRow], network: &UnitRow, k: Option<u64>) {
    out.push_str("<table><tr><th>unit</th><th>episodes</th><th>days at risk</th><th>admissions</th><th>rate per 1,000 days (95% interval)</th><th>funnel</th></tr>\n");
    for u in rows.iter().chain(std::iter::once(network)) {
        writeln!(
            out,
            "<tr><td>{}</td><td>{}</td><td>{:.1}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&u.unit),
            count(u.cell.events, k),
            u.cell.days_at_risk,
            u.admissions,
            rate_text(&u.cell),
            u.funnel.as_deref().map_or("–".into(), |f| f
                .replace('_', " ")
                .replace("above ", "above the ")
                .replace("below ", "below the ")
                + if f == "within" { "" } else { "% limit" })
        )
        .unwrap();
    }
    out.push_str("</table>\n");
}

/// Render the report page.
pub fn render(report: &Report) -> String {
    let k = report.suppress_below;
    let h = &report.headline;
    let mut o = String::new();
    writeln!(o, "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Hospital-acquired high potassium, {}</title><style>{}</style></head><body>", escape(&report.month), STYLE).unwrap();
    writeln!(
        o,
        "<h1>Hospital-acquired high-potassium episodes — {}</h1>",
        escape(&report.month)
    )
    .unwrap();
    writeln!(
        o,
        "<p class=\"note\">kcohort {} · site time zone {} · data extracted up to {}{}</p>",
        escape(&report.provenance.tool_version),
        escape(&report.provenance.site_timezone),
        escape(&report.provenance.extract_end),
        k.map_or(String::new(), |k| format!(
            " · counts from 1 to {} are suppressed (shown as &lt;{k})",
            k - 1
        ))
    )
    .unwrap();
    for c in &report.cautions {
        writeln!(o, "<p class=\"caution\">{}</p>", escape(c)).unwrap();
    }

    o.push_str("<h2 id=\"headline\">This month</h2><div class=\"figures\">\n");
    let figure = |o: &mut String, big: String, what: &str, small: String| {
        writeln!(o, "<div class=\"figure\"><div class=\"big\">{big}</div><div>{}</div><div class=\"small\">{}</div></div>", escape(what), small).unwrap();
    };
    figure(
        &mut o,
        count(h.month.events, k),
        "hospital-acquired episodes",
        format!("{:.0} inpatient days at risk", h.month.days_at_risk),
    );
    figure(
        &mut o,
        num(h.month.rate, 2),
        "per 1,000 days at risk",
        format!(
            "95% interval {} to {}",
            num(h.month.lower, 2),
            num(h.month.upper, 2)
        ),
    );
    figure(
        &mut o,
        num(h.previous_12_months.rate, 2),
        "previous 12 months, per 1,000 days",
        format!(
            "{} episodes; this month / previous: {}",
            count(h.previous_12_months.events, k),
            h.rate_ratio.map_or("–".into(), |(r, l, u)| format!(
                "{r:.2} ({l:.2} to {u:.2})"
            ))
        ),
    );
    figure(
        &mut o,
        count(h.severe, k),
        "severe episodes (peak 6.5 mmol/L or more)",
        String::new(),
    );
    figure(
        &mut o,
        count(h.deaths_within_30_days, k),
        "deaths within 30 days of an episode",
        String::new(),
    );
    figure(
        &mut o,
        count(h.unconfirmed, k),
        "unconfirmed (possible pseudohyperkalemia), not counted",
        String::new(),
    );
    o.push_str("</div>\n");

    o.push_str("<h2 id=\"control-chart\">Monthly rate: u-chart</h2>\n");
    o.push_str(&u_chart_svg(&report.chart.points, k));
    writeln!(o, "<p class=\"note\">Limits at 3 sigma from the centre line (all months pooled){}; rules: {}.</p><ul>", if report.chart.laney { format!(", widened by Laney's sigma_z = {:.2} because the months vary more than counts alone would", report.chart.sigma_z.unwrap_or(1.0)) } else { String::new() }, escape(&report.chart.rule_set)).unwrap();
    for e in &report.chart.explanation {
        writeln!(o, "<li>{}</li>", escape(e)).unwrap();
    }
    o.push_str("</ul>\n");
    if !report.unit_signals.is_empty() {
        o.push_str("<p>Units whose own monthly chart shows a special-cause signal:</p><table><tr><th>unit</th><th>months</th><th>signals</th></tr>\n");
        for u in &report.unit_signals {
            writeln!(
                o,
                "<tr><td>{}</td><td>{}</td><td>{}</td></tr>",
                escape(&u.unit),
                escape(&u.months_with_signals.join(", ")),
                escape(&u.rules.join("; "))
            )
            .unwrap();
        }
        o.push_str("</table>\n");
    }

    o.push_str("<h2 id=\"units\">Units this month</h2>\n");
    unit_rows(&mut o, &report.units, &report.network, k);
    if report.funnel.target_rate.is_some() {
        o.push_str(&funnel_svg(report, k));
        writeln!(o, "<p class=\"note\">Exact Poisson limits around the network rate{}.</p>", if report.funnel.overdispersed { "; the units vary more than chance alone would (over-dispersion): read outliers with care" } else { "" }).unwrap();
    } else {
        o.push_str("<p class=\"note\">Too few units with time at risk, or no episodes, for a funnel plot.</p>\n");
    }

    o.push_str("<h2 id=\"severity\">Severity</h2>\n");
    share_table(
        &mut o,
        "severity of the peak",
        &report.severity,
        k,
        report.level,
    );
    share_table(
        &mut o,
        "CTCAE v5.0 grade of the peak",
        &report.grades,
        k,
        report.level,
    );

    o.push_str("<h2 id=\"causes\">Causes</h2><p class=\"note\">An episode can have several causes, so shares add up to more than 100%.</p>\n");
    o.push_str("<table><tr><th>cause</th><th>episodes</th><th>share of episodes (95% interval)</th><th>rate per 1,000 days</th></tr>\n");
    for c in &report.causes {
        writeln!(
            o,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&c.label),
            count(c.share.numerator, k),
            share_text(&c.share),
            num(c.rate.rate, 2)
        )
        .unwrap();
    }
    o.push_str("</table>\n");
    share_table(
        &mut o,
        "drug classes active at onset",
        &report.drug_classes_at_onset,
        k,
        report.level,
    );

    o.push_str("<h2 id=\"indicators\">Process and safety indicators</h2>\n");
    share_table(&mut o, "indicator", &report.indicators, k, report.level);

    o.push_str("<h2 id=\"data-quality\">Data quality</h2>\n<table><tr><th>table</th><th>rows read</th><th>accepted</th><th>rejected</th></tr>\n");
    for t in &report.quality.tables {
        writeln!(
            o,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&t.table),
            t.read,
            t.accepted,
            t.rejected
        )
        .unwrap();
    }
    o.push_str(
        "</table>\n<table><tr><th>rejected rows: table</th><th>reason</th><th>rows</th></tr>\n",
    );
    for r in &report.quality.rejects {
        writeln!(
            o,
            "<tr><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&r.table),
            escape(&r.reason),
            r.rows
        )
        .unwrap();
    }
    o.push_str("</table>\n");
    share_table(
        &mut o,
        "measure",
        &[
            report.quality.hemolysed.clone(),
            report.quality.unconfirmed.clone(),
        ],
        k,
        report.level,
    );
    o.push_str("<p class=\"note\">The input tables carry no site column, so these figures are for the whole extract.</p>\n");

    o.push_str("<h2 id=\"methods\">Methods</h2>\n<p>Days at risk: each inpatient stay from 48 hours after admission to discharge (or the extract end), in elapsed hours divided by 24, split at local midnight on the first day of each month and attributed to the stay's unit. Episodes: hospital-acquired (onset at least 48 hours after admission, in an inpatient encounter), confirmed (not a single high value normal again within 6 hours without treatment), counted in the month and unit of onset. Rates per 1,000 days at risk with exact Poisson (Garwood) intervals; shares with Wilson intervals; the rate ratio against the previous 12 months with the exact conditional interval; u-chart and funnel limits as stated beside them.</p>\n");
    o.push_str("<table><tr><th>study parameter</th><th>value</th></tr>\n");
    for p in &report.provenance.parameters {
        writeln!(
            o,
            "<tr><td><code>{}</code></td><td><code>{}</code></td></tr>",
            escape(&p.key),
            escape(&p.value)
        )
        .unwrap();
    }
    o.push_str("</table>\n");
    writeln!(o, "<p class=\"note\">Store generation {}, derived tables fingerprint <code>{}</code>. Input files:</p><table><tr><th>table</th><th>file</th><th>rows</th><th>SHA-256</th></tr>", report.provenance.store_generation, escape(&report.provenance.derive_fingerprint)).unwrap();
    for f in &report.provenance.input_files {
        writeln!(
            o,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td><code>{}</code></td></tr>",
            escape(&f.table),
            escape(&f.file),
            f.rows,
            escape(&f.sha256)
        )
        .unwrap();
    }
    o.push_str("</table>\n</body></html>\n");
    o
}
