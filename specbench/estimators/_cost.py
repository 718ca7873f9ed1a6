"""Expected wall time of an estimate: a model of its work times this machine's speed.

The work of each estimator is counted in two currencies: FFT work (``n log2 n`` per
transform of length ``n``, per channel) and streamed sample passes.  Their prices are
measured once per process (about 0.1 s) on the engines themselves: a Welch pass over
2**18 samples (segments of 1024: the in-cache price of segment work, thread hand-off
included), one FFT of 2**20 samples with its |X|^2 (the out-of-cache price of long
transforms) and a streamed moment pass; the price of an FFT of another length is
interpolated between the two in log2(length).  The weights of the terms were fitted on
measured times (``tests/benchmarks/bench_cost.py`` prints measured and expected times
side by side; target within a factor 2 either way).

An estimator class can supply its own model by defining
``_cost(self, n, c, itemsize) -> dict(fft=[(count, length), ...], passes=..., fixed=...)``
(transforms, sample passes and fixed seconds), which :func:`expected_seconds` then uses.
"""

from __future__ import annotations

import math
import threading
import time
from typing import Any

import numpy as np

__all__ = ["expected_seconds", "machine_speed"]

_LOCK = threading.Lock()
_SPEED: dict[str, float] | None = None


def _best(fn, repeats=3) -> float:
    """Median of ``repeats`` timed runs after one warm-up run (the median, not the best: on
    a shared machine the estimates should price the load the estimate will meet)."""
    fn()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return sorted(times)[len(times) // 2]


def machine_speed() -> dict[str, float]:
    """Prices measured once: seconds per FFT work unit (short and long transforms) and
    per streamed sample."""
    global _SPEED
    with _LOCK:
        if _SPEED is None:
            import scipy.fft

            from ._engine import Moments, segment_power

            rng = np.random.default_rng(0)
            x = rng.standard_normal((1, 1 << 19))
            w = np.hanning(1024)
            nseg = ((1 << 19) - 1024) // 512 + 1
            t_seg = _best(lambda: segment_power(x, window=w, step=512, nfft=1024, detrend="constant", twosided=False))
            big = rng.standard_normal(1 << 20)

            def long_fft():
                s = scipy.fft.rfft(big, workers=1)
                np.abs(s) ** 2

            t_big = _best(long_fft)
            t_pass = _best(lambda: Moments(x).add(x, 0, x.shape[1], False))
            _SPEED = {
                # per n log2 n, segments of 1024, threaded; 0.4: long runs amortise the
                # per-call costs that dominate this short probe (fitted, bench_cost.py)
                "fft_short": 0.4 * t_seg / (nseg * 1024 * 10.0),
                "fft_long": t_big / ((1 << 20) * 20.0),  # per n log2 n, one transform of 2**20
                "pass": t_pass / x.size,
            }
        return dict(_SPEED)


def _threads() -> int:
    from ._engine import _THREADS

    return _THREADS


def largest_prime_factor(n: int) -> int:
    n, p, largest = int(n), 2, 1
    while p * p <= n:
        while n % p == 0:
            n //= p
            largest = p
        p += 1 if p == 2 else 2
    return max(largest, n)


#: pocketfft (scipy.fft, numpy.fft) transforms lengths whose prime factors are all at most
#: this size directly; a length with a larger prime factor is transformed by Bluestein's
#: algorithm, about 3 transforms of the next fast length >= 2n - 1 (measured here: an rfft
#: of the prime length 10000019 takes 8.4x the time of one of 10**7)
DIRECT_FACTORS = 13


def _fast_lengths(transforms):
    import scipy.fft

    out = []
    for count, n, threaded in transforms:
        n = int(n)
        if n > 64 and largest_prime_factor(n) > DIRECT_FACTORS:
            out.append((3.0 * count, scipy.fft.next_fast_len(2 * n - 1), threaded))
        else:
            out.append((count, n, threaded))
    return out


def _fft_seconds(transforms, speed) -> float:
    total = 0.0
    for count, n, threaded in _fast_lengths(transforms):
        lg = math.log2(max(2, n))
        f = min(1.0, max(0.0, (lg - 14.0) / 6.0))  # in cache up to 2**14 samples
        short = speed["fft_short"] * (1.0 if threaded else _threads())
        long = speed["fft_long"] * (1.0 / _threads() if threaded else 1.0)
        price = math.exp((1 - f) * math.log(short) + f * math.log(long))
        total += count * n * lg * price
    return total


def _segment_model(n: int, c: int, nperseg: int, step: int, nfft: int, itemsize: int, passes: int = 1) -> dict:
    """The streamed segment engine: per segment detrend, window, FFT, |X|^2, summation."""
    nseg = max(0, (n - nperseg) // step + 1)
    single = 0.6 if itemsize <= 4 else 1.0
    threaded = nseg > 1
    # fixed: about 1 us per sample of segment per call of the threaded engine (fitted: 29
    # segments of 65536 took 2.3 ms each, 305 of them 1.3 ms each)
    fixed = 1e-3 + (1e-6 * nfft if threaded else 0.0)
    return dict(fft=[(c * nseg * passes * single, nfft, threaded)], passes=2.0 * c * n, fixed=fixed)


def _lag_model(n: int, c: int, m: int, products: int) -> dict:
    import scipy.fft

    blk = int(min(n, max(1 << 16, 4 * m)))
    p = scipy.fft.next_fast_len(blk + m, real=True)
    nblocks = math.ceil(n / blk)
    # two real FFTs per block and product (an rfft is about half a complex FFT)
    return dict(fft=[(c * nblocks * products * 1.2, p, nblocks > 1)], passes=c * n * 3.0 * products, fixed=1e-3)


def lag_cost(m: int, n: int, c: int, products: int = 1) -> dict:
    """Work model of lag products up to ``m`` lags (``products`` per channel: 4 for a cross pair)."""
    return _lag_model(n, c, min(m, max(1, n - 1)), products)


def _model(est: Any, n: int, c: int, itemsize: int) -> dict:
    custom = getattr(est, "_cost", None)
    if custom is not None:
        return custom(n, c, itemsize)
    kind = type(est).__name__
    if kind == "Welch":
        nperseg = min(est.segment_length, n)
        m = _segment_model(n, c, nperseg, nperseg - est.noverlap, est.nfft or nperseg, itemsize)
        if est.average == "median":  # every segment's spectrum kept, then a median over them
            nseg = (n - nperseg) // (nperseg - est.noverlap) + 1
            m["passes"] += c * nseg * (nperseg // 2 + 1) * 12.0
        return m
    if kind == "Periodogram":
        nfft = max(est.nfft or n, n)
        m = _segment_model(n, c, n, n, nfft, itemsize)
        m["passes"] += 40.0 * c * n  # one long transform: fresh memory for its output (fitted)
        return m
    # Multitaper, Autocorrelation and CrossCorrelation define _cost (above); this module imports no estimator
    if kind == "Correlogram":
        m = lag_cost(est.max_lag, n, c)
        m["scale"] = 1.8 * SCALE  # fitted on bench_cost (measured 3.4x / 2.0x the lag model at 1e6 / 1e7)
        return m
    if kind == "Covariance":  # lag products of every pair, the lag range grown until the sums settle
        m = _lag_model(n, c, 1 << 14, c * c)
        # measured 20x the time for 10x the samples (bench_cost): the lag range grows with n
        grow = 8.0 * max(1.0, n / 1e6) ** 0.3
        m["fft"] = [(count * grow, length, threaded) for count, length, threaded in m["fft"]]
        m["passes"] *= grow
        return m
    if kind == "CrossSpectrum":  # one FFT per segment and channel, products of every pair
        nperseg = min(est.segment_length, n)
        step = max(1, nperseg - int(est.overlap * nperseg))
        m = _segment_model(n, c, nperseg, step, est.nfft or nperseg, itemsize)
        m["passes"] += c * c * n * 1.0
        m["fixed"] += 0.03  # coherence, phase and gain bands of every pair (fitted on bench_cost)
        return m
    # an estimator without a model: a Welch-sized load over the channels, twice
    seg = getattr(est, "segment_length", None) or min(n, 4096)
    seg = min(seg, n)
    return _segment_model(n, c, seg, max(1, seg // 2), seg, itemsize, passes=2)


def expected_seconds(est: Any, n: int, c: int = 1, dtype: Any = "float64") -> float:
    """See :meth:`specbench.estimators.Estimator.expected_seconds`."""
    if n < 1 or c < 1:
        from .._errors import SettingsError

        raise SettingsError(
            f"expected_seconds needs n_samples >= 1 and n_channels >= 1; got {n} and {c}. "
            "Pass the record's length and channel count."
        )
    dt = np.dtype(dtype)
    itemsize = dt.itemsize // 2 if dt.kind == "c" else dt.itemsize
    m = _model(est, n, c, itemsize)
    speed = machine_speed()
    fft = m.get("fft", [])
    if isinstance(fft, (int, float)):  # an FFT work count in n log2 n units, short-transform price
        fft = [(float(fft) / (1024 * 10.0), 1024, True)]
    work = _fft_seconds(fft, speed) + m.get("passes", 0.0) * speed["pass"]
    return float(m.get("fixed", 0.0) + m.get("scale", SCALE) * work)


#: measured / modelled time over bench_cost's cases (median ratio, shared 2-core machine):
#: the probe runs in cache on a short record, the estimates out of cache on long ones.  A
#: model that was fitted on measured times as a whole says so with its own ``scale``.
SCALE = 1.6
