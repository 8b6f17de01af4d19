//! Mantel–Haenszel pooled ratios over strata, with tests of homogeneity across strata.
//!
//! Stratum i: a exposed cases of n₁, c unexposed cases of n₀, N = n₁ + n₀, M₁ = a + c
//! (b = n₁ − a, d = n₀ − c); for person-time, a events in T₁ and c events in T₀, T = T₁ + T₀.
//!
//! - **Risk ratio** (Mantel & Haenszel 1959; variance Greenland & Robins, Biometrics
//!   1985;41:55): RR = Σ(a n₀/N) / Σ(c n₁/N),
//!   Var(ln RR) = Σ[(n₁ n₀ M₁ − a c N)/N²] / [Σ(a n₀/N) · Σ(c n₁/N)].
//! - **Rate ratio** (Greenland & Robins 1985): IRR = Σ(a T₀/T) / Σ(c T₁/T),
//!   Var(ln IRR) = Σ(M₁ T₁ T₀/T²) / [Σ(a T₀/T) · Σ(c T₁/T)].
//! - **Odds ratio** (Mantel & Haenszel 1959; variance Robins, Breslow & Greenland, Biometrics
//!   1986;42:311): OR = ΣR/ΣS with R = ad/N, S = bc/N, P = (a+d)/N, Q = (b+c)/N,
//!   Var(ln OR) = ΣPR/(2(ΣR)²) + Σ(PS+QR)/(2ΣRΣS) + ΣQS/(2(ΣS)²).
//!
//! The interval is exp(ln ratio ± z·SE). These estimators are built for sparse strata: a zero cell
//! in a stratum is fine. Strata with N = 0 (or T = 0) contribute nothing and are skipped, as are
//! groups without people; when the whole numerator or denominator sum is 0 the pooled ratio is 0
//! or infinite and [`StatsError::NotEstimable`] is returned.
//!
//! # Homogeneity
//! - For the risk and rate ratio: the **Woolf-type (Cochran Q) chi-square on log ratios**
//!   (Woolf, Ann Hum Genet 1955;19:251; Cochran, Biometrics 1954;10:101):
//!   Q = Σ wᵢ (ln RRᵢ − ln RR_IV)², wᵢ = 1/Var(ln RRᵢ) (Katz for risks, 1/a + 1/c for rates),
//!   ln RR_IV = Σ wᵢ ln RRᵢ / Σ wᵢ, df = k − 1 over the k strata whose own ratio is estimable
//!   (a > 0 and c > 0, and a non-zero variance). This is the Q of a fixed-effect meta-analysis
//!   (statsmodels `combine_effects(...).q`, used as the reference in the tests).
//! - For the odds ratio: the **Breslow–Day** test (Breslow & Day, Statistical Methods in Cancer
//!   Research vol. I, 1980, §4.4 [M]) with **Tarone's correction** (Tarone, Biometrika
//!   1985;72:91): X² = Σ (aᵢ − Eᵢ)²/Vᵢ − (Σaᵢ − ΣEᵢ)²/ΣVᵢ, where Eᵢ is the expected exposed-case
//!   count of stratum i with all margins fixed and odds ratio OR_MH, and
//!   Vᵢ = 1/(1/Eᵢ + 1/(M₁−Eᵢ) + 1/(n₁−Eᵢ) + 1/(n₀−M₁+Eᵢ)); df = k − 1 over strata where Vᵢ > 0.
//!   statsmodels `StratifiedTable.test_equal_odds(adjust=True/False)` is the reference.
//!
//! With fewer than two usable strata the homogeneity test is `None`.

use crate::rate_ratio::PersonTimeCounts;
use crate::risk_ratio::TwoByTwo;
use crate::{ConfidenceLevel, Interval, StatsError};
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Which ratio was pooled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PooledMeasure {
    RiskRatio,
    RateRatio,
    OddsRatio,
}

/// Which homogeneity test was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum HomogeneityMethod {
    /// Woolf-type (Cochran Q) chi-square on log ratios with inverse-variance weights.
    WoolfLogRatio,
    /// Breslow–Day without Tarone's correction.
    BreslowDay,
    /// Breslow–Day with Tarone's correction.
    BreslowDayTarone,
}

/// A chi-square test that the ratio is the same in every stratum.
#[derive(Debug, Clone, Serialize)]
pub struct HomogeneityTest {
    pub method: HomogeneityMethod,
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    pub p_value: f64,
    pub n_strata_used: usize,
}

