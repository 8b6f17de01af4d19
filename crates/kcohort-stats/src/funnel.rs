//! Funnel-plot control limits for comparing units (wards, hospitals) against a target
//! (Spiegelhalter, Stat Med 2005;24:1185 [M: formulas as in DOMAIN.md §5.12]).
//!
//! # Exact limits
//! - **Proportion** x/n against a target p₀: for a tail probability P (0.975 for the upper 95%
//!   limit, 0.025 for the lower), r_P = the smallest r with F_Bin(r; n, p₀) ≥ P,
//!   α = (F(r_P) − P)/(F(r_P) − F(r_P − 1)) and the limit is (r_P − α)/n, floored at 0. The
//!   interpolation makes the discrete limits a smooth funnel.
//! - **Ratio** O/E (e.g. observed over expected deaths, target 1): the same with Poisson(E), limit
//!   (r_P − α)/E.
//! - **Rate** O/T against a target rate λ₀: Poisson(E = λ₀T), limit (r_P − α)/T.
//!
//! # Over-dispersion (Spiegelhalter, Qual Saf Health Care 2005;14:347 [M])
//! Every unit gets zᵢ = (yᵢ − θ₀)/sᵢ with sᵢ = √(p₀(1−p₀)/nᵢ), 1/√Eᵢ or √(λ₀/Tᵢ). The z-scores are
//! winsorised at their 10th and 90th percentiles (linear interpolation between order statistics,
//! R's type 7 / numpy's default), and φ̂ = (1/I) Σ z_w². The data count as over-dispersed when
//! φ̂ > 1 + 2√(2/I) (DOMAIN.md §5.12). φ̂, the threshold and the verdict are always reported;
//! when over-dispersed and asked for, limits use the normal approximation with
//! - **multiplicative** φ: θ₀ ± z·√φ̂·sᵢ, or
//! - **additive** τ²: θ₀ ± z·√(sᵢ² + τ̂²), τ̂² = (Iφ̂ − (I − 1)) / (Σwᵢ − Σwᵢ²/Σwᵢ), wᵢ = 1/sᵢ²
//!   (DerSimonian–Laird form), truncated at 0.
//!
//! When no adjustment is applied the exact limits are used. Limits are floored at 0 (and capped
//! at 1 for proportions).
//!
//! # Classification
//! A unit strictly beyond the outer (99.8% by default) limits is above/below the outer limit,
//! else strictly beyond the inner (95%) limits is above/below the inner limit, else within.

use crate::{ConfidenceLevel, Interval, StatsError};
use serde::Serialize;
use statrs::distribution::{Binomial, DiscreteCDF, Poisson};

/// What is compared.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FunnelMeasure {
    Proportion,
    Ratio,
    Rate,
}

/// Over-dispersion adjustment to apply when the data are over-dispersed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Dispersion {
    #[default]
    None,
    Multiplicative,
    Additive,
}

/// Levels and adjustment.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FunnelOptions {
    pub inner: ConfidenceLevel,
    pub outer: ConfidenceLevel,
    pub dispersion: Dispersion,
}

impl Default for FunnelOptions {
    fn default() -> Self {
        FunnelOptions {
            inner: ConfidenceLevel::NINETY_FIVE,
            outer: ConfidenceLevel::new(0.998).expect("0.998 is a valid level"),
            dispersion: Dispersion::None,
        }
    }
}

/// Where a unit falls.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FunnelClass {
    Within,
    AboveInner,
    BelowInner,
    AboveOuter,
    BelowOuter,
}

/// One unit on the funnel.
#[derive(Debug, Clone, Serialize)]
pub struct FunnelUnit {
    pub index: usize,
    pub numerator: u64,
    /// n (proportion), E (ratio) or T (rate).
    pub denominator: f64,
    pub value: f64,
    /// (value − target) / s, before any over-dispersion adjustment.
    pub z: f64,
    /// z after the applied adjustment (equal to `z` when none was applied).
    pub z_adjusted: f64,
    pub inner: Interval,
    pub outer: Interval,
    pub class: FunnelClass,
}

/// All units with the funnel's parameters.
#[derive(Debug, Clone, Serialize)]
pub struct Funnel {
    pub measure: FunnelMeasure,
    pub target: f64,
    pub dispersion_requested: Dispersion,
    /// Winsorised dispersion estimate φ̂.
    pub phi: f64,
    /// 1 + 2√(2/I).
    pub phi_threshold: f64,
    pub overdispersed: bool,
    /// τ̂² when the additive adjustment was applied.
    pub tau_squared: Option<f64>,
    pub adjustment_applied: bool,
    pub units: Vec<FunnelUnit>,
}

