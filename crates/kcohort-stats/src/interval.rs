//! Confidence levels and intervals shared by every estimator.

use crate::StatsError;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal};

/// A two-sided confidence level strictly between 0 and 1 (e.g. 0.95).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ConfidenceLevel(f64);

impl ConfidenceLevel {
    pub const NINETY_FIVE: ConfidenceLevel = ConfidenceLevel(0.95);

    pub fn new(level: f64) -> Result<Self, StatsError> {
        if level.is_finite() && level > 0.0 && level < 1.0 {
            Ok(ConfidenceLevel(level))
        } else {
            Err(StatsError::invalid(
                "confidence level",
                "a number strictly between 0 and 1, e.g. 0.95",
                level,
            ))
        }
    }

    pub fn value(self) -> f64 {
        self.0
    }

    /// Tail probability on each side, (1 - level) / 2.
    pub fn alpha_half(self) -> f64 {
        (1.0 - self.0) / 2.0
    }

    /// Standard normal quantile z with P(|Z| <= z) = level (1.959964 for 95%).
    pub fn z(self) -> f64 {
        let normal = Normal::standard();
        normal.inverse_cdf(1.0 - self.alpha_half())
    }
}

impl Default for ConfidenceLevel {
    fn default() -> Self {
        ConfidenceLevel::NINETY_FIVE
    }
}

/// A closed interval [lower, upper] at a stated confidence level.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    pub lower: f64,
    pub upper: f64,
    pub level: f64,
}

impl Interval {
    pub fn new(lower: f64, upper: f64, level: ConfidenceLevel) -> Self {
        Interval {
            lower,
            upper,
            level: level.value(),
        }
    }

    pub fn contains(&self, x: f64) -> bool {
        self.lower <= x && x <= self.upper
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn z_for_95_and_998_matches_published_normal_quantiles() {
        // Standard normal table values (any statistics handbook): 1.959964 and 3.090232.
        assert!((ConfidenceLevel::NINETY_FIVE.z() - 1.959_964).abs() < 1e-6);
        assert!((ConfidenceLevel::new(0.998).unwrap().z() - 3.090_232).abs() < 1e-6);
    }

    #[test]
    fn level_outside_zero_one_is_an_error() {
        for bad in [0.0, 1.0, -0.5, 1.5, f64::NAN] {
            assert!(ConfidenceLevel::new(bad).is_err(), "{bad}");
        }
    }
}
