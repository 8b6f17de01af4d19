//! Compare kcohort-stats with reference values computed by scipy and statsmodels.
//!
//! The fixtures are written by `tests/reference/rates/make_fixtures.py` (library versions inside
//! each JSON file, under "versions"); `tests/reference/rates/check.sh` regenerates them with pinned
//! versions and fails if they differ from the committed files. Tolerances are relative:
//! `CLOSED_FORM` (1e-6) for closed-form formulas, `ITERATIVE` (1e-4) where a quantile is found by
//! iteration (beta, gamma and chi-square inverses, exact discrete limits).

use kcohort_stats::control_chart::{CentreLine, ChartOptions, p_chart, u_chart};
use kcohort_stats::funnel::{
    Dispersion, FunnelOptions, binomial_limit, poisson_limit, rate_funnel,
};
use kcohort_stats::mantel_haenszel::{self, HomogeneityMethod};
use kcohort_stats::poisson_rate::{garwood_interval, poisson_rate};
use kcohort_stats::proportion::{clopper_pearson_interval, wilson_interval};
use kcohort_stats::rate_ratio::{PersonTimeCounts, RateRatioMethod, rate_difference, rate_ratio};
use kcohort_stats::risk_ratio::{
    RiskDifferenceMethod, TwoByTwo, ZeroCellCorrection, odds_ratio, risk_difference, risk_ratio,
};
use kcohort_stats::standardize::{StandardizationMethod, direct_standardized_rate};
use kcohort_stats::{ConfidenceLevel, Interval};
use serde_json::Value;

const CLOSED_FORM: f64 = 1e-6;
const ITERATIVE: f64 = 1e-4;

fn fixture(name: &str) -> Value {
    let path = format!(
        "{}/../../tests/reference/rates/fixtures/{name}.json",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("cannot read {path}: {e}"));
    let value: Value =
        serde_json::from_str(&text).unwrap_or_else(|e| panic!("{path} is not JSON: {e}"));
    assert!(
        value["versions"]["scipy"].is_string(),
        "{path} does not record the scipy version"
    );
    value
}

fn number(value: &Value) -> f64 {
    match value {
        Value::Number(n) => n.as_f64().unwrap(),
        Value::String(s) if s == "inf" => f64::INFINITY,
        Value::String(s) if s == "-inf" => f64::NEG_INFINITY,
        other => panic!("expected a number, found {other}"),
    }
}

fn cases<'a>(value: &'a Value, key: &str) -> &'a Vec<Value> {
    value[key]
        .as_array()
        .unwrap_or_else(|| panic!("fixture has no array {key}"))
}

fn level(case: &Value) -> ConfidenceLevel {
    ConfidenceLevel::new(number(&case["level"])).unwrap()
}

fn count(value: &Value) -> u64 {
    value
        .as_u64()
        .unwrap_or_else(|| panic!("expected a count, found {value}"))
}

/// Relative comparison; infinities must match exactly; an absolute floor of 1e-15 covers zeros.
fn assert_close(got: f64, expected: f64, tolerance: f64, what: &str) {
    if expected.is_infinite() {
        assert_eq!(got, expected, "{what}");
        return;
    }
    assert!(
        (got - expected).abs() <= tolerance * expected.abs() + 1e-15,
        "{what}: got {got:e}, expected {expected:e} (relative tolerance {tolerance:e})"
    );
}

fn assert_interval(got: &Interval, expected: &Value, tolerance: f64, what: &str) {
    assert_close(
        got.lower,
        number(&expected[0]),
        tolerance,
        &format!("{what} lower"),
    );
    assert_close(
        got.upper,
        number(&expected[1]),
        tolerance,
        &format!("{what} upper"),
    );
}

