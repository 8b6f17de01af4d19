//! Site time: instants are simulated as UTC seconds and written in the site's local time without
//! an offset, as extracts from hospital systems usually are. The UTC offsets of the simulated
//! period are read once from the IANA database (chrono-tz) into a small table, so formatting a
//! time is arithmetic; a test checks the table against chrono-tz for every hour of the period.

use crate::error::SynthError;
use chrono::{NaiveDate, Offset, TimeZone};
use chrono_tz::Tz;

pub const SECONDS_PER_HOUR: i64 = 3600;
pub const SECONDS_PER_DAY: i64 = 86_400;

/// How a timestamp is written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeForm {
    /// `YYYY-MM-DDTHH:MM` (seconds dropped).
    Minutes,
    /// `YYYY-MM-DDTHH:MM:SS`.
    Seconds,
}

/// The malformed forms planted as `bad_timestamp` defects.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BadTimeForm {
    /// `31/03/2025 14:05`
    DaySlashMonth,
    /// `31.03.2025 14:05`
    DayDotMonth,
}

#[derive(Debug, Clone)]
pub struct SiteTime {
    /// (first UTC second of the span, UTC offset in seconds during it), sorted by time.
    spans: Vec<(i64, i32)>,
    /// The distinct offsets of the table (two for a zone with daylight-saving time).
    offsets: Vec<i32>,
}

impl SiteTime {
    /// Reads the offsets of `zone_name` for `[from_utc, to_utc]` (plus a margin).
    pub fn new(zone_name: &str, from_utc: i64, to_utc: i64) -> Result<SiteTime, SynthError> {
        let zone: Tz = zone_name.parse().map_err(|_| SynthError::InvalidConfig {
            field: "site_timezone",
            expected: "an IANA time zone name such as Europe/Vienna or America/Chicago".into(),
            found: zone_name.to_string(),
        })?;
        let offset_at = |utc: i64| -> i32 {
            let dt = chrono::DateTime::from_timestamp(utc, 0)
                .expect("in range")
                .naive_utc();
            zone.offset_from_utc_datetime(&dt).fix().local_minus_utc()
        };
        let start = from_utc - 40 * SECONDS_PER_DAY;
        let end = to_utc + 40 * SECONDS_PER_DAY;
        let mut spans = vec![(i64::MIN, offset_at(start))];
        let mut t = start;
        while t < end {
            let next = t + SECONDS_PER_HOUR;
            let (a, b) = (offset_at(t), offset_at(next));
            if a != b {
                // Binary search the first second with the new offset.
                let (mut lo, mut hi) = (t, next);
                while hi - lo > 1 {
                    let mid = lo + (hi - lo) / 2;
                    if offset_at(mid) == a {
                        lo = mid;
                    } else {
                        hi = mid;
                    }
                }
                spans.push((hi, b));
            }
            t = next;
        }
        let mut offsets: Vec<i32> = spans.iter().map(|s| s.1).collect();
        offsets.sort_unstable();
        offsets.dedup();
        Ok(SiteTime { spans, offsets })
    }

    pub fn offset_at(&self, utc: i64) -> i32 {
        let i = self.spans.partition_point(|s| s.0 <= utc);
        self.spans[i - 1].1
    }

    /// Local wall-clock seconds since 1970-01-01T00:00 local.
    pub fn local(&self, utc: i64) -> i64 {
        utc + i64::from(self.offset_at(utc))
    }

    /// The earliest instant whose local time is `local` (so an ambiguous time maps to its first
    /// occurrence, as readers of zoneless extracts do); a time in a spring-forward gap maps to
    /// the instant the clocks jumped past it.
    pub fn instant_of_local(&self, local: i64) -> i64 {
        let mut best: Option<i64> = None;
        for &o in &self.offsets {
            let utc = local - i64::from(o);
            if self.offset_at(utc) == o {
                best = Some(best.map_or(utc, |b: i64| b.min(utc)));
            }
        }
        best.unwrap_or_else(|| {
            local - i64::from(self.offset_at(local - i64::from(self.offsets[0])))
        })
    }

    /// The instant of local midnight starting the given date.
    pub fn midnight(&self, year: i32, month: u32, day: u32) -> i64 {
        self.instant_of_local(days_from_civil(year, month, day) * SECONDS_PER_DAY)
    }

    /// The first instant strictly after `after` whose local time of day is `seconds_of_day`.
    pub fn next_time_of_day(&self, after: i64, seconds_of_day: i64) -> i64 {
        let local = self.local(after);
        let day = local.div_euclid(SECONDS_PER_DAY);
        let mut candidate = self.instant_of_local(day * SECONDS_PER_DAY + seconds_of_day);
        if candidate <= after {
            candidate = self.instant_of_local((day + 1) * SECONDS_PER_DAY + seconds_of_day);
        }
        candidate
    }

