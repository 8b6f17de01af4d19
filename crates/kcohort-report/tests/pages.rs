//! The study pages from hand-made views: where the marks land (computed from the same scales),
//! what the numbers-at-risk band and the cause table hold and in which order, that the CSV reads
//! back, that edge cases neither panic nor print `NaN` or `inf`, and snapshots of both pages.

use kcohort_report::cause_table::{
    CSV_COLUMNS, CauseRow, CauseTableView, RiskRatioCell, cause_table_csv, render_cause_table,
};
use kcohort_report::compare_page::{
    ArmView, AtRisk, CoefficientRow, CompareView, CurvePoint, Estimate, FOREST_AXIS, ForestRow,
    RISK_AXIS, RatioRow, render_compare,
};
use kcohort_report::ratio_axis::LogScale;

fn curve(points: &[(f64, f64)]) -> Vec<CurvePoint> {
    points
        .iter()
        .map(|&(time_days, risk)| CurvePoint { time_days, risk })
        .collect()
}

fn at_risk(points: &[(f64, u64)]) -> Vec<AtRisk> {
    points
        .iter()
        .map(|&(time_days, n)| AtRisk { time_days, n })
        .collect()
}

fn estimate(e: f64, l: f64, u: f64) -> Option<Estimate> {
    Some(Estimate {
        estimate: e,
        lower: Some(l),
        upper: Some(u),
    })
}

fn ratio(measure: &str, e: Option<f64>, l: f64, u: f64, note: &str) -> RatioRow {
    RatioRow {
        measure: measure.into(),
        estimate: e,
        lower: e.map(|_| l),
        upper: e.map(|_| u),
        note: note.into(),
    }
}

fn forest(group: &str, label: &str, e: Option<f64>, l: f64, u: f64, detail: &str) -> ForestRow {
    ForestRow {
        group: group.into(),
        label: label.into(),
        estimate: e,
        lower: Some(l),
        upper: Some(u),
        detail: detail.into(),
    }
}

/// A made-up comparison with round numbers (not from any data set): 12 first episodes in 340
/// ACE-inhibitor initiators, 5 in 310 calcium-channel-blocker initiators.
fn compare_view() -> CompareView {
    CompareView {
        title: "ACE-inhibitor initiators vs calcium-channel-blocker initiators".into(),
        exposure: "ACE inhibitors".into(),
        comparator: "calcium-channel blockers".into(),
        horizon_days: 90.0,
        follow_up: "intention to treat".into(),
        strata_by: "egfr_category".into(),
        caution: "For research and drug-safety review only; not for decisions about individual patients. Follow local policy and licensed practice.".into(),
        arms: vec![
            ArmView {
                name: "ACE-inhibitor initiators".into(),
                n: 340,
                episodes: 12,
                deaths: 3,
                person_days: 29_500.0,
                km_risk: estimate(0.0362, 0.0158, 0.0566),
                cumulative_incidence: estimate(0.0353, 0.0155, 0.0551),
                km_curve: curve(&[(0.0, 0.0), (14.0, 0.0088), (35.0, 0.0206), (61.0, 0.03), (80.0, 0.0362)]),
                cif_curve: curve(&[(0.0, 0.0), (14.0, 0.0088), (35.0, 0.0203), (61.0, 0.0294), (80.0, 0.0353)]),
                at_risk: at_risk(&[(0.0, 340), (30.0, 321), (60.0, 305), (90.0, 290)]),
            },
            ArmView {
                name: "calcium-channel-blocker initiators".into(),
                n: 310,
                episodes: 5,
                deaths: 2,
                person_days: 27_100.0,
                km_risk: estimate(0.0165, 0.0022, 0.0308),
                cumulative_incidence: estimate(0.0163, 0.0021, 0.0305),
                km_curve: curve(&[(0.0, 0.0), (22.0, 0.0033), (50.0, 0.0099), (77.0, 0.0165)]),
                cif_curve: curve(&[(0.0, 0.0), (22.0, 0.0033), (50.0, 0.0098), (77.0, 0.0163)]),
                at_risk: at_risk(&[(0.0, 310), (30.0, 298), (60.0, 284), (90.0, 271)]),
            },
        ],
        ratios: vec![
            ratio("crude risk ratio", Some(2.19), 0.78, 6.14, ""),
            ratio("Mantel–Haenszel risk ratio", Some(2.05), 0.73, 5.77, "strata of egfr_category"),
            ratio("crude risk difference", Some(0.0196), -0.006, 0.0452, "Newcombe interval"),
            ratio("rate ratio", Some(2.2), 0.78, 6.23, "first episodes per person-day"),
            ratio("Cox hazard ratio", Some(2.1), 0.74, 5.96, "adjusted"),
            ratio("time-varying Cox hazard ratio", None, 0.0, 0.0, "too few events for a time-varying model"),
        ],
        forest: vec![
            forest("Overall", "All", Some(2.0), 1.0, 4.0, "12/340 vs 5/310"),
            forest("By egfr_category", "G1–G2", Some(1.5), 0.4, 5.6, "5/220 vs 3/200"),
            forest("By egfr_category", "G3a", Some(3.1), 0.9, f64::INFINITY, "5/90 vs 2/85"),
            forest("By egfr_category", "G4–G5 <30", None, f64::NAN, f64::NAN, "2/30 vs 0/25"),
        ],
        cox: vec![
            CoefficientRow { name: "ACE inhibitor (vs calcium-channel blocker)".into(), hazard_ratio: 2.1, lower: 0.74, upper: 5.96, p_value: 0.163 },
            CoefficientRow { name: "age per 10 years".into(), hazard_ratio: 1.32, lower: 1.05, upper: 1.66, p_value: 0.018 },
            CoefficientRow { name: "eGFR G4-G5".into(), hazard_ratio: 4.2, lower: 1.3, upper: 13.5, p_value: 0.0004 },
        ],
        left_out: vec!["potassium supplement at entry (no one in either arm)".into()],
        notes: vec!["Strata with no episodes in either arm (eGFR <15) add nothing to the Mantel–Haenszel estimate & are listed for completeness.".into()],
    }
}

