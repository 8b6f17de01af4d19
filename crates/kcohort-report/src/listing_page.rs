//! The drug-linked event listing of a drug-safety committee as one self-contained HTML page:
//! one row per episode with a suspect drug class, a summary above it, and the notice that the
//! rows stay inside the committee. The rows arrive as text already formatted; this module only
//! lays them out (and escapes them).

use crate::html::STYLE;
use crate::svg::escape;
use serde::{Deserialize, Serialize};
use std::fmt::Write;

/// What the page shows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ListingView {
    /// The suspect drug class (study name) and its label.
    pub class: String,
    pub class_label: String,
    /// Onset dates covered, in the site's local calendar, inclusive.
    pub from: String,
    pub to: String,
    pub site_timezone: String,
    pub extract_end: String,
    /// The committee notice (row-level, pseudonymous, stays inside the committee).
    pub notice: String,
    pub cautions: Vec<String>,
    /// Label and value pairs above the table (episodes, new users, severe, dechallenge ...).
    pub summary: Vec<(String, String)>,
    /// Column headings and, per row, one text per heading.
    pub columns: Vec<String>,
    pub rows: Vec<Vec<String>>,
    /// How each column is defined, shown under the table.
    pub definitions: Vec<(String, String)>,
}

/// The page.
pub fn render_listing(view: &ListingView) -> String {
    let mut o = String::new();
    let title = format!(
        "Drug-linked high-potassium episodes: {} ({} to {})",
        view.class_label, view.from, view.to
    );
    writeln!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>{}</title><style>{}\
         body {{ max-width: none; }} .wide td, .wide th {{ text-align: left; vertical-align: top; font-size: 13px; }}\
         .notice {{ border: 2px solid #8a3b12; background: #fbe9e0; padding: 8px 12px; font-weight: bold; }}\
         </style></head><body>",
        escape(&title),
        STYLE
    )
    .unwrap();
    writeln!(o, "<h1>{}</h1>", escape(&title)).unwrap();
    writeln!(
        o,
        "<p class=\"note\">suspect drug class <code>{}</code> · onset dates in the site time zone {} · data extracted up to {}</p>",
        escape(&view.class),
        escape(&view.site_timezone),
        escape(&view.extract_end)
    )
    .unwrap();
    writeln!(o, "<p class=\"notice\">{}</p>", escape(&view.notice)).unwrap();
    for c in &view.cautions {
        writeln!(o, "<p class=\"caution\">{}</p>", escape(c)).unwrap();
    }
    o.push_str("<h2>Summary</h2><table>\n");
    for (label, value) in &view.summary {
        writeln!(
            o,
            "<tr><td>{}</td><td>{}</td></tr>",
            escape(label),
            escape(value)
        )
        .unwrap();
    }
    o.push_str("</table>\n<h2>Episodes</h2>\n");
    if view.rows.is_empty() {
        o.push_str("<p>No episode with this suspect drug class in these dates.</p>\n");
    } else {
        o.push_str("<table class=\"wide\"><tr>");
        for c in &view.columns {
            write!(o, "<th>{}</th>", escape(c)).unwrap();
        }
        o.push_str("</tr>\n");
        for row in &view.rows {
            o.push_str("<tr>");
            for cell in row {
                write!(o, "<td>{}</td>", escape(cell)).unwrap();
            }
            o.push_str("</tr>\n");
        }
        o.push_str("</table>\n");
    }
    o.push_str("<h2>How each column is read</h2><table class=\"wide\">\n");
    for (c, d) in &view.definitions {
        writeln!(o, "<tr><td>{}</td><td>{}</td></tr>", escape(c), escape(d)).unwrap();
    }
    o.push_str("</table>\n</body></html>\n");
    o
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_cell_is_escaped_and_an_empty_listing_says_so() {
        let mut v = ListingView {
            class: "mra".into(),
            class_label: "MRA <test>".into(),
            from: "2024-01-01".into(),
            to: "2024-12-31".into(),
            site_timezone: "Europe/Vienna".into(),
            extract_end: "2025-01-05".into(),
            notice: "stays inside".into(),
            cautions: vec![],
            summary: vec![("episodes".into(), "1".into())],
            columns: vec!["a".into()],
            rows: vec![vec!["<script>".into()]],
            definitions: vec![],
        };
        let page = render_listing(&v);
        assert!(page.contains("&lt;script&gt;") && !page.contains("<script>"));
        assert!(page.contains("MRA &lt;test&gt;"));
        v.rows.clear();
        assert!(render_listing(&v).contains("No episode with this suspect drug class"));
    }
}
