//! The page of a two-arm new-user comparison (e.g. ACE-inhibitor initiators against
//! calcium-channel-blocker initiators, time to a first high-potassium episode): the arms, their
//! cumulative risk curves with the numbers at risk beneath, a forest plot, the ratio and Cox
//! tables, notes and methods. One self-contained HTML page, no scripts. Pure: it draws the
//! numbers it is given and computes none.

use crate::page::{self, days, fixed, fixed_opt, p_value, percent};
use crate::ratio_axis::{LogScale, interval_mark, ratio_text};
use crate::svg::{Scale, escape, ticks, trim_number};
use serde::{Deserialize, Serialize};
use std::fmt::Write;

/// What the page shows.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CompareView {
    pub title: String,
    pub exposure: String,
    pub comparator: String,
    pub horizon_days: f64,
    /// e.g. "intention to treat".
    pub follow_up: String,
    pub strata_by: String,
    /// Shown in a box at the top; a default caution when blank.
    pub caution: String,
    /// Exactly two in a comparison, the exposed arm first (the page draws any number).
    pub arms: Vec<ArmView>,
    pub ratios: Vec<RatioRow>,
    pub forest: Vec<ForestRow>,
    pub cox: Vec<CoefficientRow>,
    /// Covariates left out of the Cox model.
    pub left_out: Vec<String>,
    pub notes: Vec<String>,
}

/// One arm.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ArmView {
    pub name: String,
    pub n: u64,
    pub episodes: u64,
    pub deaths: u64,
    pub person_days: f64,
    /// Kaplan–Meier 1 − S at the horizon (a proportion).
    pub km_risk: Option<Estimate>,
    /// Aalen–Johansen cumulative incidence at the horizon, death competing (a proportion).
    pub cumulative_incidence: Option<Estimate>,
    pub km_curve: Vec<CurvePoint>,
    pub cif_curve: Vec<CurvePoint>,
    pub at_risk: Vec<AtRisk>,
}

/// An estimate with its interval.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Estimate {
    pub estimate: f64,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
}

/// A step of a cumulative risk curve: `risk` (a proportion) holds from `time_days` until the
/// next point; the first point is (0, 0).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CurvePoint {
    pub time_days: f64,
    pub risk: f64,
}

/// The number of people at risk at a time.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct AtRisk {
    pub time_days: f64,
    pub n: u64,
}

/// A row of the ratios table. A measure whose name contains "difference" is a difference of
/// risks (proportions) and reads in percentage points; every other is a ratio.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RatioRow {
    pub measure: String,
    pub estimate: Option<f64>,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
    pub note: String,
}

/// A row of the forest plot; rows of one `group` ("Overall", "By egfr_category") sit together
/// under its heading, in the order given.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ForestRow {
    pub group: String,
    pub label: String,
    pub estimate: Option<f64>,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
    /// e.g. "12/340 vs 5/310".
    pub detail: String,
}

/// A Cox model coefficient.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CoefficientRow {
    pub name: String,
    pub hazard_ratio: f64,
    pub lower: f64,
    pub upper: f64,
    pub p_value: f64,
}

/// The forest plot's axis runs between these x pixels.
pub const FOREST_AXIS: (f64, f64) = (440.0, 700.0);
/// The risk chart's plot area runs between these x pixels.
pub const RISK_AXIS: (f64, f64) = (230.0, 880.0);

/// Per arm: SVG marker shape, class, and the text symbol that names it in tables.
const ARM_MARKS: [(&str, &str); 4] = [
    ("circle", "●"),
    ("square", "■"),
    ("diamond", "◆"),
    ("triangle", "▲"),
];

