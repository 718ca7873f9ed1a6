"""Private engines: streamed segment averaging, blocked lagged products, moments.

Everything here works on ``(channels, samples)`` arrays, never materialises all segments
at once, and keeps float32 data in float32 (accumulating in float64).  Work is split
into fixed blocks whose partial sums are added in block order, so a result does not
depend on the number of threads: the same input gives the same bits on every run.
"""

from __future__ import annotations

import contextlib
import contextvars
import functools
import math
import os
import threading
from collections import deque
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np
import scipy.fft
from numpy.lib.stride_tricks import as_strided, sliding_window_view

from .._errors import Cancelled, ComputeError, InputError, SettingsError, SpecbenchError

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

#: samples per block of work.  Each block makes some twenty NumPy/SciPy calls, each of which
#: releases and retakes the GIL; with two threads a retake often waits for the other thread
#: and a wake-up costs tens of microseconds on this kind of VM, so small blocks serialise.
#: Measured 2026-12-03 (Welch 1e7 / 4096 / 75 %, two threads, tasks of 2**20 samples):
#: 2**16 160 ms, 2**17 110 ms, 2**18 95 ms (one thread: 164, 160, 155 ms)
BLOCK_SAMPLES = 1 << 18


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


class _Ticks:
    """Counts finished blocks and passes each to the progress callback and the cancel tracker
    (as a block of the pass when ``report_blocks``, else only a cancellation check)."""

    def __init__(self, total: int, report_blocks: bool) -> None:
        self.report = _PROGRESS.get() if report_blocks else None
        self.tracker = _TRACKER.get()
        self.report_blocks = report_blocks
        self.total = total
        self.done = 0

    def __call__(self, result: Any) -> Any:
        self.done += 1
        if self.report is not None:
            self.report(self.done, self.total)
        if self.tracker is not None:
            if self.report_blocks:
                self.tracker.block(self.done, self.total)
            else:
                self.tracker.check()
        return result


def ordered_map(func: Callable, items: Sequence, report_blocks: bool = True) -> Iterator:
    """``func(i) for i in items``, in order, on the worker threads.

    At most ``2 * threads`` items are in flight, so results that are consumed as they come
    (summed, say) take bounded memory however many items there are.  If the consumer
    stops (an exception, a cancellation from the progress callback), the items not yet
    started are dropped and the ones in flight are waited for, so no worker thread is
    left writing when the error reaches the caller.
    """
    tick = _Ticks(len(items), report_blocks)
    if tick.tracker is not None:
        tick.tracker.check()
    if tick.total <= 1 or _THREADS == 1:
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
    """Segments per block: clamp(BLOCK_SAMPLES / nperseg, 4, 1024)."""
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
    prefix = np.empty((span.shape[0], sums.shape[1] + 1), dtype=acc)
    prefix[:, 0] = 0.0
    np.cumsum(sums, axis=-1, out=prefix[:, 1:])
    q, r = step // g, nperseg // g  # segment i: chunks i q .. i q + r - 1
    seg_sums = np.subtract(prefix[:, r : r + (count - 1) * q + 1 : q], prefix[:, : (count - 1) * q + 1 : q])
    seg_sums /= nperseg
    return seg_sums[:, :, None]


class _LinearDetrend:
    """Least-squares line removal on the last axis via an orthonormal [1, t] basis."""

    def __init__(self, n: int, dtype: np.dtype):
        # the orthonormal basis written out (no LAPACK/BLAS: the same bits on a dask worker,
        # whose BLAS runs single-threaded, as in the client)
        t = np.arange(n, dtype=np.float64) - (n - 1) / 2.0
        q = np.stack([np.full(n, 1.0 / math.sqrt(n)), t / math.sqrt(float(np.einsum("i,i->", t, t)) or 1.0)], axis=1)
        self.q = q.astype(dtype)
        self.q0 = np.ascontiguousarray(self.q[:, 0])  # constant: 1 / sqrt(n)
        self.q1 = np.ascontiguousarray(self.q[:, 1])

    def __call__(self, seg: np.ndarray, out: np.ndarray) -> None:
        """``out = seg - q q^T seg`` on the last axis (``out`` must not overlap ``seg``).

        Two dot products per segment and one fused line (einsum's own loops, no BLAS: 5x
        the earlier ``einsum("...n,nk->...k")`` pair, measured on 256 x 4096 blocks)."""
        c0 = np.einsum("...n,n->...", seg, self.q0)
        c1 = np.einsum("...n,n->...", seg, self.q1)
        np.multiply(c1[..., None], self.q1, out=out, casting="unsafe")
        out += (c0 * self.q0[0])[..., None]
        np.subtract(seg, out, out=out, casting="unsafe")

    @staticmethod
    @functools.lru_cache(maxsize=16)
    def cached(n: int, dtype: np.dtype) -> _LinearDetrend:
        return _LinearDetrend(n, dtype)