#[test]
fn proportions_match_statsmodels() {
    let f = fixture("proportion");
    for case in cases(&f, "cases") {
        let (x, n, level) = (count(&case["events"]), count(&case["total"]), level(case));
        let what = format!("{x}/{n} at {}", level.value());
        assert_interval(
            &wilson_interval(x, n, level).unwrap(),
            &case["wilson"],
            CLOSED_FORM,
            &format!("Wilson {what}"),
        );
        assert_interval(
            &clopper_pearson_interval(x, n, level).unwrap(),
            &case["clopper_pearson"],
            ITERATIVE,
            &format!("Clopper-Pearson {what}"),
        );
    }
}

#[test]
fn garwood_and_rates_match_statsmodels() {
    let f = fixture("garwood");
    for case in cases(&f, "cases") {
        let (x, level) = (count(&case["events"]), level(case));
        assert_interval(
            &garwood_interval(x, level),
            &case["interval"],
            ITERATIVE,
            &format!("Garwood {x} at {}", level.value()),
        );
    }
    for case in cases(&f, "rates") {
        let r = poisson_rate(
            count(&case["events"]),
            number(&case["person_time"]),
            number(&case["multiplier"]),
            level(case),
        )
        .unwrap();
        assert_close(r.rate, number(&case["rate"]), CLOSED_FORM, "rate");
        assert_interval(&r.interval, &case["interval"], ITERATIVE, "rate interval");
    }
}

#[test]
fn rate_ratios_match_statsmodels() {
    let f = fixture("rate_ratio");
    for case in cases(&f, "cases") {
        let counts = PersonTimeCounts::new(
            count(&case["exposed_events"]),
            number(&case["exposed_person_time"]),
            count(&case["unexposed_events"]),
            number(&case["unexposed_person_time"]),
        )
        .unwrap();
        let level = level(case);
        let what = format!("{counts:?} at {}", level.value());
        if case.get("wald_log").is_some() {
            let wald = rate_ratio(&counts, RateRatioMethod::WaldLog, level).unwrap();
            assert_close(wald.estimate, number(&case["estimate"]), CLOSED_FORM, &what);
            assert_interval(
                &wald.interval,
                &case["wald_log"],
                CLOSED_FORM,
                &format!("Wald-log {what}"),
            );
        } else {
            assert!(
                rate_ratio(&counts, RateRatioMethod::WaldLog, level).is_err(),
                "{what}"
            );
        }
        let exact = rate_ratio(&counts, RateRatioMethod::ExactConditional, level).unwrap();
        assert_interval(
            &exact.interval,
            &case["exact_conditional"],
            ITERATIVE,
            &format!("exact {what}"),
        );
        let difference = rate_difference(&counts, 1000.0, level).unwrap();
        assert_interval(
            &difference.interval,
            &case["difference_per_1000"],
            CLOSED_FORM,
            &format!("difference {what}"),
        );
    }
}

fn check_ratio(got: &kcohort_stats::risk_ratio::RatioEstimate, expected: &Value, what: &str) {
    assert_close(
        got.estimate,
        number(&expected["estimate"]),
        CLOSED_FORM,
        what,
    );
    assert_close(
        got.log_standard_error,
        number(&expected["log_se"]),
        CLOSED_FORM,
        what,
    );
    assert_interval(&got.interval, &expected["interval"], CLOSED_FORM, what);
}