const STYLE: &str = r#"
svg .km, svg .cif { fill: none; stroke-width: 2; } svg .cif { stroke-width: 1.5; stroke-dasharray: 7 4; }
svg .arm0 { stroke: #1f4e79; } svg .arm1 { stroke: #a0522d; } svg .arm2 { stroke: #3d6b4f; } svg .arm3 { stroke: #6b3d6b; }
svg .dot { stroke-width: 1.5; fill: #fff; } svg .dot.km.arm0 { fill: #1f4e79; } svg .dot.km.arm1 { fill: #a0522d; } svg .dot.km.arm2 { fill: #3d6b4f; } svg .dot.km.arm3 { fill: #6b3d6b; }
svg .axes .grid { stroke: #e4e0d6; } svg .horizon { stroke: #1d2330; stroke-dasharray: 1 3; } svg .reference { stroke: #1d2330; }
svg .whisker { stroke: #1d2330; stroke-width: 1.5; } svg .estimate, svg .arrow { fill: #1d2330; }
svg .group, svg .heading { font-weight: bold; } svg .inestimable { font-style: italic; fill: #4a4f5c; }
.at-risk td, .at-risk th { font-size: 13px; }
"#;

/// Render the comparison page.
pub fn render_compare(view: &CompareView) -> String {
    let mut o = page::start(&view.title, STYLE);
    writeln!(
        o,
        "<p class=\"note\">{} against {} · horizon {} days · {} · Mantel–Haenszel strata: {}</p>",
        escape(&view.exposure),
        escape(&view.comparator),
        days(view.horizon_days),
        escape(&view.follow_up),
        escape(&view.strata_by)
    )
    .unwrap();
    page::caution(&mut o, &view.caution);

    o.push_str("<h2 id=\"arms\">Arms</h2>\n");
    arms_table(&mut o, view);

    o.push_str(
        "<h2 id=\"cumulative-risk\">Cumulative risk of a first high-potassium episode</h2>\n",
    );
    let chart = RiskChart::new(view);
    o.push_str(&chart.svg(view));
    chart.at_risk_table(&mut o, view);

    o.push_str("<h2 id=\"forest\">Estimates overall and by subgroup</h2>\n");
    if view.forest.is_empty() {
        o.push_str("<p class=\"note\">No estimates to plot.</p>\n");
    } else {
        o.push_str(&forest_svg(&view.forest));
    }

    o.push_str("<h2 id=\"ratios\">Ratios and differences</h2>\n");
    ratios_table(&mut o, &view.ratios);

    o.push_str("<h2 id=\"cox\">Cox model</h2>\n");
    cox_table(&mut o, &view.cox, &view.left_out);

    if !view.notes.is_empty() {
        o.push_str("<h2 id=\"notes\">Notes</h2>\n");
        page::notes(&mut o, &view.notes);
    }
    methods(&mut o, view);
    o.push_str("</body></html>\n");
    o
}

fn arm_mark(i: usize) -> (&'static str, &'static str) {
    ARM_MARKS[i % ARM_MARKS.len()]
}

/// `3.53% (1.80 to 5.26)`: a risk and its interval in percent.
fn risk_text(e: Option<&Estimate>) -> String {
    let Some(e) = e.filter(|e| e.estimate.is_finite()) else {
        return "–".into();
    };
    let limit = |v: Option<f64>| fixed_opt(v.map(|v| v * 100.0), 2);
    if e.lower.is_none() && e.upper.is_none() {
        return percent(e.estimate);
    }
    format!(
        "{} ({} to {})",
        percent(e.estimate),
        limit(e.lower),
        limit(e.upper)
    )
}

fn arms_table(o: &mut String, view: &CompareView) {
    let h = days(view.horizon_days);
    writeln!(o, "<table><tr><th>arm</th><th>new users</th><th>first episodes</th><th>deaths</th><th>person-days</th><th>Kaplan–Meier risk at day {h} (interval)</th><th>cumulative incidence at day {h}, death competing (interval)</th></tr>").unwrap();
    for (i, a) in view.arms.iter().enumerate() {
        writeln!(
            o,
            "<tr><td><span aria-hidden=\"true\">{}</span> {}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            arm_mark(i).1,
            escape(&a.name),
            a.n,
            a.episodes,
            a.deaths,
            fixed(a.person_days, 1),
            risk_text(a.km_risk.as_ref()),
            risk_text(a.cumulative_incidence.as_ref())
        )
        .unwrap();
    }
    o.push_str("</table>\n");
}

/// A curve's steps within `0..=end` as (day, risk in %): non-finite points dropped, sorted,
/// starting at (0, 0), risks kept within 0..100%.
fn steps(points: &[CurvePoint], end: f64) -> Vec<(f64, f64)> {
    let mut s: Vec<(f64, f64)> = points
        .iter()
        .filter(|p| p.time_days.is_finite() && p.risk.is_finite())
        .filter(|p| p.time_days >= 0.0 && p.time_days <= end)
        .map(|p| (p.time_days, p.risk.clamp(0.0, 1.0) * 100.0))
        .collect();
    s.sort_by(|a, b| a.0.total_cmp(&b.0));
    if s.first().is_some_and(|p| p.0 > 0.0) {
        s.insert(0, (0.0, 0.0));
    }
    s
}

/// The step function's value at `t`.
fn value_at(steps: &[(f64, f64)], t: f64) -> Option<f64> {
    steps.iter().rfind(|p| p.0 <= t).map(|p| p.1)
}

fn same_day(a: f64, b: f64) -> bool {
    (a - b).abs() < 1e-6
}

/// A marker of `shape` centred at pixel (x, y).
fn dot(o: &mut String, shape: &str, x: f64, y: f64, class: &str) {
    match shape {
        "square" => write!(o, r#"<rect class="{class}" x="{:.1}" y="{:.1}" width="8" height="8"/>"#, x - 4.0, y - 4.0),
        "diamond" => write!(o, r#"<path class="{class}" d="M{x:.1},{:.1} L{:.1},{y:.1} L{x:.1},{:.1} L{:.1},{y:.1} Z"/>"#, y - 5.5, x + 5.5, y + 5.5, x - 5.5),
        "triangle" => write!(o, r#"<path class="{class}" d="M{x:.1},{:.1} L{:.1},{:.1} L{:.1},{:.1} Z"/>"#, y - 5.0, x + 5.0, y + 4.0, x - 5.0, y + 4.0),
        _ => write!(o, r#"<circle class="{class}" cx="{x:.1}" cy="{y:.1}" r="4"/>"#),
    }
    .unwrap();
}

/// The cumulative risk chart's layout.
struct RiskChart {
    /// The horizon drawn (the view's, or the data's extent when that is not a positive number).
    end: f64,
    x: Scale,
    y: Scale,
    /// Days with an x tick, a column of numbers at risk and markers on the curves.
    ticks: Vec<f64>,
}

impl RiskChart {
    fn new(view: &CompareView) -> RiskChart {
        let h = view.horizon_days;
        let end = if h.is_finite() && h > 0.0 {
            h
        } else {
            let data = view.arms.iter().flat_map(|a| {
                a.km_curve
                    .iter()
                    .chain(&a.cif_curve)
                    .map(|p| p.time_days)
                    .chain(a.at_risk.iter().map(|r| r.time_days))
            });
            Some(data.filter(|t| t.is_finite()).fold(0.0, f64::max))
                .filter(|m| *m > 0.0)
                .unwrap_or(1.0)
        };
        let mut top: f64 = 0.0;
        for a in &view.arms {
            for s in [steps(&a.km_curve, end), steps(&a.cif_curve, end)] {
                top = s.iter().map(|p| p.1).fold(top, f64::max);
            }
            // The chart draws the estimates, not their intervals (those are in the arms table):
            // the axis fits the curves.
            for e in [&a.km_risk, &a.cumulative_incidence].into_iter().flatten() {
                if e.estimate.is_finite() {
                    top = top.max(e.estimate.clamp(0.0, 1.0) * 100.0);
                }
            }
        }
        let wanted = (top * 1.1).max(0.1);
        let t = ticks(0.0, wanted, 5);
        let step = if t.len() > 1 { t[1] - t[0] } else { wanted };
        let y_top = ((wanted / step).ceil() * step).min(100.0);

        let mut times: Vec<f64> = view
            .arms
            .iter()
            .flat_map(|a| a.at_risk.iter().map(|r| r.time_days))
            .filter(|t| t.is_finite() && *t >= 0.0 && *t <= end * (1.0 + 1e-9))
            .collect();
        times.sort_by(f64::total_cmp);
        times.dedup_by(|a, b| same_day(*a, *b));
        let ticks = if (2..=12).contains(&times.len()) {
            times
        } else {
            ticks(0.0, end, 6)
                .into_iter()
                .filter(|t| *t <= end * (1.0 + 1e-9))
                .collect()
        };
        // Room for the legend: a row per arm and estimator.
        let top_px = 16.0 * (2 * view.arms.len()) as f64 + 20.0;
        RiskChart {
            end,
            x: Scale {
                d0: 0.0,
                d1: end,
                p0: RISK_AXIS.0,
                p1: RISK_AXIS.1,
            },
            y: Scale {
                d0: 0.0,
                d1: y_top,
                p0: top_px + 260.0,
                p1: top_px,
            },
            ticks,
        }
    }

    fn svg(&self, view: &CompareView) -> String {
        let (x0, x1, y0, y1) = (self.x.p0, self.x.p1, self.y.p0, self.y.p1);
        let n_arms = view.arms.len();
        let height = y0 + 62.0 + 16.0 * n_arms as f64;
        let mut o = String::new();
        writeln!(o, r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 900 {height:.0}" width="900" height="{height:.0}" role="img" aria-labelledby="risk-title risk-desc"><title id="risk-title">Cumulative risk of a first high-potassium episode by arm, days 0 to {}</title><desc id="risk-desc">Kaplan–Meier 1 − S (solid step lines, filled markers) and Aalen–Johansen cumulative incidence with death competing (dashed step lines, open markers). Each arm has its own marker shape. The dotted vertical line is the horizon. Numbers at risk below the axis.</desc>"#, days(self.end)).unwrap();

        // Legend: one row per arm and estimator, above the plot.
        for (i, a) in view.arms.iter().enumerate() {
            for (k, (class, what)) in [
                ("km", "Kaplan–Meier 1 − S (solid)"),
                ("cif", "cumulative incidence, death competing (dashed)"),
            ]
            .iter()
            .enumerate()
            {
                let y = 14.0 + 16.0 * (2 * i + k) as f64;
                writeln!(o, r#"<g class="legend"><line class="{class} arm{}" x1="8" y1="{y:.1}" x2="44" y2="{y:.1}"/>"#, i % 4).unwrap();
                dot(
                    &mut o,
                    arm_mark(i).0,
                    26.0,
                    y,
                    &format!("dot {class} arm{}", i % 4),
                );
                writeln!(
                    o,
                    r#"<text x="52" y="{:.1}">{}: {}</text></g>"#,
                    y + 4.0,
                    escape(&a.name),
                    what
                )
                .unwrap();
            }
        }

        // Axes, grid and ticks.
        writeln!(o, r#"<g class="axes"><line x1="{x0:.1}" y1="{y0:.1}" x2="{x1:.1}" y2="{y0:.1}"/><line x1="{x0:.1}" y1="{y0:.1}" x2="{x0:.1}" y2="{y1:.1}"/>"#).unwrap();
        for t in ticks(0.0, self.y.d1, 5) {
            let py = self.y.at(t);
            writeln!(o, r#"<line class="grid" x1="{x0:.1}" y1="{py:.1}" x2="{x1:.1}" y2="{py:.1}"/><text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#, x0 - 6.0, py + 4.0, trim_number(t)).unwrap();
        }
        for t in &self.ticks {
            let px = self.x.at(*t);
            writeln!(o, r#"<line x1="{px:.1}" y1="{y0:.1}" x2="{px:.1}" y2="{:.1}"/><text class="tick-x" x="{px:.1}" y="{:.1}" text-anchor="middle">{}</text>"#, y0 + 4.0, y0 + 16.0, days(*t)).unwrap();
        }
        writeln!(o, r#"<text class="axis-title" x="{:.1}" y="{:.1}" text-anchor="middle">days since the first prescription</text>"#, (x0 + x1) / 2.0, y0 + 34.0).unwrap();
        writeln!(o, r#"<text class="axis-title" x="{:.1}" y="{:.1}" text-anchor="middle" transform="rotate(-90 {:.1} {:.1})">cumulative risk (%)</text></g>"#, x0 - 40.0, (y0 + y1) / 2.0, x0 - 40.0, (y0 + y1) / 2.0).unwrap();

        let h = view.horizon_days;
        if h.is_finite() && (0.0..=self.end).contains(&h) {
            let px = self.x.at(h);
            // The label sits inside the plot, on whichever side of the line has room.
            let (tx, anchor) = if px - x0 > 120.0 {
                (px - 4.0, "end")
            } else {
                (px + 4.0, "start")
            };
            writeln!(o, r#"<line class="horizon" x1="{px:.1}" y1="{y0:.1}" x2="{px:.1}" y2="{y1:.1}"/><text x="{tx:.1}" y="{:.1}" text-anchor="{anchor}">horizon, day {}</text>"#, y1 + 12.0, days(h)).unwrap();
        }

        // The curves: step lines to the horizon, a marker at each tick after day 0.
        for (i, a) in view.arms.iter().enumerate() {
            for (class, curve) in [("km", &a.km_curve), ("cif", &a.cif_curve)] {
                let s = steps(curve, self.end);
                if s.is_empty() {
                    continue;
                }
                let mut d = String::new();
                for (j, (t, r)) in s.iter().enumerate() {
                    let (px, py) = (self.x.at(*t), self.y.at(*r));
                    if j == 0 {
                        write!(d, "M{px:.1},{py:.1}").unwrap();
                    } else {
                        write!(d, " H{px:.1} V{py:.1}").unwrap();
                    }
                }
                write!(d, " H{:.1}", self.x.at(self.end)).unwrap();
                writeln!(o, r#"<path class="{class} arm{}" d="{d}"/>"#, i % 4).unwrap();
                for t in self.ticks.iter().filter(|t| **t > 0.0) {
                    if let Some(r) = value_at(&s, *t) {
                        dot(
                            &mut o,
                            arm_mark(i).0,
                            self.x.at(*t),
                            self.y.at(r),
                            &format!("dot {class} arm{}", i % 4),
                        );
                    }
                }
            }
        }

        // Numbers at risk, one row per arm, each number under its tick.
        let top = y0 + 56.0;
        writeln!(
            o,
            r#"<g class="at-risk"><text class="heading" x="8" y="{top:.1}">Numbers at risk</text>"#
        )
        .unwrap();
        for (i, a) in view.arms.iter().enumerate() {
            let y = top + 16.0 * (i + 1) as f64;
            dot(
                &mut o,
                arm_mark(i).0,
                14.0,
                y - 4.0,
                &format!("dot km arm{}", i % 4),
            );
            writeln!(o, r#"<text x="24" y="{y:.1}">{}</text>"#, escape(&a.name)).unwrap();
            for t in &self.ticks {
                writeln!(
                    o,
                    r#"<text class="n-at-risk" x="{:.1}" y="{y:.1}" text-anchor="middle">{}</text>"#,
                    self.x.at(*t),
                    at_risk_at(a, *t)
                )
                .unwrap();
            }
        }
        o.push_str("</g></svg>\n");
        o
    }

    /// The numbers at risk again as a table, for reading out and copying.
    fn at_risk_table(&self, o: &mut String, view: &CompareView) {
        o.push_str("<table class=\"at-risk\"><tr><th>numbers at risk, day</th>");
        for t in &self.ticks {
            write!(o, "<th>{}</th>", days(*t)).unwrap();
        }
        o.push_str("</tr>\n");
        for (i, a) in view.arms.iter().enumerate() {
            write!(
                o,
                "<tr><td><span aria-hidden=\"true\">{}</span> {}</td>",
                arm_mark(i).1,
                escape(&a.name)
            )
            .unwrap();
            for t in &self.ticks {
                write!(o, "<td>{}</td>", at_risk_at(a, *t)).unwrap();
            }
            o.push_str("</tr>\n");
        }
        o.push_str("</table>\n");
    }
}

/// The arm's number at risk listed for day `t`, or `–` when it lists none for that day.
fn at_risk_at(arm: &ArmView, t: f64) -> String {
    arm.at_risk
        .iter()
        .find(|r| same_day(r.time_days, t))
        .map_or("–".into(), |r| r.n.to_string())
}

/// The forest plot: labels and details on the left, marks on a log axis, text on the right.
fn forest_svg(rows: &[ForestRow]) -> String {
    const DETAIL_X: f64 = 230.0;
    const TEXT_X: f64 = 716.0;
    let scale = LogScale::fit(
        rows.iter()
            .flat_map(|r| [r.estimate, r.lower, r.upper])
            .flatten(),
        FOREST_AXIS.0,
        FOREST_AXIS.1,
    );
    // A heading line wherever the group changes, then the group's rows.
    let mut lines: Vec<Result<&ForestRow, &str>> = Vec::new();
    for r in rows {
        if lines.last().is_none_or(|l| match l {
            Ok(previous) => previous.group != r.group,
            Err(_) => false,
        }) {
            lines.push(Err(r.group.as_str()));
        }
        lines.push(Ok(r));
    }
    let row_y = |k: usize| 44.0 + 22.0 * k as f64;
    let axis_y = row_y(lines.len()) - 8.0;
    let height = axis_y + 44.0;
    let mut o = String::new();
    writeln!(o, r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 900 {height:.0}" width="900" height="{height:.0}" role="img" aria-labelledby="forest-title forest-desc"><title id="forest-title">Forest plot of the estimates overall and by subgroup</title><desc id="forest-desc">Squares are point estimates and lines their intervals on a log scale; an arrow marks an interval running off the axis. The vertical line is 1 (no difference). Rows without an estimate read "not estimable" and have no mark.</desc>"#).unwrap();
    writeln!(o, r#"<text class="heading" x="8" y="20">subgroup</text><text class="heading" x="{DETAIL_X:.1}" y="20">detail</text><text class="heading" x="{TEXT_X:.1}" y="20">estimate (lower to upper)</text>"#).unwrap();
    let one = scale.at(1.0);
    writeln!(o, r#"<g class="axes"><line class="reference" x1="{one:.1}" y1="28" x2="{one:.1}" y2="{axis_y:.1}"/><line x1="{:.1}" y1="{axis_y:.1}" x2="{:.1}" y2="{axis_y:.1}"/>"#, scale.p0, scale.p1).unwrap();
    for t in scale.ticks() {
        let px = scale.at(t);
        writeln!(o, r#"<line x1="{px:.1}" y1="{axis_y:.1}" x2="{px:.1}" y2="{:.1}"/><text x="{px:.1}" y="{:.1}" text-anchor="middle">{}</text>"#, axis_y + 4.0, axis_y + 16.0, trim_number(t)).unwrap();
    }
    writeln!(o, r#"<text class="axis-title" x="{:.1}" y="{:.1}" text-anchor="middle">ratio, log scale (1 = no difference)</text></g>"#, (scale.p0 + scale.p1) / 2.0, axis_y + 34.0).unwrap();
    for (k, line) in lines.iter().enumerate() {
        let y = row_y(k);
        let r = match line {
            Ok(r) => r,
            Err(name) => {
                writeln!(
                    o,
                    r#"<text class="group" x="8" y="{:.1}">{}</text>"#,
                    y + 4.0,
                    escape(name)
                )
                .unwrap();
                continue;
            }
        };
        let text = ratio_text(r.estimate, r.lower, r.upper);
        let mark = interval_mark(
            &scale,
            y,
            r.estimate,
            r.lower,
            r.upper,
            9.0,
            &format!("{}, {}: {}", r.group, r.label, text),
        );
        writeln!(
            o,
            r#"<g class="forest-row" data-label="{}"><text x="20" y="{:.1}">{}</text><text x="{DETAIL_X:.1}" y="{:.1}">{}</text>{mark}<text class="{}" x="{TEXT_X:.1}" y="{:.1}">{}</text></g>"#,
            escape(&r.label),
            y + 4.0,
            escape(&r.label),
            y + 4.0,
            escape(&r.detail),
            if mark.is_empty() { "inestimable" } else { "value" },
            y + 4.0,
            escape(&text)
        )
        .unwrap();
    }
    o.push_str("</svg>\n");
    o
}

/// A difference of risks in percentage points, e.g. `1.20 percentage points (-0.30 to 2.70)`.
fn difference_text(estimate: Option<f64>, lower: Option<f64>, upper: Option<f64>) -> String {
    let Some(e) = estimate.filter(|e| e.is_finite()) else {
        return "not estimable".into();
    };
    let points = |v: Option<f64>| fixed_opt(v.map(|v| v * 100.0), 2);
    if lower.is_none() && upper.is_none() {
        return format!("{} percentage points", points(Some(e)));
    }
    format!(
        "{} percentage points ({} to {})",
        points(Some(e)),
        points(lower),
        points(upper)
    )
}

fn ratios_table(o: &mut String, rows: &[RatioRow]) {
    if rows.is_empty() {
        o.push_str("<p class=\"note\">No ratios.</p>\n");
        return;
    }
    o.push_str("<table><tr><th>measure</th><th>estimate (lower to upper)</th><th class=\"text\">note</th></tr>\n");
    for r in rows {
        let text = if r.measure.to_lowercase().contains("difference") {
            difference_text(r.estimate, r.lower, r.upper)
        } else {
            ratio_text(r.estimate, r.lower, r.upper)
        };
        writeln!(
            o,
            "<tr><td>{}</td><td>{}</td><td class=\"text\">{}</td></tr>",
            escape(&r.measure),
            escape(&text),
            escape(&r.note)
        )
        .unwrap();
    }
    o.push_str("</table>\n");
}

fn cox_table(o: &mut String, rows: &[CoefficientRow], left_out: &[String]) {
    if rows.is_empty() {
        o.push_str("<p class=\"note\">No Cox model coefficients.</p>\n");
    } else {
        o.push_str(
            "<table><tr><th>covariate</th><th>hazard ratio (lower to upper)</th><th>p</th></tr>\n",
        );
        for r in rows {
            writeln!(
                o,
                "<tr><td>{}</td><td>{}</td><td>{}</td></tr>",
                escape(&r.name),
                escape(&ratio_text(
                    Some(r.hazard_ratio),
                    Some(r.lower),
                    Some(r.upper)
                )),
                escape(&p_value(r.p_value))
            )
            .unwrap();
        }
        o.push_str("</table>\n");
    }
    if !left_out.is_empty() {
        writeln!(
            o,
            "<p class=\"note\">Left out of the Cox model: {}.</p>",
            escape(&left_out.join(", "))
        )
        .unwrap();
    }
}

fn methods(o: &mut String, view: &CompareView) {
    writeln!(
        o,
        "<h2 id=\"methods\">Methods</h2>\n<p>New-user, active-comparator design: people starting {} compared with people starting {}, each followed from the first prescription for up to {} days ({}), to a first high-potassium episode. Kaplan–Meier 1 − S treats deaths as censored, as if those who died could still have had an episode later; the Aalen–Johansen cumulative incidence counts death as a competing event, so it estimates the share who have an episode before the horizon while alive. Risk ratios and differences at the horizon, crude and Mantel–Haenszel across strata of {}; the rate ratio from first episodes per person-day; hazard ratios from a Cox proportional-hazards model with the covariates listed. Intervals as computed by the analysis. An estimate that could not be computed reads &ldquo;not estimable&rdquo;, a limit that could not be computed &ldquo;–&rdquo;, an unbounded upper limit &ldquo;∞&rdquo;. Observational data: differences between the arms may reflect who is prescribed each drug, not the drug alone.</p>",
        escape(&view.exposure),
        escape(&view.comparator),
        days(view.horizon_days),
        escape(&view.follow_up),
        escape(&view.strata_by)
    )
    .unwrap();
}
