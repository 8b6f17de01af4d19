//! Direct standardisation of rates (e.g. by age band) to a standard population.
//!
//! With dᵢ events over person-time nᵢ in stratum i and standard weights wᵢ normalised to Σw = 1:
//! DSR = Σ wᵢ dᵢ/nᵢ and Var = Σ wᵢ² dᵢ/nᵢ² (DOMAIN.md §5.13).
//!
//! - **Fay & Feuer gamma interval** (Stat Med 1997;16:791), the default:
//!   L = Gamma⁻¹(α/2; shape DSR²/Var, scale Var/DSR),
//!   U = Gamma⁻¹(1−α/2; shape (DSR+w_M)²/(Var+w_M²), scale (Var+w_M²)/(DSR+w_M)),
//!   w_M = maxᵢ wᵢ/nᵢ. This is the formula of R `epitools::ageadjust.direct` (written by Fay). With
//!   no events DSR = Var = 0: L = 0 and U = Gamma⁻¹(1−α/2; 1, w_M) = −w_M·ln(α/2), the limit of
//!   the formula. When the standard is proportional to the study population the interval equals
//!   the Garwood interval of the crude rate (the property stated in Fay & Feuer's abstract; tested).
//! - **Dobson et al.** (Stat Med 1991;10:457): with O = Σdᵢ and its Garwood limits (O_L, O_U),
//!   DSR_{L,U} = DSR + √(Var/O)·(O_{L,U} − O). Needs O > 0, otherwise
//!   [`StatsError::NotEstimable`].
//!
//! Rates are reported per `multiplier` units of person-time (e.g. 100 000 person-years).

use crate::poisson_rate::{check_multiplier, gamma_quantile, garwood_interval};
use crate::{ConfidenceLevel, Interval, StatsError};
use serde::Serialize;

/// European Standard Population 2013, 19 five-year bands 0–4 … 85–89, 90+ (Σ = 100 000) [M: from
/// memory, as listed in DOMAIN.md §5.13; Eurostat 2013 revision].
pub const EUROPEAN_STANDARD_POPULATION_2013: [f64; 19] = [
    5000.0, 5500.0, 5500.0, 5500.0, 6000.0, 6000.0, 6500.0, 7000.0, 7000.0, 7000.0, 7000.0, 6500.0,
    6000.0, 5500.0, 5000.0, 4000.0, 2500.0, 1500.0, 1000.0,
];

/// How the interval of the standardised rate is computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum StandardizationMethod {
    #[default]
    FayFeuer,
    Dobson,
}

/// A directly standardised rate.
#[derive(Debug, Clone, Serialize)]
pub struct StandardizedRate {
    pub events: u64,
    pub person_time: f64,
    pub multiplier: f64,
    /// Σd / Σn × multiplier.
    pub crude_rate: f64,
    /// DSR × multiplier.
    pub rate: f64,
    /// √Var × multiplier.
    pub standard_error: f64,
    pub interval: Interval,
    pub method: StandardizationMethod,
}

