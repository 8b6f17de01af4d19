//! Kaplan–Meier survival curve with Greenwood variance, pointwise intervals and the median.
//!
//! At each distinct exit time t_j with n_j at risk (entry < t_j <= exit) and d_j events:
//!
//! - Ŝ(t) = Π_{t_j <= t} (1 − d_j/n_j) (Kaplan & Meier, JASA 1958;53:457);
//! - σ²(t) = Σ_{t_j <= t} d_j / (n_j (n_j − d_j)), the Greenwood (1926) variance of log Ŝ, so
//!   Var Ŝ = Ŝ² σ²;
//! - log interval Ŝ·exp(±zσ), upper limit capped at 1 (R `survfit` default, conf.type = "log");
//! - log(−log) interval Ŝ^exp(±zσ/ln Ŝ) (Kalbfleisch & Prentice 1980; R conf.type = "log-log",
//!   the lifelines default);
//! - median: the first time Ŝ <= 1/2, and its Brookmeyer–Crowley (Biometrics 1982;38:29) interval:
//!   the times at which the lower and the upper pointwise limits first reach 1/2. Where Ŝ is exactly
//!   1/2 over an interval the median is the interval's midpoint. Both rules, including the
//!   tolerance of √ε for "exactly", follow R survival 3.5 `quantile.survfit`.
//!
//! Late entry (left truncation) is supported: rows enter the risk set after their entry time, so
//! counting-process (start, stop] rows give the same curve as R's
//! `survfit(Surv(start, stop, event) ~ 1)`. Check values: DOMAIN.md §5.7 (R `survival::aml`) and
//! the fixtures written by `tests/reference/survival/kaplan_meier.R`.
//!
//! Cost: the exits of events, the exits of censored rows and the finite entries are sorted once
//! (radix sort, in parallel) and then swept once, so 10 million rows take well under two seconds.

use crate::follow_up::{FollowUp, key_time, sort_keys, time_key, validate_intervals};
use crate::{ConfidenceLevel, Interval, StatsError};
use rayon::prelude::*;
use serde::Serialize;

/// What to compute besides the curve itself.
#[derive(Debug, Clone, PartialEq)]
pub struct KaplanMeierOptions {
    /// Level of the pointwise intervals and of the median's interval.
    pub level: ConfidenceLevel,
    /// Times at which to report the number at risk and the survival (R `summary(fit, times =)`).
    pub at_times: Vec<f64>,
}

impl Default for KaplanMeierOptions {
    fn default() -> Self {
        KaplanMeierOptions {
            level: ConfidenceLevel::NINETY_FIVE,
            at_times: Vec::new(),
        }
    }
}

/// A Kaplan–Meier curve: one step per distinct exit time (event or censoring), as R's `survfit`.
#[derive(Debug, Clone, Serialize)]
pub struct KaplanMeier {
    pub level: f64,
    pub n_rows: u64,
    pub n_events: u64,
    pub steps: Vec<KaplanMeierStep>,
    pub median: MedianSurvival,
    pub at_times: Vec<SurvivalAt>,
}

/// The curve at one distinct exit time.
#[derive(Debug, Clone, Serialize)]
pub struct KaplanMeierStep {
    pub time: f64,
    pub n_at_risk: u64,
    pub n_events: u64,
    pub n_censored: u64,
    pub survival: f64,
    /// Greenwood standard error of Ŝ, Ŝ·σ (NaN once Ŝ = 0).
    pub std_error: f64,
    /// σ, the standard error of log Ŝ (R's `std.err`; infinite once Ŝ = 0).
    pub log_std_error: f64,
    /// Ŝ·exp(±zσ), capped at 1; none when Ŝ = 0.
    pub log_interval: Option<Interval>,
    /// Ŝ^exp(±zσ/ln Ŝ); none when Ŝ is 0 or 1.
    pub log_log_interval: Option<Interval>,
}