# ---------------------------------------------------------------- block reading
#
# Every streamed engine is written as a *kernel*: a pure function of one contiguous span
# of the record, ``kernel(span, *per_span_args, *args) -> partial result``, plus the list
# of spans in a fixed order.  :func:`map_spans` runs the kernels and yields the partial
# results in that order, and the engine combines them in that order.  For a NumPy array
# (or a memory map) a span is a view and the kernels run on the engine threads; for a
# dask array each group of consecutive spans becomes one task on the active dask
# scheduler (a distributed Client included): the samples are read and reduced where the
# task runs, only the partial results travel back, a bounded number of tasks is in
# flight, and -- the kernels and the order of combination being the same -- the result
# has the same bits as in memory.


def is_lazy(x: Any) -> bool:
    """True for a dask array (the only lazy array the engines stream)."""
    return type(x).__module__.split(".")[0] == "dask" and hasattr(x, "chunks") and hasattr(x, "dask")


def check_lazy(x: Any) -> None:
    """A dask array must know its chunk sizes: the engines plan their spans from them."""
    if any(math.isnan(c) for dim in x.chunks for c in dim):
        raise InputError(
            f"The dask array has unknown chunk sizes (shape {x.shape}, chunks with NaN), "
            "so its samples cannot be cut into blocks. Call x = x.compute_chunk_sizes() "
            "first (or build the array with known chunk sizes)."
        )


#: samples per dask task (a group of engine blocks): large enough that the scheduler's
#: overhead per task stays small, small enough that a worker holds a few (PERFORMANCE.md)
TASK_SAMPLES = 1 << 21


def _run_group(kernel: Callable, sx: Any, sy: Any, items: list, args: tuple) -> list:
    """One dask task: the kernels of a group of spans, run where the task runs."""
    sx = np.asarray(sx)
    sy = None if sy is None else np.asarray(sy)
    out = []
    for (a, b), yspan, extra in items:
        if sy is None:
            out.append(kernel(sx[..., a:b], *extra, *args))
        else:
            out.append(kernel(sx[..., a:b], sy[..., yspan[0]:yspan[1]], *extra, *args))
    return out


def _in_flight() -> int:
    """Tasks submitted at a time: twice the threads of the cluster (or of this machine)."""
    try:
        from distributed import default_client

        info = default_client().scheduler_info()
        threads = sum(w.get("nthreads", 1) for w in info.get("workers", {}).values())
        return max(4, 2 * threads)
    except (ImportError, ValueError):
        return max(4, 2 * _THREADS)