/// Exact binomial funnel limit for a target proportion, `total` trials and tail probability
/// `probability` (e.g. 0.975 for the upper 95% limit), as a proportion. For drawing the funnel
/// curve over a grid of denominators.
pub fn binomial_limit(target: f64, total: u64, probability: f64) -> Result<f64, StatsError> {
    if !(target.is_finite() && target > 0.0 && target < 1.0) {
        return Err(StatsError::invalid(
            "target proportion",
            "strictly between 0 and 1",
            target,
        ));
    }
    if total == 0 {
        return Err(StatsError::invalid("denominator", "at least 1", total));
    }
    check_probability(probability)?;
    Ok(binomial_limit_unchecked(target, total, probability))
}

/// Exact Poisson funnel limit for an expected count and tail probability, as a count (divide by
/// E for a ratio, by T for a rate).
pub fn poisson_limit(expected: f64, probability: f64) -> Result<f64, StatsError> {
    if !(expected.is_finite() && expected > 0.0) {
        return Err(StatsError::invalid(
            "expected count",
            "a finite number greater than 0",
            expected,
        ));
    }
    check_probability(probability)?;
    Ok(poisson_limit_unchecked(expected, probability))
}

fn check_probability(probability: f64) -> Result<(), StatsError> {
    if probability.is_finite() && probability > 0.0 && probability < 1.0 {
        Ok(())
    } else {
        Err(StatsError::invalid(
            "tail probability",
            "strictly between 0 and 1, e.g. 0.975 for an upper 95% limit",
            probability,
        ))
    }
}

fn binomial_limit_unchecked(target: f64, total: u64, probability: f64) -> f64 {
    let distribution = Binomial::new(target, total).expect("target checked to lie in (0, 1)");
    let cdf = |r: u64| distribution.cdf(r);
    let (r, alpha) = interpolate(cdf, probability, total);
    ((r as f64 - alpha) / total as f64).clamp(0.0, 1.0)
}

fn poisson_limit_unchecked(expected: f64, probability: f64) -> f64 {
    let distribution = Poisson::new(expected).expect("expected count checked to be > 0");
    let mut high = (expected + 10.0 * expected.sqrt() + 10.0).ceil() as u64;
    while distribution.cdf(high) < probability {
        high *= 2;
    }
    let (r, alpha) = interpolate(|r| distribution.cdf(r), probability, high);
    (r as f64 - alpha).max(0.0)
}

/// r = smallest integer in 0..=high with cdf(r) ≥ P, and α = (F(r) − P)/(F(r) − F(r − 1)).
fn interpolate(cdf: impl Fn(u64) -> f64, probability: f64, high: u64) -> (u64, f64) {
    let (mut low, mut high) = (0u64, high);
    while low < high {
        let middle = low + (high - low) / 2;
        if cdf(middle) >= probability {
            high = middle;
        } else {
            low = middle + 1;
        }
    }
    let r = low;
    let at = cdf(r);
    let before = if r == 0 { 0.0 } else { cdf(r - 1) };
    let alpha = if at > before {
        (at - probability) / (at - before)
    } else {
        0.0
    };
    (r, alpha)
}

/// Funnel of proportions `events[i] / totals[i]` against `target` (pooled Σx/Σn when `None`).
pub fn proportion_funnel(
    events: &[u64],
    totals: &[u64],
    target: Option<f64>,
    options: &FunnelOptions,
) -> Result<Funnel, StatsError> {
    check_lengths(events.len(), totals.len())?;
    for (i, (&x, &n)) in events.iter().zip(totals).enumerate() {
        if n == 0 {
            return Err(StatsError::invalid(
                format!("denominator of unit {i}"),
                "at least 1",
                n,
            ));
        }
        if x > n {
            return Err(StatsError::invalid(
                format!("numerator of unit {i}"),
                format!("at most {n}"),
                x,
            ));
        }
    }
    let target = match target {
        Some(p) if p.is_finite() && p > 0.0 && p < 1.0 => p,
        Some(p) => {
            return Err(StatsError::invalid(
                "target proportion",
                "strictly between 0 and 1",
                p,
            ));
        }
        None => {
            let pooled = events.iter().sum::<u64>() as f64 / totals.iter().sum::<u64>() as f64;
            if pooled == 0.0 || pooled == 1.0 {
                return Err(StatsError::NotEstimable(format!(
                    "the pooled proportion is {pooled}; funnel limits need a target strictly between 0 and 1"
                )));
            }
            pooled
        }
    };
    let denominators: Vec<f64> = totals.iter().map(|&n| n as f64).collect();
    let exact = |i: usize, level: ConfidenceLevel| {
        let tail = level.alpha_half();
        Interval::new(
            binomial_limit_unchecked(target, totals[i], tail),
            binomial_limit_unchecked(target, totals[i], 1.0 - tail),
            level,
        )
    };
    build(
        FunnelMeasure::Proportion,
        events,
        &denominators,
        target,
        |n| (target * (1.0 - target) / n).sqrt(),
        exact,
        options,
    )
}