/// A Mantel–Haenszel pooled ratio.
#[derive(Debug, Clone, Serialize)]
pub struct PooledRatio {
    pub measure: PooledMeasure,
    pub n_strata: usize,
    /// Strata with people (or person-time) in both groups; only these carry information.
    pub n_strata_informative: usize,
    pub estimate: f64,
    /// Standard error of the natural log of the estimate.
    pub log_standard_error: f64,
    pub interval: Interval,
    pub homogeneity: Option<HomogeneityTest>,
}

/// Mantel–Haenszel risk ratio with the Greenland–Robins variance and the Woolf-type test.
pub fn risk_ratio(strata: &[TwoByTwo], level: ConfidenceLevel) -> Result<PooledRatio, StatsError> {
    check_strata(strata.len())?;
    let (mut numerator, mut denominator, mut variance_sum) = (0.0, 0.0, 0.0);
    let mut informative = 0;
    let mut logs = Vec::new();
    for stratum in strata {
        stratum.validate()?;
        let [a, b, c, d] = stratum.cells();
        let (n1, n0) = (a + b, c + d);
        let total = n1 + n0;
        if n1 == 0.0 || n0 == 0.0 {
            continue;
        }
        informative += 1;
        numerator += a * n0 / total;
        denominator += c * n1 / total;
        variance_sum += (n1 * n0 * (a + c) - a * c * total) / (total * total);
        if a > 0.0 && c > 0.0 {
            let variance = 1.0 / a - 1.0 / n1 + 1.0 / c - 1.0 / n0;
            logs.push(((a / n1 / (c / n0)).ln(), variance));
        }
    }
    pooled(
        PooledMeasure::RiskRatio,
        strata.len(),
        informative,
        numerator,
        denominator,
        variance_sum / (numerator * denominator),
        woolf_homogeneity(&logs),
        level,
    )
}

/// Mantel–Haenszel (Greenland–Robins) rate ratio and the Woolf-type test.
pub fn rate_ratio(
    strata: &[PersonTimeCounts],
    level: ConfidenceLevel,
) -> Result<PooledRatio, StatsError> {
    check_strata(strata.len())?;
    let (mut numerator, mut denominator, mut variance_sum) = (0.0, 0.0, 0.0);
    let mut informative = 0;
    let mut logs = Vec::new();
    for stratum in strata {
        stratum.validate()?;
        let (a, t1) = (stratum.exposed_events as f64, stratum.exposed_person_time);
        let (c, t0) = (
            stratum.unexposed_events as f64,
            stratum.unexposed_person_time,
        );
        if t1 == 0.0 || t0 == 0.0 {
            continue;
        }
        informative += 1;
        let total = t1 + t0;
        numerator += a * t0 / total;
        denominator += c * t1 / total;
        variance_sum += (a + c) * t1 * t0 / (total * total);
        if a > 0.0 && c > 0.0 {
            logs.push((((a / t1) / (c / t0)).ln(), 1.0 / a + 1.0 / c));
        }
    }
    pooled(
        PooledMeasure::RateRatio,
        strata.len(),
        informative,
        numerator,
        denominator,
        variance_sum / (numerator * denominator),
        woolf_homogeneity(&logs),
        level,
    )
}

/// Mantel–Haenszel odds ratio with the Robins–Breslow–Greenland variance and the Breslow–Day test
/// with Tarone's correction.
pub fn odds_ratio(strata: &[TwoByTwo], level: ConfidenceLevel) -> Result<PooledRatio, StatsError> {
    check_strata(strata.len())?;
    let mut informative = 0;
    let (mut sum_r, mut sum_s) = (0.0, 0.0);
    let (mut sum_pr, mut sum_ps_qr, mut sum_qs) = (0.0, 0.0, 0.0);
    for stratum in strata {
        stratum.validate()?;
        let [a, b, c, d] = stratum.cells();
        let total = a + b + c + d;
        if a + b == 0.0 || c + d == 0.0 {
            continue;
        }
        informative += 1;
        let (r, s) = (a * d / total, b * c / total);
        let (p, q) = ((a + d) / total, (b + c) / total);
        sum_r += r;
        sum_s += s;
        sum_pr += p * r;
        sum_ps_qr += p * s + q * r;
        sum_qs += q * s;
    }
    let variance = sum_pr / (2.0 * sum_r * sum_r)
        + sum_ps_qr / (2.0 * sum_r * sum_s)
        + sum_qs / (2.0 * sum_s * sum_s);
    let homogeneity = if sum_r > 0.0 && sum_s > 0.0 {
        breslow_day_with(strata, sum_r / sum_s, true)?
    } else {
        None
    };
    pooled(
        PooledMeasure::OddsRatio,
        strata.len(),
        informative,
        sum_r,
        sum_s,
        variance,
        homogeneity,
        level,
    )
}