/// Directly standardised rate of `events[i]` over `person_time[i]` with standard weights
/// `standard_population[i]` (any scale; normalised here).
pub fn direct_standardized_rate(
    events: &[u64],
    person_time: &[f64],
    standard_population: &[f64],
    method: StandardizationMethod,
    multiplier: f64,
    level: ConfidenceLevel,
) -> Result<StandardizedRate, StatsError> {
    check_multiplier(multiplier)?;
    let k = events.len();
    if k == 0 || person_time.len() != k || standard_population.len() != k {
        return Err(StatsError::invalid(
            "strata",
            "at least one stratum, with as many person-times and standard weights as event counts",
            format!(
                "{k} event counts, {} person-times, {} weights",
                person_time.len(),
                standard_population.len()
            ),
        ));
    }
    for (i, &n) in person_time.iter().enumerate() {
        if !(n.is_finite() && n > 0.0) {
            return Err(StatsError::invalid(
                format!("person-time of stratum {i}"),
                "a finite number greater than 0 (merge strata with no time at risk)",
                n,
            ));
        }
    }
    if let Some(i) = standard_population
        .iter()
        .position(|w| !(w.is_finite() && *w >= 0.0))
    {
        return Err(StatsError::invalid(
            format!("standard population of stratum {i}"),
            "a finite number, 0 or more",
            standard_population[i],
        ));
    }
    let weight_total: f64 = standard_population.iter().sum();
    if weight_total <= 0.0 {
        return Err(StatsError::invalid(
            "standard population",
            "a total greater than 0",
            weight_total,
        ));
    }
    let weights: Vec<f64> = standard_population
        .iter()
        .map(|w| w / weight_total)
        .collect();
    let (mut dsr, mut variance, mut max_weight) = (0.0, 0.0, 0.0f64);
    for i in 0..k {
        let (d, n, w) = (events[i] as f64, person_time[i], weights[i]);
        dsr += w * d / n;
        variance += w * w * d / (n * n);
        max_weight = max_weight.max(w / n);
    }
    let observed: u64 = events.iter().sum();
    let tail = level.alpha_half();
    let (lower, upper) = match method {
        StandardizationMethod::FayFeuer => {
            let lower = if dsr > 0.0 {
                gamma_quantile(tail, dsr * dsr / variance) * (variance / dsr)
            } else {
                0.0
            };
            let shifted = dsr + max_weight;
            let shifted_variance = variance + max_weight * max_weight;
            let upper = gamma_quantile(1.0 - tail, shifted * shifted / shifted_variance)
                * (shifted_variance / shifted);
            (lower, upper)
        }
        StandardizationMethod::Dobson => {
            if observed == 0 {
                return Err(StatsError::NotEstimable(
                    "the Dobson interval needs at least one event\nhint: use the Fay–Feuer interval".to_string(),
                ));
            }
            let o = observed as f64;
            let count = garwood_interval(observed, level);
            let scale = (variance / o).sqrt();
            (
                dsr + scale * (count.lower - o),
                dsr + scale * (count.upper - o),
            )
        }
    };
    let person_time_total: f64 = person_time.iter().sum();
    Ok(StandardizedRate {
        events: observed,
        person_time: person_time_total,
        multiplier,
        crude_rate: observed as f64 / person_time_total * multiplier,
        rate: dsr * multiplier,
        standard_error: variance.sqrt() * multiplier,
        interval: Interval::new(lower * multiplier, upper * multiplier, level),
        method,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::poisson_rate::poisson_rate;
    use proptest::prelude::*;

    const CI95: ConfidenceLevel = ConfidenceLevel::NINETY_FIVE;

    #[test]
    fn european_standard_population_sums_to_100000() {
        assert_eq!(
            EUROPEAN_STANDARD_POPULATION_2013.iter().sum::<f64>(),
            100_000.0
        );
    }

    #[test]
    fn by_hand_two_strata() {
        // d = (10, 20), n = (1000, 4000), w = (0.5, 0.5): DSR = 0.5·0.01 + 0.5·0.005 = 0.0075,
        // Var = 0.25·10/1e6 + 0.25·20/1.6e7 = 2.8125e-6 (arithmetic).
        let r = direct_standardized_rate(
            &[10, 20],
            &[1000.0, 4000.0],
            &[1.0, 1.0],
            StandardizationMethod::FayFeuer,
            1.0,
            CI95,
        )
        .unwrap();
        assert!((r.rate - 0.0075).abs() < 1e-15);
        assert!((r.standard_error - 2.8125e-6f64.sqrt()).abs() < 1e-15);
        assert!((r.crude_rate - 30.0 / 5000.0).abs() < 1e-15);
    }

    #[test]
    fn frome_ornl_worked_example() {
        // E. L. Frome, Oak Ridge National Laboratory, "directly adjusted rates" worked example
        // (csm.ornl.gov/~frome/ES/ex-direct.html): US 1970 standard weights for ages 20-64 in
        // 10-year bands; the page lists events y, person-time n (4 dp) and rates r = y/n. We take
        // n = y/r from its Example 1 (r has 6 significant digits). Published: Example 1 (22 events)
        // R = 19.3490, seR = 6.2478; Example 2 (12 events) R = 7.4032, seR = 2.1692. (Its intervals
        // are normal and log-normal ones, which this module does not compute.) Tolerance 5e-4: the
        // published 4 decimals plus the rounding of r.
        let weights = [
            0.281_117_88,
            0.212_262_84,
            0.226_952_15,
            0.198_511_36,
            0.081_155_78,
        ];
        let rates = [36.1228, 17.2003, 15.6352, 5.7322, 10.5584];
        let first = [3u64, 9, 7, 2, 1];
        let time: Vec<f64> = first
            .iter()
            .zip(rates)
            .map(|(&y, r)| y as f64 / r)
            .collect();
        for (events, rate, error) in [(first, 19.3490, 6.2478), ([0, 0, 0, 10, 2], 7.4032, 2.1692)]
        {
            let r = direct_standardized_rate(
                &events,
                &time,
                &weights,
                StandardizationMethod::FayFeuer,
                1.0,
                CI95,
            )
            .unwrap();
            assert!((r.rate - rate).abs() < 5e-4, "{} vs {rate}", r.rate);
            assert!(
                (r.standard_error - error).abs() < 5e-4,
                "{} vs {error}",
                r.standard_error
            );
        }
    }

    #[test]
    fn no_events() {
        let fay = direct_standardized_rate(
            &[0, 0],
            &[100.0, 50.0],
            &[1.0, 3.0],
            StandardizationMethod::FayFeuer,
            1.0,
            CI95,
        )
        .unwrap();
        assert_eq!(fay.rate, 0.0);
        assert_eq!(fay.interval.lower, 0.0);
        // w_M = max(0.25/100, 0.75/50) = 0.015; U = −0.015·ln(0.025) (closed form).
        assert!(
            (fay.interval.upper - (-0.015 * 0.025f64.ln())).abs() < 1e-12,
            "{:?}",
            fay.interval
        );
        assert!(matches!(
            direct_standardized_rate(
                &[0, 0],
                &[100.0, 50.0],
                &[1.0, 3.0],
                StandardizationMethod::Dobson,
                1.0,
                CI95
            ),
            Err(StatsError::NotEstimable(_))
        ));
    }

    #[test]
    fn bad_input_is_an_error() {
        let m = StandardizationMethod::FayFeuer;
        assert!(direct_standardized_rate(&[1], &[0.0], &[1.0], m, 1.0, CI95).is_err());
        assert!(direct_standardized_rate(&[1, 2], &[1.0], &[1.0, 1.0], m, 1.0, CI95).is_err());
        assert!(direct_standardized_rate(&[1], &[1.0], &[0.0], m, 1.0, CI95).is_err());
        assert!(direct_standardized_rate(&[1], &[1.0], &[-1.0], m, 1.0, CI95).is_err());
        assert!(direct_standardized_rate(&[], &[], &[], m, 1.0, CI95).is_err());
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn proportional_standard_gives_the_garwood_interval(
            strata in proptest::collection::vec((0u64..60, 10.0f64..5000.0), 1..8),
            level in 0.8f64..0.999,
        ) {
            // Fay & Feuer 1997 (abstract): both their method and Dobson's are exact when the
            // standard population is proportional to the study population; then the DSR is the
            // crude rate and its interval the Garwood interval.
            let level = ConfidenceLevel::new(level).unwrap();
            let events: Vec<u64> = strata.iter().map(|s| s.0).collect();
            let time: Vec<f64> = strata.iter().map(|s| s.1).collect();
            let crude = poisson_rate(events.iter().sum(), time.iter().sum(), 1000.0, level).unwrap();
            let methods: &[StandardizationMethod] = if crude.events > 0 {
                &[StandardizationMethod::FayFeuer, StandardizationMethod::Dobson]
            } else {
                &[StandardizationMethod::FayFeuer]
            };
            for &method in methods {
                let r = direct_standardized_rate(&events, &time, &time, method, 1000.0, level).unwrap();
                let close = |a: f64, b: f64| (a - b).abs() <= 1e-9 * b.abs().max(1e-12);
                prop_assert!(close(r.rate, crude.rate));
                prop_assert!(close(r.interval.lower, crude.interval.lower), "{:?}: {:?} vs {:?}", method, r.interval, crude.interval);
                prop_assert!(close(r.interval.upper, crude.interval.upper), "{:?}: {:?} vs {:?}", method, r.interval, crude.interval);
            }
        }

        #[test]
        fn interval_contains_the_rate(strata in proptest::collection::vec((0u64..60, 10.0f64..5000.0, 0.1f64..10.0), 1..8)) {
            let events: Vec<u64> = strata.iter().map(|s| s.0).collect();
            let time: Vec<f64> = strata.iter().map(|s| s.1).collect();
            let weights: Vec<f64> = strata.iter().map(|s| s.2).collect();
            let r = direct_standardized_rate(&events, &time, &weights, StandardizationMethod::FayFeuer, 1000.0, CI95).unwrap();
            prop_assert!(r.interval.contains(r.rate), "{:?}", r);
        }
    }
}
