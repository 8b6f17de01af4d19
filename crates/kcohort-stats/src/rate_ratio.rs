//! Incidence rate ratio and rate difference of two groups (a events in PT₁ vs b events in PT₀).
//!
//! - **Rate ratio** IRR = (a/PT₁)/(b/PT₀).
//!   - *Wald on the log scale*: exp(ln IRR ± z·√(1/a + 1/b)) (e.g. Rothman, Greenland & Lash,
//!     Modern Epidemiology 3rd ed. 2008 [M: chapter not recalled]; statsmodels
//!     `confint_poisson_2indep` method `"wald-log"`). Needs a > 0 and b > 0, otherwise
//!     [`StatsError::NotEstimable`].
//!   - *Exact conditional, central*: given a + b, a ~ Bin(a+b, π) with
//!     π = IRR·PT₁/(IRR·PT₁ + PT₀). The Clopper–Pearson interval (π_L, π_U) for a/(a+b) is mapped
//!     back by IRR = π/(1−π)·PT₀/PT₁ (Breslow & Day, Statistical Methods in Cancer Research vol. II,
//!     1987 [M: from memory]; formula as in DOMAIN.md §5.3). This "central" interval differs from
//!     the "minlike" two-sided inversion of R's `exactci::poisson.exact`. With a = 0 the estimate
//!     and lower limit are 0; with b = 0 the estimate and upper limit are +∞ (serde_json writes an
//!     infinite number as `null`); a = b = 0 is [`StatsError::NotEstimable`].
//! - **Rate difference** IRD = a/PT₁ − b/PT₀ with the Wald interval IRD ± z·√(a/PT₁² + b/PT₀²),
//!   reported per `multiplier` units of person-time (statsmodels method `"wald"`, compare `"diff"`).

use crate::poisson_rate::{check_multiplier, check_person_time};
use crate::proportion::clopper_pearson_interval;
use crate::{ConfidenceLevel, Interval, StatsError};
use serde::Serialize;

/// Events and person-time in an exposed and an unexposed group (also one stratum of a stratified
/// analysis, see [`crate::mantel_haenszel`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PersonTimeCounts {
    pub exposed_events: u64,
    pub exposed_person_time: f64,
    pub unexposed_events: u64,
    pub unexposed_person_time: f64,
}

impl PersonTimeCounts {
    /// Checks that both person-times are finite and not negative, and that a group with no
    /// person-time has no events. A group with no person-time is allowed here (a stratum may lack
    /// one group); the two-group comparisons below need person-time in both.
    pub fn new(
        exposed_events: u64,
        exposed_person_time: f64,
        unexposed_events: u64,
        unexposed_person_time: f64,
    ) -> Result<Self, StatsError> {
        let counts = PersonTimeCounts {
            exposed_events,
            exposed_person_time,
            unexposed_events,
            unexposed_person_time,
        };
        counts.validate()?;
        Ok(counts)
    }

    pub(crate) fn validate(&self) -> Result<(), StatsError> {
        for (what, events, time) in [
            (
                "exposed person-time",
                self.exposed_events,
                self.exposed_person_time,
            ),
            (
                "unexposed person-time",
                self.unexposed_events,
                self.unexposed_person_time,
            ),
        ] {
            if !(time.is_finite() && time >= 0.0) {
                return Err(StatsError::invalid(
                    what,
                    "a finite number, 0 or more",
                    time,
                ));
            }
            if time == 0.0 && events > 0 {
                return Err(StatsError::invalid(
                    what,
                    format!("more than 0, since the group has {events} events"),
                    time,
                ));
            }
        }
        Ok(())
    }

    fn validate_both_groups(&self) -> Result<(), StatsError> {
        self.validate()?;
        check_person_time("exposed person-time", self.exposed_person_time)?;
        check_person_time("unexposed person-time", self.unexposed_person_time)
    }

    fn exposed_rate(&self) -> f64 {
        self.exposed_events as f64 / self.exposed_person_time
    }

    fn unexposed_rate(&self) -> f64 {
        self.unexposed_events as f64 / self.unexposed_person_time
    }
}

/// How the rate-ratio interval is computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RateRatioMethod {
    WaldLog,
    ExactConditional,
}

/// A rate ratio with its interval.
#[derive(Debug, Clone, Serialize)]
pub struct RateRatio {
    pub counts: PersonTimeCounts,
    pub estimate: f64,
    pub interval: Interval,
    pub method: RateRatioMethod,
}

/// A rate difference per `multiplier` units of person-time, with its Wald interval.
#[derive(Debug, Clone, Serialize)]
pub struct RateDifference {
    pub counts: PersonTimeCounts,
    pub multiplier: f64,
    pub estimate: f64,
    pub standard_error: f64,
    pub interval: Interval,
}

