//! The site time zone (an IANA name or a fixed offset) and the local calendar it defines: which
//! UTC instants a site-local time stands for, and where each local month starts. Ingest uses it
//! to turn zoneless times into instants; the engine uses it to assign calendar months.

use chrono::{Datelike, FixedOffset, LocalResult, NaiveDate, NaiveDateTime, Offset, TimeZone};
use chrono_tz::Tz;

/// The site time zone: an IANA name or a fixed offset.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SiteZone {
    Named(Tz),
    Fixed(FixedOffset),
}

fn two_digits(a: u8, b: u8) -> Option<i32> {
    (a.is_ascii_digit() && b.is_ascii_digit())
        .then(|| i32::from(a - b'0') * 10 + i32::from(b - b'0'))
}

impl SiteZone {
    /// `UTC`, an IANA name such as `Europe/Berlin`, or a fixed offset such as `+01:00` / `-05:00`.
    pub fn parse(text: &str) -> Result<SiteZone, String> {
        let t = text.trim();
        if let [sign @ (b'+' | b'-'), h1, h2, b':', m1, m2] = t.as_bytes()
            && let (Some(h), Some(m)) = (two_digits(*h1, *h2), two_digits(*m1, *m2))
            && h <= 23
            && m <= 59
        {
            let secs = h * 3600 + m * 60;
            let secs = if *sign == b'+' { secs } else { -secs };
            return Ok(SiteZone::Fixed(
                FixedOffset::east_opt(secs).expect("offset within a day"),
            ));
        }
        t.parse::<Tz>().map(SiteZone::Named).map_err(|_| {
            format!("`{text}` is not a time zone: give an IANA name such as Europe/Berlin or America/Chicago, or a fixed offset such as +01:00")
        })
    }

    pub fn name(&self) -> String {
        match self {
            SiteZone::Named(tz) => tz.name().to_string(),
            SiteZone::Fixed(off) => off.to_string(),
        }
    }

    /// The zone's offset (seconds east of UTC) for a local time: one, two (a daylight-saving
    /// overlap) or none (a gap).
    pub fn resolve_local(&self, local: &NaiveDateTime) -> LocalResult<i32> {
        match self {
            SiteZone::Named(tz) => tz
                .offset_from_local_datetime(local)
                .map(|o| o.fix().local_minus_utc()),
            SiteZone::Fixed(off) => LocalResult::Single(off.local_minus_utc()),
        }
    }

    /// The UTC instant (microseconds) of a local time; in an overlap the earlier one; in a gap
    /// the first local time after it that exists (minute by minute).
    pub fn instant_of_local(&self, local: NaiveDateTime) -> i64 {
        let mut t = local;
        for _ in 0..(24 * 60) {
            if let Some(offset) = self.resolve_local(&t).earliest() {
                return t.and_utc().timestamp_micros() - i64::from(offset) * 1_000_000;
            }
            t += chrono::Duration::minutes(1);
        }
        local.and_utc().timestamp_micros()
    }

    /// The local calendar year and month of a UTC instant (microseconds).
    pub fn year_month(&self, instant_us: i64) -> (i32, u32) {
        let utc = chrono::DateTime::from_timestamp_micros(instant_us).expect("instant in range");
        match self {
            SiteZone::Named(tz) => {
                let t = utc.with_timezone(tz);
                (t.year(), t.month())
            }
            SiteZone::Fixed(off) => {
                let t = utc.with_timezone(off);
                (t.year(), t.month())
            }
        }
    }

    /// The local time of a UTC instant (microseconds), `YYYY-MM-DD HH:MM`.
    pub fn local_text(&self, instant_us: i64) -> String {
        let Some(utc) = chrono::DateTime::from_timestamp_micros(instant_us) else {
            return String::new();
        };
        let local = match self {
            SiteZone::Named(tz) => utc.with_timezone(tz).naive_local(),
            SiteZone::Fixed(off) => utc.with_timezone(off).naive_local(),
        };
        local.format("%Y-%m-%d %H:%M").to_string()
    }

