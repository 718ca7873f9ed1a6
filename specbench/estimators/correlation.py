"""Auto- and cross-correlation estimators with white-noise and Bartlett bands.

References
----------
.. [1] M. S. Bartlett, "On the theoretical specification and sampling properties of
   autocorrelated time-series," J. R. Stat. Soc. Suppl. 8(1), 27-41, 1946.
.. [2] G. E. P. Box and G. M. Jenkins, *Time Series Analysis: Forecasting and Control*,
   Holden-Day, 1976: eq. (2.1.13) large-lag variance of r_k, eq. (11.1.7) variance of the
   cross-correlation of independent series (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
from scipy import stats

from .._errors import InputError
from ._base import Estimator
from ._channels import select_channels
from ._common import Timer, confidence_field, detrend_field, nonfinite_error, restore_shape, zero_variance_error
from ._cost import lag_cost
from ._engine import as_2d, expect_passes, lagged_products, trend_coefficients
from ._input import as_samples
from ._params import Boolean, Interval, Optional, Options, param
from ._results import Correlation, power_unit

__all__ = ["Autocorrelation", "CrossCorrelation", "detrended_copyless_products"]

#: default number of lags when ``max_lag`` is None
DEFAULT_LAGS = 2048


def detrended_copyless_products(x: np.ndarray, y: np.ndarray, m: int, detrend: str) -> np.ndarray:
    """Lagged products of ``x`` and ``y`` after removing each one's trend (no record copy)."""
    tx = trend_coefficients(x, detrend) if detrend != "none" else None
    ty = tx if y is x else (trend_coefficients(y, detrend) if detrend != "none" else None)
    return lagged_products(x, y, m, tx, ty)


def _max_lag_samples(owner: str, max_lag: float | None, fs: float, n: int) -> int:
    if max_lag is None:
        return min(n - 1, DEFAULT_LAGS)
    m = int(math.floor(max_lag * fs + 1e-9))
    if m < 1:
        raise InputError(
            f"The max_lag of {owner} is {max_lag:g} s, less than one sample at fs = {fs:g} Hz. "
            f"Choose max_lag >= {1 / fs:g} s.", field="max_lag", owner=owner,
        )
    if m > n - 1:
        raise InputError(
            f"The max_lag of {owner} is {max_lag:g} s ({m} samples), but the data has only "
            f"{n} samples ({n / fs:g} s). Choose max_lag <= {(n - 1) / fs:g} s.", field="max_lag", owner=owner,
        )
    return m


def _max_lag_field() -> Any:
    return param(
        None,
        Optional(Interval(float, 0, None, closed="neither"), f"the first {DEFAULT_LAGS} lags"),
        label="Maximum lag",
        unit="s",
        scale="log",
        group="correlation",
        help="Largest lag shown, in seconds.",
    )


def _band_field(help_text: str) -> Any:
    return param("white", Options(("white", "bartlett")), label="Band", group="correlation", help=help_text)


def _gaps_pairs_field(help_text: str) -> Any:
    """``gaps="error" | "pairs"`` of the correlation estimators (one data-strip control)."""
    return param("error", Options(("error", "pairs")), label="Gaps", group="data", help=help_text)


def _z(confidence: float) -> float:
    return float(stats.norm.ppf(0.5 + confidence / 2))


