//! `kcohort stats` as a researcher runs it: small tables from published worked examples, checked
//! against the published numbers (source beside each check), and the error messages a user sees.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

fn stats(args: &[&str], input: &Path) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_kcohort"))
        .arg("stats")
        .args(args)
        .arg("--input")
        .arg(input)
        .output()
        .unwrap();
    Run {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Runs with `--format json` and returns the parsed output; stderr must be empty (data to stdout,
/// nothing else).
fn stats_json(args: &[&str], input: &Path) -> Value {
    let mut all = args.to_vec();
    all.extend(["--format", "json"]);
    let run = stats(&all, input);
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    assert_eq!(run.stderr, "", "stderr should be empty on success");
    serde_json::from_str(&run.stdout).unwrap_or_else(|e| panic!("not JSON ({e}):\n{}", run.stdout))
}

fn write(dir: &Path, name: &str, content: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, content).unwrap();
    path
}

/// `|got − expected| <= tolerance`.
fn close(got: &Value, expected: f64, tolerance: f64, what: &str) {
    let got = got
        .as_f64()
        .unwrap_or_else(|| panic!("{what}: expected a number, found {got}"));
    assert!(
        (got - expected).abs() <= tolerance,
        "{what}: got {got}, expected {expected} ± {tolerance}"
    );
}

/// Relative closeness for reference-library values.
fn rel(got: &Value, expected: f64, tolerance: f64, what: &str) {
    close(got, expected, tolerance * expected.abs(), what);
}

fn interval(value: &Value, expected: (f64, f64), tolerance: f64, what: &str) {
    close(
        &value["lower"],
        expected.0,
        tolerance,
        &format!("{what} lower"),
    );
    close(
        &value["upper"],
        expected.1,
        tolerance,
        &format!("{what} upper"),
    );
}

fn rel_interval(value: &Value, expected: (f64, f64), tolerance: f64, what: &str) {
    rel(
        &value["lower"],
        expected.0,
        tolerance,
        &format!("{what} lower"),
    );
    rel(
        &value["upper"],
        expected.1,
        tolerance,
        &format!("{what} upper"),
    );
}

/// One row per subject: `n` rows of (`prefix`, exposure, outcome) for each cell.
fn subject_rows(out: &mut String, prefix: &str, exposed: (u64, u64), unexposed: (u64, u64)) {
    for (exposure, (cases, total)) in [(1, exposed), (0, unexposed)] {
        for i in 0..total {
            let outcome = u64::from(i < cases);
            out.push_str(&format!("{prefix}{exposure},{outcome}\n"));
        }
    }
}

#[test]
fn proportion_reproduces_newcombe_1998_table_ii() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "proportions.csv",
        "example,cases,total\na,81,263\nb,15,148\nc,0,20\nd,1,29\ne,29,29\nf,5,25\n",
    );
    // Newcombe, Stat Med 1998;17:857, Table II: method 3 (Wilson score) and method 5 (exact,
    // Clopper–Pearson), 4 decimals, as listed in the shared domain reference (DOMAIN.md §5.1) [published values as
    // remembered there; recomputed with scipy 1.17.1 in tests/reference/rates/fixtures/proportion.json].
    // Tolerance 0.5e-4 is the table's rounding.
    let wilson = [
        (0.2553, 0.3662),
        (0.0624, 0.1605),
        (0.0, 0.1611),
        (0.0061, 0.1718),
        (0.8830, 1.0),
        (0.0886, 0.3913),
    ];
    let exact = [
        (0.2527, 0.3676),
        (0.0578, 0.1617),
        (0.0, 0.1684),
        (0.0009, 0.1776),
        (0.8806, 1.0),
        // Conover, Practical Nonparametric Statistics 3rd ed. 1999, 5/25: 0.068–0.407 (3 decimals),
        // via DOMAIN.md §5.1; the 4-decimal scipy values are 0.0683–0.4070.
        (0.0683, 0.4070),
    ];
    for (method, expected) in [("wilson", wilson), ("exact", exact)] {
        let out = stats_json(
            &[
                "proportion",
                "--cases",
                "cases",
                "--total",
                "total",
                "--group",
                "example",
                "--method",
                method,
            ],
            &input,
        );
        assert_eq!(out["command"], "proportion");
        assert_eq!(out["input"]["columns"]["cases"], "cases");
        assert_eq!(out["input"]["rows_used"], 6);
        let results = out["results"].as_array().unwrap();
        assert_eq!(results.len(), 6);
        for (result, (name, expected)) in results
            .iter()
            .zip(["a", "b", "c", "d", "e", "f"].iter().zip(expected))
        {
            assert_eq!(result["group"], *name);
            let p = &result["proportion"];
            interval(
                &p["interval"],
                expected,
                0.5e-4,
                &format!("{method} {name}"),
            );
            assert_eq!(p["interval"]["level"], 0.95);
        }
    }
}

