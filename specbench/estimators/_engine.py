"""Private engines: streamed segment averaging, blocked lagged products, moments.

Everything here works on ``(channels, samples)`` arrays, never materialises all segments
at once, and keeps float32 data in float32 (accumulating in float64).  Work is split
into fixed blocks whose partial sums are added in block order, so a result does not
depend on the number of threads: the same input gives the same bits on every run.
"""

from __future__ import annotations

import contextlib
import contextvars
import math
import os
import threading
from collections import deque
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import scipy.fft
from numpy.lib.stride_tricks import sliding_window_view

from .._errors import Cancelled, SettingsError

__all__ = [
    "segment_power",
    "lagged_products",
    "clean_segments",
    "trend_coefficients",
    "detrended_variance",
    "Moments",
    "block_segments",
    "ordered_map",
    "reporting_progress",
    "tracking",
    "expect_passes",
    "checkpoint",
    "CancelToken",
]

_POOL: ThreadPoolExecutor | None = None
_THREADS = max(1, min(2, os.cpu_count() or 1))

#: samples per block of work: small enough that a block stays in the L2 cache (measured
#: here: 2**17 beats 2**18 by 10-20 % once the work buffers are reused)
BLOCK_SAMPLES = 1 << 17


def _pool() -> ThreadPoolExecutor:
    global _POOL
    if _POOL is None:
        _POOL = ThreadPoolExecutor(max_workers=_THREADS, thread_name_prefix="specbench")
    return _POOL


#: ``callback(done, total)`` told after each block of a pass; see :func:`reporting_progress`
_PROGRESS: contextvars.ContextVar[Callable[[int, int], None] | None] = contextvars.ContextVar(
    "specbench_progress", default=None
)


@contextlib.contextmanager
def reporting_progress(callback: Callable[[int, int], None]):
    """Within the block, every streamed pass over a record calls ``callback(done, total)``
    after each block (from the calling thread).  An estimate may make several passes
    (one per taper, say): ``done`` starts again at 1 for each.
    """
    token = _PROGRESS.set(callback)
    try:
        yield
    finally:
        _PROGRESS.reset(token)


class CancelToken:
    """Ask a running estimate to stop: ``token.cancel()`` from any thread.

    Pass it as ``est(x, cancel=token)``.  The engines look at it between blocks of work
    (and between the passes and stages of an estimate), and then raise
    :class:`specbench.Cancelled`: the worker threads finish the block in hand and take no
    more, and no partial result is returned.  A token can be reused after :meth:`reset`.
    """

    def __init__(self) -> None:
        self._event = threading.Event()

    def cancel(self) -> None:
        self._event.set()

    def reset(self) -> None:
        self._event.clear()

    @property
    def cancelled(self) -> bool:
        return self._event.is_set()

    def __repr__(self) -> str:
        return f"CancelToken(cancelled={self.cancelled})"


class _Tracker:
    """Turns the engine's per-pass block counts into one fraction of the whole estimate."""

    def __init__(self, callback: Callable[[float], None] | None, token: CancelToken | None) -> None:
        if callback is not None and not callable(callback):
            raise SettingsError(
                f"progress must be a callable taking the fraction done (a float in [0, 1]); got "
                f"{callback!r}. Pass for example progress=print, or leave it out."
            )
        if token is not None and not isinstance(token, CancelToken):
            raise SettingsError(
                f"cancel must be a specbench.CancelToken; got {token!r}. Create one with "
                "token = sb.CancelToken() and call token.cancel() to stop."
            )
        self.callback, self.token = callback, token
        self.passes = 1
        self.completed = 0
        self.last = 0.0

    def check(self) -> None:
        if self.token is not None and self.token.cancelled:
            raise Cancelled("The computation was cancelled (CancelToken.cancel()); no result was produced.")

    def report(self, fraction: float) -> None:
        self.last = max(self.last, min(1.0, fraction))
        self.check()
        if self.callback is not None:
            self.callback(self.last)
        self.check()

    def block(self, done: int, total: int) -> None:
        passes = max(self.passes, self.completed + 1)
        frac = (self.completed + done / max(1, total)) / passes
        if done >= total:
            self.completed += 1
        self.report(min(frac, 0.999))  # 1.0 only once the result is ready


_TRACKER: contextvars.ContextVar[_Tracker | None] = contextvars.ContextVar("specbench_tracker", default=None)


@contextlib.contextmanager
def tracking(progress: Callable[[float], None] | None = None, cancel: CancelToken | None = None):
    """Within the block, estimates report ``progress(fraction)`` (from the calling thread,
    after each block of work; nondecreasing, 1.0 once the result is ready) and stop with
    :class:`specbench.Cancelled` when ``cancel`` is set or when ``progress`` raises it."""
    tracker = _Tracker(progress, cancel)
    token = _TRACKER.set(tracker)
    try:
        tracker.check()
        yield tracker
        tracker.report(1.0)
    finally:
        _TRACKER.reset(token)


