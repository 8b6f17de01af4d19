//! Simulated coverage of the Wilson and Garwood intervals.
//!
//! Data are drawn with splitmix64 (Steele, Lea & Flood, OOPSLA 2014), seeded, so the test is
//! deterministic. With 4000 replicates the Monte Carlo standard error of a coverage near 0.95 is
//! √(0.95·0.05/4000) = 0.0034.
//!
//! Expected behaviour (exact coverages computed with scipy for these settings, 0.935–0.975 for
//! Wilson): Wilson is close to nominal on average but not at every p, so each setting must lie in
//! [0.92, 0.98] and the mean over the grid in [0.94, 0.965]; Garwood is conservative, so each
//! setting must be at least 0.95 − 3·0.0034 ≈ 0.94 and at most 0.995.

use kcohort_stats::ConfidenceLevel;
use kcohort_stats::poisson_rate::garwood_interval;
use kcohort_stats::proportion::wilson_interval;

const REPLICATES: usize = 4000;

struct SplitMix64(u64);

impl SplitMix64 {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1) with 53 random bits.
    fn uniform(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }

    fn binomial(&mut self, n: u64, p: f64) -> u64 {
        (0..n).filter(|_| self.uniform() < p).count() as u64
    }

    /// Knuth's multiplication method; fine for the small means used here.
    fn poisson(&mut self, mean: f64) -> u64 {
        let limit = (-mean).exp();
        let mut product = self.uniform();
        let mut k = 0;
        while product > limit {
            product *= self.uniform();
            k += 1;
        }
        k
    }
}

#[test]
fn wilson_coverage_is_close_to_nominal() {
    let level = ConfidenceLevel::NINETY_FIVE;
    let mut rng = SplitMix64(20_260_401);
    let mut coverages = Vec::new();
    for n in [20u64, 50, 100] {
        // Intervals depend only on x, so compute them once per n.
        let intervals: Vec<_> = (0..=n)
            .map(|x| wilson_interval(x, n, level).unwrap())
            .collect();
        for p in [0.1, 0.3, 0.5] {
            let covered = (0..REPLICATES)
                .filter(|_| intervals[rng.binomial(n, p) as usize].contains(p))
                .count();
            let coverage = covered as f64 / REPLICATES as f64;
            assert!(
                (0.92..=0.98).contains(&coverage),
                "Wilson n = {n}, p = {p}: coverage {coverage}"
            );
            coverages.push(coverage);
        }
    }
    let mean = coverages.iter().sum::<f64>() / coverages.len() as f64;
    assert!(
        (0.94..=0.965).contains(&mean),
        "mean Wilson coverage {mean}: {coverages:?}"
    );
}

#[test]
fn garwood_coverage_is_at_least_nominal() {
    let level = ConfidenceLevel::NINETY_FIVE;
    let mut rng = SplitMix64(7);
    let intervals: Vec<_> = (0..200u64).map(|x| garwood_interval(x, level)).collect();
    for mean in [0.5, 2.0, 5.0, 10.0, 25.0] {
        let covered = (0..REPLICATES)
            .filter(|_| intervals[rng.poisson(mean) as usize].contains(mean))
            .count();
        let coverage = covered as f64 / REPLICATES as f64;
        assert!(
            (0.94..=0.995).contains(&coverage),
            "Garwood mean {mean}: coverage {coverage}"
        );
    }
}

#[test]
fn a_too_narrow_interval_would_fail_the_coverage_check() {
    // Guard that the check can fail: a 90% Wilson interval, judged against the 95% band, covers
    // too little on average.
    let level = ConfidenceLevel::new(0.90).unwrap();
    let mut rng = SplitMix64(99);
    let n = 50;
    let intervals: Vec<_> = (0..=n)
        .map(|x| wilson_interval(x, n, level).unwrap())
        .collect();
    let covered = (0..REPLICATES)
        .filter(|_| intervals[rng.binomial(n, 0.3) as usize].contains(0.3))
        .count();
    let coverage = covered as f64 / REPLICATES as f64;
    assert!(coverage < 0.93, "coverage {coverage}");
}
