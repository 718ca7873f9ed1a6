"""Benchmark: sb.CrossSpectrum against scipy.signal.csd, side by side in one run.

Run: ``python tests/benchmarks/bench_cross.py [--quick]``.  Cases (issue 9), segment
4096, 50 % overlap, Hann, constant detrend:

1. a 2-channel record of 1e7 samples: one ``sb.CrossSpectrum`` call (which also gives
   both auto-spectra, the coherence and the bands) against one ``scipy.signal.csd`` call
   (the cross-spectrum only).  Target: faster than scipy.
2. an 8-channel record (2e6 samples per channel): the full matrix from one call against
   the 28 pairwise ``scipy.signal.csd`` calls.  Target: at least 4x faster.

Prints the median wall time of each contender, the ratio, the peak extra memory
(tracemalloc) and a check that the numbers agree.  Not part of the test suite: timings
are only meaningful side by side in one run on one machine.
"""

from __future__ import annotations

import argparse
import itertools

import numpy as np
import scipy.signal
from bench_welch import peak_extra, timed  # same folder: the script's own path is on sys.path

import specbench as sb


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="1e6 samples, fewer repeats")
    args = ap.parse_args()
    n2 = 10**6 if args.quick else 10**7
    n8 = 2 * 10**5 if args.quick else 2 * 10**6
    repeats = 2 if args.quick else 3
    kw = dict(fs=1000.0, window="hann", nperseg=4096, noverlap=2048, detrend="constant")
    est = sb.CrossSpectrum(segment_length=4096, overlap=0.5)
    rng = np.random.default_rng(0)

    x = rng.standard_normal((2, n2))
    x[1] += 0.5 * x[0]
    ours = est(x[0], x[1], fs=1000.0)
    _, ref = scipy.signal.csd(x[0], x[1], **kw)
    err = float(np.max(np.abs(ours.csd - ref)) / np.max(np.abs(ref)))
    t_ours = timed(lambda: est(x[0], x[1], fs=1000.0), repeats)
    t_ref = timed(lambda: scipy.signal.csd(x[0], x[1], **kw), repeats)
    m_ours = peak_extra(lambda: est(x[0], x[1], fs=1000.0))
    m_ref = peak_extra(lambda: scipy.signal.csd(x[0], x[1], **kw))
    print(f"2 channels x {n2:.0e} samples, segment 4096, 50 %:")
    print(f"  sb.CrossSpectrum  {t_ours * 1e3:8.1f} ms  peak extra {m_ours / 2**20:7.1f} MiB")
    print(f"  scipy.signal.csd  {t_ref * 1e3:8.1f} ms  peak extra {m_ref / 2**20:7.1f} MiB")
    print(f"  ratio scipy / specbench = {t_ref / t_ours:.2f}x (target > 1), max rel. difference {err:.1e}")

    x8 = rng.standard_normal((8, n8))
    x8[1:] += 0.3 * x8[:1]
    pairs = list(itertools.combinations(range(8), 2))

    def scipy_pairs():
        return [scipy.signal.csd(x8[a], x8[b], **kw)[1] for a, b in pairs]

    mat = est(x8, fs=1000.0)
    refs = scipy_pairs()
    err8 = max(float(np.max(np.abs(mat.csd[a, b] - r)) / np.max(np.abs(r))) for (a, b), r in zip(pairs, refs))
    t_ours8 = timed(lambda: est(x8, fs=1000.0), repeats)
    t_ref8 = timed(scipy_pairs, repeats)
    print(f"8 channels x {n8:.0e} samples (all {len(pairs)} pairs), segment 4096, 50 %:")
    print(f"  sb.CrossSpectrum (one call)      {t_ours8 * 1e3:8.1f} ms")
    print(f"  scipy.signal.csd ({len(pairs)} calls)      {t_ref8 * 1e3:8.1f} ms")
    print(f"  ratio scipy / specbench = {t_ref8 / t_ours8:.2f}x (target >= 4), max rel. difference {err8:.1e}")


if __name__ == "__main__":
    main()
