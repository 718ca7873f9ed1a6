"""DPSS (Slepian) tapers of long records: exact eigenvectors at O(N) cost per taper.

``scipy.signal.windows.dpss`` finds the tapers as eigenvectors of the tridiagonal matrix
that commutes with the concentration problem (Percival & Walden 1993, section 8.3,
eq. (378)), by bisection and inverse iteration over all ``N`` rows for each taper: about
2.6 s at N = 1e6 and 30 s at 1e7 here.  This module computes the same eigenvectors in
three cheap steps:

1. the tapers of a short length ``N0`` (``scipy.signal.windows.dpss``, N0 = 2**16), which
   sample nearly the same smooth functions, linearly interpolated to length ``N``;
2. one Rayleigh-quotient inverse iteration step on the length-``N`` tridiagonal matrix:
   the shift is the Rayleigh quotient of the interpolated vector, and one tridiagonal
   solve (LAPACK ``gtsv``) turns the interpolation error ``e`` into about
   ``e**3 * N`` (the eigenvalues of the matrix are spaced about ``1/N`` apart relative
   to its norm) -- machine precision; a second step is taken when the residual says so;
3. the even/odd symmetry of the tapers halves each solve (the half problem has a
   modified last row).

The result is an eigenvector to the same residual as scipy's (about 1e-15 of the
matrix norm), orthonormal to 1e-14 and with the same concentration to 1e-15.  It differs
from ``scipy.signal.windows.dpss`` by up to about 5e-8 of the taper's peak at N = 2**18:
the top eigenvalues of the commuting matrix lie only ~1e-9 apart relative to its norm,
so any two solvers of this eigenproblem agree only that far (scipy's own tapers are
asymmetric at the 1e-11 level; these are exactly (anti)symmetric).  Only the
concentration ratios ``lambda_k`` come from the length-``N0`` problem: they converge
with ``N`` (to 8 digits already at N = 4096 for NW = 4), and the test bounds their
difference from the exact length-``N`` values at 1e-8 relative.  Signs follow
Percival & Walden's convention, as scipy's: symmetric tapers have a positive sum,
antisymmetric ones start with a positive lobe.
"""

from __future__ import annotations

import math
import threading

import numpy as np
import scipy.linalg.lapack as lapack
from scipy.signal.windows import dpss as scipy_dpss

__all__ = ["dpss_tapers", "BASE_LENGTH"]

#: length of the short problem whose tapers seed the long ones
BASE_LENGTH = 1 << 16


def _half_systems(n: int, nw: float, parities) -> dict:
    """The tridiagonal matrix restricted to (anti)symmetric vectors, on the first half.

    Returns ``{symmetric: (diag, lower, upper, weights)}`` for each parity asked for: the
    half problem is a general tridiagonal matrix (for odd ``n`` and symmetric vectors, the
    centre row couples to its neighbour twice); ``weights`` turn half-vector dot products
    into full-vector ones.  The two parities differ only in their last row, so they share
    one computation of the rows (views, and one copy where a last row differs): the same
    values as building each on its own, at half the passes over fresh memory.
    """
    m = n // 2
    rows_max = max(m + 1 if (n % 2 and symmetric) else m for symmetric in parities)
    t = np.arange(rows_max, dtype=np.float64)
    # diag = ((n - 1 - 2 t) / 2)**2 cos(2 pi W) and off = t (n - t) / 2, written in place
    # (the same operations, so the same bits, without 40 MB temporaries at 1e7 samples:
    # fresh memory is slow to touch here)
    diag = np.multiply(t, 2)
    np.subtract(n - 1, diag, out=diag)
    np.divide(diag, 2.0, out=diag)
    np.square(diag, out=diag)
    np.multiply(diag, math.cos(2 * math.pi * nw / n), out=diag)
    tt = t[1:]
    off = np.subtract(n, tt)
    np.multiply(tt, off, out=off)
    np.divide(off, 2.0, out=off)  # couples rows t-1 and t
    del t, tt
    weights = np.full(rows_max, 2.0)
    out = {}
    parities = list(parities)
    for i, symmetric in enumerate(parities):
        rows = m + 1 if (n % 2 and symmetric) else m
        d, upper, w = diag[:rows], off[: rows - 1], weights[:rows]
        lower = upper
        if n % 2 == 0:  # row m-1 couples to row m = +-row m-1
            if i < len(parities) - 1:
                d = d.copy()  # the last row differs between the parities
            d[-1] += (m * (n - m) / 2.0) * (1.0 if symmetric else -1.0)
        elif symmetric:  # centre row: both neighbours equal
            lower = upper.copy()
            lower[-1] *= 2.0
            w = w.copy()
            w[-1] = 1.0
        out[symmetric] = (d, lower, upper, w)
    return out


