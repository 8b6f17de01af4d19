//! Cox proportional-hazards regression by Newton–Raphson on the partial likelihood.
//!
//! Model: hazard h(t | x) = h₀ₛ(t) exp(xᵀβ), with a baseline hazard h₀ₛ per stratum s (Cox, JRSS B
//! 1972;34:187). Rows are counting-process intervals (entry, exit] (Andersen & Gill, Ann Stat
//! 1982;10:1100), so late entry and time-varying covariates (one row per interval of constant
//! covariates) are both supported. At each distinct event time t_j of a stratum, with risk set
//! R_j = {entry < t_j <= exit}, d_j tied events and S_k = Σ_{R_j} x^k e^{xβ}, D_k = Σ_{deaths} x^k e^{xβ}:
//!
//! - Breslow: ℓ(β) = Σ_j [s_jᵀβ − d_j ln S0_j]; U = Σ_j [s_j − d_j S1_j/S0_j];
//!   I = Σ_j d_j [S2_j/S0_j − S1_j S1_jᵀ/S0_j²] (s_j = Σ_{deaths} x);
//! - Efron (Efron, JASA 1977;72:557): the d_j terms use S_k − (l/d_j) D_k for l = 0..d_j−1
//!   (DOMAIN.md §5.10; R survival `coxph` default).
//!
//! β starts at 0 and takes Newton steps I⁻¹U; a step that lowers ℓ is halved until it does not (as
//! R `coxfit6`). Convergence: |1 − ℓ_old/ℓ_new| <= tolerance (R's `eps`, default 1e-9). After
//! convergence, a coefficient whose next Newton step is still large (> √tolerance·max(1, |β|), R's
//! `toler.inf` rule) is diverging: the likelihood is monotone in it (separation) and the fit is an
//! error naming the covariate. A non-positive pivot of the information matrix is an error naming
//! the first covariate that is (numerically) constant within risk sets or a linear combination of
//! the covariates before it.
//!
//! Results: hazard ratios exp(β) with Wald intervals exp(β ± z·se); the likelihood-ratio test
//! 2(ℓ(β̂) − ℓ(0)), the score test U(0)ᵀI(0)⁻¹U(0) (= the log-rank test for one binary covariate
//! with Breslow ties) and the Wald test β̂ᵀI(β̂)β̂, each χ² on p degrees of freedom. With a cluster
//! id the robust (sandwich) variance V·(Σ_c L_c L_cᵀ)·V of Lin & Wei (JASA 1989;84:1074) is added,
//! L_c being the summed score residuals of cluster c (Efron-weighted at tied times, as R's
//! `residuals(fit, "score")`), plus the robust Wald and robust score tests; then, as in R's
//! `coxph(..., cluster = id)`, z, p-values and intervals use the robust standard errors.
//! Checked against R survival 3.5 `coxph` in `tests/reference/survival/cox.R` and DOMAIN.md §5.8
//! (lung: coef −0.5310, se 0.1672, LR 10.63).
//!
//! Cost: rows are sorted once per stratum by exit time; every likelihood evaluation is one reverse
//! sweep that adds rows at their exit and removes them at their entry, O(n p²) in all. Strata are
//! evaluated in parallel, and exp(xᵀβ) is computed in parallel within large strata.

use crate::cholesky::{Cholesky, to_rows};
use crate::follow_up::{FollowUp, check_length, rows_by_stratum, time_key, validate_intervals};
use crate::{ConfidenceLevel, Interval, StatsError};
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};

/// How tied event times enter the partial likelihood.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Ties {
    Breslow,
    Efron,
}

/// The rows of a Cox model.
#[derive(Debug, Clone, Copy)]
pub struct CoxData<'a> {
    pub follow_up: &'a [FollowUp],
    /// Covariates, row-major: row i is `covariates[i * p..(i + 1) * p]`, p = `names.len()`.
    pub covariates: &'a [f64],
    /// Covariate names, used in results and error messages.
    pub names: &'a [&'a str],
    /// Stratum code per row (separate baseline hazards), if any.
    pub strata: Option<&'a [u32]>,
    /// Cluster (e.g. patient) id per row for the robust variance, if any.
    pub cluster: Option<&'a [u64]>,
}

/// Fitting choices; the defaults are R's `coxph` defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CoxOptions {
    pub ties: Ties,
    pub level: ConfidenceLevel,
    pub max_iterations: usize,
    /// Convergence when the relative change of the log partial likelihood is at most this.
    pub tolerance: f64,
}

impl Default for CoxOptions {
    fn default() -> Self {
        CoxOptions {
            ties: Ties::Efron,
            level: ConfidenceLevel::NINETY_FIVE,
            max_iterations: 20,
            tolerance: 1e-9,
        }
    }
}