fn cell(e: Option<f64>, l: f64, u: f64, counts: [u64; 4], note: &str) -> Option<RiskRatioCell> {
    Some(RiskRatioCell {
        estimate: e,
        lower: e.map(|_| l),
        upper: e.map(|_| u),
        exposed_events: counts[0],
        exposed_n: counts[1],
        comparator_events: counts[2],
        comparator_n: counts[3],
        note: note.into(),
    })
}

fn cause(name: &str, kind: &str, n: u64, share: [f64; 3], rr: Option<RiskRatioCell>) -> CauseRow {
    CauseRow {
        cause: name.into(),
        kind: kind.into(),
        episodes_attributed: n,
        share: share[0],
        share_lower: share[1],
        share_upper: share[2],
        risk_ratio: rr,
    }
}

/// A made-up cause table of 120 episodes against calcium-channel-blocker initiators.
fn cause_view() -> CauseTableView {
    CauseTableView {
        title: "High-potassium episodes: risk ratios by cause category".into(),
        caution: String::new(),
        comparator: "calcium-channel blockers".into(),
        horizon_days: 90.0,
        n_episodes: 120,
        rows: vec![
            cause(
                "ACE inhibitors",
                "drug class",
                42,
                [0.35, 0.27, 0.44],
                cell(Some(2.0), 1.0, 4.0, [12, 340, 5, 310], ""),
            ),
            cause(
                "mineralocorticoid-receptor antagonists",
                "drug class",
                18,
                [0.15, 0.1, 0.22],
                cell(Some(3.4), 1.2, f64::INFINITY, [6, 80, 5, 310], "few users"),
            ),
            cause(
                "potassium, supplements \"oral\"",
                "drug class",
                9,
                [0.075, 0.04, 0.14],
                cell(Some(1.0), 0.3, 3.3, [2, 120, 5, 310], ""),
            ),
            cause(
                "trimethoprim",
                "drug class",
                4,
                [0.033, 0.013, 0.083],
                cell(None, 0.0, 0.0, [0, 25, 5, 310], "no episodes in new users"),
            ),
            cause(
                "CKD G3b or worse",
                "laboratory",
                55,
                [0.458, 0.37, 0.55],
                None,
            ),
            cause(
                "<unrecorded> & other",
                "other",
                7,
                [0.058, 0.029, 0.116],
                None,
            ),
        ],
        notes: vec!["Causes are not exclusive.".into()],
    }
}

/// The page without its `<style>` block (the monthly report's style, shared and not ours).
fn without_style(page: &str) -> String {
    let start = page.find("<style>").expect("a style block") + "<style>".len();
    let end = page.find("</style>").expect("a style block");
    format!("{}[style]{}", &page[..start], &page[end..])
}