/// Survival at a chosen time (the curve is right-continuous).
#[derive(Debug, Clone, Serialize)]
pub struct SurvivalAt {
    pub time: f64,
    /// #{entry < time <= exit}.
    pub n_at_risk: u64,
    pub survival: f64,
    pub std_error: f64,
    pub log_interval: Option<Interval>,
    pub log_log_interval: Option<Interval>,
}

/// Median survival time and its Brookmeyer–Crowley interval under both transforms. A missing value
/// means the curve (or the interval's limit) never reaches 1/2 within the follow-up.
#[derive(Debug, Clone, Serialize)]
pub struct MedianSurvival {
    pub median: Option<f64>,
    pub level: f64,
    pub log_lower: Option<f64>,
    pub log_upper: Option<f64>,
    pub log_log_lower: Option<f64>,
    pub log_log_upper: Option<f64>,
}

/// Estimates the Kaplan–Meier curve of `data`.
pub fn estimate(
    data: &[FollowUp],
    options: &KaplanMeierOptions,
) -> Result<KaplanMeier, StatsError> {
    if data.is_empty() {
        return Err(StatsError::invalid("follow-up rows", "at least one row", 0));
    }
    validate_intervals(data.len(), |i| (data[i].entry, data[i].exit))?;
    if let Some(t) = options.at_times.iter().find(|t| !t.is_finite()) {
        return Err(StatsError::invalid("at_times", "finite times", t));
    }
    let keys = SortedTimes::new(data);
    let z = options.level.z();
    let level = options.level;

    // One pass over the distinct exit times gives the counts, the product and the Greenwood sum;
    // the intervals need transcendental functions at every step, so those are done in parallel.
    let counts = keys.distinct_exits();
    let steps: Vec<KaplanMeierStep> = counts
        .par_iter()
        .map(|c| {
            let sigma = c.greenwood.sqrt();
            let (log_interval, log_log_interval) = intervals(c.survival, sigma, z, level);
            KaplanMeierStep {
                time: c.time,
                n_at_risk: c.n_at_risk,
                n_events: c.n_events,
                n_censored: c.n_censored,
                survival: c.survival,
                std_error: c.survival * sigma,
                log_std_error: sigma,
                log_interval,
                log_log_interval,
            }
        })
        .collect();

    let at_times = options
        .at_times
        .iter()
        .map(|&t| {
            let last = steps.partition_point(|s| s.time <= t);
            let n_at_risk = keys.n_at_risk(t);
            if last == 0 {
                // Before the first exit nothing is uncertain yet: S = 1 with a degenerate interval
                // (R `summary(fit, times)` reports 1 for both limits and both transforms).
                let certain = Some(Interval::new(1.0, 1.0, level));
                return SurvivalAt {
                    time: t,
                    n_at_risk,
                    survival: 1.0,
                    std_error: 0.0,
                    log_interval: certain,
                    log_log_interval: certain,
                };
            }
            let step = &steps[last - 1];
            SurvivalAt {
                time: t,
                n_at_risk,
                survival: step.survival,
                std_error: step.std_error,
                log_interval: step.log_interval,
                log_log_interval: step.log_log_interval,
            }
        })
        .collect();

    let median = median_of(&steps, level);
    Ok(KaplanMeier {
        level: level.value(),
        n_rows: data.len() as u64,
        n_events: keys.events.len() as u64,
        steps,
        median,
        at_times,
    })
}

/// Both pointwise intervals at once, sharing ln Ŝ and exp(zσ):
/// log: Ŝ·exp(±zσ), upper capped at 1, none when Ŝ = 0 (R `survfit(conf.type = "log")`);
/// log(−log): Ŝ^exp(±zσ/ln Ŝ) = exp(ln Ŝ·exp(±zσ/ln Ŝ)), none when Ŝ is 0 or 1 (R "log-log").
pub(crate) fn intervals(
    survival: f64,
    sigma: f64,
    z: f64,
    level: ConfidenceLevel,
) -> (Option<Interval>, Option<Interval>) {
    if survival <= 0.0 || !sigma.is_finite() {
        return (None, None);
    }
    let spread = (z * sigma).exp();
    let log = Some(Interval::new(
        survival / spread,
        (survival * spread).min(1.0),
        level,
    ));
    if survival >= 1.0 {
        return (log, None);
    }
    let log_survival = survival.ln();
    let factor = (z * sigma / log_survival).exp();
    let log_log = Some(Interval::new(
        (log_survival / factor).exp(),
        (log_survival * factor).exp(),
        level,
    ));
    (log, log_log)
}

