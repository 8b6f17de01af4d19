//! The "risk ratios by cause category" page that a drug-safety committee reads first: per cause,
//! the share of episodes attributed to it (with a small bar) and, for drug classes, the risk
//! ratio of new users against the comparator class (with a mini interval mark on a log scale);
//! and the same table as CSV. The table sorts by a click on a column heading (a small inline
//! script); without JavaScript it reads in the order given. Pure: draws what it is given.

use crate::page::{self, days, fixed};
use crate::ratio_axis::{LogScale, estimable, interval_mark, ratio_text};
use crate::svg::{escape, trim_number};
use serde::{Deserialize, Serialize};
use std::fmt::Write;

/// What the page shows.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CauseTableView {
    pub title: String,
    /// Shown in a box at the top; a default caution when blank.
    pub caution: String,
    pub comparator: String,
    pub horizon_days: f64,
    pub n_episodes: u64,
    /// In the order the page shows them first.
    pub rows: Vec<CauseRow>,
    pub notes: Vec<String>,
}

/// One cause category.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CauseRow {
    pub cause: String,
    /// "drug class", "laboratory" or "other".
    pub kind: String,
    pub episodes_attributed: u64,
    /// Share of all episodes (a proportion) and its interval.
    pub share: f64,
    pub share_lower: f64,
    pub share_upper: f64,
    /// New users of the class against new users of the comparator; `None` where there is no
    /// new-user cohort for the cause.
    pub risk_ratio: Option<RiskRatioCell>,
}

/// A risk ratio of a first episode within the horizon.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RiskRatioCell {
    pub estimate: Option<f64>,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
    pub exposed_events: u64,
    pub exposed_n: u64,
    pub comparator_events: u64,
    pub comparator_n: u64,
    pub note: String,
}

/// The columns of [`cause_table_csv`].
pub const CSV_COLUMNS: [&str; 14] = [
    "cause",
    "kind",
    "episodes_attributed",
    "share",
    "share_lower",
    "share_upper",
    "risk_ratio",
    "risk_ratio_lower",
    "risk_ratio_upper",
    "exposed_events",
    "exposed_n",
    "comparator_events",
    "comparator_n",
    "note",
];

/// The mini marks' widths in px.
const BAR_WIDTH: f64 = 110.0;
const MARK_WIDTH: f64 = 140.0;