    /// Local months from the month of `from_us` to the month of `to_us`, inclusive: each as
    /// (`YYYY-MM`, start, end) with start and end the UTC instants (microseconds) of local
    /// midnight on its first day and on the next month's first day.
    pub fn local_months(&self, from_us: i64, to_us: i64) -> Vec<(String, i64, i64)> {
        let (mut y, mut m) = self.year_month(from_us.min(to_us));
        let last = self.year_month(to_us.max(from_us));
        let midnight = |y: i32, m: u32| {
            let date = NaiveDate::from_ymd_opt(y, m, 1).expect("a first day of a month");
            self.instant_of_local(date.and_hms_opt(0, 0, 0).expect("midnight"))
        };
        let mut out = Vec::new();
        loop {
            let (ny, nm) = if m == 12 { (y + 1, 1) } else { (y, m + 1) };
            out.push((format!("{y:04}-{m:02}"), midnight(y, m), midnight(ny, nm)));
            if (y, m) >= last {
                break;
            }
            (y, m) = (ny, nm);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn local_text_follows_the_zone_and_its_daylight_saving() {
        // Vienna is UTC+1 in winter and UTC+2 in summer (EU rules: the change is at 01:00 UTC
        // on the last Sunday of March and October; common practice).
        let z = SiteZone::parse("Europe/Vienna").unwrap();
        let us = |s: &str| {
            chrono::NaiveDateTime::parse_from_str(s, "%Y-%m-%dT%H:%M")
                .unwrap()
                .and_utc()
                .timestamp_micros()
        };
        assert_eq!(z.local_text(us("2024-01-15T12:00")), "2024-01-15 13:00");
        assert_eq!(z.local_text(us("2024-07-15T12:00")), "2024-07-15 14:00");
        let f = SiteZone::parse("-05:00").unwrap();
        assert_eq!(f.local_text(us("2024-01-01T03:00")), "2023-12-31 22:00");
    }

    #[test]
    fn local_months_start_at_local_midnight_across_daylight_saving() {
        let z = SiteZone::parse("Europe/Vienna").unwrap();
        // 2025-03-15 and 2025-04-15 (UTC): March starts at 2025-02-28T23:00Z (CET, +01:00),
        // April at 2025-03-31T22:00Z (CEST, +02:00), May at 2025-04-30T22:00Z.
        let from = chrono::DateTime::parse_from_rfc3339("2025-03-15T00:00:00Z").unwrap();
        let to = chrono::DateTime::parse_from_rfc3339("2025-04-15T00:00:00Z").unwrap();
        let months = z.local_months(from.timestamp_micros(), to.timestamp_micros());
        let at = |s: &str| {
            chrono::DateTime::parse_from_rfc3339(s)
                .unwrap()
                .timestamp_micros()
        };
        assert_eq!(
            months,
            vec![
                (
                    "2025-03".to_string(),
                    at("2025-02-28T23:00:00Z"),
                    at("2025-03-31T22:00:00Z")
                ),
                (
                    "2025-04".to_string(),
                    at("2025-03-31T22:00:00Z"),
                    at("2025-04-30T22:00:00Z")
                ),
            ]
        );
        // March 2025 in Vienna is 31 days less the hour lost on 30 March.
        let (_, s, e) = &months[0];
        assert_eq!((e - s) / 3_600_000_000, 31 * 24 - 1);
    }

    #[test]
    fn fixed_offsets_and_bad_names() {
        let z = SiteZone::parse("-05:00").unwrap();
        let at = |s: &str| {
            chrono::DateTime::parse_from_rfc3339(s)
                .unwrap()
                .timestamp_micros()
        };
        let months = z.local_months(at("2024-12-31T23:00:00Z"), at("2025-01-01T06:00:00Z"));
        assert_eq!(months[0].0, "2024-12");
        assert_eq!(months[0].2, at("2025-01-01T05:00:00Z"));
        assert_eq!(months.len(), 2);
        assert!(SiteZone::parse("Mars/Olympus").is_err());
    }
}
