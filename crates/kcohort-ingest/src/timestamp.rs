//! Timestamps of the input contract and the site clock that turns zoneless ones into instants.
//!
//! Accepted forms, exactly (anything else is rejected with a hint naming them):
//! `YYYY-MM-DD`, `YYYY-MM-DDTHH:MM`, `YYYY-MM-DDTHH:MM:SS`, `YYYY-MM-DDTHH:MM:SS.f` (1–9 fraction
//! digits, kept to the microsecond), each time form optionally followed by `Z` or `±HH:MM`.
//! A date alone means local midnight. A zoneless time is read in the site time zone: one that does
//! not exist there (skipped by a daylight-saving change) is rejected; one that exists twice (the
//! hour repeated when clocks go back) takes the earlier instant and is counted.

use crate::context::FoldHasher;
use chrono::{LocalResult, NaiveDate, NaiveDateTime, NaiveTime};
use std::collections::HashMap;
use std::hash::BuildHasherDefault;

/// The expected form, quoted in every timestamp error.
pub const TIMESTAMP_FORMS: &str = "2026-03-31T14:05, 2026-03-31T14:05:00, 2026-03-31T14:05:00.250, \
optionally with Z or +01:00, or a date 2026-03-31";

/// A timestamp as written: either a zoneless local time or an instant with a known offset.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WrittenTime {
    Local(NaiveDateTime),
    /// Microseconds since 1970-01-01T00:00Z.
    Instant(i64),
}

/// Parse the contract's timestamp grammar. Returns `None` for anything else.
pub fn parse_written(text: &[u8]) -> Option<WrittenTime> {
    let b = text;
    if b.len() < 10 {
        return None;
    }
    let year = digits(b, 0, 4)? as i32;
    if b[4] != b'-' || b[7] != b'-' {
        return None;
    }
    let month = digits(b, 5, 2)?;
    let day = digits(b, 8, 2)?;
    let date = NaiveDate::from_ymd_opt(year, month, day)?;
    if b.len() == 10 {
        return Some(WrittenTime::Local(date.and_time(NaiveTime::MIN)));
    }
    if b[10] != b'T' || b.len() < 16 || b[13] != b':' {
        return None;
    }
    let hour = digits(b, 11, 2)?;
    let minute = digits(b, 14, 2)?;
    let mut pos = 16;
    let mut second = 0;
    let mut micros = 0u32;
    if b.len() > pos && b[pos] == b':' {
        second = digits(b, pos + 1, 2)?;
        pos += 3;
        if b.len() > pos && b[pos] == b'.' {
            pos += 1;
            let start = pos;
            while pos < b.len() && b[pos].is_ascii_digit() {
                pos += 1;
            }
            let n = pos - start;
            if n == 0 || n > 9 {
                return None;
            }
            let mut frac = 0u32;
            for (i, d) in b[start..pos].iter().enumerate() {
                if i < 6 {
                    frac = frac * 10 + u32::from(d - b'0');
                }
            }
            micros = frac * 10u32.pow(6u32.saturating_sub(n as u32));
        }
    }
    let time = NaiveTime::from_hms_micro_opt(hour, minute, second, micros)?;
    let naive = date.and_time(time);
    match &b[pos..] {
        [] => Some(WrittenTime::Local(naive)),
        [b'Z'] => Some(WrittenTime::Instant(naive.and_utc().timestamp_micros())),
        [sign @ (b'+' | b'-'), h1, h2, b':', m1, m2] => {
            let hh = digits(&[*h1, *h2], 0, 2)?;
            let mm = digits(&[*m1, *m2], 0, 2)?;
            if hh > 23 || mm > 59 {
                return None;
            }
            let offset = (hh * 3600 + mm * 60) as i64 * 1_000_000;
            let utc = naive.and_utc().timestamp_micros();
            Some(WrittenTime::Instant(if *sign == b'+' {
                utc - offset
            } else {
                utc + offset
            }))
        }
        _ => None,
    }
}

fn digits(b: &[u8], start: usize, n: usize) -> Option<u32> {
    let slice = b.get(start..start + n)?;
    let mut v = 0u32;
    for &d in slice {
        if !d.is_ascii_digit() {
            return None;
        }
        v = v * 10 + u32::from(d - b'0');
    }
    Some(v)
}

pub use kcohort_model::site_zone::SiteZone;