def map_spans(kernel: Callable, x: Any, spans: Sequence[tuple[int, int]], per_span: Sequence[tuple] | None = None,
              args: tuple = (), y: Any = None, spans_y: Sequence[tuple[int, int]] | None = None,
              report_blocks: bool = True, threads: bool | None = None) -> Iterator:
    """``kernel(x[..., a:b], *per_span[i], *args)`` for each span ``i``, yielded in order.

    ``report_blocks=False`` for the short auxiliary passes (moments, trends, gap scans):
    they honour a cancel request but do not count as a pass of the progress fraction, and
    run in the calling thread unless ``threads=True`` (spans long enough to pay a hand-off).

    With ``y``: ``kernel(x[..., a:b], y[..., c:d], *per_span[i], *args)``, ``(c, d) =
    spans_y[i]``.  See the section notes for NumPy and dask inputs.
    """
    spans = list(spans)
    per = list(per_span) if per_span is not None else [()] * len(spans)
    x, y = _channels_array(x), _channels_array(y)
    if not (is_lazy(x) or is_lazy(y)):
        if y is None:
            def one(i):
                a, b = spans[i]
                return kernel(_take(x, a, b), *per[i], *args)
        else:
            def one(i):
                (a, b), (c, d) = spans[i], spans_y[i]
                return kernel(_take(x, a, b), _take(y, c, d), *per[i], *args)
        use_threads = report_blocks if threads is None else threads
        if use_threads:
            yield from ordered_map(one, range(len(spans)), report_blocks)
        else:  # short auxiliary passes: in the calling thread (hand-offs would cost more)
            tracker = _TRACKER.get()
            for i in range(len(spans)):
                if tracker is not None:
                    tracker.check()
                yield one(i)
        return
    import dask

    tick = _Ticks(len(spans), report_blocks)
    groups: list[list[int]] = []
    for i, (a, b) in enumerate(spans):
        if groups and b - spans[groups[-1][0]][0] <= max(TASK_SAMPLES, b - a) and (
            y is None or spans_y[i][1] - spans_y[groups[-1][0]][0] <= max(TASK_SAMPLES, b - a)
        ):
            groups[-1].append(i)
        else:
            groups.append([i])
    tasks = []
    for g in groups:
        lo, hi = min(spans[i][0] for i in g), max(spans[i][1] for i in g)
        if y is None:
            items = [((spans[i][0] - lo, spans[i][1] - lo), None, per[i]) for i in g]
            tasks.append(dask.delayed(_run_group, pure=True)(kernel, x[..., lo:hi], None, items, args))
        else:
            ly, hy = min(spans_y[i][0] for i in g), max(spans_y[i][1] for i in g)
            items = [((spans[i][0] - lo, spans[i][1] - lo), (spans_y[i][0] - ly, spans_y[i][1] - ly), per[i])
                     for i in g]
            tasks.append(dask.delayed(_run_group, pure=True)(kernel, x[..., lo:hi], y[..., ly:hy], items, args))
    window = _in_flight()
    if tick.tracker is not None:
        tick.tracker.check()
    for t0 in range(0, len(tasks), window):
        try:
            results = dask.compute(*tasks[t0 : t0 + window])
        except Exception as e:  # a worker died, the scheduler went away, ...
            if isinstance(e, SpecbenchError):
                raise
            raise ComputeError(
                f"The dask computation failed while estimating (at block {tick.done + 1} of {tick.total}): "
                f"{type(e).__name__}: {e}. No result was produced. Check the cluster (workers "
                "alive, enough memory per worker) and run the estimate again."
            ) from e
        for part in results:
            for r in part:
                yield tick(r)


def _channels_array(x: Any) -> Any:
    """A list of 1-D channels stays a list (views, no copy) unless one is lazy: then the
    channels are stacked lazily into one dask array."""
    if isinstance(x, (list, tuple)) and any(is_lazy(c) for c in x):
        import dask.array as da

        return da.stack([c if is_lazy(c) else da.from_array(np.asarray(c)) for c in x])
    return x


def _take(x: Any, a: int, b: int) -> Any:
    if isinstance(x, (list, tuple)):
        return [c[a:b] for c in x]
    return x[..., a:b]


def read_span(x: Any, a: int, b: int) -> np.ndarray:
    """``x[..., a:b]`` as a NumPy array (a view for NumPy input; computed for dask)."""
    part = x[..., a:b]
    return np.asarray(part.compute()) if is_lazy(part) else part


def chunk_spans(n: int, chunk: int) -> list[tuple[int, int]]:
    return [(t0, min(n, t0 + chunk)) for t0 in range(0, n, chunk)]


