//! Incidence proportion x/n with a Wilson score or Clopper–Pearson exact interval.
//!
//! - **Wilson score** (Wilson, J Am Stat Assoc 1927;22:209):
//!   (x + z²/2 ± z·√(x(n−x)/n + z²/4)) / (n + z²).
//! - **Clopper–Pearson** (Biometrika 1934;26:404), the "exact" central interval:
//!   L = Beta⁻¹(α/2; x, n−x+1) with L = 0 when x = 0, U = Beta⁻¹(1−α/2; x+1, n−x) with U = 1
//!   when x = n.
//!
//! Both are among the methods compared by Newcombe (Stat Med 1998;17:857; there methods 3 and 5
//! [M: numbering from memory]); his Table II
//! is reproduced in the tests. At x = 0 the Wilson lower limit is exactly 0 and at x = n the upper
//! limit is exactly 1 (the formula gives these up to rounding; we return them exactly).

use crate::{ConfidenceLevel, Interval, StatsError};
use serde::Serialize;
use statrs::distribution::{Beta, Continuous, ContinuousCDF};

/// Which interval to put around x/n.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ProportionMethod {
    Wilson,
    ClopperPearson,
}

/// x/n with its interval.
#[derive(Debug, Clone, Serialize)]
pub struct Proportion {
    pub events: u64,
    pub total: u64,
    pub estimate: f64,
    pub interval: Interval,
    pub method: ProportionMethod,
}

/// The proportion `events / total` with the chosen interval.
pub fn proportion(
    events: u64,
    total: u64,
    method: ProportionMethod,
    level: ConfidenceLevel,
) -> Result<Proportion, StatsError> {
    let interval = match method {
        ProportionMethod::Wilson => wilson_interval(events, total, level)?,
        ProportionMethod::ClopperPearson => clopper_pearson_interval(events, total, level)?,
    };
    Ok(Proportion {
        events,
        total,
        estimate: events as f64 / total as f64,
        interval,
        method,
    })
}

/// Wilson score interval for `events / total`.
pub fn wilson_interval(
    events: u64,
    total: u64,
    level: ConfidenceLevel,
) -> Result<Interval, StatsError> {
    check_counts(events, total)?;
    let x = events as f64;
    let n = total as f64;
    let z = level.z();
    let z2 = z * z;
    let centre = x + z2 / 2.0;
    let half = z * (x * (n - x) / n + z2 / 4.0).sqrt();
    let lower = if events == 0 {
        0.0
    } else {
        ((centre - half) / (n + z2)).max(0.0)
    };
    let upper = if events == total {
        1.0
    } else {
        ((centre + half) / (n + z2)).min(1.0)
    };
    Ok(Interval::new(lower, upper, level))
}

/// Clopper–Pearson exact (central) interval for `events / total`.
pub fn clopper_pearson_interval(
    events: u64,
    total: u64,
    level: ConfidenceLevel,
) -> Result<Interval, StatsError> {
    check_counts(events, total)?;
    let tail = level.alpha_half();
    let x = events as f64;
    let n = total as f64;
    let lower = if events == 0 {
        0.0
    } else {
        beta_quantile(tail, x, n - x + 1.0)
    };
    let upper = if events == total {
        1.0
    } else {
        beta_quantile(1.0 - tail, x + 1.0, n - x)
    };
    Ok(Interval::new(lower, upper, level))
}

/// Quantile of Beta(a, b) at probability p; a, b > 0 and 0 < p < 1 are guaranteed by callers.
pub(crate) fn beta_quantile(p: f64, a: f64, b: f64) -> f64 {
    // Shapes are positive by construction, so `new` cannot fail here.
    let beta = Beta::new(a, b).expect("beta shapes are positive");
    let mut x = beta.inverse_cdf(p);
    // statrs' AS 64 inverse is good to about 1e-8 relative for small a and large b (e.g. 7/12345);
    // a few Newton steps on the regularised incomplete beta bring it to rounding level. A step is
    // kept only if it stays inside (0, 1) and reduces the error.
    for _ in 0..4 {
        let error = beta.cdf(x) - p;
        let density = beta.pdf(x);
        if error == 0.0 || !(density.is_finite() && density > 0.0) {
            break;
        }
        let next = x - error / density;
        if !(next > 0.0 && next < 1.0) || (beta.cdf(next) - p).abs() >= error.abs() {
            break;
        }
        x = next;
    }
    x
}

