//! Event count and rate per person-time with the exact Poisson (Garwood) interval.
//!
//! For x events the central exact limits of the Poisson mean are (Garwood, Biometrika
//! 1936;28:437): L = χ²(α/2; 2x)/2 and U = χ²(1−α/2; 2x+2)/2, with L = 0 when x = 0 (the
//! chi-square with 0 degrees of freedom is degenerate, so it is special-cased, not computed).
//! χ²(p; 2k)/2 is the p-quantile of Gamma(shape k, rate 1), which is what is evaluated.
//!
//! The rate is x / PT and its limits are (L, U) / PT, all multiplied by the chosen `multiplier`:
//! with person-time in days, `multiplier = 1000.0` gives a rate per 1,000 patient-days and
//! `multiplier = 100.0 * DAYS_PER_YEAR` a rate per 100 person-years.

use crate::{ConfidenceLevel, Interval, StatsError};
use serde::Serialize;
use statrs::distribution::{Continuous, ContinuousCDF, Gamma};

/// Days in a mean Julian year, to turn person-days into person-years (common practice).
pub const DAYS_PER_YEAR: f64 = 365.25;

/// A count over person-time, as a rate per `multiplier` units of person-time.
#[derive(Debug, Clone, Serialize)]
pub struct PoissonRate {
    pub events: u64,
    pub person_time: f64,
    /// The rate is per this many units of person-time (1000 → per 1,000 patient-days).
    pub multiplier: f64,
    /// events / person_time × multiplier.
    pub rate: f64,
    /// Garwood exact limits of the rate, in the same units as `rate`.
    pub interval: Interval,
}

/// Rate of `events` over `person_time`, scaled by `multiplier`, with the Garwood interval.
pub fn poisson_rate(
    events: u64,
    person_time: f64,
    multiplier: f64,
    level: ConfidenceLevel,
) -> Result<PoissonRate, StatsError> {
    check_person_time("person-time", person_time)?;
    check_multiplier(multiplier)?;
    let count = garwood_interval(events, level);
    let scale = multiplier / person_time;
    Ok(PoissonRate {
        events,
        person_time,
        multiplier,
        rate: events as f64 * scale,
        interval: Interval::new(count.lower * scale, count.upper * scale, level),
    })
}

/// Garwood exact central interval for the mean of a Poisson count observed as `events`.
pub fn garwood_interval(events: u64, level: ConfidenceLevel) -> Interval {
    let tail = level.alpha_half();
    let x = events as f64;
    let lower = if events == 0 {
        0.0
    } else {
        gamma_quantile(tail, x)
    };
    let upper = gamma_quantile(1.0 - tail, x + 1.0);
    Interval::new(lower, upper, level)
}

/// Quantile of Gamma(shape, rate 1) at probability p (shape > 0, 0 < p < 1 by construction).
pub(crate) fn gamma_quantile(p: f64, shape: f64) -> f64 {
    let gamma = Gamma::new(shape, 1.0).expect("gamma shape is positive");
    let mut x = gamma.inverse_cdf(p);
    // statrs stops its safeguarded Newton iteration when successive steps agree, which leaves
    // errors near 1e-10 relative (e.g. shape 1, p = 0.995); a few more Newton steps on the
    // regularised incomplete gamma reach rounding level. A step is kept only if it stays
    // positive and reduces the error.
    for _ in 0..4 {
        let error = gamma.cdf(x) - p;
        let density = gamma.pdf(x);
        if error == 0.0 || !(density.is_finite() && density > 0.0) {
            break;
        }
        let next = x - error / density;
        if next <= 0.0 || (gamma.cdf(next) - p).abs() >= error.abs() {
            break;
        }
        x = next;
    }
    x
}

pub(crate) fn check_person_time(what: &str, person_time: f64) -> Result<(), StatsError> {
    if person_time.is_finite() && person_time > 0.0 {
        Ok(())
    } else {
        Err(StatsError::invalid(
            what,
            "a finite number greater than 0 (drop or merge groups with no time at risk)",
            person_time,
        ))
    }
}

