//! Aalen–Johansen cumulative incidence for competing events, its variance, and Gray's test.
//!
//! Single initial state ("event-free"), k absorbing event types. At each distinct exit time t_j with
//! n_j at risk, d_kj events of type k and d_j = Σ_k d_kj (Aalen & Johansen, Scand J Stat
//! 1978;5:141; Kalbfleisch & Prentice 2002 §8.2):
//!
//! - Ŝ(t_j) = Ŝ(t_{j−1}) (1 − d_j/n_j), the all-cause Kaplan–Meier curve;
//! - F̂_k(t) = Σ_{t_j <= t} Ŝ(t_{j−1}) d_kj/n_j, so Σ_k F̂_k(t) + Ŝ(t) = 1 exactly;
//! - Var F̂_k(t) = Σ_{t_j <= t} { [F̂_k(t) − F̂_k(t_j)]² d_j/(n_j(n_j − d_j)) +
//!   Ŝ(t_{j−1})² d_kj (n_j − d_kj)/n_j³ − 2 [F̂_k(t) − F̂_k(t_j)] Ŝ(t_{j−1}) d_kj/n_j² },
//!   the delta-method ("Greenwood-type") estimator of Marubini & Valsecchi (Analysing Survival
//!   Data from Clinical Trials and Observational Studies, Wiley 1995, §10.2). For right-censored
//!   data it equals, term by term, the infinitesimal-jackknife variance that R survival 3.5
//!   `survfit(Surv(time, factor(status)) ~ 1)` reports: writing the jackknife influence of each
//!   subject on F̂_k(t) and summing squares, the cross terms between event times cancel within each
//!   risk set and what is left is the sum above. With late entry the cross terms no longer cancel
//!   exactly and R's jackknife value can differ slightly from this one;
//! - pointwise interval on the log(−log) scale: F̂^exp(±z·se/(F̂ ln F̂)) (Choudhury, Stat Med
//!   2002;21:1129), which stays inside (0, 1); the event-free probability has the Greenwood
//!   variance of the Kaplan–Meier curve.
//!
//! Gray's test (Gray, Ann Stat 1988;16:1141–1154) compares the cumulative incidence of one event
//! type across groups through the subdistribution hazards, with weight (1 − F̂(t−))^ρ and the
//! variance estimator of that paper, optionally stratified (scores and variances summed over
//! strata). The score and variance are written from the estimator of that paper; results are
//! checked against R package cmprsk 2.2-11 (`cuminc`) in
//! `tests/reference/survival/aalen_johansen.R`. Gray's test is defined for
//! right-censored data only: late entry is an input error there.

use crate::cholesky::{Cholesky, to_rows};
use crate::follow_up::{
    CompetingFollowUp, check_length, key_time, rows_by_stratum, time_key, validate_intervals,
};
use crate::{ConfidenceLevel, Interval, StatsError};
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Cumulative incidence curves, one step per distinct exit time.
#[derive(Debug, Clone, Serialize)]
pub struct AalenJohansen {
    pub level: f64,
    pub n_rows: u64,
    /// Event types 1..=k, in the order of the per-step vectors.
    pub causes: Vec<u32>,
    pub steps: Vec<AalenJohansenStep>,
}

/// The estimates at one distinct exit time.
#[derive(Debug, Clone, Serialize)]
pub struct AalenJohansenStep {
    pub time: f64,
    pub n_at_risk: u64,
    /// Events of each type at this time.
    pub n_events: Vec<u64>,
    pub n_censored: u64,
    /// Probability of being event-free (all-cause Kaplan–Meier).
    pub event_free: f64,
    /// Greenwood standard error of `event_free` (0 once it is 0).
    pub event_free_std_error: f64,
    /// F̂_k for each event type.
    pub cumulative_incidence: Vec<f64>,
    /// Delta-method standard error of each F̂_k.
    pub std_error: Vec<f64>,
    /// log(−log) interval of each F̂_k; none where F̂_k is 0 or 1.
    pub interval: Vec<Option<Interval>>,
}