#[test]
fn proportion_from_one_row_per_subject_equals_the_counted_form() {
    // 81 cases among 263 subjects (Newcombe 1998 Table II, first row): Wilson 0.2553–0.3662.
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from("id,hyperkalaemia\n");
    for i in 0..263 {
        csv.push_str(&format!("{i},{}\n", if i < 81 { "true" } else { "false" }));
    }
    let input = write(dir.path(), "subjects.csv", &csv);
    let out = stats_json(&["proportion", "--outcome", "hyperkalaemia"], &input);
    let p = &out["results"][0]["proportion"];
    assert_eq!(p["events"], 81);
    assert_eq!(p["total"], 263);
    assert_eq!(out["results"][0]["group"], Value::Null);
    interval(&p["interval"], (0.2553, 0.3662), 0.5e-4, "Wilson 81/263");
}

#[test]
fn rate_ratio_reproduces_the_statsmodels_example() {
    // 60 events over 51 477.5 person-time vs 30 over 54 308.7 (statsmodels test results, taken from
    // R exactci::poisson.exact; DOMAIN.md §5.3). The exposed group is split over two rows to check
    // that rows of a group are summed.
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "rates.csv",
        "arm,events,person_time\nexposed,40,30000\nunexposed,30,54308.7\nexposed,20,21477.5\n",
    );
    let out = stats_json(
        &[
            "rate-ratio",
            "--group",
            "arm",
            "--events",
            "events",
            "--person-time",
            "person_time",
            "--reference",
            "unexposed",
        ],
        &input,
    );
    assert_eq!(out["command"], "rate-ratio");
    assert_eq!(out["results"]["reference"], "unexposed");
    let comparison = &out["results"]["comparisons"][0];
    assert_eq!(comparison["group"], "exposed");
    let wald = &comparison["rate_ratio_wald_log"];
    let exact = &comparison["rate_ratio_exact_conditional"];
    let difference = &comparison["rate_difference"];
    // IRR 2.10999757 [statsmodels test results, 8 decimals as published there].
    close(&wald["estimate"], 2.109_997_57, 0.5e-8, "IRR");
    close(&exact["estimate"], 2.109_997_57, 0.5e-8, "IRR (exact)");
    assert_eq!(wald["counts"]["exposed_events"], 60);
    close(
        &wald["counts"]["exposed_person_time"],
        51_477.5,
        1e-9,
        "exposed person-time",
    );
    // Wald-log 1.36128–3.27052, central exact conditional 1.33974–3.38837, rate difference
    // 0.6132 (0.2581–0.9682) per 1000: statsmodels 0.15.0 confint_poisson_2indep (methods
    // "wald-log", "exact-cond" via its central Clopper–Pearson, "wald"), from
    // tests/reference/rates/make_fixtures.py (fixtures/rate_ratio.json).
    rel_interval(
        &wald["interval"],
        (1.361_280_126_302_506_7, 3.270_516_969_129_076),
        1e-6,
        "Wald-log",
    );
    rel_interval(
        &exact["interval"],
        (1.339_735_721_772_652_2, 3.388_365_573_616_251_7),
        1e-4,
        "exact conditional",
    );
    close(
        &difference["estimate"],
        0.6132,
        0.5e-4,
        "rate difference per 1000",
    );
    rel_interval(
        &difference["interval"],
        (0.258_122_351_463_948_7, 0.968_197_820_171_148_5),
        1e-6,
        "rate difference",
    );
    // Rate of the exposed group 1.1656 (0.8894–1.5003) per 1000: scipy 1.17.1 Garwood limits,
    // fixtures/garwood.json "rates".
    let exposed_rate = out["results"]["rates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["group"] == "exposed")
        .unwrap();
    rel(
        &exposed_rate["rate"]["rate"],
        1.165_557_767_956_874_3,
        1e-9,
        "exposed rate",
    );
    rel_interval(
        &exposed_rate["rate"]["interval"],
        (0.889_443_367_490_792_4, 1.500_303_888_235_507_3),
        1e-4,
        "exposed rate",
    );

    // The table format says the same in words.
    let text = stats(
        &[
            "rate-ratio",
            "--group",
            "arm",
            "--events",
            "events",
            "--person-time",
            "person_time",
            "--reference",
            "unexposed",
        ],
        &input,
    );
    assert_eq!(text.code, Some(0), "{}", text.stderr);
    for words in [
        "rate per 1,000",
        "95% CI",
        "exposed vs unexposed",
        "2.110",
        "1.361 to 3.271",
        "51,477.5",
    ] {
        assert!(
            text.stdout.contains(words),
            "missing {words:?} in\n{}",
            text.stdout
        );
    }
}