def segment_spans(nseg: int, per_block: int, index: np.ndarray | None, step: int,
                  nperseg: int) -> tuple[list[tuple[int, int]], list[tuple[int, np.ndarray | None]]]:
    """Blocks of ``per_block`` segments: their sample spans and ``(count, local starts)``.

    ``index``: the segment numbers in use (None: all ``nseg``); ``local`` gives each
    block's segment starts within its span in units of ``step`` (None: consecutive).
    """
    spans, calls = [], []
    for s0 in range(0, nseg, per_block):
        s1 = min(s0 + per_block, nseg)
        if index is None:
            first, last, local = s0, s1 - 1, None
        else:
            first, last = int(index[s0]), int(index[s1 - 1])
            local = index[s0:s1] - first
        spans.append((first * step, last * step + nperseg))
        calls.append((s1 - s0, local))
    return spans, calls


def _segment_block(span: np.ndarray, count: int, local: np.ndarray | None, w: np.ndarray, step: int,
                   nfft: int, detrend: str, twosided: bool, keep_each: bool, per_block: int) -> np.ndarray:
    """The kernel of :func:`segment_power`: ``count`` segments of one span.

    ``local``: the segments' start indices within the span in units of ``step`` (None: the
    consecutive segments 0 .. count-1).
    """
    nperseg = w.size
    c = span.shape[0]
    cplx = np.iscomplexobj(span)
    work = np.float32 if span.dtype in (np.float32, np.complex64, np.int16, np.int8, np.uint8) else np.float64
    buf_dtype = np.dtype(np.complex64 if work is np.float32 else np.complex128) if cplx else np.dtype(work)
    if local is None:  # the block's segments as a strided view (no copy)
        s0, s1 = span.strides
        blk = as_strided(span, shape=(c, count, nperseg), strides=(s0, step * s1, s1), writeable=False)
    else:
        blk = sliding_window_view(span, nperseg, axis=-1)[:, ::step, :][:, local, :]
    if not cplx and not keep_each and count > 1 and work is np.float64:  # float32: measured slower packed
        return _packed_block(blk, mu_of(span, blk, local, count, step, nperseg) if detrend == "constant" else None,
                             count, w, nfft, detrend, twosided, per_block, work)
    seg = _scratch("segments", (c, per_block, nperseg), buf_dtype)[:, :count]
    if detrend == "constant":
        mu = blk.mean(axis=-1, keepdims=True) if local is not None else _block_means(span, 0, count, step, nperseg)
        np.subtract(blk, mu.astype(buf_dtype, copy=False), out=seg, casting="unsafe")
        np.multiply(seg, w, out=seg)
    elif detrend == "linear":
        _LinearDetrend.cached(nperseg, np.dtype(work))(blk, seg)
        np.multiply(seg, w, out=seg)
    else:
        np.multiply(blk, w, out=seg, casting="unsafe")
    fft = scipy.fft.fft if twosided else scipy.fft.rfft
    spec = fft(seg, n=nfft, axis=-1, workers=1, overwrite_x=True)
    if keep_each:
        p = spec.real * spec.real
        p += spec.imag * spec.imag
        return p.astype(np.float64, copy=False)
    # |X|^2 summed over the block's segments in one pass over the spectra, without
    # temporaries: the squares of the real and imaginary parts (interleaved in the float
    # view) are summed over segments (float32 data: in float32 within a block), then
    # added pairwise
    flat = spec.view(spec.real.dtype)
    sq = np.einsum("csj,csj->cj", flat, flat)
    return np.add(sq[:, 0::2], sq[:, 1::2], dtype=np.float64)


def mu_of(span: np.ndarray, blk: np.ndarray, local: np.ndarray | None, count: int, step: int,
          nperseg: int) -> np.ndarray:
    """Means of a block's segments, shape (C, count, 1)."""
    return blk.mean(axis=-1, keepdims=True) if local is not None else _block_means(span, 0, count, step, nperseg)


def _interleaved(w: np.ndarray) -> np.ndarray:
    """``w`` repeated for the real and imaginary parts of a complex buffer (cached by identity)."""
    store = getattr(_LOCAL, "interleaved", None)
    if store is None or store[0] is not w:
        store = _LOCAL.interleaved = (w, np.repeat(w, 2))
    return store[1]


