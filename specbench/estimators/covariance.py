"""The channel covariance matrix (a Kalman filter's measurement-noise matrix R) with
confidence intervals that account for autocorrelation in the channels.

References
----------
.. [B46] M. S. Bartlett, "On the theoretical specification and sampling properties of
   autocorrelated time-series," J. R. Stat. Soc. Suppl. 8(1), 27-41, 1946: for Gaussian
   series, ``N var(c_xy) -> sum_k [g_xx(k) g_yy(k) + g_xy(k) g_yx(k)]`` (memory).
.. [BH] G. V. Bayley and J. M. Hammersley, "The 'effective' number of independent
   observations in an autocorrelated time series," J. R. Stat. Soc. Suppl. 8(2), 184-197,
   1946 (memory).
.. [PP] B. J. Pyper and R. M. Peterman, "Comparison of methods to account for
   autocorrelation in correlation analyses of fish data," Can. J. Fish. Aquat. Sci. 55,
   2127-2140, 1998: ``1/N_eff = 1/N + (2/N) sum_k rho_xx(k) rho_yy(k)`` for a correlation
   coefficient (memory).
.. [G92] C. J. Geyer, "Practical Markov chain Monte Carlo," Statistical Science 7(4),
   473-483, 1992: the initial monotone sequence estimator of a sum of autocovariances.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
from scipy import stats

from .._errors import InputError
from ._base import Estimator
from ._common import Timer, confidence_field, nonfinite_error
from ._cross_engine import lag_products_matrix
from ._engine import as_2d, chunk_spans, map_spans, read_span
from ._input import as_samples
from ._params import Interval, Optional, Options, param
from ._results import power_unit

__all__ = ["Covariance", "CovarianceMatrix", "long_run_sum"]


def long_run_sum(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``sum_{k=-inf}^{inf} a_k`` for even sequences ``a[..., k]`` (k >= 0), per row.

    Geyer's (1992) initial monotone sequence estimator: pair sums ``G_m = a_2m + a_2m+1``
    are kept while positive and made non-increasing; the sum is ``-a_0 + 2 sum_m G_m``.
    Returns the sums and the number of lags used.  Exact for white series (``a_0``).
    """
    a = np.asarray(a, dtype=np.float64)
    lead = a.shape[:-1]
    flat = a.reshape(-1, a.shape[-1])
    out = np.empty(flat.shape[0])
    used = np.empty(flat.shape[0], dtype=np.int64)
    npair = flat.shape[-1] // 2
    for r, row in enumerate(flat):
        g = row[: 2 * npair].reshape(npair, 2).sum(axis=1)
        stop = np.nonzero(g <= 0)[0]
        keep = int(stop[0]) if stop.size else npair
        keep = max(keep, 1)
        gm = np.minimum.accumulate(g[:keep])
        out[r] = max(-row[0] + 2.0 * gm.sum(), row[0] * 1e-12)
        used[r] = 2 * keep
    return out.reshape(lead), used.reshape(lead)


@dataclass(frozen=True)
class CovarianceMatrix:
    """Channel covariance (``matrix``, equal to ``numpy.cov``) and correlation with bands.

    Attributes
    ----------
    matrix, lower, upper : (C, C) covariance and its interval, in ``unit^2``.  Off the
        diagonal: ``c +- z sqrt(V / N)`` with ``V = sum_k [g_ii(k) g_jj(k) + g_ij(k) g_ji(k)]``
        (Bartlett 1946); on the diagonal a scaled chi-square interval with ``N_eff - 1``
        degrees of freedom.
    correlation, correlation_lower, correlation_upper : (C, C) correlation coefficients;
        Fisher-z interval ``tanh(atanh r +- z / sqrt(N_r - 3))`` with
        ``N_r = N / sum_k rho_ii(k) rho_jj(k)`` (Bayley & Hammersley 1946; Pyper & Peterman 1998)
    effective_samples : (C, C) ``N_eff = N (g_ii(0) g_jj(0) + g_ij(0)^2) / V``: the number
        of independent samples that would give the same variance of the covariance
    correlation_effective_samples : (C, C) ``N_r``
    samples : (C, C) samples (pairs present) behind each entry
    """

    matrix: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    correlation: np.ndarray
    correlation_lower: np.ndarray
    correlation_upper: np.ndarray
    effective_samples: np.ndarray
    correlation_effective_samples: np.ndarray
    samples: np.ndarray
    mean: np.ndarray
    fs: float
    channels: tuple
    unit: Any
    confidence: float
    estimator: Any
    info: dict = field(default_factory=dict)

    @property
    def value(self) -> np.ndarray:
        return self.matrix

    @property
    def std(self) -> np.ndarray:
        """Standard deviation of each channel (square root of the diagonal)."""
        return np.sqrt(np.diag(self.matrix))

    def to_dataframe(self):
        import pandas as pd

        return pd.DataFrame(self.matrix, index=list(self.channels), columns=list(self.channels))

    def __repr__(self) -> str:
        rows = []
        for i, name in enumerate(self.channels):
            cells = "  ".join(f"{self.matrix[i, j]: .4g} [{self.lower[i, j]:.3g}, {self.upper[i, j]:.3g}]"
                              for j in range(len(self.channels)))
            rows.append(f"  {name}: {cells}")
        neff = np.diag(self.effective_samples)
        return (f"<CovarianceMatrix {len(self.channels)} channels, {self.confidence * 100:g} % intervals, "
                f"N = {int(np.max(self.samples))}, effective {', '.join(f'{v:.0f}' for v in neff)}\n"
                + "\n".join(rows) + ">")


