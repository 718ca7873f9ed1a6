"""Benchmark: overlapping Allan deviation at octave averaging times, specbench vs
allantools.oadev measured side by side in one run.

    python tests/benchmarks/bench_allan.py [--samples 1e8] [--reference 1e7]

Prints time per million samples of each, their ratio at the reference size (allantools
holds the whole phase record and its differences in memory, so it runs on the smaller
size), specbench's time on the full record (streamed from a float32 memory map), and the
peak traced memory (tracemalloc) of each.
"""

import argparse
import os
import tempfile
import time
import tracemalloc

import numpy as np

import specbench as sb


def _measure(fn):
    tracemalloc.start()
    t0 = time.perf_counter()
    out = fn()
    dt = time.perf_counter() - t0
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return out, dt, peak


def main() -> None:
    import allantools

    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=float, default=1e8)
    ap.add_argument("--reference", type=float, default=1e7)
    args = ap.parse_args()
    n, nref = int(args.samples), int(args.reference)
    rng = np.random.default_rng(0)
    est = sb.AllanDeviation(taus="octave")

    x = rng.standard_normal(nref)

    def ref_run(x=x):
        return allantools.oadev(x, rate=1.0, data_type="freq", taus="octave")

    def ours(x=x):
        return est(x, fs=1.0)

    _, t_ref, m_ref = _measure(ref_run)
    r, t_sb, m_sb = _measure(ours)
    t_al, a_al, _, _ = allantools.oadev(x, rate=1.0, data_type="freq", taus=r.tau)
    agree = float(np.max(np.abs(r.value / a_al - 1)))
    print(f"{nref:.0e} samples (in memory, float64): allantools.oadev {t_ref:.2f} s ({t_ref / nref * 1e6 * 1e3:.1f} ms"
          f" per 1e6), peak {m_ref / 2**20:.0f} MiB; specbench {t_sb:.2f} s ({t_sb / nref * 1e6 * 1e3:.1f} ms per 1e6),"
          f" peak {m_sb / 2**20:.1f} MiB; ratio allantools/specbench {t_ref / t_sb:.2f}x;"
          f" max rel. difference {agree:.1e}")
    del x, ref_run, ours

    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "rate.npy")
        mm = np.lib.format.open_memmap(path, mode="w+", dtype=np.float32, shape=(n,))
        for a in range(0, n, 1 << 22):
            mm[a : a + (1 << 22)] = rng.standard_normal(min(1 << 22, n - a), dtype=np.float32)
        mm.flush()
        del mm
        data = np.load(path, mmap_mode="r")
        r, t_big, m_big = _measure(lambda: est(data, fs=1.0))
        print(f"{n:.0e} samples (float32 memory map, {n * 4 / 2**20:.0f} MiB on disk): specbench {t_big:.1f} s "
              f"({t_big / n * 1e6 * 1e3:.1f} ms per 1e6), {r.tau.size} averaging times, peak traced memory "
              f"{m_big / 2**20:.1f} MiB; allantools would hold ~{n * 8 * 4 / 2**30:.1f} GiB (phase + differences)")
        print(f"scaled comparison: specbench at {n:.0e} per 1e6 samples vs allantools at {nref:.0e} per 1e6: "
              f"{(t_ref / nref) / (t_big / n):.2f}x")


if __name__ == "__main__":
    main()