/// Exposed over unexposed rate ratio.
pub fn rate_ratio(
    counts: &PersonTimeCounts,
    method: RateRatioMethod,
    level: ConfidenceLevel,
) -> Result<RateRatio, StatsError> {
    counts.validate_both_groups()?;
    let a = counts.exposed_events;
    let b = counts.unexposed_events;
    let time_ratio = counts.unexposed_person_time / counts.exposed_person_time;
    let (estimate, interval) = match method {
        RateRatioMethod::WaldLog => {
            if a == 0 || b == 0 {
                return Err(StatsError::NotEstimable(format!(
                    "the Wald rate ratio needs events in both groups, found {a} exposed and {b} \
                     unexposed events\nhint: use the exact conditional interval, which allows a zero count"
                )));
            }
            let estimate = counts.exposed_rate() / counts.unexposed_rate();
            let half = level.z() * (1.0 / a as f64 + 1.0 / b as f64).sqrt();
            (
                estimate,
                Interval::new(estimate * (-half).exp(), estimate * half.exp(), level),
            )
        }
        RateRatioMethod::ExactConditional => {
            if a == 0 && b == 0 {
                return Err(StatsError::NotEstimable(
                    "the rate ratio needs at least one event; both groups have none".to_string(),
                ));
            }
            let share = clopper_pearson_interval(a, a + b, level)?;
            let to_ratio = |pi: f64| {
                if pi >= 1.0 {
                    f64::INFINITY
                } else {
                    pi / (1.0 - pi) * time_ratio
                }
            };
            let estimate = if b == 0 {
                f64::INFINITY
            } else {
                counts.exposed_rate() / counts.unexposed_rate()
            };
            (
                estimate,
                Interval::new(to_ratio(share.lower), to_ratio(share.upper), level),
            )
        }
    };
    Ok(RateRatio {
        counts: *counts,
        estimate,
        interval,
        method,
    })
}