/// How a zoneless time resolved.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Resolved {
    Exact(i64),
    /// Ambiguous (DST overlap): the earlier instant.
    Earlier(i64),
    /// Does not exist in the zone (DST gap).
    Nonexistent,
}

/// Turns written times into UTC microseconds, caching the zone offset per local hour (zone
/// transitions fall on whole minutes, so an hour whose start and end share one unambiguous offset
/// has that offset throughout).
#[derive(Debug)]
pub struct SiteClock {
    zone: SiteZone,
    hour_offsets: HashMap<i64, i32, BuildHasherDefault<FoldHasher>>,
}

impl SiteClock {
    pub fn new(zone: SiteZone) -> SiteClock {
        SiteClock {
            zone,
            hour_offsets: HashMap::default(),
        }
    }

    pub fn zone(&self) -> SiteZone {
        self.zone
    }

    pub fn resolve(&mut self, written: WrittenTime) -> Resolved {
        let local = match written {
            WrittenTime::Instant(us) => return Resolved::Exact(us),
            WrittenTime::Local(local) => local,
        };
        let local_us = local.and_utc().timestamp_micros();
        let hour = local_us.div_euclid(3_600_000_000);
        if let Some(offset) = self.hour_offsets.get(&hour) {
            return Resolved::Exact(local_us - i64::from(*offset) * 1_000_000);
        }
        let result = self.zone.resolve_local(&local);
        if let LocalResult::Single(offset) = result {
            let hour_start = chrono::DateTime::from_timestamp_micros(hour * 3_600_000_000)
                .expect("in range")
                .naive_utc();
            let hour_end = hour_start + chrono::Duration::microseconds(3_600_000_000 - 1);
            if self.zone.resolve_local(&hour_start) == LocalResult::Single(offset)
                && self.zone.resolve_local(&hour_end) == LocalResult::Single(offset)
            {
                self.hour_offsets.insert(hour, offset);
            }
        }
        match result {
            LocalResult::Single(offset) => {
                Resolved::Exact(local_us - i64::from(offset) * 1_000_000)
            }
            LocalResult::Ambiguous(a, b) => {
                Resolved::Earlier(local_us - i64::from(a.max(b)) * 1_000_000)
            }
            LocalResult::None => Resolved::Nonexistent,
        }
    }
}

/// Microseconds of 1900-01-01T00:00Z: earlier times are out of range.
pub const EARLIEST_MICROS: i64 = -2_208_988_800_000_000;

/// Format UTC microseconds as RFC 3339 with `Z` (for the manifest and messages).
pub fn format_instant(us: i64) -> String {
    chrono::DateTime::from_timestamp_micros(us)
        .map(|t| t.format("%Y-%m-%dT%H:%M:%S%.6fZ").to_string())
        .unwrap_or_else(|| format!("{us} µs"))
}