@dataclass(frozen=True, kw_only=True, repr=False)
class Covariance(Estimator):
    """Channel covariance and correlation matrix with autocorrelation-aware intervals.

    ``matrix`` equals ``numpy.cov(data)`` (``ddof=1``).  The variance of each entry
    follows Bartlett's (1946) large-sample formula for Gaussian series,
    ``N var(c_ij) = sum_k [g_ii(k) g_jj(k) + g_ij(k) g_ji(k)]``, the sum of the
    autocovariances of the product series ``(x_i - m_i)(x_j - m_j)``; it is estimated
    from the sample auto- and cross-covariances with Geyer's (1992) initial monotone
    sequence rule (which decides how many lags to sum), and reported as an effective
    number of samples.  For white channels ``N_eff = N`` and the intervals are the usual
    ones; for strongly autocorrelated channels ``N_eff`` is far smaller and intervals
    that ignore it cover far less than their nominal level.

    ``gaps="pairs"``: non-finite samples are missing; each entry uses the samples where
    both channels are present (as ``pandas.DataFrame.cov`` does, pairwise complete), and
    the lag sums use the present pairs.

    Parameters
    ----------
    max_lag : float or None, default None
        Lags of the auto- and cross-covariances summed for the effective sample count.
        Allowed: None (chosen from the data (Geyer 1992)) or a float in the range (0, inf).
    confidence : float, default 0.95
        Probability that each interval covers the true covariance.
        Allowed: a float in the range (0, 1).
    gaps : {'error', 'pairs'}, default 'error'
        error: non-finite samples are an error; pairs: use the samples present in both channels.
        Allowed: one of 'error', 'pairs'.
    """

    kind: ClassVar[str] = "Covariance"
    title: ClassVar[str] = "Covariance matrix"

    max_lag: float | None = param(
        None,
        Optional(Interval(float, 0, None, closed="neither"), "chosen from the data (Geyer 1992)"),
        label="Largest lag summed",
        unit="s",
        scale="log",
        group="band",
        help="Lags of the auto- and cross-covariances summed for the effective sample count.",
    )
    confidence: float = confidence_field()
    gaps: str = param(
        "error",
        Options(("error", "pairs")),
        label="Gaps",
        group="data",
        help="error: non-finite samples are an error; pairs: use the samples present in both channels.",
    )

    def __call__(self, x: Any, fs: float | None = None) -> CovarianceMatrix:
        """Covariance matrix of the channels of ``x`` (samples on the last axis)."""
        s = as_samples(x, fs, min_samples=4)
        if np.iscomplexobj(s.data):
            raise InputError("Covariance supports real data only; pass the real and imaginary parts as channels.")
        data = as_2d(s.data)
        c, n = data.shape
        names = s.channels or tuple(str(i) for i in range(c))
        gaps = self.gaps == "pairs"
        with Timer() as t:
            shift, sxy, sx, cnt = _pair_sums(data, gaps)
            if not gaps and not np.all(np.isfinite(sxy)):
                raise nonfinite_error(data, "Covariance")
            with np.errstate(invalid="ignore", divide="ignore"):
                mean_ij = sx / cnt  # mean of channel i over the samples where j is present
                cov = (sxy - sx * sx.T / cnt) / (cnt - 1)
            if np.any(cnt < 4):
                i, j = np.argwhere(cnt < 4)[0]
                raise InputError(
                    f"Channels {names[i]!r} and {names[j]!r} are both present in only {int(cnt[i, j])} "
                    "samples; a covariance needs at least 4. Choose a span with fewer gaps."
                )
            mean = np.diag(mean_ij) + shift
            if self.max_lag is None:
                m = int(min(n - 1, 1024))
            else:
                m = int(min(n - 1, max(1, math.floor(self.max_lag * s.fs))))
            while True:
                sums, pairs = lag_products_matrix(data, m, center=mean, gaps=gaps)
                with np.errstate(invalid="ignore", divide="ignore"):
                    g = np.nan_to_num(sums / pairs)  # g[i, j, k] = cov(x_i[t], x_j[t + k])
                diag = g[np.arange(c), np.arange(c)]  # (C, m+1)
                prod_auto = diag[:, None, :] * diag[None, :, :]
                cross = g * np.swapaxes(g, 0, 1)  # g_ij(k) g_ji(k)
                a = prod_auto + cross
                rho = diag / diag[:, :1]
                rho_prod = rho[:, None, :] * rho[None, :, :]
                if self.max_lag is not None:
                    v = a[..., 0] + 2 * a[..., 1:].sum(axis=-1)
                    vr = 1 + 2 * rho_prod[..., 1:].sum(axis=-1)
                    used = np.full((c, c), m)
                    break
                v, used = long_run_sum(a)
                vr, _ = long_run_sum(rho_prod)
                if used.max() < m - 2 or m >= n - 1:
                    break
                m = int(min(n - 1, 4 * m))
        z = float(stats.norm.ppf(0.5 + self.confidence / 2))
        npair = cnt
        a0 = np.outer(np.diag(cov), np.diag(cov)) + cov**2
        with np.errstate(invalid="ignore", divide="ignore"):
            neff = np.clip(npair * a0 / v, 1.0, None)
            nr = np.clip(npair / vr, 1.0, None)
        sd = np.sqrt(v / npair)
        lower, upper = cov - z * sd, cov + z * sd
        nu = np.maximum(np.diag(neff) - 1.0, 1.0)
        alpha = 1 - self.confidence
        dvar = np.diag(cov)
        di = np.arange(c)
        lower[di, di] = nu * dvar / stats.chi2.ppf(1 - alpha / 2, nu)
        upper[di, di] = nu * dvar / stats.chi2.ppf(alpha / 2, nu)
        with np.errstate(invalid="ignore", divide="ignore"):
            corr = cov / np.sqrt(np.outer(dvar, dvar))
            corr[di, di] = 1.0
            zr = np.arctanh(np.clip(corr, -1 + 1e-15, 1 - 1e-15))
            hw = z / np.sqrt(np.maximum(nr - 3.0, 1.0))
            clo, chi = np.tanh(zr - hw), np.tanh(zr + hw)
        clo[di, di] = chi[di, di] = 1.0
        unit = s.unit
        out_unit = tuple(power_unit(u) for u in unit) if isinstance(unit, tuple) else power_unit(unit)
        return CovarianceMatrix(
            matrix=cov, lower=lower, upper=upper, correlation=corr, correlation_lower=clo,
            correlation_upper=chi, effective_samples=neff, correlation_effective_samples=nr,
            samples=npair.astype(np.int64), mean=mean, fs=s.fs, channels=tuple(names), unit=out_unit,
            confidence=self.confidence, estimator=self,
            info=dict(lags_summed=used, max_lag_samples=m, compute_seconds=t.seconds,
                      bartlett_sum=v),
        )