/// Estimates the cumulative incidence of every event type in `data`.
pub fn estimate(
    data: &[CompetingFollowUp],
    level: ConfidenceLevel,
) -> Result<AalenJohansen, StatsError> {
    if data.is_empty() {
        return Err(StatsError::invalid("follow-up rows", "at least one row", 0));
    }
    validate_intervals(data.len(), |i| (data[i].entry, data[i].exit))?;
    let k = data.iter().map(|r| r.cause).max().unwrap_or(0) as usize;
    let z = level.z();

    let mut exits: Vec<(u64, u32)> = data
        .par_iter()
        .map(|r| (time_key(r.exit), r.cause))
        .collect();
    exits.par_sort_unstable();
    let mut entries: Vec<u64> = data
        .par_iter()
        .filter(|r| r.entry > f64::NEG_INFINITY)
        .map(|r| time_key(r.entry))
        .collect();
    entries.par_sort_unstable();

    let n = data.len();
    let mut steps = Vec::new();
    let mut survival = 1.0;
    let mut greenwood = 0.0;
    let mut incidence = vec![0.0; k];
    // Running sums of the variance expansion, per cause (see the module formula):
    // q = Σ S² d_k (n − d_k)/n³, w = Σ d/(n(n − d)), wf = Σ w F_k, wf2 = Σ w F_k², u = Σ S d_k/n²,
    // uf = Σ u F_k, all at event times up to now.
    let (mut q, mut wf, mut wf2, mut u, mut uf) = (
        vec![0.0; k],
        vec![0.0; k],
        vec![0.0; k],
        vec![0.0; k],
        vec![0.0; k],
    );
    let mut w = 0.0;
    let (mut next, mut entered) = (0usize, 0usize);
    let mut counts = vec![0u64; k + 1];
    while next < exits.len() {
        let key = exits[next].0;
        let end = next + exits[next..].partition_point(|&(k2, _)| k2 == key);
        counts.iter_mut().for_each(|c| *c = 0);
        for &(_, cause) in &exits[next..end] {
            counts[cause as usize] += 1;
        }
        while entered < entries.len() && entries[entered] < key {
            entered += 1;
        }
        let n_at_risk = (n - next) - (entries.len() - entered);
        let at_risk = n_at_risk as f64;
        let d: u64 = counts[1..].iter().sum();
        if d > 0 {
            let d = d as f64;
            let before = survival;
            for c in 0..k {
                let dk = counts[c + 1] as f64;
                incidence[c] += before * dk / at_risk;
                q[c] += before * before * dk * (at_risk - dk) / at_risk.powi(3);
                u[c] += before * dk / (at_risk * at_risk);
                uf[c] += before * dk / (at_risk * at_risk) * incidence[c];
            }
            survival *= 1.0 - d / at_risk;
            if d < at_risk {
                let wm = d / (at_risk * (at_risk - d));
                w += wm;
                greenwood += wm;
                for c in 0..k {
                    wf[c] += wm * incidence[c];
                    wf2[c] += wm * incidence[c] * incidence[c];
                }
            } else {
                // Everyone at risk has an event: Ŝ = 0 and F̂ stops changing, so the weight
                // multiplies [F̂(t) − F̂(t_j)]² = 0 from here on.
                greenwood = f64::INFINITY;
            }
        }
        let std_error: Vec<f64> = (0..k)
            .map(|c| {
                let f = incidence[c];
                let variance =
                    q[c] + f * f * w - 2.0 * f * wf[c] + wf2[c] - 2.0 * f * u[c] + 2.0 * uf[c];
                variance.max(0.0).sqrt()
            })
            .collect();
        let interval = (0..k)
            .map(|c| log_log_incidence_interval(incidence[c], std_error[c], z, level))
            .collect();
        steps.push(AalenJohansenStep {
            time: key_time(key),
            n_at_risk: n_at_risk as u64,
            n_events: counts[1..].to_vec(),
            n_censored: counts[0],
            event_free: survival,
            // Once everyone at risk has had an event Ŝ = 0 is certain: the jackknife influence of
            // every subject on it is 0 (R reports 0 too), where Greenwood's Ŝ·σ would be 0·∞.
            event_free_std_error: if survival > 0.0 {
                survival * greenwood.sqrt()
            } else {
                0.0
            },
            cumulative_incidence: incidence.clone(),
            std_error,
            interval,
        });
        next = end;
    }
    Ok(AalenJohansen {
        level: level.value(),
        n_rows: n as u64,
        causes: (1..=k as u32).collect(),
        steps,
    })
}

fn log_log_incidence_interval(f: f64, se: f64, z: f64, level: ConfidenceLevel) -> Option<Interval> {
    if !(f > 0.0 && f < 1.0 && se.is_finite()) {
        return None;
    }
    let half_width = z * se / (f * f.ln()).abs();
    Some(Interval::new(
        f.powf(half_width.exp()),
        f.powf((-half_width).exp()),
        level,
    ))
}