#[test]
fn risk_ratio_reproduces_the_tolbutamide_strata() {
    // UGDP tolbutamide vs placebo deaths by age, <55: 8/106 vs 5/120, 55+: 22/98 vs 16/85 (Rothman &
    // Greenland, Modern Epidemiology 2nd ed. 1998, ch. 15 [data as remembered in kcohort-stats'
    // mantel_haenszel tests]); crude 30/204 vs 21/205.
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from("age_band,tolbutamide,died\n");
    subject_rows(&mut csv, "<55,", (8, 106), (5, 120));
    subject_rows(&mut csv, "55+,", (22, 98), (16, 85));
    let input = write(dir.path(), "ugdp.csv", &csv);
    let out = stats_json(
        &[
            "risk-ratio",
            "--exposure",
            "tolbutamide",
            "--outcome",
            "died",
            "--strata",
            "age_band",
        ],
        &input,
    );
    assert_eq!(out["input"]["rows_used"], 409);
    let crude = &out["results"]["crude"];
    assert_eq!(crude["table"]["exposed_cases"], 30);
    assert_eq!(crude["table"]["unexposed_total"], 205);
    // Crude values: statsmodels 0.15.0 Table2x2 (risk ratio, Katz; odds ratio, Woolf) and the
    // Wald/Newcombe differences, tests/reference/rates/fixtures/two_by_two.json; RR 1.4356
    // (0.8510–2.4216) as in DOMAIN.md §5.4.
    rel(
        &crude["risk_ratio"]["estimate"],
        1.435_574_229_691_877,
        1e-9,
        "crude RR",
    );
    rel_interval(
        &crude["risk_ratio"]["interval"],
        (0.851_022_073_679_915_8, 2.421_645_022_724_235_7),
        1e-6,
        "crude RR",
    );
    rel(
        &crude["odds_ratio"]["estimate"],
        1.510_673_234_811_165_8,
        1e-9,
        "crude OR",
    );
    rel_interval(
        &crude["odds_ratio"]["interval"],
        (0.833_297_274_396_252_9, 2.738_678_851_467_865_7),
        1e-6,
        "crude OR",
    );
    rel_interval(
        &crude["risk_difference_wald"]["interval"],
        (-0.019_293_626_836_270_49, 0.108_533_225_114_606_24),
        1e-6,
        "RD Wald",
    );
    rel_interval(
        &crude["risk_difference_newcombe"]["interval"],
        (-0.020_022_532_001_448_295, 0.109_617_078_038_639_4),
        1e-6,
        "RD Newcombe",
    );
    // Mantel–Haenszel: statsmodels 0.15.0 StratifiedTable (riskratio_pooled, oddsratio_pooled with
    // its interval, test_equal_odds(adjust=True)) and combine_effects' Q for the Woolf test,
    // fixtures/mantel_haenszel.json "tolbutamide"; RR_MH 1.33 as printed in Modern Epidemiology
    // [from memory].
    let stratified = &out["results"]["stratified"];
    let rr = &stratified["mantel_haenszel_risk_ratio"];
    rel(&rr["estimate"], 1.325_555_324_155_105_2, 1e-9, "RR_MH");
    close(&rr["estimate"], 1.33, 0.005, "RR_MH (textbook, 2 dp)");
    rel(
        &rr["homogeneity"]["chi_square"],
        0.444_170_643_523_050_36,
        1e-6,
        "Woolf chi-square",
    );
    rel(
        &rr["homogeneity"]["p_value"],
        0.505_116_302_026_376,
        1e-6,
        "Woolf p",
    );
    assert_eq!(rr["homogeneity"]["degrees_of_freedom"], 1);
    let or = &stratified["mantel_haenszel_odds_ratio"];
    rel(&or["estimate"], 1.403_148_543_428_28, 1e-9, "OR_MH");
    rel_interval(
        &or["interval"],
        (0.762_515_168_115_570_1, 2.582_015_305_728_974),
        1e-6,
        "OR_MH",
    );
    assert_eq!(or["homogeneity"]["method"], "breslow_day_tarone");
    rel(
        &or["homogeneity"]["chi_square"],
        0.348_944_866_329_504_17,
        1e-6,
        "Breslow–Day–Tarone",
    );
    rel(
        &or["homogeneity"]["p_value"],
        0.554_711_024_170_996_5,
        1e-6,
        "Breslow–Day–Tarone p",
    );
    // Stratum-specific estimates, in text order of the stratum names ("55+" before "<55").
    let strata = stratified["strata"].as_array().unwrap();
    assert_eq!(strata[0]["stratum"], "55+");
    assert_eq!(strata[1]["estimates"]["table"]["exposed_total"], 106);
    // Stratum <55: (8/106)/(5/120) = 1.8113, by hand.
    rel(
        &strata[1]["estimates"]["risk_ratio"]["estimate"],
        (8.0 / 106.0) / (5.0 / 120.0),
        1e-12,
        "RR <55",
    );
}