const STYLE: &str = r#"
th button { font: inherit; text-align: inherit; background: none; border: 0; padding: 0; color: inherit; cursor: pointer; text-decoration: underline dotted; }
th[aria-sort="ascending"] button::after { content: " ▲"; } th[aria-sort="descending"] button::after { content: " ▼"; }
td svg { display: block; margin: 2px 0; border: 0; background: none; } td .why { font-style: italic; color: #4a4f5c; } td .small { display: block; color: #4a4f5c; font-size: 12px; }
svg .share { fill: #7f8fa6; } svg .share-interval, svg .whisker { stroke: #1d2330; stroke-width: 1.5; } svg .frame { fill: none; stroke: #dcd7cc; }
svg .reference { stroke: #8a8f9c; } svg .estimate, svg .arrow { fill: #1d2330; }
"#;

/// Sorts each `table.sortable` by a click on a heading with `data-sort-type`: by the cells'
/// `data-sort` values, numerically for `number`, empty values last either way.
const SCRIPT: &str = r#"
document.querySelectorAll('table.sortable').forEach(function (table) {
  var body = table.tBodies[0];
  var heads = table.tHead.rows[0].cells;
  Array.prototype.forEach.call(heads, function (th, column) {
    var type = th.getAttribute('data-sort-type');
    if (!type) return;
    var button = document.createElement('button');
    button.type = 'button';
    while (th.firstChild) button.appendChild(th.firstChild);
    th.appendChild(button);
    button.addEventListener('click', function () {
      var ascending = th.getAttribute('aria-sort') !== 'ascending';
      Array.prototype.forEach.call(heads, function (h) { h.removeAttribute('aria-sort'); });
      th.setAttribute('aria-sort', ascending ? 'ascending' : 'descending');
      var key = function (row) {
        var v = row.cells[column].getAttribute('data-sort') || '';
        return type === 'number' ? (v === '' ? NaN : parseFloat(v)) : v;
      };
      var rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = key(a), y = key(b);
        if (type === 'number') {
          if (isNaN(x) || isNaN(y)) return isNaN(x) - isNaN(y);
          return ascending ? x - y : y - x;
        }
        if (x === '' || y === '') return (x === '') - (y === '');
        return ascending ? x.localeCompare(y) : y.localeCompare(x);
      });
      rows.forEach(function (r) { body.appendChild(r); });
    });
  });
});
"#;

/// Why a row shows no risk ratio: its note, else a default by kind.
fn reason(row: &CauseRow) -> String {
    if let Some(note) = row
        .risk_ratio
        .as_ref()
        .map(|r| r.note.trim())
        .filter(|n| !n.is_empty())
    {
        return note.to_string();
    }
    match (row.risk_ratio.is_some(), row.kind.as_str()) {
        (true, _) => "not estimable".into(),
        (false, "laboratory") => "laboratory cause: no new-user cohort".into(),
        (false, "drug class") => "no new-user cohort for this drug class".into(),
        (false, _) => "no new-user cohort for this cause".into(),
    }
}

/// The risk ratio of a row when it can be shown.
fn shown_ratio(row: &CauseRow) -> Option<(&RiskRatioCell, f64)> {
    row.risk_ratio
        .as_ref()
        .and_then(|r| estimable(r.estimate).map(|e| (r, e)))
}

/// A finite number in its shortest exact form (for data-sort and CSV), else empty.
fn plain(v: Option<f64>) -> String {
    v.filter(|v| v.is_finite())
        .map_or(String::new(), |v| v.to_string())
}

/// `12.3% (8.1 to 17.0)`.
fn share_text(row: &CauseRow) -> String {
    if !row.share.is_finite() {
        return "–".into();
    }
    format!(
        "{}% ({} to {})",
        fixed(row.share * 100.0, 1),
        fixed(row.share_lower * 100.0, 1),
        fixed(row.share_upper * 100.0, 1)
    )
}

/// Render the cause table page.
pub fn render_cause_table(view: &CauseTableView) -> String {
    let mut o = page::start(&view.title, STYLE);
    writeln!(
        o,
        "<p class=\"note\">{} episodes · risk ratios of a first episode within {} days, new users of each drug class against new users of {}</p>",
        view.n_episodes,
        days(view.horizon_days),
        escape(&view.comparator)
    )
    .unwrap();
    page::caution(&mut o, &view.caution);

    // One bar scale for the column: 0 to the widest interval, rounded up to 10%.
    let share_top = view
        .rows
        .iter()
        .flat_map(|r| [r.share, r.share_upper])
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max)
        .clamp(0.0, 1.0);
    let share_top = ((share_top * 10.0 - 1e-9).ceil() / 10.0).max(0.1);
    let bar = |v: f64| {
        if v.is_finite() {
            v.clamp(0.0, share_top) / share_top * BAR_WIDTH
        } else {
            0.0
        }
    };
    let scale = LogScale::fit(
        view.rows
            .iter()
            .filter_map(|r| r.risk_ratio.as_ref())
            .flat_map(|r| [r.estimate, r.lower, r.upper])
            .flatten(),
        6.0,
        MARK_WIDTH - 6.0,
    );

    o.push_str("<h2 id=\"causes\">Risk ratios by cause category</h2>\n");
    writeln!(o, "<table class=\"sortable\"><thead><tr><th data-sort-type=\"number\">#</th><th class=\"text\" data-sort-type=\"text\">cause</th><th class=\"text\" data-sort-type=\"text\">kind</th><th data-sort-type=\"number\">episodes attributed</th><th class=\"text\" data-sort-type=\"number\">share of episodes (interval); bar 0 to {}%</th><th class=\"text\" data-sort-type=\"number\">risk ratio against {} (lower to upper); log scale {} to {}</th><th>first episodes / new users: class vs comparator</th></tr></thead><tbody>", trim_number(share_top * 100.0), escape(&view.comparator), trim_number(scale.low), trim_number(scale.high)).unwrap();
    for (i, r) in view.rows.iter().enumerate() {
        write!(
            o,
            "<tr><td data-sort=\"{}\">{}</td><td class=\"text\" data-sort=\"{}\">{}</td><td class=\"text\" data-sort=\"{}\">{}</td><td data-sort=\"{}\">{}</td>",
            i + 1,
            i + 1,
            escape(&r.cause),
            escape(&r.cause),
            escape(&r.kind),
            escape(&r.kind),
            r.episodes_attributed,
            r.episodes_attributed
        )
        .unwrap();

        let (lo, hi) = (bar(r.share_lower), bar(r.share_upper));
        write!(o, "<td class=\"text\" data-sort=\"{}\"><svg class=\"bar\" viewBox=\"0 0 {BAR_WIDTH} 16\" width=\"{BAR_WIDTH}\" height=\"16\" aria-hidden=\"true\"><rect class=\"frame\" x=\"0\" y=\"3\" width=\"{BAR_WIDTH}\" height=\"10\"/><rect class=\"share\" x=\"0\" y=\"4\" width=\"{:.1}\" height=\"8\"/>", plain(Some(r.share)), bar(r.share)).unwrap();
        if hi > lo {
            write!(
                o,
                "<line class=\"share-interval\" x1=\"{lo:.1}\" y1=\"8\" x2=\"{hi:.1}\" y2=\"8\"/>"
            )
            .unwrap();
        }
        write!(o, "</svg>{}</td>", share_text(r)).unwrap();

        match shown_ratio(r) {
            Some((rr, e)) => {
                let text = ratio_text(rr.estimate, rr.lower, rr.upper);
                let one = scale.at(1.0);
                write!(o, "<td class=\"text\" data-sort=\"{}\"><svg class=\"ratio\" viewBox=\"0 0 {MARK_WIDTH} 18\" width=\"{MARK_WIDTH}\" height=\"18\" aria-hidden=\"true\"><line class=\"reference\" x1=\"{one:.1}\" y1=\"1\" x2=\"{one:.1}\" y2=\"17\"/>{}</svg>{}", plain(Some(e)), interval_mark(&scale, 9.0, rr.estimate, rr.lower, rr.upper, 7.0, &text), escape(&text)).unwrap();
                if !rr.note.trim().is_empty() {
                    write!(o, "<span class=\"small\">{}</span>", escape(&rr.note)).unwrap();
                }
                o.push_str("</td>");
            }
            None => write!(
                o,
                "<td class=\"text\" data-sort=\"\"><span class=\"why\">{}</span></td>",
                escape(&reason(r))
            )
            .unwrap(),
        }
        match &r.risk_ratio {
            Some(rr) => writeln!(
                o,
                "<td>{}/{} vs {}/{}</td></tr>",
                rr.exposed_events, rr.exposed_n, rr.comparator_events, rr.comparator_n
            ),
            None => writeln!(o, "<td>–</td></tr>"),
        }
        .unwrap();
    }
    o.push_str("</tbody></table>\n");
    o.push_str("<p class=\"note\">An episode can have several causes, so shares add up to more than 100%. The share's bar runs from 0; its line is the interval. The risk ratio's square is the estimate and its line the interval; the grey line is 1 (no difference); an arrow marks an interval running off the scale. With JavaScript on, a click on a column heading sorts by it; # restores the order given.</p>\n");
    page::notes(&mut o, &view.notes);
    writeln!(o, "<script>{SCRIPT}</script>\n</body></html>").unwrap();
    o
}

