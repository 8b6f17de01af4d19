//! The shell shared by the study pages ([`crate::compare_page`], [`crate::cause_table`]): the
//! document head with inline CSS, the caution box, and number formatting that never prints
//! `NaN` or `inf` (a value that is not a finite number reads `–`).

use crate::svg::escape;
use std::fmt::Write;

/// Said when a page's own caution is empty.
pub(crate) const DEFAULT_CAUTION: &str = "For research and drug-safety review on de-identified data. Not for decisions about individual patients: follow local policy and licensed clinical practice.";

/// What the study pages add to the monthly report's style, before their own rules.
const STUDY_STYLE: &str = r#"
.caution { border: 2px solid #7a5c00; border-left-width: 6px; }
th, td { vertical-align: top; } td.text, th.text { text-align: left; }
"#;

/// `<!DOCTYPE html>` up to and including `<body>`.
pub(crate) fn start(title: &str, page_style: &str) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{}</title><style>{}{STUDY_STYLE}{page_style}</style></head><body>\n<h1>{}</h1>\n",
        escape(title),
        crate::html::STYLE,
        escape(title)
    )
}

/// The caution box: the page's own text, or [`DEFAULT_CAUTION`] when that is blank.
pub(crate) fn caution(out: &mut String, text: &str) {
    let text = if text.trim().is_empty() {
        DEFAULT_CAUTION
    } else {
        text
    };
    writeln!(
        out,
        "<div class=\"caution\" role=\"note\"><strong>Caution.</strong> {}</div>",
        escape(text)
    )
    .unwrap();
}

/// A bulleted list of notes, nothing when there are none.
pub(crate) fn notes(out: &mut String, notes: &[String]) {
    if notes.is_empty() {
        return;
    }
    out.push_str("<ul class=\"note\">\n");
    for n in notes {
        writeln!(out, "<li>{}</li>", escape(n)).unwrap();
    }
    out.push_str("</ul>\n");
}

/// A finite number to `digits` decimals (never `-0.00`), else `–`.
pub(crate) fn fixed(v: f64, digits: usize) -> String {
    if !v.is_finite() {
        return "–".into();
    }
    let text = format!("{v:.digits$}");
    match text.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => text,
    }
}

/// [`fixed`] of an optional number.
pub(crate) fn fixed_opt(v: Option<f64>, digits: usize) -> String {
    v.map_or("–".into(), |v| fixed(v, digits))
}

/// A proportion as a percentage with 2 decimals: `0.0353` is `3.53%`.
pub(crate) fn percent(v: f64) -> String {
    if v.is_finite() {
        format!("{}%", fixed(v * 100.0, 2))
    } else {
        "–".into()
    }
}

/// A number of days: whole days without decimals.
pub(crate) fn days(v: f64) -> String {
    if v.is_finite() {
        crate::svg::trim_number(v)
    } else {
        "–".into()
    }
}

/// A p-value: 3 decimals, `<0.001` below that (plain text, escape before use).
pub(crate) fn p_value(p: f64) -> String {
    if !p.is_finite() || !(0.0..=1.0).contains(&p) {
        "–".into()
    } else if p < 0.001 {
        "<0.001".into()
    } else {
        format!("{p:.3}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_never_read_nan_inf_or_minus_zero() {
        let check = |got: String, want: &str| assert_eq!(got, want);
        check(fixed(f64::NAN, 2), "–");
        check(fixed(f64::INFINITY, 2), "–");
        check(fixed(-0.0001, 2), "0.00");
        check(fixed(-1.5, 2), "-1.50");
        check(percent(0.03531), "3.53%");
        check(percent(f64::NEG_INFINITY), "–");
        check(days(90.0), "90");
        check(p_value(0.0004), "<0.001");
        check(p_value(0.04321), "0.043");
        check(p_value(f64::NAN), "–");
    }
}