#[test]
fn parquet_input_gives_newcombe_risk_difference() {
    use arrow_array::{ArrayRef, BooleanArray, Int64Array, RecordBatch};
    use std::sync::Arc;

    // 56/70 vs 48/80 (Newcombe, Stat Med 1998;17:873, Table II, example (a)): Wald 0.0575–0.3425,
    // hybrid score (method 10) 0.0524–0.3339 [4 dp, as remembered in DOMAIN.md §5.4; statsmodels-era
    // scipy values in fixtures/two_by_two.json agree].
    let mut exposed = Vec::new();
    let mut outcome = Vec::new();
    for (is_exposed, cases, total) in [(true, 56, 70), (false, 48, 80)] {
        for i in 0..total {
            exposed.push(is_exposed);
            outcome.push(i64::from(i < cases));
        }
    }
    let batch = RecordBatch::try_from_iter([
        ("exposed", Arc::new(BooleanArray::from(exposed)) as ArrayRef),
        ("outcome", Arc::new(Int64Array::from(outcome)) as ArrayRef),
    ])
    .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("newcombe.parquet");
    let file = std::fs::File::create(&path).unwrap();
    let mut writer = parquet::arrow::ArrowWriter::try_new(file, batch.schema(), None).unwrap();
    writer.write(&batch).unwrap();
    writer.close().unwrap();

    let out = stats_json(
        &[
            "risk-ratio",
            "--exposure",
            "exposed",
            "--outcome",
            "outcome",
        ],
        &path,
    );
    assert_eq!(out["input"]["format"], "parquet");
    assert_eq!(out["input"]["rows_used"], 150);
    let crude = &out["results"]["crude"];
    close(
        &crude["risk_difference_newcombe"]["estimate"],
        0.2,
        1e-12,
        "RD",
    );
    interval(
        &crude["risk_difference_wald"]["interval"],
        (0.0575, 0.3425),
        0.5e-4,
        "Wald",
    );
    interval(
        &crude["risk_difference_newcombe"]["interval"],
        (0.0524, 0.3339),
        0.5e-4,
        "Newcombe",
    );
    assert_eq!(out["results"]["stratified"], Value::Null);

    // A Parquet null is a missing value, named by its 1-based row.
    let batch = RecordBatch::try_from_iter([
        (
            "exposed",
            Arc::new(BooleanArray::from(vec![true, false, true])) as ArrayRef,
        ),
        (
            "outcome",
            Arc::new(Int64Array::from(vec![Some(1), Some(0), None])) as ArrayRef,
        ),
    ])
    .unwrap();
    let path = dir.path().join("with_null.parquet");
    let file = std::fs::File::create(&path).unwrap();
    let mut writer = parquet::arrow::ArrowWriter::try_new(file, batch.schema(), None).unwrap();
    writer.write(&batch).unwrap();
    writer.close().unwrap();
    let run = stats(
        &[
            "risk-ratio",
            "--exposure",
            "exposed",
            "--outcome",
            "outcome",
        ],
        &path,
    );
    assert_eq!(run.code, Some(1));
    assert!(
        run.stderr
            .contains("with_null.parquet row 3, column `outcome`: the value is missing"),
        "{}",
        run.stderr
    );
}

#[test]
fn control_chart_reproduces_montgomerys_orange_juice_p_chart() {
    // Montgomery, Introduction to Statistical Quality Control, orange-juice cans, 30 samples of 50:
    // centre 0.2313, limits 0.0524–0.4102, samples 15 and 23 above the upper limit [data and
    // printed limits from memory, as in tests/reference/rates/make_fixtures.py].
    let juice = [
        12, 15, 8, 10, 4, 7, 16, 9, 14, 10, 5, 6, 17, 12, 22, 8, 10, 5, 13, 11, 20, 18, 24, 15, 9,
        12, 7, 13, 9, 6,
    ];
    let mut csv = String::from("sample,nonconforming,inspected\n");
    for (i, x) in juice.iter().enumerate() {
        csv.push_str(&format!("{},{x},50\n", i + 1));
    }
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "juice.csv", &csv);
    let args = [
        "control-chart",
        "--count",
        "nonconforming",
        "--exposure",
        "inspected",
        "--period",
        "sample",
        "--kind",
        "p",
    ];
    let out = stats_json(&args, &input);
    let chart = &out["results"]["chart"];
    close(&chart["centre"], 0.2313, 0.5e-4, "centre line");
    let points = chart["points"].as_array().unwrap();
    close(&points[0]["lower"], 0.0524, 0.5e-4, "lower limit");
    close(&points[0]["upper"], 0.4102, 0.5e-4, "upper limit");
    let beyond: Vec<&Value> = points
        .iter()
        .zip(out["results"]["periods"].as_array().unwrap())
        .filter(|(p, _)| {
            p["signals"]
                .as_array()
                .unwrap()
                .iter()
                .any(|s| s["rule_number"] == 1)
        })
        .map(|(_, name)| name)
        .collect();
    assert_eq!(beyond, ["15", "23"]);
    let text = stats(&args, &input);
    assert!(
        text.stdout
            .contains("15: rule 1: above the upper control limit"),
        "{}",
        text.stdout
    );
}

