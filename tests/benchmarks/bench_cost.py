"""Benchmark: est.expected_seconds() against the measured time, and multitaper on 1e7 samples.

Run: ``python tests/benchmarks/bench_cost.py [--quick]``.  For each estimator and record
length it prints the expected and the measured wall time (median of 3 after a warm-up;
for a whole-record multitaper also the first, "cold" call that builds the tapers) and
their ratio; the target is a ratio within [0.5, 2].  Not part of the test suite: timings
are only meaningful on one machine in one run.
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

import specbench as sb
from specbench.estimators import spectral


def measure(fn, repeats=3):
    fn()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def cases():
    out = [
        sb.Welch(segment_length=256),
        sb.Welch(segment_length=4096, overlap=0.75),
        sb.Welch(segment_length=65536, overlap=0.5),
        sb.Welch(segment_length=1024, average="median"),
        sb.Periodogram(),
        sb.Multitaper(segment_length=4096),
        sb.Multitaper(segment_length=65536, adaptive=False),
        sb.Correlogram(max_lag=1000),
        sb.Autocorrelation(max_lag=0.01),
        sb.CrossCorrelation(max_lag=0.01),
    ]
    for name in ("CrossSpectrum", "Covariance", "AllanDeviation"):
        if hasattr(sb, name):
            out.append(getattr(sb, name)())
    return out


def call(est, x):
    if isinstance(est, sb.CrossCorrelation) or type(est).__name__ in ("CrossSpectrum",):
        return est(x, fs=1e5) if x.ndim == 2 else est(x, x[::-1].copy(), fs=1e5)
    return est(x, fs=1e5)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="1e6 samples only")
    args = ap.parse_args()
    sizes = [10**6] if args.quick else [10**6, 10**7]
    rng = np.random.default_rng(0)
    print(f"{'estimator':<60} {'N':>6} | {'expected s':>10} {'measured s':>10} | {'ratio':>6}")
    ratios = []
    for n in sizes:
        x = rng.standard_normal(n)
        x2 = rng.standard_normal((2, n))
        for est in cases():
            data = x2 if type(est).__name__ in ("CrossSpectrum", "Covariance") else x
            c = data.shape[0] if data.ndim == 2 else 1
            expected = est.expected_seconds(n, n_channels=c)
            got = measure(lambda est=est, data=data: call(est, data))
            ratios.append(got / expected)
            print(f"{est!r:<60} {n:>6.0e} | {expected:>10.3f} {got:>10.3f} | {got / expected:>6.2f}", flush=True)
    # multitaper on the whole record: cold (tapers built) and warm (cached)
    for n in sizes:
        x = rng.standard_normal(n)
        est = sb.Multitaper()
        spectral._long_tapers.cache_clear()
        spectral._TAPERS_BUILT.clear()
        from specbench.estimators import _dpss

        _dpss._BASES.clear()
        cold_expected = est.expected_seconds(n)
        t0 = time.perf_counter()
        est(x, fs=1e5)
        cold = time.perf_counter() - t0
        warm_expected = est.expected_seconds(n)
        warm = measure(lambda est=est, x=x: est(x, fs=1e5))
        for label, e, g in (("cold", cold_expected, cold), ("warm", warm_expected, warm)):
            ratios.append(g / e)
            print(f"{'Multitaper() whole record, ' + label:<60} {n:>6.0e} | {e:>10.3f} {g:>10.3f} | {g / e:>6.2f}",
                  flush=True)
    print(f"measured/expected: min {min(ratios):.2f}, median {statistics.median(ratios):.2f}, max {max(ratios):.2f}; "
          f"{sum(0.5 <= r <= 2 for r in ratios)} of {len(ratios)} within a factor 2")


if __name__ == "__main__":
    main()