/// A fitted Cox model.
#[derive(Debug, Clone, Serialize)]
pub struct CoxFit {
    pub ties: Ties,
    pub level: f64,
    pub n_rows: u64,
    pub n_events: u64,
    pub n_strata: u64,
    pub n_clusters: Option<u64>,
    pub iterations: usize,
    pub coefficients: Vec<CoxCoefficient>,
    /// Model-based variance I(β̂)⁻¹.
    pub variance: Vec<Vec<f64>>,
    /// Robust (sandwich) variance, with a cluster id.
    pub robust_variance: Option<Vec<Vec<f64>>>,
    pub log_likelihood_null: f64,
    pub log_likelihood: f64,
    pub likelihood_ratio: ChiSquareTest,
    pub score: ChiSquareTest,
    pub wald: ChiSquareTest,
    pub robust_wald: Option<ChiSquareTest>,
    pub robust_score: Option<ChiSquareTest>,
}

/// One covariate's estimate.
#[derive(Debug, Clone, Serialize)]
pub struct CoxCoefficient {
    pub name: String,
    pub coefficient: f64,
    pub std_error: f64,
    pub robust_std_error: Option<f64>,
    pub hazard_ratio: f64,
    /// exp(β ± z·se), se robust when a cluster id was given.
    pub hazard_ratio_interval: Interval,
    pub z: f64,
    pub p_value: f64,
}

/// A chi-square test statistic.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct ChiSquareTest {
    pub statistic: f64,
    pub degrees_of_freedom: usize,
    pub p_value: f64,
}

impl ChiSquareTest {
    fn new(statistic: f64, degrees_of_freedom: usize) -> Self {
        let p_value = ChiSquared::new(degrees_of_freedom as f64)
            .expect("df >= 1")
            .sf(statistic.max(0.0));
        ChiSquareTest {
            statistic,
            degrees_of_freedom,
            p_value,
        }
    }
}