pub(crate) fn check_multiplier(multiplier: f64) -> Result<(), StatsError> {
    if multiplier.is_finite() && multiplier > 0.0 {
        Ok(())
    } else {
        Err(StatsError::invalid(
            "rate multiplier",
            "a finite number greater than 0, e.g. 1000 for a rate per 1,000 patient-days",
            multiplier,
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const CI95: ConfidenceLevel = ConfidenceLevel::NINETY_FIVE;

    fn check(x: u64, expected: (f64, f64)) {
        let got = garwood_interval(x, CI95);
        // Tolerance: the table is given to 4 decimals (5e-5) and scipy reproduces it.
        assert!(
            (got.lower - expected.0).abs() < 5e-5 && (got.upper - expected.1).abs() < 5e-5,
            "x = {x}: got {:.5}-{:.5}",
            got.lower,
            got.upper
        );
    }

    #[test]
    fn garwood_reproduces_the_exact_poisson_table() {
        // DOMAIN.md §5.2 [S: computed with scipy chi2.ppf]; x = 10 → 4.7954-18.3904 is also the
        // standard published exact-Poisson table value [M: from memory, as DOMAIN.md says; not
        // re-checked against a printed table].
        check(0, (0.0, 3.6889));
        check(1, (0.0253, 5.5716));
        check(2, (0.2422, 7.2247));
        check(5, (1.6235, 11.6683));
        check(10, (4.7954, 18.3904));
        check(20, (12.2165, 30.8884));
        check(60, (45.7863, 77.2319));
        check(100, (81.364, 121.6268));
    }

    #[test]
    fn rate_per_thousand_matches_statsmodels_example() {
        // 60 events in 51 477.5 person-time (statsmodels test data from R exactci): rate
        // 1.1656 (0.8894-1.5003) per 1000 [S: DOMAIN.md §5.3, computed with scipy].
        let r = poisson_rate(60, 51_477.5, 1000.0, CI95).unwrap();
        assert!((r.rate - 1.1656).abs() < 5e-5, "{}", r.rate);
        assert!((r.interval.lower - 0.8894).abs() < 5e-5, "{:?}", r.interval);
        assert!((r.interval.upper - 1.5003).abs() < 5e-5, "{:?}", r.interval);
    }

    #[test]
    fn per_hundred_person_years_from_days() {
        // 3 events in 730.5 days = 2 person-years → 150 per 100 person-years (arithmetic).
        let r = poisson_rate(3, 730.5, 100.0 * DAYS_PER_YEAR, CI95).unwrap();
        assert!((r.rate - 150.0).abs() < 1e-9, "{}", r.rate);
    }

    #[test]
    fn zero_events_has_zero_lower_limit_and_rule_of_three_upper() {
        // With x = 0 the 95% upper limit is -ln(0.025) = 3.6889 (closed form).
        let i = garwood_interval(0, CI95);
        assert_eq!(i.lower, 0.0);
        assert!((i.upper - (-(0.025f64).ln())).abs() < 1e-9);
    }

    #[test]
    fn bad_person_time_is_an_error() {
        for bad in [0.0, -1.0, f64::NAN, f64::INFINITY] {
            assert!(poisson_rate(1, bad, 1000.0, CI95).is_err(), "{bad}");
        }
        assert!(poisson_rate(1, 10.0, 0.0, CI95).is_err());
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn interval_contains_the_rate(events in 0u64..2000, person_time in 0.5f64..1e6, level in 0.5f64..0.999) {
            let level = ConfidenceLevel::new(level).unwrap();
            let r = poisson_rate(events, person_time, 1000.0, level).unwrap();
            prop_assert!(r.interval.contains(r.rate), "{:?} for {}", r.interval, r.rate);
        }
    }
}
