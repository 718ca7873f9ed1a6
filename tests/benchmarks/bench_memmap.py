"""Benchmark: estimate a recording of several GB from a memory map with bounded memory.

Writes a float32 .npy file of white noise (default 4 GiB, 1.07e9 samples) in a temporary
folder, then, in a fresh process, opens it with ``sb.load`` (a memory map) and runs
``Welch(segment_length=4096, overlap=0.75)`` over the whole record, sampling the
process's memory every 10 ms.  It prints, side by side in the same run:

* open time of the memory map and the Welch time, against one plain streaming pass that
  sums the file in blocks (the I/O floor on this machine);
* peak anonymous memory (the process's own allocations) against the file size: bounded
  memory means a few tens of MB whatever the file size.  File-backed pages of the map
  (``RssFile``) are page cache that the kernel reclaims under pressure; they are printed
  for information.
* that the estimate is right: the white level 2 sigma^2 / fs within 1 %.

Usage: ``python tests/benchmarks/bench_memmap.py [--gib 4] [--keep-dir DIR]``.  The file
is deleted afterwards.  Not part of the test suite (it is a benchmark, not a timed test).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

FS = 10_000.0
BLOCK = 1 << 24  # samples written / summed per block


def write_file(path: Path, n: int) -> float:
    t = time.perf_counter()
    out = np.lib.format.open_memmap(path, mode="w+", dtype=np.float32, shape=(n,))
    rng = np.random.default_rng(2024)
    for start in range(0, n, BLOCK):
        stop = min(n, start + BLOCK)
        out[start:stop] = rng.standard_normal(stop - start, dtype=np.float32)
    out.flush()
    del out
    return time.perf_counter() - t


CHILD = r"""
import json, sys, threading, time
import numpy as np
import specbench as sb

def status():
    fields = {}
    with open("/proc/self/status") as f:
        for line in f:
            key, _, value = line.partition(":")
            if key in ("RssAnon", "RssFile", "VmHWM"):
                fields[key] = int(value.split()[0]) * 1024
    return fields

peak = {"RssAnon": 0, "RssFile": 0}
running = True
def sampler():
    while running:
        s = status()
        for k in peak:
            peak[k] = max(peak[k], s[k])
        time.sleep(0.01)

path, fs, block, mode = sys.argv[1], float(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
base = status()["RssAnon"]
thread = threading.Thread(target=sampler, daemon=True)
thread.start()
t = time.perf_counter()
sig = sb.load(path, fs=fs)
t_open = time.perf_counter() - t
result = {"open_s": t_open, "memmap": type(sig.data).__name__}
if mode == "pass":
    t = time.perf_counter()
    total = 0.0
    x = sig.data[0]
    for start in range(0, sig.n_samples, block):
        total += float(np.sum(x[start:start + block], dtype=np.float64))
    result["pass_s"] = time.perf_counter() - t
else:
    est = sb.Welch(segment_length=4096, overlap=0.75)
    t = time.perf_counter()
    spec = est(sig)
    result["welch_s"] = time.perf_counter() - t
    result["level"] = float(np.median(spec.value[0, 10:-10]))
    result["segments"] = int(spec.segments)
running = False
thread.join()
result["anon_base"] = base
result.update({f"peak_{k}": v for k, v in peak.items()})
print(json.dumps(result))
"""


def run_child(path: Path, mode: str) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, str(path), str(FS), str(BLOCK), mode],
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--gib", type=float, default=4.0, help="file size in GiB (float32)")
    parser.add_argument("--keep-dir", type=Path, default=None,
                        help="folder for the temporary file (default: the system temp dir)")
    args = parser.parse_args()
    n = int(args.gib * (1 << 30)) // 4
    with tempfile.TemporaryDirectory(dir=args.keep_dir) as tmp:
        path = Path(tmp) / "long_record.npy"
        t_write = write_file(path, n)
        size = path.stat().st_size
        print(f"wrote {size / (1 << 30):.2f} GiB ({n:,} float32 samples) in {t_write:.1f} s")
        floor = run_child(path, "pass")
        welch = run_child(path, "welch")
    mib = 1 << 20
    extra = welch["peak_RssAnon"] - welch["anon_base"]
    extra_pass = floor["peak_RssAnon"] - floor["anon_base"]
    level, want = welch["level"], 2.0 / FS
    print(f"data type after sb.load: {welch['memmap']}; open {welch['open_s'] * 1e3:.2f} ms")
    print(f"streaming sum (I/O floor): {floor['pass_s']:.2f} s, "
          f"extra anonymous memory {extra_pass / mib:.0f} MiB")
    print(f"Welch 4096/75 % over {welch['segments']:,} segments: {welch['welch_s']:.2f} s "
          f"= {welch['welch_s'] / floor['pass_s']:.2f} x the I/O floor")
    print(f"extra anonymous memory during Welch: {extra / mib:.0f} MiB = "
          f"{extra / size:.4f} x the file size ({size / mib:.0f} MiB); "
          f"peak file-backed pages {welch['peak_RssFile'] / mib:.0f} MiB (reclaimable cache)")
    print(f"white level {level:.4e} against 2 sigma^2/fs = {want:.4e} "
          f"(ratio {level / want:.4f})")
    bounded = extra < 256 * mib
    right = abs(level / want - 1) < 0.01
    print("RESULT:", "bounded memory" if bounded else "MEMORY NOT BOUNDED",
          "and correct level" if right else "but WRONG LEVEL")
    sys.exit(0 if bounded and right else 1)


if __name__ == "__main__":
    main()