/// Fits the Cox model to `data`.
pub fn fit(data: &CoxData<'_>, options: &CoxOptions) -> Result<CoxFit, StatsError> {
    let model = Model::new(data, options.ties)?;
    let p = model.p;
    let names = data.names;
    let tolerance = options.tolerance;
    if !(tolerance > 0.0 && tolerance < 1.0) {
        return Err(StatsError::invalid(
            "tolerance",
            "a number between 0 and 1, e.g. 1e-9",
            tolerance,
        ));
    }

    let mut beta = vec![0.0; p];
    let null = model.evaluate(&beta);
    let null_chol = Cholesky::new(&null.information, p).map_err(|j| singular(names, j))?;
    let score_statistic = null_chol.quadratic_form(&null.score);
    let (log_likelihood_null, null_score) = (null.log_likelihood, null.score.clone());

    let mut current = null;
    let mut chol = null_chol;
    let mut iterations = 0;
    let mut converged = false;
    while iterations < options.max_iterations {
        iterations += 1;
        let mut step = chol.solve(&current.score);
        let mut halvings = 0;
        let next = loop {
            let candidate: Vec<f64> = beta.iter().zip(&step).map(|(b, s)| b + s).collect();
            let value = model.evaluate(&candidate);
            if value.log_likelihood.is_finite() && value.log_likelihood >= current.log_likelihood {
                break Some((candidate, value));
            }
            halvings += 1;
            if halvings > 40 {
                break None;
            }
            step.iter_mut().for_each(|s| *s *= 0.5);
        };
        let Some((candidate, value)) = next else {
            return Err(StatsError::NoConvergence {
                iterations,
                detail: "no step along the Newton direction increases the log partial likelihood (step halved 40 times); \
                         hint: rescale covariates with very large values"
                    .into(),
            });
        };
        let change = (value.log_likelihood - current.log_likelihood).abs();
        beta = candidate;
        current = value;
        chol = Cholesky::new(&current.information, p).map_err(|j| singular(names, j))?;
        if change <= tolerance * (current.log_likelihood.abs() + tolerance) {
            converged = true;
            break;
        }
    }
    let next_step = chol.solve(&current.score);
    let toler_inf = tolerance.sqrt();
    if let Some(j) = (0..p).find(|&j| next_step[j].abs() > toler_inf * beta[j].abs().max(1.0)) {
        let detail = format!(
            "the coefficient of `{}` is diverging (β = {:.4} after {iterations} iterations and still moving by {:.3e} per \
             Newton step){}: `{}` separates the events from the rest of some risk sets (monotone likelihood), so its \
             hazard ratio is 0 or infinite; hint: look for a level of `{}` with all or none of the events, drop it or \
             merge levels",
            names[j],
            beta[j],
            next_step[j],
            if converged {
                " while the log partial likelihood no longer changes"
            } else {
                ""
            },
            names[j],
            names[j]
        );
        return Err(if converged {
            StatsError::NotEstimableCovariate {
                covariate: names[j].to_string(),
                detail,
            }
        } else {
            StatsError::NoConvergence { iterations, detail }
        });
    }
    if !converged {
        return Err(StatsError::NoConvergence {
            iterations,
            detail: format!(
                "the log partial likelihood was still changing after {iterations} Newton steps (tolerance {tolerance:e}); \
                 hint: raise max_iterations"
            ),
        });
    }

    let variance = chol.inverse();
    let wald_statistic = {
        let ib: Vec<f64> = (0..p)
            .map(|a| {
                (0..p)
                    .map(|b| current.information[a * p + b] * beta[b])
                    .sum()
            })
            .collect();
        ib.iter().zip(&beta).map(|(x, b)| x * b).sum::<f64>()
    };

    let mut robust_variance = None;
    let mut robust_wald = None;
    let mut robust_score = None;
    let mut n_clusters = None;
    if let Some(cluster) = data.cluster {
        let (clusters, index) = cluster_index(cluster);
        n_clusters = Some(clusters as u64);
        let meat = model.clustered_residual_products(&beta, &index, clusters);
        let robust = sandwich(&variance, &meat, p);
        let robust_chol = Cholesky::new(&robust, p).map_err(|j| singular(names, j))?;
        robust_wald = Some(ChiSquareTest::new(robust_chol.quadratic_form(&beta), p));
        let null_meat = model.clustered_residual_products(&vec![0.0; p], &index, clusters);
        let null_meat_chol = Cholesky::new(&null_meat, p).map_err(|j| singular(names, j))?;
        robust_score = Some(ChiSquareTest::new(
            null_meat_chol.quadratic_form(&null_score),
            p,
        ));
        robust_variance = Some(robust);
    }

    let z_level = options.level.z();
    let normal = Normal::standard();
    let coefficients = (0..p)
        .map(|j| {
            let std_error = variance[j * p + j].sqrt();
            let robust_std_error = robust_variance.as_ref().map(|v| v[j * p + j].sqrt());
            let se = robust_std_error.unwrap_or(std_error);
            let z = beta[j] / se;
            CoxCoefficient {
                name: names[j].to_string(),
                coefficient: beta[j],
                std_error,
                robust_std_error,
                hazard_ratio: beta[j].exp(),
                hazard_ratio_interval: Interval::new(
                    (beta[j] - z_level * se).exp(),
                    (beta[j] + z_level * se).exp(),
                    options.level,
                ),
                z,
                p_value: 2.0 * normal.sf(z.abs()),
            }
        })
        .collect();

    Ok(CoxFit {
        ties: options.ties,
        level: options.level.value(),
        n_rows: data.follow_up.len() as u64,
        n_events: model.n_events,
        n_strata: model.strata.len() as u64,
        n_clusters,
        iterations,
        coefficients,
        variance: to_rows(&variance, p),
        robust_variance: robust_variance.map(|v| to_rows(&v, p)),
        log_likelihood_null,
        log_likelihood: current.log_likelihood,
        likelihood_ratio: ChiSquareTest::new(
            2.0 * (current.log_likelihood - log_likelihood_null),
            p,
        ),
        score: ChiSquareTest::new(score_statistic, p),
        wald: ChiSquareTest::new(wald_statistic, p),
        robust_wald,
        robust_score,
    })
}

fn singular(names: &[&str], j: usize) -> StatsError {
    StatsError::NotEstimableCovariate {
        covariate: names[j].to_string(),
        detail: format!(
            "the information matrix is singular at covariate `{}`: it is constant within every risk set, or a linear \
             combination of the covariates listed before it; hint: drop `{}` or recode it",
            names[j], names[j]
        ),
    }
}

/// V M V for symmetric V and M (row-major p × p).
fn sandwich(v: &[f64], m: &[f64], p: usize) -> Vec<f64> {
    let mut vm = vec![0.0; p * p];
    for i in 0..p {
        for j in 0..p {
            vm[i * p + j] = (0..p).map(|k| v[i * p + k] * m[k * p + j]).sum();
        }
    }
    let mut out = vec![0.0; p * p];
    for i in 0..p {
        for j in 0..p {
            out[i * p + j] = (0..p).map(|k| vm[i * p + k] * v[k * p + j]).sum();
        }
    }
    out
}

/// Dense cluster index 0..c per row, from arbitrary ids.
fn cluster_index(cluster: &[u64]) -> (usize, Vec<usize>) {
    let mut ids: Vec<u64> = cluster.to_vec();
    ids.par_sort_unstable();
    ids.dedup();
    let index = cluster
        .par_iter()
        .map(|c| ids.binary_search(c).expect("id listed"))
        .collect();
    (ids.len(), index)
}