#[test]
fn two_by_two_tables_match_statsmodels() {
    let f = fixture("two_by_two");
    for case in cases(&f, "cases") {
        let table = TwoByTwo::new(
            count(&case["exposed_cases"]),
            count(&case["exposed_total"]),
            count(&case["unexposed_cases"]),
            count(&case["unexposed_total"]),
        )
        .unwrap();
        let level = level(case);
        let what = format!("{table:?} at {}", level.value());
        match case.get("risk_ratio") {
            Some(expected) => check_ratio(
                &risk_ratio(&table, ZeroCellCorrection::None, level).unwrap(),
                expected,
                &format!("RR {what}"),
            ),
            None => assert!(
                risk_ratio(&table, ZeroCellCorrection::None, level).is_err(),
                "RR {what}"
            ),
        }
        match case.get("odds_ratio") {
            Some(expected) => check_ratio(
                &odds_ratio(&table, ZeroCellCorrection::None, level).unwrap(),
                expected,
                &format!("OR {what}"),
            ),
            None => assert!(
                odds_ratio(&table, ZeroCellCorrection::None, level).is_err(),
                "OR {what}"
            ),
        }
        if let Some(expected) = case.get("risk_ratio_haldane") {
            let got = risk_ratio(&table, ZeroCellCorrection::Haldane, level).unwrap();
            assert!(got.zero_cell_corrected);
            check_ratio(&got, expected, &format!("RR Haldane {what}"));
            let got = odds_ratio(&table, ZeroCellCorrection::Haldane, level).unwrap();
            check_ratio(
                &got,
                &case["odds_ratio_haldane"],
                &format!("OR Haldane {what}"),
            );
        }
        let wald = risk_difference(&table, RiskDifferenceMethod::Wald, level).unwrap();
        assert_interval(
            &wald.interval,
            &case["difference_wald"],
            CLOSED_FORM,
            &format!("RD Wald {what}"),
        );
        let newcombe =
            risk_difference(&table, RiskDifferenceMethod::NewcombeHybridScore, level).unwrap();
        assert_interval(
            &newcombe.interval,
            &case["difference_newcombe"],
            CLOSED_FORM,
            &format!("RD Newcombe {what}"),
        );
    }
}

fn check_woolf(got: &Option<mantel_haenszel::HomogeneityTest>, expected: &Value, what: &str) {
    let got = got
        .as_ref()
        .unwrap_or_else(|| panic!("{what}: no homogeneity test"));
    assert_eq!(got.method, HomogeneityMethod::WoolfLogRatio);
    assert_close(
        got.chi_square,
        number(&expected["chi_square"]),
        CLOSED_FORM,
        what,
    );
    assert_eq!(
        got.degrees_of_freedom as u64,
        count(&expected["df"]),
        "{what}"
    );
    assert_eq!(
        got.n_strata_used as u64,
        count(&expected["strata_used"]),
        "{what}"
    );
    assert_close(got.p_value, number(&expected["p_value"]), ITERATIVE, what);
}

#[test]
fn mantel_haenszel_matches_statsmodels() {
    let f = fixture("mantel_haenszel");
    let ci95 = ConfidenceLevel::NINETY_FIVE;
    for case in cases(&f, "risk") {
        let name = case["name"].as_str().unwrap();
        let strata: Vec<TwoByTwo> = case["strata"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| TwoByTwo::new(count(&s[0]), count(&s[1]), count(&s[2]), count(&s[3])).unwrap())
            .collect();
        let rr = mantel_haenszel::risk_ratio(&strata, ci95).unwrap();
        assert_close(rr.estimate, number(&case["risk_ratio"]), CLOSED_FORM, name);
        assert_close(
            rr.log_standard_error,
            number(&case["risk_ratio_log_se_numpy"]),
            CLOSED_FORM,
            name,
        );
        check_woolf(&rr.homogeneity, &case["woolf"], name);
        let or = mantel_haenszel::odds_ratio(&strata, ci95).unwrap();
        assert_close(or.estimate, number(&case["odds_ratio"]), CLOSED_FORM, name);
        assert_close(
            or.log_standard_error,
            number(&case["odds_ratio_log_se"]),
            CLOSED_FORM,
            name,
        );
        assert_interval(
            &or.interval,
            &case["odds_ratio_interval_95"],
            CLOSED_FORM,
            name,
        );
        if let Some(expected) = case.get("breslow_day") {
            let plain = mantel_haenszel::breslow_day(&strata, false)
                .unwrap()
                .unwrap();
            assert_close(plain.chi_square, number(expected), CLOSED_FORM, name);
            let tarone = or.homogeneity.as_ref().unwrap();
            assert_eq!(tarone.method, HomogeneityMethod::BreslowDayTarone);
            assert_close(
                tarone.chi_square,
                number(&case["breslow_day_tarone"]),
                CLOSED_FORM,
                name,
            );
            assert_close(
                tarone.p_value,
                number(&case["breslow_day_tarone_p"]),
                ITERATIVE,
                name,
            );
        }
    }
    for case in cases(&f, "rate") {
        let name = case["name"].as_str().unwrap();
        let strata: Vec<PersonTimeCounts> = case["strata"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| {
                PersonTimeCounts::new(count(&s[0]), number(&s[1]), count(&s[2]), number(&s[3]))
                    .unwrap()
            })
            .collect();
        let irr = mantel_haenszel::rate_ratio(&strata, ci95).unwrap();
        assert_close(
            irr.estimate,
            number(&case["rate_ratio_numpy"]),
            CLOSED_FORM,
            name,
        );
        assert_close(
            irr.log_standard_error,
            number(&case["log_se_numpy"]),
            CLOSED_FORM,
            name,
        );
        check_woolf(&irr.homogeneity, &case["woolf"], name);
    }
}