/// Breslow–Day test of a common odds ratio (the Mantel–Haenszel one), with or without Tarone's
/// correction. `Ok(None)` when fewer than two strata carry information.
pub fn breslow_day(
    strata: &[TwoByTwo],
    tarone: bool,
) -> Result<Option<HomogeneityTest>, StatsError> {
    let pooled = odds_ratio(strata, ConfidenceLevel::NINETY_FIVE)?;
    breslow_day_with(strata, pooled.estimate, tarone)
}

fn breslow_day_with(
    strata: &[TwoByTwo],
    odds: f64,
    tarone: bool,
) -> Result<Option<HomogeneityTest>, StatsError> {
    let (mut statistic, mut sum_a, mut sum_expected, mut sum_variance) = (0.0, 0.0, 0.0, 0.0);
    let mut used = 0;
    for stratum in strata {
        let [a, b, c, d] = stratum.cells();
        let (n1, n0, cases) = (a + b, c + d, a + c);
        let Some(expected) = expected_exposed_cases(n1, n0, cases, odds) else {
            continue;
        };
        let inverse = 1.0 / expected
            + 1.0 / (cases - expected)
            + 1.0 / (n1 - expected)
            + 1.0 / (n0 - cases + expected);
        if !inverse.is_finite() {
            // A margin pins the cell (no cases, no non-cases, or an empty group): no information.
            continue;
        }
        let variance = 1.0 / inverse;
        used += 1;
        statistic += (a - expected).powi(2) / variance;
        sum_a += a;
        sum_expected += expected;
        sum_variance += variance;
    }
    if used < 2 {
        return Ok(None);
    }
    let method = if tarone {
        statistic -= (sum_a - sum_expected).powi(2) / sum_variance;
        HomogeneityMethod::BreslowDayTarone
    } else {
        HomogeneityMethod::BreslowDay
    };
    Ok(Some(chi_square_test(method, statistic, used)))
}

/// Expected exposed cases E with margins (n₁, n₀, M₁) fixed and odds ratio `odds`: the root in
/// [max(0, M₁ − n₀), min(n₁, M₁)] of (1−ψ)E² + (n₀ − M₁ + ψ(n₁ + M₁))E − ψ n₁ M₁ = 0.
fn expected_exposed_cases(n1: f64, n0: f64, cases: f64, odds: f64) -> Option<f64> {
    let low = (cases - n0).max(0.0);
    let high = n1.min(cases);
    if n1 + n0 == 0.0 || high < low {
        return None;
    }
    let qa = 1.0 - odds;
    let qb = n0 - cases + odds * (n1 + cases);
    let qc = -odds * n1 * cases;
    let candidates = if qa.abs() < 1e-12 * qb.abs().max(1.0) {
        vec![-qc / qb]
    } else {
        // Numerically stable roots (Numerical Recipes §5.6).
        let discriminant = (qb * qb - 4.0 * qa * qc).max(0.0).sqrt();
        let q = -0.5 * (qb + qb.signum() * discriminant);
        vec![q / qa, if q != 0.0 { qc / q } else { f64::NAN }]
    };
    let slack = 1e-9 * (n1 + n0);
    candidates
        .into_iter()
        .find(|e| e.is_finite() && *e >= low - slack && *e <= high + slack)
        .map(|e| e.clamp(low, high))
}

fn woolf_homogeneity(logs: &[(f64, f64)]) -> Option<HomogeneityTest> {
    let usable: Vec<(f64, f64)> = logs
        .iter()
        .copied()
        .filter(|(_, variance)| *variance > 0.0 && variance.is_finite())
        .collect();
    if usable.len() < 2 {
        return None;
    }
    let weight_sum: f64 = usable.iter().map(|(_, v)| 1.0 / v).sum();
    let mean = usable.iter().map(|(log, v)| log / v).sum::<f64>() / weight_sum;
    let statistic = usable.iter().map(|(log, v)| (log - mean).powi(2) / v).sum();
    Some(chi_square_test(
        HomogeneityMethod::WoolfLogRatio,
        statistic,
        usable.len(),
    ))
}

fn chi_square_test(
    method: HomogeneityMethod,
    statistic: f64,
    strata_used: usize,
) -> HomogeneityTest {
    let degrees_of_freedom = strata_used - 1;
    let distribution =
        ChiSquared::new(degrees_of_freedom as f64).expect("at least one degree of freedom");
    HomogeneityTest {
        method,
        chi_square: statistic,
        degrees_of_freedom,
        p_value: distribution.sf(statistic.max(0.0)),
        n_strata_used: strata_used,
    }
}