#[test]
fn standardize_matches_the_fay_feuer_reference() {
    // SAS/STAT PROC STDRATE "Getting Started": skin-cancer (C43) deaths in Florida 2000 by age band,
    // standardised to the US 2000 person-years of the same example. Reference: scipy 1.17.1
    // gamma.ppf (Fay & Feuer 1997) in tests/reference/rates/make_fixtures.py
    // (fixtures/standardize.json "sas_florida_c43_us2000"), rate 2.7208 per 100,000.
    let events = [0, 0, 4, 14, 43, 72, 70, 126, 136, 73];
    let years = [
        953785, 1997935, 1885014, 1957573, 2356649, 2088000, 1548371, 1447432, 1087524, 335944,
    ];
    let us = [
        19175798, 41077577, 39183891, 39892024, 45148527, 37677952, 24274684, 18390986, 12361180,
        4239587,
    ];
    let mut csv = String::from("age,deaths,person_years,us2000\n");
    for i in 0..10 {
        csv.push_str(&format!("band{i},{},{},{}\n", events[i], years[i], us[i]));
    }
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "florida.csv", &csv);
    let out = stats_json(
        &[
            "standardize",
            "--events",
            "deaths",
            "--population",
            "person_years",
            "--standard",
            "us2000",
        ],
        &input,
    );
    let rate = &out["results"][0]["rate"];
    rel(
        &rate["rate"],
        2.720_798_632_148_422_6,
        1e-9,
        "DSR per 100,000",
    );
    rel_interval(
        &rate["interval"],
        (2.491_182_273_781_453, 2.968_230_469_990_940_6),
        1e-4,
        "Fay–Feuer",
    );
    assert_eq!(rate["method"], "fay_feuer");
}

#[test]
fn funnel_flags_a_unit_far_above_the_target() {
    // Five wards at 10% and one at 30% of 200: the 30% ward lies far beyond the 99.8% limit of a
    // 10% target (exact binomial 99.8% upper limit for n = 200 is about 0.17).
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "wards.csv",
        "ward,cases,admissions\nA,20,200\nB,19,190\nC,21,210\nD,20,200\nE,18,180\nF,60,200\n",
    );
    let out = stats_json(
        &[
            "funnel",
            "--count",
            "cases",
            "--exposure",
            "admissions",
            "--unit",
            "ward",
            "--target",
            "0.1",
        ],
        &input,
    );
    let units = out["results"]["funnel"]["units"].as_array().unwrap();
    let classes: Vec<&str> = units.iter().map(|u| u["class"].as_str().unwrap()).collect();
    assert_eq!(
        classes,
        [
            "within",
            "within",
            "within",
            "within",
            "within",
            "above_outer"
        ]
    );
    assert_eq!(out["results"]["units"][5], "F");
}

#[test]
fn an_unknown_column_lists_the_columns_found() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "cohort.csv",
        "ward,events,person_days\nA,3,100\n",
    );
    let run = stats(
        &["rate", "--events", "events", "--person-time", "Person_Days"],
        &input,
    );
    assert_eq!(run.code, Some(1));
    assert_eq!(run.stdout, "");
    assert!(
        run.stderr
            .contains("error: cohort.csv has no column `Person_Days`")
            && run
                .stderr
                .contains("the columns found are `ward`, `events`, `person_days`")
            && run.stderr.contains("did you mean `person_days`?"),
        "{}",
        run.stderr
    );
}

#[test]
fn a_bad_number_names_file_line_column_and_value() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "cohort.csv",
        "ward,events,person_days\nA,3,100\nB,1,\"50\"\nC,2,abc\n",
    );
    let run = stats(
        &["rate", "--events", "events", "--person-time", "person_days"],
        &input,
    );
    assert_eq!(run.code, Some(1));
    assert!(
        run.stderr
            .contains("error: cohort.csv line 4, column `person_days`: expected a number, 0 or more, found `abc`"),
        "{}",
        run.stderr
    );
    let input = write(
        dir.path(),
        "counts.csv",
        "ward,events,person_days\nA,2.5,100\n",
    );
    let run = stats(
        &["rate", "--events", "events", "--person-time", "person_days"],
        &input,
    );
    assert!(
        run.stderr.contains("counts.csv line 2, column `events`: expected a whole number, 0 or more (a count), found `2.5`"),
        "{}",
        run.stderr
    );
}

#[test]
fn a_missing_value_is_an_error_unless_rows_are_dropped_and_counted() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "cohort.csv",
        "ward,events,person_days\nA,3,1000\nB,,500\nC,7,2000\n",
    );
    let args = ["rate", "--events", "events", "--person-time", "person_days"];
    let run = stats(&args, &input);
    assert_eq!(run.code, Some(1));
    assert!(
        run.stderr
            .contains("cohort.csv line 3, column `events`: the value is missing")
            && run.stderr.contains("--drop-missing"),
        "{}",
        run.stderr
    );

    let mut dropping = args.to_vec();
    dropping.extend(["--drop-missing", "--format", "json"]);
    let run = stats(&dropping, &input);
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    assert!(
        run.stderr
            .contains("1 of 3 rows of cohort.csv were left out for a missing value"),
        "{}",
        run.stderr
    );
    let out: Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(out["input"]["rows_read"], 3);
    assert_eq!(out["input"]["rows_dropped_missing"], 1);
    // The two complete rows: 10 events over 3000 days, 3.333 per 1000.
    assert_eq!(out["results"][0]["rate"]["events"], 10);
    close(
        &out["results"][0]["rate"]["rate"],
        10.0 / 3.0,
        1e-12,
        "rate per 1000",
    );
}

