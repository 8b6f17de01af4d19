//! Shewhart control charts for monthly (or any periodic) quality indicators: the p-chart for
//! proportions, the u-chart for rates, Laney's p′ and u′ charts for large denominators, and run
//! rules that flag special-cause variation.
//!
//! # Limits
//! - **p-chart**: p̄ = Σx/Σn (over all periods, over a baseline, or given); for period i with
//!   denominator nᵢ, σᵢ = √(p̄(1−p̄)/nᵢ) and the limits are p̄ ± k·σᵢ.
//! - **u-chart**: ū = Σc/Σn with n the exposure (e.g. thousands of patient-days);
//!   σᵢ = √(ū/nᵢ), limits ū ± k·σᵢ.
//! - k = 3 by default (Shewhart 3σ limits). The limits vary with each period's denominator; the
//!   lower limit is floored at 0 and a p-chart's upper limit capped at 1 (Montgomery,
//!   Introduction to Statistical Quality Control, ch. 7 of the 6th ed. [M: chapter number from
//!   memory]).
//! - **Laney p′/u′** (Laney, Quality Engineering 2002;14:531): zᵢ = (yᵢ − centre)/σᵢ,
//!   σ_z = mean|zᵢ − zᵢ₋₁| / 1.128 (1.128 = d₂ for moving ranges of two), limits
//!   centre ± k·σᵢ·σ_z. σ_z is computed over the same periods as the centre line (all periods, or
//!   the baseline; with a given centre, all periods) and is used as it is, also when below 1.
//!
//! # Run rules
//! The rule set is that of Provost & Murray, *The Health Care Data Guide: Learning from Data for
//! Improvement* (Jossey-Bass 2011), ch. 3 and 5, rules 1–4 [M: from memory], which are also
//! Western Electric-style rules (Western Electric, Statistical Quality Control Handbook, 1956):
//! 1. **Beyond limits**: a point strictly above the upper or strictly below the lower limit.
//! 2. **Shift**: 8 or more consecutive points on the same side of the centre line. A point exactly
//!    on the centre line neither breaks nor extends the run.
//! 3. **Trend**: 6 or more consecutive points each strictly higher (or each strictly lower) than
//!    the one before. An equal value ends the trend (our choice, the conservative reading).
//! 4. **Two of three beyond 2σ**: 2 out of 3 consecutive points more than 2σ from the centre line
//!    on the same side (σ is the point's own σᵢ, times σ_z for Laney charts); the points beyond
//!    2σ are flagged.
//!
//! Every flagged period gets a [`Signal`] with the rule and a plain-words explanation such as
//! "8 months in a row above the centre line (shift)"; all points of a qualifying run are flagged.

use crate::StatsError;
use serde::Serialize;

/// Points in a row on one side of the centre line that make a shift (rule 2).
pub const SHIFT_RUN: usize = 8;
/// Points in a row steadily going up or down that make a trend (rule 3).
pub const TREND_RUN: usize = 6;
/// d₂ for moving ranges of two consecutive points.
pub const D2_TWO_POINTS: f64 = 1.128;

/// The rule set, as written into every chart.
pub const RULE_SET: &str = "Provost & Murray, The Health Care Data Guide (2011), rules 1-4";

/// p-chart (proportions) or u-chart (rates).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ChartKind {
    P,
    U,
}

/// Where the centre line comes from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CentreLine {
    /// Pooled over all periods.
    AllPeriods,
    /// Pooled over periods `start..end` (0-based, end exclusive), then frozen for all periods.
    Baseline { start: usize, end: usize },
    /// A given value (a proportion for p-charts, a rate per unit of exposure for u-charts).
    Fixed { value: f64 },
}

/// Choices for a chart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChartOptions {
    pub centre_line: CentreLine,
    /// Laney p′/u′ limits (inflated or deflated by σ_z).
    pub laney: bool,
    /// Width of the limits in σ; 3 for Shewhart charts.
    pub sigma_multiplier: f64,
    /// Word for one period in explanations, e.g. "month".
    pub period_label: String,
}

impl Default for ChartOptions {
    fn default() -> Self {
        ChartOptions {
            centre_line: CentreLine::AllPeriods,
            laney: false,
            sigma_multiplier: 3.0,
            period_label: "period".to_string(),
        }
    }
}

