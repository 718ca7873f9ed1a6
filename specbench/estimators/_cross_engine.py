"""Private engines of the cross-channel estimators.

:func:`cross_segment_products` streams a ``(C, N)`` record in fixed blocks of segments,
transforms every segment of every channel ONCE, and accumulates the full matrix of
cross periodograms ``sum_s conj(X_a,s) X_b,s`` for all channel pairs at once (an
``X^H X`` product per frequency and block).  Like the Welch engine it never copies the
record (a block of segments is detrended and windowed into a reused per-thread buffer),
keeps float32 data in float32 FFTs, and adds partial sums in block order so the result
does not depend on the thread count.

:func:`lag_products_matrix` gives ``sum_t a_i[t] a_j[t+k]`` for all channel pairs and
``k = 0..m`` by a blocked FFT of the whole record (one pair of FFTs per block and
channel), with an optional presence mask: missing samples contribute nothing and the
number of present pairs per lag is returned beside the sums.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import scipy.fft
from numpy.lib.stride_tricks import sliding_window_view

from ._engine import _scratch, block_segments, map_spans, segment_spans

__all__ = ["cross_segment_products", "lag_products_matrix", "work_dtype"]

def work_dtype(xs) -> np.dtype:
    """float32 when every channel is float32 / a small integer, float64 otherwise."""
    small = all(x.dtype in (np.float32, np.int16, np.int8, np.uint8) for x in xs)
    return np.dtype(np.float32 if small else np.float64)


def _linear_detrend(n: int, dtype: np.dtype) -> Any:
    """The least-squares line removal of segments of ``n`` samples (the Welch engine's)."""
    from ._engine import _LinearDetrend

    return _LinearDetrend.cached(n, np.dtype(dtype))


def _cross_block(span, count: int, local, w: np.ndarray, step: int, nfft: int, detrend: str, lin, work,
                 per_block: int) -> np.ndarray:
    """Kernel: the upper-triangle cross periodograms summed over one block of segments."""
    nperseg = w.size
    c = len(span)
    iu = np.triu_indices(c)
    nfreq = nfft // 2 + 1
    seg = _scratch("xsegments", (c, per_block, nperseg), work)[:, :count]
    for ch in range(c):
        view = sliding_window_view(span[ch], nperseg)[::step]
        blk = view[:count] if local is None else view[local]
        out = seg[ch]
        if detrend == "constant":
            mu = blk.mean(axis=-1, keepdims=True, dtype=np.float64)
            np.subtract(blk, mu, out=out, casting="unsafe")
            np.multiply(out, w, out=out)
        elif lin is not None:  # einsum's own loops, not BLAS: 2.7x faster here, and no BLAS rounding
            lin(blk, out)
            np.multiply(out, w, out=out)
        else:
            np.multiply(blk, w, out=out, casting="unsafe")
    spec = scipy.fft.rfft(seg, n=nfft, axis=-1, workers=1)  # (C, s, F), one FFT per channel
    # sums over segments (numpy reductions: BLAS calls from the worker threads would
    # fight over BLAS's own threads)
    flat = spec.view(work)  # (C, s, 2F): real and imaginary parts interleaved
    part = np.empty((iu[0].size, nfreq), dtype=np.complex128)
    for k, (a, b) in enumerate(zip(*iu)):
        if a == b:
            sq = np.square(flat[a]).sum(axis=0, dtype=np.float64)
            part[k] = sq[0::2] + sq[1::2]
        else:
            prod = np.conj(spec[a])
            prod *= spec[b]
            part[k] = prod.sum(axis=0, dtype=np.complex128)
    return part


def cross_segment_products(
    xs,
    *,
    window: np.ndarray,
    step: int,
    nfft: int,
    detrend: str,
    segments: np.ndarray | None = None,
) -> tuple[np.ndarray, int]:
    """Sum over segments of the cross periodogram matrix of ``C`` real channels.

    ``xs`` is a ``(C, N)`` array or a sequence of ``C`` equally long 1-D arrays (views of
    the caller's channels: nothing is stacked or copied).

    Returns ``(S, nseg)`` with ``S[a, b, f] = sum_s conj(X_a,s(f)) X_b,s(f)`` (complex128,
    shape ``(C, C, nfft // 2 + 1)``, Hermitian in ``a, b``), where ``X_a,s`` is the rfft
    of segment ``s`` of channel ``a`` after detrending and windowing (scipy.signal.csd's
    order of operations).  ``segments`` optionally lists the segment indices to use.
    """
    nperseg = window.size
    xs = list(xs)
    c, n = len(xs), xs[0].shape[-1]
    n_all = (n - nperseg) // step + 1
    index = None if segments is None else np.asarray(segments, dtype=np.intp)
    nseg = n_all if index is None else int(index.size)
    work = work_dtype(xs)
    w = window.astype(work, copy=False)
    lin = _linear_detrend(nperseg, work) if detrend == "linear" else None
    nfreq = nfft // 2 + 1
    per_block = block_segments(nperseg)
    iu = np.triu_indices(c)
    spans, calls = segment_spans(nseg, per_block, index, step, nperseg)
    total = np.zeros((iu[0].size, nfreq), dtype=np.complex128)
    # blocks read through the engines' block interface: NumPy views on the engine threads,
    # or dask tasks on the active scheduler, summed in block order either way
    for part in map_spans(_cross_block, xs, spans, calls, (w, step, nfft, detrend, lin, work, per_block)):
        total += part
    out = np.empty((c, c, nfreq), dtype=np.complex128)
    out[iu[0], iu[1]] = total
    out[iu[1], iu[0]] = np.conj(total)
    diag = np.arange(c)
    out[diag, diag] = out[diag, diag].real  # auto-spectra are real
    return out, nseg


def _lagmat_piece(span, mu: np.ndarray, gaps: bool):
    out = np.array([row for row in span], dtype=np.float64)
    out -= mu[:, None]
    if not gaps:
        return out, None
    ok = np.isfinite(out)
    out[~ok] = 0.0
    return out, ok.astype(np.float64)


def _lagmat_block(short_span, long_span, mu: np.ndarray, p: int, gaps: bool):
    """Kernel of :func:`lag_products_matrix`: one block and its m-longer stretch."""
    short, ms = _lagmat_piece(short_span, mu, gaps)
    long, ml = _lagmat_piece(long_span, mu, gaps)
    fsh = scipy.fft.rfft(short, n=p, axis=-1, workers=1)
    flo = scipy.fft.rfft(long, n=p, axis=-1, workers=1)
    acc = np.conj(fsh)[:, None, :] * flo[None, :, :]
    cnt = None
    if gaps:
        fms = scipy.fft.rfft(ms, n=p, axis=-1, workers=1)
        fml = scipy.fft.rfft(ml, n=p, axis=-1, workers=1)
        cnt = np.conj(fms)[:, None, :] * fml[None, :, :]
    return acc, cnt


def lag_products_matrix(
    a,
    m: int,
    center: np.ndarray | None = None,
    gaps: bool = False,
) -> tuple[np.ndarray, np.ndarray]:
    """``S[i, j, k] = sum_t a_i[t] a_j[t + k]`` for ``k = 0..m``, and the pair counts.

    ``a`` is a real ``(C, N)`` array or a sequence of 1-D channels; ``center`` (``(C,)``)
    is subtracted block by block, so the record is never copied.  With ``gaps=True``
    non-finite samples are missing: they count as zero in the sums, and the returned
    counts ``P[i, j, k]`` are the numbers of ``t`` with both ``a_i[t]`` and ``a_j[t + k]``
    present (``N - k`` everywhere without gaps).  The record is cut into blocks; each
    block of ``a_i`` is correlated with the ``m``-longer stretch of ``a_j`` and the spectra
    are summed before one inverse FFT, so each product is counted exactly once.
    """
    a = list(a)
    c, n = len(a), a[0].shape[-1]
    m = int(m)
    blk = int(min(n, max(1 << 15, 4 * m)))
    p = scipy.fft.next_fast_len(blk + m, real=True)
    nblocks = math.ceil(n / blk)
    mu = np.zeros(c) if center is None else np.asarray(center, dtype=np.float64)

    spans_x = [(b * blk, min(b * blk + blk, n)) for b in range(nblocks)]
    spans_y = [(b * blk, min(b * blk + blk + m, n)) for b in range(nblocks)]
    total = np.zeros((c, c, p // 2 + 1), dtype=np.complex128)
    counts = np.zeros_like(total) if gaps else None
    for acc, cnt in map_spans(_lagmat_block, a, spans_x, None, (mu, p, gaps), y=a, spans_y=spans_y):
        total += acc
        if gaps:
            counts += cnt
    s = scipy.fft.irfft(total, n=p, axis=-1)[..., : m + 1]
    if gaps:
        pairs = np.rint(scipy.fft.irfft(counts, n=p, axis=-1)[..., : m + 1])
    else:
        pairs = np.broadcast_to((n - np.arange(m + 1)).astype(np.float64), s.shape).copy()
    return s, pairs