/// One of the five curves whose crossing of 1/2 the median needs.
type StepValue = dyn Fn(&KaplanMeierStep) -> Option<f64> + Sync;

fn median_of(steps: &[KaplanMeierStep], level: ConfidenceLevel) -> MedianSurvival {
    let times: Vec<f64> = steps.iter().map(|s| s.time).collect();
    let q =
        |value: &StepValue| first_time_reaching(&times, |i| value(&steps[i]).map(|v| 1.0 - v), 0.5);
    let curves: [&StepValue; 5] = [
        &|s| Some(s.survival),
        &|s| s.log_interval.map(|i| i.lower),
        &|s| s.log_interval.map(|i| i.upper),
        &|s| s.log_log_interval.map(|i| i.lower),
        &|s| s.log_log_interval.map(|i| i.upper),
    ];
    let found: Vec<Option<f64>> = curves.par_iter().map(|curve| q(curve)).collect();
    MedianSurvival {
        median: found[0],
        level: level.value(),
        log_lower: found[1],
        log_upper: found[2],
        log_log_lower: found[3],
        log_log_upper: found[4],
    }
}

/// The time at which a step function (1 − survival, or 1 − an interval limit; `failure(i)` at
/// `times[i]`, missing where that limit is undefined) first reaches `p`, with R's tie rule: where
/// it equals `p` (within √ε) over an interval, the midpoint of that interval. Follows R survival
/// 3.5 `findq`: prepend (0, 0), drop repeated values (keeping the first time of each), then take
/// the point with the smallest value at or above p ∓ √ε (R `approx(..., "constant", f = 1)`);
/// where the last distinct value equals p, the midpoint up to the last time.
pub(crate) fn first_time_reaching(
    times: &[f64],
    failure: impl Fn(usize) -> Option<f64>,
    p: f64,
) -> Option<f64> {
    let tolerance = f64::EPSILON.sqrt();
    let last_time = *times.last()?;
    let (low, high) = (p - tolerance, p + tolerance);
    // One scan serves curves that never decrease (all but, in principle, an upper limit): there
    // duplicates only come in runs and the smallest value at or above a threshold is the first.
    let mut monotone = true;
    let (mut largest, mut last_kept, mut seen_missing) = (0.0f64, Some(0.0f64), false);
    let (mut first_low, mut first_high) = (None, None);
    for (i, &time) in times.iter().enumerate() {
        match failure(i) {
            Some(v) if v < largest => {
                monotone = false;
                break;
            }
            Some(v) if v > largest => {
                largest = v;
                last_kept = Some(v);
                if first_low.is_none() && v >= low {
                    first_low = Some(time);
                }
                if first_high.is_none() && v >= high {
                    first_high = Some(time);
                }
            }
            None if !seen_missing => {
                seen_missing = true;
                last_kept = None;
            }
            _ => {}
        }
    }
    if !monotone {
        let mut seen = std::collections::HashSet::new();
        let points: Vec<(f64, Option<f64>)> = std::iter::once((0.0, Some(0.0)))
            .chain(times.iter().enumerate().map(|(i, &t)| (t, failure(i))))
            .filter(|&(_, v)| seen.insert(v.map(|v| (v + 0.0).to_bits())))
            .collect();
        let smallest_at_least = |threshold: f64| {
            points
                .iter()
                .filter_map(|&(t, v)| v.filter(|&v| v >= threshold).map(|v| (t, v)))
                .min_by(|a, b| a.1.total_cmp(&b.1))
                .map(|(t, _)| t)
        };
        largest = points.iter().filter_map(|&(_, v)| v).fold(0.0, f64::max);
        last_kept = points.last().and_then(|&(_, v)| v);
        first_low = smallest_at_least(low);
        first_high = smallest_at_least(high);
    }
    // The prepended point (0, 0) answers thresholds at or below 0.
    if low <= 0.0 {
        first_low = Some(0.0);
    }
    if high <= 0.0 {
        first_high = Some(0.0);
    }
    if largest < p {
        return None;
    }
    if let Some(last) = last_kept
        && (p - last).abs() < tolerance
    {
        return first_low.map(|t| (t + last_time) / 2.0);
    }
    Some((first_low? + first_high?) / 2.0)
}