/// Exposed minus unexposed rate, per `multiplier` units of person-time, with the Wald interval.
pub fn rate_difference(
    counts: &PersonTimeCounts,
    multiplier: f64,
    level: ConfidenceLevel,
) -> Result<RateDifference, StatsError> {
    counts.validate_both_groups()?;
    check_multiplier(multiplier)?;
    let estimate = counts.exposed_rate() - counts.unexposed_rate();
    let variance = counts.exposed_events as f64 / counts.exposed_person_time.powi(2)
        + counts.unexposed_events as f64 / counts.unexposed_person_time.powi(2);
    let standard_error = variance.sqrt();
    let half = level.z() * standard_error;
    Ok(RateDifference {
        counts: *counts,
        multiplier,
        estimate: estimate * multiplier,
        standard_error: standard_error * multiplier,
        interval: Interval::new(
            (estimate - half) * multiplier,
            (estimate + half) * multiplier,
            level,
        ),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const CI95: ConfidenceLevel = ConfidenceLevel::NINETY_FIVE;

    fn statsmodels_example() -> PersonTimeCounts {
        // statsmodels test data (from R exactci::poisson.exact): 60/51 477.5 vs 30/54 308.7.
        PersonTimeCounts::new(60, 51_477.5, 30, 54_308.7).unwrap()
    }

    fn close(got: f64, expected: f64, tolerance: f64) -> bool {
        (got - expected).abs() <= tolerance
    }

    #[test]
    fn statsmodels_rate_ratio_example() {
        let counts = statsmodels_example();
        let wald = rate_ratio(&counts, RateRatioMethod::WaldLog, CI95).unwrap();
        // IRR 2.10999757 [C: statsmodels test results, DOMAIN.md §5.3].
        assert!(
            close(wald.estimate, 2.109_997_57, 1e-8),
            "{}",
            wald.estimate
        );
        // Wald-log 1.36128-3.27052 [S: DOMAIN.md §5.3, computed with scipy]; 5-dp tolerance.
        assert!(
            close(wald.interval.lower, 1.36128, 5e-6),
            "{:?}",
            wald.interval
        );
        assert!(
            close(wald.interval.upper, 3.27052, 5e-6),
            "{:?}",
            wald.interval
        );
        // Exact conditional central 1.33974-3.38837 [S: DOMAIN.md §5.3]. (The minlike interval
        // 1.34983-3.27765 of R exactci is a different method and is not reproduced here.)
        let exact = rate_ratio(&counts, RateRatioMethod::ExactConditional, CI95).unwrap();
        assert!(
            close(exact.interval.lower, 1.33974, 5e-6),
            "{:?}",
            exact.interval
        );
        assert!(
            close(exact.interval.upper, 3.38837, 5e-6),
            "{:?}",
            exact.interval
        );
    }

    #[test]
    fn statsmodels_rate_difference_example() {
        // IRD 0.6132 (0.2581-0.9682) per 1000 [S: DOMAIN.md §5.3, computed with scipy].
        let d = rate_difference(&statsmodels_example(), 1000.0, CI95).unwrap();
        assert!(close(d.estimate, 0.6132, 5e-5), "{}", d.estimate);
        assert!(close(d.interval.lower, 0.2581, 5e-5), "{:?}", d.interval);
        assert!(close(d.interval.upper, 0.9682, 5e-5), "{:?}", d.interval);
    }

    #[test]
    fn boice_monson_textbook_example() {
        // Boice & Monson breast cancer after fluoroscopy, 41/28 010 vs 15/19 017 person-years, as in
        // Rothman & Greenland, Modern Epidemiology [data M: from memory]: IRR 1.856 with 90% Wald CI
        // 1.130-3.048, IRD 0.675 per 1000 PY [S: DOMAIN.md §5.3].
        let counts = PersonTimeCounts::new(41, 28_010.0, 15, 19_017.0).unwrap();
        let ci90 = ConfidenceLevel::new(0.90).unwrap();
        let r = rate_ratio(&counts, RateRatioMethod::WaldLog, ci90).unwrap();
        assert!(close(r.estimate, 1.856, 5e-4), "{}", r.estimate);
        assert!(close(r.interval.lower, 1.130, 5e-4), "{:?}", r.interval);
        assert!(close(r.interval.upper, 3.048, 5e-4), "{:?}", r.interval);
        let d = rate_difference(&counts, 1000.0, ci90).unwrap();
        assert!(close(d.estimate, 0.675, 5e-4), "{}", d.estimate);
    }

    #[test]
    fn zero_counts() {
        let none_exposed = PersonTimeCounts::new(0, 100.0, 5, 100.0).unwrap();
        assert!(matches!(
            rate_ratio(&none_exposed, RateRatioMethod::WaldLog, CI95),
            Err(StatsError::NotEstimable(_))
        ));
        let exact = rate_ratio(&none_exposed, RateRatioMethod::ExactConditional, CI95).unwrap();
        assert_eq!(exact.estimate, 0.0);
        assert_eq!(exact.interval.lower, 0.0);
        assert!(exact.interval.upper.is_finite() && exact.interval.upper > 0.0);

        let none_unexposed = PersonTimeCounts::new(5, 100.0, 0, 100.0).unwrap();
        let exact = rate_ratio(&none_unexposed, RateRatioMethod::ExactConditional, CI95).unwrap();
        assert_eq!(exact.estimate, f64::INFINITY);
        assert_eq!(exact.interval.upper, f64::INFINITY);
        assert!(exact.interval.lower.is_finite() && exact.interval.lower > 0.0);

        // As documented, serde_json writes the infinite bound as null.
        let json = serde_json::to_value(&exact).unwrap();
        assert!(json["interval"]["upper"].is_null() && json["interval"]["lower"].is_f64());
        assert_eq!(json["method"], "exact_conditional");

        let nothing = PersonTimeCounts::new(0, 100.0, 0, 100.0).unwrap();
        assert!(rate_ratio(&nothing, RateRatioMethod::ExactConditional, CI95).is_err());
    }

    #[test]
    fn person_time_must_be_positive() {
        assert!(PersonTimeCounts::new(1, 0.0, 1, 1.0).is_err());
        let no_exposed_time = PersonTimeCounts::new(0, 0.0, 1, 1.0).unwrap();
        assert!(rate_ratio(&no_exposed_time, RateRatioMethod::ExactConditional, CI95).is_err());
        let sneaky = PersonTimeCounts {
            exposed_events: 1,
            exposed_person_time: 1.0,
            unexposed_events: 1,
            unexposed_person_time: -3.0,
        };
        assert!(rate_ratio(&sneaky, RateRatioMethod::WaldLog, CI95).is_err());
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn intervals_contain_the_estimate(a in 1u64..300, b in 1u64..300, t1 in 10.0f64..1e5, t0 in 10.0f64..1e5) {
            let counts = PersonTimeCounts::new(a, t1, b, t0).unwrap();
            for method in [RateRatioMethod::WaldLog, RateRatioMethod::ExactConditional] {
                let r = rate_ratio(&counts, method, CI95).unwrap();
                prop_assert!(r.interval.contains(r.estimate), "{:?} {:?}", method, r);
            }
            let d = rate_difference(&counts, 1000.0, CI95).unwrap();
            prop_assert!(d.interval.contains(d.estimate));
        }
    }
}
