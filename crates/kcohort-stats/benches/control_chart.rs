//! Control-chart benchmark: u-charts (plain and Laney) of a monthly rate over 10 years for 50
//! units, one chart per unit, charts computed in parallel with rayon.
//!
//! Run: `cargo bench -p kcohort-stats --bench control_chart`. Figures only, not a CI gate.
//! Data: deterministic SplitMix64 draws (Steele, Lea & Flood, OOPSLA 2014): per unit and month,
//! patient-days around 900 and an event count near 5 per 1,000 patient-days.

use divan::Bencher;
use kcohort_stats::control_chart::{ChartOptions, u_chart};
use rayon::prelude::*;

const UNITS: usize = 50;
const MONTHS: usize = 120;

fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn unit_series(unit: usize) -> (Vec<u64>, Vec<f64>) {
    let mut state = unit as u64;
    let mut events = Vec::with_capacity(MONTHS);
    let mut days = Vec::with_capacity(MONTHS);
    for _ in 0..MONTHS {
        let u = (splitmix64(&mut state) >> 11) as f64 / (1u64 << 53) as f64;
        let d = 600.0 + 600.0 * u;
        events.push(((d / 1000.0) * 5.0 + (splitmix64(&mut state) % 5) as f64) as u64);
        days.push(d / 1000.0);
    }
    (events, days)
}

fn main() {
    divan::main();
}

#[divan::bench(args = [false, true])]
fn u_charts_50_units_10_years(bencher: Bencher, laney: bool) {
    let data: Vec<(Vec<u64>, Vec<f64>)> = (0..UNITS).map(unit_series).collect();
    let options = ChartOptions {
        laney,
        period_label: "month".into(),
        ..ChartOptions::default()
    };
    bencher.bench(|| {
        let charts: Vec<_> = data
            .par_iter()
            .map(|(e, d)| u_chart(e, d, &options).expect("valid series"))
            .collect();
        divan::black_box(charts)
    });
}
