//! Survival benchmarks: Kaplan–Meier on 10,000,000 rows and a Cox fit (Efron ties, 5 covariates)
//! on 1,000,000 rows.
//!
//! Run: `cargo bench -p kcohort-stats --bench survival`. Figures only, not a CI gate.
//!
//! The data are synthetic and deterministic: every random number is SplitMix64 of a counter
//! (Steele, Lea & Flood, OOPSLA 2014), so `tests/reference/survival/bench_lifelines.py` builds the
//! same Cox data set in NumPy and times lifelines' CoxPHFitter on it. Both print the same summary
//! line (rows, events, sum of exit times, sum of covariates) and the fitted coefficients.

use divan::Bencher;
use kcohort_stats::follow_up::FollowUp;
use kcohort_stats::{cox, kaplan_meier};

fn main() {
    let (follow_up, x) = cox_data(COX_ROWS);
    let events = follow_up.iter().filter(|r| r.event).count();
    let total_time: f64 = follow_up.iter().map(|r| r.exit).sum();
    let x_sum: f64 = x.iter().sum();
    println!(
        "cox data: rows {COX_ROWS}, events {events}, sum of exit times {total_time:.0}, sum of covariates {x_sum:.3}"
    );
    let names = ["x1", "x2", "x3", "x4", "x5"];
    let data = cox::CoxData {
        follow_up: &follow_up,
        covariates: &x,
        names: &names,
        strata: None,
        cluster: None,
    };
    let fit = cox::fit(&data, &cox::CoxOptions::default()).expect("the benchmark data fit");
    let coefficients: Vec<String> = fit
        .coefficients
        .iter()
        .map(|c| format!("{} {:.6}", c.name, c.coefficient))
        .collect();
    println!("coefficients: {}", coefficients.join(" "));
    divan::main();
}

const COX_ROWS: usize = 1_000_000;
const KM_ROWS: usize = 10_000_000;

/// SplitMix64 finaliser of `SEED + counter`.
fn splitmix64(counter: u64) -> u64 {
    const SEED: u64 = 20_260_401;
    let mut z = SEED.wrapping_add(counter.wrapping_mul(0x9E37_79B9_7F4A_7C15));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Uniform on (0, 1) for row `i`, stream `s` (0..16).
fn uniform(i: usize, s: u64) -> f64 {
    (((splitmix64(i as u64 * 16 + s) >> 11) as f64) + 0.5) * (1.0 / (1u64 << 53) as f64)
}

/// Covariates and follow-up of row i: x1 binary, x2 uniform(−1, 1), x3 sum of three uniforms − 1.5,
/// x4 in {0, 1, 2, 3}, x5 uniform(0, 1); β = (0.5, −0.3, 0.2, 0.1, −0.4); exponential event time
/// with mean 500 days at x = 0, exponential censoring with mean 700 days, administrative
/// censoring at 1825 days; times rounded up to whole days, so there are many ties.
fn cox_row(i: usize) -> ([f64; 5], f64, bool) {
    let x = [
        if uniform(i, 0) < 0.5 { 1.0 } else { 0.0 },
        2.0 * uniform(i, 1) - 1.0,
        uniform(i, 2) + uniform(i, 3) + uniform(i, 4) - 1.5,
        (4.0 * uniform(i, 5)).floor(),
        uniform(i, 6),
    ];
    let eta = 0.5 * x[0] - 0.3 * x[1] + 0.2 * x[2] + 0.1 * x[3] - 0.4 * x[4];
    let event_time = -uniform(i, 7).ln() * 500.0 / eta.exp();
    let censor_time = (-uniform(i, 8).ln() * 700.0).min(1825.0);
    let time = event_time.min(censor_time).ceil();
    (x, time, event_time <= censor_time)
}

fn cox_data(n: usize) -> (Vec<FollowUp>, Vec<f64>) {
    let mut follow_up = Vec::with_capacity(n);
    let mut x = Vec::with_capacity(n * 5);
    for i in 0..n {
        let (xi, time, event) = cox_row(i);
        follow_up.push(FollowUp::new(time, event));
        x.extend_from_slice(&xi);
    }
    (follow_up, x)
}

/// Kaplan–Meier rows: exits in whole days up to 3650 (or continuous), ~70% events, one row in five
/// entering late (at a uniform fraction of its exit time).
fn km_data(n: usize, whole_days: bool) -> Vec<FollowUp> {
    (0..n)
        .map(|i| {
            let raw = -uniform(i, 0).ln() * 900.0;
            let exit = if whole_days {
                raw.ceil().min(3650.0)
            } else {
                raw + 1e-3
            };
            let event = uniform(i, 1) < 0.7;
            if i % 5 == 0 {
                FollowUp::with_entry((exit * uniform(i, 2)).floor() - 1.0, exit, event)
            } else {
                FollowUp::new(exit, event)
            }
        })
        .collect()
}

#[divan::bench(sample_count = 5, sample_size = 1)]
fn kaplan_meier_10m_rows_whole_days(bencher: Bencher) {
    let data = km_data(KM_ROWS, true);
    let options = kaplan_meier::KaplanMeierOptions {
        at_times: vec![30.0, 365.0, 1825.0],
        ..Default::default()
    };
    bencher.bench_local(|| kaplan_meier::estimate(divan::black_box(&data), &options).unwrap());
}

#[divan::bench(sample_count = 3, sample_size = 1)]
fn kaplan_meier_10m_rows_continuous_times(bencher: Bencher) {
    let data = km_data(KM_ROWS, false);
    let options = kaplan_meier::KaplanMeierOptions::default();
    bencher.bench_local(|| kaplan_meier::estimate(divan::black_box(&data), &options).unwrap());
}

#[divan::bench(sample_count = 5, sample_size = 1)]
fn cox_efron_1m_rows_5_covariates(bencher: Bencher) {
    let (follow_up, x) = cox_data(COX_ROWS);
    let names = ["x1", "x2", "x3", "x4", "x5"];
    let data = cox::CoxData {
        follow_up: &follow_up,
        covariates: &x,
        names: &names,
        strata: None,
        cluster: None,
    };
    let options = cox::CoxOptions::default();
    bencher.bench_local(|| cox::fit(divan::black_box(&data), &options).unwrap());
}

#[divan::bench(sample_count = 3, sample_size = 1)]
fn cox_efron_1m_rows_5_covariates_robust_by_patient(bencher: Bencher) {
    let (follow_up, x) = cox_data(COX_ROWS);
    // Ten rows per "patient" for the clustered sandwich variance.
    let cluster: Vec<u64> = (0..COX_ROWS as u64).map(|i| i / 10).collect();
    let names = ["x1", "x2", "x3", "x4", "x5"];
    let data = cox::CoxData {
        follow_up: &follow_up,
        covariates: &x,
        names: &names,
        strata: None,
        cluster: Some(&cluster),
    };
    let options = cox::CoxOptions::default();
    bencher.bench_local(|| cox::fit(divan::black_box(&data), &options).unwrap());
}
