//! Risk ratio, risk difference and odds ratio of a 2×2 table (cumulative incidence in an exposed
//! and an unexposed group).
//!
//! Cells: a = exposed cases of n₁, b = n₁ − a, c = unexposed cases of n₀, d = n₀ − c.
//!
//! - **Risk ratio** RR = (a/n₁)/(c/n₀) with the Katz log interval exp(ln RR ± z·SE),
//!   SE = √(1/a − 1/n₁ + 1/c − 1/n₀) (Katz, Baptista, Azen & Pike, Biometrics 1978;34:469 [M]).
//! - **Odds ratio** OR = ad/(bc) with the Woolf logit interval exp(ln OR ± z·SE),
//!   SE = √(1/a + 1/b + 1/c + 1/d) (Woolf, Ann Hum Genet 1955;19:251).
//! - **Risk difference** RD = a/n₁ − c/n₀ with
//!   - *Wald*: RD ± z·√(p₁q₁/n₁ + p₀q₀/n₀) (Newcombe's method 1). When both risks are 0 or 1 the
//!     standard error is 0 and the interval is the single point RD, as the formula says (Newcombe
//!     Table II shows the same degenerate intervals). The Wald interval is not clipped and can
//!     reach beyond [−1, 1] in small groups; prefer the hybrid score interval.
//!   - *Newcombe hybrid score* (Stat Med 1998;17:873, method 10): with the Wilson intervals
//!     (l₁, u₁) and (l₀, u₀) of the two risks, L = RD − √((p₁−l₁)² + (u₀−p₀)²) and
//!     U = RD + √((u₁−p₁)² + (p₀−l₀)²). Defined for every table, zero cells included.
//!
//! # Zero cells
//! The log intervals need non-zero cells: the risk ratio needs a > 0 and c > 0, the odds ratio all
//! four cells > 0. What happens otherwise is the caller's explicit choice, [`ZeroCellCorrection`]:
//! - [`ZeroCellCorrection::None`] (no silent change of the data): a zero cell that the estimate
//!   needs gives [`StatsError::NotEstimable`] naming the cell. A zero in a cell the risk ratio does
//!   not divide by (b or d) is fine for the risk ratio.
//! - [`ZeroCellCorrection::Haldane`]: when any of the four cells is 0, 0.5 is added to all four
//!   (the Haldane–Anscombe correction: Haldane, Ann Hum Genet 1956;20:309; Anscombe, Biometrika
//!   1956;43:461 [M]), so n₁ and n₀ each grow by 1; tables without a zero cell are left alone. The
//!   result says whether the correction was applied. Note: statsmodels 0.15
//!   `Table2x2(..., shift_zeros=True)` documents "add 0.5 to all values" but its code replaces only
//!   the zero cells by 0.5; the reference fixture therefore adds 0.5 to every cell itself and
//!   hands the corrected table to `Table2x2(..., shift_zeros=False)`.
//!
//! The risk difference never needs a correction.

use crate::proportion::wilson_interval;
use crate::{ConfidenceLevel, Interval, StatsError};
use serde::Serialize;

/// A 2×2 table of cases among the exposed and the unexposed (one stratum in
/// [`crate::mantel_haenszel`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct TwoByTwo {
    pub exposed_cases: u64,
    pub exposed_total: u64,
    pub unexposed_cases: u64,
    pub unexposed_total: u64,
}

impl TwoByTwo {
    /// Checks that cases do not exceed totals. Totals of 0 are allowed here (a stratum may lack
    /// one group); the single-table estimates below reject them.
    pub fn new(
        exposed_cases: u64,
        exposed_total: u64,
        unexposed_cases: u64,
        unexposed_total: u64,
    ) -> Result<Self, StatsError> {
        let table = TwoByTwo {
            exposed_cases,
            exposed_total,
            unexposed_cases,
            unexposed_total,
        };
        table.validate()?;
        Ok(table)
    }

    pub(crate) fn validate(&self) -> Result<(), StatsError> {
        if self.exposed_cases > self.exposed_total {
            return Err(StatsError::invalid(
                "exposed cases",
                format!("at most the exposed total {}", self.exposed_total),
                self.exposed_cases,
            ));
        }
        if self.unexposed_cases > self.unexposed_total {
            return Err(StatsError::invalid(
                "unexposed cases",
                format!("at most the unexposed total {}", self.unexposed_total),
                self.unexposed_cases,
            ));
        }
        Ok(())
    }