#[test]
fn library_errors_pass_through_with_context() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "wards.csv", "ward,cases,total\nA,3,10\nB,7,5\n");
    let run = stats(
        &[
            "proportion",
            "--cases",
            "cases",
            "--total",
            "total",
            "--group",
            "ward",
        ],
        &input,
    );
    assert_eq!(run.code, Some(1));
    assert!(
        run.stderr.contains("error: proportion of group `B`")
            && run
                .stderr
                .contains("caused by: events (numerator): expected at most the total 5, found 7"),
        "{}",
        run.stderr
    );
}

#[test]
fn a_reference_group_that_does_not_exist_lists_the_groups() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "rates.csv",
        "arm,events,pt\ndrug,3,100\nplacebo,1,100\n",
    );
    let run = stats(
        &[
            "rate-ratio",
            "--group",
            "arm",
            "--events",
            "events",
            "--person-time",
            "pt",
            "--reference",
            "Placebo",
        ],
        &input,
    );
    assert_eq!(run.code, Some(1));
    assert!(
        run.stderr.contains("has no group `Placebo`") && run.stderr.contains("`drug`, `placebo`"),
        "{}",
        run.stderr
    );
}

fn survival_fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../tests/reference/survival/fixtures")
        .join(name)
}

#[test]
fn km_reproduces_r_survival_aml() {
    // R survival::aml (Miller 1981): Maintained 9,13,13+,18,23,28+,31,34,45+,48,161+;
    // Nonmaintained 5,5,8,8,12,16+,23,27,30,33,43,45 (DOMAIN.md §5.7).
    let maintained = [
        (9, 1),
        (13, 1),
        (13, 0),
        (18, 1),
        (23, 1),
        (28, 0),
        (31, 1),
        (34, 1),
        (45, 0),
        (48, 1),
        (161, 0),
    ];
    let nonmaintained = [
        (5, 1),
        (5, 1),
        (8, 1),
        (8, 1),
        (12, 1),
        (16, 0),
        (23, 1),
        (27, 1),
        (30, 1),
        (33, 1),
        (43, 1),
        (45, 1),
    ];
    let mut csv = String::from("weeks,relapse,arm\n");
    for (arm, rows) in [
        ("Maintained", &maintained[..]),
        ("Nonmaintained", &nonmaintained[..]),
    ] {
        for (t, e) in rows {
            csv.push_str(&format!("{t},{e},{arm}\n"));
        }
    }
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "aml.csv", &csv);
    let out = stats_json(
        &[
            "km", "--time", "weeks", "--event", "relapse", "--group", "arm", "--at", "10,20",
        ],
        &input,
    );
    let curves = out["results"]["curves"].as_array().unwrap();
    assert_eq!(curves[0]["group"], "Maintained");
    let km = &curves[0]["kaplan_meier"];
    // R survival tests/doaml.Rout.save (DOMAIN.md §5.7 [C]): Maintained, at each event time:
    // time, n at risk, S (3 dp), se(S) (4 dp), log 95% CI (4 dp lower, 3 dp upper).
    let expected = [
        (9.0, 11, 0.909, 0.0867, 0.7541, 1.000),
        (13.0, 10, 0.818, 0.1163, 0.6192, 1.000),
        (18.0, 8, 0.716, 0.1397, 0.4884, 1.000),
        (23.0, 7, 0.614, 0.1526, 0.3769, 0.999),
        (31.0, 5, 0.491, 0.1642, 0.2549, 0.946),
        (34.0, 4, 0.368, 0.1627, 0.1549, 0.875),
        (48.0, 2, 0.184, 0.1535, 0.0359, 0.944),
    ];
    let event_steps: Vec<&Value> = km["steps"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| s["n_events"].as_u64().unwrap() > 0)
        .collect();
    assert_eq!(event_steps.len(), expected.len());
    for (step, (t, n, s, se, lower, upper)) in event_steps.iter().zip(expected) {
        let what = format!("Maintained t={t}");
        close(&step["time"], t, 0.0, &what);
        assert_eq!(step["n_at_risk"], n, "{what}");
        close(&step["survival"], s, 0.5e-3, &format!("{what} S"));
        close(&step["std_error"], se, 0.5e-4, &format!("{what} se"));
        close(
            &step["log_interval"]["lower"],
            lower,
            0.5e-4,
            &format!("{what} lower"),
        );
        close(
            &step["log_interval"]["upper"],
            upper,
            0.5e-3,
            &format!("{what} upper"),
        );
    }
    // Medians [C, DOMAIN.md §5.7]: Maintained 31 (95% CI 18–NA), Nonmaintained 23 (8–NA).
    assert_eq!(km["median"]["median"], 31.0);
    assert_eq!(km["median"]["log_lower"], 18.0);
    assert_eq!(km["median"]["log_upper"], Value::Null);
    let other = &curves[1]["kaplan_meier"];
    assert_eq!(other["median"]["median"], 23.0);
    assert_eq!(other["median"]["log_lower"], 8.0);
    // summary(fit, times = c(10, 20)) from R survival 3.5.3, tests/reference/survival/kaplan_meier.R
    // (fixtures/kaplan_meier.json "aml maintained=1"): n at risk 10 and 7, S 0.909091 and 0.715909.
    let at = km["at_times"].as_array().unwrap();
    assert_eq!(at[0]["n_at_risk"], 10);
    close(&at[0]["survival"], 0.909_090_909_091, 1e-9, "S(10)");
    assert_eq!(at[1]["n_at_risk"], 7);
    close(&at[1]["survival"], 0.715_909_090_909, 1e-9, "S(20)");
    close(
        &at[1]["log_interval"]["lower"],
        0.488_426_287_422,
        1e-8,
        "S(20) log lower",
    );
    // Log-rank [C, DOMAIN.md §5.8]: O 7 / 11, E 10.69 / 7.31, chi-square 3.40, p 0.0653; R survival
    // 3.5.3 survdiff (fixtures/log_rank.json): chi-square 3.39638869898, p 0.0653393220405.
    let log_rank = &out["results"]["log_rank"];
    assert_eq!(log_rank["groups"][0]["group"], "Maintained");
    close(&log_rank["groups"][0]["observed"], 7.0, 0.0, "O maintained");
    close(
        &log_rank["groups"][0]["expected"],
        10.69,
        0.005,
        "E maintained",
    );
    close(
        &log_rank["groups"][1]["expected"],
        7.31,
        0.005,
        "E nonmaintained",
    );
    rel(
        &log_rank["chi_square"],
        3.396_388_698_98,
        1e-9,
        "log-rank chi-square",
    );
    rel(
        &log_rank["p_value"],
        0.065_339_322_040_5,
        1e-8,
        "log-rank p",
    );
}