/// Counts at one distinct exit time.
#[derive(Debug, Clone, Copy)]
pub(crate) struct ExitCount {
    pub time: f64,
    pub n_at_risk: u64,
    pub n_events: u64,
    pub n_censored: u64,
    /// Ŝ just after this time.
    pub survival: f64,
    /// Σ d/(n(n − d)) up to this time (infinite once everyone at risk has had the event).
    pub greenwood: f64,
}

/// Sorted time keys of one sample: exits of events, exits of censored rows, finite entries.
pub(crate) struct SortedTimes {
    pub events: Vec<u64>,
    pub censored: Vec<u64>,
    pub entries: Vec<u64>,
}

impl SortedTimes {
    pub fn new(data: &[FollowUp]) -> Self {
        let mut events: Vec<u64> = data
            .par_iter()
            .filter(|r| r.event)
            .map(|r| time_key(r.exit))
            .collect();
        let mut censored: Vec<u64> = data
            .par_iter()
            .filter(|r| !r.event)
            .map(|r| time_key(r.exit))
            .collect();
        let mut entries: Vec<u64> = data
            .par_iter()
            .filter(|r| r.entry > f64::NEG_INFINITY)
            .map(|r| time_key(r.entry))
            .collect();
        rayon::join(
            || sort_keys(&mut events),
            || rayon::join(|| sort_keys(&mut censored), || sort_keys(&mut entries)),
        );
        SortedTimes {
            events,
            censored,
            entries,
        }
    }

    fn n_rows(&self) -> usize {
        self.events.len() + self.censored.len()
    }

    /// #{entry < t <= exit} = #{exit >= t} − #{entry >= t}.
    pub fn n_at_risk(&self, t: f64) -> u64 {
        let key = time_key(t);
        let at_or_after = |keys: &[u64]| keys.len() - keys.partition_point(|&k| k < key);
        (at_or_after(&self.events) + at_or_after(&self.censored) - at_or_after(&self.entries))
            as u64
    }