/// Log partial likelihood, score and information at one β.
#[derive(Debug, Clone)]
struct Evaluation {
    log_likelihood: f64,
    score: Vec<f64>,
    /// Full symmetric p × p, row-major.
    information: Vec<f64>,
}

impl Evaluation {
    fn zero(p: usize) -> Self {
        Evaluation {
            log_likelihood: 0.0,
            score: vec![0.0; p],
            information: vec![0.0; p * p],
        }
    }

    fn add(mut self, other: Evaluation) -> Self {
        self.log_likelihood += other.log_likelihood;
        self.score
            .iter_mut()
            .zip(&other.score)
            .for_each(|(a, b)| *a += b);
        self.information
            .iter_mut()
            .zip(&other.information)
            .for_each(|(a, b)| *a += b);
        self
    }
}

/// The data, sorted once, ready for repeated evaluation.
struct Model {
    p: usize,
    ties: Ties,
    n_events: u64,
    strata: Vec<Stratum>,
}

/// One stratum's rows in order of decreasing exit time.
struct Stratum {
    /// Centered covariates, row-major, in sweep order.
    x: Vec<f64>,
    event: Vec<bool>,
    /// Original row index of each sweep position.
    rows: Vec<usize>,
    /// Runs of equal exit time: [start, end) in sweep order, decreasing time.
    groups: Vec<(usize, usize)>,
    group_time: Vec<f64>,
    /// Sweep positions of rows with a finite entry, by decreasing entry time.
    removals: Vec<usize>,
    /// Time keys of those entries, same order.
    removal_keys: Vec<u64>,
    /// Removals to have applied before evaluating group g: removals[..removal_end[g]].
    removal_end: Vec<usize>,
}

impl Model {
    fn new(data: &CoxData<'_>, ties: Ties) -> Result<Self, StatsError> {
        let n = data.follow_up.len();
        let p = data.names.len();
        if p == 0 {
            return Err(StatsError::invalid(
                "covariates",
                "at least one covariate",
                0,
            ));
        }
        if n == 0 {
            return Err(StatsError::invalid("follow-up rows", "at least one row", 0));
        }
        check_length("covariates (rows × names)", data.covariates.len(), n * p).map_err(|_| {
            StatsError::invalid(
                "covariates",
                format!("{n} rows × {p} covariates = {} values", n * p),
                data.covariates.len(),
            )
        })?;
        if let Some(s) = data.strata {
            check_length("strata", s.len(), n)?;
        }
        if let Some(c) = data.cluster {
            check_length("cluster", c.len(), n)?;
        }
        validate_intervals(n, |i| (data.follow_up[i].entry, data.follow_up[i].exit))?;
        if let Some(k) = data
            .covariates
            .par_iter()
            .position_first(|v| !v.is_finite())
        {
            return Err(StatsError::invalid(
                format!("covariate `{}` in row {}", data.names[k % p], k / p),
                "a finite number (drop or impute missing values first)",
                data.covariates[k],
            ));
        }
        let n_events = data.follow_up.par_iter().filter(|r| r.event).count() as u64;
        if n_events == 0 {
            return Err(StatsError::NotEstimable(
                "the Cox model needs at least one event; there are none".into(),
            ));
        }
        // Centre the covariates (R does too): the fit is unchanged, the sums are better conditioned.
        let means: Vec<f64> = (0..p)
            .map(|j| data.covariates.par_iter().skip(j).step_by(p).sum::<f64>() / n as f64)
            .collect();
        let strata = rows_by_stratum(data.strata, n)
            .into_par_iter()
            .map(|(_, rows)| Stratum::new(data, &rows, &means))
            .collect();
        Ok(Model {
            p,
            ties,
            n_events,
            strata,
        })
    }

    fn evaluate(&self, beta: &[f64]) -> Evaluation {
        self.strata
            .par_iter()
            .map(|s| s.evaluate(beta, self.p, self.ties))
            .reduce(|| Evaluation::zero(self.p), Evaluation::add)
    }

    /// Σ_c L_c L_cᵀ with L_c the score residuals summed within cluster c.
    fn clustered_residual_products(
        &self,
        beta: &[f64],
        cluster: &[usize],
        n_clusters: usize,
    ) -> Vec<f64> {
        let p = self.p;
        let mut sums = vec![0.0; n_clusters * p];
        for stratum in &self.strata {
            let residuals = stratum.score_residuals(beta, p, self.ties);
            for (pos, &row) in stratum.rows.iter().enumerate() {
                let c = cluster[row];
                for a in 0..p {
                    sums[c * p + a] += residuals[pos * p + a];
                }
            }
        }
        let mut out = sums
            .par_chunks(p * 1024)
            .map(|chunk| {
                let mut m = vec![0.0; p * p];
                for l in chunk.chunks(p) {
                    for a in 0..p {
                        for b in a..p {
                            m[a * p + b] += l[a] * l[b];
                        }
                    }
                }
                m
            })
            .reduce(
                || vec![0.0; p * p],
                |mut a, b| {
                    a.iter_mut().zip(&b).for_each(|(x, y)| *x += y);
                    a
                },
            );
        for a in 0..p {
            for b in 0..a {
                out[a * p + b] = out[b * p + a];
            }
        }
        out
    }
}