#[test]
fn control_chart_limits_match_numpy() {
    let f = fixture("control_chart");
    for chart in cases(&f, "charts") {
        let numerators: Vec<u64> = chart["numerators"]
            .as_array()
            .unwrap()
            .iter()
            .map(count)
            .collect();
        let denominators: Vec<f64> = chart["denominators"]
            .as_array()
            .unwrap()
            .iter()
            .map(number)
            .collect();
        let line = chart["centre_line"].as_array().unwrap();
        let centre_line = match line[0].as_str().unwrap() {
            "all" => CentreLine::AllPeriods,
            "baseline" => CentreLine::Baseline {
                start: count(&line[1]) as usize,
                end: count(&line[2]) as usize,
            },
            "fixed" => CentreLine::Fixed {
                value: number(&line[1]),
            },
            other => panic!("unknown centre line {other}"),
        };
        let options = ChartOptions {
            centre_line,
            laney: chart["laney"].as_bool().unwrap(),
            ..ChartOptions::default()
        };
        let got = match chart["kind"].as_str().unwrap() {
            "p" => {
                let totals: Vec<u64> = denominators.iter().map(|&d| d as u64).collect();
                p_chart(&numerators, &totals, &options).unwrap()
            }
            _ => u_chart(&numerators, &denominators, &options).unwrap(),
        };
        let what = format!(
            "{} chart {:?} laney {}",
            chart["kind"], centre_line, options.laney
        );
        assert_close(got.centre, number(&chart["centre"]), CLOSED_FORM, &what);
        match (&got.sigma_z, chart["sigma_z"].is_null()) {
            (Some(sigma_z), false) => {
                assert_close(*sigma_z, number(&chart["sigma_z"]), CLOSED_FORM, &what)
            }
            (None, true) => {}
            other => panic!("{what}: sigma_z mismatch {other:?}"),
        }
        for (i, point) in got.points.iter().enumerate() {
            assert_close(
                point.lower,
                number(&chart["lower"][i]),
                CLOSED_FORM,
                &format!("{what} lower {i}"),
            );
            assert_close(
                point.upper,
                number(&chart["upper"][i]),
                CLOSED_FORM,
                &format!("{what} upper {i}"),
            );
        }
    }
}

