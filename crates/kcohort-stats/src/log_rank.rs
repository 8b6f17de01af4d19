//! Log-rank test comparing the survival of k groups, optionally stratified.
//!
//! At each distinct event time, with N at risk, d events, n_g at risk and d_g events in group g:
//!
//! - O_g += d_g; E_g += d·n_g/N;
//! - V_gh += d (N − d)/(N − 1) · (n_g/N) (δ_gh − n_h/N) (hypergeometric variance of O − E);
//! - χ² = (O − E)ᵀ V⁻¹ (O − E) over all groups but the first, with k − 1 degrees of freedom
//!   (Mantel, Cancer Chemother Rep 1966;50:163; Peto & Peto, JRSS A 1972;135:185).
//!
//! Stratified: O, E and V are summed over strata, each stratum having its own risk sets. As in R
//! `survdiff` (survival 3.5, rho = 0), groups with E = 0 are left out of the quadratic form and of
//! the degrees of freedom. Late entry is honoured (rows join the risk set after their entry time),
//! an extension R's `survdiff` does not offer. Check values: DOMAIN.md §5.8 (aml: O 7/11,
//! E 10.69/7.31, χ² 3.40, p 0.0653) and `tests/reference/survival/log_rank.R`.

use crate::StatsError;
use crate::cholesky::{Cholesky, to_rows};
use crate::follow_up::{FollowUp, check_length, rows_by_stratum, time_key, validate_intervals};
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// The log-rank test of equal survival across groups.
#[derive(Debug, Clone, Serialize)]
pub struct LogRank {
    /// One entry per distinct group code, in ascending code order.
    pub groups: Vec<LogRankGroup>,
    /// Variance matrix of O − E, in the order of `groups`.
    pub variance: Vec<Vec<f64>>,
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    pub p_value: f64,
    pub n_strata: usize,
}

/// Observed and expected events of one group, summed over strata.
#[derive(Debug, Clone, Serialize)]
pub struct LogRankGroup {
    pub group: u32,
    pub n_rows: u64,
    pub observed: f64,
    pub expected: f64,
}

/// Tests equal survival across `groups` (one code per row), optionally within `strata`.
pub fn test(
    data: &[FollowUp],
    groups: &[u32],
    strata: Option<&[u32]>,
) -> Result<LogRank, StatsError> {
    check_length("groups", groups.len(), data.len())?;
    if let Some(s) = strata {
        check_length("strata", s.len(), data.len())?;
    }
    validate_intervals(data.len(), |i| (data[i].entry, data[i].exit))?;
    let mut codes: Vec<u32> = groups.to_vec();
    codes.sort_unstable();
    codes.dedup();
    if codes.len() < 2 {
        return Err(StatsError::invalid(
            "groups",
            "at least two distinct group codes",
            codes.len(),
        ));
    }
    let k = codes.len();
    let index: Vec<usize> = groups
        .iter()
        .map(|g| codes.binary_search(g).expect("code listed"))
        .collect();

    let strata_rows = rows_by_stratum(strata, data.len());
    let n_strata = strata_rows.len();
    let totals = strata_rows
        .par_iter()
        .map(|(_, rows)| stratum_sums(data, &index, rows, k))
        .reduce(|| Sums::zero(k), Sums::add);

    let mut n_rows = vec![0u64; k];
    index.iter().for_each(|&g| n_rows[g] += 1);
    let kept: Vec<usize> = (0..k).filter(|&g| totals.expected[g] > 0.0).collect();
    if kept.len() < 2 {
        return Err(StatsError::NotEstimable(
            "the log-rank test needs at least two groups with someone at risk at an event time"
                .into(),
        ));
    }
    let tested = &kept[1..];
    let m = tested.len();
    let difference: Vec<f64> = tested
        .iter()
        .map(|&g| totals.observed[g] - totals.expected[g])
        .collect();
    let mut variance = vec![0.0; m * m];
    for (a, &g) in tested.iter().enumerate() {
        for (b, &h) in tested.iter().enumerate() {
            variance[a * m + b] = totals.variance[g * k + h];
        }
    }
    let chi_square = Cholesky::new(&variance, m)
        .map_err(|j| {
            StatsError::NotEstimable(format!(
                "the log-rank variance matrix is singular at group {}: its numbers at risk are proportional to the other groups' at every event time",
                codes[tested[j]]
            ))
        })?
        .quadratic_form(&difference);
    let degrees_of_freedom = m;
    let p_value = ChiSquared::new(degrees_of_freedom as f64)
        .expect("df >= 1")
        .sf(chi_square);
    Ok(LogRank {
        groups: (0..k)
            .map(|g| LogRankGroup {
                group: codes[g],
                n_rows: n_rows[g],
                observed: totals.observed[g],
                expected: totals.expected[g],
            })
            .collect(),
        variance: to_rows(&totals.variance, k),
        chi_square,
        degrees_of_freedom,
        p_value,
        n_strata,
    })
}

#[derive(Debug, Clone)]
struct Sums {
    observed: Vec<f64>,
    expected: Vec<f64>,
    variance: Vec<f64>,
}

impl Sums {
    fn zero(k: usize) -> Self {
        Sums {
            observed: vec![0.0; k],
            expected: vec![0.0; k],
            variance: vec![0.0; k * k],
        }
    }

    fn add(mut self, other: Sums) -> Sums {
        let add = |a: &mut Vec<f64>, b: &Vec<f64>| a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
        add(&mut self.observed, &other.observed);
        add(&mut self.expected, &other.expected);
        add(&mut self.variance, &other.variance);
        self
    }
}

