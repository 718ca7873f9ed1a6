"""The correlation structure of a spectral estimate across its bins, and its tone response.

Every measurement with an interval needs to know how the estimate at one bin co-varies with
the estimate at another.  For a Gaussian process whose density is locally flat, the
covariance of two bins ``d`` bins apart is ``S_j S_k (2/nu) r(d)`` with ``r(0) = 1``, where

* Welch / periodogram (Percival & Walden 1993, sections 6.6 and 6.17, from memory):
  ``Gamma(d) = sum_{|m|<n} (1 - |m|/n) |C_m(d)|**2`` with
  ``C_m(d) = sum_t h_t h_{t+m D} exp(-i 2 pi d t / nfft) / sum_t h_t**2`` (the window's
  spectral-window correlation for ``m = 0``, the overlap of segments ``m`` steps apart
  otherwise; ``n`` segments, step ``D``);
* multitaper (equal weights): ``Gamma(d) = (1/K**2) sum_a sum_b |sum_t h_a h_b e^{...}|**2``
  (Percival & Walden 1993, chapter 7);
* Blackman-Tukey: ``Gamma(d) = sum_{|m|<=M} w_m**2 cos(2 pi m d / nfft) / sum w_m**2``
  (Percival & Walden 1993, section 6.7: the lag window's spectral window correlation),

and ``r(d) = Gamma(d) / Gamma(0)``.  For real data the mirror bins add ``r(j + k)`` (mod
nfft), which is why DC and Nyquist carry half the degrees of freedom.  The per-bin scale
``2/nu`` comes from the spectrum's own ``dof``, so the structure and the per-bin band agree.

Long windows are evaluated on a shorter window of the same shape (``SHAPE_N`` samples, the
same segment overlap fraction and zero-padding ratio): in units of output bins the spectral
window of ``h(t/N)`` converges as ``N`` grows; at 512 samples the difference is far below
the statistical resolution of any interval (for the Dirichlet kernel against its limit, a
relative ``(pi x / N)**2``, 4e-5 one bin out).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.fft
from scipy.signal.windows import dpss

from ..estimators.windows import _shape_spec, get_window

__all__ = ["Structure", "structure_of", "SHAPE_N"]

SHAPE_N = 512
#: longest bin separation kept in the correlation structure, in window-native bins
MAX_LAG_BINS = 64
#: fraction of sum |r| that may be left out by the truncation
TAIL = 1e-4


@dataclass(frozen=True, eq=False)
class Structure:
    """Bin correlation and tone response of one estimator configuration.

    Attributes
    ----------
    r : ndarray, shape (L + 1,)
        Correlation of the estimate at bins ``d = 0..L`` apart, ``r(0) = 1`` (real; may be
        negative for lag windows).
    kind : {"taper", "lag"}
        Taper estimators (Welch, periodogram, multitaper) or a lag-window estimator.
    tapers : ndarray, shape (K, n)
        Unit-energy tapers at the evaluation length ``n`` (``kind == "taper"``).
    pad : float
        ``nfft / segment length``: output bins per window-native bin.
    lag_weights : ndarray
        ``w_0..w_M`` (``kind == "lag"``).
    nfft : int
        FFT length of the estimate (output bins per fs).
    nu_struct : float
        Degrees of freedom implied by one segment of the structure (2 for one taper,
        ``2 / sum_ab |C_ab(0)|**2 / K**2`` for ``K`` tapers).
    seg_terms : tuple of (m * step / n, c_m, weight)
        Overlap terms of Welch averaging, for the tone-noise cross term of :mod:`._tones`.
    """

    r: np.ndarray
    kind: str
    nfft: int
    pad: float
    tapers: np.ndarray | None = None
    lag_weights: np.ndarray | None = None
    nu_struct: float = 2.0
    seg_terms: tuple = ()
    label: str = ""
    _cache: dict = field(default_factory=dict, repr=False)

    @property
    def kappa(self) -> float:
        """``sum_{d=-L}^{L} r(d)``: the variance inflation of a long band over independent bins."""
        return float(self.r[0] + 2 * self.r[1:].sum())

    # ---------------------------------------------------------------- tone response
    def dtft(self, x: np.ndarray) -> np.ndarray:
        """``D_a(x)``: the tapers' transforms at ``x`` output bins from a bin, shape (K, ...)."""
        h = self.tapers
        n = h.shape[-1]
        x = np.asarray(x, dtype=np.float64)
        t = np.arange(n)
        ph = np.exp(-2j * np.pi * np.multiply.outer(x / (self.pad * n), t))  # (..., n)
        return np.einsum("kt,...t->k...", h, ph)

    def kernel(self, x: np.ndarray) -> np.ndarray:
        """Expected response of the estimate to a tone ``x`` output bins away, 1 at ``x = 0``."""
        x = np.asarray(x, dtype=np.float64)
        if self.kind == "lag":
            w = self.lag_weights
            m = np.arange(1, w.size)
            num = w[0] + 2 * np.cos(2 * np.pi * np.multiply.outer(x, m) / self.nfft) @ w[1:]
            return num / (w[0] + 2 * w[1:].sum())
        d = self.dtft(x)
        d0 = self.dtft(np.zeros(1))
        return (np.abs(d) ** 2).mean(axis=0) / float((np.abs(d0) ** 2).mean())

    def kernel_table(self, m: np.ndarray, g: np.ndarray) -> np.ndarray:
        """``kernel(m[None, :] - g[:, None])`` for integer offsets ``m`` and shifts ``g``.

        The transform's phase factors separate, ``exp(-i2pi (m - g) t / F) = exp(i2pi g t / F)
        exp(-i2pi m t / F)``: ``(G + M) n`` exponentials and one product, instead of ``G M n``.
        """
        if self.kind == "lag":
            return self.kernel(np.asarray(m)[None, :] - np.asarray(g)[:, None])
        h = self.tapers
        n = h.shape[-1]
        t = np.arange(n)
        f = self.pad * n
        a = np.exp(2j * np.pi * np.multiply.outer(np.asarray(g, dtype=np.float64), t) / f)  # (G, n)
        b = np.exp(-2j * np.pi * np.multiply.outer(t, np.asarray(m, dtype=np.float64)) / f)  # (n, M)
        d = np.stack([(a * hk) @ b for hk in h])  # (K, G, M)
        d0 = self.dtft(np.zeros(1))
        return (np.abs(d) ** 2).mean(axis=0) / float((np.abs(d0) ** 2).mean())

    def grid(self) -> tuple[np.ndarray, np.ndarray]:
        """The response on a 1/32-bin grid from 0 to ``min(nfft/2, 300)`` bins (zero-padded FFT)."""
        key = "grid"
        if key not in self._cache:
            over = 32
            if self.kind == "lag":
                w = self.lag_weights
                c = np.concatenate([[w[0]], 2 * w[1:]])
                size = over * self.nfft
                resp = scipy.fft.rfft(c, size).real / (w[0] + 2 * w[1:].sum())
            else:
                n = self.tapers.shape[-1]
                size = int(round(over * self.pad * n))
                p = np.abs(scipy.fft.rfft(self.tapers, size, axis=-1)) ** 2
                resp = p.mean(axis=0) / p.mean(axis=0)[0]
            x = np.arange(resp.size) / over
            keep = x <= min(300.0, self.nfft / 2)
            self._cache[key] = (x[keep], resp[keep])
        return self._cache[key]

    @property
    def scalloping_db(self) -> float:
        """Loss of a tone half a bin from a bin centre, dB (positive)."""
        return float(-10 * math.log10(self.kernel(np.array([0.5]))[0]))

    def envelope(self, d: np.ndarray) -> np.ndarray:
        """Upper envelope of the tone response at ``|d|`` output bins (leakage test of tones)."""
        key = "envelope"
        if key not in self._cache:
            x, k = self.grid()
            k = np.abs(k)
            # running maximum over +-1 bin: the tone may sit anywhere within a bin
            win = 32
            pad = np.concatenate([np.full(win, k[0]), k, np.full(win, k[-1])])
            view = np.lib.stride_tricks.sliding_window_view(pad, 2 * win + 1)
            env = view.max(axis=1)
            # monotone non-increasing from the main lobe outwards
            env = np.maximum.accumulate(env[::-1])[::-1]
            self._cache[key] = (x, env)
        x, env = self._cache[key]
        d = np.abs(np.asarray(d, dtype=np.float64))
        out = np.interp(d, x, env)
        far = d > x[-1]
        out[far] = env[-1] * (x[-1] / d[far]) ** 2
        return out

    def lobe_half_width(self) -> int:
        """Half width of the main lobe (output bins, rounded up): the response's first local minimum."""
        key = "lobe"
        if key not in self._cache:
            x, k = self.grid()
            k = np.abs(k)
            # past the -20 dB point (a flat top ripples), up to the next local minimum
            start = int(np.argmax(k < 0.01 * k[0])) if (k < 0.01 * k[0]).any() else k.size - 1
            rising = np.nonzero(np.diff(k[start:]) > 0)[0]
            edge = x[start + rising[0]] if rising.size else x[-1]
            self._cache[key] = max(1, int(math.ceil(edge - 1e-9)))
        return self._cache[key]

    def half_width(self) -> int:
        """Half width (output bins) of the fit region: where the response stays above -13 dB."""
        key = "half_width"
        if key not in self._cache:
            x, k = self.grid()
            below = np.nonzero(k < 0.05)[0]
            edge = x[below[0]] if below.size else 64.0
            self._cache[key] = max(1, int(math.floor(edge)))
        return self._cache[key]