/// The number in attribute `name` of the first tag in `tag`.
fn attr(tag: &str, name: &str) -> f64 {
    let key = format!(" {name}=\"");
    let start = tag.find(&key).unwrap_or_else(|| panic!("{name} in {tag}")) + key.len();
    let end = start + tag[start..].find('"').unwrap();
    tag[start..end].parse().unwrap()
}

/// Every opening tag starting with `prefix`, with the text after it up to the next tag.
fn tags<'a>(page: &'a str, prefix: &str) -> Vec<(&'a str, &'a str)> {
    let mut out = Vec::new();
    let mut rest = page;
    while let Some(i) = rest.find(prefix) {
        let end = i + rest[i..].find('>').unwrap() + 1;
        let text_end = end + rest[end..].find('<').unwrap_or(rest.len() - end);
        out.push((&rest[i..end], &rest[end..text_end]));
        rest = &rest[end..];
    }
    out
}

/// The part of `page` from `from` to the next `to`.
fn between<'a>(page: &'a str, from: &str, to: &str) -> &'a str {
    let start = page.find(from).unwrap_or_else(|| panic!("{from}"));
    let end = start + page[start..].find(to).unwrap();
    &page[start..end]
}

/// The page without its script (whose code names `NaN`).
fn without_script(page: &str) -> String {
    match (page.find("<script>"), page.find("</script>")) {
        (Some(start), Some(end)) => format!("{}{}", &page[..start], &page[end..]),
        _ => page.to_string(),
    }
}

/// Neither `NaN` nor `inf` (as words) anywhere: every number that is not a number reads `–`.
fn assert_no_non_numbers(page: &str) {
    let lower = page.to_lowercase();
    for word in ["nan", "inf", "infinity"] {
        let bytes = lower.as_bytes();
        for (i, _) in lower.match_indices(word) {
            let before = i.checked_sub(1).map(|j| bytes[j]);
            let after = bytes.get(i + word.len()).copied();
            let letter = |b: Option<u8>| b.is_some_and(|b| b.is_ascii_alphabetic());
            assert!(
                letter(before) || letter(after),
                "`{word}` at {i}: {}",
                &page[i.saturating_sub(60)..(i + 60).min(page.len())]
            );
        }
    }
    assert_eq!(page.matches("<svg").count(), page.matches("</svg>").count());
}

#[test]
fn numbers_at_risk_sit_under_their_ticks_in_order() {
    let page = render_compare(&compare_view());
    let ticks: Vec<(f64, &str)> = tags(&page, "<text class=\"tick-x\"")
        .into_iter()
        .map(|(t, text)| (attr(t, "x"), text))
        .collect();
    assert_eq!(
        ticks.iter().map(|t| t.1).collect::<Vec<_>>(),
        ["0", "30", "60", "90"]
    );
    // Day 0 at the left end of the plot, the horizon (day 90) at the right.
    assert_eq!(ticks[0].0, RISK_AXIS.0);
    assert_eq!(ticks[3].0, RISK_AXIS.1);
    let band: Vec<(f64, &str)> = tags(&page, "<text class=\"n-at-risk\"")
        .into_iter()
        .map(|(t, text)| (attr(t, "x"), text))
        .collect();
    let want = [
        "340", "321", "305", "290", // exposed
        "310", "298", "284", "271", // comparator
    ];
    assert_eq!(band.iter().map(|b| b.1).collect::<Vec<_>>(), want);
    for (k, (x, _)) in band.iter().enumerate() {
        assert_eq!(*x, ticks[k % 4].0, "column {k} under its tick");
    }
    // The table under the chart says the same, row by row.
    let table = between(&page, "<table class=\"at-risk\">", "</table>");
    let cells: Vec<&str> = table
        .split("<tr>")
        .skip(2)
        .flat_map(|row| tags(row, "<td>").into_iter().skip(1).map(|t| t.1))
        .collect();
    assert_eq!(cells, want);
    assert!(table.contains("<th>0</th><th>30</th><th>60</th><th>90</th>"));
    // The dotted horizon line is at day 90.
    let horizon = tags(&page, "<line class=\"horizon\"")[0].0;
    assert_eq!(attr(horizon, "x1"), RISK_AXIS.1);
}