/// The run rules of [`RULE_SET`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Rule {
    BeyondLimits,
    Shift,
    Trend,
    TwoOfThreeBeyondTwoSigma,
}

impl Rule {
    /// The rule's number in Provost & Murray's list.
    pub fn number(self) -> u8 {
        match self {
            Rule::BeyondLimits => 1,
            Rule::Shift => 2,
            Rule::Trend => 3,
            Rule::TwoOfThreeBeyondTwoSigma => 4,
        }
    }
}

/// One special-cause signal on one period.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Signal {
    pub rule: Rule,
    pub rule_number: u8,
    pub explanation: String,
}

/// One period of a chart.
#[derive(Debug, Clone, Serialize)]
pub struct ChartPoint {
    /// 0-based position in the input.
    pub period: usize,
    pub numerator: u64,
    pub denominator: f64,
    /// numerator / denominator.
    pub value: f64,
    pub centre: f64,
    pub lower: f64,
    pub upper: f64,
    /// σ of this period's value (times σ_z on Laney charts).
    pub sigma: f64,
    /// (value − centre) / sigma.
    pub z: f64,
    pub in_baseline: bool,
    pub signals: Vec<Signal>,
}

/// A whole chart.
#[derive(Debug, Clone, Serialize)]
pub struct ControlChart {
    pub kind: ChartKind,
    pub laney: bool,
    pub centre: f64,
    pub centre_line: CentreLine,
    /// Laney's σ_z (None on plain charts).
    pub sigma_z: Option<f64>,
    pub sigma_multiplier: f64,
    pub rule_set: &'static str,
    pub points: Vec<ChartPoint>,
}

/// p-chart of `events[i] / totals[i]`.
pub fn p_chart(
    events: &[u64],
    totals: &[u64],
    options: &ChartOptions,
) -> Result<ControlChart, StatsError> {
    check_lengths(events.len(), totals.len())?;
    for (i, (&x, &n)) in events.iter().zip(totals).enumerate() {
        if n == 0 {
            return Err(StatsError::invalid(
                format!("denominator of period {i}"),
                "at least 1 (leave out periods with no one at risk)",
                n,
            ));
        }
        if x > n {
            return Err(StatsError::invalid(
                format!("numerator of period {i}"),
                format!("at most {n}"),
                x,
            ));
        }
    }
    let denominators: Vec<f64> = totals.iter().map(|&n| n as f64).collect();
    build(ChartKind::P, events, &denominators, options)
}

/// u-chart of `events[i] / exposure[i]` (a rate per unit of exposure; pass exposure in the unit
/// the rate should be per, e.g. thousands of patient-days).
pub fn u_chart(
    events: &[u64],
    exposure: &[f64],
    options: &ChartOptions,
) -> Result<ControlChart, StatsError> {
    check_lengths(events.len(), exposure.len())?;
    for (i, &n) in exposure.iter().enumerate() {
        if !(n.is_finite() && n > 0.0) {
            return Err(StatsError::invalid(
                format!("exposure of period {i}"),
                "a finite number greater than 0 (leave out periods with no time at risk)",
                n,
            ));
        }
    }
    build(ChartKind::U, events, exposure, options)
}

