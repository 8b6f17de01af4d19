//! Follow-up records, the common input of the survival estimators.
//!
//! A subject (or one interval of a subject, in counting-process form) is at risk on the half-open
//! interval (entry, exit] and either has the event at `exit` or is censored there. Right-censored
//! data use `entry = -inf` ("at risk from the start"); late entry (left truncation) and
//! time-varying covariates use a finite entry, as in R's `Surv(start, stop, event)` (Andersen &
//! Gill, Ann Stat 1982;10:1100). Times are plain numbers in one unit chosen by the caller.
//!
//! The number at risk at time t is #{entry < t <= exit} = #{exit >= t} - #{entry >= t} (a row that
//! enters at or after t also exits after t), which is what lets every estimator here sort exits and
//! entries once and then sweep.

use crate::StatsError;
use rayon::prelude::*;

/// One at-risk interval (entry, exit] that ends in an event or in censoring.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FollowUp {
    /// Start of the at-risk interval, exclusive; `f64::NEG_INFINITY` when at risk from the start.
    pub entry: f64,
    /// End of the at-risk interval, inclusive: event or censoring time.
    pub exit: f64,
    /// Whether the interval ends in the event (false: censored).
    pub event: bool,
}

impl FollowUp {
    /// Right-censored follow-up: at risk from the start until `exit`.
    pub fn new(exit: f64, event: bool) -> Self {
        FollowUp {
            entry: f64::NEG_INFINITY,
            exit,
            event,
        }
    }

    /// Follow-up with late entry: at risk on (entry, exit].
    pub fn with_entry(entry: f64, exit: f64, event: bool) -> Self {
        FollowUp { entry, exit, event }
    }
}

/// One at-risk interval (entry, exit] ending in one of several competing events.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CompetingFollowUp {
    /// Start of the at-risk interval, exclusive; `f64::NEG_INFINITY` when at risk from the start.
    pub entry: f64,
    /// End of the at-risk interval, inclusive.
    pub exit: f64,
    /// 0 = censored at `exit`; 1..=k = event of type k at `exit`.
    pub cause: u32,
}

impl CompetingFollowUp {
    /// Right-censored competing-risks follow-up, at risk from the start.
    pub fn new(exit: f64, cause: u32) -> Self {
        CompetingFollowUp {
            entry: f64::NEG_INFINITY,
            exit,
            cause,
        }
    }

    /// Competing-risks follow-up with late entry: at risk on (entry, exit].
    pub fn with_entry(entry: f64, exit: f64, cause: u32) -> Self {
        CompetingFollowUp { entry, exit, cause }
    }
}

/// Checks that every interval is a valid (entry, exit]; names the first bad row.
pub(crate) fn validate_intervals(
    n: usize,
    interval: impl Fn(usize) -> (f64, f64) + Sync,
) -> Result<(), StatsError> {
    let bad = (0..n).into_par_iter().find_first(|&i| {
        let (entry, exit) = interval(i);
        !(exit.is_finite() && !entry.is_nan() && entry != f64::INFINITY && entry < exit)
    });
    match bad {
        None => Ok(()),
        Some(i) => {
            let (entry, exit) = interval(i);
            Err(StatsError::invalid(
                format!("follow-up row {i}"),
                "a finite exit time after the entry time (entry < exit; entry may be -inf)",
                format!("entry {entry}, exit {exit}"),
            ))
        }
    }
}

/// Checks that a per-row column has one value per follow-up row.
pub(crate) fn check_length(what: &str, found: usize, rows: usize) -> Result<(), StatsError> {
    if found == rows {
        Ok(())
    } else {
        Err(StatsError::invalid(
            what,
            format!("one value per follow-up row ({rows})"),
            found,
        ))
    }
}

/// Maps a time to a u64 whose unsigned order is the numeric order of the time (-0 and +0 equal).
pub(crate) fn time_key(time: f64) -> u64 {
    let bits = (time + 0.0).to_bits();
    if bits >> 63 == 1 {
        !bits
    } else {
        bits | (1 << 63)
    }
}

/// Inverse of [`time_key`].
pub(crate) fn key_time(key: u64) -> f64 {
    if key >> 63 == 1 {
        f64::from_bits(key & !(1 << 63))
    } else {
        f64::from_bits(!key)
    }
}

