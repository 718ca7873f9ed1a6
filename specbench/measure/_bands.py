"""Band power and RMS, the noise floor, fractional-octave bands and unit integration.

Band power and its interval
---------------------------
Each bin ``k`` of a one-sided density stands for the cell ``[f_k - df/2, f_k + df/2]``
(clipped to ``[0, fs/2]``; the DC and Nyquist cells are half cells whose density is twice
the stored value, since the stored value there is not doubled).  The band power is

    P = sum_k c_k S_k,        c_k = (length of the cell inside [f1, f2]) * (2 at DC/Nyquist)

so partial bins at the band edges are weighted by the fraction inside the band, and the
reported band is exactly ``(f1, f2)``.  For white noise of variance ``sigma**2``,
``E P = 2 sigma**2 (f2 - f1) / fs`` exactly.

The interval treats ``P`` as a scaled chi-square with Satterthwaite's (1946) equivalent
degrees of freedom of a sum of correlated chi-square variables,

    nu_band = 2 (sum_k c_k S_k)**2 / sum_j sum_k c_j c_k S_j S_k sqrt(g_j g_k) [r(j-k) + r(j+k)]

with ``g_k = 2 / nu_k`` the per-bin variance factor of the estimate (its own ``dof``; DC and
Nyquist carry half the dof, whose other half is the mirror term), ``r`` the correlation of the
estimate between bins from the estimator's spectral window and segment overlap
(:mod:`._structure`, Percival & Walden 1993 sections 6.6, 6.7, 6.17 and chapter 7), and
``r(j + k)`` (mod nfft) the mirror term of real data.  ``S`` is replaced by its estimate
without bias: ``E[S^_j S^_k] = S_j S_k (1 + g r_jk)``, so each product is divided by
``1 + g r_jk``, and ``E[P^2] = P^2 + var`` gives ``nu = 2 P^2 / var - 2`` (our correction of the
plug-in, which matters at few dof: a boxcar periodogram band of ``M`` bins gets ``2M`` dof
rather than ``M``; checked by Monte Carlo).  Treating the bins as independent (``r(d) = 0`` for ``d != 0``) gives far
too many dof for any tapered window, overlapped segments or multitaper estimate: its interval
is too narrow and its coverage falls below the nominal level (tests/measure).
"""

from __future__ import annotations

import math
import numbers
import threading
import weakref
from dataclasses import replace
from typing import Any

import numpy as np
from scipy import stats

from ._results import Measurement, MeasurementError, OctaveBands
from ._structure import structure_of

__all__ = ["band_power", "band_rms", "noise_floor", "octave_bands", "integrate", "differentiate",
           "iec_bands", "METHOD_BAND"]

METHOD_BAND = (
    "partial bins weighted by the fraction of the cell inside the band; interval: scaled chi-square "
    "with Satterthwaite (1946) dof of the correlated bins (bin correlation from the spectral window "
    "and segment overlap, Percival & Walden 1993)"
)


# ---------------------------------------------------------------- helpers
_LAYOUTS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _layout(spec: Any) -> dict:
    """Cells, edge multipliers and signed bin indices of a spectrum (cached on its info)."""
    cache = _LAYOUTS.get(spec)
    if cache is not None:
        return cache
    freq = np.asarray(spec.freq, dtype=np.float64)
    df = spec.df
    nf = freq.size
    nfft = int(spec.info.get("nfft", 2 * (nf - 1) if spec.onesided else nf))
    lo = freq - df / 2
    hi = freq + df / 2
    mult = np.ones(nf)
    dof = np.asarray(spec.dof, dtype=np.float64)
    d1 = dof if dof.ndim == 1 else dof.reshape(-1, nf)[0]
    if spec.onesided:
        real = True
        lo[0] = max(lo[0], 0.0)
        hi[-1] = min(hi[-1], spec.fs / 2)
        edges = [0]
        if nfft % 2 == 0 and abs(freq[-1] - spec.fs / 2) < 1e-9 * spec.fs:
            edges.append(nf - 1)
        mult[edges] = 2.0
        signed = np.arange(nf)
    else:
        zero = int(np.argmin(np.abs(freq)))
        inner = np.median(d1)
        real = bool(d1[zero] < 0.75 * inner)
        edges = [zero] if real else []
        signed = np.rint(freq / df).astype(np.int64)
    edge_mask = np.zeros(nf, dtype=bool)
    edge_mask[edges] = True
    out = dict(freq=freq, df=df, lo=lo, hi=hi, mult=mult, nfft=nfft, real=real, edge=edge_mask,
               signed=signed, coverage=(float(lo[0]), float(hi[-1])), full=(hi - lo) * mult)
    _LAYOUTS[spec] = out
    return out