/// Gray's test of equal cumulative incidence of one event type across groups.
#[derive(Debug, Clone, Serialize)]
pub struct GrayTest {
    /// The event type compared.
    pub cause: u32,
    /// Distinct group codes, ascending; the scores belong to all but the last.
    pub groups: Vec<u32>,
    pub rho: f64,
    /// Weighted observed − expected events of `cause` for each group but the last.
    pub scores: Vec<f64>,
    pub variance: Vec<Vec<f64>>,
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    pub p_value: f64,
    pub n_strata: usize,
}

/// Gray's K-sample test for the cumulative incidence of `cause`, weight (1 − F̂(t−))^rho (rho = 0
/// is cmprsk's default), optionally stratified.
pub fn gray_test(
    data: &[CompetingFollowUp],
    groups: &[u32],
    strata: Option<&[u32]>,
    cause: u32,
    rho: f64,
) -> Result<GrayTest, StatsError> {
    check_length("groups", groups.len(), data.len())?;
    if let Some(s) = strata {
        check_length("strata", s.len(), data.len())?;
    }
    validate_intervals(data.len(), |i| (data[i].entry, data[i].exit))?;
    if let Some(i) = data.iter().position(|r| r.entry > f64::NEG_INFINITY) {
        return Err(StatsError::invalid(
            format!("follow-up row {i}"),
            "right-censored data (entry = -inf): Gray's test has no late-entry form",
            format!("entry {}", data[i].entry),
        ));
    }
    if cause == 0 {
        return Err(StatsError::invalid(
            "cause",
            "an event type 1..=k (0 means censored)",
            0,
        ));
    }
    if !rho.is_finite() {
        return Err(StatsError::invalid(
            "rho",
            "a finite weight exponent, usually 0",
            rho,
        ));
    }
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
    let (scores, variance) = strata_rows
        .par_iter()
        .map(|(_, rows)| GrayStratum::new(k).run(data, &index, rows, cause, rho))
        .reduce(
            || (vec![0.0; k - 1], vec![0.0; (k - 1) * (k - 1)]),
            |(mut s, mut v), (s2, v2)| {
                s.iter_mut().zip(&s2).for_each(|(a, b)| *a += b);
                v.iter_mut().zip(&v2).for_each(|(a, b)| *a += b);
                (s, v)
            },
        );
    let m = k - 1;
    let chi_square = Cholesky::new(&variance, m)
        .map_err(|j| {
            StatsError::NotEstimable(format!(
                "Gray's test variance matrix is singular at group {}: that group has no events of type {cause} or no one at risk",
                codes[j]
            ))
        })?
        .quadratic_form(&scores);
    Ok(GrayTest {
        cause,
        groups: codes,
        rho,
        scores,
        variance: to_rows(&variance, m),
        chi_square,
        degrees_of_freedom: m,
        p_value: ChiSquared::new(m as f64).expect("df >= 1").sf(chi_square),
        n_strata,
    })
}

/// Per-stratum state of Gray's recursions: per group the number at risk, the left-continuous
/// all-cause Kaplan–Meier curve and cumulative incidence of the event type of interest; the
/// accumulating score and the pieces of its variance (Gray 1988, §2–3).
struct GrayStratum {
    k: usize,
    at_risk: Vec<f64>,
    survival_before: Vec<f64>,
    incidence_before: Vec<f64>,
    pooled_before: f64,
    score: Vec<f64>,
    /// Lower triangle of the (k−1)×(k−1) variance, built up over event times.
    variance: Vec<f64>,
    /// Integrated weight derivatives c_gh (k × k).
    integrated: Vec<f64>,
    /// Σ over event times of t4² t3 per group (k).
    squared_terms: Vec<f64>,
    /// Σ (a − t4 c) t4 t3, (k−1) × k.
    cross_terms: Vec<f64>,
}

impl GrayStratum {
    fn new(k: usize) -> Self {
        GrayStratum {
            k,
            at_risk: vec![0.0; k],
            survival_before: vec![1.0; k],
            incidence_before: vec![0.0; k],
            pooled_before: 0.0,
            score: vec![0.0; k - 1],
            variance: vec![0.0; (k - 1) * (k - 1)],
            integrated: vec![0.0; k * k],
            squared_terms: vec![0.0; k],
            cross_terms: vec![0.0; (k - 1) * k],
        }
    }