fn build(
    kind: ChartKind,
    events: &[u64],
    denominators: &[f64],
    options: &ChartOptions,
) -> Result<ControlChart, StatsError> {
    let k = options.sigma_multiplier;
    if !(k.is_finite() && k > 0.0) {
        return Err(StatsError::invalid(
            "sigma multiplier",
            "a finite number greater than 0, usually 3",
            k,
        ));
    }
    let n = events.len();
    let baseline = match options.centre_line {
        CentreLine::AllPeriods | CentreLine::Fixed { .. } => 0..n,
        CentreLine::Baseline { start, end } => {
            if start >= end || end > n {
                return Err(StatsError::invalid(
                    "baseline periods",
                    format!("a non-empty range start..end within 0..{n}"),
                    format!("{start}..{end}"),
                ));
            }
            start..end
        }
    };
    let centre = match options.centre_line {
        CentreLine::Fixed { value } => {
            let valid = value.is_finite() && value > 0.0 && (kind == ChartKind::U || value < 1.0);
            if !valid {
                let expected = match kind {
                    ChartKind::P => "a proportion strictly between 0 and 1",
                    ChartKind::U => "a finite rate greater than 0",
                };
                return Err(StatsError::invalid("fixed centre line", expected, value));
            }
            value
        }
        _ => {
            let x: f64 = events[baseline.clone()].iter().map(|&e| e as f64).sum();
            let d: f64 = denominators[baseline.clone()].iter().sum();
            x / d
        }
    };
    if centre == 0.0 || (kind == ChartKind::P && centre == 1.0) {
        return Err(StatsError::NotEstimable(format!(
            "the centre line is {centre}: with no variation in the {} periods the limits are undefined",
            if matches!(options.centre_line, CentreLine::Baseline { .. }) {
                "baseline"
            } else {
                "charted"
            }
        )));
    }
    let sigma_of = |d: f64| match kind {
        ChartKind::P => (centre * (1.0 - centre) / d).sqrt(),
        ChartKind::U => (centre / d).sqrt(),
    };
    let values: Vec<f64> = events
        .iter()
        .zip(denominators)
        .map(|(&e, &d)| e as f64 / d)
        .collect();
    let raw_sigmas: Vec<f64> = denominators.iter().map(|&d| sigma_of(d)).collect();
    let sigma_z = if options.laney {
        if baseline.len() < 2 {
            return Err(StatsError::invalid(
                "periods for Laney's sigma_z",
                "at least 2 (it is a mean moving range)",
                baseline.len(),
            ));
        }
        let z: Vec<f64> = baseline
            .clone()
            .map(|i| (values[i] - centre) / raw_sigmas[i])
            .collect();
        let mean_moving_range =
            z.windows(2).map(|w| (w[1] - w[0]).abs()).sum::<f64>() / (z.len() - 1) as f64;
        let sigma_z = mean_moving_range / D2_TWO_POINTS;
        if sigma_z == 0.0 {
            return Err(StatsError::NotEstimable(
                "Laney's sigma_z is 0 (every period lies the same distance from the centre line)"
                    .to_string(),
            ));
        }
        Some(sigma_z)
    } else {
        None
    };
    let inflation = sigma_z.unwrap_or(1.0);
    let mut points: Vec<ChartPoint> = (0..n)
        .map(|i| {
            let sigma = raw_sigmas[i] * inflation;
            let upper = centre + k * sigma;
            let upper = if kind == ChartKind::P {
                upper.min(1.0)
            } else {
                upper
            };
            ChartPoint {
                period: i,
                numerator: events[i],
                denominator: denominators[i],
                value: values[i],
                centre,
                lower: (centre - k * sigma).max(0.0),
                upper,
                sigma,
                z: (values[i] - centre) / sigma,
                in_baseline: baseline.contains(&i),
                signals: Vec::new(),
            }
        })
        .collect();
    apply_rules(&mut points, k, &options.period_label);
    Ok(ControlChart {
        kind,
        laney: options.laney,
        centre,
        centre_line: options.centre_line,
        sigma_z,
        sigma_multiplier: k,
        rule_set: RULE_SET,
        points,
    })
}