#[test]
fn the_forest_square_sits_at_the_log_midpoint_of_its_interval() {
    let view = compare_view();
    let page = render_compare(&view);
    // The scale the page uses: fitted to every estimate and limit of the forest rows.
    let scale = LogScale::fit(
        view.forest
            .iter()
            .flat_map(|r| [r.estimate, r.lower, r.upper])
            .flatten(),
        FOREST_AXIS.0,
        FOREST_AXIS.1,
    );
    assert_eq!((scale.low, scale.high), (0.2, 10.0));
    let row = between(
        &page,
        "<g class=\"forest-row\" data-label=\"All\"",
        "</g>\n",
    );
    let whisker = tags(row, "<line class=\"whisker\"")[0].0;
    let square = tags(row, "<rect class=\"estimate\"")[0].0;
    let centre = attr(square, "x") + attr(square, "width") / 2.0;
    // 2 is the geometric mean of 1 and 4, so its x is halfway between theirs.
    let expected = (scale.at(1.0) + scale.at(4.0)) / 2.0;
    assert!((centre - expected).abs() < 0.11, "{centre} vs {expected}");
    assert!((attr(whisker, "x1") - scale.at(1.0)).abs() < 0.06);
    assert!((attr(whisker, "x2") - scale.at(4.0)).abs() < 0.06);
    assert!(row.contains("2.00 (1.00 to 4.00)"), "{row}");
    // The reference line is at 1.
    let reference = tags(&page, "<line class=\"reference\"")[0].0;
    assert!((attr(reference, "x1") - scale.at(1.0)).abs() < 0.06);
}

#[test]
fn forest_rows_without_an_estimate_or_an_upper_limit() {
    let page = render_compare(&compare_view());
    let inestimable = between(
        &page,
        "<g class=\"forest-row\" data-label=\"G4–G5 &lt;30\"",
        "</g>\n",
    );
    assert!(!inestimable.contains("class=\"estimate\""), "{inestimable}");
    assert!(!inestimable.contains("class=\"mark\""), "{inestimable}");
    assert!(inestimable.contains(">not estimable</text>"));
    assert!(inestimable.contains("2/30 vs 0/25"));
    // An infinite upper limit runs off the axis: the whisker reaches its right end and an
    // arrow points on.
    let open = between(
        &page,
        "<g class=\"forest-row\" data-label=\"G3a\"",
        "</g>\n",
    );
    let whisker = tags(open, "<line class=\"whisker\"")[0].0;
    assert_eq!(attr(whisker, "x2"), FOREST_AXIS.1);
    assert_eq!(open.matches("class=\"arrow\"").count(), 1);
    assert!(open.contains("3.10 (0.90 to ∞)"));
    // Headings once per group, in order.
    let groups: Vec<&str> = tags(&page, "<text class=\"group\"")
        .into_iter()
        .map(|t| t.1)
        .collect();
    assert_eq!(groups, ["Overall", "By egfr_category"]);
}

#[test]
fn compare_tables_read_as_they_should() {
    let page = render_compare(&compare_view());
    // Risks in percent with 2 decimals, ratios with 2, differences in percentage points.
    assert!(page.contains("<td>3.62% (1.58 to 5.66)</td>"));
    assert!(page.contains("<td>2.05 (0.73 to 5.77)</td>"));
    assert!(page.contains("<td>1.96 percentage points (-0.60 to 4.52)</td>"));
    assert!(page.contains("<td>not estimable</td><td class=\"text\">too few events"));
    assert!(page.contains("<td>&lt;0.001</td>"));
    assert!(page.contains("Left out of the Cox model: potassium supplement at entry"));
    assert!(page.contains("(eGFR &lt;15) add nothing to the Mantel–Haenszel estimate &amp; are"));
    // The caution comes before everything else but the title.
    let caution = page.find("<div class=\"caution\"").unwrap();
    assert!(caution < page.find("<h2").unwrap());
    assert_no_non_numbers(&page);
    // Self-contained, without scripts.
    for forbidden in ["<script", "https://", "@import", "<link", "url("] {
        assert!(!page.contains(forbidden), "{forbidden}");
    }
}