def expect_passes(passes: int) -> None:
    """An estimate announces how many streamed passes it will make (for the fraction)."""
    tracker = _TRACKER.get()
    if tracker is not None:
        tracker.passes = max(1, int(passes))
        tracker.completed = 0


def checkpoint() -> None:
    """Between stages: give the tracker a chance to stop the computation."""
    tracker = _TRACKER.get()
    if tracker is not None:
        tracker.report(tracker.last)


def ordered_map(func: Callable, items: Sequence) -> Iterator:
    """``func(i) for i in items``, in order, on the worker threads.

    At most ``2 * threads`` items are in flight, so results that are consumed as they come
    (summed, say) take bounded memory however many items there are.  If the consumer
    stops (an exception, a cancellation from the progress callback), the items not yet
    started are dropped and the ones in flight are waited for, so no worker thread is
    left writing when the error reaches the caller.
    """
    report = _PROGRESS.get()
    tracker = _TRACKER.get()
    total = len(items)
    done = 0

    def tick(result):
        nonlocal done
        done += 1
        if report is not None:
            report(done, total)
        if tracker is not None:
            tracker.block(done, total)
        return result

    if tracker is not None:
        tracker.check()
    if total <= 1 or _THREADS == 1:
        yield from (tick(func(i)) for i in items)
        return
    pool = _pool()
    window: deque = deque()
    try:
        for item in items:
            window.append(pool.submit(func, item))
            if len(window) >= 2 * _THREADS:
                yield tick(window.popleft().result())
        while window:
            yield tick(window.popleft().result())
    finally:
        for f in window:
            f.cancel()
        for f in window:
            if not f.cancelled():
                f.exception()  # wait for it; its error, if any, is superseded