    fn run(
        mut self,
        data: &[CompetingFollowUp],
        group: &[usize],
        rows: &[usize],
        cause: u32,
        rho: f64,
    ) -> (Vec<f64>, Vec<f64>) {
        let k = self.k;
        let mut order: Vec<(u64, usize)> =
            rows.iter().map(|&i| (time_key(data[i].exit), i)).collect();
        order.sort_unstable();
        for &i in rows {
            self.at_risk[group[i]] += 1.0;
        }
        let mut of_interest = vec![0.0; k];
        let mut other = vec![0.0; k];
        let mut leaving = vec![0.0; k];
        let mut next = 0;
        while next < order.len() {
            let key = order[next].0;
            let end = next + order[next..].partition_point(|&(k2, _)| k2 == key);
            for v in [&mut of_interest, &mut other, &mut leaving] {
                v.iter_mut().for_each(|x| *x = 0.0);
            }
            for &(_, i) in &order[next..end] {
                let g = group[i];
                leaving[g] += 1.0;
                match data[i].cause {
                    0 => {}
                    c if c == cause => of_interest[g] += 1.0,
                    _ => other[g] += 1.0,
                }
            }
            if of_interest.iter().chain(&other).any(|&d| d > 0.0) {
                self.event_time(&of_interest, &other, rho);
            }
            self.at_risk
                .iter_mut()
                .zip(&leaving)
                .for_each(|(r, l)| *r -= l);
            next = end;
        }
        // Close the variance: add the terms that need the final integrated weights.
        let m = k - 1;
        for i in 0..m {
            for j in 0..=i {
                let mut extra = 0.0;
                for g in 0..k {
                    let (ci, cj) = (self.integrated[i * k + g], self.integrated[j * k + g]);
                    extra += ci * cj * self.squared_terms[g]
                        + ci * self.cross_terms[j * k + g]
                        + cj * self.cross_terms[i * k + g];
                }
                self.variance[i * m + j] += extra;
            }
        }
        for i in 0..m {
            for j in 0..i {
                self.variance[j * m + i] = self.variance[i * m + j];
            }
        }
        (self.score, self.variance)
    }

    fn event_time(&mut self, of_interest: &[f64], other: &[f64], rho: f64) {
        let k = self.k;
        let m = k - 1;
        let present: Vec<bool> = self.at_risk.iter().map(|&r| r > 0.0).collect();
        let mut survival = self.survival_before.clone();
        let mut incidence = self.incidence_before.clone();
        // h_g: the group's "initial sample size" scaled back from the risk set, r/Ŝ(t−);
        // sub_risk_g: the subdistribution risk set, r (1 − F̂(t−))/Ŝ(t−).
        let mut h = vec![0.0; k];
        let mut sub_risk = vec![0.0; k];
        for g in (0..k).filter(|&g| present[g]) {
            let r = self.at_risk[g];
            survival[g] = self.survival_before[g] * (r - of_interest[g] - other[g]) / r;
            incidence[g] = self.incidence_before[g] + self.survival_before[g] * of_interest[g] / r;
            h[g] = r / self.survival_before[g];
            sub_risk[g] = r * (1.0 - self.incidence_before[g]) / self.survival_before[g];
        }
        let h_total: f64 = h.iter().sum();
        let sub_risk_total: f64 = sub_risk.iter().sum();
        let d1: f64 = of_interest.iter().sum();
        let d2: f64 = other.iter().sum();
        let pooled = self.pooled_before + d1 / h_total;
        let weight = (1.0 - self.pooled_before).powf(rho);

        let mut a = vec![0.0; k * k];
        for i in (0..k).filter(|&i| present[i]) {
            for j in (0..k).filter(|&j| present[j]) {
                let delta = if i == j { 1.0 } else { 0.0 };
                a[i * k + j] = weight * h[i] * (delta - h[j] / h_total);
                self.integrated[i * k + j] +=
                    a[i * k + j] * d1 / (h_total * (1.0 - self.pooled_before));
            }
        }
        for i in (0..m).filter(|&i| present[i]) {
            self.score[i] += weight * (of_interest[i] - d1 * sub_risk[i] / sub_risk_total);
        }
        if d1 > 0.0 {
            for g in (0..k).filter(|&g| present[g]) {
                let t4 = if survival[g] > 0.0 {
                    1.0 - (1.0 - pooled) / survival[g]
                } else {
                    1.0
                };
                let ties = if d1 > 1.0 {
                    1.0 - (d1 - 1.0) / (h_total * self.survival_before[g] - 1.0)
                } else {
                    1.0
                };
                let t3 = ties * self.survival_before[g] * d1 / (h_total * self.at_risk[g]);
                self.add_variance_terms(g, t4, t3, Some(&a));
            }
        }
        if d2 > 0.0 {
            for g in (0..k).filter(|&g| survival[g] > 0.0 && other[g] > 0.0) {
                let t4 = (1.0 - pooled) / survival[g];
                let r = self.at_risk[g];
                let ties = if other[g] > 1.0 {
                    1.0 - (other[g] - 1.0) / (r - 1.0)
                } else {
                    1.0
                };
                let t3 = ties * self.survival_before[g].powi(2) * other[g] / (r * r);
                self.add_variance_terms(g, t4, t3, None);
            }
        }
        self.pooled_before = pooled;
        self.incidence_before = incidence;
        self.survival_before = survival;
    }