    /// Seconds since local midnight.
    pub fn seconds_of_day(&self, utc: i64) -> i64 {
        self.local(utc).rem_euclid(SECONDS_PER_DAY)
    }

    /// Writes the local time of `utc` in the given form.
    pub fn write(&self, out: &mut Vec<u8>, utc: i64, form: TimeForm) {
        write_local(out, self.local(utc), form);
    }

    /// Writes the local time of `utc` in a malformed form.
    pub fn write_bad(&self, out: &mut Vec<u8>, utc: i64, form: BadTimeForm) {
        let local = self.local(utc);
        let (y, m, d) = civil_from_days(local.div_euclid(SECONDS_PER_DAY));
        let s = local.rem_euclid(SECONDS_PER_DAY);
        let sep = match form {
            BadTimeForm::DaySlashMonth => b'/',
            BadTimeForm::DayDotMonth => b'.',
        };
        push2(out, d);
        out.push(sep);
        push2(out, m);
        out.push(sep);
        push4(out, y);
        out.push(b' ');
        push2(out, (s / 3600) as u32);
        out.push(b':');
        push2(out, (s / 60 % 60) as u32);
    }

    /// The local wall-clock value of `utc` as it will read back after being written in `form`.
    pub fn written_local(&self, utc: i64, form: TimeForm) -> i64 {
        let local = self.local(utc);
        match form {
            TimeForm::Seconds => local,
            TimeForm::Minutes => local - local.rem_euclid(60),
        }
    }

    /// RFC 3339 in UTC, e.g. `2026-01-04T23:00:00Z`.
    pub fn rfc3339_utc(utc: i64) -> String {
        let mut out = Vec::with_capacity(20);
        write_local(&mut out, utc, TimeForm::Seconds);
        out.push(b'Z');
        String::from_utf8(out).expect("ascii")
    }

    /// Local form without offset, e.g. `2026-01-05T00:00`.
    pub fn local_string(&self, utc: i64) -> String {
        let mut out = Vec::with_capacity(19);
        self.write(&mut out, utc, TimeForm::Minutes);
        String::from_utf8(out).expect("ascii")
    }
}

/// Parses `YYYY-MM` into (year, month).
pub fn parse_year_month(text: &str) -> Option<(i32, u32)> {
    let (y, m) = text.split_once('-')?;
    if y.len() != 4 || m.len() != 2 {
        return None;
    }
    let y: i32 = y.parse().ok()?;
    let m: u32 = m.parse().ok()?;
    NaiveDate::from_ymd_opt(y, m, 1)?;
    Some((y, m))
}

/// Months since year 0, for month arithmetic.
pub fn month_number(year: i32, month: u32) -> i32 {
    year * 12 + month as i32 - 1
}

pub fn month_from_number(n: i32) -> (i32, u32) {
    (n.div_euclid(12), (n.rem_euclid(12) + 1) as u32)
}

pub fn month_label(year: i32, month: u32) -> String {
    format!("{year:04}-{month:02}")
}

fn write_local(out: &mut Vec<u8>, local: i64, form: TimeForm) {
    let (y, m, d) = civil_from_days(local.div_euclid(SECONDS_PER_DAY));
    let s = local.rem_euclid(SECONDS_PER_DAY);
    push4(out, y);
    out.push(b'-');
    push2(out, m);
    out.push(b'-');
    push2(out, d);
    out.push(b'T');
    push2(out, (s / 3600) as u32);
    out.push(b':');
    push2(out, (s / 60 % 60) as u32);
    if form == TimeForm::Seconds {
        out.push(b':');
        push2(out, (s % 60) as u32);
    }
}

fn push2(out: &mut Vec<u8>, v: u32) {
    out.push(b'0' + (v / 10 % 10) as u8);
    out.push(b'0' + (v % 10) as u8);
}

fn push4(out: &mut Vec<u8>, v: i32) {
    let v = v as u32;
    out.push(b'0' + (v / 1000 % 10) as u8);
    out.push(b'0' + (v / 100 % 10) as u8);
    out.push(b'0' + (v / 10 % 10) as u8);
    out.push(b'0' + (v % 10) as u8);
}