    /// One merge pass over the three sorted lists: counts, Kaplan–Meier product, Greenwood sum.
    pub fn distinct_exits(&self) -> Vec<ExitCount> {
        let (events, censored, entries) = (&self.events, &self.censored, &self.entries);
        let (mut e, mut c, mut entered) = (0usize, 0usize, 0usize);
        let mut exited = 0usize;
        let n = self.n_rows();
        let (mut survival, mut greenwood) = (1.0f64, 0.0f64);
        let mut out = Vec::new();
        while e < events.len() || c < censored.len() {
            let key = match (events.get(e), censored.get(c)) {
                (Some(&a), Some(&b)) => a.min(b),
                (Some(&a), None) => a,
                (None, Some(&b)) => b,
                (None, None) => unreachable!("loop condition"),
            };
            let e0 = e;
            while e < events.len() && events[e] == key {
                e += 1;
            }
            let c0 = c;
            while c < censored.len() && censored[c] == key {
                c += 1;
            }
            while entered < entries.len() && entries[entered] < key {
                entered += 1;
            }
            let n_at_risk = (n - exited) - (entries.len() - entered);
            let n_events = e - e0;
            if n_events > 0 {
                let (at_risk, d) = (n_at_risk as f64, n_events as f64);
                survival *= 1.0 - d / at_risk;
                greenwood += if n_events == n_at_risk {
                    f64::INFINITY
                } else {
                    d / (at_risk * (at_risk - d))
                };
            }
            out.push(ExitCount {
                time: key_time(key),
                n_at_risk: n_at_risk as u64,
                n_events: n_events as u64,
                n_censored: (c - c0) as u64,
                survival,
                greenwood,
            });
            exited = e + c;
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn aml_maintained() -> Vec<FollowUp> {
        // R survival::aml, x = "Maintained" (Miller 1981), DOMAIN.md §5.7.
        [
            (9.0, true),
            (13.0, true),
            (13.0, false),
            (18.0, true),
            (23.0, true),
            (28.0, false),
            (31.0, true),
        ]
        .into_iter()
        .chain([(34.0, true), (45.0, false), (48.0, true), (161.0, false)])
        .map(|(t, e)| FollowUp::new(t, e))
        .collect()
    }

    fn aml_nonmaintained() -> Vec<FollowUp> {
        [
            5.0, 5.0, 8.0, 8.0, 12.0, 16.0, 23.0, 27.0, 30.0, 33.0, 43.0, 45.0,
        ]
        .into_iter()
        .map(|t| FollowUp::new(t, t != 16.0))
        .collect()
    }

    /// (time, n, d, S, se(S), log lower, log upper, log-log lower, log-log upper) at event times.
    type Row = (f64, u64, u64, f64, f64, f64, f64, f64, f64);

    fn check(data: &[FollowUp], expected: &[Row], dp: &[f64; 4]) {
        let fit = estimate(data, &KaplanMeierOptions::default()).unwrap();
        let events: Vec<&KaplanMeierStep> = fit.steps.iter().filter(|s| s.n_events > 0).collect();
        assert_eq!(events.len(), expected.len());
        for (s, e) in events.iter().zip(expected) {
            assert_eq!((s.time, s.n_at_risk, s.n_events), (e.0, e.1, e.2));
            assert!(
                (s.survival - e.3).abs() <= dp[0],
                "S at {}: {} vs {}",
                e.0,
                s.survival,
                e.3
            );
            if e.3 == 0.0 {
                assert!(
                    s.std_error.is_nan()
                        && s.log_interval.is_none()
                        && s.log_log_interval.is_none()
                );
                continue;
            }
            assert!(
                (s.std_error - e.4).abs() <= dp[1],
                "se at {}: {} vs {}",
                e.0,
                s.std_error,
                e.4
            );
            let log = s.log_interval.unwrap();
            assert!(
                (log.lower - e.5).abs() <= dp[2] && (log.upper - e.6).abs() <= dp[2],
                "log CI at {}: {log:?}",
                e.0
            );
            let ll = s.log_log_interval.unwrap();
            assert!(
                (ll.lower - e.7).abs() <= dp[3] && (ll.upper - e.8).abs() <= dp[3],
                "log-log CI at {}: {ll:?}",
                e.0
            );
        }
    }

    #[test]
    fn aml_maintained_matches_r_doaml_output() {
        // DOMAIN.md §5.7: R survival tests/doaml.Rout.save (S, se, log CI) [C]; log-log CI [S].
        // S and its log CI are printed to 3 decimals there, se to 4.
        let expected: [Row; 7] = [
            (9.0, 11, 1, 0.909, 0.0867, 0.7541, 1.000, 0.5081, 0.9867),
            (13.0, 10, 1, 0.818, 0.1163, 0.6192, 1.000, 0.4474, 0.9512),
            (18.0, 8, 1, 0.716, 0.1397, 0.4884, 1.000, 0.3502, 0.8990),
            (23.0, 7, 1, 0.614, 0.1526, 0.3769, 0.999, 0.2658, 0.8353),
            (31.0, 5, 1, 0.491, 0.1642, 0.2549, 0.946, 0.1673, 0.7534),
            (34.0, 4, 1, 0.368, 0.1627, 0.1549, 0.875, 0.0928, 0.6570),
            (48.0, 2, 1, 0.184, 0.1535, 0.0359, 0.944, 0.0117, 0.5250),
        ];
        check(&aml_maintained(), &expected, &[5e-4, 5e-5, 5e-4, 5e-5]);
    }

    #[test]
    fn aml_nonmaintained_matches_r_doaml_output_including_the_drop_to_zero() {
        // DOMAIN.md §5.7: R survival tests/doaml.Rout.save [C]; log-log CI [S].
        let expected: [Row; 9] = [
            (5.0, 12, 2, 0.8333, 0.1076, 0.6470, 1.000, 0.4817, 0.9555),
            (8.0, 10, 2, 0.6667, 0.1361, 0.4468, 0.995, 0.3370, 0.8597),
            (12.0, 8, 1, 0.5833, 0.1423, 0.3616, 0.941, 0.2701, 0.8009),
            (23.0, 6, 1, 0.4861, 0.1481, 0.2675, 0.883, 0.1919, 0.7297),
            (27.0, 5, 1, 0.3889, 0.1470, 0.1854, 0.816, 0.1263, 0.6498),
            (30.0, 4, 1, 0.2917, 0.1387, 0.1148, 0.741, 0.0724, 0.5609),
            (33.0, 3, 1, 0.1944, 0.1219, 0.0569, 0.664, 0.0312, 0.4614),
            (43.0, 2, 1, 0.0972, 0.0919, 0.0153, 0.620, 0.0057, 0.3489),
            (
                45.0,
                1,
                1,
                0.0,
                f64::NAN,
                f64::NAN,
                f64::NAN,
                f64::NAN,
                f64::NAN,
            ),
        ];
        check(&aml_nonmaintained(), &expected, &[5e-5, 5e-5, 5e-4, 5e-5]);
    }

    #[test]
    fn aml_medians_match_r() {
        // DOMAIN.md §5.7 [C]: Maintained 31 (95% CI 18–NA), Nonmaintained 23 (8–NA).
        let m = estimate(&aml_maintained(), &KaplanMeierOptions::default())
            .unwrap()
            .median;
        assert_eq!(
            (m.median, m.log_lower, m.log_upper),
            (Some(31.0), Some(18.0), None)
        );
        let n = estimate(&aml_nonmaintained(), &KaplanMeierOptions::default())
            .unwrap()
            .median;
        assert_eq!(
            (n.median, n.log_lower, n.log_upper),
            (Some(23.0), Some(8.0), None)
        );
    }

    #[test]
    fn median_is_the_midpoint_where_the_curve_sits_at_one_half() {
        // Four subjects, events at 1, 2, 3, 4: S = 0.75, 0.5, 0.25, 0 → S = 1/2 on [2, 3), median
        // 2.5 (R: quantile(survfit(Surv(1:4) ~ 1), 0.5) = 2.5).
        let data: Vec<FollowUp> = (1..=4).map(|t| FollowUp::new(t as f64, true)).collect();
        let fit = estimate(&data, &KaplanMeierOptions::default()).unwrap();
        assert_eq!(fit.median.median, Some(2.5));
    }

    #[test]
    fn median_when_the_curve_ends_at_one_half_matches_r() {
        // R 4.2.2, survival 3.5.3: quantile(survfit(Surv(c(1,2,3,4), c(1,1,0,0)) ~ 1), 0.5) gives
        // 3 (lower 1, upper NA): the curve stays at 1/2 from 2 to the last time 4.
        let data: Vec<FollowUp> = [(1.0, true), (2.0, true), (3.0, false), (4.0, false)]
            .map(|(t, e)| FollowUp::new(t, e))
            .to_vec();
        let m = estimate(&data, &KaplanMeierOptions::default())
            .unwrap()
            .median;
        assert_eq!(
            (m.median, m.log_lower, m.log_upper),
            (Some(3.0), Some(1.0), None)
        );
        // Same session: Surv(1:6, c(1,1,0,1,0,0)), conf.type = "log-log": median 4, lower 1, upper NA.
        let data: Vec<FollowUp> = [1, 1, 0, 1, 0, 0]
            .iter()
            .enumerate()
            .map(|(i, &e)| FollowUp::new(i as f64 + 1.0, e == 1))
            .collect();
        let m = estimate(&data, &KaplanMeierOptions::default())
            .unwrap()
            .median;
        assert_eq!(
            (m.median, m.log_log_lower, m.log_log_upper),
            (Some(4.0), Some(1.0), None)
        );
    }

    #[test]
    fn numbers_at_risk_at_chosen_times_count_late_entries() {
        let data = [
            FollowUp::with_entry(0.0, 10.0, true),
            FollowUp::with_entry(2.0, 6.0, false),
            FollowUp::with_entry(5.0, 8.0, true),
            FollowUp::new(3.0, true),
        ];
        let options = KaplanMeierOptions {
            at_times: vec![0.0, 2.0, 2.5, 5.0, 5.5, 9.0, 10.0, 11.0],
            ..Default::default()
        };
        let fit = estimate(&data, &options).unwrap();
        // By hand from entry < t <= exit.
        let n: Vec<u64> = fit.at_times.iter().map(|a| a.n_at_risk).collect();
        assert_eq!(n, vec![1, 2, 3, 2, 3, 1, 1, 0]);
        // At the event times: t=3 (n=3: rows 0, 1, 3), t=8 (n=2: rows 0, 2), t=10 (n=1).
        let at_events: Vec<(f64, u64)> = fit
            .steps
            .iter()
            .filter(|s| s.n_events > 0)
            .map(|s| (s.time, s.n_at_risk))
            .collect();
        assert_eq!(at_events, vec![(3.0, 3), (8.0, 2), (10.0, 1)]);
        let s = fit.at_times[5].survival;
        assert!((s - (2.0 / 3.0) * 0.5).abs() < 1e-15, "{s}");
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(32))]

        #[test]
        fn without_censoring_the_curve_is_the_empirical_survival_function(
            times in proptest::collection::vec(0u32..50, 1..60)
        ) {
            let data: Vec<FollowUp> = times.iter().map(|&t| FollowUp::new(t as f64, true)).collect();
            let fit = estimate(&data, &KaplanMeierOptions::default()).unwrap();
            let n = times.len() as f64;
            for step in &fit.steps {
                let surviving = times.iter().filter(|&&t| t as f64 > step.time).count() as f64;
                proptest::prop_assert!((step.survival - surviving / n).abs() < 1e-12);
            }
        }

        #[test]
        fn pointwise_intervals_contain_the_estimate(
            rows in proptest::collection::vec((0u32..20, 1u32..30, proptest::bool::ANY), 1..60),
            level in 0.5f64..0.999,
        ) {
            // Late entry on every other row: entry = a, exit = a + b.
            let data: Vec<FollowUp> = rows
                .iter()
                .enumerate()
                .map(|(i, &(a, b, e))| if i % 2 == 0 { FollowUp::new(b as f64, e) } else { FollowUp::with_entry(a as f64, (a + b) as f64, e) })
                .collect();
            let options = KaplanMeierOptions { level: ConfidenceLevel::new(level).unwrap(), at_times: vec![5.0, 15.0] };
            let fit = estimate(&data, &options).unwrap();
            for step in &fit.steps {
                for interval in [step.log_interval, step.log_log_interval].into_iter().flatten() {
                    proptest::prop_assert!(interval.lower <= step.survival + 1e-12 && step.survival <= interval.upper + 1e-12);
                }
            }
            if let (Some(m), Some(lower)) = (fit.median.median, fit.median.log_lower) {
                proptest::prop_assert!(lower <= m);
            }
        }
    }

    #[test]
    fn bad_input_is_an_error_naming_the_row() {
        let err = estimate(
            &[
                FollowUp::new(1.0, true),
                FollowUp::with_entry(5.0, 4.0, true),
            ],
            &KaplanMeierOptions::default(),
        )
        .unwrap_err();
        assert!(err.to_string().contains("row 1"), "{err}");
        assert!(estimate(&[], &KaplanMeierOptions::default()).is_err());
    }
}