def _pair_sums(data: np.ndarray, gaps: bool):
    """Shifted sums over samples present in both channels, in chunks (no record copy).

    Returns ``shift (C,)``, ``sxy[i, j] = sum d_i d_j``, ``sx[i, j] = sum d_i`` over the
    samples where ``j`` is present, ``cnt[i, j]`` (``d = x - shift``).
    """
    c, n = data.shape
    head = np.asarray(read_span(data, 0, min(n, 4096)), dtype=np.float64)
    shift = np.nanmean(np.where(np.isfinite(head), head, np.nan), axis=1) if gaps else head.mean(axis=1)
    shift = np.nan_to_num(shift)
    sxy = np.zeros((c, c))
    sx = np.zeros((c, c))
    cnt = np.zeros((c, c))
    # chunks read through the engines' block interface (dask: on the workers), added in order
    for psx, pcnt, psxy in map_spans(_pair_block, data, chunk_spans(n, 1 << 16), None, (shift, gaps),
                                     report_blocks=False):
        sx += psx
        cnt += pcnt
        sxy += psxy
    return shift, sxy, sx, cnt


def _pair_block(span: np.ndarray, shift: np.ndarray, gaps: bool):
    """Kernel of :func:`_pair_sums` for one chunk."""
    d = np.asarray(span, dtype=np.float64) - shift[:, None]
    if gaps:
        ok = np.isfinite(d)
        d[~ok] = 0.0
        okf = ok.astype(np.float64)
        psx = d @ okf.T
        pcnt = okf @ okf.T
    else:
        psx = d.sum(axis=1)[:, None]
        pcnt = float(d.shape[1])
    return psx, pcnt, d @ d.T
