//! The extract-wide frame derived once from the configuration: period, extract end, site time,
//! month boundaries, the rate step and the hazard model.

use crate::config::SynthConfig;
use crate::error::SynthError;
use crate::hazard::HazardModel;
use crate::network;
use crate::site_time::{
    SECONDS_PER_DAY, SECONDS_PER_HOUR, SiteTime, days_from_civil, month_from_number, month_label,
    month_number, parse_year_month,
};

/// No onset is planted in the last 12 hours before the extract end, so that the confirmation of
/// every planted episode (a repeat or a treatment within 4.5 h) is inside the extract.
pub const RISK_END_MARGIN_SECONDS: i64 = 12 * SECONDS_PER_HOUR;

#[derive(Debug)]
pub struct Scenario {
    pub config: SynthConfig,
    pub time: SiteTime,
    pub first_year: i32,
    /// Local midnight starting the first month.
    pub period_start: i64,
    /// Local midnight ending the last complete month.
    pub months_end: i64,
    /// End of the simulated period: start times are all before it.
    pub extract_end: i64,
    /// Onsets are planted before this instant.
    pub risk_end: i64,
    /// Start of each calendar month touched by the period (complete months, then the tail month
    /// if there is one), and the labels `YYYY-MM`.
    pub month_starts: Vec<i64>,
    pub month_labels: Vec<String>,
    pub step_unit: usize,
    pub step_at: i64,
    pub step_factor: f64,
    pub hazard: HazardModel,
}

impl Scenario {
    pub fn new(config: &SynthConfig) -> Result<Scenario, SynthError> {
        config.validate()?;
        let (y, m) = parse_year_month(&config.first_month).expect("validated");
        let first = month_number(y, m);
        let naive_midnight = |n: i32, day: u32| -> i64 {
            let (yy, mm) = month_from_number(n);
            days_from_civil(yy, mm, day) * SECONDS_PER_DAY
        };
        // The zone table needs a rough UTC range first; offsets are within ±14 h.
        let rough_from = naive_midnight(first, 1) - SECONDS_PER_DAY;
        let rough_to = naive_midnight(first + config.months as i32, 1) + 32 * SECONDS_PER_DAY;
        let time = SiteTime::new(&config.site_timezone, rough_from, rough_to)?;
        let midnight = |n: i32, day: u32| -> i64 {
            let (yy, mm) = month_from_number(n);
            time.midnight(yy, mm, day)
        };
        let period_start = midnight(first, 1);
        let last = first + config.months as i32;
        let months_end = midnight(last, 1);
        let extract_end = midnight(last, 1 + config.tail_days);
        let month_count = config.months as usize + usize::from(config.tail_days > 0);
        let mut month_starts = Vec::with_capacity(month_count);
        let mut month_labels = Vec::with_capacity(month_count);
        for i in 0..month_count as i32 {
            month_starts.push(midnight(first + i, 1));
            let (yy, mm) = month_from_number(first + i);
            month_labels.push(month_label(yy, mm));
        }
        let (sy, sm) = parse_year_month(&config.step_month).expect("validated");
        let step_n = month_number(sy, sm);
        if step_n < first || step_n >= last {
            return Err(SynthError::InvalidConfig {
                field: "step_month",
                expected: format!(
                    "a month inside the simulated period {} to {}",
                    month_labels[0],
                    month_labels[config.months as usize - 1]
                ),
                found: config.step_month.clone(),
            });
        }
        Ok(Scenario {
            config: config.clone(),
            first_year: y,
            period_start,
            months_end,
            extract_end,
            risk_end: extract_end - RISK_END_MARGIN_SECONDS,
            month_starts,
            month_labels,
            step_unit: network::unit_id(&config.step_unit).expect("validated"),
            step_at: midnight(step_n, 1),
            step_factor: config.step_factor,
            hazard: HazardModel::new(config),
            time,
        })
    }

    /// Index of the calendar month holding `t` (clamped to the period).
    pub fn month_index(&self, t: i64) -> usize {
        self.month_starts
            .partition_point(|s| *s <= t)
            .saturating_sub(1)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_period_is_24_months_plus_four_days() {
        let s = Scenario::new(&SynthConfig::default()).unwrap();
        assert_eq!(s.time.local_string(s.period_start), "2024-01-01T00:00");
        assert_eq!(s.time.local_string(s.months_end), "2026-01-01T00:00");
        assert_eq!(s.time.local_string(s.extract_end), "2026-01-05T00:00");
        assert_eq!(SiteTime::rfc3339_utc(s.extract_end), "2026-01-04T23:00:00Z");
        assert_eq!(s.month_labels.len(), 25);
        assert_eq!(s.month_labels[24], "2026-01");
        assert_eq!(s.time.local_string(s.step_at), "2025-04-01T00:00");
        assert_eq!(s.month_index(s.step_at), 15);
        assert_eq!(s.month_index(s.step_at - 1), 14);
    }

    #[test]
    fn step_month_outside_the_period_is_refused() {
        let config = SynthConfig {
            step_month: "2027-01".into(),
            ..SynthConfig::default()
        };
        let err = Scenario::new(&config).unwrap_err().to_string();
        assert!(
            err.contains("step_month") && err.contains("2024-01"),
            "{err}"
        );
    }
}