#[allow(clippy::too_many_arguments)]
fn pooled(
    measure: PooledMeasure,
    n_strata: usize,
    n_strata_informative: usize,
    numerator: f64,
    denominator: f64,
    log_variance: f64,
    homogeneity: Option<HomogeneityTest>,
    level: ConfidenceLevel,
) -> Result<PooledRatio, StatsError> {
    if numerator == 0.0 || denominator == 0.0 {
        return Err(StatsError::NotEstimable(format!(
            "the pooled {measure:?} is {}: the Mantel–Haenszel {} sum is 0 over {n_strata_informative} \
             informative strata\nhint: check that exposed and unexposed cases occur in strata that \
             contain both groups",
            if numerator == 0.0 { "0" } else { "infinite" },
            if numerator == 0.0 {
                "numerator"
            } else {
                "denominator"
            },
        )));
    }
    let estimate = numerator / denominator;
    let log_standard_error = log_variance.max(0.0).sqrt();
    let half = level.z() * log_standard_error;
    Ok(PooledRatio {
        measure,
        n_strata,
        n_strata_informative,
        estimate,
        log_standard_error,
        interval: Interval::new(estimate * (-half).exp(), estimate * half.exp(), level),
        homogeneity,
    })
}

fn check_strata(n: usize) -> Result<(), StatsError> {
    if n == 0 {
        Err(StatsError::invalid(
            "strata",
            "at least one stratum",
            "none",
        ))
    } else {
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rate_ratio::{RateRatioMethod, rate_ratio as crude_rate_ratio};
    use crate::risk_ratio::{
        ZeroCellCorrection, odds_ratio as crude_odds_ratio, risk_ratio as crude_risk_ratio,
    };
    use proptest::prelude::*;

    const CI95: ConfidenceLevel = ConfidenceLevel::NINETY_FIVE;

    fn tolbutamide() -> Vec<TwoByTwo> {
        // UGDP tolbutamide vs placebo deaths by age (<55, 55+), as tabulated in Rothman & Greenland,
        // Modern Epidemiology 2nd ed. 1998, ch. 15 [data M: from memory]. The strata add up to the
        // crude 30/204 vs 21/205 of DOMAIN.md §5.4.
        vec![
            TwoByTwo::new(8, 106, 5, 120).unwrap(),
            TwoByTwo::new(22, 98, 16, 85).unwrap(),
        ]
    }

    #[test]
    fn tolbutamide_textbook_example() {
        let strata = tolbutamide();
        let total: (u64, u64, u64, u64) = strata.iter().fold((0, 0, 0, 0), |t, s| {
            (
                t.0 + s.exposed_cases,
                t.1 + s.exposed_total,
                t.2 + s.unexposed_cases,
                t.3 + s.unexposed_total,
            )
        });
        assert_eq!(total, (30, 204, 21, 205));
        let pooled = risk_ratio(&strata, CI95).unwrap();
        // RR_MH 1.33 as printed in Modern Epidemiology [M: from memory, 2 dp]; our exact value is
        // checked against statsmodels StratifiedTable.riskratio_pooled in tests/reference_rates.rs.
        assert!(
            (pooled.estimate - 1.33).abs() < 0.005,
            "{}",
            pooled.estimate
        );
        assert_eq!(pooled.n_strata_informative, 2);
        let homogeneity = pooled.homogeneity.unwrap();
        assert_eq!(homogeneity.degrees_of_freedom, 1);
        assert!(homogeneity.p_value > 0.5, "{homogeneity:?}");
    }

    #[test]
    fn doll_hill_british_doctors_textbook_example() {
        // British doctors, coronary deaths in smokers vs non-smokers by age (Doll & Hill 1966), as
        // tabulated in Rothman, Epidemiology: An Introduction (2002/2012), ch. 10 [data and printed
        // IRR_MH 1.42: M, from memory].
        let strata = [
            (32, 52_407.0, 2, 18_790.0),
            (104, 43_248.0, 12, 10_673.0),
            (206, 28_612.0, 28, 5_710.0),
            (186, 12_663.0, 28, 2_585.0),
            (102, 5_317.0, 31, 1_462.0),
        ]
        .map(|(a, t1, c, t0)| PersonTimeCounts::new(a, t1, c, t0).unwrap());
        let pooled = rate_ratio(&strata, CI95).unwrap();
        assert!(
            (pooled.estimate - 1.42).abs() < 0.005,
            "{}",
            pooled.estimate
        );
        // Five strata → 4 degrees of freedom; the Q value itself is compared with statsmodels in
        // tests/reference_rates.rs.
        assert_eq!(pooled.homogeneity.unwrap().degrees_of_freedom, 4);
    }

    #[test]
    fn strata_without_both_groups_are_skipped() {
        let with_empty = [
            TwoByTwo::new(8, 106, 5, 120).unwrap(),
            TwoByTwo::new(3, 10, 0, 0).unwrap(),
            TwoByTwo::new(0, 0, 0, 0).unwrap(),
        ];
        let pooled = risk_ratio(&with_empty, CI95).unwrap();
        let crude = crude_risk_ratio(&with_empty[0], ZeroCellCorrection::None, CI95).unwrap();
        assert_eq!(pooled.n_strata, 3);
        assert_eq!(pooled.n_strata_informative, 1);
        assert!((pooled.estimate - crude.estimate).abs() < 1e-12);
        assert!(pooled.homogeneity.is_none());
    }

    #[test]
    fn no_exposed_cases_anywhere_is_not_estimable() {
        let strata = [
            TwoByTwo::new(0, 10, 2, 10).unwrap(),
            TwoByTwo::new(0, 5, 1, 7).unwrap(),
        ];
        assert!(matches!(
            risk_ratio(&strata, CI95),
            Err(StatsError::NotEstimable(_))
        ));
        assert!(matches!(
            risk_ratio(&[], CI95),
            Err(StatsError::InvalidInput { .. })
        ));
    }

    #[test]
    fn zero_cells_inside_strata_are_fine() {
        // Sparse strata: MH needs no correction; the zero stratum is left out of the Woolf test.
        let strata = [
            TwoByTwo::new(0, 4, 1, 5).unwrap(),
            TwoByTwo::new(3, 6, 1, 6).unwrap(),
            TwoByTwo::new(2, 5, 1, 4).unwrap(),
        ];
        let pooled = risk_ratio(&strata, CI95).unwrap();
        assert!(pooled.estimate.is_finite() && pooled.interval.contains(pooled.estimate));
        assert_eq!(pooled.homogeneity.unwrap().n_strata_used, 2);
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn one_stratum_equals_the_crude_ratio(a in 1u64..200, b in 1u64..200, c in 1u64..200, d in 1u64..200, t1 in 1.0f64..1e5, t0 in 1.0f64..1e5) {
            let table = TwoByTwo::new(a, a + b, c, c + d).unwrap();
            let pooled = risk_ratio(&[table], CI95).unwrap();
            let crude = crude_risk_ratio(&table, ZeroCellCorrection::None, CI95).unwrap();
            prop_assert!((pooled.estimate / crude.estimate - 1.0).abs() < 1e-10);
            // With one stratum the Greenland–Robins variance reduces to the Katz variance.
            prop_assert!((pooled.log_standard_error - crude.log_standard_error).abs() < 1e-10);

            let pooled = odds_ratio(&[table], CI95).unwrap();
            let crude = crude_odds_ratio(&table, ZeroCellCorrection::None, CI95).unwrap();
            prop_assert!((pooled.estimate / crude.estimate - 1.0).abs() < 1e-10);
            // ... and the Robins–Breslow–Greenland variance to the Woolf variance.
            prop_assert!((pooled.log_standard_error - crude.log_standard_error).abs() < 1e-10);

            let counts = PersonTimeCounts::new(a, t1, c, t0).unwrap();
            let pooled = rate_ratio(&[counts], CI95).unwrap();
            let crude = crude_rate_ratio(&counts, RateRatioMethod::WaldLog, CI95).unwrap();
            prop_assert!((pooled.estimate / crude.estimate - 1.0).abs() < 1e-10);
            prop_assert!((pooled.log_standard_error - (1.0 / a as f64 + 1.0 / c as f64).sqrt()).abs() < 1e-10);
        }

        #[test]
        fn identical_strata_are_homogeneous(a in 1u64..50, b in 1u64..50, c in 1u64..50, d in 1u64..50, k in 2usize..6) {
            let strata = vec![TwoByTwo::new(a, a + b, c, c + d).unwrap(); k];
            let rr = risk_ratio(&strata, CI95).unwrap().homogeneity.unwrap();
            prop_assert!(rr.chi_square.abs() < 1e-9 && rr.degrees_of_freedom == k - 1);
            let or = odds_ratio(&strata, CI95).unwrap().homogeneity.unwrap();
            prop_assert!(or.chi_square.abs() < 1e-9, "{:?}", or);
        }
    }
}