/// Sorts keys ascending: least-significant-digit radix sort with 8-bit digits, skipping digits that
/// are the same in every key (times in whole days leave most of the low mantissa bytes zero).
pub(crate) fn sort_keys(keys: &mut Vec<u64>) {
    const SMALL: usize = 4096;
    let n = keys.len();
    if n < SMALL {
        keys.sort_unstable();
        return;
    }
    let counts = keys
        .par_chunks(1 << 16)
        .fold(
            || vec![0usize; 8 * 256],
            |mut counts, chunk| {
                for &key in chunk {
                    for digit in 0..8 {
                        counts[digit * 256 + ((key >> (8 * digit)) & 0xFF) as usize] += 1;
                    }
                }
                counts
            },
        )
        .reduce(
            || vec![0usize; 8 * 256],
            |mut a, b| {
                a.iter_mut().zip(&b).for_each(|(x, y)| *x += y);
                a
            },
        );
    let mut buffer = vec![0u64; n];
    let mut sorted_in_buffer = false;
    for digit in 0..8 {
        let count = &counts[digit * 256..(digit + 1) * 256];
        if count.contains(&n) {
            continue;
        }
        let mut offset = [0usize; 256];
        let mut running = 0;
        for (o, c) in offset.iter_mut().zip(count) {
            *o = running;
            running += c;
        }
        let (source, target) = if sorted_in_buffer {
            (&buffer[..], &mut keys[..])
        } else {
            (&keys[..], &mut buffer[..])
        };
        for &key in source {
            let bucket = ((key >> (8 * digit)) & 0xFF) as usize;
            target[offset[bucket]] = key;
            offset[bucket] += 1;
        }
        sorted_in_buffer = !sorted_in_buffer;
    }
    if sorted_in_buffer {
        *keys = buffer;
    }
}

/// Row indices grouped by stratum code; strata in ascending code order.
pub(crate) fn rows_by_stratum(strata: Option<&[u32]>, n: usize) -> Vec<(u32, Vec<usize>)> {
    match strata {
        None => vec![(0, (0..n).collect())],
        Some(codes) => {
            let mut order: Vec<usize> = (0..n).collect();
            order.sort_by_key(|&i| codes[i]);
            let mut out: Vec<(u32, Vec<usize>)> = Vec::new();
            for i in order {
                match out.last_mut() {
                    Some((code, rows)) if *code == codes[i] => rows.push(i),
                    _ => out.push((codes[i], vec![i])),
                }
            }
            out
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn time_keys_sort_like_numbers_and_round_trip() {
        let times = [
            -1e300,
            -2.5,
            -0.0,
            0.0,
            1e-300,
            0.5,
            1.0,
            2.0,
            3650.0,
            1e300,
            f64::NEG_INFINITY,
        ];
        for pair in times.windows(2).take(times.len() - 2) {
            assert!(time_key(pair[0]) <= time_key(pair[1]), "{pair:?}");
        }
        assert_eq!(time_key(-0.0), time_key(0.0));
        assert!(time_key(f64::NEG_INFINITY) < time_key(-1e300));
        for t in times {
            assert_eq!(key_time(time_key(t)), t + 0.0);
        }
    }

    #[test]
    fn radix_sort_agrees_with_the_standard_sort() {
        // A multiplicative congruential sequence: deterministic, many duplicates and wide spread.
        let mut state = 12345u64;
        let mut keys: Vec<u64> = (0..50_000)
            .map(|i| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let time = if i % 3 == 0 {
                    (state >> 40) as f64
                } else {
                    ((state >> 52) as f64) * 0.25 - 7.0
                };
                time_key(time)
            })
            .collect();
        let mut expected = keys.clone();
        expected.sort_unstable();
        sort_keys(&mut keys);
        assert_eq!(keys, expected);
    }

    #[test]
    fn invalid_intervals_name_the_row() {
        let rows = [(0.0, 1.0), (2.0, 2.0)];
        let err = validate_intervals(rows.len(), |i| rows[i]).unwrap_err();
        assert!(err.to_string().contains("row 1"), "{err}");
        let rows = [(f64::NEG_INFINITY, f64::NAN)];
        assert!(validate_intervals(1, |i| rows[i]).is_err());
        let rows = [(f64::NEG_INFINITY, 0.0), (-3.0, -1.0)];
        assert!(validate_intervals(2, |i| rows[i]).is_ok());
    }
}