/// Risk-set sums S0, S1, S2 (upper triangle of S2 used).
struct RiskSums {
    s0: f64,
    s1: Vec<f64>,
    s2: Vec<f64>,
}

impl RiskSums {
    fn new(p: usize) -> Self {
        RiskSums {
            s0: 0.0,
            s1: vec![0.0; p],
            s2: vec![0.0; p * p],
        }
    }

    fn clear(&mut self) {
        self.s0 = 0.0;
        self.s1.iter_mut().for_each(|v| *v = 0.0);
        self.s2.iter_mut().for_each(|v| *v = 0.0);
    }

    #[inline]
    fn add(&mut self, x: &[f64], weight: f64) {
        let p = x.len();
        self.s0 += weight;
        for a in 0..p {
            let wx = weight * x[a];
            self.s1[a] += wx;
            let row = &mut self.s2[a * p..(a + 1) * p];
            for b in a..p {
                row[b] += wx * x[b];
            }
        }
    }
}

impl Stratum {
    fn new(data: &CoxData<'_>, rows: &[usize], means: &[f64]) -> Self {
        let p = means.len();
        let follow_up = data.follow_up;
        let mut order: Vec<(u64, usize)> = rows
            .iter()
            .map(|&i| (time_key(follow_up[i].exit), i))
            .collect();
        order.par_sort_unstable_by(|a, b| b.cmp(a));
        let rows: Vec<usize> = order.iter().map(|&(_, i)| i).collect();
        let mut x = vec![0.0; rows.len() * p];
        x.par_chunks_mut(p)
            .zip(rows.par_iter())
            .for_each(|(out, &i)| {
                for j in 0..p {
                    out[j] = data.covariates[i * p + j] - means[j];
                }
            });
        let event = rows.iter().map(|&i| follow_up[i].event).collect();
        let mut groups = Vec::new();
        let mut group_time = Vec::new();
        let mut start = 0;
        while start < order.len() {
            let end = start + order[start..].partition_point(|&(k, _)| k == order[start].0);
            groups.push((start, end));
            group_time.push(follow_up[order[start].1].exit);
            start = end;
        }
        let mut removal_keys: Vec<(u64, usize)> = rows
            .iter()
            .enumerate()
            .filter(|&(_, &i)| follow_up[i].entry > f64::NEG_INFINITY)
            .map(|(pos, &i)| (time_key(follow_up[i].entry), pos))
            .collect();
        removal_keys.par_sort_unstable_by(|a, b| b.cmp(a));
        // Before evaluating time t, every row with entry >= t has left the risk set.
        let mut removal_end = Vec::with_capacity(groups.len());
        let mut r = 0;
        for &t in &group_time {
            let key = time_key(t);
            while r < removal_keys.len() && removal_keys[r].0 >= key {
                r += 1;
            }
            removal_end.push(r);
        }
        Stratum {
            x,
            event,
            rows,
            groups,
            group_time,
            removals: removal_keys.iter().map(|&(_, pos)| pos).collect(),
            removal_keys: removal_keys.iter().map(|&(key, _)| key).collect(),
            removal_end,
        }
    }

    /// exp(xᵀβ) and xᵀβ at every sweep position.
    fn risk_scores(&self, beta: &[f64], p: usize) -> (Vec<f64>, Vec<f64>) {
        let m = self.rows.len();
        let mut eta = vec![0.0; m];
        let linear = |out: &mut f64, x: &[f64]| *out = x.iter().zip(beta).map(|(a, b)| a * b).sum();
        if m > 50_000 {
            eta.par_chunks_mut(4096)
                .zip(self.x.par_chunks(4096 * p))
                .for_each(|(e, x)| {
                    e.iter_mut()
                        .zip(x.chunks(p))
                        .for_each(|(o, xi)| linear(o, xi))
                });
        } else {
            eta.iter_mut()
                .zip(self.x.chunks(p))
                .for_each(|(o, xi)| linear(o, xi));
        }
        let weight = if m > 50_000 {
            eta.par_iter().map(|e| e.exp()).collect()
        } else {
            eta.iter().map(|e| e.exp()).collect()
        };
        (eta, weight)
    }