#[test]
fn compare_edge_cases_neither_panic_nor_print_non_numbers() {
    let base = compare_view();
    let mut cases: Vec<(&str, CompareView)> = Vec::new();
    let mut v = base.clone();
    for a in &mut v.arms {
        a.km_curve.clear();
        a.cif_curve.clear();
        a.at_risk.clear();
    }
    cases.push(("empty curves", v));
    let mut v = base.clone();
    v.arms.truncate(1);
    let a = &mut v.arms[0];
    a.episodes = 0;
    a.km_curve = curve(&[(0.0, 0.0)]);
    a.cif_curve = curve(&[(0.0, 0.0)]);
    a.km_risk = estimate(0.0, 0.0, 0.0108);
    cases.push(("one arm, no events", v));
    let mut v = base.clone();
    for r in &mut v.forest {
        r.estimate = None;
    }
    cases.push(("no forest estimate", v));
    let mut v = base.clone();
    for r in &mut v.forest {
        r.lower = Some(f64::NAN);
        r.upper = Some(f64::INFINITY);
        r.estimate = r.estimate.map(|_| f64::INFINITY);
    }
    v.ratios[0].upper = Some(f64::NAN);
    v.cox[0].upper = f64::INFINITY;
    v.cox[1].hazard_ratio = f64::NAN;
    v.cox[1].p_value = f64::NAN;
    v.arms[0].person_days = f64::NAN;
    v.arms[0].km_risk = estimate(f64::NAN, f64::NAN, f64::INFINITY);
    v.arms[1].km_curve = curve(&[(f64::NAN, 0.1), (5.0, f64::INFINITY), (10.0, 0.02)]);
    cases.push(("non-finite numbers", v));
    let mut v = base.clone();
    v.horizon_days = 0.0;
    cases.push(("horizon 0", v));
    let mut v = base.clone();
    v.horizon_days = f64::NAN;
    v.arms.clear();
    v.forest.clear();
    v.ratios.clear();
    v.cox.clear();
    v.caution.clear();
    cases.push(("nothing at all", v));
    for (name, view) in &cases {
        let page = render_compare(view);
        assert!(page.ends_with("</body></html>\n"), "{name}");
        assert_no_non_numbers(&page);
    }
    let one_arm = render_compare(&cases[1].1);
    assert!(one_arm.contains("<td>0.00% (0.00 to 1.08)</td>"));
    let none = render_compare(&cases[2].1);
    assert!(!none.contains("class=\"estimate\""));
    assert_eq!(none.matches(">not estimable</text>").count(), 4);
    let nothing = render_compare(&cases[5].1);
    assert!(nothing.contains("Not for decisions about individual patients"));
}

#[test]
fn cause_rows_keep_their_order_and_say_why_a_ratio_is_missing() {
    let view = cause_view();
    let page = render_cause_table(&view);
    // Without JavaScript the rows read in the order given; the first column restores it.
    let body = between(&page, "<tbody>", "</tbody>");
    let order: Vec<&str> = body
        .split("<tr>")
        .skip(1)
        .map(|row| tags(row, "<td")[1].1)
        .collect();
    assert_eq!(
        order,
        [
            "ACE inhibitors",
            "mineralocorticoid-receptor antagonists",
            "potassium, supplements &quot;oral&quot;",
            "trimethoprim",
            "CKD G3b or worse",
            "&lt;unrecorded&gt; &amp; other",
        ]
    );
    let first: Vec<&str> = body
        .split("<tr>")
        .skip(1)
        .map(|row| tags(row, "<td")[0].1)
        .collect();
    assert_eq!(first, ["1", "2", "3", "4", "5", "6"]);
    // Sortable columns have number keys that read as numbers, or an empty key (sorted last).
    let heads = between(&page, "<thead>", "</thead>");
    assert_eq!(heads.matches("data-sort-type=\"number\"").count(), 4);
    for (tag, _) in tags(body, "<td") {
        if tag.contains("data-sort=\"\"") || !tag.contains("data-sort") {
            continue;
        }
        let start = tag.find("data-sort=\"").unwrap() + "data-sort=\"".len();
        let key = &tag[start..start + tag[start..].find('"').unwrap()];
        if !tag.contains("class=\"text\"") {
            key.parse::<f64>().unwrap_or_else(|_| panic!("{tag}"));
        }
    }
    // Why a row has no ratio: its note, or a default by kind.
    assert!(page.contains("<span class=\"why\">laboratory cause: no new-user cohort</span>"));
    assert!(page.contains("<span class=\"why\">no new-user cohort for this cause</span>"));
    assert!(page.contains("<span class=\"why\">no episodes in new users</span>"));
    assert!(!page.contains("<unrecorded>"));
    // A risk ratio of 1 puts its square on the reference line.
    let scale = LogScale::fit(
        [2.0, 1.0, 4.0, 3.4, 1.2, f64::INFINITY, 1.0, 0.3, 3.3],
        6.0,
        134.0,
    );
    let row = between(body, "potassium, supplements", "</tr>");
    let square = tags(row, "<rect class=\"estimate\"")[0].0;
    let reference = tags(row, "<line class=\"reference\"")[0].0;
    let centre = attr(square, "x") + attr(square, "width") / 2.0;
    assert!((centre - attr(reference, "x1")).abs() < 0.11);
    assert!((centre - scale.at(1.0)).abs() < 0.11);
    assert_no_non_numbers(&without_script(&page));
    assert!(page.contains("Not for decisions about individual patients"));
}