def block_segments(nperseg: int) -> int:
    """Segments per block: clamp(2**17 / nperseg, 4, 1024)."""
    return int(min(1024, max(4, BLOCK_SAMPLES // max(1, nperseg))))


def as_2d(x: np.ndarray) -> np.ndarray:
    """View ``(..., n)`` as ``(channels, n)`` (no copy for contiguous data)."""
    return x.reshape(-1, x.shape[-1]) if x.ndim != 2 else x


_LOCAL = threading.local()


def _scratch(name: str, shape: tuple[int, ...], dtype: np.dtype) -> np.ndarray:
    """A per-thread work buffer, kept between calls (fresh memory is slow to touch here)."""
    store = getattr(_LOCAL, "buffers", None)
    if store is None:
        store = _LOCAL.buffers = {}
    buf = store.get(name)
    if buf is None or buf.shape != shape or buf.dtype != dtype:
        buf = store[name] = np.empty(shape, dtype=dtype)
    return buf


def _block_means(x: np.ndarray, start: int, count: int, step: int, nperseg: int) -> np.ndarray:
    """Means of ``count`` consecutive segments starting at sample ``start``, shape (C, count, 1).

    The block's span is summed once in chunks of ``g = gcd(step, nperseg)`` samples and the
    segment sums are differences of the chunk prefix sums (local to the block, so no
    cancellation across the record): a quarter of the work of per-segment means at 75 %.
    """
    g = math.gcd(step, nperseg)
    span = x[:, start : start + (count - 1) * step + nperseg]
    acc = np.complex128 if np.iscomplexobj(x) else np.float64
    if g < 8:
        view = sliding_window_view(span, nperseg, axis=-1)[:, ::step, :]
        return view.mean(axis=-1, keepdims=True, dtype=acc)
    sums = span.reshape(span.shape[0], -1, g).sum(axis=-1, dtype=acc)
    prefix = np.zeros((span.shape[0], sums.shape[1] + 1), dtype=acc)
    np.cumsum(sums, axis=-1, out=prefix[:, 1:])
    first = np.arange(count) * (step // g)
    seg_sums = prefix[:, first + nperseg // g] - prefix[:, first]
    return (seg_sums / nperseg)[:, :, None]


class _LinearDetrend:
    """Least-squares line removal on the last axis via an orthonormal [1, t] basis."""

    def __init__(self, n: int, dtype: np.dtype):
        t = np.arange(n, dtype=np.float64)
        q, _ = np.linalg.qr(np.stack([np.ones(n), t - t.mean()], axis=1))
        self.q = q.astype(dtype)

    def __call__(self, seg: np.ndarray, out: np.ndarray) -> None:
        np.subtract(seg, (seg @ self.q) @ self.q.T, out=out)


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
    cplx = np.iscomplexobj(x)
    work = np.float32 if x.dtype in (np.float32, np.complex64, np.int16, np.int8, np.uint8) else np.float64
    buf_dtype = np.dtype(np.complex64 if work is np.float32 else np.complex128) if cplx else np.dtype(work)
    w = window.astype(work, copy=False)
    view = sliding_window_view(x, nperseg, axis=-1)[:, ::step, :]
    linear = _LinearDetrend(nperseg, np.dtype(work)) if detrend == "linear" else None
    fft = scipy.fft.fft if twosided else scipy.fft.rfft
    nfreq = nfft if twosided else nfft // 2 + 1
    per_block = min(block_segments(nperseg), max(1, nseg))
    starts = list(range(0, nseg, per_block))
    out = np.empty((c, nseg, nfreq), dtype=np.float64) if keep_each else None

    def run(s0: int):
        s1 = min(s0 + per_block, nseg)
        blk = view[:, s0:s1, :] if index is None else view[:, index[s0:s1], :]
        seg = _scratch("segments", (c, per_block, nperseg), buf_dtype)[:, : s1 - s0]
        if detrend == "constant":
            mu = blk.mean(axis=-1, keepdims=True) if index is not None else _block_means(
                x, s0 * step, s1 - s0, step, nperseg
            )
            np.subtract(blk, mu.astype(buf_dtype, copy=False), out=seg, casting="unsafe")
            np.multiply(seg, w, out=seg)
        elif linear is not None:
            linear(blk, seg)
            np.multiply(seg, w, out=seg)
        else:
            np.multiply(blk, w, out=seg, casting="unsafe")
        spec = fft(seg, n=nfft, axis=-1, workers=1, overwrite_x=True)
        if keep_each:
            p = spec.real * spec.real
            p += spec.imag * spec.imag
            out[:, s0:s1, :] = p
            return None
        # |X|^2 summed over the block's segments in one pass over the spectra, without
        # temporaries: the squares of the real and imaginary parts (interleaved in the
        # float view) are summed over segments, then added pairwise
        flat = spec.view(spec.real.dtype)
        sq = np.einsum("csj,csj->cj", flat, flat)
        return np.add(sq[:, 0::2], sq[:, 1::2], dtype=np.float64)

    total = np.zeros((c, nfreq), dtype=np.float64)
    for part in ordered_map(run, starts):
        if part is not None:
            total += part
    return (out if keep_each else total), nseg


def clean_segments(x: np.ndarray, nperseg: int, step: int) -> np.ndarray:
    """Boolean mask over segment positions: True where the segment has only finite samples.

    Scans the record in chunks and keeps only the positions of non-finite samples, so the
    memory is that of the mask plus the bad positions, whatever the record length.
    """
    c, n = x.shape
    n_all = (n - nperseg) // step + 1
    chunk = 1 << 16
    bad = []
    for t0 in range(0, n, chunk):
        part = x[:, t0 : t0 + chunk]
        if part.dtype.kind in "fc":
            hit = ~np.isfinite(part)
            if hit.any():
                bad.append(np.nonzero(hit.any(axis=0))[0] + t0)
    if not bad:
        return np.ones(n_all, dtype=bool)
    pos = np.concatenate(bad)
    starts = np.arange(n_all, dtype=np.int64) * step
    return np.searchsorted(pos, starts + nperseg) == np.searchsorted(pos, starts)


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


class Moments:
    """Per-channel sums that give the mean square after detrending, added chunk by chunk.

    The sums are shifted by a rough mean so that the one-pass formulas do not cancel.
    (Accumulating them inside the segment engine's threads was measured slower here than
    one separate pass: the small per-block operations hold the GIL.)
    """

    def __init__(self, x: np.ndarray):
        c, n = x.shape
        self.cplx = np.iscomplexobj(x)
        self.dt = np.complex128 if self.cplx else np.float64
        self.shift = np.asarray(x[:, : min(n, 4096)], dtype=self.dt).mean(axis=-1)
        self.n = 0
        self.s1 = np.zeros(c, dtype=self.dt)
        self.s2 = np.zeros(c)
        self.st = np.zeros(c)

    def add(self, x: np.ndarray, t0: int, t1: int, linear: bool) -> None:
        for a in range(t0, t1, 1 << 16):
            b = min(t1, a + (1 << 16))
            seg = np.asarray(x[:, a:b], dtype=self.dt) - self.shift[:, None]
            self.n += b - a
            self.s1 += seg.sum(axis=-1)
            self.s2 += np.einsum("ij,ij->i", seg.conj(), seg).real if self.cplx else np.einsum("ij,ij->i", seg, seg)
            if linear and not self.cplx:
                self.st += seg @ np.arange(a, b, dtype=np.float64)

    def variance(self, detrend: str) -> np.ndarray:
        n = self.n
        mean = self.s1 / n
        if detrend == "none":
            return self.s2 / n + 2 * np.real(np.conj(self.shift) * mean) + np.abs(self.shift) ** 2
        var = self.s2 / n - np.abs(mean) ** 2
        if detrend == "linear" and not self.cplx and n > 1:
            t_mean = (n - 1) / 2
            cov = self.st / n - mean.real * t_mean
            var = var - cov**2 / ((n * n - 1) / 12.0)
        return np.maximum(var, 0.0)


def detrended_variance(x: np.ndarray, detrend: str) -> np.ndarray:
    """Per-channel mean square of ``x`` after removing its mean or least-squares line.

    Computed in chunks (no copy of the record); ``detrend="none"`` gives the mean square.
    Complex data: the mean square of the modulus (a linear trend is not removed).
    """
    m = Moments(x)
    m.add(x, 0, x.shape[-1], linear=detrend == "linear")
    return m.variance(detrend)