    fn evaluate(&self, beta: &[f64], p: usize, ties: Ties) -> Evaluation {
        let (eta, weight) = self.risk_scores(beta, p);
        let mut out = Evaluation::zero(p);
        let mut risk = RiskSums::new(p);
        let mut deaths = RiskSums::new(p);
        let mut s1 = vec![0.0; p];
        let mut removed = 0;
        for (g, &(start, end)) in self.groups.iter().enumerate() {
            deaths.clear();
            let mut n_deaths = 0usize;
            for pos in start..end {
                let x = &self.x[pos * p..(pos + 1) * p];
                risk.add(x, weight[pos]);
                if self.event[pos] {
                    deaths.add(x, weight[pos]);
                    n_deaths += 1;
                    out.log_likelihood += eta[pos];
                    out.score.iter_mut().zip(x).for_each(|(u, xi)| *u += xi);
                }
            }
            while removed < self.removal_end[g] {
                let pos = self.removals[removed];
                risk.add(&self.x[pos * p..(pos + 1) * p], -weight[pos]);
                removed += 1;
            }
            if n_deaths == 0 {
                continue;
            }
            let (substeps, multiplicity) = match ties {
                Ties::Efron if n_deaths > 1 => (n_deaths, 1.0),
                _ => (1, n_deaths as f64),
            };
            for l in 0..substeps {
                let fraction = l as f64 / n_deaths as f64;
                let s0 = risk.s0 - fraction * deaths.s0;
                for ((s, r), d) in s1.iter_mut().zip(&risk.s1).zip(&deaths.s1) {
                    *s = r - fraction * d;
                }
                out.log_likelihood -= multiplicity * s0.ln();
                for a in 0..p {
                    out.score[a] -= multiplicity * s1[a] / s0;
                    for b in a..p {
                        let s2 = risk.s2[a * p + b] - fraction * deaths.s2[a * p + b];
                        out.information[a * p + b] +=
                            multiplicity * (s2 / s0 - s1[a] * s1[b] / (s0 * s0));
                    }
                }
            }
        }
        for a in 0..p {
            for b in 0..a {
                out.information[a * p + b] = out.information[b * p + a];
            }
        }
        out
    }

