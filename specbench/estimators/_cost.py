"""Expected wall time of an estimate: a model of its work times this machine's speed.

The work of each estimator is counted in two currencies: FFT work (``n log2 n`` per
transform of length ``n``, per channel) and streamed sample passes (one read-modify-write
of a sample in a block that stays in cache).  The seconds per unit of each are measured
once per process on a small FFT and a small array pass (about 5 ms together), so the
estimate follows the machine it runs on.  The weights of each estimator's terms were
fitted on measured times (``tests/benchmarks/bench_cost.py`` prints the measured and
expected times side by side; target within a factor 2 either way).

An estimator class can supply its own model by defining
``_cost(self, n, c, itemsize) -> dict(fft=..., passes=..., fixed=...)`` (FFT work units,
sample passes and fixed seconds), which :func:`expected_seconds` then uses.
"""

from __future__ import annotations

import math
import threading
import time
from typing import Any

import numpy as np
import scipy.fft

__all__ = ["expected_seconds", "machine_speed"]

_LOCK = threading.Lock()
_SPEED: dict[str, float] | None = None


def machine_speed() -> dict[str, float]:
    """Seconds per FFT work unit (``n log2 n``) and per sample pass, measured once."""
    global _SPEED
    with _LOCK:
        if _SPEED is None:
            a = np.random.default_rng(0).standard_normal((32, 4096))
            w = np.hanning(4096)
            buf = np.empty_like(a)
            best_fft = best_pass = math.inf
            for _ in range(5):
                t0 = time.perf_counter()
                scipy.fft.rfft(a, axis=-1, workers=1)
                t1 = time.perf_counter()
                np.multiply(a, w, out=buf)
                t2 = time.perf_counter()
                best_fft = min(best_fft, t1 - t0)
                best_pass = min(best_pass, t2 - t1)
            _SPEED = {"fft": best_fft / (a.size * 12.0), "pass": best_pass / a.size}
        return dict(_SPEED)


def _threads() -> int:
    from ._engine import _THREADS

    return _THREADS


def _fft(count: float, n: int) -> float:
    return count * n * math.log2(max(2, n))


def _segment_model(n: int, c: int, nperseg: int, step: int, nfft: int, itemsize: int, passes: int = 1) -> dict:
    """The streamed segment engine: per segment one window multiply (+ mean), one FFT, |X|^2."""
    nseg = max(0, (n - nperseg) // step + 1)
    single = itemsize <= 4
    fft = _fft(c * nseg * passes, nfft) * (0.55 if single else 1.0)
    seg_passes = c * nseg * passes * (nperseg * 3 + (nfft // 2 + 1) * 2) * (0.6 if single else 1.0)
    return dict(fft=fft / _threads(), passes=seg_passes / _threads() + 3.0 * c * n, fixed=2e-3)


def _lag_model(n: int, c: int, m: int, products: int) -> dict:
    blk = int(min(n, max(1 << 16, 4 * m)))
    p = scipy.fft.next_fast_len(blk + m, real=True)
    nblocks = math.ceil(n / blk)
    fft = _fft(c * nblocks * 2.5 * products, p) / 2.0  # rfft of real data: half a complex FFT
    return dict(fft=fft / _threads(), passes=c * n * 4.0 * products, fixed=2e-3)


def _model(est: Any, n: int, c: int, itemsize: int) -> dict:
    custom = getattr(est, "_cost", None)
    if custom is not None:
        return custom(n, c, itemsize)
    kind = type(est).__name__
    if kind == "Welch":
        nperseg = min(est.segment_length, n)
        return _segment_model(n, c, nperseg, nperseg - est.noverlap, est.nfft or nperseg, itemsize)
    if kind == "Periodogram":
        nfft = max(est.nfft or n, n)
        m = _segment_model(n, c, n, n, nfft, itemsize)
        m["fft"] *= _threads()  # one FFT: no split over threads
        return m
    if kind == "Multitaper":
        from .spectral import _multitaper_cost

        return _multitaper_cost(est, n, c, itemsize)
    if kind in ("Correlogram", "Autocorrelation", "CrossCorrelation"):
        fs = 1.0
        if kind == "Correlogram":
            m = est.max_lag
        else:
            from .correlation import _max_lag_samples

            try:
                m = _max_lag_samples(kind, est.max_lag, fs, n)
            except Exception:
                m = max(1, n // 10)
        products = 4 if kind == "CrossCorrelation" else 1
        return _lag_model(n, c, min(m, max(1, n - 1)), products)
    # an estimator without a model: a streamed pass per sample and a Welch-sized FFT load
    seg = getattr(est, "segment_length", None) or min(n, 4096)
    return _segment_model(n, c, min(seg, n), max(1, min(seg, n) // 2), min(seg, n), itemsize, passes=2)


def expected_seconds(est: Any, n: int, c: int = 1, dtype: Any = "float64") -> float:
    """See :meth:`specbench.estimators.Estimator.expected_seconds`."""
    if n < 1 or c < 1:
        from .._errors import SettingsError

        raise SettingsError(
            f"expected_seconds needs n_samples >= 1 and n_channels >= 1; got {n} and {c}. "
            "Pass the record's length and channel count."
        )
    itemsize = np.dtype(dtype).itemsize
    if np.dtype(dtype).kind == "c":
        itemsize //= 2
    m = _model(est, n, c, itemsize)
    speed = machine_speed()
    return float(m.get("fixed", 0.0) + m.get("fft", 0.0) * speed["fft"] + m.get("passes", 0.0) * speed["pass"])
