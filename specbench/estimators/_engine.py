"""Private engines: streamed segment averaging, blocked lagged products, moments.

Everything here works on ``(channels, samples)`` arrays, never materialises all segments
at once, and keeps float32 data in float32 (accumulating in float64).  Work is split
into fixed blocks whose partial sums are added in block order, so a result does not
depend on the number of threads: the same input gives the same bits on every run.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import scipy.fft
from numpy.lib.stride_tricks import sliding_window_view

__all__ = [
    "segment_power",
    "lagged_products",
    "trend_coefficients",
    "detrended_variance",
    "block_segments",
    "ordered_map",
]

_POOL: ThreadPoolExecutor | None = None
_THREADS = max(1, min(2, os.cpu_count() or 1))

#: samples per block of work (PERFORMANCE.md: about 2**18 is the sweet spot here)
BLOCK_SAMPLES = 1 << 18


def _pool() -> ThreadPoolExecutor:
    global _POOL
    if _POOL is None:
        _POOL = ThreadPoolExecutor(max_workers=_THREADS, thread_name_prefix="specbench")
    return _POOL


def ordered_map(func: Callable, items: Sequence) -> list:
    """``[func(i) for i in items]``, on the worker threads when there is more than one item."""
    if len(items) <= 1 or _THREADS == 1:
        return [func(i) for i in items]
    return list(_pool().map(func, items))


def block_segments(nperseg: int) -> int:
    """Segments per block: clamp(2**18 / nperseg, 8, 1024)."""
    return int(min(1024, max(8, BLOCK_SAMPLES // max(1, nperseg))))


def as_2d(x: np.ndarray) -> np.ndarray:
    """View ``(..., n)`` as ``(channels, n)`` (no copy for contiguous data)."""
    return x.reshape(-1, x.shape[-1]) if x.ndim != 2 else x


class _Detrender:
    """Per-segment detrending on the last axis: none, constant or linear."""

    def __init__(self, kind: str, n: int, dtype: np.dtype):
        self.kind = kind
        if kind == "linear":
            t = np.arange(n, dtype=np.float64)
            basis = np.stack([np.ones(n), t - t.mean()], axis=1)
            q, _ = np.linalg.qr(basis)
            self.q = q.astype(dtype)

    def __call__(self, seg: np.ndarray) -> np.ndarray:
        """Return a new array (never a view of ``seg``)."""
        if self.kind == "constant":
            return seg - seg.mean(axis=-1, keepdims=True)
        if self.kind == "linear":
            coef = seg @ self.q
            return seg - coef @ self.q.T
        return np.array(seg, copy=True)


def segment_power(
    x: np.ndarray,
    *,
    window: np.ndarray,
    step: int,
    nfft: int,
    detrend: str,
    twosided: bool,
    segments: np.ndarray | None = None,
    keep_each: bool = False,
) -> tuple[np.ndarray, int]:
    """Sum (or stack) of ``|FFT(detrend(segment) * window)|**2`` over segments.

    Parameters
    ----------
    x : (C, N) array
    window : (nperseg,) array, the taper applied to every segment
    step : int, samples between segment starts
    nfft : int, FFT length (zero padding when > nperseg)
    detrend : "none" | "constant" | "linear"
    twosided : bool, full FFT (complex data or two-sided output) instead of rfft
    segments : optional sorted int array of the segment indices to use (default all)
    keep_each : return the per-segment powers, shape (C, nseg, nfreq), instead of the sum

    Returns
    -------
    power : (C, nfreq) float64 sum over segments, or (C, nseg, nfreq) when ``keep_each``
    nseg : number of segments used
    """
    nperseg = window.size
    c, n = x.shape
    n_all = (n - nperseg) // step + 1
    if segments is None:
        index = None
        nseg = n_all
    else:
        index = np.asarray(segments, dtype=np.intp)
        nseg = index.size
    work = np.float32 if x.dtype in (np.float32, np.complex64) else np.float64
    w = window.astype(work, copy=False)
    view = sliding_window_view(x, nperseg, axis=-1)[:, ::step, :]
    detr = _Detrender(detrend, nperseg, np.dtype(work))
    fft = scipy.fft.fft if twosided else scipy.fft.rfft
    nfreq = nfft if twosided else nfft // 2 + 1
    per_block = block_segments(nperseg)
    starts = list(range(0, nseg, per_block))
    out = np.empty((c, nseg, nfreq), dtype=np.float64) if keep_each else None

    def run(s0: int):
        s1 = min(s0 + per_block, nseg)
        blk = view[:, s0:s1, :] if index is None else view[:, index[s0:s1], :]
        seg = detr(blk)
        seg *= w
        spec = fft(seg, n=nfft, axis=-1, workers=1)
        p = spec.real * spec.real
        p += spec.imag * spec.imag
        if keep_each:
            out[:, s0:s1, :] = p
            return None
        return p.sum(axis=1, dtype=np.float64)

    parts = ordered_map(run, starts)
    if keep_each:
        return out, nseg
    total = np.zeros((c, nfreq), dtype=np.float64)
    for p in parts:
        total += p
    return total, nseg


def trend_coefficients(x: np.ndarray, detrend: str) -> tuple[np.ndarray, np.ndarray]:
    """Per-channel ``(c0, c1)`` of the trend ``c0 + c1 * t`` (t in samples) to remove.

    ``"none"``: zeros; ``"constant"``: the mean; ``"linear"``: the least-squares line.
    One chunked pass, no copy of the record.
    """
    c, n = x.shape
    zero = np.zeros(c)
    if detrend == "none":
        return zero, zero
    s1 = np.zeros(c)
    st = np.zeros(c)
    chunk = 1 << 16
    for t0 in range(0, n, chunk):
        seg = np.asarray(x[:, t0 : t0 + chunk], dtype=np.float64)
        s1 += seg.sum(axis=-1)
        if detrend == "linear":
            st += seg @ np.arange(t0, t0 + seg.shape[-1], dtype=np.float64)
    mean = s1 / n
    if detrend == "constant" or n < 2:
        return mean, zero
    t_mean = (n - 1) / 2
    slope = (st / n - mean * t_mean) / ((n * n - 1) / 12.0)
    return mean - slope * t_mean, slope


def lagged_products(
    x: np.ndarray,
    y: np.ndarray,
    max_lag: int,
    trend_x: tuple[np.ndarray, np.ndarray] | None = None,
    trend_y: tuple[np.ndarray, np.ndarray] | None = None,
) -> np.ndarray:
    """``s[k] = sum_t x[t] * y[t + k]`` for ``k = 0..max_lag``, per channel, by blocked FFT.

    ``x`` and ``y`` are (C, N) real arrays; optional trends ``(c0, c1)`` are subtracted
    block by block (``x[t] - c0 - c1 t``), so the record is never copied.  The record is
    cut into blocks of ``L`` samples; each block of ``x`` is correlated with the matching
    stretch of ``y`` that is ``max_lag`` samples longer, and the cross-spectra are summed
    before a single inverse FFT, so every product ``x[t] y[t+k]`` is counted once, exactly.
    """
    c, n = x.shape
    m = int(max_lag)
    blk = int(min(n, max(1 << 16, 4 * m)))
    p = scipy.fft.next_fast_len(blk + m, real=True)
    nblocks = math.ceil(n / blk)
    group = max(1, (1 << 20) // p)
    starts = list(range(0, nblocks, group))

    def piece(a: np.ndarray, trend, t0: int, t1: int) -> np.ndarray:
        out = np.asarray(a[:, t0:t1], dtype=np.float64)
        if trend is not None:
            t = np.arange(t0, t1, dtype=np.float64)
            out = out - trend[0][:, None] - trend[1][:, None] * t
        return out

    def run(b0: int) -> np.ndarray:
        acc = np.zeros((c, p // 2 + 1), dtype=np.complex128)
        for b in range(b0, min(b0 + group, nblocks)):
            t0 = b * blk
            fx = scipy.fft.rfft(piece(x, trend_x, t0, min(t0 + blk, n)), n=p, axis=-1, workers=1)
            fy = scipy.fft.rfft(piece(y, trend_y, t0, min(t0 + blk + m, n)), n=p, axis=-1, workers=1)
            acc += np.conj(fx) * fy
        return acc

    total = np.zeros((c, p // 2 + 1), dtype=np.complex128)
    for part in ordered_map(run, starts):
        total += part
    return scipy.fft.irfft(total, n=p, axis=-1)[:, : m + 1]


def detrended_variance(x: np.ndarray, detrend: str) -> np.ndarray:
    """Per-channel mean square of ``x`` after removing its mean or least-squares line.

    Computed in chunks (no copy of the record); ``detrend="none"`` gives the mean square.
    Complex data: the mean square of the modulus (a linear trend is not removed).
    """
    c, n = x.shape
    chunk = 1 << 16
    cplx = np.iscomplexobj(x)
    dt = np.complex128 if cplx else np.float64
    # shift by a rough mean first, so the one-pass sums do not cancel for large offsets
    shift = np.asarray(x[:, : min(n, 4096)], dtype=dt).mean(axis=-1)
    s1 = np.zeros(c, dtype=dt)
    s2 = np.zeros(c)
    st = np.zeros(c)
    for t0 in range(0, n, chunk):
        seg = np.asarray(x[:, t0 : t0 + chunk], dtype=dt) - shift[:, None]
        s1 += seg.sum(axis=-1)
        s2 += np.einsum("ij,ij->i", seg.conj(), seg).real if cplx else np.einsum("ij,ij->i", seg, seg)
        if detrend == "linear" and not cplx:
            t = np.arange(t0, t0 + seg.shape[-1], dtype=np.float64)
            st += seg @ t
    mean = s1 / n
    if detrend == "none":
        return s2 / n + 2 * np.real(np.conj(shift) * mean) + np.abs(shift) ** 2
    var = s2 / n - np.abs(mean) ** 2
    if detrend == "linear" and not cplx and n > 1:
        t_mean = (n - 1) / 2
        t_var = (n * n - 1) / 12.0
        cov = st / n - mean.real * t_mean
        var = var - cov**2 / t_var
    return np.maximum(var, 0.0)
