"""Display reductions: long traces cut to a few thousand points with their peaks kept.

The front end draws SVG; a mark with more than a few thousand points makes every redraw
slow.  The full-resolution result stays in Python; what a mark receives is reduced here.

Two reductions, both *min/max per column* (every extreme of every pixel-sized column of
the x axis survives, so no peak or dip is lost, only the points between them):

- :func:`reduce_sorted`: points with sorted x (a spectrum's frequencies, a
  correlation's lags), on linear or logarithmically spaced columns, optionally
  restricted to a visible x range.  The result also gives the *envelope* of other
  arrays per column (the confidence band: the lowest lower bound and the highest upper
  bound of each column), so the shaded band never looks narrower than it is.
- :func:`overview`: a uniformly sampled record (the data strip's overview trace), in one
  pass by reshaping the record into columns.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["MAX_POINTS", "COLUMNS", "Reduced", "reduce_sorted", "overview"]

#: The most points any mark receives (a band counts both of its rows).
MAX_POINTS = 5000
#: Columns across a plot: two points (min and max) per column for a line, and a band of
#: two rows of two points per column stays within MAX_POINTS.
COLUMNS = 1200


@dataclass(frozen=True)
class Reduced:
    """Which points of a sorted trace to draw, and the columns they stand for.

    Attributes
    ----------
    index : ndarray of int
        Sorted indices into the full arrays of the points kept.
    starts : ndarray of int or None
        Start index (into the full arrays) of each column, None when nothing was reduced.
    column : ndarray of int or None
        For each kept point, the position in ``starts`` of its column.
    stop : int
        End (exclusive) of the last column.
    """

    index: np.ndarray
    starts: np.ndarray | None = None
    column: np.ndarray | None = None
    stop: int = 0

    @property
    def size(self) -> int:
        return int(self.index.size)

    def take(self, a: np.ndarray) -> np.ndarray:
        """The kept points of ``a`` (last axis)."""
        return a[..., self.index]

    def envelope(self, a: np.ndarray, kind: str) -> np.ndarray:
        """Per kept point, the ``"min"`` or ``"max"`` of ``a`` over its whole column."""
        if self.starts is None:
            return self.take(a)
        seg = a[..., self.starts[0] : self.stop]
        rel = self.starts - self.starts[0]
        fn = np.fmin if kind == "min" else np.fmax
        per_column = fn.reduceat(seg, rel, axis=-1)
        return per_column[..., self.column]


def _edges_index(x: np.ndarray, lo: float | None, hi: float | None) -> tuple[int, int]:
    """Index range covering [lo, hi] plus one point either side (lines run to the edge)."""
    n = x.size
    i0 = 0 if lo is None else max(0, int(np.searchsorted(x, lo, side="left")) - 1)
    i1 = n if hi is None else min(n, int(np.searchsorted(x, hi, side="right")) + 1)
    return i0, max(i0, i1)


def reduce_sorted(
    x: np.ndarray,
    y: np.ndarray,
    *,
    log: bool = False,
    lo: float | None = None,
    hi: float | None = None,
    columns: int = COLUMNS,
    budget: int = 2 * COLUMNS,
) -> Reduced:
    """Min/max-per-column reduction of a trace whose ``x`` is sorted ascending.

    Parameters
    ----------
    x, y : 1-D arrays of equal length
        The trace; ``y`` may hold NaN (ignored inside a column; an all-NaN column is
        dropped).
    log : bool
        Columns equally spaced in ``log10(x)``; points with ``x <= 0`` are left out
        (a logarithmic axis cannot show them).
    lo, hi : float, optional
        Only the x range ``[lo, hi]`` (a zoomed view); default the whole trace.  Ignored
        for traces of at most ``budget`` points, which are returned whole.
    columns : int
        Number of columns across the range.
    budget : int
        Traces with at most this many points in range are returned whole.
    """
    x = np.asarray(x)
    if x.size <= budget:  # small enough to send whole: panning then needs no redraw
        lo = hi = None
    i0, i1 = _edges_index(x, lo, hi)
    if log:
        first_pos = int(np.searchsorted(x, 0.0, side="right"))
        i0 = max(i0, first_pos)
        i1 = max(i0, i1)
    if i1 - i0 <= budget:
        return Reduced(np.arange(i0, i1))
    xs = x[i0:i1]
    if log:
        u = np.log10(xs)
    else:
        u = xs.astype(np.float64, copy=False)
    u0, u1 = float(u[0]), float(u[-1])
    width = (u1 - u0) / columns if u1 > u0 else 1.0
    col = np.minimum(((u - u0) / width).astype(np.int64), columns - 1)
    # x is sorted, so columns are runs: their starts are where the column id changes
    rel_starts = np.concatenate(([0], np.flatnonzero(np.diff(col)) + 1))
    counts = np.diff(np.append(rel_starts, col.size))
    ys = np.asarray(y[i0:i1], dtype=np.float64)
    big = np.iinfo(np.int64).max
    pos = np.arange(ys.size)
    picks = []
    for fn in (np.fmax, np.fmin):
        ext = fn.reduceat(ys, rel_starts)
        hit = ys == np.repeat(ext, counts)
        first = np.minimum.reduceat(np.where(hit, pos, big), rel_starts)
        picks.append(first)
    cand = np.concatenate(picks + [np.array([0, ys.size - 1])])
    rel = np.unique(cand[cand != big])
    column = np.searchsorted(rel_starts, rel, side="right") - 1
    return Reduced(index=rel + i0, starts=rel_starts + i0, column=column, stop=i1)


def overview(y: np.ndarray, fs: float, columns: int = COLUMNS) -> tuple[np.ndarray, np.ndarray]:
    """Min/max-per-column reduction of a uniformly sampled record for the overview trace.

    Returns ``(t, v)``: times in seconds from the first sample and the values, two points
    per column (the minimum and the maximum, in time order).  Records short enough are
    returned whole.
    """
    n = y.shape[-1]
    if n <= 2 * columns:
        return np.arange(n) / fs, np.asarray(y, dtype=np.float64)
    per = -(-n // columns)
    full = n // per
    body = np.asarray(y[: full * per]).reshape(full, per)
    imin = np.argmin(body, axis=1)
    imax = np.argmax(body, axis=1)
    base = np.arange(full) * per
    idx = [np.minimum(imin, imax) + base, np.maximum(imin, imax) + base]
    tail = np.asarray(y[full * per :])
    parts = np.stack(idx, axis=1).ravel()
    if tail.size:
        t0 = full * per
        parts = np.concatenate([parts, np.unique([t0 + int(np.argmin(tail)), t0 + int(np.argmax(tail))])])
    return parts / fs, np.asarray(y[parts], dtype=np.float64)