    /// Adds one group's martingale-increment variance t3 with coefficient (a − t4 c) for events of
    /// the type of interest, or (−t4 c) for competing events (`a` = None).
    fn add_variance_terms(&mut self, g: usize, t4: f64, t3: f64, a: Option<&[f64]>) {
        let k = self.k;
        let m = k - 1;
        self.squared_terms[g] += t4 * t4 * t3;
        let coefficient = |s: &Self, i: usize| match a {
            Some(a) => a[i * k + g] - t4 * s.integrated[i * k + g],
            None => -t4 * s.integrated[i * k + g],
        };
        for i in 0..m {
            let ti = coefficient(self, i);
            self.cross_terms[i * k + g] += ti * t4 * t3;
            for j in 0..=i {
                let tj = coefficient(self, j);
                self.variance[i * m + j] += ti * tj * t3;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn incidences_and_event_free_sum_to_one_and_match_a_hand_calculation() {
        // Six subjects: cause 1 at 1, censored at 2, cause 2 at 3, cause 1 at 3, cause 2 at 5, censored at 6.
        // By hand: t=1: n=6, S=5/6, F1=1/6; t=3: n=4, S=5/6·2/4=5/12, F1=1/6+5/6·1/4=3/8, F2=5/24;
        // t=5: n=2, S=5/24, F2=5/24+5/12·1/2=5/12.
        let data = [(1.0, 1), (2.0, 0), (3.0, 2), (3.0, 1), (5.0, 2), (6.0, 0)]
            .map(|(t, c)| CompetingFollowUp::new(t, c));
        let fit = estimate(&data, ConfidenceLevel::NINETY_FIVE).unwrap();
        let last = fit.steps.last().unwrap();
        assert!((last.event_free - 5.0 / 24.0).abs() < 1e-15);
        assert!((last.cumulative_incidence[0] - 3.0 / 8.0).abs() < 1e-15);
        assert!((last.cumulative_incidence[1] - 5.0 / 12.0).abs() < 1e-15);
        for s in &fit.steps {
            let total: f64 = s.event_free + s.cumulative_incidence.iter().sum::<f64>();
            assert!((total - 1.0).abs() < 1e-14);
        }
        // Variance at t=1 (one term): S0² d1 (n − d1)/n³ = 5/216, i.e. the binomial p(1−p)/n.
        assert!((fit.steps[0].std_error[0] - (5.0f64 / 216.0).sqrt()).abs() < 1e-15);
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(32))]

        #[test]
        fn incidences_plus_event_free_sum_to_one_and_intervals_contain_the_estimate(
            rows in proptest::collection::vec((0u32..10, 1u32..25, 0u32..4), 1..80)
        ) {
            // Late entry on every third row; causes 0 (censored) to 3.
            let data: Vec<CompetingFollowUp> = rows
                .iter()
                .enumerate()
                .map(|(i, &(a, b, c))| {
                    if i % 3 == 0 { CompetingFollowUp::with_entry(a as f64, (a + b) as f64, c) } else { CompetingFollowUp::new(b as f64, c) }
                })
                .collect();
            let fit = estimate(&data, ConfidenceLevel::NINETY_FIVE).unwrap();
            for step in &fit.steps {
                let total = step.event_free + step.cumulative_incidence.iter().sum::<f64>();
                proptest::prop_assert!((total - 1.0).abs() < 1e-12, "sum {}", total);
                for (f, interval) in step.cumulative_incidence.iter().zip(&step.interval) {
                    if let Some(i) = interval {
                        proptest::prop_assert!(i.lower <= *f && *f <= i.upper);
                    }
                }
            }
        }
    }

    #[test]
    fn gray_test_rejects_late_entry_and_single_groups() {
        let data = [
            CompetingFollowUp::with_entry(0.0, 1.0, 1),
            CompetingFollowUp::new(2.0, 2),
        ];
        assert!(gray_test(&data, &[0, 1], None, 1, 0.0).is_err());
        let data = [
            CompetingFollowUp::new(1.0, 1),
            CompetingFollowUp::new(2.0, 2),
        ];
        assert!(gray_test(&data, &[0, 0], None, 1, 0.0).is_err());
    }
}