fn apply_rules(points: &mut [ChartPoint], k: f64, label: &str) {
    let n = points.len();
    let mut found: Vec<Vec<Signal>> = vec![Vec::new(); n];
    let mut add = |i: usize, rule: Rule, explanation: String| {
        if !found[i].iter().any(|s| s.rule == rule) {
            found[i].push(Signal {
                rule,
                rule_number: rule.number(),
                explanation,
            });
        }
    };

    // Rule 1: beyond the limits.
    for (i, p) in points.iter().enumerate() {
        if p.value > p.upper {
            add(
                i,
                Rule::BeyondLimits,
                format!("above the upper control limit (more than {k}σ above the centre line)"),
            );
        } else if p.value < p.lower {
            add(
                i,
                Rule::BeyondLimits,
                format!("below the lower control limit (more than {k}σ below the centre line)"),
            );
        }
    }

    // Rule 2: shift. Points on the centre line are skipped: they neither count nor break a run.
    let mut run: Vec<usize> = Vec::new();
    let mut run_side = 0i8;
    let flush = |run: &[usize], side: i8, add: &mut dyn FnMut(usize, Rule, String)| {
        if run.len() >= SHIFT_RUN {
            let where_ = if side > 0 { "above" } else { "below" };
            for &i in run {
                add(
                    i,
                    Rule::Shift,
                    format!(
                        "{} {label}s in a row {where_} the centre line (shift)",
                        run.len()
                    ),
                );
            }
        }
    };
    for (i, p) in points.iter().enumerate() {
        let side = if p.value > p.centre {
            1
        } else if p.value < p.centre {
            -1
        } else {
            continue;
        };
        if side != run_side {
            flush(&run, run_side, &mut add);
            run.clear();
            run_side = side;
        }
        run.push(i);
    }
    flush(&run, run_side, &mut add);

    // Rule 3: trend. A run starts at a point and grows while each value is strictly beyond the
    // previous one in the same direction.
    for direction in [1.0f64, -1.0] {
        let mut start = 0;
        for i in 1..=n {
            let continues = i < n && (points[i].value - points[i - 1].value) * direction > 0.0;
            if !continues {
                let length = i - start;
                if length >= TREND_RUN {
                    let how = if direction > 0.0 {
                        "increasing"
                    } else {
                        "decreasing"
                    };
                    for j in start..i {
                        add(
                            j,
                            Rule::Trend,
                            format!("{length} {label}s in a row steadily {how} (trend)"),
                        );
                    }
                }
                start = i;
            }
        }
    }

    // Rule 4: 2 of 3 consecutive points beyond 2σ on the same side.
    for window in 0..n.saturating_sub(2) {
        for side in [1.0f64, -1.0] {
            let beyond: Vec<usize> = (window..window + 3)
                .filter(|&i| points[i].z * side > 2.0)
                .collect();
            if beyond.len() >= 2 {
                let where_ = if side > 0.0 { "above" } else { "below" };
                for i in beyond {
                    add(
                        i,
                        Rule::TwoOfThreeBeyondTwoSigma,
                        format!("2 of 3 {label}s in a row more than 2σ {where_} the centre line"),
                    );
                }
            }
        }
    }

    for (point, signals) in points.iter_mut().zip(found) {
        point.signals = signals;
    }
}

