"""Benchmark: Welch on a lazily generated 1e8-sample dask array on a 2-worker LocalCluster,
against the in-memory threaded path on the same samples.

Run: ``python tests/benchmarks/bench_dask.py [--n 1e8] [--segment 4096]``.  Prints both wall
times, whether the results are equal bit for bit, and the peak growth of the client's
resident memory (sampled every 10 ms) during the cluster run -- which must stay at a few
blocks however long the record (the 1e8-sample record is 800 MB).  The in-memory path
materialises the same samples first (outside its timing).  This is about bounded memory
and correctness on a 2-core machine, not a speed race: the workers also generate the data.
"""

from __future__ import annotations

import argparse
import threading
import time

import numpy as np


def rss() -> int:
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) * 1024
    return 0


class PeakRSS:
    def __enter__(self):
        self.base = rss()
        self.peak = self.base
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._watch, daemon=True)
        self.thread.start()
        return self

    def _watch(self):
        while not self.stop.wait(0.01):
            self.peak = max(self.peak, rss())

    def __exit__(self, *exc):
        self.stop.set()
        self.thread.join()
        self.peak = max(self.peak, rss())

    @property
    def growth(self) -> int:
        return self.peak - self.base


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=float, default=1e8)
    ap.add_argument("--segment", type=int, default=4096)
    ap.add_argument("--chunk", type=int, default=1 << 22)
    args = ap.parse_args()
    import dask
    import dask.array as da
    from distributed import Client, LocalCluster

    import specbench as sb

    n = int(args.n)
    est = sb.Welch(segment_length=args.segment, overlap=0.5)
    lazy = da.random.default_rng(12).standard_normal(n, chunks=args.chunk)
    print(f"record: {n:,} float64 samples ({n * 8 / 2**20:,.0f} MB), dask chunks of {args.chunk:,}; {est!r}")
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None, memory_limit="4GiB") as cluster, Client(cluster):
        est(lazy[: 1 << 20], fs=1.0)  # warm-up: imports and caches on the workers
        with PeakRSS() as mem:
            t0 = time.perf_counter()
            on_cluster = est(lazy, fs=1.0)
            t_cluster = time.perf_counter() - t0
    print(f"2-worker LocalCluster: {t_cluster:6.2f} s (data generated on the workers), "
          f"client peak RSS growth {mem.growth / 2**20:6.1f} MB")
    with dask.config.set(scheduler="threads"):
        x = lazy.compute()
    t0 = time.perf_counter()
    in_memory = est(x, fs=1.0)
    t_mem = time.perf_counter() - t0
    same = np.array_equal(on_cluster.value, in_memory.value) and np.array_equal(on_cluster.lower, in_memory.lower)
    print(f"in memory, threaded:    {t_mem:6.2f} s (samples already in memory: {x.nbytes / 2**20:,.0f} MB)")
    print(f"cluster / in-memory time: {t_cluster / t_mem:.2f}x; results equal bit for bit: {same}; "
          f"client memory growth / record size: {mem.growth / x.nbytes:.3f}")


if __name__ == "__main__":
    main()