/// Days since 1970-01-01 of a proleptic Gregorian date (Howard Hinnant's `days_from_civil`).
pub fn days_from_civil(year: i32, month: u32, day: u32) -> i64 {
    let y = i64::from(year) - i64::from(month <= 2);
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let m = i64::from(month);
    let doy = (153 * (if m > 2 { m - 3 } else { m + 9 }) + 2) / 5 + i64::from(day) - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// Inverse of [`days_from_civil`] (Howard Hinnant's `civil_from_days`).
pub fn civil_from_days(days: i64) -> (i32, u32, u32) {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    ((y + i64::from(m <= 2)) as i32, m, d)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn vienna() -> SiteTime {
        let from = days_from_civil(2024, 1, 1) * SECONDS_PER_DAY;
        let to = days_from_civil(2026, 1, 5) * SECONDS_PER_DAY;
        SiteTime::new("Europe/Vienna", from, to).unwrap()
    }

    #[test]
    fn civil_day_round_trip() {
        for days in -800_000..800_000i64 {
            if days % 997 != 0 {
                continue;
            }
            let (y, m, d) = civil_from_days(days);
            assert_eq!(days_from_civil(y, m, d), days);
        }
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        assert_eq!(civil_from_days(days_from_civil(2024, 2, 29)), (2024, 2, 29));
    }

    #[test]
    fn formatting_matches_chrono_tz_every_hour_of_the_period() {
        let st = vienna();
        let zone: Tz = "Europe/Vienna".parse().unwrap();
        let from = days_from_civil(2023, 12, 1) * SECONDS_PER_DAY;
        let to = days_from_civil(2026, 2, 1) * SECONDS_PER_DAY;
        let mut t = from + 17; // odd seconds, to exercise the seconds field
        let mut buf = Vec::new();
        while t < to {
            buf.clear();
            st.write(&mut buf, t, TimeForm::Seconds);
            let expected = chrono::DateTime::from_timestamp(t, 0)
                .unwrap()
                .with_timezone(&zone)
                .format("%Y-%m-%dT%H:%M:%S")
                .to_string();
            assert_eq!(std::str::from_utf8(&buf).unwrap(), expected);
            t += 3593; // not a divisor of an hour, so minutes and seconds vary
        }
    }

    #[test]
    fn dst_changes_of_2024_in_vienna() {
        // EU rule: clocks change at 01:00 UTC on the last Sundays of March and October
        // (Directive 2000/84/EC). 2024: 31 March and 27 October.
        let st = vienna();
        let spring = days_from_civil(2024, 3, 31) * SECONDS_PER_DAY + SECONDS_PER_HOUR;
        assert_eq!(st.offset_at(spring - 1), 3600);
        assert_eq!(st.offset_at(spring), 7200);
        let autumn = days_from_civil(2024, 10, 27) * SECONDS_PER_DAY + SECONDS_PER_HOUR;
        assert_eq!(st.offset_at(autumn - 1), 7200);
        assert_eq!(st.offset_at(autumn), 3600);
        // 02:30 local on 27 October happens twice; the earlier instant is 00:30 UTC.
        let local = days_from_civil(2024, 10, 27) * SECONDS_PER_DAY + 2 * 3600 + 1800;
        assert_eq!(st.instant_of_local(local), autumn - 1800);
        // 02:30 local on 31 March does not exist.
        let gap = days_from_civil(2024, 3, 31) * SECONDS_PER_DAY + 2 * 3600 + 1800;
        let mapped = st.instant_of_local(gap);
        assert!(st.local(mapped) != gap);
    }

    #[test]
    fn next_time_of_day_is_strictly_after() {
        let st = vienna();
        let six = 6 * 3600;
        let t = st.midnight(2024, 5, 2) + six;
        assert_eq!(st.next_time_of_day(t - 1, six), t);
        assert_eq!(st.next_time_of_day(t, six), st.midnight(2024, 5, 3) + six);
        assert_eq!(st.seconds_of_day(t), six);
    }

    #[test]
    fn bad_forms() {
        let st = vienna();
        let t = st.midnight(2025, 3, 31) + 14 * 3600 + 5 * 60;
        let mut buf = Vec::new();
        st.write_bad(&mut buf, t, BadTimeForm::DaySlashMonth);
        assert_eq!(buf, b"31/03/2025 14:05");
        buf.clear();
        st.write_bad(&mut buf, t, BadTimeForm::DayDotMonth);
        assert_eq!(buf, b"31.03.2025 14:05");
        buf.clear();
        st.write(&mut buf, t, TimeForm::Minutes);
        assert_eq!(buf, b"2025-03-31T14:05");
        assert_eq!(SiteTime::rfc3339_utc(0), "1970-01-01T00:00:00Z");
    }

    #[test]
    fn unknown_zone_is_a_config_error() {
        let err = SiteTime::new("Europe/Larkmoor", 0, 1).unwrap_err();
        assert!(err.to_string().contains("site_timezone"), "{err}");
    }

    #[test]
    fn year_month_parsing() {
        assert_eq!(parse_year_month("2025-04"), Some((2025, 4)));
        for bad in ["2025-13", "25-04", "2025/04", "2025-4", ""] {
            assert_eq!(parse_year_month(bad), None, "{bad}");
        }
        assert_eq!(month_from_number(month_number(2024, 12) + 1), (2025, 1));
    }
}