/// Funnel of ratios `observed[i] / expected[i]` against 1 (e.g. standardised mortality ratios).
pub fn ratio_funnel(
    observed: &[u64],
    expected: &[f64],
    options: &FunnelOptions,
) -> Result<Funnel, StatsError> {
    check_lengths(observed.len(), expected.len())?;
    check_positive("expected count", expected)?;
    let exact = |i: usize, level: ConfidenceLevel| {
        let tail = level.alpha_half();
        let e = expected[i];
        Interval::new(
            poisson_limit_unchecked(e, tail) / e,
            poisson_limit_unchecked(e, 1.0 - tail) / e,
            level,
        )
    };
    build(
        FunnelMeasure::Ratio,
        observed,
        expected,
        1.0,
        |e| (1.0 / e).sqrt(),
        exact,
        options,
    )
}

/// Funnel of rates `events[i] / person_time[i]` against `target_rate` (pooled when `None`).
pub fn rate_funnel(
    events: &[u64],
    person_time: &[f64],
    target_rate: Option<f64>,
    options: &FunnelOptions,
) -> Result<Funnel, StatsError> {
    check_lengths(events.len(), person_time.len())?;
    check_positive("person-time", person_time)?;
    let target = match target_rate {
        Some(rate) if rate.is_finite() && rate > 0.0 => rate,
        Some(rate) => {
            return Err(StatsError::invalid(
                "target rate",
                "a finite rate greater than 0",
                rate,
            ));
        }
        None => {
            let pooled = events.iter().sum::<u64>() as f64 / person_time.iter().sum::<f64>();
            if pooled == 0.0 {
                return Err(StatsError::NotEstimable(
                    "no unit has any event; funnel limits need a target rate above 0".to_string(),
                ));
            }
            pooled
        }
    };
    let exact = |i: usize, level: ConfidenceLevel| {
        let tail = level.alpha_half();
        let t = person_time[i];
        let e = target * t;
        Interval::new(
            poisson_limit_unchecked(e, tail) / t,
            poisson_limit_unchecked(e, 1.0 - tail) / t,
            level,
        )
    };
    build(
        FunnelMeasure::Rate,
        events,
        person_time,
        target,
        |t| (target / t).sqrt(),
        exact,
        options,
    )
}

fn build(
    measure: FunnelMeasure,
    numerators: &[u64],
    denominators: &[f64],
    target: f64,
    standard_error: impl Fn(f64) -> f64,
    exact: impl Fn(usize, ConfidenceLevel) -> Interval,
    options: &FunnelOptions,
) -> Result<Funnel, StatsError> {
    let count = numerators.len();
    let values: Vec<f64> = numerators
        .iter()
        .zip(denominators)
        .map(|(&x, &d)| x as f64 / d)
        .collect();
    let errors: Vec<f64> = denominators.iter().map(|&d| standard_error(d)).collect();
    let z: Vec<f64> = values
        .iter()
        .zip(&errors)
        .map(|(y, s)| (y - target) / s)
        .collect();
    let phi = winsorised_phi(&z);
    let phi_threshold = 1.0 + 2.0 * (2.0 / count as f64).sqrt();
    let overdispersed = phi > phi_threshold;
    let tau_squared = if overdispersed && options.dispersion == Dispersion::Additive {
        let weights: Vec<f64> = errors.iter().map(|s| 1.0 / (s * s)).collect();
        let sum: f64 = weights.iter().sum();
        let sum_squares: f64 = weights.iter().map(|w| w * w).sum();
        let i = count as f64;
        Some(((i * phi - (i - 1.0)) / (sum - sum_squares / sum)).max(0.0))
    } else {
        None
    };
    let adjustment_applied = overdispersed && options.dispersion != Dispersion::None;
    // The standard error actually used for unit i once an adjustment is applied.
    let adjusted_error = |s: f64| match (options.dispersion, tau_squared) {
        (Dispersion::Multiplicative, _) => s * phi.sqrt(),
        (Dispersion::Additive, Some(tau2)) => (s * s + tau2).sqrt(),
        _ => s,
    };
    let cap = if measure == FunnelMeasure::Proportion {
        1.0
    } else {
        f64::INFINITY
    };
    let limits = |i: usize, level: ConfidenceLevel| {
        if adjustment_applied {
            let half = level.z() * adjusted_error(errors[i]);
            Interval::new((target - half).max(0.0), (target + half).min(cap), level)
        } else {
            exact(i, level)
        }
    };
    let units = (0..count)
        .map(|i| {
            let inner = limits(i, options.inner);
            let outer = limits(i, options.outer);
            let value = values[i];
            let class = if value > outer.upper {
                FunnelClass::AboveOuter
            } else if value < outer.lower {
                FunnelClass::BelowOuter
            } else if value > inner.upper {
                FunnelClass::AboveInner
            } else if value < inner.lower {
                FunnelClass::BelowInner
            } else {
                FunnelClass::Within
            };
            let z_adjusted = if adjustment_applied {
                (value - target) / adjusted_error(errors[i])
            } else {
                z[i]
            };
            FunnelUnit {
                index: i,
                numerator: numerators[i],
                denominator: denominators[i],
                value,
                z: z[i],
                z_adjusted,
                inner,
                outer,
                class,
            }
        })
        .collect();
    Ok(Funnel {
        measure,
        target,
        dispersion_requested: options.dispersion,
        phi,
        phi_threshold,
        overdispersed,
        tau_squared,
        adjustment_applied,
        units,
    })
}