    /// Score residuals L_i = ∫ (x_i − x̄(t)) dM_i(t) per sweep position (row-major, p per row),
    /// with Efron's weights (1 − l/d) for the tied deaths themselves.
    fn score_residuals(&self, beta: &[f64], p: usize, ties: Ties) -> Vec<f64> {
        let (_, weight) = self.risk_scores(beta, p);
        let n_groups = self.groups.len();
        // Per group: hazard increment a = Σ_l 1/s0_l and b = Σ_l x̄_l/s0_l for rows at risk that
        // do not die then; a_death, b_death with weights (1 − l/d) for the deaths; mean x̄ of deaths.
        let mut a = vec![0.0; n_groups];
        let mut b = vec![0.0; n_groups * p];
        let mut a_death = vec![0.0; n_groups];
        let mut b_death = vec![0.0; n_groups * p];
        let mut x_bar = vec![0.0; n_groups * p];
        let mut risk = RiskSums::new(p);
        let mut deaths = RiskSums::new(p);
        let mut removed = 0;
        for (g, &(start, end)) in self.groups.iter().enumerate() {
            deaths.clear();
            let mut n_deaths = 0usize;
            for ((x, &w), &event) in self.x[start * p..end * p]
                .chunks(p)
                .zip(&weight[start..end])
                .zip(&self.event[start..end])
            {
                risk.add(x, w);
                if event {
                    deaths.add(x, w);
                    n_deaths += 1;
                }
            }
            while removed < self.removal_end[g] {
                let pos = self.removals[removed];
                risk.add(&self.x[pos * p..(pos + 1) * p], -weight[pos]);
                removed += 1;
            }
            if n_deaths == 0 {
                continue;
            }
            let d = n_deaths as f64;
            let efron = ties == Ties::Efron;
            for l in 0..n_deaths {
                let fraction = if efron { l as f64 / d } else { 0.0 };
                let s0 = risk.s0 - fraction * deaths.s0;
                let death_weight = 1.0 - fraction;
                a[g] += 1.0 / s0;
                a_death[g] += death_weight / s0;
                for k in 0..p {
                    let mean = (risk.s1[k] - fraction * deaths.s1[k]) / s0;
                    b[g * p + k] += mean / s0;
                    b_death[g * p + k] += death_weight * mean / s0;
                    x_bar[g * p + k] += mean / d;
                }
            }
        }
        // Cumulative sums over groups with time <= that of group g (groups run in decreasing time).
        let mut cum_a = vec![0.0; n_groups + 1];
        let mut cum_b = vec![0.0; (n_groups + 1) * p];
        for g in (0..n_groups).rev() {
            cum_a[g] = cum_a[g + 1] + a[g];
            for k in 0..p {
                cum_b[g * p + k] = cum_b[(g + 1) * p + k] + b[g * p + k];
            }
        }
        let mut group_of = vec![0usize; self.rows.len()];
        for (g, &(start, end)) in self.groups.iter().enumerate() {
            group_of[start..end].iter_mut().for_each(|v| *v = g);
        }
        let mut entry_group = vec![n_groups; self.rows.len()];
        // Rows with a finite entry: the first group (in sweep order) whose time is <= entry.
        for (&pos, &entry_key) in self.removals.iter().zip(&self.removal_keys) {
            entry_group[pos] = self
                .group_time
                .partition_point(|&t| time_key(t) > entry_key);
        }
        let mut residuals = vec![0.0; self.rows.len() * p];
        residuals
            .par_chunks_mut(p)
            .enumerate()
            .for_each(|(pos, out)| {
                let g = group_of[pos];
                let h = entry_group[pos];
                let x = &self.x[pos * p..(pos + 1) * p];
                let w = weight[pos];
                // Event times strictly inside (entry, exit): groups g+1 .. h-1.
                let window_a = cum_a[g + 1] - cum_a[h.max(g + 1)];
                let (own_a, own_b) = if self.event[pos] {
                    (a_death[g], &b_death)
                } else {
                    (a[g], &b)
                };
                for k in 0..p {
                    let window_b = cum_b[(g + 1) * p + k] - cum_b[h.max(g + 1) * p + k];
                    let mut value =
                        -w * (x[k] * window_a - window_b) - w * (x[k] * own_a - own_b[g * p + k]);
                    if self.event[pos] {
                        value += x[k] - x_bar[g * p + k];
                    }
                    out[k] = value;
                }
            });
        residuals
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log_rank;
    use proptest::prelude::*;

    fn fit_one(
        follow_up: &[FollowUp],
        x: &[f64],
        names: &[&str],
        ties: Ties,
    ) -> Result<CoxFit, StatsError> {
        let data = CoxData {
            follow_up,
            covariates: x,
            names,
            strata: None,
            cluster: None,
        };
        fit(
            &data,
            &CoxOptions {
                ties,
                ..Default::default()
            },
        )
    }

    #[test]
    fn a_separating_covariate_is_an_error_that_names_it() {
        // Everyone with x = 1 dies before anyone with x = 0: the likelihood increases forever in β.
        let follow_up: Vec<FollowUp> = (1..=10).map(|t| FollowUp::new(t as f64, true)).collect();
        let x: Vec<f64> = (0..10)
            .flat_map(|i| [if i < 5 { 1.0 } else { 0.0 }, ((i * 7) % 5) as f64])
            .collect();
        let err = fit_one(&follow_up, &x, &["early", "noise"], Ties::Efron).unwrap_err();
        let message = err.to_string();
        assert!(
            message.contains("`early`") && message.contains("diverging"),
            "{message}"
        );
    }

    #[test]
    fn a_collinear_covariate_is_an_error_that_names_it() {
        let follow_up: Vec<FollowUp> = (1..=12)
            .map(|t| FollowUp::new(t as f64, t % 3 != 0))
            .collect();
        let x: Vec<f64> = (0..12)
            .flat_map(|i| {
                let a = ((i * 5) % 7) as f64;
                [a, 1.0 - (i % 2) as f64, 2.0 * a + 1.0]
            })
            .collect();
        let err = fit_one(
            &follow_up,
            &x,
            &["dose", "sex", "dose_doubled"],
            Ties::Breslow,
        )
        .unwrap_err();
        assert!(err.to_string().contains("`dose_doubled`"), "{err}");
        let constant: Vec<f64> = (0..12).flat_map(|i| [((i * 5) % 7) as f64, 3.0]).collect();
        let err = fit_one(&follow_up, &constant, &["dose", "site"], Ties::Breslow).unwrap_err();
        assert!(err.to_string().contains("`site`"), "{err}");
    }

    #[test]
    fn too_few_iterations_and_no_events_are_errors() {
        let follow_up: Vec<FollowUp> = (1..=12)
            .map(|t| FollowUp::new(t as f64, t % 3 != 0))
            .collect();
        let x: Vec<f64> = (0..12).map(|i| ((i * 5) % 7) as f64).collect();
        let data = CoxData {
            follow_up: &follow_up,
            covariates: &x,
            names: &["dose"],
            strata: None,
            cluster: None,
        };
        let err = fit(
            &data,
            &CoxOptions {
                max_iterations: 1,
                ..Default::default()
            },
        )
        .unwrap_err();
        assert!(
            matches!(err, StatsError::NoConvergence { iterations: 1, .. }),
            "{err}"
        );
        let censored: Vec<FollowUp> = follow_up
            .iter()
            .map(|r| FollowUp::new(r.exit, false))
            .collect();
        assert!(fit_one(&censored, &x, &["dose"], Ties::Efron).is_err());
        assert!(fit_one(&follow_up, &x[..11], &["dose"], Ties::Efron).is_err());
    }

    /// Random small data sets: (time order, event, group, second covariate).
    fn small_data() -> impl Strategy<Value = Vec<(bool, bool, u8)>> {
        proptest::collection::vec(
            (proptest::bool::weighted(0.7), proptest::bool::ANY, 0u8..5),
            20..60,
        )
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(32))]