def _packed_block(blk: np.ndarray, mu: np.ndarray | None, count: int, w: np.ndarray, nfft: int, detrend: str,
                  twosided: bool, per_block: int, work: Any) -> np.ndarray:
    """Sum over a block of real segments of ``|FFT(detrend(segment) * w)|**2``, two per FFT.

    Segments ``2i`` and ``2i + 1`` go into the real and imaginary parts of one complex
    segment ``z``; with ``Z = FFT(z)``, the two periodograms add up to
    ``(|Z_k|**2 + |Z_{-k}|**2) / 2`` (``Z_k = A_k + i B_k`` with ``A``, ``B`` Hermitian),
    so one complex transform of length nfft replaces two real ones (about 20 % less
    FFT time here) and the power pass reads the same number of values.  An odd last
    segment has a zero imaginary part.  Equal to the unpacked sum to rounding (a few
    units in the last place).  float64 only: with float32 data the packed block was
    measured 10 % slower than two real transforms.
    """
    c, _, nperseg = blk.shape
    pairs = (count + 1) // 2
    cdt = np.dtype(np.complex64 if work is np.float32 else np.complex128)
    z = _scratch("packed", (c, (per_block + 1) // 2, nperseg), cdt)[:, :pairs]
    re, im = z.real, z.imag
    even, odd = blk[:, 0::2], blk[:, 1::2]
    if detrend == "constant":
        np.subtract(even, mu[:, 0::2].astype(work, copy=False), out=re, casting="unsafe")
        np.subtract(odd, mu[:, 1::2].astype(work, copy=False), out=im[:, : odd.shape[1]], casting="unsafe")
    elif detrend == "linear":
        lin = _LinearDetrend.cached(nperseg, np.dtype(work))
        lin(even, re)
        lin(odd, im[:, : odd.shape[1]])
    else:
        np.copyto(re, even, casting="unsafe")
        np.copyto(im[:, : odd.shape[1]], odd, casting="unsafe")
    if count % 2:
        im[:, -1] = 0.0
    flat = z.view(work)
    np.multiply(flat, _interleaved(w), out=flat)
    spec = scipy.fft.fft(z, n=nfft, axis=-1, workers=1, overwrite_x=nfft == nperseg)
    fl = spec.view(work)
    sq = np.einsum("csj,csj->cj", fl, fl)
    s = np.add(sq[:, 0::2], sq[:, 1::2], dtype=np.float64)  # sum over pairs of |Z_k|^2, k = 0..nfft-1
    nfreq = nfft if twosided else nfft // 2 + 1
    # out[k] = (s[k] + s[-k mod nfft]) / 2: bin 0 pairs with itself, bins 1.. with the
    # reversed tail (slices, not an index array)
    out = np.empty((c, nfreq))
    np.add(s[:, :1], s[:, :1], out=out[:, :1])
    np.add(s[:, 1:nfreq], s[:, : nfft - nfreq : -1], out=out[:, 1:])
    out *= 0.5
    return out


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
    x : (C, N) array (NumPy, memory map or dask)
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
    single = x.dtype in (np.float32, np.complex64, np.int16, np.int8, np.uint8)
    w = window.astype(np.float32 if single else np.float64, copy=False)
    nfreq = nfft if twosided else nfft // 2 + 1
    per_block = min(block_segments(max(nperseg, nfft)), max(1, nseg))  # zero padding: buffers scale with nfft
    spans, calls = segment_spans(nseg, per_block, index, step, nperseg)
    # in-memory data: blocks gathered into tasks (fewer thread hand-offs); dask: a task per
    # block, as map_spans groups them for the cluster.  Each task returns its blocks' parts,
    # summed here in block order, so the grouping does not change a bit.
    part_bytes = c * nfreq * 8 * (per_block if keep_each else 1)
    tasks, groups = group_blocks(spans, calls, 1 if is_lazy(x) else GROUP_SAMPLES,
                                 max(1, GROUP_PART_BYTES // part_bytes))
    out = np.empty((c, nseg, nfreq), dtype=np.float64) if keep_each else None
    total = np.zeros((c, nfreq), dtype=np.float64)
    parts = map_spans(_segment_task, x, tasks, [(g,) for g in groups],
                      (w, step, nfft, detrend, twosided, keep_each, per_block))
    s0 = 0
    for group, task_parts in zip(groups, parts):
        for (_, _, count, _), part in zip(group, task_parts):
            if keep_each:
                out[:, s0 : s0 + count, :] = part
            else:
                total += part
            s0 += count
    return (out if keep_each else total), nseg


#: samples per task handed to a worker thread (a group of blocks, each block still the
#: unit of work): a hand-off between threads costs about as much as a block's work here
#: (measured 2026-12-03: Welch 1e7 / 4096 / 75 %, blocks of 2**18 samples, two threads:
#: 107 ms with a task per block, 95 ms with tasks of 2**20 samples)
GROUP_SAMPLES = 1 << 20
#: bytes of block results a task may hold before they are summed (tasks in flight x this
#: bounds the memory of results waiting to be consumed)
GROUP_PART_BYTES = 1 << 20


def group_blocks(spans: list[tuple[int, int]], calls: list[tuple[int, Any]], size: int, most: int = 1 << 30
                 ) -> tuple[list[tuple[int, int]], list[list[tuple[int, int, int, Any]]]]:
    """Consecutive blocks gathered into tasks of at most ``size`` samples and ``most``
    blocks (at least one block each).

    Returns the tasks' sample spans and, per task, its blocks as ``(a, b, count, local)``
    with ``a:b`` the block's span relative to the task's start.
    """
    tasks: list[tuple[int, int]] = []
    groups: list[list[tuple[int, int, int, Any]]] = []
    for (a, b), (count, local) in zip(spans, calls):
        if groups and b - tasks[-1][0] <= size and len(groups[-1]) < most:
            t0 = tasks[-1][0]
            tasks[-1] = (t0, max(tasks[-1][1], b))
        else:
            t0 = a
            tasks.append((a, b))
            groups.append([])
        groups[-1].append((a - t0, b - t0, count, local))
    return tasks, groups


def _segment_task(span: np.ndarray, blocks: list, w: np.ndarray, step: int, nfft: int, detrend: str,
                  twosided: bool, keep_each: bool, per_block: int) -> list[np.ndarray]:
    """The kernel of :func:`segment_power`: the parts of the blocks of one task, in order."""
    return [_segment_block(span[:, a:b], count, local, w, step, nfft, detrend, twosided, keep_each, per_block)
            for a, b, count, local in blocks]


def _finite_block(span: np.ndarray, t0: int) -> np.ndarray:
    """Kernel: positions (from ``t0``) of the samples where any channel is not finite."""
    if span.dtype.kind not in "fc":
        return np.empty(0, dtype=np.int64)
    hit = ~np.isfinite(span)
    if not hit.any():
        return np.empty(0, dtype=np.int64)
    return np.nonzero(hit.any(axis=0))[0] + t0


def clean_segments(x: np.ndarray, nperseg: int, step: int) -> np.ndarray:
    """Boolean mask over segment positions: True where the segment has only finite samples.

    Scans the record in chunks and keeps only the positions of non-finite samples, so the
    memory is that of the mask plus the bad positions, whatever the record length.
    """
    c, n = x.shape
    n_all = (n - nperseg) // step + 1
    spans = chunk_spans(n, 1 << 16)
    bad = [p for p in map_spans(_finite_block, x, spans, [(a,) for a, _ in spans], report_blocks=False) if p.size]
    if not bad:
        return np.ones(n_all, dtype=bool)
    pos = np.concatenate(bad)
    starts = np.arange(n_all, dtype=np.int64) * step
    return np.searchsorted(pos, starts + nperseg) == np.searchsorted(pos, starts)


def _trend_block(span: np.ndarray, t0: int, linear: bool) -> tuple[np.ndarray, np.ndarray | None]:
    seg = np.asarray(span, dtype=np.float64)
    st = np.einsum("ij,j->i", seg, np.arange(t0, t0 + seg.shape[-1], dtype=np.float64)) if linear else None
    return seg.sum(axis=-1), st


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
    spans = chunk_spans(n, 1 << 16)
    linear = detrend == "linear"
    for a_sum, t_sum in map_spans(_trend_block, x, spans, [(a,) for a, _ in spans], (linear,), report_blocks=False):
        s1 += a_sum
        if linear:
            st += t_sum
    mean = s1 / n
    if detrend == "constant" or n < 2:
        return mean, zero
    t_mean = (n - 1) / 2
    slope = (st / n - mean * t_mean) / ((n * n - 1) / 12.0)
    return mean - slope * t_mean, slope


def _detrended_piece(span: np.ndarray, trend, t0: int) -> np.ndarray:
    out = np.asarray(span, dtype=np.float64)
    if trend is not None:
        t = np.arange(t0, t0 + span.shape[-1], dtype=np.float64)
        out = out - trend[0][:, None] - trend[1][:, None] * t
    return out


def _lag_block(sx: np.ndarray, sy: np.ndarray, start: int, count: int, blk: int, m: int, p: int, n: int,
               trend_x, trend_y) -> np.ndarray:
    """Kernel of :func:`lagged_products`: ``count`` blocks from sample ``start``."""
    acc = np.zeros((sx.shape[0], p // 2 + 1), dtype=np.complex128)
    for i in range(count):
        a = i * blk
        t0 = start + a
        xs = _detrended_piece(sx[:, a : min(a + blk, n - start)], trend_x, t0)
        ys = _detrended_piece(sy[:, a : min(a + blk + m, n - start)], trend_y, t0)
        fx = scipy.fft.rfft(xs, n=p, axis=-1, workers=1)
        fy = scipy.fft.rfft(ys, n=p, axis=-1, workers=1)
        with np.errstate(over="ignore", invalid="ignore"):  # the caller reports a non-finite result
            acc += np.conj(fx) * fy
    return acc


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

    spans_x, spans_y, per = [], [], []
    for b0 in starts:
        b1 = min(b0 + group, nblocks)
        spans_x.append((b0 * blk, min(b1 * blk, n)))
        spans_y.append((b0 * blk, min(b1 * blk + m, n)))
        per.append((b0 * blk, b1 - b0))
    total = np.zeros((c, p // 2 + 1), dtype=np.complex128)
    for part in map_spans(_lag_block, x, spans_x, per, (blk, m, p, n, trend_x, trend_y), y=y, spans_y=spans_y):
        total += part
    return scipy.fft.irfft(total, n=p, axis=-1)[:, : m + 1]


def _moment_block(span: np.ndarray, a: int, shift: np.ndarray, dt: Any, cplx: bool, linear: bool):
    """Kernel of :class:`Moments`: shifted sums of one span starting at sample ``a``."""
    # seg = span - shift, in this thread's buffer (the same bits as the plain expression)
    span = np.asarray(span)
    c, n = span.shape
    buf = _scratch("moments", (c, max(n, 1 << 16)), np.dtype(dt))[:, :n]
    seg = np.subtract(span, shift[:, None], out=buf, dtype=dt)
    s1 = seg.sum(axis=-1)
    s2 = np.einsum("ij,ij->i", seg.conj(), seg).real if cplx else np.einsum("ij,ij->i", seg, seg)
    st = None
    if linear and not cplx:
        st = np.einsum("ij,j->i", seg, np.arange(a, a + seg.shape[-1], dtype=np.float64))
    return seg.shape[-1], s1, s2, st


#: samples per chunk of the moments pass (run on the worker threads when it has several)
MOMENT_CHUNK = 1 << 18


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
        self.shift = np.asarray(read_span(x, 0, min(n, 4096)), dtype=self.dt).mean(axis=-1)
        self.n = 0
        self.s1 = np.zeros(c, dtype=self.dt)
        self.s2 = np.zeros(c)
        self.st = np.zeros(c)

    def add(self, x: np.ndarray, t0: int, t1: int, linear: bool) -> None:
        spans = [(a, min(t1, a + MOMENT_CHUNK)) for a in range(t0, t1, MOMENT_CHUNK)]
        for count, s1, s2, st in map_spans(_moment_block, x, spans, [(a,) for a, _ in spans],
                                           (self.shift, self.dt, self.cplx, linear), report_blocks=False,
                                           threads=len(spans) > 2):
            self.n += count
            self.s1 += s1
            self.s2 += s2
            if st is not None:
                self.st += st

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
