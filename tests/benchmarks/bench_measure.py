"""Benchmark: measurements on a 1e6-bin spectrum, and the advisor on a 1e7-sample record.

Targets (issue 11): every measurement on a 1e6-bin spectrum under 50 ms, so readouts can follow
a cursor; ``sb.advise`` on 1e7 samples under 5 s.  Printed beside each median: the target, the
ratio to it, and the ratio to a reference measured in the same run (one ``np.median`` over the
1e6 density values: the cost of touching every bin once with a selection).  "first" is the first
call on a new spectrum (the bin-correlation structure of the estimator is built then, and cached
per settings); "median" the median of the repeats on new spectra of the same settings.

Run: ``python tests/benchmarks/bench_measure.py`` (``--quick`` for fewer repeats).  Not part of the
default test run.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time

import numpy as np

import specbench as sb

TARGET_MS = 50.0
ADVISE_TARGET_S = 5.0


def _time(fn, repeats):
    out = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t)
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    reps = 3 if args.quick else 7
    fs = 48000.0
    n = 2_000_000
    rng = np.random.default_rng(0)
    t = np.arange(n) / fs
    x = rng.standard_normal(n) + 0.5 * np.sin(2 * np.pi * 1234.56 * t) + 0.05 * np.sin(2 * np.pi * 7001.3 * t)
    for est in (sb.Periodogram(window="hann"), sb.Multitaper(segment_length=n)):
        spec = est(x, fs=fs)
        dens = spec.view("density")[0]
        ref = statistics.median(_time(lambda d=dens: np.median(d), reps))
        print(f"\n{est!r}: {spec.freq.size:,} bins; reference np.median over the bins {ref * 1e3:.1f} ms")
        cases = {
            "band_power(1000, 1500)": lambda s: s.band_power(1000.0, 1500.0),
            "band_power(0, fs/2) (all bins)": lambda s: s.band_power(0.0, fs / 2),
            "band_rms(20, 20000)": lambda s: s.band_rms(20.0, 20000.0),
            "noise_floor() (all bins)": lambda s: s.noise_floor(),
            "tones(max_count=10)": lambda s: s.tones(max_count=10),
            "octave_bands(3)": lambda s: s.octave_bands(3),
            "octave_bands(24)": lambda s: s.octave_bands(24),
            "integrate(1)": lambda s: s.integrate(1),
        }
        print(f"{'measurement':34s} {'first ms':>9s} {'median ms':>10s} {'/target':>8s} {'/reference':>10s}")
        for name, fn in cases.items():
            from specbench.measure._structure import _cached

            _cached.cache_clear()  # the first call builds the estimator's bin structure again
            fresh = sb.Spectrum(**{f: getattr(spec, f) for f in spec.__dataclass_fields__})
            first = _time(lambda f=fn, s=fresh: f(s), 1)[0]
            times = []
            for _ in range(reps):
                s2 = sb.Spectrum(**{f: getattr(spec, f) for f in spec.__dataclass_fields__})  # new object, same data
                tt = time.perf_counter()
                fn(s2)
                times.append(time.perf_counter() - tt)
            med = statistics.median(times)
            flag = "" if med * 1e3 <= TARGET_MS else "  OVER TARGET"
            print(f"{name:34s} {first * 1e3:9.1f} {med * 1e3:10.1f} {med * 1e3 / TARGET_MS:8.2f} "
                  f"{med / ref:10.1f}{flag}")
        found = spec.tones(max_count=10)
        print("  tones found:", ", ".join(f"{q.freq:.3f} Hz" for q in found))
    # advisor, cold (fresh process: no cached window shapes, tapers or machine-speed probe) and warm
    code = ("import time, numpy as np, specbench as sb; x = np.zeros(10_000_000, dtype=np.float32); "
            "sig = sb.Signal(x, fs=10000.0); calls = []; t = time.perf_counter(); "
            "a = sb.advise(sig, resolution=0.5, band_db=1.0, sidelobe_db=-60, progress=calls.append); "
            "cold = time.perf_counter() - t; t = time.perf_counter(); "
            "sb.advise(sig, resolution=0.5, band_db=1.0, sidelobe_db=-60); warm = time.perf_counter() - t; "
            "print(cold, warm, a.considered, len(calls), repr(a[0].estimator))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    cold, warm = float(out[0]), float(out[1])
    print(f"\nadvise on 1e7 samples: cold {cold:.2f} s ({cold / ADVISE_TARGET_S:.2f} of the 5 s target), warm "
          f"{warm * 1e3:.0f} ms; {out[2]} settings scored, {out[3]} progress calls; #1 {' '.join(out[4:])}")
    # the Workbench's advise panel on a 1e7-sample record (fresh process): propose, then apply #1
    code = ("import time, numpy as np, specbench as sb; "
            "x = np.random.default_rng(0).standard_normal(10_000_000).astype(np.float32); "
            "bench = sb.Workbench(sb.Signal(x, fs=10000.0)); adv = bench.views['psd'].advise; "
            "adv.resolution.value = 0.5; adv.band_db.value = 1.0; adv.sidelobe_db.value = -60.0; "
            "t = time.perf_counter(); a = adv.propose(); propose = time.perf_counter() - t; "
            "t = time.perf_counter(); adv.list.children[0].children[0].click(); bench.flush(); "
            "applied = time.perf_counter() - t; "
            "print(propose, applied, adv.progress_calls, bench.estimator == a[0].estimator)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    propose = float(out[0])
    print(f"advise panel on 1e7 samples: propose {propose:.2f} s ({propose / ADVISE_TARGET_S:.2f} of the 5 s "
          f"target), {out[2]} progress updates; apply #1 and recompute {float(out[1]):.2f} s (applied: {out[3]})")


if __name__ == "__main__":
    main()