        #[test]
        fn score_test_of_one_binary_covariate_equals_the_log_rank_test(rows in small_data(), seed in 0u64..1000) {
            // Distinct times (no ties): a permutation of 1..=n driven by the seed.
            let n = rows.len() as u64;
            let follow_up: Vec<FollowUp> = rows
                .iter()
                .enumerate()
                .map(|(i, &(event, _, _))| FollowUp::new(((i as u64 * 7919 + seed) % n + 1) as f64, event))
                .collect();
            let groups: Vec<u32> = rows.iter().map(|r| r.1 as u32).collect();
            let x: Vec<f64> = groups.iter().map(|&g| g as f64).collect();
            prop_assume!(groups.contains(&0) && groups.contains(&1) && rows.iter().any(|r| r.0));
            let log_rank = log_rank::test(&follow_up, &groups, None).unwrap();
            for ties in [Ties::Breslow, Ties::Efron] {
                match fit_one(&follow_up, &x, &["group"], ties) {
                    Ok(cox) => {
                        prop_assert!((cox.score.statistic - log_rank.chi_square).abs() < 1e-9 * (1.0 + log_rank.chi_square));
                        let c = &cox.coefficients[0];
                        prop_assert!(c.hazard_ratio_interval.contains(c.hazard_ratio));
                    }
                    // Small samples can separate (all events in one group): the only acceptable error.
                    Err(e) => prop_assert!(e.to_string().contains("diverging"), "{}", e),
                }
            }
        }

        #[test]
        fn splitting_rows_into_counting_process_intervals_changes_nothing(rows in small_data(), split in 0.1f64..0.9) {
            // Times with ties (t = i mod 7 + 1); each row is also split into (−inf, s] + (s, exit].
            let follow_up: Vec<FollowUp> =
                rows.iter().enumerate().map(|(i, r)| FollowUp::new((i % 7 + 1) as f64, r.0)).collect();
            let x: Vec<f64> = rows.iter().flat_map(|r| [r.1 as u8 as f64, r.2 as f64]).collect();
            let mut split_rows = Vec::new();
            let mut split_x = Vec::new();
            let mut cluster = Vec::new();
            for (i, r) in follow_up.iter().enumerate() {
                let s = r.exit * split;
                split_rows.push(FollowUp::new(s, false));
                split_rows.push(FollowUp::with_entry(s, r.exit, r.event));
                split_x.extend_from_slice(&x[2 * i..2 * i + 2]);
                split_x.extend_from_slice(&x[2 * i..2 * i + 2]);
                cluster.extend([i as u64, i as u64]);
            }
            let ids: Vec<u64> = (0..follow_up.len() as u64).collect();
            for ties in [Ties::Breslow, Ties::Efron] {
                let names = ["group", "score"];
                let whole = CoxData { follow_up: &follow_up, covariates: &x, names: &names, strata: None, cluster: Some(&ids) };
                let pieces = CoxData { follow_up: &split_rows, covariates: &split_x, names: &names, strata: None, cluster: Some(&cluster) };
                let options = CoxOptions { ties, ..Default::default() };
                match (fit(&whole, &options), fit(&pieces, &options)) {
                    (Ok(a), Ok(b)) => {
                        prop_assert!((a.log_likelihood - b.log_likelihood).abs() < 1e-8 * a.log_likelihood.abs());
                        for (ca, cb) in a.coefficients.iter().zip(&b.coefficients) {
                            prop_assert!((ca.coefficient - cb.coefficient).abs() < 1e-6 * (1.0 + ca.coefficient.abs()));
                            prop_assert!((ca.std_error - cb.std_error).abs() < 1e-6 * ca.std_error);
                            let (ra, rb) = (ca.robust_std_error.unwrap(), cb.robust_std_error.unwrap());
                            prop_assert!((ra - rb).abs() < 1e-6 * ra, "robust se {} vs {}", ra, rb);
                        }
                    }
                    (Err(_), Err(_)) => {}
                    (a, b) => prop_assert!(false, "one fit failed: {:?} / {:?}", a.err(), b.err()),
                }
            }
        }
    }
}