#[test]
fn cif_reproduces_r_survival_and_cmprsk_on_mgus2() {
    // survival::mgus2 as prepared by tests/reference/survival/aalen_johansen.R: plasma-cell
    // malignancy (1) with death (2) as competing event, by sex.
    let input = survival_fixture("mgus2.csv");
    let out = stats_json(
        &[
            "cif", "--time", "etime", "--event", "event", "--group", "sex",
        ],
        &input,
    );
    let curve = &out["results"]["curves"][0];
    assert_eq!(curve["group"], "0");
    let steps = curve["aalen_johansen"]["steps"].as_array().unwrap();
    let at_120 = steps.iter().find(|s| s["time"] == 120.0).unwrap();
    // R survival 3.5.3 survfit(Surv(etime, factor(event)) ~ 1, subset = sex == 0), t = 120
    // (fixtures/aalen_johansen.json "mgus2 sex=0"): pstate 0.445624289849 (event-free),
    // 0.0738856643759 (pcm), 0.480490045775 (death); std_err of pcm 0.0107697973765.
    close(&at_120["event_free"], 0.445_624_289_849, 1e-9, "event-free");
    close(
        &at_120["cumulative_incidence"][0],
        0.073_885_664_375_9,
        1e-9,
        "CIF pcm",
    );
    close(
        &at_120["cumulative_incidence"][1],
        0.480_490_045_775,
        1e-9,
        "CIF death",
    );
    close(
        &at_120["std_error"][0],
        0.010_769_797_376_5,
        1e-8,
        "se CIF pcm",
    );
    // Gray's test by sex, cmprsk 2.2.11 cuminc (fixtures/aalen_johansen.json "mgus2 by sex"):
    // 1.19450782508 (p 0.274422156788) for pcm, 11.6512590121 (p 0.000641590976408) for death.
    let gray = out["results"]["gray_tests"].as_array().unwrap();
    assert_eq!(gray[0]["cause"], 1);
    rel(&gray[0]["chi_square"], 1.194_507_825_08, 1e-7, "Gray pcm");
    rel(&gray[0]["p_value"], 0.274_422_156_788, 1e-7, "Gray pcm p");
    rel(&gray[1]["chi_square"], 11.651_259_012_1, 1e-7, "Gray death");
    rel(
        &gray[1]["p_value"],
        0.000_641_590_976_408,
        1e-6,
        "Gray death p",
    );
}