_WORK = threading.local()


def _work(key: str, shape: tuple) -> np.ndarray:
    """A reused float64 work array of ``shape`` (per thread): large fresh temporaries cost page
    faults on every call (see PERFORMANCE.md, "memory is time"), a kept buffer does not."""
    pool = getattr(_WORK, "pool", None)
    if pool is None:
        pool = _WORK.pool = {}
    n = int(np.prod(shape))
    buf = pool.get(key)
    if buf is None or buf.size < n:
        buf = pool[key] = np.empty(max(n, 1))
    if len(pool) and sum(b.size for b in pool.values()) > 64 * 2**20:  # at most 512 MB kept
        pool.clear()
        buf = pool[key] = np.empty(max(n, 1))
    return buf[:n].reshape(shape)


def _density(spec: Any) -> np.ndarray:
    return np.asarray(spec.view("density")[0], dtype=np.float64)


def _number(name: str, value: Any, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not math.isfinite(value):
        raise MeasurementError(f"{what}: {name} must be a finite frequency in Hz. Got {value!r} instead.")
    return float(value)


def _check_band(spec: Any, f1: Any, f2: Any, what: str) -> tuple[float, float]:
    f1 = _number("f1", f1, what)
    f2 = _number("f2", f2, what)
    lay = _layout(spec)
    if f1 >= f2:
        raise MeasurementError(
            f"{what}: f1 = {f1:g} Hz is not below f2 = {f2:g} Hz. Give the band as (lower, upper), "
            f"for example ({min(f1, f2):g}, {max(f1, f2):g})."
        )
    a, b = lay["coverage"]
    tol = 1e-9 * spec.fs
    if f1 < a - tol or f2 > b + tol:
        raise MeasurementError(
            f"{what}: the band {f1:g}..{f2:g} Hz reaches outside the spectrum, which covers {a:g}..{b:g} Hz "
            f"(sample rate {spec.fs:g} Hz). Choose f1 >= {a:g} and f2 <= {b:g}, or estimate at a higher "
            "sample rate."
        )
    if f2 - f1 < lay["df"] * (1 - 1e-9):
        raise MeasurementError(
            f"{what}: the band {f1:g}..{f2:g} Hz is {f2 - f1:g} Hz wide, narrower than one bin "
            f"({lay['df']:g} Hz). Widen the band to at least {lay['df']:g} Hz, or estimate with a longer "
            "segment for finer bins."
        )
    return max(f1, a), min(f2, b)


def _coefficients(lay: dict, f1: float, f2: float) -> tuple[slice, np.ndarray]:
    lo, hi = lay["lo"], lay["hi"]
    i0 = int(np.searchsorted(hi, f1, side="right"))
    i1 = int(np.searchsorted(lo, f2, side="left"))
    i0 = min(i0, lo.size - 1)
    i1 = max(i1, i0 + 1)
    sl = slice(i0, i1)
    c = np.clip(np.minimum(hi[sl], f2) - np.maximum(lo[sl], f1), 0.0, None) * lay["mult"][sl]
    return sl, c


def _gfactor(spec: Any, lay: dict, sl: slice, shape: tuple) -> np.ndarray:
    dof = np.broadcast_to(np.asarray(spec.dof, dtype=np.float64), shape)[..., sl]
    with np.errstate(divide="ignore"):
        g = np.where(lay["edge"][sl], 1.0, 2.0) / dof
    return g


def _quadratic(a: np.ndarray, r: np.ndarray, lay: dict, sl: slice) -> np.ndarray:
    """``sum_j sum_k a_j a_k [r(j-k) + mirror r(j+k)]`` over the band (last axis)."""
    m = a.shape[-1]
    v = r[0] * np.einsum("...k,...k->...", a, a)
    for d in range(1, min(r.size, m)):
        v = v + 2 * r[d] * np.einsum("...k,...k->...", a[..., :-d], a[..., d:])
    if lay["real"]:
        v = v + _mirror(a, r, lay, sl)
    return v


def _mirror(a: np.ndarray, r: np.ndarray, lay: dict, sl: slice) -> np.ndarray:
    nfft = lay["nfft"]
    s = lay["signed"][sl]
    L = r.size - 1
    if lay is not None and s.size and s[0] >= 0:  # one-sided: only near DC and Nyquist
        cand = np.nonzero((s <= L) | (s >= nfft // 2 - L))[0]
    else:
        cand = np.arange(s.size)
    out = np.zeros(a.shape[:-1])
    if cand.size == 0:
        return out
    s0 = s[0]
    sc = s[cand]
    for d in range(-L, L + 1):
        k = np.mod(d - sc, nfft)
        if s0 < 0:
            k = np.where(k >= (nfft + 1) // 2, k - nfft, k)
        q = k - s0
        ok = (q >= 0) & (q < s.size)
        if not ok.any():
            continue
        out = out + r[abs(d)] * np.einsum("...k,...k->...", a[..., cand[ok]], a[..., q[ok]])
    return out


def _chi2_interval(p: np.ndarray, nu: np.ndarray, confidence: float) -> tuple[np.ndarray, np.ndarray]:
    al = 1.0 - confidence
    with np.errstate(divide="ignore", invalid="ignore"):
        lo = nu * p / stats.chi2.ppf(1 - al / 2, nu)
        hi = nu * p / stats.chi2.ppf(al / 2, nu)
    return lo, hi


def _scalar(x: np.ndarray) -> Any:
    """A float for one channel (also a one-channel Signal), else one value per channel."""
    x = np.asarray(x)
    return float(x.reshape(())) if x.size == 1 else x


def band_core(spec: Any, f1: float, f2: float, *, dens: np.ndarray | None = None) -> tuple:
    """``(power, dof, bins)`` of the band, no validation (used by octave bands as well)."""
    lay = _layout(spec)
    dens = _density(spec) if dens is None else dens
    sl, c = _coefficients(lay, f1, f2)
    s = dens[..., sl]
    p = (s * c).sum(axis=-1)
    g = _gfactor(spec, lay, sl, dens.shape)
    a = c * s * np.sqrt(g)
    r = structure_of(spec).r
    # plug-in bias: E[S^_j S^_k] = S_j S_k (1 + g r_jk), so each product is divided by 1 + g r
    gbar = float(np.mean(g[np.isfinite(g)])) if np.isfinite(g).any() else 0.0
    var = _quadratic(a, r / (1 + gbar * r), lay, sl)
    with np.errstate(divide="ignore", invalid="ignore"):
        # E[P^2] = P^2 + var: nu = 2 (P^2 - var) / var
        nu = np.where(var > 0, np.maximum(2 * p * p / var - 2, 1.0), np.inf)
    if not np.all(np.isfinite(s)):
        bad = np.nonzero(~np.isfinite(np.atleast_2d(s)).any(axis=0))[0]
        f = lay["freq"][sl][bad[0]] if bad.size else lay["freq"][sl][0]
        raise MeasurementError(
            f"The band {f1:g}..{f2:g} Hz contains a non-finite density (at {f:g} Hz; after integration the DC "
            "bin is undefined). Start the band above that frequency."
        )
    return p, nu, int(np.count_nonzero(c))


def band_core_many(spec: Any, f1s: np.ndarray, f2s: np.ndarray, *, dens: np.ndarray | None = None) -> tuple:
    """``(power, dof)`` of many bands at once, shape ``(..., nbands)``: :func:`band_core` for each,
    with the per-spectrum work (layout, density, per-bin factors, structure) done once and the
    band sums of the weights and of each lag's products gathered without a Python call per bin.

    Each band's bins are the run ``[i0, i1)``; interior bins carry their whole cell, the two end
    bins the fraction inside the band.  The lag products ``sum_k a_k a_{k+d}`` are taken over the
    run with whole-cell weights and then corrected at the two ends (exact, no cumulative-sum
    cancellation), and the mirror term is added for the bands within reach of DC or Nyquist.
    """
    lay = _layout(spec)
    dens = _density(spec) if dens is None else dens
    f1s = np.asarray(f1s, dtype=np.float64)
    f2s = np.asarray(f2s, dtype=np.float64)
    lo, hi, mult = lay["lo"], lay["hi"], lay["mult"]
    nf = lo.size
    i0 = np.minimum(np.searchsorted(hi, f1s, side="right"), nf - 1)
    i1 = np.maximum(np.searchsorted(lo, f2s, side="left"), i0 + 1)
    full = lay["full"]
    ca = np.clip(np.minimum(hi[i0], f2s) - np.maximum(lo[i0], f1s), 0.0, None) * mult[i0]
    last = i1 - 1
    cb = np.clip(np.minimum(hi[last], f2s) - np.maximum(lo[last], f1s), 0.0, None) * mult[last]
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = np.where(full[i0] > 0, ca / full[i0], 0.0)
        beta = np.where(full[last] > 0, cb / full[last], 0.0)
    single = i1 - i0 == 1
    # work on the covered run only, padded with one zero so that reduceat can end at its end
    u0, u1 = int(i0.min()), int(i1.max())
    i0, i1, last = i0 - u0, i1 - u0, last - u0
    nf = u1 - u0
    dens_u = dens[..., u0:u1]
    if not np.all(np.isfinite(dens_u)):
        return None  # the caller falls back to band_core, which names the bad bin
    shape = dens.shape[:-1] + (nf + 1,)
    dof = np.asarray(spec.dof, dtype=np.float64)
    edge = lay["edge"][u0:u1]
    constant = (dof.ndim == 0 or (dof.size > 0 and float(dof.min()) == float(dof.max()))) and dof.size > 0
    wsp = _work("ws", shape)
    np.multiply(full[u0:u1], dens_u, out=wsp[..., :nf])
    wsp[..., nf] = 0.0  # whole-cell weighted density
    starts = np.empty(2 * i0.size, dtype=np.int64)
    starts[0::2], starts[1::2] = i0, i1
    # band sums over [i0, i1): reduceat pairs (the odd results are discarded)
    p_full = np.add.reduceat(wsp, starts, axis=-1)[..., 0::2]
    a0 = wsp[..., i0]
    a1 = wsp[..., last]
    p = np.where(single, ca * dens_u[..., i0], p_full + (alpha - 1) * a0 + np.where(single, 0.0, (beta - 1) * a1))
    if constant:
        nu0 = float(dof.ravel()[0])
        g_in = 2.0 / nu0 if nu0 > 0 else np.inf
        b = np.multiply(wsp, math.sqrt(g_in), out=_work("b", shape))
        if edge.any():  # DC / Nyquist: 1 / nu instead of 2 / nu
            b[..., np.flatnonzero(edge)] *= math.sqrt(0.5)
        # the mean of g over each band: 2/nu, and 1/nu on an edge bin
        ne = np.add.reduceat(np.concatenate([edge.astype(np.float64), [0.0]]), starts)[0::2]
        gbar = (g_in * (m_ := (i1 - i0)) - 0.5 * g_in * ne) / m_
        gbar = np.where(np.isfinite(gbar), gbar, 0.0)
    else:
        g = _work("g", shape)
        g[..., nf] = 0.0
        with np.errstate(divide="ignore"):
            np.divide(np.where(edge, 1.0, 2.0), np.broadcast_to(dof, dens.shape)[..., u0:u1], out=g[..., :nf])
        b = np.sqrt(g, out=_work("b", shape))
        np.multiply(b, wsp, out=b)
        fin = np.isfinite(g)
        gcnt = np.add.reduceat(fin.astype(np.float64), starts, axis=-1)[..., 0::2]
        np.copyto(g, 0.0, where=~fin)
        gsum = np.add.reduceat(g, starts, axis=-1)[..., 0::2]
        lead = tuple(range(gsum.ndim - 1))  # one mean over the channels too, as band_core takes it
        gsum, gcnt = gsum.sum(axis=lead), gcnt.sum(axis=lead)
        with np.errstate(divide="ignore", invalid="ignore"):
            gbar = np.where(gcnt > 0, gsum / gcnt, 0.0)
    r = structure_of(spec).r
    L = r.size - 1
    m = i1 - i0
    b0, b1 = b[..., i0], b[..., last]
    # sum_k b_k b_{k+d} over each run with whole-cell weights: one fused product-sum per band and
    # lag (no temporaries over the axis), then the exact corrections at the two end bins
    f = np.zeros(p.shape[:-1] + (i0.size, L + 1))
    for j, (a_, z_) in enumerate(zip(i0.tolist(), i1.tolist())):
        bs = b[..., a_:z_]
        n_ = z_ - a_
        # einsum, not np.dot: BLAS calls on short slices are slow here when the cores are busy
        for d in range(min(L + 1, n_)):
            f[..., j, d] = np.einsum("...k,...k->...", bs[..., : n_ - d], bs[..., d:])
    var = np.zeros(p.shape)
    for d in range(0, L + 1):
        has = m > d
        if not has.any():
            break
        f_d = f[..., d]
        if d == 0:
            qd = np.where(single, (alpha * b0) ** 2, f_d + (alpha**2 - 1) * b0**2 + (beta**2 - 1) * b1**2)
        else:
            bi0d = b[..., np.minimum(i0 + d, nf - 1)]
            bi1d = b[..., np.maximum(last - d, 0)]
            qd = (f_d + (alpha - 1) * b0 * bi0d + (beta - 1) * bi1d * b1
                  + np.where(m - 1 == d, (alpha - 1) * (beta - 1) * b0 * b1, 0.0))
        w = (1.0 if d == 0 else 2.0) * r[d] / (1 + gbar * r[d])
        var = var + np.where(has, w * qd, 0.0)
    if lay["real"]:
        s_all = lay["signed"]
        g0, g1 = i0 + u0, last + u0  # back to the spectrum's bin numbers
        near = (s_all[g0] <= L) | (s_all[g1] >= lay["nfft"] // 2 - L) if s_all[0] >= 0 else np.ones(i0.size, bool)
        dof_b = np.broadcast_to(np.asarray(spec.dof, dtype=np.float64), dens.shape)
        for j in np.flatnonzero(near):
            sl = slice(int(g0[j]), int(g1[j]) + 1)
            c = full[sl].copy()
            c[0] = ca[j]
            if not single[j]:
                c[-1] = cb[j]
            with np.errstate(divide="ignore"):
                gj = np.where(lay["edge"][sl], 1.0, 2.0) / dof_b[..., sl]
            a = c * dens[..., sl] * np.sqrt(gj)
            rr = r / (1 + float(gbar[j]) * r)
            var[..., j] = var[..., j] + _mirror(a, rr, lay, sl)
    with np.errstate(divide="ignore", invalid="ignore"):
        nu = np.where(var > 0, np.maximum(2 * p * p / var - 2, 1.0), np.inf)
    return p, nu


# ---------------------------------------------------------------- public measurements
def band_power(spec: Any, f1: float, f2: float) -> Measurement:
    """Power of the density over ``[f1, f2]`` Hz with a confidence interval (see the module notes).

    Examples
    --------
    >>> import numpy as np, specbench as sb
    >>> x = np.random.default_rng(0).standard_normal(100_000)      # white, unit variance, fs = 1 kHz
    >>> m = sb.Welch(segment_length=1024)(x, fs=1000.0).band_power(100, 150)
    >>> print(f"{m.value:.4f} in [{m.lower:.4f}, {m.upper:.4f}], {m.dof:.0f} dof; white: {2 * 50 / 1000:.4f}")
    0.1018 in [0.0990, 0.1048], 9506 dof; white: 0.1000
    """
    f1, f2 = _check_band(spec, f1, f2, "band_power")
    p, nu, bins = band_core(spec, f1, f2)
    lo, hi = _chi2_interval(p, nu, spec.confidence)
    from ..estimators._results import power_unit

    unit = spec.data_unit
    unit = tuple(power_unit(u) for u in unit) if isinstance(unit, tuple) else power_unit(unit)
    method = METHOD_BAND
    if f2 - f1 < spec.resolution:
        method += f"; the band is narrower than the resolution ({spec.resolution:g} Hz) and includes leakage"
    return Measurement(
        value=_scalar(p), lower=_scalar(lo), upper=_scalar(hi), dof=_scalar(nu), unit=unit, band=(f1, f2),
        confidence=spec.confidence, kind="band power", bins=bins, method=method, channels=spec.channels,
        code=f"spec.band_power({f1!r}, {f2!r})",
    )


def band_rms(spec: Any, f1: float, f2: float) -> Measurement:
    """RMS over ``[f1, f2]``: the square root of :func:`band_power` and of its interval ends."""
    m = band_power(spec, f1, f2)
    sq = lambda v: _scalar(np.sqrt(v))  # noqa: E731
    unit = spec.data_unit
    return replace(m, value=sq(m.value), lower=sq(m.lower), upper=sq(m.upper), unit=unit, kind="band RMS",
                   code=f"spec.band_rms({m.band[0]!r}, {m.band[1]!r})")


def median_bias(nu: float) -> float:
    """Median of ``chi2_nu / nu``: the ratio of the median of a bin's estimate to its mean."""
    return float(stats.chi2.ppf(0.5, nu) / nu)


def noise_floor(spec: Any, f1: float | None = None, f2: float | None = None) -> Measurement:
    """A robust floor of the density over ``[f1, f2]``: the median, bias-corrected, with an interval.

    The bins whose centre lies in the band are used (whole bins; DC and Nyquist excluded).
    A bin's estimate is ``S chi2_nu / nu``, whose median is ``S m_nu`` with
    ``m_nu = chi2.ppf(0.5, nu) / nu``, so the floor is ``median / m_nu`` (the chi-square median
    bias correction).  Tones and narrow features shift the median far less than the mean.

    The interval is the distribution-free one for a median from order statistics
    (ranks ``(M + 1)/2 -+ z sqrt(M kappa) / 2``; e.g. Conover, *Practical Nonparametric
    Statistics*, 1999, section 3.2, from memory), with the rank spread widened by the variance
    inflation ``kappa = sum_d r(d)`` of correlated bins, then divided by ``m_nu``.
    """
    lay = _layout(spec)
    freq = lay["freq"]
    a, b = lay["coverage"]
    f1 = a if f1 is None else f1
    f2 = b if f2 is None else f2
    f1, f2 = _check_band(spec, f1, f2, "noise_floor")
    # the bins whose centre lies in the band: one run, less the DC / Nyquist bins at its ends
    i0 = int(np.searchsorted(freq, f1, side="left"))
    i1 = int(np.searchsorted(freq, f2, side="right"))
    edge = lay["edge"]
    while i0 < i1 and edge[i0]:
        i0 += 1
    while i1 > i0 and edge[i1 - 1]:
        i1 -= 1
    inner_edge = bool(edge[i0:i1].any())  # a two-sided spectrum's zero bin inside the band
    sel = np.nonzero(~edge[i0:i1])[0] + i0 if inner_edge else None
    m = (i1 - i0) if sel is None else sel.size
    if m < 8:
        raise MeasurementError(
            f"noise_floor: the band {f1:g}..{f2:g} Hz holds {m} bin(s); a robust floor needs at least 8. "
            f"Widen the band to at least {8 * lay['df']:g} Hz."
        )
    full_dens = _density(spec)
    dof_all = np.asarray(spec.dof, dtype=np.float64)
    if sel is None:
        dens = _work("floor", full_dens.shape[:-1] + (m,))
        np.copyto(dens, full_dens[..., i0:i1])
        if dof_all.ndim == 0:
            nu = float(dof_all)
        else:
            dof = _work("floor_dof", full_dens.shape[:-1] + (m,))
            np.copyto(dof, np.broadcast_to(dof_all, full_dens.shape)[..., i0:i1])
            lo_d, hi_d = float(dof.min()), float(dof.max())
            if lo_d == hi_d:
                nu = lo_d
            else:
                flat = dof.reshape(-1)
                k = flat.size
                flat.partition([(k - 1) // 2, k // 2])
                nu = 0.5 * float(flat[(k - 1) // 2] + flat[k // 2])
    else:
        dens = full_dens[..., sel]
        nu = float(np.median(np.broadcast_to(dof_all, full_dens.shape)[..., sel]))
    bias = median_bias(nu)
    kappa = max(1.0, min(structure_of(spec).kappa, float(m)))
    z = stats.norm.ppf(0.5 + spec.confidence / 2)
    half = z * math.sqrt(m * kappa) / 2
    r_lo = max(1, int(math.floor((m + 1) / 2 - half)))
    r_hi = min(m, int(math.ceil((m + 1) / 2 + half)))
    mid = [(m - 1) // 2, m // 2]
    kth = sorted({r_lo - 1, r_hi - 1, *mid})
    dens.partition(kth, axis=-1)  # a private copy (work buffer or fancy-indexed): in place
    part = dens
    med = 0.5 * (part[..., mid[0]] + part[..., mid[1]])
    value = med / bias
    lower = part[..., r_lo - 1] / bias
    upper = part[..., r_hi - 1] / bias
    from ..estimators._results import density_unit

    unit = spec.data_unit
    unit = tuple(density_unit(u) for u in unit) if isinstance(unit, tuple) else density_unit(unit)
    method = (f"median of {m} bins / chi-square median bias {bias:.4f} (nu = {nu:.4g}); interval from order "
              f"statistics {r_lo} and {r_hi} of {m} with bin correlation kappa = {kappa:.3g}")
    return Measurement(
        value=_scalar(value), lower=_scalar(lower), upper=_scalar(upper), dof=m / kappa, unit=unit,
        band=(f1, f2), confidence=spec.confidence, kind="noise floor", bins=m, method=method,
        channels=spec.channels, code=f"spec.noise_floor({f1!r}, {f2!r})",
    )


# ---------------------------------------------------------------- fractional-octave bands
G = 10 ** 0.3
FRACTIONS = (1, 3, 6, 12, 24)


def iec_bands(fraction: int, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Exact mid-band frequency and edges of base-10 band number ``x`` (IEC 61260-1:2014, 5.2-5.4).

    ``G = 10**(3/10)``; ``f_m = 1000 G**(x/b)`` for odd ``b``, ``1000 G**((2x + 1)/(2b))`` for
    even ``b``; edges ``f_m G**(-+1/(2b))``.
    """
    b = fraction
    x = np.asarray(x, dtype=np.float64)
    fm = 1000.0 * G ** (x / b) if b % 2 else 1000.0 * G ** ((2 * x + 1) / (2 * b))
    return fm, fm * G ** (-1 / (2 * b)), fm * G ** (1 / (2 * b))


def _band_number(fraction: int, f: float) -> float:
    """Real-valued band number whose mid-band frequency is ``f``."""
    b = fraction
    e = math.log(f / 1000.0) / math.log(G)
    return e * b if b % 2 else (e * 2 * b - 1) / 2


def octave_bands(spec: Any, fraction: int = 3, f_min: float | None = None, f_max: float | None = None) -> OctaveBands:
    """Band powers in base-10 fractional-octave bands with intervals (IEC 61260-1:2014).

    Bands narrower than the spectrum's resolution cannot be measured and are left out at the low
    end (their power is reported as ``below``); the band that reaches beyond ``fs/2`` is summed
    over the covered part and flagged ``partial``.  ``value.sum(-1) + below + above`` equals the
    total power of the spectrum.
    """
    if isinstance(fraction, bool) or fraction not in FRACTIONS:
        raise MeasurementError(
            f"octave_bands: fraction must be one of {FRACTIONS} (1/b-octave). Got {fraction!r} instead."
        )
    b = int(fraction)
    lay = _layout(spec)
    a_cov, b_cov = lay["coverage"]
    res = max(spec.resolution, lay["df"])
    width_ratio = G ** (1 / (2 * b)) - G ** (-1 / (2 * b))
    f_res = res / width_ratio  # lowest mid-band frequency whose band is one resolution wide
    x_res = int(math.ceil(_band_number(b, f_res) - 1e-9))
    if f_min is not None:
        f_min = _number("f_min", f_min, "octave_bands")
        x_lo = int(math.ceil(_band_number(b, max(f_min, 1e-300)) - 1e-9))
        if x_lo < x_res:
            fm_res = iec_bands(b, np.array([x_res]))[0][0]
            raise MeasurementError(
                f"octave_bands: the 1/{b}-octave band at {f_min:g} Hz is narrower than the resolution "
                f"({res:g} Hz). The lowest band that can be measured is centred at {fm_res:.4g} Hz: use "
                f"f_min >= {fm_res:.4g}, a coarser fraction, or a longer segment for finer resolution."
            )
    else:
        x_lo = x_res
    top = b_cov if f_max is None else _number("f_max", f_max, "octave_bands")
    x_hi = int(math.floor(_band_number(b, top) + 1e-9))
    # include the band that straddles fs/2
    _, lo_e, _ = iec_bands(b, np.array([x_hi + 1]))
    if f_max is None and lo_e[0] < b_cov:
        x_hi += 1
    while x_lo <= x_hi and iec_bands(b, np.array([x_lo]))[1][0] < a_cov:
        x_lo += 1
    if x_hi < x_lo:
        raise MeasurementError(
            f"octave_bands: no 1/{b}-octave band fits between the resolution limit ({f_res:.4g} Hz mid-band) "
            f"and {top:g} Hz. Use a coarser fraction, a longer segment (finer resolution) or a higher sample rate."
        )
    x = np.arange(x_lo, x_hi + 1)
    fm, lo_e, hi_e = iec_bands(b, x)
    partial = hi_e > b_cov * (1 + 1e-12)
    dens = _density(spec)
    many = band_core_many(spec, lo_e, np.minimum(hi_e, b_cov), dens=dens)
    if many is None:  # a non-finite bin: band_core names it
        for lo, hi in zip(lo_e, hi_e):
            band_core(spec, float(lo), float(min(hi, b_cov)), dens=dens)
    value, nu = many
    lower, upper = _chi2_interval(value, nu, spec.confidence)
    zero = 0.0 * value[..., 0]
    tiny = lay["df"] * 1e-9
    below = band_core(spec, a_cov, float(lo_e[0]), dens=dens)[0] if lo_e[0] > a_cov + tiny else zero
    end = float(min(hi_e[-1], b_cov))
    above = band_core(spec, end, b_cov, dens=dens)[0] if end < b_cov - tiny else zero
    from ..estimators._results import power_unit

    unit = spec.data_unit
    unit = tuple(power_unit(u) for u in unit) if isinstance(unit, tuple) else power_unit(unit)
    notes = []
    if partial.any():
        notes.append(f"the band at {fm[partial][0]:.4g} Hz reaches beyond fs/2 = {b_cov:g} Hz: partial")
    notes.append(f"bands below {fm[0]:.4g} Hz are narrower than the resolution ({res:g} Hz); their power is 'below'")
    args = f"fraction={b}" + (f", f_min={f_min!r}" if f_min is not None else "") + (
        f", f_max={f_max!r}" if f_max is not None else "")
    return OctaveBands(
        fraction=b, index=x, center=fm, lower_edge=lo_e, upper_edge=hi_e, value=value, lower=lower, upper=upper,
        dof=nu, partial=partial, below=_scalar(below), above=_scalar(above), unit=unit,
        confidence=spec.confidence, code=f"spec.octave_bands({args})", notes=tuple(notes),
    )


# ---------------------------------------------------------------- integration
def _unit_integrate(u: str) -> str:
    for tail, new in (("/s^3", "/s^2"), ("/s^2", "/s"), ("/s2", "/s"), ("/s", "")):
        if u.endswith(tail) and len(u) > len(tail):
            return u[: -len(tail)] + new
    if u.endswith("/s") or not u:
        return "s" if not u else u[:-2]
    return f"{u}*s"


def _unit_differentiate(u: str) -> str:
    if not u:
        return "1/s"
    if u.endswith("*s"):
        return u[:-2]
    for tail, new in (("/s^2", "/s^3"), ("/s", "/s^2")):
        if u.endswith(tail):
            return u[: -len(tail)] + new
    return f"{u}/s"


def _apply_units(unit: Any, fn, order: int) -> Any:
    def one(u):
        for _ in range(order):
            u = fn(u)
        return u

    return tuple(one(u) for u in unit) if isinstance(unit, tuple) else one(unit)


def _order(order: Any, what: str) -> int:
    if isinstance(order, bool) or not isinstance(order, numbers.Integral) or order < 1 or order > 4:
        raise MeasurementError(f"{what}: order must be an integer 1..4 (1: once, 2: twice). Got {order!r} instead.")
    return int(order)


def _reweight(spec: Any, exponent: int, unit: Any, what: str, code: str) -> Any:
    if spec.scaling != "density":
        raise MeasurementError(
            f"{what}: the spectrum has scaling={spec.scaling!r} (power per bin, for reading tones); the "
            "(2 pi f)^2 weighting applies to a density. Estimate with scaling='density' and call it again."
        )
    f = np.abs(np.asarray(spec.freq, dtype=np.float64))
    with np.errstate(divide="ignore", invalid="ignore"):
        w = (2 * np.pi * f) ** (2.0 * exponent)
    dc = f == 0
    w = np.where(dc, np.nan, w)
    info = dict(spec.info)
    info["integration_order"] = info.get("integration_order", 0) - exponent
    note = (f"{what}: the DC bin is undefined under (2 pi f)^{2 * exponent:+d} weighting and is NaN "
            "(left out of band measurements that start above it)")
    info["notes"] = tuple(info.get("notes", ())) + (note,)
    info["code"] = info.get("code", "spec") + code
    return replace(
        spec, value=spec.value * w, lower=spec.lower * w, upper=spec.upper * w, data_unit=unit,
        variance=np.full(np.shape(spec.variance), np.nan), info=info,
    )


def integrate(spec: Any, order: int = 1) -> Any:
    """The density of the ``order``-times integrated quantity: ``S(f) (2 pi f)^(-2 order)``.

    Acceleration (``m/s^2``) becomes velocity (``m/s``), velocity becomes displacement (``m``);
    the band scales with the estimate (same interval) and the dof are unchanged.  The DC bin is
    NaN (the integral of a constant is unbounded), never ``inf``; ``variance`` is NaN since the
    integrated samples were never seen.
    """
    order = _order(order, "integrate")
    unit = _apply_units(spec.data_unit, _unit_integrate, order)
    return _reweight(spec, -order, unit, "integrate", f".integrate({order})")


def differentiate(spec: Any, order: int = 1) -> Any:
    """The density of the ``order``-times differentiated quantity: ``S(f) (2 pi f)^(2 order)``."""
    order = _order(order, "differentiate")
    unit = _apply_units(spec.data_unit, _unit_differentiate, order)
    return _reweight(spec, order, unit, "differentiate", f".differentiate({order})")