/// One CSV field, quoted as RFC 4180 asks when it holds a comma, quote or line break.
fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// The table as CSV: a header of [`CSV_COLUMNS`] and one line per cause (`\n` line ends, as the
/// other CSV outputs). Numbers plain (proportions, not percent); a missing or non-finite one is
/// empty; `note` says why a row has no risk ratio.
pub fn cause_table_csv(view: &CauseTableView) -> String {
    let mut out = CSV_COLUMNS.join(",");
    out.push('\n');
    for r in &view.rows {
        let rr = r.risk_ratio.as_ref();
        let count = |f: fn(&RiskRatioCell) -> u64| rr.map_or(String::new(), |c| f(c).to_string());
        let note = match shown_ratio(r) {
            Some((c, _)) => c.note.clone(),
            None => reason(r),
        };
        let fields = [
            csv_field(&r.cause),
            csv_field(&r.kind),
            r.episodes_attributed.to_string(),
            plain(Some(r.share)),
            plain(Some(r.share_lower)),
            plain(Some(r.share_upper)),
            plain(rr.and_then(|c| c.estimate)),
            plain(rr.and_then(|c| c.lower)),
            plain(rr.and_then(|c| c.upper)),
            count(|c| c.exposed_events),
            count(|c| c.exposed_n),
            count(|c| c.comparator_events),
            count(|c| c.comparator_n),
            csv_field(&note),
        ];
        out.push_str(&fields.join(","));
        out.push('\n');
    }
    out
}