/// RFC 4180 fields of one CSV text (quotes doubled inside quoted fields).
fn parse_csv(text: &str) -> Vec<Vec<String>> {
    let mut rows = Vec::new();
    let (mut row, mut field, mut quoted, mut chars) =
        (Vec::new(), String::new(), false, text.chars().peekable());
    while let Some(c) = chars.next() {
        match (quoted, c) {
            (true, '"') if chars.peek() == Some(&'"') => {
                chars.next();
                field.push('"');
            }
            (true, '"') => quoted = false,
            (true, c) => field.push(c),
            (false, '"') => quoted = true,
            (false, ',') => row.push(std::mem::take(&mut field)),
            (false, '\n') => {
                row.push(std::mem::take(&mut field));
                rows.push(std::mem::take(&mut row));
            }
            (false, c) => field.push(c),
        }
    }
    assert!(
        field.is_empty() && row.is_empty(),
        "the text ends with a line end"
    );
    rows
}

#[test]
fn the_csv_reads_back() {
    let view = cause_view();
    let csv = cause_table_csv(&view);
    let rows = parse_csv(&csv);
    assert_eq!(rows[0], CSV_COLUMNS);
    assert_eq!(rows.len(), view.rows.len() + 1);
    assert!(rows.iter().all(|r| r.len() == CSV_COLUMNS.len()));
    assert!(csv.contains("\n\"potassium, supplements \"\"oral\"\"\",drug class,9,0.075,"));
    assert_eq!(rows[3][0], "potassium, supplements \"oral\"");
    assert_eq!(
        rows[1][..10],
        [
            "ACE inhibitors",
            "drug class",
            "42",
            "0.35",
            "0.27",
            "0.44",
            "2",
            "1",
            "4",
            "12"
        ]
    );
    // An infinite upper limit and a missing estimate are empty, never `inf` or `NaN`.
    assert_eq!(rows[2][8], "");
    assert_eq!(rows[4][6..9], ["", "", ""]);
    assert_eq!(rows[5][13], "laboratory cause: no new-user cohort");
    assert_eq!(rows[5][9..13], ["", "", "", ""]);
    for r in &rows[1..] {
        for i in [2, 3, 4, 5] {
            r[i].parse::<f64>().unwrap();
        }
    }
}

#[test]
fn cause_edge_cases_neither_panic_nor_print_non_numbers() {
    let mut empty = cause_view();
    empty.rows.clear();
    empty.horizon_days = f64::NAN;
    let mut odd = cause_view();
    for r in &mut odd.rows {
        r.share = f64::NAN;
        r.share_upper = f64::INFINITY;
        if let Some(c) = &mut r.risk_ratio {
            c.estimate = c.estimate.map(|_| f64::INFINITY);
            c.lower = Some(f64::NAN);
        }
    }
    for view in [empty, odd] {
        assert_no_non_numbers(&without_script(&render_cause_table(&view)));
        let csv = cause_table_csv(&view);
        assert_no_non_numbers(&csv);
        assert_eq!(parse_csv(&csv).len(), view.rows.len() + 1);
    }
}

#[test]
fn compare_page_snapshot() {
    insta::assert_snapshot!(
        "compare_page",
        without_style(&render_compare(&compare_view()))
    );
}

#[test]
fn cause_table_snapshot() {
    let view = cause_view();
    insta::assert_snapshot!("cause_table", without_style(&render_cause_table(&view)));
    insta::assert_snapshot!("cause_table_csv", cause_table_csv(&view));
}