/// One ascending sweep over a stratum: rows join at their entry, leave after their exit.
fn stratum_sums(data: &[FollowUp], group: &[usize], rows: &[usize], k: usize) -> Sums {
    let mut by_exit: Vec<(u64, usize)> =
        rows.iter().map(|&i| (time_key(data[i].exit), i)).collect();
    by_exit.sort_unstable();
    let mut by_entry: Vec<(u64, usize)> = rows
        .iter()
        .filter(|&&i| data[i].entry > f64::NEG_INFINITY)
        .map(|&i| (time_key(data[i].entry), i))
        .collect();
    by_entry.sort_unstable();
    let mut at_risk = vec![0.0f64; k];
    for &i in rows {
        if data[i].entry == f64::NEG_INFINITY {
            at_risk[group[i]] += 1.0;
        }
    }
    let mut sums = Sums::zero(k);
    let mut deaths = vec![0.0f64; k];
    let (mut next_exit, mut next_entry) = (0, 0);
    while next_exit < by_exit.len() {
        let key = by_exit[next_exit].0;
        while next_entry < by_entry.len() && by_entry[next_entry].0 < key {
            at_risk[group[by_entry[next_entry].1]] += 1.0;
            next_entry += 1;
        }
        let end = next_exit + by_exit[next_exit..].partition_point(|&(k2, _)| k2 == key);
        deaths.iter_mut().for_each(|d| *d = 0.0);
        for &(_, i) in &by_exit[next_exit..end] {
            if data[i].event {
                deaths[group[i]] += 1.0;
            }
        }
        let d: f64 = deaths.iter().sum();
        let n: f64 = at_risk.iter().sum();
        if d > 0.0 {
            for g in 0..k {
                sums.observed[g] += deaths[g];
                sums.expected[g] += d * at_risk[g] / n;
            }
            if n > 1.0 {
                let factor = d * (n - d) / (n - 1.0) / n;
                for g in 0..k {
                    for h in 0..k {
                        let delta = if g == h { 1.0 } else { 0.0 };
                        sums.variance[g * k + h] += factor * at_risk[g] * (delta - at_risk[h] / n);
                    }
                }
            }
        }
        for &(_, i) in &by_exit[next_exit..end] {
            at_risk[group[i]] -= 1.0;
        }
        next_exit = end;
    }
    sums
}

#[cfg(test)]
mod tests {
    use super::*;

    fn aml() -> (Vec<FollowUp>, Vec<u32>) {
        // R survival::aml (DOMAIN.md §5.7); group 1 = Maintained, 0 = Nonmaintained.
        let maintained = [
            (9.0, true),
            (13.0, true),
            (13.0, false),
            (18.0, true),
            (23.0, true),
            (28.0, false),
        ]
        .into_iter()
        .chain([
            (31.0, true),
            (34.0, true),
            (45.0, false),
            (48.0, true),
            (161.0, false),
        ]);
        let other = [
            5.0, 5.0, 8.0, 8.0, 12.0, 16.0, 23.0, 27.0, 30.0, 33.0, 43.0, 45.0,
        ]
        .map(|t| (t, t != 16.0));
        let mut data = Vec::new();
        let mut groups = Vec::new();
        for (t, e) in maintained {
            data.push(FollowUp::new(t, e));
            groups.push(1);
        }
        for (t, e) in other {
            data.push(FollowUp::new(t, e));
            groups.push(0);
        }
        (data, groups)
    }

    #[test]
    fn aml_matches_the_published_survdiff_output() {
        // DOMAIN.md §5.8 [C]: O = 7 / 11, E = 10.69 / 7.31, chi-square 3.40, p = 0.0653;
        // [S] V = 4.0076, chi-square 3.3964.
        let (data, groups) = aml();
        let fit = test(&data, &groups, None).unwrap();
        let (non, main) = (&fit.groups[0], &fit.groups[1]);
        assert_eq!((main.observed, non.observed), (7.0, 11.0));
        assert!((main.expected - 10.69).abs() < 0.005 && (non.expected - 7.31).abs() < 0.005);
        assert!(
            (fit.variance[1][1] - 4.0076).abs() < 5e-5,
            "{:?}",
            fit.variance
        );
        assert!((fit.chi_square - 3.3964).abs() < 5e-5);
        assert!((fit.p_value - 0.0653).abs() < 5e-5);
        assert_eq!(fit.degrees_of_freedom, 1);
    }

    #[test]
    fn strata_with_one_level_change_nothing_and_late_entry_matches_delayed_risk_sets() {
        let (data, groups) = aml();
        let plain = test(&data, &groups, None).unwrap();
        let one = test(&data, &groups, Some(&vec![7; data.len()])).unwrap();
        assert!((plain.chi_square - one.chi_square).abs() < 1e-12);
        // Entering at -1 is the same as being at risk from the start when all times are positive.
        let late: Vec<FollowUp> = data
            .iter()
            .map(|r| FollowUp::with_entry(-1.0, r.exit, r.event))
            .collect();
        assert!((test(&late, &groups, None).unwrap().chi_square - plain.chi_square).abs() < 1e-12);
    }

    #[test]
    fn one_group_is_an_input_error() {
        let (data, _) = aml();
        assert!(test(&data, &vec![0; data.len()], None).is_err());
        assert!(test(&data, &[0, 1], None).is_err());
    }
}
