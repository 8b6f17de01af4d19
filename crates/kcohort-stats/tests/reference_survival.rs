//! The survival estimators against R: survival 3.5.3 and cmprsk 2.2-11 on R 4.2.2.
//!
//! Inputs and expected results are the fixtures written by the scripts in
//! `tests/reference/survival/` (each JSON file records the script, R and package versions);
//! `bash tests/reference/survival/check.sh` proves they are what those scripts produce.
//! Tolerances: 1e-6 relative for closed forms (Kaplan–Meier, Greenwood, log-rank, Aalen–Johansen,
//! Gray), 1e-4 relative for the iterative Cox fits (R stops at a relative log-likelihood change of
//! 1e-9, so its estimates sit slightly off the exact maximum).

use kcohort_stats::follow_up::{CompetingFollowUp, FollowUp};
use kcohort_stats::{ConfidenceLevel, aalen_johansen, cox, kaplan_meier, log_rank};
use serde_json::Value;
use std::collections::HashMap;

const CLOSED_FORM: f64 = 1e-6;
const ITERATIVE: f64 = 1e-4;

fn fixture_path(name: &str) -> String {
    format!(
        "{}/../../tests/reference/survival/fixtures/{name}",
        env!("CARGO_MANIFEST_DIR")
    )
}

fn json(name: &str) -> Value {
    let text =
        std::fs::read_to_string(fixture_path(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
    let value: Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{name}: {e}"));
    let source = &value["source"];
    assert!(
        source["r_version"]
            .as_str()
            .is_some_and(|v| v.starts_with("R version"))
            && source["survival_version"].as_str().is_some(),
        "{name} does not record the R and survival versions"
    );
    value
}

/// A CSV file written by R's write.csv (no quotes, "NA" for missing).
struct Table {
    header: Vec<String>,
    rows: Vec<Vec<f64>>,
}

impl Table {
    fn read(name: &str) -> Table {
        let text =
            std::fs::read_to_string(fixture_path(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        let mut lines = text.lines();
        let header: Vec<String> = lines
            .next()
            .expect("header")
            .split(',')
            .map(str::to_string)
            .collect();
        let rows = lines
            .map(|line| {
                line.split(',')
                    .map(|v| {
                        if v == "NA" {
                            f64::NAN
                        } else {
                            v.parse().unwrap_or_else(|_| panic!("{name}: `{v}`"))
                        }
                    })
                    .collect::<Vec<f64>>()
            })
            .collect();
        Table { header, rows }
    }

    fn index(&self, column: &str) -> usize {
        self.header
            .iter()
            .position(|h| h == column)
            .unwrap_or_else(|| panic!("no column {column}"))
    }

    fn get(&self, row: usize, column: &str) -> f64 {
        self.rows[row][self.index(column)]
    }
}

/// A JSON number, array of numbers, or null (R's NA), as options.
fn numbers(value: &Value) -> Vec<Option<f64>> {
    match value {
        Value::Array(items) => items.iter().map(Value::as_f64).collect(),
        Value::Null => vec![None],
        other => vec![Some(
            other
                .as_f64()
                .unwrap_or_else(|| panic!("not a number: {other}")),
        )],
    }
}

fn number(value: &Value) -> f64 {
    value
        .as_f64()
        .unwrap_or_else(|| panic!("not a number: {value}"))
}

/// A JSON string or array of strings (R's auto-unboxing turns length-1 vectors into scalars).
fn strings(value: &Value) -> Vec<String> {
    match value {
        Value::Array(items) => items
            .iter()
            .map(|v| v.as_str().expect("string").to_string())
            .collect(),
        Value::String(s) => vec![s.clone()],
        other => panic!("not a string: {other}"),
    }
}

/// R matrix exported row-major: an array of rows (or a single number for 1 × 1).
fn matrix(value: &Value) -> Vec<Vec<f64>> {
    match value {
        Value::Array(rows) if rows.first().is_some_and(Value::is_array) => rows
            .iter()
            .map(|r| numbers(r).into_iter().map(|v| v.expect("number")).collect())
            .collect(),
        other => vec![
            numbers(other)
                .into_iter()
                .map(|v| v.expect("number"))
                .collect(),
        ],
    }
}

#[track_caller]
fn close(actual: f64, expected: f64, relative: f64, what: &str) {
    let ok = (actual - expected).abs() <= relative * expected.abs() + 1e-12;
    assert!(
        ok,
        "{what}: got {actual}, R has {expected} (relative tolerance {relative:e})"
    );
}

#[track_caller]
fn close_or_missing(actual: Option<f64>, expected: Option<f64>, relative: f64, what: &str) {
    match (actual, expected) {
        (Some(a), Some(e)) => close(a, e, relative, what),
        (None, None) => {}
        (a, e) => panic!("{what}: got {a:?}, R has {e:?}"),
    }
}

fn level(value: &Value) -> ConfidenceLevel {
    ConfidenceLevel::new(number(value)).unwrap()
}

fn optional_column(value: &Value) -> Option<String> {
    value.as_str().map(str::to_string)
}

#[test]
fn kaplan_meier_matches_r_survfit() {
    let fixture = json("kaplan_meier.json");
    let curves = fixture["curves"].as_array().unwrap();
    assert_eq!(curves.len(), 8);
    for curve in curves {
        let label = curve["label"].as_str().unwrap();
        let table = Table::read(curve["input"].as_str().unwrap());
        let exit = curve["exit"].as_str().unwrap();
        let event = curve["event"].as_str().unwrap();
        let entry = optional_column(&curve["entry"]);
        let subset =
            optional_column(&curve["subset_column"]).map(|c| (c, number(&curve["subset_value"])));
        let data: Vec<FollowUp> = (0..table.rows.len())
            .filter(|&i| subset.as_ref().is_none_or(|(c, v)| table.get(i, c) == *v))
            .map(|i| {
                let entry = entry
                    .as_ref()
                    .map_or(f64::NEG_INFINITY, |c| table.get(i, c));
                FollowUp::with_entry(entry, table.get(i, exit), table.get(i, event) == 1.0)
            })
            .collect();
        let at = &curve["at"];
        let at_times: Vec<f64> = numbers(&at["time"])
            .into_iter()
            .map(Option::unwrap)
            .collect();
        let options = kaplan_meier::KaplanMeierOptions {
            level: level(&curve["level"]),
            at_times,
        };
        let fit = kaplan_meier::estimate(&data, &options).unwrap();

        let times = numbers(&curve["time"]);
        assert_eq!(fit.steps.len(), times.len(), "{label}: number of steps");
        let column = |name: &str| numbers(&curve[name]);
        let (n_risk, n_event, n_censor) = (column("n_risk"), column("n_event"), column("n_censor"));
        let (surv, se) = (column("surv"), column("std_err_log"));
        let (lower_log, upper_log) = (column("lower_log"), column("upper_log"));
        let (lower_ll, upper_ll) = (column("lower_loglog"), column("upper_loglog"));
        for (j, step) in fit.steps.iter().enumerate() {
            let what = |name: &str| format!("{label}, t = {}: {name}", step.time);
            assert_eq!(Some(step.time), times[j], "{}", what("time"));
            assert_eq!(
                Some(step.n_at_risk as f64),
                n_risk[j],
                "{}",
                what("n at risk")
            );
            assert_eq!(
                Some(step.n_events as f64),
                n_event[j],
                "{}",
                what("n events")
            );
            assert_eq!(
                Some(step.n_censored as f64),
                n_censor[j],
                "{}",
                what("n censored")
            );
            close(
                step.survival,
                surv[j].unwrap(),
                CLOSED_FORM,
                &what("survival"),
            );
            match se[j] {
                Some(e) => close(
                    step.log_std_error,
                    e,
                    CLOSED_FORM,
                    &what("Greenwood se of log S"),
                ),
                None => assert!(!step.log_std_error.is_finite(), "{}", what("se once S = 0")),
            }
            close_or_missing(
                step.log_interval.map(|i| i.lower),
                lower_log[j],
                CLOSED_FORM,
                &what("log lower"),
            );
            close_or_missing(
                step.log_interval.map(|i| i.upper),
                upper_log[j],
                CLOSED_FORM,
                &what("log upper"),
            );
            close_or_missing(
                step.log_log_interval.map(|i| i.lower),
                lower_ll[j],
                CLOSED_FORM,
                &what("log-log lower"),
            );
            close_or_missing(
                step.log_log_interval.map(|i| i.upper),
                upper_ll[j],
                CLOSED_FORM,
                &what("log-log upper"),
            );
        }

        let median = &fit.median;
        let (m_log, m_ll) = (&curve["median_log"], &curve["median_loglog"]);
        let first = |v: &Value| numbers(v)[0];
        close_or_missing(
            median.median,
            first(&m_log["median"]),
            CLOSED_FORM,
            &format!("{label}: median"),
        );
        close_or_missing(
            median.log_lower,
            first(&m_log["lower"]),
            CLOSED_FORM,
            &format!("{label}: median log lower"),
        );
        close_or_missing(
            median.log_upper,
            first(&m_log["upper"]),
            CLOSED_FORM,
            &format!("{label}: median log upper"),
        );
        close_or_missing(
            median.log_log_lower,
            first(&m_ll["lower"]),
            CLOSED_FORM,
            &format!("{label}: median log-log lower"),
        );
        close_or_missing(
            median.log_log_upper,
            first(&m_ll["upper"]),
            CLOSED_FORM,
            &format!("{label}: median log-log upper"),
        );

        let at_column = |name: &str| numbers(&at[name]);
        let (at_n, at_s, at_se) = (
            at_column("n_risk"),
            at_column("surv"),
            at_column("std_err_surv"),
        );
        let (at_ll_lower, at_ll_upper) = (at_column("lower_loglog"), at_column("upper_loglog"));
        let (at_log_lower, at_log_upper) = (at_column("lower_log"), at_column("upper_log"));
        for (j, a) in fit.at_times.iter().enumerate() {
            let what = |name: &str| format!("{label}, summary at {}: {name}", a.time);
            assert_eq!(Some(a.n_at_risk as f64), at_n[j], "{}", what("n at risk"));
            close(a.survival, at_s[j].unwrap(), CLOSED_FORM, &what("survival"));
            match at_se[j] {
                Some(e) => close(a.std_error, e, CLOSED_FORM, &what("se")),
                None => assert!(
                    a.std_error.is_nan() && a.survival == 0.0,
                    "{}",
                    what("se once S = 0")
                ),
            }
            close_or_missing(
                a.log_interval.map(|i| i.lower),
                at_log_lower[j],
                CLOSED_FORM,
                &what("log lower"),
            );
            close_or_missing(
                a.log_interval.map(|i| i.upper),
                at_log_upper[j],
                CLOSED_FORM,
                &what("log upper"),
            );
            close_or_missing(
                a.log_log_interval.map(|i| i.lower),
                at_ll_lower[j],
                CLOSED_FORM,
                &what("log-log lower"),
            );
            close_or_missing(
                a.log_log_interval.map(|i| i.upper),
                at_ll_upper[j],
                CLOSED_FORM,
                &what("log-log upper"),
            );
        }
    }
}

#[test]
fn log_rank_matches_r_survdiff() {
    let fixture = json("log_rank.json");
    let tests = fixture["tests"].as_array().unwrap();
    assert_eq!(tests.len(), 5);
    for test in tests {
        let label = test["label"].as_str().unwrap();
        let table = Table::read(test["input"].as_str().unwrap());
        let group = test["group"].as_str().unwrap();
        let strata = optional_column(&test["strata"]);
        let rows: Vec<usize> = (0..table.rows.len())
            .filter(|&i| strata.as_ref().is_none_or(|s| !table.get(i, s).is_nan()))
            .collect();
        let data: Vec<FollowUp> = rows
            .iter()
            .map(|&i| FollowUp::new(table.get(i, "time"), table.get(i, "status") == 1.0))
            .collect();
        let groups: Vec<u32> = rows.iter().map(|&i| table.get(i, group) as u32).collect();
        let strata_codes: Option<Vec<u32>> = strata
            .as_ref()
            .map(|s| rows.iter().map(|&i| table.get(i, s) as u32).collect());
        let fit = log_rank::test(&data, &groups, strata_codes.as_deref()).unwrap();

        let expected_groups = numbers(&test["groups"]);
        assert_eq!(fit.groups.len(), expected_groups.len(), "{label}");
        let (observed, expected, n) = (
            numbers(&test["observed"]),
            numbers(&test["expected"]),
            numbers(&test["n"]),
        );
        for (j, g) in fit.groups.iter().enumerate() {
            assert_eq!(
                Some(g.group as f64),
                expected_groups[j],
                "{label}: group order"
            );
            assert_eq!(
                Some(g.n_rows as f64),
                n[j],
                "{label}: n in group {}",
                g.group
            );
            close(
                g.observed,
                observed[j].unwrap(),
                CLOSED_FORM,
                &format!("{label}: observed, group {}", g.group),
            );
            close(
                g.expected,
                expected[j].unwrap(),
                CLOSED_FORM,
                &format!("{label}: expected, group {}", g.group),
            );
        }
        let variance = matrix(&test["variance"]);
        for (a, row) in variance.iter().enumerate() {
            for (b, &v) in row.iter().enumerate() {
                close(
                    fit.variance[a][b],
                    v,
                    CLOSED_FORM,
                    &format!("{label}: variance[{a}][{b}]"),
                );
            }
        }
        close(
            fit.chi_square,
            number(&test["chisq"]),
            CLOSED_FORM,
            &format!("{label}: chi-square"),
        );
        assert_eq!(
            fit.degrees_of_freedom as f64,
            number(&test["df"]),
            "{label}: df"
        );
        close(
            fit.p_value,
            number(&test["p_value"]),
            CLOSED_FORM,
            &format!("{label}: p-value"),
        );
    }
}

#[test]
fn cox_matches_r_coxph() {
    let fixture = json("cox.json");
    let fits = fixture["fits"].as_array().unwrap();
    assert_eq!(fits.len(), 16);
    for expected in fits {
        let label = expected["label"].as_str().unwrap();
        let table = Table::read(expected["input"].as_str().unwrap());
        let covariates = strings(&expected["covariates"]);
        let entry = optional_column(&expected["entry"]);
        let strata = optional_column(&expected["strata"]);
        let cluster = optional_column(&expected["cluster"]);
        let (exit, event) = (
            expected["exit"].as_str().unwrap(),
            expected["event"].as_str().unwrap(),
        );
        let mut used: Vec<&str> = vec![exit, event];
        used.extend(covariates.iter().map(String::as_str));
        used.extend(
            entry
                .iter()
                .chain(&strata)
                .chain(&cluster)
                .map(String::as_str),
        );
        let rows: Vec<usize> = (0..table.rows.len())
            .filter(|&i| used.iter().all(|c| !table.get(i, c).is_nan()))
            .collect();
        let follow_up: Vec<FollowUp> = rows
            .iter()
            .map(|&i| {
                let start = entry
                    .as_ref()
                    .map_or(f64::NEG_INFINITY, |c| table.get(i, c));
                FollowUp::with_entry(start, table.get(i, exit), table.get(i, event) == 1.0)
            })
            .collect();
        let x: Vec<f64> = rows
            .iter()
            .flat_map(|&i| covariates.iter().map(move |c| (i, c)))
            .map(|(i, c)| table.get(i, c))
            .collect();
        let strata_codes: Option<Vec<u32>> = strata
            .as_ref()
            .map(|s| rows.iter().map(|&i| table.get(i, s) as u32).collect());
        let cluster_ids: Option<Vec<u64>> = cluster
            .as_ref()
            .map(|s| rows.iter().map(|&i| table.get(i, s) as u64).collect());
        let names: Vec<&str> = covariates.iter().map(String::as_str).collect();
        let data = cox::CoxData {
            follow_up: &follow_up,
            covariates: &x,
            names: &names,
            strata: strata_codes.as_deref(),
            cluster: cluster_ids.as_deref(),
        };
        let ties = match expected["ties"].as_str().unwrap() {
            "efron" => cox::Ties::Efron,
            "breslow" => cox::Ties::Breslow,
            other => panic!("ties {other}"),
        };
        let options = cox::CoxOptions {
            ties,
            level: level(&expected["level"]),
            ..Default::default()
        };
        let fit = cox::fit(&data, &options).unwrap_or_else(|e| panic!("{label}: {e}"));

        assert_eq!(fit.n_rows as f64, number(&expected["n"]), "{label}: n");
        assert_eq!(
            fit.n_events as f64,
            number(&expected["n_events"]),
            "{label}: events"
        );
        let what = |name: &str| format!("{label}: {name}");
        let coefficients = numbers(&expected["coefficients"]);
        let std_errors = numbers(&expected["std_errors"]);
        let lower = numbers(&expected["hazard_ratio_lower"]);
        let upper = numbers(&expected["hazard_ratio_upper"]);
        for (j, c) in fit.coefficients.iter().enumerate() {
            close(
                c.coefficient,
                coefficients[j].unwrap(),
                ITERATIVE,
                &what(&format!("coefficient of {}", c.name)),
            );
            close(
                c.std_error,
                std_errors[j].unwrap(),
                ITERATIVE,
                &what(&format!("se of {}", c.name)),
            );
            close(
                c.hazard_ratio_interval.lower,
                lower[j].unwrap(),
                ITERATIVE,
                &what(&format!("HR lower of {}", c.name)),
            );
            close(
                c.hazard_ratio_interval.upper,
                upper[j].unwrap(),
                ITERATIVE,
                &what(&format!("HR upper of {}", c.name)),
            );
        }
        for (a, row) in matrix(&expected["variance"]).iter().enumerate() {
            for (b, &v) in row.iter().enumerate() {
                close(
                    fit.variance[a][b],
                    v,
                    ITERATIVE,
                    &what(&format!("variance[{a}][{b}]")),
                );
            }
        }
        close(
            fit.log_likelihood_null,
            number(&expected["loglik_null"]),
            CLOSED_FORM,
            &what("log-likelihood at 0"),
        );
        close(
            fit.log_likelihood,
            number(&expected["loglik"]),
            ITERATIVE,
            &what("log-likelihood"),
        );
        close(
            fit.likelihood_ratio.statistic,
            number(&expected["likelihood_ratio"]),
            ITERATIVE,
            &what("LR test"),
        );
        close(
            fit.score.statistic,
            number(&expected["score_test"]),
            CLOSED_FORM,
            &what("score test"),
        );
        close(
            fit.wald.statistic,
            number(&expected["wald_test"]),
            ITERATIVE,
            &what("Wald test"),
        );
        assert_eq!(fit.wald.degrees_of_freedom as f64, number(&expected["df"]));

        if let Some(robust_se) = expected.get("robust_std_errors") {
            let robust_se = numbers(robust_se);
            for (j, c) in fit.coefficients.iter().enumerate() {
                close(
                    c.robust_std_error.unwrap(),
                    robust_se[j].unwrap(),
                    ITERATIVE,
                    &what(&format!("robust se of {}", c.name)),
                );
            }
            let robust = fit.robust_variance.as_ref().unwrap();
            for (a, row) in matrix(&expected["robust_variance"]).iter().enumerate() {
                for (b, &v) in row.iter().enumerate() {
                    close(
                        robust[a][b],
                        v,
                        ITERATIVE,
                        &what(&format!("robust variance[{a}][{b}]")),
                    );
                }
            }
            close(
                fit.robust_wald.unwrap().statistic,
                number(&expected["robust_wald_test"]),
                ITERATIVE,
                &what("robust Wald"),
            );
            close(
                fit.robust_score.unwrap().statistic,
                number(&expected["robust_score_test"]),
                CLOSED_FORM,
                &what("robust score"),
            );
        } else {
            assert!(
                fit.robust_variance.is_none(),
                "{label}: no cluster, no robust variance"
            );
        }
    }
}

fn mgus2() -> (Table, Vec<CompetingFollowUp>) {
    let table = Table::read("mgus2.csv");
    let data = (0..table.rows.len())
        .map(|i| CompetingFollowUp::new(table.get(i, "etime"), table.get(i, "event") as u32))
        .collect();
    (table, data)
}

#[test]
fn aalen_johansen_matches_r_survfit_multi_state() {
    let fixture = json("aalen_johansen.json");
    let (table, all) = mgus2();
    let curves = fixture["aalen_johansen"].as_array().unwrap();
    assert_eq!(curves.len(), 4);
    for curve in curves {
        let label = curve["label"].as_str().unwrap();
        let subset =
            optional_column(&curve["subset_column"]).map(|c| (c, number(&curve["subset_value"])));
        let entry = optional_column(&curve["entry"]);
        let data: Vec<CompetingFollowUp> = (0..all.len())
            .filter(|&i| subset.as_ref().is_none_or(|(c, v)| table.get(i, c) == *v))
            .map(|i| match &entry {
                Some(c) => {
                    CompetingFollowUp::with_entry(table.get(i, c), all[i].exit, all[i].cause)
                }
                None => all[i],
            })
            .collect();
        let fit = aalen_johansen::estimate(&data, ConfidenceLevel::NINETY_FIVE).unwrap();
        assert_eq!(strings(&curve["states"]), ["(s0)", "pcm", "death"]);
        let times = numbers(&curve["time"]);
        let n_risk = numbers(&curve["n_risk"]);
        let pstate = matrix(&curve["pstate"]);
        let std_err = matrix(&curve["std_err"]);
        let n_event = matrix(&curve["n_event"]);
        assert_eq!(fit.steps.len(), times.len(), "{label}: steps");
        for (j, step) in fit.steps.iter().enumerate() {
            let what = |name: &str| format!("{label}, t = {}: {name}", step.time);
            assert_eq!(Some(step.time), times[j]);
            assert_eq!(
                Some(step.n_at_risk as f64),
                n_risk[j],
                "{}",
                what("n at risk")
            );
            assert_eq!(
                step.n_events[0] as f64,
                n_event[j][1],
                "{}",
                what("pcm events")
            );
            assert_eq!(step.n_events[1] as f64, n_event[j][2], "{}", what("deaths"));
            close(
                step.event_free,
                pstate[j][0],
                CLOSED_FORM,
                &what("event-free"),
            );
            close(
                step.cumulative_incidence[0],
                pstate[j][1],
                CLOSED_FORM,
                &what("CIF pcm"),
            );
            close(
                step.cumulative_incidence[1],
                pstate[j][2],
                CLOSED_FORM,
                &what("CIF death"),
            );
            let total = step.event_free + step.cumulative_incidence.iter().sum::<f64>();
            assert!(
                (total - 1.0).abs() < 1e-12,
                "{}",
                what("sum of state probabilities")
            );
            if entry.is_none() {
                // R's infinitesimal jackknife equals the delta-method variance without late entry
                // (module documentation); with late entry the two differ slightly, see below.
                close(
                    step.event_free_std_error,
                    std_err[j][0],
                    CLOSED_FORM,
                    &what("se event-free"),
                );
                close(
                    step.std_error[0],
                    std_err[j][1],
                    CLOSED_FORM,
                    &what("se CIF pcm"),
                );
                close(
                    step.std_error[1],
                    std_err[j][2],
                    CLOSED_FORM,
                    &what("se CIF death"),
                );
            } else {
                for (c, &r) in [
                    step.event_free_std_error,
                    step.std_error[0],
                    step.std_error[1],
                ]
                .iter()
                .zip(&std_err[j])
                {
                    close(
                        *c,
                        r,
                        0.05,
                        &what("se with late entry (delta method vs R's jackknife, 5%)"),
                    );
                }
            }
        }
    }
}

#[test]
fn gray_test_and_cumulative_incidence_match_cmprsk_cuminc() {
    let fixture = json("aalen_johansen.json");
    assert!(fixture["source"]["cmprsk_version"].as_str().is_some());
    let (table, data) = mgus2();
    let sex: Vec<u32> = (0..data.len())
        .map(|i| table.get(i, "sex") as u32)
        .collect();
    for record in fixture["cuminc"].as_array().unwrap() {
        let label = record["label"].as_str().unwrap();
        let strata = optional_column(&record["strata"]);
        let codes: Option<Vec<u32>> = strata
            .as_ref()
            .map(|s| (0..data.len()).map(|i| table.get(i, s) as u32).collect());
        let causes = numbers(&record["causes"]);
        let (stat, p, df) = (
            numbers(&record["gray_stat"]),
            numbers(&record["gray_p_value"]),
            numbers(&record["gray_df"]),
        );
        for (j, cause) in causes.iter().enumerate() {
            let cause = cause.unwrap() as u32;
            let test =
                aalen_johansen::gray_test(&data, &sex, codes.as_deref(), cause, 0.0).unwrap();
            let what = format!("{label}, cause {cause}");
            close(
                test.chi_square,
                stat[j].unwrap(),
                CLOSED_FORM,
                &format!("{what}: Gray statistic"),
            );
            close(
                test.p_value,
                p[j].unwrap(),
                CLOSED_FORM,
                &format!("{what}: p-value"),
            );
            assert_eq!(Some(test.degrees_of_freedom as f64), df[j], "{what}: df");
        }
        if strata.is_some() {
            continue;
        }
        // cuminc's estimates by group, as step functions (time, est) pairs.
        let mut by_group: HashMap<u32, aalen_johansen::AalenJohansen> = HashMap::new();
        for g in [0, 1] {
            let rows: Vec<CompetingFollowUp> = (0..data.len())
                .filter(|&i| sex[i] == g)
                .map(|i| data[i])
                .collect();
            by_group.insert(
                g,
                aalen_johansen::estimate(&rows, ConfidenceLevel::NINETY_FIVE).unwrap(),
            );
        }
        let mut compared = 0;
        for curve in record["curves"].as_array().unwrap() {
            let name = curve["name"].as_str().unwrap();
            let mut parts = name.split(' ').map(|v| v.parse::<u32>().unwrap());
            let (group, cause) = (parts.next().unwrap(), parts.next().unwrap());
            let fit = &by_group[&group];
            let (time, est) = (numbers(&curve["time"]), numbers(&curve["est"]));
            for j in 0..time.len() {
                // The last point of each run of equal times is the value after the jump.
                if j + 1 < time.len() && time[j + 1] == time[j] {
                    continue;
                }
                let t = time[j].unwrap();
                let last = fit.steps.partition_point(|s| s.time <= t);
                let ours = if last == 0 {
                    0.0
                } else {
                    fit.steps[last - 1].cumulative_incidence[cause as usize - 1]
                };
                close(
                    ours,
                    est[j].unwrap(),
                    CLOSED_FORM,
                    &format!("{label}: cuminc {name} at {t}"),
                );
                compared += 1;
            }
        }
        assert!(compared > 100, "compared only {compared} points");
    }
}

#[test]
fn lung_sex_matches_the_published_coxph_output() {
    // DOMAIN.md §5.8 [C: multiple published R outputs of coxph(Surv(time, status) ~ sex, lung)]:
    // coef −0.5310, se 0.1672, HR 0.588 (0.4237–0.816), LR 10.63. The data are survival::lung as
    // exported by tests/reference/survival/kaplan_meier.R.
    let table = Table::read("lung.csv");
    let follow_up: Vec<FollowUp> = (0..table.rows.len())
        .map(|i| FollowUp::new(table.get(i, "time"), table.get(i, "status") == 1.0))
        .collect();
    let sex: Vec<f64> = (0..table.rows.len()).map(|i| table.get(i, "sex")).collect();
    assert_eq!(
        (
            follow_up.len(),
            follow_up.iter().filter(|r| r.event).count()
        ),
        (228, 165)
    );
    let data = cox::CoxData {
        follow_up: &follow_up,
        covariates: &sex,
        names: &["sex"],
        strata: None,
        cluster: None,
    };
    let fit = cox::fit(&data, &cox::CoxOptions::default()).unwrap();
    let c = &fit.coefficients[0];
    assert!((c.coefficient - -0.5310).abs() < 5e-5, "{}", c.coefficient);
    assert!((c.std_error - 0.1672).abs() < 5e-5, "{}", c.std_error);
    assert!((c.hazard_ratio - 0.588).abs() < 5e-4);
    assert!(
        (c.hazard_ratio_interval.lower - 0.4237).abs() < 5e-5
            && (c.hazard_ratio_interval.upper - 0.816).abs() < 5e-4
    );
    assert!(
        (fit.likelihood_ratio.statistic - 10.63).abs() < 5e-3,
        "{}",
        fit.likelihood_ratio.statistic
    );
    // survdiff chi-square 10.3 [M]; R survdiff gives 10.3267 (log_rank.json).
    let groups: Vec<u32> = sex.iter().map(|&s| s as u32).collect();
    assert!(
        (log_rank::test(&follow_up, &groups, None)
            .unwrap()
            .chi_square
            - 10.3)
            .abs()
            < 0.05
    );
}