fn check_lengths(numerators: usize, denominators: usize) -> Result<(), StatsError> {
    if numerators != denominators {
        return Err(StatsError::invalid(
            "periods",
            format!("as many denominators as numerators ({numerators})"),
            denominators,
        ));
    }
    if numerators == 0 {
        return Err(StatsError::invalid("periods", "at least one period", 0));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rules_of(chart: &ControlChart) -> Vec<Vec<u8>> {
        chart
            .points
            .iter()
            .map(|p| p.signals.iter().map(|s| s.rule_number).collect())
            .collect()
    }

    #[test]
    fn montgomery_orange_juice_p_chart() {
        // Montgomery, Introduction to Statistical Quality Control, 6th ed. (2009), Example 7.1 and
        // Table 7.1: 30 samples of n = 50 orange-juice cans, nonconforming counts below
        // [data and printed results M: from memory]: p̄ = 0.2313, UCL = 0.4102, LCL = 0.0524, and
        // samples 15 and 23 above the UCL.
        let defective = [
            12, 15, 8, 10, 4, 7, 16, 9, 14, 10, 5, 6, 17, 12, 22, 8, 10, 5, 13, 11, 20, 18, 24, 15,
            9, 12, 7, 13, 9, 6,
        ];
        let chart = p_chart(&defective, &[50; 30], &ChartOptions::default()).unwrap();
        assert!((chart.centre - 0.2313).abs() < 5e-5, "{}", chart.centre);
        assert!(
            (chart.points[0].upper - 0.4102).abs() < 5e-5,
            "{}",
            chart.points[0].upper
        );
        assert!(
            (chart.points[0].lower - 0.0524).abs() < 5e-5,
            "{}",
            chart.points[0].lower
        );
        let beyond: Vec<usize> = chart
            .points
            .iter()
            .filter(|p| p.signals.iter().any(|s| s.rule == Rule::BeyondLimits))
            .map(|p| p.period + 1)
            .collect();
        assert_eq!(beyond, vec![15, 23]);
    }

    #[test]
    fn montgomery_dyed_cloth_u_chart() {
        // Montgomery, Introduction to Statistical Quality Control, 6th ed., ch. 7, the u-chart example
        // with variable sample size (dyed cloth: rolls inspected in 50 m² units; example number not
        // recalled) [data and printed results M: from memory]: ū = 153/107.5 = 1.42; for n = 10,
        // UCL = 2.55 and LCL = 0.29.
        let nonconformities = [14, 12, 20, 11, 7, 10, 21, 16, 19, 23];
        let units = [10.0, 8.0, 13.0, 10.0, 9.5, 10.0, 12.0, 10.5, 12.0, 12.5];
        let chart = u_chart(&nonconformities, &units, &ChartOptions::default()).unwrap();
        assert!((chart.centre - 153.0 / 107.5).abs() < 1e-12);
        assert!((chart.centre - 1.42).abs() < 0.005);
        let ten = &chart.points[0];
        // The book computes its limits from ū rounded to 1.42 (1.42 + 3·√0.142 = 2.55); from the
        // unrounded ū the UCL is 2.555, hence a tolerance of 0.01.
        assert!(
            (ten.upper - 2.55).abs() < 0.01 && (ten.lower - 0.29).abs() < 0.01,
            "{ten:?}"
        );
        // Limits widen as the exposure shrinks.
        assert!(chart.points[1].upper > ten.upper && chart.points[2].upper < ten.upper);
        assert!(
            chart.points.iter().all(|p| p.signals.is_empty()),
            "{:?}",
            rules_of(&chart)
        );
    }

    #[test]
    fn lower_limit_is_floored_at_zero() {
        let chart = u_chart(&[1, 0, 2], &[1.0, 1.0, 1.0], &ChartOptions::default()).unwrap();
        assert!(chart.points.iter().all(|p| p.lower == 0.0));
    }

    fn u_chart_of(values: &[u64]) -> ControlChart {
        // Equal exposure of 100 so that σ = √(ū/100); labels in months.
        let options = ChartOptions {
            period_label: "month".to_string(),
            ..ChartOptions::default()
        };
        u_chart(values, &vec![100.0; values.len()], &options).unwrap()
    }

    #[test]
    fn shift_of_eight_above_is_flagged_with_words() {
        // Centre is fixed at 0.1 per unit, σ = 0.0316 per unit: 11/100 = 0.11 is above the centre
        // (0.3σ), 9/100 below; eight 11s in a row make a shift, seven do not.
        let options = ChartOptions {
            centre_line: CentreLine::Fixed { value: 0.1 },
            period_label: "month".to_string(),
            ..ChartOptions::default()
        };
        let values = [
            9, 11, 11, 11, 11, 11, 11, 11, 11, 9, 11, 11, 11, 11, 11, 11, 11, 9,
        ];
        let chart = u_chart(&values, &[100.0; 18], &options).unwrap();
        let flagged: Vec<usize> = chart
            .points
            .iter()
            .filter(|p| p.signals.iter().any(|s| s.rule == Rule::Shift))
            .map(|p| p.period)
            .collect();
        assert_eq!(flagged, (1..9).collect::<Vec<_>>());
        assert_eq!(
            chart.points[1].signals[0].explanation,
            "8 months in a row above the centre line (shift)"
        );
    }

    #[test]
    fn points_on_the_centre_line_do_not_break_a_shift() {
        let options = ChartOptions {
            centre_line: CentreLine::Fixed { value: 0.1 },
            ..ChartOptions::default()
        };
        // Four below, one exactly on the centre (10/100), four below: a run of 8.
        let values = [9, 9, 9, 9, 10, 9, 9, 9, 9];
        let chart = u_chart(&values, &[100.0; 9], &options).unwrap();
        assert!(chart.points[4].signals.is_empty());
        assert_eq!(
            chart
                .points
                .iter()
                .filter(|p| !p.signals.is_empty())
                .count(),
            8
        );
        assert!(
            chart.points[0].signals[0]
                .explanation
                .contains("8 periods in a row below")
        );
    }

    #[test]
    fn trend_of_six_is_flagged_and_ties_break_it() {
        let chart = u_chart_of(&[20, 21, 22, 23, 24, 25, 20, 20, 21, 22, 22, 23, 24, 25]);
        let trend: Vec<bool> = chart
            .points
            .iter()
            .map(|p| p.signals.iter().any(|s| s.rule == Rule::Trend))
            .collect();
        assert_eq!(&trend[..6], &[true; 6]);
        assert!(trend[6..].iter().all(|t| !t), "{trend:?}");
        let explanation = &chart.points[0]
            .signals
            .iter()
            .find(|s| s.rule == Rule::Trend)
            .unwrap()
            .explanation;
        assert_eq!(explanation, "6 months in a row steadily increasing (trend)");
        let down = u_chart_of(&[30, 29, 28, 27, 26, 25, 24]);
        assert!(down.points.iter().all(|p| {
            p.signals
                .iter()
                .any(|s| s.explanation == "7 months in a row steadily decreasing (trend)")
        }));
    }

    #[test]
    fn two_of_three_beyond_two_sigma() {
        // Fixed centre 0.25 per unit with exposure 100: σ = 0.05, so 2σ = 0.10 → counts above 35.
        let options = ChartOptions {
            centre_line: CentreLine::Fixed { value: 0.25 },
            ..ChartOptions::default()
        };
        let values = [25, 37, 24, 36, 25, 37, 25, 25, 37];
        let chart = u_chart(&values, &[100.0; 9], &options).unwrap();
        let flagged: Vec<usize> = chart
            .points
            .iter()
            .filter(|p| {
                p.signals
                    .iter()
                    .any(|s| s.rule == Rule::TwoOfThreeBeyondTwoSigma)
            })
            .map(|p| p.period)
            .collect();
        // Windows 1-3 and 3-5 qualify; point 8 has no partner within 3.
        assert_eq!(flagged, vec![1, 3, 5]);
        assert!(
            chart
                .points
                .iter()
                .all(|p| p.signals.iter().all(|s| s.rule != Rule::BeyondLimits))
        );
    }

    #[test]
    fn baseline_centre_is_frozen() {
        let options = ChartOptions {
            centre_line: CentreLine::Baseline { start: 0, end: 4 },
            ..ChartOptions::default()
        };
        let chart = p_chart(&[10, 12, 8, 10, 30, 32], &[100; 6], &options).unwrap();
        assert!((chart.centre - 0.10).abs() < 1e-12);
        assert!(!chart.points[4].in_baseline && chart.points[0].in_baseline);
        assert_eq!(chart.points[4].signals[0].rule, Rule::BeyondLimits);
    }

    #[test]
    fn laney_limits_use_sigma_z() {
        // Over-dispersed rates with large exposure: plain u-chart limits are too narrow.
        let events = [500, 620, 480, 590, 530, 610, 470, 560];
        let exposure = [1000.0; 8];
        let plain = u_chart(&events, &exposure, &ChartOptions::default()).unwrap();
        let laney = u_chart(
            &events,
            &exposure,
            &ChartOptions {
                laney: true,
                ..ChartOptions::default()
            },
        )
        .unwrap();
        let z: Vec<f64> = plain.points.iter().map(|p| p.z).collect();
        let mr = z.windows(2).map(|w| (w[1] - w[0]).abs()).sum::<f64>() / 7.0;
        let sigma_z = laney.sigma_z.unwrap();
        assert!((sigma_z - mr / 1.128).abs() < 1e-12);
        assert!(sigma_z > 1.0);
        let p = &laney.points[0];
        assert!((p.upper - (laney.centre + 3.0 * plain.points[0].sigma * sigma_z)).abs() < 1e-12);
        assert!(plain.points.iter().any(|p| !p.signals.is_empty()));
        assert!(
            laney
                .points
                .iter()
                .all(|p| p.signals.iter().all(|s| s.rule != Rule::BeyondLimits))
        );
    }

    #[test]
    fn bad_input_is_an_error() {
        let options = ChartOptions::default();
        assert!(p_chart(&[1, 2], &[10], &options).is_err());
        assert!(p_chart(&[], &[], &options).is_err());
        assert!(p_chart(&[11], &[10], &options).is_err());
        assert!(p_chart(&[0], &[0], &options).is_err());
        assert!(u_chart(&[1], &[0.0], &options).is_err());
        assert!(matches!(
            p_chart(&[0, 0], &[10, 10], &options),
            Err(StatsError::NotEstimable(_))
        ));
        let baseline = ChartOptions {
            centre_line: CentreLine::Baseline { start: 2, end: 5 },
            ..ChartOptions::default()
        };
        assert!(p_chart(&[1, 2, 3], &[10, 10, 10], &baseline).is_err());
    }

    #[test]
    fn chart_serialises_to_json_with_numbers() {
        let chart = u_chart_of(&[20, 21, 22, 23, 24, 25]);
        let json = serde_json::to_value(&chart).unwrap();
        assert_eq!(json["kind"], "u");
        assert!(json["points"][0]["upper"].is_f64());
        assert_eq!(json["points"][0]["signals"][0]["rule"], "trend");
        assert_eq!(json["points"][0]["signals"][0]["rule_number"], 3);
    }
}