    fn validate_both_groups(&self) -> Result<(), StatsError> {
        self.validate()?;
        if self.exposed_total == 0 || self.unexposed_total == 0 {
            return Err(StatsError::invalid(
                "group totals",
                "at least 1 person in both the exposed and the unexposed group",
                format!(
                    "exposed {}, unexposed {}",
                    self.exposed_total, self.unexposed_total
                ),
            ));
        }
        Ok(())
    }

    /// The four cells a, b, c, d as numbers.
    pub(crate) fn cells(&self) -> [f64; 4] {
        [
            self.exposed_cases as f64,
            (self.exposed_total - self.exposed_cases) as f64,
            self.unexposed_cases as f64,
            (self.unexposed_total - self.unexposed_cases) as f64,
        ]
    }
}

/// What to do when a cell needed by a log interval is zero (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ZeroCellCorrection {
    /// Report the estimate as not estimable.
    #[default]
    None,
    /// Add 0.5 to all four cells when any cell is zero.
    Haldane,
}

/// A ratio measure (risk ratio or odds ratio) with its log-scale interval.
#[derive(Debug, Clone, Serialize)]
pub struct RatioEstimate {
    pub table: TwoByTwo,
    pub estimate: f64,
    /// Standard error of the natural log of the estimate.
    pub log_standard_error: f64,
    pub interval: Interval,
    /// True when 0.5 was added to every cell (Haldane), false when the raw table was used.
    pub zero_cell_corrected: bool,
}

/// How the risk-difference interval is computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RiskDifferenceMethod {
    Wald,
    NewcombeHybridScore,
}

/// A risk difference (exposed minus unexposed) with its interval.
#[derive(Debug, Clone, Serialize)]
pub struct RiskDifference {
    pub table: TwoByTwo,
    pub estimate: f64,
    pub interval: Interval,
    pub method: RiskDifferenceMethod,
}

/// Risk ratio with the Katz log interval.
pub fn risk_ratio(
    table: &TwoByTwo,
    zero_cells: ZeroCellCorrection,
    level: ConfidenceLevel,
) -> Result<RatioEstimate, StatsError> {
    table.validate_both_groups()?;
    let ([a, b, c, d], corrected) = corrected_cells(table, zero_cells);
    if a == 0.0 || c == 0.0 {
        return Err(not_estimable(
            "risk ratio",
            table,
            if a == 0.0 {
                "exposed cases"
            } else {
                "unexposed cases"
            },
        ));
    }
    let (n1, n0) = (a + b, c + d);
    let estimate = (a / n1) / (c / n0);
    let log_standard_error = (1.0 / a - 1.0 / n1 + 1.0 / c - 1.0 / n0).max(0.0).sqrt();
    Ok(log_ratio(
        *table,
        estimate,
        log_standard_error,
        corrected,
        level,
    ))
}

/// Odds ratio with the Woolf logit interval.
pub fn odds_ratio(
    table: &TwoByTwo,
    zero_cells: ZeroCellCorrection,
    level: ConfidenceLevel,
) -> Result<RatioEstimate, StatsError> {
    table.validate_both_groups()?;
    let ([a, b, c, d], corrected) = corrected_cells(table, zero_cells);
    let names = [
        "exposed cases",
        "exposed non-cases",
        "unexposed cases",
        "unexposed non-cases",
    ];
    if let Some(i) = [a, b, c, d].iter().position(|&cell| cell == 0.0) {
        return Err(not_estimable("odds ratio", table, names[i]));
    }
    let estimate = (a * d) / (b * c);
    let log_standard_error = (1.0 / a + 1.0 / b + 1.0 / c + 1.0 / d).sqrt();
    Ok(log_ratio(
        *table,
        estimate,
        log_standard_error,
        corrected,
        level,
    ))
}

/// Risk difference, exposed minus unexposed.
pub fn risk_difference(
    table: &TwoByTwo,
    method: RiskDifferenceMethod,
    level: ConfidenceLevel,
) -> Result<RiskDifference, StatsError> {
    table.validate_both_groups()?;
    let n1 = table.exposed_total as f64;
    let n0 = table.unexposed_total as f64;
    let p1 = table.exposed_cases as f64 / n1;
    let p0 = table.unexposed_cases as f64 / n0;
    let estimate = p1 - p0;
    let interval = match method {
        RiskDifferenceMethod::Wald => {
            let half = level.z() * (p1 * (1.0 - p1) / n1 + p0 * (1.0 - p0) / n0).sqrt();
            Interval::new(estimate - half, estimate + half, level)
        }
        RiskDifferenceMethod::NewcombeHybridScore => {
            let w1 = wilson_interval(table.exposed_cases, table.exposed_total, level)?;
            let w0 = wilson_interval(table.unexposed_cases, table.unexposed_total, level)?;
            let lower = estimate - ((p1 - w1.lower).powi(2) + (w0.upper - p0).powi(2)).sqrt();
            let upper = estimate + ((w1.upper - p1).powi(2) + (p0 - w0.lower).powi(2)).sqrt();
            Interval::new(lower, upper, level)
        }
    };
    Ok(RiskDifference {
        table: *table,
        estimate,
        interval,
        method,
    })
}