def _dot(a: np.ndarray, b: np.ndarray) -> float:
    """Dot product by NumPy's own loop, not BLAS: the same bits whatever the BLAS thread
    count (dask workers run BLAS single-threaded), so tapers built on a worker equal the
    client's."""
    return float(np.einsum("i,i->", a, b))


def _matvec(diag, lower, upper, v, out, tmp) -> np.ndarray:
    np.multiply(diag, v, out=out)
    np.multiply(upper, v[1:], out=tmp[:-1])
    out[:-1] += tmp[:-1]
    np.multiply(lower, v[:-1], out=tmp[:-1])
    out[1:] += tmp[:-1]
    return out


_BASES: dict = {}


def _base(nw: float, k: int) -> tuple[np.ndarray, np.ndarray]:
    """The short tapers that seed the long ones (cached).  scipy's solver gives slightly
    different bits under a different BLAS thread count, so a dask task receives the
    client's copy (:func:`seed_base`) instead of computing its own."""
    key = (float(nw), int(k))
    if key not in _BASES:
        h, ratios = scipy_dpss(BASE_LENGTH, nw, Kmax=k, sym=True, norm=2, return_ratios=True)
        _BASES[key] = (np.atleast_2d(h), np.atleast_1d(ratios))
    return _BASES[key]


def seed_base(nw: float, k: int, base: tuple[np.ndarray, np.ndarray]) -> None:
    _BASES.setdefault((float(nw), int(k)), base)


class HalfTapers:
    """DPSS tapers stored by their first half (they are symmetric or antisymmetric).

    ``half[j]`` holds samples ``0 .. rows_j - 1`` of taper ``j``; :meth:`apply` writes
    ``x * taper_j`` into a buffer without building the full taper; :meth:`full` builds it.
    """

    def __init__(self, n: int, half: list[np.ndarray], ratios: np.ndarray) -> None:
        self.n, self.half, self.ratios = n, half, ratios
        for h in half:
            h.setflags(write=False)
        self.ratios.setflags(write=False)

    @property
    def k(self) -> int:
        return len(self.half)

    def sign(self, j: int) -> float:
        return 1.0 if j % 2 == 0 else -1.0

    def apply(self, j: int, x: np.ndarray, out: np.ndarray) -> np.ndarray:
        """``out[:] = x * taper_j`` for a 1-D ``x`` of length n (out may be float32)."""
        n, m, h = self.n, self.n // 2, self.half[j]
        np.multiply(x[: h.size], h, out=out[: h.size], casting="unsafe")
        np.multiply(x[n - m :], h[:m][::-1], out=out[n - m :], casting="unsafe")
        if j % 2:
            np.negative(out[n - m :], out=out[n - m :])
            if n % 2:
                out[m] = 0.0
        return out

    def sums(self) -> np.ndarray:
        """Sum of each full taper (zero for the antisymmetric ones)."""
        n, m = self.n, self.n // 2
        out = np.zeros(self.k)
        for j, h in enumerate(self.half):
            if j % 2 == 0:
                out[j] = 2 * h[:m].sum() + (h[m] if n % 2 else 0.0)
        return out

    def full(self) -> np.ndarray:
        n, m = self.n, self.n // 2
        out = np.empty((self.k, n))
        for j, h in enumerate(self.half):
            out[j, : h.size] = h
            out[j, n - m :] = h[:m][::-1] * self.sign(j)
            if n % 2 and j % 2:
                out[j, m] = 0.0
        return out