#[test]
fn funnel_limits_match_scipy() {
    let f = fixture("funnel");
    for case in cases(&f, "binomial") {
        let got = binomial_limit(
            number(&case["target"]),
            count(&case["total"]),
            number(&case["probability"]),
        )
        .unwrap();
        assert_close(
            got,
            number(&case["limit"]),
            ITERATIVE,
            &format!("binomial {case}"),
        );
    }
    for case in cases(&f, "poisson") {
        let got = poisson_limit(number(&case["expected"]), number(&case["probability"])).unwrap();
        assert_close(
            got,
            number(&case["limit"]),
            ITERATIVE,
            &format!("poisson {case}"),
        );
    }
    let reference = &f["rate_funnel"];
    let units = reference["units"].as_array().unwrap();
    let events: Vec<u64> = units.iter().map(|u| count(&u["events"])).collect();
    let time: Vec<f64> = units.iter().map(|u| number(&u["person_time"])).collect();
    let expected_limits = |dispersion: Dispersion, i: usize, label: &str| {
        let prefix = match dispersion {
            Dispersion::None => "exact_",
            Dispersion::Multiplicative => "multiplicative_",
            Dispersion::Additive => "additive_",
        };
        units[i][format!("{prefix}{label}")].clone()
    };
    for dispersion in [
        Dispersion::None,
        Dispersion::Multiplicative,
        Dispersion::Additive,
    ] {
        let options = FunnelOptions {
            dispersion,
            ..FunnelOptions::default()
        };
        let got = rate_funnel(&events, &time, None, &options).unwrap();
        assert_close(
            got.target,
            number(&reference["target"]),
            CLOSED_FORM,
            "target",
        );
        assert_close(got.phi, number(&reference["phi"]), CLOSED_FORM, "phi");
        assert_close(
            got.phi_threshold,
            number(&reference["phi_threshold"]),
            CLOSED_FORM,
            "phi threshold",
        );
        // The fixture is built to be over-dispersed so that both adjustments are exercised.
        assert!(got.overdispersed);
        if dispersion == Dispersion::Additive {
            assert_close(
                got.tau_squared.unwrap(),
                number(&reference["tau_squared"]),
                CLOSED_FORM,
                "tau2",
            );
        }
        let tolerance = if dispersion == Dispersion::None {
            ITERATIVE
        } else {
            CLOSED_FORM
        };
        for (i, unit) in got.units.iter().enumerate() {
            assert_close(unit.z, number(&units[i]["z"]), CLOSED_FORM, "z");
            let what = format!("{dispersion:?} unit {i}");
            assert_interval(
                &unit.inner,
                &expected_limits(dispersion, i, "95"),
                tolerance,
                &what,
            );
            assert_interval(
                &unit.outer,
                &expected_limits(dispersion, i, "998"),
                tolerance,
                &what,
            );
        }
    }
}

#[test]
fn standardized_rates_match_scipy() {
    let f = fixture("standardize");
    for case in cases(&f, "cases") {
        let events: Vec<u64> = case["events"]
            .as_array()
            .unwrap()
            .iter()
            .map(count)
            .collect();
        let time: Vec<f64> = case["person_time"]
            .as_array()
            .unwrap()
            .iter()
            .map(number)
            .collect();
        let standard: Vec<f64> = case["standard"]
            .as_array()
            .unwrap()
            .iter()
            .map(number)
            .collect();
        let level = level(case);
        let what = format!("{} at {}", case["name"], level.value());
        let fay = direct_standardized_rate(
            &events,
            &time,
            &standard,
            StandardizationMethod::FayFeuer,
            1.0,
            level,
        )
        .unwrap();
        assert_close(fay.rate, number(&case["rate"]), CLOSED_FORM, &what);
        assert_close(
            fay.standard_error,
            number(&case["standard_error"]),
            CLOSED_FORM,
            &what,
        );
        assert_interval(
            &fay.interval,
            &case["fay_feuer"],
            ITERATIVE,
            &format!("Fay-Feuer {what}"),
        );
        match case.get("dobson") {
            Some(expected) => {
                let dobson = direct_standardized_rate(
                    &events,
                    &time,
                    &standard,
                    StandardizationMethod::Dobson,
                    1.0,
                    level,
                )
                .unwrap();
                assert_interval(
                    &dobson.interval,
                    expected,
                    ITERATIVE,
                    &format!("Dobson {what}"),
                );
            }
            None => assert!(
                direct_standardized_rate(
                    &events,
                    &time,
                    &standard,
                    StandardizationMethod::Dobson,
                    1.0,
                    level
                )
                .is_err()
            ),
        }
    }
}