/// An RFC 3339 instant shown in the site's local time for people, e.g.
/// `2026-01-05 00:00 Europe/Vienna (2026-01-04 23:00 UTC)`. Unparseable input is returned as is.
pub fn describe_instant(rfc3339: &str, zone: &str) -> String {
    let (Ok(t), Ok(z)) = (
        chrono::DateTime::parse_from_rfc3339(rfc3339),
        SiteZone::parse(zone),
    ) else {
        return rfc3339.to_string();
    };
    let local = match z {
        SiteZone::Named(tz) => t.with_timezone(&tz).format("%Y-%m-%d %H:%M").to_string(),
        SiteZone::Fixed(off) => t.with_timezone(&off).format("%Y-%m-%d %H:%M").to_string(),
    };
    let utc = t.to_utc().format("%Y-%m-%d %H:%M").to_string();
    if utc == local {
        format!("{local} {zone}")
    } else {
        format!("{local} {zone} ({utc} UTC)")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn instant(text: &str) -> i64 {
        chrono::DateTime::parse_from_rfc3339(text)
            .unwrap()
            .timestamp_micros()
    }

    fn check(zone: &str, written: &str, expected: Option<Resolved>) {
        let mut clock = SiteClock::new(SiteZone::parse(zone).unwrap());
        let got = parse_written(written.as_bytes()).map(|w| clock.resolve(w));
        assert_eq!(got, expected, "{zone} {written}");
        // The cached path must agree with the first lookup.
        let again = parse_written(written.as_bytes()).map(|w| clock.resolve(w));
        assert_eq!(again, expected, "cached {zone} {written}");
    }

    #[test]
    fn accepted_forms() {
        let exact = |s: &str| Some(Resolved::Exact(instant(s)));
        check("UTC", "2026-03-31", exact("2026-03-31T00:00:00Z"));
        check("UTC", "2026-03-31T14:05", exact("2026-03-31T14:05:00Z"));
        check("UTC", "2026-03-31T14:05:07", exact("2026-03-31T14:05:07Z"));
        check(
            "UTC",
            "2026-03-31T14:05:07.25",
            exact("2026-03-31T14:05:07.250Z"),
        );
        check(
            "UTC",
            "2026-03-31T14:05:07.123456789",
            exact("2026-03-31T14:05:07.123456Z"),
        );
        check(
            "Europe/Berlin",
            "2026-01-15T10:00Z",
            exact("2026-01-15T10:00:00Z"),
        );
        check(
            "Europe/Berlin",
            "2026-01-15T10:00+02:00",
            exact("2026-01-15T08:00:00Z"),
        );
        check(
            "UTC",
            "2026-01-15T10:00-05:30",
            exact("2026-01-15T15:30:00Z"),
        );
        // Site local time: Berlin is UTC+1 in winter, UTC+2 in summer (IANA tz database).
        check(
            "Europe/Berlin",
            "2026-01-15T10:00",
            exact("2026-01-15T09:00:00Z"),
        );
        check(
            "Europe/Berlin",
            "2026-07-15T10:00",
            exact("2026-07-15T08:00:00Z"),
        );
        check("+05:30", "2026-07-15T10:00", exact("2026-07-15T04:30:00Z"));
    }

    #[test]
    fn rejected_forms() {
        for bad in [
            "31/03/2026 14:05",
            "2026-03-31 14:05",
            "2026-3-31",
            "2026-02-30",
            "2026-03-31T24:00",
            "2026-03-31T14:5",
            "2026-03-31T14:05:07.",
            "2026-03-31T14:05:07.1234567890",
            "2026-03-31T14:05+0100",
            "2026-03-31T14:05z",
            "2026-03-31T14:05:07Zjunk",
            "",
            "2026",
        ] {
            assert_eq!(parse_written(bad.as_bytes()), None, "{bad}");
        }
    }

    #[test]
    fn daylight_saving_gap_and_overlap_in_berlin() {
        // EU rule (IANA tz database): clocks go forward 2026-03-29 02:00 -> 03:00 and back
        // 2026-10-25 03:00 -> 02:00 local time.
        check(
            "Europe/Berlin",
            "2026-03-29T02:30",
            Some(Resolved::Nonexistent),
        );
        check(
            "Europe/Berlin",
            "2026-03-29T01:59",
            Some(Resolved::Exact(instant("2026-03-29T00:59:00Z"))),
        );
        check(
            "Europe/Berlin",
            "2026-03-29T03:00",
            Some(Resolved::Exact(instant("2026-03-29T01:00:00Z"))),
        );
        check(
            "Europe/Berlin",
            "2026-10-25T02:30",
            Some(Resolved::Earlier(instant("2026-10-25T00:30:00Z"))),
        );
        check(
            "Europe/Berlin",
            "2026-10-25T03:30",
            Some(Resolved::Exact(instant("2026-10-25T02:30:00Z"))),
        );
    }

    #[test]
    fn instants_are_described_in_site_time() {
        assert_eq!(
            describe_instant("2026-01-04T23:00:00.000000Z", "Europe/Vienna"),
            "2026-01-05 00:00 Europe/Vienna (2026-01-04 23:00 UTC)"
        );
        assert_eq!(
            describe_instant("2026-01-04T23:00:00Z", "UTC"),
            "2026-01-04 23:00 UTC"
        );
        assert_eq!(describe_instant("garbage", "UTC"), "garbage");
    }

    #[test]
    fn zone_names() {
        assert!(SiteZone::parse("UTC").is_ok());
        assert!(SiteZone::parse("America/Chicago").is_ok());
        assert!(SiteZone::parse("-03:00").is_ok());
        let err = SiteZone::parse("Mars/Olympus").unwrap_err();
        assert!(err.contains("IANA"), "{err}");
        assert!(SiteZone::parse("+25:00").is_err());
    }
}