/// φ̂ = mean of squared z-scores winsorised at their 10th and 90th percentiles (type 7); `z` is
/// never empty (checked by the callers).
fn winsorised_phi(z: &[f64]) -> f64 {
    let mut sorted = z.to_vec();
    sorted.sort_by(f64::total_cmp);
    let low = quantile_type7(&sorted, 0.1);
    let high = quantile_type7(&sorted, 0.9);
    z.iter().map(|v| v.clamp(low, high).powi(2)).sum::<f64>() / z.len() as f64
}

fn quantile_type7(sorted: &[f64], p: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * p;
    let below = h.floor() as usize;
    let above = (below + 1).min(sorted.len() - 1);
    sorted[below] + (h - below as f64) * (sorted[above] - sorted[below])
}

fn check_lengths(numerators: usize, denominators: usize) -> Result<(), StatsError> {
    if numerators != denominators {
        return Err(StatsError::invalid(
            "units",
            format!("as many denominators as numerators ({numerators})"),
            denominators,
        ));
    }
    if numerators == 0 {
        return Err(StatsError::invalid("units", "at least one unit", 0));
    }
    Ok(())
}

fn check_positive(what: &str, values: &[f64]) -> Result<(), StatsError> {
    match values.iter().position(|v| !(v.is_finite() && *v > 0.0)) {
        Some(i) => Err(StatsError::invalid(
            format!("{what} of unit {i}"),
            "a finite number greater than 0",
            values[i],
        )),
        None => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn binomial_interpolation_by_hand() {
        // n = 1, p₀ = 0.5: F(0) = 0.5, F(1) = 1. Upper P = 0.975: r = 1, α = 0.025/0.5 = 0.05 →
        // 0.95. Lower P = 0.025: r = 0, α = 0.475/0.5 = 0.95 → −0.95, floored to 0 (arithmetic).
        assert!((binomial_limit(0.5, 1, 0.975).unwrap() - 0.95).abs() < 1e-12);
        assert_eq!(binomial_limit(0.5, 1, 0.025).unwrap(), 0.0);
    }

    #[test]
    fn poisson_interpolation_by_hand() {
        // E = 1: F(0) = e⁻¹ = 0.3679, F(1) = 2e⁻¹ = 0.7358, F(2) = 2.5e⁻¹ = 0.9197,
        // F(3) = 0.9810. Upper P = 0.975 → r = 3, α = (0.98101 − 0.975)/(0.98101 − 0.91970)
        // (arithmetic).
        let e = (-1.0f64).exp();
        let f2 = 2.5 * e;
        let f3 = f2 + e / 6.0;
        let expected = 3.0 - (f3 - 0.975) / (f3 - f2);
        assert!((poisson_limit(1.0, 0.975).unwrap() - expected).abs() < 1e-12);
    }

    #[test]
    fn exact_limits_approach_the_normal_ones_for_large_n() {
        // For n = 100 000 and p₀ = 0.1 the binomial is close to normal: p₀ ± 1.96·√(p₀q₀/n).
        let half = 1.959_964 * (0.09f64 / 100_000.0).sqrt();
        assert!((binomial_limit(0.1, 100_000, 0.975).unwrap() - (0.1 + half)).abs() < 2e-5);
        assert!((binomial_limit(0.1, 100_000, 0.025).unwrap() - (0.1 - half)).abs() < 2e-5);
    }

    #[test]
    fn classification_by_limits() {
        // Target 0.1; n = 1000 per unit. 100/1000 is on target, 125/1000 beyond 95% (z 2.6), 150
        // beyond 99.8% (z 5.3), 75 and 50 symmetric below.
        let funnel = proportion_funnel(
            &[100, 125, 150, 75, 50],
            &[1000; 5],
            Some(0.1),
            &FunnelOptions::default(),
        )
        .unwrap();
        let classes: Vec<FunnelClass> = funnel.units.iter().map(|u| u.class).collect();
        use FunnelClass::*;
        assert_eq!(
            classes,
            vec![Within, AboveInner, AboveOuter, BelowInner, BelowOuter]
        );
        assert!(!funnel.adjustment_applied);
    }

    #[test]
    fn winsorised_phi_by_hand() {
        // z = 1..=11 (11 values): 10th percentile 2, 90th 10 (type 7), so z is clamped to 2..10:
        // (4 + 4 + 9 + 16 + 25 + 36 + 49 + 64 + 81 + 100 + 100) / 11 (arithmetic).
        let z: Vec<f64> = (1..=11).map(f64::from).collect();
        let expected =
            (4.0 + 4.0 + 9.0 + 16.0 + 25.0 + 36.0 + 49.0 + 64.0 + 81.0 + 100.0 + 100.0) / 11.0;
        assert!((winsorised_phi(&z) - expected).abs() < 1e-12);
    }

    #[test]
    fn overdispersion_widens_limits_only_when_detected_and_asked() {
        // Twenty wards with rates scattered far more than Poisson allows.
        let events: Vec<u64> = (0..20).map(|i| 200 + (i * 37 % 11) * 25).collect();
        let time = vec![1000.0; 20];
        let plain = rate_funnel(&events, &time, None, &FunnelOptions::default()).unwrap();
        assert!(plain.overdispersed && !plain.adjustment_applied);
        for dispersion in [Dispersion::Multiplicative, Dispersion::Additive] {
            let options = FunnelOptions {
                dispersion,
                ..FunnelOptions::default()
            };
            let adjusted = rate_funnel(&events, &time, None, &options).unwrap();
            assert!(adjusted.adjustment_applied);
            assert_eq!(
                adjusted.tau_squared.is_some(),
                dispersion == Dispersion::Additive
            );
            assert!(
                adjusted.units[0].outer.upper - adjusted.target
                    > plain.units[0].outer.upper - plain.target
            );
            let beyond = |f: &Funnel| {
                f.units
                    .iter()
                    .filter(|u| u.class != FunnelClass::Within)
                    .count()
            };
            assert!(beyond(&adjusted) < beyond(&plain), "{dispersion:?}");
        }
        // Poisson-like data: no adjustment even when asked.
        let calm = rate_funnel(
            &[98, 103, 101, 97, 100, 102, 99, 100],
            &[1000.0; 8],
            None,
            &FunnelOptions {
                dispersion: Dispersion::Multiplicative,
                ..FunnelOptions::default()
            },
        )
        .unwrap();
        assert!(!calm.overdispersed && !calm.adjustment_applied);
    }

    #[test]
    fn ratio_funnel_targets_one() {
        let funnel = ratio_funnel(&[10, 30], &[10.0, 10.0], &FunnelOptions::default()).unwrap();
        assert_eq!(funnel.target, 1.0);
        assert_eq!(funnel.units[0].class, FunnelClass::Within);
        assert_eq!(funnel.units[1].class, FunnelClass::AboveOuter);
    }

    #[test]
    fn bad_input_is_an_error() {
        let options = FunnelOptions::default();
        assert!(proportion_funnel(&[1], &[0], None, &options).is_err());
        assert!(proportion_funnel(&[1], &[2], Some(1.0), &options).is_err());
        assert!(matches!(
            proportion_funnel(&[0, 0], &[5, 5], None, &options),
            Err(StatsError::NotEstimable(_))
        ));
        assert!(ratio_funnel(&[1], &[0.0], &options).is_err());
        assert!(rate_funnel(&[1, 2], &[1.0], None, &options).is_err());
        assert!(binomial_limit(1.2, 10, 0.975).is_err());
        assert!(binomial_limit(0.2, 0, 0.975).is_err());
        assert!(binomial_limit(0.2, 10, 1.0).is_err());
        assert!(poisson_limit(0.0, 0.975).is_err());
        assert!(poisson_limit(2.0, -0.1).is_err());
    }
}