fn check_counts(events: u64, total: u64) -> Result<(), StatsError> {
    if total == 0 {
        return Err(StatsError::invalid(
            "total (denominator)",
            "at least 1",
            "0; a proportion needs at least one person in the denominator",
        ));
    }
    if events > total {
        return Err(StatsError::invalid(
            "events (numerator)",
            format!("at most the total {total}"),
            events,
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const CI95: ConfidenceLevel = ConfidenceLevel::NINETY_FIVE;

    fn check(x: u64, n: u64, method: ProportionMethod, expected: (f64, f64), tolerance: f64) {
        let p = proportion(x, n, method, CI95).unwrap();
        assert!(
            (p.interval.lower - expected.0).abs() <= tolerance
                && (p.interval.upper - expected.1).abs() <= tolerance,
            "{x}/{n} {method:?}: got {:.6}-{:.6}, expected {:.4}-{:.4}",
            p.interval.lower,
            p.interval.upper,
            expected.0,
            expected.1
        );
    }

    #[test]
    fn wilson_reproduces_newcombe_1998_table_ii() {
        // Newcombe, Stat Med 1998;17:857, Table II, method 3 (Wilson score without continuity
        // correction), as listed in DOMAIN.md §5.1 [S: recomputed with scipy; published 4 dp from
        // memory]. Tolerance 0.5e-4 = the 4-dp rounding of the table.
        use ProportionMethod::Wilson;
        check(81, 263, Wilson, (0.2553, 0.3662), 0.5e-4);
        check(15, 148, Wilson, (0.0624, 0.1605), 0.5e-4);
        check(0, 20, Wilson, (0.0, 0.1611), 0.5e-4);
        check(1, 29, Wilson, (0.0061, 0.1718), 0.5e-4);
        check(29, 29, Wilson, (0.8830, 1.0), 0.5e-4);
        check(5, 25, Wilson, (0.0886, 0.3913), 0.5e-4);
    }

    #[test]
    fn clopper_pearson_reproduces_newcombe_1998_table_ii_and_conover() {
        // Newcombe, Stat Med 1998;17:857, Table II, method 5 (exact), via DOMAIN.md §5.1 [S; published
        // values as remembered M]. Tolerance 0.5e-4 (4-dp table).
        use ProportionMethod::ClopperPearson;
        check(81, 263, ClopperPearson, (0.2527, 0.3676), 0.5e-4);
        check(15, 148, ClopperPearson, (0.0578, 0.1617), 0.5e-4);
        check(0, 20, ClopperPearson, (0.0, 0.1684), 0.5e-4);
        check(1, 29, ClopperPearson, (0.0009, 0.1776), 0.5e-4);
        check(29, 29, ClopperPearson, (0.8806, 1.0), 0.5e-4);
        // Conover, Practical Nonparametric Statistics 3rd ed. 1999, binomial confidence tables, 5/25:
        // 0.068-0.407 [C: via influentialpoints.com, DOMAIN.md §5.1]. Tolerance 0.5e-3 (3-dp table).
        check(5, 25, ClopperPearson, (0.068, 0.407), 0.5e-3);
    }

    #[test]
    fn bounds_are_exact_at_zero_and_all() {
        for method in [ProportionMethod::Wilson, ProportionMethod::ClopperPearson] {
            let none = proportion(0, 17, method, CI95).unwrap();
            assert_eq!(none.interval.lower, 0.0);
            let all = proportion(17, 17, method, CI95).unwrap();
            assert_eq!(all.interval.upper, 1.0);
        }
    }

    #[test]
    fn bad_counts_are_errors() {
        assert!(matches!(
            wilson_interval(1, 0, CI95),
            Err(StatsError::InvalidInput { .. })
        ));
        assert!(matches!(
            clopper_pearson_interval(5, 4, CI95),
            Err(StatsError::InvalidInput { .. })
        ));
    }

    #[test]
    fn wider_level_gives_wider_interval() {
        let level99 = ConfidenceLevel::new(0.99).unwrap();
        for method in [ProportionMethod::Wilson, ProportionMethod::ClopperPearson] {
            let a = proportion(7, 40, method, CI95).unwrap().interval;
            let b = proportion(7, 40, method, level99).unwrap().interval;
            assert!(b.lower < a.lower && b.upper > a.upper, "{method:?}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn intervals_contain_the_estimate_and_stay_in_0_1(total in 1u64..500, share in 0.0f64..=1.0, level in 0.5f64..0.999) {
            let events = ((total as f64) * share).round() as u64;
            let level = ConfidenceLevel::new(level).unwrap();
            for method in [ProportionMethod::Wilson, ProportionMethod::ClopperPearson] {
                let p = proportion(events, total, method, level).unwrap();
                prop_assert!(p.interval.contains(p.estimate), "{:?} {}/{}: {:?}", method, events, total, p.interval);
                prop_assert!(p.interval.lower >= 0.0 && p.interval.upper <= 1.0);
            }
        }
    }
}
