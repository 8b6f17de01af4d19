"""Times lifelines' CoxPHFitter on the Cox benchmark data of crates/kcohort-stats/benches/survival.rs.

Usage (from the repository root; needs `pip install lifelines`, which brings numpy, pandas, scipy):

    python3 tests/reference/survival/bench_lifelines.py [--rows 1000000] [--repeats 1]

The data are rebuilt here exactly as the Rust benchmark builds them: every random number is
SplitMix64 of a counter (row * 16 + stream), so both sides print the same summary line (rows,
events, sum of exit times, sum of covariates) before timing. Covariates: x1 binary, x2 uniform(-1, 1),
x3 sum of three uniforms - 1.5, x4 in {0, 1, 2, 3}, x5 uniform(0, 1); beta = (0.5, -0.3, 0.2, 0.1, -0.4);
exponential event times (mean 500 days at x = 0), exponential censoring (mean 700 days) capped at
1825 days, times rounded up to whole days. lifelines handles ties by Efron's method, like the Rust
benchmark. Prints figures only; this is not a test.
"""

import argparse
import time

import numpy as np

SEED = np.uint64(20_260_401)
GOLDEN = np.uint64(0x9E37_79B9_7F4A_7C15)
MIX1 = np.uint64(0xBF58_476D_1CE4_E5B9)
MIX2 = np.uint64(0x94D0_49BB_1331_11EB)


def splitmix64(counter: np.ndarray) -> np.ndarray:
    """SplitMix64 finaliser of SEED + counter * golden (wrapping uint64 arithmetic)."""
    with np.errstate(over="ignore"):
        z = SEED + counter * GOLDEN
        z = (z ^ (z >> np.uint64(30))) * MIX1
        z = (z ^ (z >> np.uint64(27))) * MIX2
    return z ^ (z >> np.uint64(31))


def uniform(rows: np.ndarray, stream: int) -> np.ndarray:
    bits = splitmix64(rows * np.uint64(16) + np.uint64(stream)) >> np.uint64(11)
    return (bits.astype(np.float64) + 0.5) * (1.0 / float(1 << 53))


def cox_data(n: int):
    rows = np.arange(n, dtype=np.uint64)
    x1 = np.where(uniform(rows, 0) < 0.5, 1.0, 0.0)
    x2 = 2.0 * uniform(rows, 1) - 1.0
    x3 = uniform(rows, 2) + uniform(rows, 3) + uniform(rows, 4) - 1.5
    x4 = np.floor(4.0 * uniform(rows, 5))
    x5 = uniform(rows, 6)
    eta = 0.5 * x1 - 0.3 * x2 + 0.2 * x3 + 0.1 * x4 - 0.4 * x5
    event_time = -np.log(uniform(rows, 7)) * 500.0 / np.exp(eta)
    censor_time = np.minimum(-np.log(uniform(rows, 8)) * 700.0, 1825.0)
    exit_time = np.ceil(np.minimum(event_time, censor_time))
    event = event_time <= censor_time
    return exit_time, event, np.column_stack([x1, x2, x3, x4, x5])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=1)
    args = parser.parse_args()

    import lifelines
    import pandas as pd
    from lifelines import CoxPHFitter

    exit_time, event, x = cox_data(args.rows)
    print(
        f"cox data: rows {args.rows}, events {int(event.sum())}, sum of exit times {exit_time.sum():.0f}, "
        f"sum of covariates {x.sum():.3f}"
    )
    frame = pd.DataFrame(x, columns=["x1", "x2", "x3", "x4", "x5"])
    frame["time"] = exit_time
    frame["event"] = event.astype(int)
    for repeat in range(args.repeats):
        fitter = CoxPHFitter()
        start = time.perf_counter()
        fitter.fit(frame, duration_col="time", event_col="event")
        elapsed = time.perf_counter() - start
        print(f"lifelines {lifelines.__version__} CoxPHFitter (Efron ties), run {repeat + 1}: {elapsed:.2f} s")
    print("coefficients:", " ".join(f"{name} {value:.6f}" for name, value in fitter.params_.items()))


if __name__ == "__main__":
    main()