def _lag_cost(est: Any, n: int, c: int, products: int) -> dict:
    """Work model for :meth:`~Estimator.expected_seconds` (``products``: 4 for a cross pair)."""
    try:
        m = _max_lag_samples(type(est).__name__, est.max_lag, 1.0, n)
    except Exception:
        m = max(1, n // 10)
    return lag_cost(m, n, c, products)


@dataclass(frozen=True, kw_only=True, repr=False)
class Autocorrelation(Estimator):
    """Sample autocorrelation (or autocovariance) by blocked FFT, with a band.

    ``r_k = (1/N) sum_t x_t x_{t+k}`` of the detrended data (``unbiased=True`` divides by
    ``N - k``), normalised by ``r_0`` when ``normalize``.  Bands at the ``confidence``
    level:

    - ``band="white"``: where a white process's estimate stays, centred on zero:
      ``+- z sqrt(N - k) / N`` (``+- z / sqrt(N - k)`` unbiased), about ``+- z / sqrt(N)``
      (common practice; Box & Jenkins 1976).
    - ``band="bartlett"``: around the estimate, ``r_k +- z sqrt((1 + 2 sum_{j<k} r_j^2)/N)``
      (Bartlett 1946), as ``statsmodels.tsa.stattools.acf(alpha=...)`` computes it.

    Unnormalised estimates scale the band by ``r_0``.

    Gaps (``gaps="pairs"``, for NaN-filled gaps as ``sb.load(..., on_gap="fill")`` writes
    them): lag ``k`` sums the products of the ``P_k`` pairs whose two samples are both
    present, ``r_k = (S_k / P_k) (P_0 - k) / P_0`` (``S_k / P_k`` unbiased), the mean taken
    over the present samples (the amplitude-modulated-series estimator of Parzen 1963,
    "On spectral analysis with missing observations and amplitude modulation", Sankhya A
    25, from memory).  The bands use the pair counts in place of ``N - k``: white
    ``+- z (P_0 - k) / (P_0 sqrt(P_k))`` (``+- z / sqrt(P_k)`` unbiased), Bartlett's variance
    times ``(P_0 - k) / (P_0 P_k)`` instead of ``1 / N``; both reduce to the gap-free bands
    when nothing is missing, and their coverage is checked by Monte Carlo in the tests.

    Parameters
    ----------
    max_lag : float or None, default None
        Largest lag shown, in seconds.
        Allowed: None (the first 2048 lags) or a float in the range (0, inf).
    normalize : bool, default True
        Divide by the lag-0 value (correlation coefficient).
        Allowed: True or False.
    unbiased : bool, default False
        Divide lag k by N - k instead of N (noisier at long lags).
        Allowed: True or False.
    band : {'white', 'bartlett'}, default 'white'
        white: band of a white process; bartlett: Bartlett's interval around the estimate.
        Allowed: one of 'white', 'bartlett'.
    detrend : {'none', 'constant', 'linear'}, default 'constant'
        Removed from the record (each channel) first: nothing, its mean, or its least-squares line.
        Allowed: one of 'none', 'constant', 'linear'.
    confidence : float, default 0.95
        Probability that the band covers the true value at a given lag.
        Allowed: a float in the range (0, 1).
    gaps : {'error', 'pairs'}, default 'error'
        error: non-finite samples are an error; pairs: lag products over the pairs of samples both present,
        normalised by the pair count.
        Allowed: one of 'error', 'pairs'.
    """

    kind: ClassVar[str] = "Autocorrelation"
    title: ClassVar[str] = "Autocorrelation"

    max_lag: float | None = _max_lag_field()
    normalize: bool = param(True, Boolean(), label="Normalise", group="correlation",
                            help="Divide by the lag-0 value (correlation coefficient).")
    unbiased: bool = param(False, Boolean(), label="Unbiased", group="correlation",
                           help="Divide lag k by N - k instead of N (noisier at long lags).")
    band: str = _band_field("white: band of a white process; bartlett: Bartlett's interval around the estimate.")
    detrend: str = detrend_field()
    confidence: float = confidence_field()
    gaps: str = _gaps_pairs_field("error: non-finite samples are an error; pairs: lag products over the pairs "
                                  "of samples both present, normalised by the pair count.")

    def _cost(self, n: int, c: int, itemsize: int) -> dict:
        return _lag_cost(self, n, c, 1)

    def __call__(self, x: Any, fs: float | None = None) -> Correlation:
        """Estimate the autocorrelation of ``x`` (samples on the last axis)."""
        samples = as_samples(x, fs)
        if np.iscomplexobj(samples.data):
            raise InputError("Autocorrelation supports real data only; pass x.real and x.imag separately.")
        x2 = as_2d(samples.data)
        n = x2.shape[-1]
        m = _max_lag_samples("Autocorrelation", self.max_lag, samples.fs, n)
        k = np.arange(m + 1)
        pairs = None
        if self.gaps == "pairs" and _has_nonfinite(x2):
            with Timer() as t:
                s, pairs = _present_pair_autocovariances(x2, m, self.detrend, "Autocorrelation")
            p0 = pairs[:, :1]
            r = s / pairs if self.unbiased else s / pairs * (p0 - k) / p0
        else:
            with Timer() as t:
                s = detrended_copyless_products(x2, x2, m, self.detrend)
            if not np.all(np.isfinite(s)):
                raise nonfinite_error(x2, "Autocorrelation")
            r = s / (n - k) if self.unbiased else s / n
        r0 = r[:, :1].copy()
        err = zero_variance_error(x2, r0, "Autocorrelation", samples.channels)
        if err is not None:
            raise err
        rho = r / np.where(r0 > 0, r0, 1.0)
        value = rho if self.normalize else r
        scale = np.ones_like(r0) if self.normalize else r0
        z = _z(self.confidence)
        if pairs is None:
            white_sd = (1 / np.sqrt(n - k) if self.unbiased else np.sqrt(n - k) / n)[None, :]
            per_lag = np.full_like(rho, 1 / n)
        else:  # the pair counts take the place of N - k (see the class docstring)
            white_sd = 1 / np.sqrt(pairs) if self.unbiased else (p0 - k) / (p0 * np.sqrt(pairs))
            per_lag = (p0 - k) / (p0 * pairs)
        if self.band == "white":
            half = z * white_sd * scale
            lower, upper = -half, half.copy()
        else:
            var = per_lag.copy()
            var[:, 0] = 0
            if m >= 2:
                var[:, 2:] *= 1 + 2 * np.cumsum(rho[:, 1:-1] ** 2, axis=-1)
            half = z * np.sqrt(var) * scale
            lower, upper = value - half, value + half
        lower[:, 0] = upper[:, 0] = value[:, 0]
        lead = samples.data.shape[:-1]
        unit = samples.unit
        out_unit = "" if self.normalize else (
            tuple(power_unit(u) for u in unit) if isinstance(unit, tuple) else power_unit(unit)
        )
        return Correlation(
            lag=k / samples.fs,
            value=restore_shape(value, lead),
            lower=restore_shape(lower, lead),
            upper=restore_shape(upper, lead),
            fs=samples.fs,
            n=n if pairs is None else int(pairs[:, 0].min()),
            estimator=self,
            channels=samples.channels,
            unit=out_unit,
            kind="auto",
            band=self.band,
            confidence=self.confidence,
            info=dict(max_lag_samples=m, compute_seconds=t.seconds,
                      variance=restore_shape(r0, lead)[..., 0],
                      pairs=None if pairs is None else restore_shape(pairs, lead)),
        )


@dataclass(frozen=True, kw_only=True, repr=False)
class CrossCorrelation(Estimator):
    """Sample cross-correlation of two channels, ``r_xy(k) = (1/N) sum_t x_t y_{t+k}``.

    A positive lag means ``y`` lags ``x``: a peak at ``+d`` seconds says ``y`` is ``x``
    delayed by ``d`` (``.peak_lag()``).  Normalised by ``sqrt(r_xx(0) r_yy(0))``.  Bands,
    centred on zero (the hypothesis of independent series):

    - ``"white"``: ``+- z / sqrt(N)``, valid when at least one series is white;
    - ``"bartlett"``: ``+- z sqrt(sum_j rho_xx(j) rho_yy(j) / N)`` over ``|j| <= max_lag``
      (Bartlett 1955; Box & Jenkins 1976 eq. (11.1.7), from memory), for two
      autocorrelated but independent series.

    Parameters
    ----------
    max_lag : float or None, default None
        Largest lag shown, in seconds.
        Allowed: None (the first 2048 lags) or a float in the range (0, inf).
    normalize : bool, default True
        Divide by sqrt(r_xx(0) r_yy(0)) (correlation coefficient).
        Allowed: True or False.
    band : {'white', 'bartlett'}, default 'white'
        white: for a white series; bartlett: for two autocorrelated series.
        Allowed: one of 'white', 'bartlett'.
    detrend : {'none', 'constant', 'linear'}, default 'constant'
        Removed from the record (each channel) first: nothing, its mean, or its least-squares line.
        Allowed: one of 'none', 'constant', 'linear'.
    confidence : float, default 0.95
        Probability that the band covers the true value at a given lag.
        Allowed: a float in the range (0, 1).
    gaps : {'error', 'pairs'}, default 'error'
        error: non-finite samples are an error; pairs: lag products over the samples present in both channels.
        Allowed: one of 'error', 'pairs'.
    """

    kind: ClassVar[str] = "CrossCorrelation"
    title: ClassVar[str] = "Cross-correlation"

    max_lag: float | None = _max_lag_field()
    normalize: bool = param(True, Boolean(), label="Normalise", group="correlation",
                            help="Divide by sqrt(r_xx(0) r_yy(0)) (correlation coefficient).")
    band: str = _band_field("white: for a white series; bartlett: for two autocorrelated series.")
    detrend: str = detrend_field()
    confidence: float = confidence_field()
    gaps: str = _gaps_pairs_field("error: non-finite samples are an error; pairs: lag products over the "
                                  "samples present in both channels.")

    def _cost(self, n: int, c: int, itemsize: int) -> dict:
        return _lag_cost(self, n, c, 4)

    def __call__(self, x: Any, y: Any = None, *, fs: float | None = None,
                 pair: tuple[int | str, int | str] | None = None) -> Correlation:
        """Cross-correlate ``x`` and ``y``, or two channels of ``x`` chosen by ``pair``."""
        ch = select_channels("CrossCorrelation", x, y, fs, pair, allow_matrix=False)
        a, b = ch.data[0][None, :], ch.data[1][None, :]
        names, units = ch.names, ch.units
        if np.iscomplexobj(a) or np.iscomplexobj(b):
            raise InputError("CrossCorrelation supports real data only.")
        n = a.shape[-1]
        m = _max_lag_samples("CrossCorrelation", self.max_lag, ch.fs, n)
        pairs = None
        if self.gaps == "pairs" and (_has_nonfinite(a) or _has_nonfinite(b)):
            with Timer() as t:
                s, raa, rbb, pairs = _present_pair_correlations(a[0], b[0], m, self.detrend)
            n = int(pairs[m])  # pairs present at lag 0
            need_auto = True
        else:
            expect_passes(4 if self.normalize or self.band == "bartlett" else 2)
            with Timer() as t:
                pos = detrended_copyless_products(a, b, m, self.detrend)[0]
                neg = detrended_copyless_products(b, a, m, self.detrend)[0]
                need_auto = True  # the autocorrelations also serve Correlation.delay()
                if need_auto:
                    raa = detrended_copyless_products(a, a, m, self.detrend)[0] / n
                    rbb = detrended_copyless_products(b, b, m, self.detrend)[0] / n
            s = np.concatenate([neg[:0:-1], pos]) / n
        if not np.all(np.isfinite(s)):
            raise nonfinite_error(np.vstack([a, b]), "CrossCorrelation")
        for r_own, name in ((raa, names[0]), (rbb, names[1])):
            err = zero_variance_error(a, r_own[:1], "CrossCorrelation", (name,))
            if err is not None:
                raise err
        norm = math.sqrt(raa[0] * rbb[0]) if need_auto and raa[0] * rbb[0] > 0 else 1.0
        value = s / norm if self.normalize else s
        scale = 1.0 if self.normalize else norm
        z = _z(self.confidence)
        if self.band == "white":
            sd = 1 / math.sqrt(n)
        else:
            pa, pb = raa / raa[0], rbb / rbb[0]
            sd = math.sqrt((1 + 2 * float(np.dot(pa[1:], pb[1:]))) / n)
        half = np.full_like(value, z * sd * scale)
        unit = "" if self.normalize else (
            f"{units[0]}*{units[1]}" if units[0] != units[1] else power_unit(units[0])
        )
        return Correlation(
            lag=np.arange(-m, m + 1) / ch.fs,
            value=value,
            lower=-half,
            upper=half,
            fs=ch.fs,
            n=n,
            estimator=self,
            channels=names,
            unit=unit,
            kind="cross",
            band=self.band,
            confidence=self.confidence,
            info=dict(max_lag_samples=m, compute_seconds=t.seconds, auto=(raa, rbb), norm=norm,
                      pairs=pairs),
        )


def _has_nonfinite(x: np.ndarray) -> bool:
    """Whether ``x`` holds a NaN or inf, scanned in chunks (no full-size mask)."""
    if x.dtype.kind not in "fc":
        return False
    chunk = 1 << 16
    return any(not np.all(np.isfinite(x[..., t0 : t0 + chunk])) for t0 in range(0, x.shape[-1], chunk))


def _present_pair_correlations(a: np.ndarray, b: np.ndarray, m: int, detrend: str):
    """Cross- and autocovariances over the samples present in both factors (gaps as NaN).

    The mean of each channel's present samples is removed (``detrend="constant"``); the lag
    sums and the present-pair counts ``P_k`` come from one blocked FFT pass
    (:func:`~specbench.estimators._cross_engine.lag_products_matrix`).  Lag ``k`` is
    ``S_k / P_k * (P_0 - |k|) / P_0``: without gaps ``S_k / N``, the estimator's usual
    (biased) divisor.  Returns ``(r_ab over -m..m, r_aa, r_bb over 0..m, pairs over -m..m)``.
    """
    from ._cross_engine import lag_products_matrix

    mu = _present_means((a, b), detrend, "CrossCorrelation")
    sums, pairs = lag_products_matrix([a, b], m, center=mu, gaps=True)
    k = np.arange(m + 1)
    if np.any(pairs[0, 1] < 1) or np.any(pairs[1, 0] < 1):
        raise InputError(
            f"Some lags up to {m} samples have no pair of present samples (the gaps are too long); "
            "choose a smaller max_lag or a span with fewer gaps."
        )

    def lagged(i: int, j: int) -> np.ndarray:
        p0 = pairs[i, j, 0]
        return sums[i, j] / pairs[i, j] * np.maximum(p0 - k, 1) / p0

    r = np.concatenate([lagged(1, 0)[:0:-1], lagged(0, 1)])
    counts = np.concatenate([pairs[1, 0][:0:-1], pairs[0, 1]])
    return r, lagged(0, 0), lagged(1, 1), counts


def _present_means(channels, detrend: str, owner: str) -> np.ndarray:
    """Mean of each channel's present (finite) samples for ``detrend="constant"`` (zeros for
    ``"none"``), read in chunks; a least-squares line through gaps is refused."""
    if detrend == "linear":
        raise InputError(
            f"{owner}(gaps='pairs') removes the mean of the present samples; a least-squares "
            "line through gaps is not supported. Use detrend='constant' or 'none'.", field="detrend",
            owner=owner,
        )
    mu = np.zeros(len(channels))
    if detrend == "constant":
        for i, ch in enumerate(channels):
            tot, cnt = 0.0, 0
            for t0 in range(0, ch.shape[-1], 1 << 16):
                seg = np.asarray(ch[t0 : t0 + (1 << 16)], dtype=np.float64)
                ok = np.isfinite(seg)
                tot += float(seg[ok].sum())
                cnt += int(ok.sum())
            if cnt == 0:
                raise InputError(f"A channel has no finite sample; {owner} has nothing to correlate.")
            mu[i] = tot / cnt
    return mu


def _present_pair_autocovariances(x2: np.ndarray, m: int, detrend: str, owner: str):
    """Lag sums ``S_k`` over present pairs and their counts ``P_k`` (``k = 0..m``), per channel
    of ``x2`` (gaps as NaN), from the blocked FFT pass of the cross engine."""
    from ._cross_engine import lag_products_matrix

    sums = np.empty((x2.shape[0], m + 1))
    pairs = np.empty((x2.shape[0], m + 1))
    for c in range(x2.shape[0]):
        ch = x2[c]
        mu = _present_means((ch,), detrend, owner)
        s, p = lag_products_matrix([ch], m, center=mu, gaps=True)
        sums[c], pairs[c] = s[0, 0], p[0, 0]
    if np.any(pairs < 1):
        raise InputError(
            f"Some lags up to {m} samples have no pair of present samples (the gaps are too long); "
            "choose a smaller max_lag or a span with fewer gaps.", field="max_lag", owner=owner,
        )
    return sums, pairs