def _truncate(gamma: np.ndarray) -> np.ndarray:
    r = gamma / gamma[0]
    mag = np.abs(r)
    total = mag[0] + 2 * mag[1:].sum()
    tail = 2 * np.cumsum(mag[::-1])[::-1]  # tail[d] = 2 sum_{d' >= d} |r|
    keep = np.nonzero(tail > TAIL * total)[0]
    last = int(keep[-1]) if keep.size else 0
    return np.ascontiguousarray(r[: last + 1])


def _welch_structure(window: Any, nperseg: int, step: int, nfft: int, nseg: int, label: str) -> Structure:
    n = min(nperseg, SHAPE_N)
    ratio = n / nperseg
    spec = _shape_spec(window, nperseg, n)
    h = np.asarray(get_window(spec, n), dtype=np.float64)
    h = h / np.sqrt(np.dot(h, h))
    pad = nfft / nperseg
    nfft_e = max(n, int(round(pad * n)))
    step_e = max(1, int(round(step * ratio)))
    lmax = min(nfft_e // 2, int(math.ceil(MAX_LAG_BINS * pad)))
    gamma = np.abs(scipy.fft.fft(h * h, nfft_e)[: lmax + 1]) ** 2
    terms = []
    m = 1
    while m * step_e < n and m < nseg:
        g = h[: n - m * step_e] * h[m * step_e:]
        c = np.abs(scipy.fft.fft(g, nfft_e)[: lmax + 1]) ** 2
        wgt = 1.0 - m / nseg
        gamma = gamma + 2 * wgt * c
        terms.append((m * step_e, float(g.sum()), wgt))
        m += 1
    return Structure(r=_truncate(gamma), kind="taper", nfft=nfft, pad=pad, tapers=h[None, :],
                     nu_struct=2.0, seg_terms=tuple(terms), label=label)


def _multitaper_structure(nw: float, k: int, nperseg: int, nfft: int) -> Structure:
    n = min(nperseg, SHAPE_N)
    h = np.atleast_2d(dpss(n, nw, Kmax=k, sym=True, norm=2))
    pad = nfft / nperseg
    nfft_e = max(n, int(round(pad * n)))
    lmax = min(nfft_e // 2, int(math.ceil((MAX_LAG_BINS + 2 * nw) * pad)))
    gamma = np.zeros(lmax + 1)
    c00 = 0.0
    for a in range(k):
        for b in range(a, k):
            c = scipy.fft.fft(h[a] * h[b], nfft_e)[: lmax + 1]
            mult = 1.0 if a == b else 2.0
            gamma += mult * np.abs(c) ** 2
            c00 += mult * abs(c[0]) ** 2
    gamma /= k * k
    nu_struct = 2.0 / (c00 / (k * k))
    return Structure(r=_truncate(gamma), kind="taper", nfft=nfft, pad=pad, tapers=h,
                     nu_struct=nu_struct, label=f"multitaper NW={nw:g} K={k}")


def _lag_structure(weights: np.ndarray, nfft: int, label: str) -> Structure:
    w = np.asarray(weights, dtype=np.float64)
    m = np.arange(1, w.size)
    lmax = min(nfft // 2, 4 * int(math.ceil(nfft / max(1, w.size - 1))) + MAX_LAG_BINS)
    d = np.arange(lmax + 1)
    gamma = w[0] ** 2 + 2 * np.cos(2 * np.pi * np.multiply.outer(d, m) / nfft) @ (w[1:] ** 2)
    return Structure(r=_truncate(gamma), kind="lag", nfft=nfft, pad=1.0, lag_weights=w, label=label)


@functools.lru_cache(maxsize=64)
def _cached(key: tuple) -> Structure:
    kind = key[0]
    if kind == "welch":
        return _welch_structure(*key[1:])
    if kind == "multitaper":
        return _multitaper_structure(*key[1:])
    return _lag_structure(np.array(key[1]), key[2], key[3])


def structure_of(spec: Any) -> Structure:
    """The :class:`Structure` of the estimator that produced ``spec``."""
    from ..estimators.spectral import Correlogram, Multitaper, Periodogram, Welch
    from ._results import MeasurementError

    est = spec.estimator
    info = spec.info
    if isinstance(est, (Welch, Periodogram)):
        nperseg = int(info["nperseg"])
        step = int(info.get("step", nperseg))
        label = f"{type(est).__name__} {info.get('window_label', est.window)}"
        return _cached(("welch", est.window, nperseg, step, int(info["nfft"]), int(spec.segments), label))
    if isinstance(est, Multitaper):
        return _cached(("multitaper", float(est.bandwidth), int(info.get("tapers", est.n_tapers)),
                        int(info["nperseg"]), int(info["nfft"])))
    if isinstance(est, Correlogram):
        w = tuple(float(v) for v in est.lag_weights())
        return _cached(("lag", w, int(info["nfft"]), f"Correlogram {est.lag_window}"))
    raise MeasurementError(
        f"Measurements need the spectral window of the estimator; {type(est).__name__} is not one of "
        "Welch, Periodogram, Multitaper or Correlogram. Estimate the spectrum with one of those."
    )