def _refine(j: int, n: int, systems: dict, base: np.ndarray, u0: np.ndarray, buffers: dict) -> np.ndarray:
    """Taper ``j`` (its half, unit weighted norm, not yet orthogonalised): the interpolated
    seed refined by Rayleigh-quotient inverse iteration.  Runs on an engine thread with
    that thread's work buffers (``buffers[thread id]``), reused between tapers: every step
    writes into them (the same operations as the plain expressions in the comments, so the
    same bits), since a temporary of a 1e7-sample record is 40 MB of fresh memory, slow
    to touch here (PERFORMANCE.md)."""
    symmetric = j % 2 == 0
    diag, lower, upper, weights, scale = systems[symmetric]
    rows = diag.size
    work = buffers.setdefault(threading.get_ident(), {})
    if work.get("rows") != rows:
        work.clear()
        work.update({"rows": rows, **{name: np.empty(rows) for name in ("ah", "tmp", "dl", "du", "d", "b", "w")}})
        work["grid"] = np.arange(rows, dtype=np.float64)
        work["grid"] += 0.5
        work["grid"] /= n  # (arange(rows) + 0.5) / n
    wbuf, tbuf = work["w"], work["tmp"]
    # the interpolated seed; its array receives each refined vector (one fresh array per taper)
    h = store = np.interp(work["grid"], u0, base[j])
    for _ in range(3):
        wh = np.multiply(weights, h, out=wbuf)  # weights * h
        norm2 = _dot(wh, h)
        ah = _matvec(diag, lower, upper, h, work["ah"], tbuf)
        sigma = _dot(wh, ah) / norm2
        ah -= np.multiply(sigma, h, out=tbuf)  # ah -= sigma * h
        resid = math.sqrt(_dot(np.multiply(weights, ah, out=wbuf), ah) / norm2) / scale
        if resid < 1e-13:
            break
        for attempt in range(3):
            np.copyto(work["dl"], 0.0)
            work["dl"][:-1] = lower
            work["du"][:-1] = upper
            np.subtract(diag, sigma * (1 - 1e-14 * attempt), out=work["d"])
            np.copyto(work["b"], h)
            _, _, _, y, info = lapack.dgtsv(work["dl"][:-1], work["d"], work["du"][:-1], work["b"],
                                             overwrite_dl=1, overwrite_d=1, overwrite_du=1, overwrite_b=1)
            if info == 0:
                break
        if _dot(np.multiply(weights, y, out=wbuf), h) < 0:
            y = np.negative(y, out=y)
        # h = y / |y|_w (y is the solver's buffer, not h)
        ynorm = math.sqrt(_dot(np.multiply(weights, y, out=wbuf), y))
        h = np.divide(y, ynorm, out=store)
        # (A - sigma) y = h_old, so |A h - sigma h| = |h_old| / |y| bounds the residual of
        # the new h (its Rayleigh quotient can only lower it): below the threshold, the
        # residual pass of the next round would stop anyway -- skip it (same bits)
        if math.sqrt(norm2) / ynorm / scale < 0.5e-13:
            break
    return h


def half_tapers(n: int, nw: float, k: int) -> HalfTapers:
    """The first ``k`` unit-energy DPSS tapers of length ``n`` (see the module notes).

    The tapers are refined two at a time on the engine threads (:func:`_refine`), then
    orthogonalised in order in the calling thread, so the bits do not depend on the
    thread count.
    """
    from ._engine import checkpoint, ordered_map

    n0 = BASE_LENGTH
    base, ratios = _base(float(nw), int(k))
    u0 = (np.arange(n0) + 0.5) / n0
    checkpoint()
    systems = {}
    for symmetric, (diag, lower, upper, weights) in _half_systems(
            n, nw, sorted({j % 2 == 0 for j in range(k)}, reverse=True)).items():
        scale = float(np.abs(diag).max() + 2 * upper.max())
        systems[symmetric] = (diag, lower, upper, weights, scale)
    buffers: dict = {}
    halves = []
    for j, h in enumerate(ordered_map(lambda j: _refine(j, n, systems, base, u0, buffers), range(k),
                                      report_blocks=False)):
        weights = systems[j % 2 == 0][3]
        if len(h) != (wbuf := buffers.get("caller", np.empty(0))).size:
            wbuf = buffers["caller"] = np.empty(len(h))
        # orthogonal to the earlier tapers of the same parity (those of the other parity
        # are orthogonal by symmetry), as LAPACK's inverse iteration does for clusters
        for i in range(j % 2, j, 2):
            # h = h - <h_i, h>_w h_i
            d = _dot(np.multiply(weights, halves[i], out=wbuf), h)
            h -= np.multiply(d, halves[i], out=wbuf)
        h /= math.sqrt(_dot(np.multiply(weights, h, out=wbuf), h))  # h = h / |h|_w
        halves.append(h)
    buffers.clear()
    return HalfTapers(n, halves, ratios.copy())


def dpss_tapers(n: int, nw: float, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Unit-energy DPSS tapers ``(k, n)`` and concentration ratios ``(k,)``.

    Equal to ``scipy.signal.windows.dpss(n, nw, Kmax=k, sym=True, norm=2,
    return_ratios=True)`` to the accuracy of the eigenproblem (see the module notes).
    """
    t = half_tapers(n, nw, k)
    return t.full(), np.array(t.ratios)