#[test]
fn cox_reproduces_r_coxph_on_lung_with_clusters_and_dropped_rows() {
    let input = survival_fixture("lung.csv");
    // coxph(Surv(time, status) ~ sex, lung): coef −0.5310, se 0.1672, LR 10.63 [C: published R
    // outputs, DOMAIN.md §5.8]; R survival 3.5.3 in fixtures/cox.json "lung ~ sex efron":
    // −0.53102353762, se 0.167178583231, LR 10.6336047309, score 10.3251484957.
    let out = stats_json(
        &["cox", "--time", "time", "--event", "status", "sex"],
        &input,
    );
    let fit = &out["results"]["fit"];
    let sex = &fit["coefficients"][0];
    close(&sex["coefficient"], -0.5310, 0.5e-4, "coef (published)");
    rel(&sex["coefficient"], -0.531_023_537_62, 1e-7, "coef");
    rel(&sex["std_error"], 0.167_178_583_231, 1e-7, "se");
    rel(
        &fit["likelihood_ratio"]["statistic"],
        10.633_604_730_9,
        1e-7,
        "LR",
    );
    rel(&fit["score"]["statistic"], 10.325_148_495_7, 1e-7, "score");
    // The same model with sex (1, 2) as a categorical covariate: one covariate `sex=2` with the
    // same coefficient, since the two codes are one unit apart.
    let out = stats_json(
        &[
            "cox",
            "--time",
            "time",
            "--event",
            "status",
            "--categorical",
            "sex",
            "sex",
        ],
        &input,
    );
    let sex2 = &out["results"]["fit"]["coefficients"][0];
    assert_eq!(sex2["name"], "sex=2");
    rel(
        &sex2["coefficient"],
        -0.531_023_537_62,
        1e-7,
        "coef of sex=2",
    );
    assert_eq!(out["results"]["categorical_encodings"][0]["reference"], "1");

    // coxph(Surv(time, status) ~ sex + age, cluster = inst), R survival 3.5.3 (fixtures/cox.json
    // "lung ~ sex + age, cluster(inst) efron"): 227 rows (one row lacks inst), coefficients
    // −0.511668295866 and 0.0170334959729, robust se 0.128230601685 and 0.00732739307379.
    let run = stats(
        &[
            "cox",
            "--time",
            "time",
            "--event",
            "status",
            "--cluster",
            "inst",
            "--drop-missing",
            "--format",
            "json",
            "sex",
            "age",
        ],
        &input,
    );
    assert_eq!(run.code, Some(0), "{}", run.stderr);
    assert!(
        run.stderr
            .contains("1 of 228 rows of lung.csv were left out"),
        "{}",
        run.stderr
    );
    let out: Value = serde_json::from_str(&run.stdout).unwrap();
    let fit = &out["results"]["fit"];
    assert_eq!(fit["n_rows"], 227);
    let expected = [
        (-0.511_668_295_866, 0.128_230_601_685),
        (0.017_033_495_972_9, 0.007_327_393_073_79),
    ];
    for (c, (coef, robust)) in fit["coefficients"].as_array().unwrap().iter().zip(expected) {
        rel(&c["coefficient"], coef, 1e-6, "clustered coef");
        rel(&c["robust_std_error"], robust, 1e-6, "robust se");
    }
}

#[test]
fn cox_with_late_entry_reproduces_r_on_the_stanford_heart_data() {
    // coxph(Surv(start, stop, event) ~ age + year + surgery + transplant, cluster = id), survival::heart,
    // R survival 3.5.3 (fixtures/cox.json "heart (start, stop] ... cluster(id) efron").
    let input = survival_fixture("heart.csv");
    let out = stats_json(
        &[
            "cox",
            "--time",
            "stop",
            "--entry",
            "start",
            "--event",
            "event",
            "--cluster",
            "id",
            "age",
            "year",
            "surgery",
            "transplant",
        ],
        &input,
    );
    let fit = &out["results"]["fit"];
    assert_eq!(fit["n_rows"], 172);
    let expected = [
        (0.027_166_640_957_7, 0.013_891_892_924_1),
        (-0.146_346_345_674, 0.073_079_859_239_4),
        (-0.637_209_889_967, 0.358_210_202_384),
        (-0.010_250_772_409_1, 0.316_882_349_062),
    ];
    for (c, (coef, robust)) in fit["coefficients"].as_array().unwrap().iter().zip(expected) {
        rel(&c["coefficient"], coef, 1e-6, "coef");
        rel(&c["robust_std_error"], robust, 1e-6, "robust se");
    }
}

#[test]
fn an_entry_after_the_exit_names_the_line() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "spells.csv", "start,stop,event\n0,5,1\n7,6,0\n");
    let run = stats(
        &[
            "km", "--time", "stop", "--event", "event", "--entry", "start",
        ],
        &input,
    );
    assert_eq!(run.code, Some(1));
    assert!(
        run.stderr
            .contains("spells.csv line 3: entry `start` = 7 is not before time `stop` = 6"),
        "{}",
        run.stderr
    );
}
