"""Benchmark: sb.Welch against scipy.signal.welch and the FFT-only floor, side by side.

Run: ``python tests/benchmarks/bench_welch.py [--quick]``.  Prints, per case, the median
wall time of each contender, the peak extra memory (tracemalloc: numpy reports its
buffers), and the ratios.  Targets (DESIGN.md / issues 2 and 12), at 1e7 samples, segment 4096,
75 % overlap: at least 6x faster than scipy, at most a quarter of its peak extra memory,
within about 1.3x of the FFT-only floor.  Not part of the test suite: timings are only
meaningful side by side in one run on one machine.
"""

from __future__ import annotations

import argparse
import gc
import statistics
import time
import tracemalloc

import numpy as np
import scipy.fft
import scipy.signal
from numpy.lib.stride_tricks import sliding_window_view

import specbench as sb


def timed(fn, repeats):
    fn()  # warm-up
    times = []
    for _ in range(repeats):
        gc.collect()
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def peak_extra(fn):
    gc.collect()
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def fft_floor(x, nperseg, noverlap):
    """The FFT work alone: a pre-windowed segment stack, rfft with 2 workers (PERFORMANCE.md)."""
    step = nperseg - noverlap
    w = scipy.signal.get_window("hann", nperseg).astype(x.dtype)
    stack = sliding_window_view(x, nperseg)[::step] * w
    return lambda: scipy.fft.rfft(stack, axis=-1, workers=2)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="1e6 samples only, fewer repeats")
    ap.add_argument("--focus", type=int, metavar="RUNS", default=0,
                    help="only the target case (1e7 samples, segment 4096, 75 %% overlap), RUNS times, "
                         "with the spread of the ratios over the runs (the machine is shared: timings vary)")
    args = ap.parse_args()
    if args.focus:
        return focus(args.focus)
    sizes = [10**6] if args.quick else [10**6, 10**7]
    repeats = 3 if args.quick else 5
    rng = np.random.default_rng(0)
    print(f"{'N':>9} {'dtype':>7} {'nperseg':>7} {'ovl':>4} | {'scipy ms':>9} {'sb ms':>8} {'floor ms':>8} | "
          f"{'speedup':>7} {'vs floor':>8} | {'scipy MB':>8} {'sb MB':>6} {'mem ratio':>9}")
    for n in sizes:
        x64 = rng.standard_normal(n)
        for dtype in (np.float64, np.float32):
            x = x64.astype(dtype)
            for nperseg in (256, 4096):
                for overlap in (0.5, 0.75):
                    est = sb.Welch(segment_length=nperseg, overlap=overlap)
                    nov = est.noverlap
                    ref = scipy.signal.welch(x, nperseg=nperseg, noverlap=nov)[1]
                    got = est(x, fs=1.0).value
                    err = float(np.max(np.abs(got - ref) / ref.max()))
                    def run_scipy(x=x, nperseg=nperseg, nov=nov):
                        return scipy.signal.welch(x, nperseg=nperseg, noverlap=nov)

                    def run_sb(x=x, est=est):
                        return est(x, fs=1.0)

                    t_sp = timed(run_scipy, repeats)
                    t_sb = timed(run_sb, repeats)
                    floor = fft_floor(x, nperseg, nov)
                    t_fl = timed(floor, repeats)
                    del floor
                    m_sp = peak_extra(run_scipy)
                    m_sb = peak_extra(run_sb)
                    print(f"{n:>9.0e} {np.dtype(dtype).name:>7} {nperseg:>7} {overlap:>4} | {t_sp * 1e3:>9.1f} "
                          f"{t_sb * 1e3:>8.1f} {t_fl * 1e3:>8.1f} | {t_sp / t_sb:>6.1f}x {t_sb / t_fl:>7.2f}x | "
                          f"{m_sp / 2**20:>8.1f} {m_sb / 2**20:>6.1f} {m_sb / m_sp:>9.3f}   (max rel. diff {err:.1e})")


def focus(runs: int) -> None:
    """The target case, several times; each run measures the three contenders side by side."""
    x64 = np.random.default_rng(0).standard_normal(10**7)
    for dtype in (np.float64, np.float32):
        x = x64.astype(dtype)
        est = sb.Welch(segment_length=4096, overlap=0.75)
        nov = est.noverlap
        speedups, floors = [], []
        for run in range(runs):
            t_sp = timed(lambda x=x, nov=nov: scipy.signal.welch(x, nperseg=4096, noverlap=nov), 5)
            t_sb = timed(lambda x=x, est=est: est(x, fs=1.0), 5)
            floor = fft_floor(x, 4096, nov)
            t_fl = timed(floor, 5)
            del floor
            speedups.append(t_sp / t_sb)
            floors.append(t_sb / t_fl)
            print(f"{np.dtype(dtype).name} run {run + 1}: scipy {t_sp * 1e3:7.1f} ms, sb {t_sb * 1e3:6.1f} ms, "
                  f"floor {t_fl * 1e3:6.1f} ms | {t_sp / t_sb:5.2f}x scipy, {t_sb / t_fl:4.2f}x floor", flush=True)
        print(f"{np.dtype(dtype).name}: speedup vs scipy median {statistics.median(speedups):.2f}x "
              f"[{min(speedups):.2f}-{max(speedups):.2f}], vs floor median {statistics.median(floors):.2f}x "
              f"[{min(floors):.2f}-{max(floors):.2f}] over {runs} runs")


if __name__ == "__main__":
    main()