fn corrected_cells(table: &TwoByTwo, zero_cells: ZeroCellCorrection) -> ([f64; 4], bool) {
    let cells = table.cells();
    let any_zero = cells.contains(&0.0);
    match zero_cells {
        ZeroCellCorrection::Haldane if any_zero => (cells.map(|cell| cell + 0.5), true),
        _ => (cells, false),
    }
}

fn log_ratio(
    table: TwoByTwo,
    estimate: f64,
    log_standard_error: f64,
    zero_cell_corrected: bool,
    level: ConfidenceLevel,
) -> RatioEstimate {
    let half = level.z() * log_standard_error;
    RatioEstimate {
        table,
        estimate,
        log_standard_error,
        interval: Interval::new(estimate * (-half).exp(), estimate * half.exp(), level),
        zero_cell_corrected,
    }
}

fn not_estimable(measure: &str, table: &TwoByTwo, cell: &str) -> StatsError {
    StatsError::NotEstimable(format!(
        "the {measure} of {}/{} vs {}/{} is not estimable: the {cell} cell is 0\n\
         hint: report the risk difference (Newcombe interval), or ask for the Haldane correction \
         (0.5 added to every cell)",
        table.exposed_cases, table.exposed_total, table.unexposed_cases, table.unexposed_total
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const CI95: ConfidenceLevel = ConfidenceLevel::NINETY_FIVE;

    fn table(a: u64, n1: u64, c: u64, n0: u64) -> TwoByTwo {
        TwoByTwo::new(a, n1, c, n0).unwrap()
    }

    fn close(got: f64, expected: f64, tolerance: f64) -> bool {
        (got - expected).abs() <= tolerance
    }

    #[test]
    fn katz_interval_matches_statsmodels_test() {
        // [[2,2],[2,2]] → RR 1, SE 1/√2, CI 0.25009765-3.99843816 [C: statsmodels Table2x2 test,
        // DOMAIN.md §5.4].
        let r = risk_ratio(&table(2, 4, 2, 4), ZeroCellCorrection::None, CI95).unwrap();
        assert!(close(r.estimate, 1.0, 1e-12));
        assert!(close(r.log_standard_error, 0.5f64.sqrt(), 1e-12));
        assert!(
            close(r.interval.lower, 0.250_097_65, 1e-8),
            "{:?}",
            r.interval
        );
        assert!(
            close(r.interval.upper, 3.998_438_16, 1e-8),
            "{:?}",
            r.interval
        );
    }

    #[test]
    fn tolbutamide_crude_risk_ratio() {
        // UGDP tolbutamide, 30/204 vs 21/205 deaths → 1.4356 (0.8510-2.4216) [S: DOMAIN.md §5.4].
        let r = risk_ratio(&table(30, 204, 21, 205), ZeroCellCorrection::None, CI95).unwrap();
        assert!(close(r.estimate, 1.4356, 5e-5), "{}", r.estimate);
        assert!(close(r.interval.lower, 0.8510, 5e-5), "{:?}", r.interval);
        assert!(close(r.interval.upper, 2.4216, 5e-5), "{:?}", r.interval);
    }

    fn check_newcombe(t: TwoByTwo, expected: (f64, f64)) {
        let d = risk_difference(&t, RiskDifferenceMethod::NewcombeHybridScore, CI95).unwrap();
        assert!(
            close(d.interval.lower, expected.0, 5e-5) && close(d.interval.upper, expected.1, 5e-5),
            "{t:?}: {:?}",
            d.interval
        );
    }

    #[test]
    fn newcombe_reproduces_newcombe_1998_table_ii() {
        // Newcombe, Stat Med 1998;17:873, Table II, method 10 [S: DOMAIN.md §5.4; published values
        // as remembered M]. Tolerance 5e-5 (4-dp table).
        check_newcombe(table(56, 70, 48, 80), (0.0524, 0.3339));
        check_newcombe(table(9, 10, 3, 10), (0.1705, 0.8090));
        check_newcombe(table(6, 7, 2, 7), (0.0582, 0.8062));
        check_newcombe(table(5, 56, 0, 29), (-0.0381, 0.1926));
    }

    #[test]
    fn wald_difference_reproduces_newcombe_method_1() {
        // 56/70 − 48/80: d 0.2000, Wald 0.0575-0.3425 [S: DOMAIN.md §5.4].
        let d = risk_difference(&table(56, 70, 48, 80), RiskDifferenceMethod::Wald, CI95).unwrap();
        assert!(close(d.estimate, 0.2, 1e-12));
        assert!(
            close(d.interval.lower, 0.0575, 5e-5) && close(d.interval.upper, 0.3425, 5e-5),
            "{:?}",
            d.interval
        );
    }

    #[test]
    fn zero_cells_are_not_estimable_without_correction() {
        let t = table(0, 20, 4, 25);
        match risk_ratio(&t, ZeroCellCorrection::None, CI95) {
            Err(StatsError::NotEstimable(message)) => {
                assert!(message.contains("exposed cases cell is 0"), "{message}")
            }
            other => panic!("expected NotEstimable, got {other:?}"),
        }
        assert!(matches!(
            odds_ratio(&t, ZeroCellCorrection::None, CI95),
            Err(StatsError::NotEstimable(_))
        ));
        // A zero non-case cell: fine for the risk ratio, not for the odds ratio.
        let everyone = table(20, 20, 4, 25);
        let rr = risk_ratio(&everyone, ZeroCellCorrection::None, CI95).unwrap();
        assert!(!rr.zero_cell_corrected && close(rr.estimate, 6.25, 1e-12));
        assert!(matches!(
            odds_ratio(&everyone, ZeroCellCorrection::None, CI95),
            Err(StatsError::NotEstimable(_))
        ));
    }

    #[test]
    fn haldane_correction_adds_a_half_to_every_cell() {
        // 0/20 vs 4/25 → cells 0.5, 20.5, 4.5, 21.5. RR = (0.5/21)/(4.5/26), OR = 0.5·21.5/(20.5·4.5)
        // (arithmetic; tests/reference_rates.rs compares with statsmodels Table2x2 of the corrected
        // table).
        let t = table(0, 20, 4, 25);
        let rr = risk_ratio(&t, ZeroCellCorrection::Haldane, CI95).unwrap();
        assert!(rr.zero_cell_corrected);
        assert!(close(rr.estimate, (0.5 / 21.0) / (4.5 / 26.0), 1e-12));
        let or = odds_ratio(&t, ZeroCellCorrection::Haldane, CI95).unwrap();
        assert!(close(or.estimate, 0.5 * 21.5 / (20.5 * 4.5), 1e-12));
        // No zero cell: no change.
        let plain = risk_ratio(&table(3, 20, 4, 25), ZeroCellCorrection::Haldane, CI95).unwrap();
        assert!(!plain.zero_cell_corrected);
        assert!(close(plain.estimate, (3.0 / 20.0) / (4.0 / 25.0), 1e-12));
    }

    #[test]
    fn empty_groups_are_errors() {
        assert!(TwoByTwo::new(3, 2, 0, 1).is_err());
        let t = table(0, 0, 1, 3);
        assert!(matches!(
            risk_difference(&t, RiskDifferenceMethod::Wald, CI95),
            Err(StatsError::InvalidInput { .. })
        ));
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn intervals_contain_the_estimate(n1 in 1u64..300, n0 in 1u64..300, s1 in 0.0f64..=1.0, s0 in 0.0f64..=1.0) {
            let a = ((n1 as f64) * s1).round() as u64;
            let c = ((n0 as f64) * s0).round() as u64;
            let t = table(a, n1, c, n0);
            for method in [RiskDifferenceMethod::Wald, RiskDifferenceMethod::NewcombeHybridScore] {
                let d = risk_difference(&t, method, CI95).unwrap();
                prop_assert!(d.interval.contains(d.estimate), "{:?} {:?}", method, d);
            }
            // The hybrid score interval stays inside [-1, 1]; the Wald interval need not (and is
            // not clipped).
            let d = risk_difference(&t, RiskDifferenceMethod::NewcombeHybridScore, CI95).unwrap();
            prop_assert!(d.interval.lower >= -1.0 - 1e-12 && d.interval.upper <= 1.0 + 1e-12, "{:?}", d);
            for estimate in [risk_ratio(&t, ZeroCellCorrection::Haldane, CI95), odds_ratio(&t, ZeroCellCorrection::Haldane, CI95)] {
                let e = estimate.unwrap();
                prop_assert!(e.interval.contains(e.estimate), "{:?}", e);
            }
        }
    }
}
