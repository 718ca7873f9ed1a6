"""Allan deviation of rate data with equivalent-degrees-of-freedom confidence intervals.

Definitions (rate samples ``y_k`` at interval ``tau0 = 1/fs``, cluster size ``m``,
averaging time ``tau = m tau0``; ``C_k = sum_{j<k} y_j`` so that the cluster average is
``(C_{i+m} - C_i) / m``)::

    avar(tau) = 1 / (2 M) sum_i ((C_{i+2m} - 2 C_{i+m} + C_i) / m)^2

overlapping: ``i = 0, 1, ..., P-2m-1`` (``P = N + 1`` points ``C``), ``M = P - 2m``;
non-overlapping: ``i = 0, m, 2m, ...``.  This is the Allan variance of IEEE Std 952-1997
Annex C and of Riley, "Handbook of Frequency Stability Analysis", NIST Special Publication
1065, 2008, eq. (6)/(12) with the rate in place of the fractional frequency (memory).

Confidence intervals: chi-square with ``edf`` equivalent degrees of freedom,
``[avar edf / chi2_{(1+p)/2}(edf), avar edf / chi2_{(1-p)/2}(edf)]`` (Riley 2008, §5.3).
The ``edf`` of the overlapping estimate follows the simple formulas of Howe, Allan & Barnes
(1981), reproduced in Riley 2008 §5.2 Table 5 (memory), for the power-law noise type
identified at each averaging time from the local slope of the estimate (or the type given
in ``noise``).  For the non-overlapping estimate the ``edf`` is that of a Gaussian quadratic
form, ``M^2 / (M + 2 sum_k (M-k) rho_k^2)``, with ``rho_k`` the correlation of successive
differences of cluster averages for the noise type, computed from its spectrum (Greenhall &
Riley 2003, "Uncertainty of stability variances based on finite differences", the same
principle; memory).
"""

from __future__ import annotations

import functools
import math
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
from scipy import integrate, stats

from .._errors import InputError
from ..estimators._base import Estimator
from ..estimators._engine import _TRACKER, as_2d, check_lazy, is_lazy, read_span
from ..estimators._input import as_samples
from ..estimators._params import Boolean, Interval, Options, param

__all__ = ["AllanDeviation", "AllanResult", "TauGrid", "NOISE_TYPES", "edf_overlapping", "edf_nonoverlapping"]

#: noise type name -> power-law exponent alpha of the rate spectrum S_y(f) ~ f^alpha
#: (rate data: quantization ~ white phase, white rate = angle random walk, bias
#: instability = flicker rate, rate random walk = random-walk rate)
NOISE_TYPES = {"quantization": 2, "white": 0, "bias_instability": -1, "random_walk": -2}
_ALPHA_NAME = {v: k for k, v in NOISE_TYPES.items()}

#: rate samples per block of the streamed engine (float64 scratch: 512 KiB per block)
BLOCK = 1 << 16


class TauGrid(Options):
    """Averaging times: ``"octave"`` (cluster sizes 1, 2, 4, ...), ``"decade"`` (1, 2, 5,
    10, 20, 50, ...) or a tuple of averaging times in seconds (mapped to the nearest whole
    cluster size at the data's rate)."""

    def doc_type(self) -> str:
        return "{" + ", ".join(repr(v) for v in self.values) + "} or tuple of float"

    def check(self, value: Any) -> Any:
        if isinstance(value, str):
            return super().check(value)
        if isinstance(value, (list, tuple)) and value:
            out = []
            for v in value:
                if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
                    raise ValueError
                v = float(v)
                if not math.isfinite(v) or v <= 0:
                    raise ValueError
                out.append(v)
            if sorted(out) != out or len(set(out)) != len(out):
                raise ValueError
            return tuple(out)
        raise ValueError

    def describe(self) -> str:
        return (super().describe() + ", or a tuple of increasing, distinct averaging times in seconds "
                "(> 0)")

    def invalid_values(self) -> list[Any]:
        return super().invalid_values() + [(), (-1.0,), (2.0, 1.0), ("a",), (1.0, float("nan"))]


# ------------------------------------------------------------------------------ edf
def edf_overlapping(alpha: int, n_points: float, m: int) -> float:
    """Equivalent dof of the overlapping Allan variance: Howe, Allan & Barnes (1981),
    as in Riley, NIST SP 1065 (2008) §5.2 Table 5 (memory).  ``n_points`` phase points."""
    n, m = float(n_points), float(m)
    if alpha == 2:
        edf = (n + 1) * (n - 2 * m) / (2 * (n - m))
    elif alpha == 1:
        edf = math.exp(math.sqrt(max(math.log((n - 1) / (2 * m)), 0.0) * math.log((2 * m + 1) * (n - 1) / 4)))
    elif alpha == 0:
        edf = (3 * (n - 1) / (2 * m) - 2 * (n - 2) / n) * 4 * m * m / (4 * m * m + 5)
    elif alpha == -1:
        edf = 2 * (n - 2) ** 2 / (2.3 * n - 4.9) if m == 1 else 5 * n * n / (4 * m * (n + 3 * m))
    elif alpha == -2:
        edf = (n - 2) / m * ((n - 1) ** 2 - 3 * m * (n - 1) + 4 * m * m) / (n - 3) ** 2
    else:  # pragma: no cover - guarded by NOISE_TYPES
        raise ValueError(alpha)
    return float(edf)


@functools.cache
def _difference_correlations(alpha: int, kmax: int = 40) -> tuple[float, ...]:
    """Correlation rho_k of the differences of successive non-overlapping cluster averages,
    lag k clusters, for rate noise S(f) ~ f^alpha (continuous-time limit), from
    ``int S(f) |H(f)|^2 cos(2 pi f k tau) df`` with ``|H|^2 ~ sin^4(pi f tau) / (pi f tau)^2``."""
    if alpha == 2:  # white phase: second differences of white points, exact
        return (-2.0 / 3.0, 1.0 / 6.0)

    def g(u: float) -> float:
        s = math.sin(u)
        return s**4 / u**2 * u**alpha if u > 0 else 0.0

    def cov(k: int) -> float:
        total = 0.0
        # integrate over [0, 60 pi] piecewise (oscillatory), then the tail is negligible
        edges = np.linspace(0.0, 60 * math.pi, 121)
        for a, b in zip(edges[:-1], edges[1:]):
            if k == 0:
                total += integrate.quad(g, a, b, limit=200)[0]
            else:
                total += integrate.quad(g, a, b, weight="cos", wvar=2.0 * k, limit=200)[0]
        return total

    c0 = cov(0)
    out = []
    for k in range(1, kmax + 1):
        r = cov(k) / c0
        if alpha != -1 and abs(r) < 1e-6:
            break
        out.append(r)
    return tuple(out)


def edf_nonoverlapping(alpha: int, m_terms: int) -> float:
    """Equivalent dof of a non-overlapping Allan variance from ``m_terms`` differences:
    the Gaussian quadratic form ``M^2 / (M + 2 sum_k (M - k) rho_k^2)``."""
    rho = np.asarray(_difference_correlations(alpha))
    m = int(m_terms)
    k = np.arange(1, min(len(rho), m - 1) + 1)
    denom = m + 2.0 * float(np.sum((m - k) * rho[: k.size] ** 2))
    return m * m / denom


# ------------------------------------------------------------------------------ result
@dataclass(frozen=True)
class AllanResult:
    """Allan deviation per averaging time, with its confidence interval.

    Attributes
    ----------
    tau : (T,) averaging times in s (cluster size / fs)
    value, lower, upper : (T,) or (C, T) deviation and its interval, in the rate unit
    dof : equivalent degrees of freedom of each variance estimate
    clusters : number of differences (terms) averaged for each tau
    noise : noise type used for the dof at each tau ("white", "bias_instability", ...)
    m : cluster sizes (samples)
    """

    tau: np.ndarray
    value: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    dof: np.ndarray
    clusters: np.ndarray
    noise: np.ndarray
    m: np.ndarray
    fs: float
    n: int
    unit: Any
    channels: tuple | None
    confidence: float
    estimator: Any
    info: dict = field(default_factory=dict)

    @property
    def variance(self) -> np.ndarray:
        """Allan variance (the square of :attr:`value`)."""
        return self.value**2

    @property
    def n_clusters(self) -> np.ndarray:
        return self.clusters

    def channel(self, i: int | str = 0) -> AllanResult:
        """The result of one channel (by index or name)."""
        if self.value.ndim == 1:
            return self
        if isinstance(i, str):
            if not self.channels or i not in self.channels:
                raise InputError(f"No channel {i!r}; the channels are {self.channels}.")
            i = self.channels.index(i)
        pick = {k: getattr(self, k)[i] for k in ("value", "lower", "upper", "dof", "clusters", "noise")}
        ch = (self.channels[i],) if self.channels else None
        return AllanResult(tau=self.tau, m=self.m, fs=self.fs, n=self.n, unit=self.unit, channels=ch,
                           confidence=self.confidence, estimator=self.estimator, info=self.info, **pick)

    def table(self) -> str:
        """The deviation table as text (one channel)."""
        r = self.channel(0)
        lines = [f"{'tau_s':>12} {'adev':>12} {'lower':>12} {'upper':>12} {'dof':>10} {'clusters':>10}  noise"]
        for k in range(r.tau.size):
            lines.append(f"{r.tau[k]:12.6g} {r.value[k]:12.6g} {r.lower[k]:12.6g} {r.upper[k]:12.6g} "
                         f"{r.dof[k]:10.4g} {int(r.clusters[k]):10d}  {r.noise[k]}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        kind = "overlapping" if self.estimator.overlapping else "non-overlapping"
        nch = 1 if self.value.ndim == 1 else self.value.shape[0]
        return (f"<AllanResult {kind} Allan deviation of rate data, {self.tau.size} averaging times "
                f"{self.tau[0]:.4g} .. {self.tau[-1]:.4g} s, {nch} channel(s), {self.confidence * 100:g} % "
                f"chi-square intervals, unit {self.unit}>\n{self.table()}")


# ------------------------------------------------------------------------------ estimator
@dataclass(frozen=True, kw_only=True, repr=False)
class AllanDeviation(Estimator):
    """Allan deviation of RATE data (a gyro's deg/s, an accelerometer's m/s^2, a clock's
    fractional frequency): the rate is averaged over clusters of ``m`` samples and half the
    mean square difference of successive cluster averages is the Allan variance.

    The input is assumed to be rate samples.  For angle (integrated rate, phase) data pass
    ``input="angle"``: the cluster averages are then differences of the angle divided by
    ``tau``, and the deviation is in the data's unit per second.

    Non-finite samples are gaps: every difference whose clusters touch a gap is left out,
    ``clusters`` counts the ones kept and the dof follow (the edf formulas are evaluated
    for the number of terms kept).

    Memory: the record is read in blocks of 65,536 samples; the cumulative sums are
    rebuilt per block from one checkpoint per block, so memory is bounded by a few dozen
    blocks (it grows with log2 of the record length), never by the record.

    Parameters
    ----------
    taus : {'octave', 'decade'} or tuple of float, default 'octave'
        octave: cluster sizes 1, 2, 4, ...; decade: 1, 2, 5, 10, ...; or a tuple of times in seconds.
        Allowed: one of 'octave', 'decade', or a tuple of increasing, distinct averaging times in seconds (> 0).
    overlapping : bool, default True
        Average every difference (overlapping estimate, more dof) or only non-overlapping clusters.
        Allowed: True or False.
    input : {'rate', 'angle'}, default 'rate'
        rate: the samples are a rate (deg/s, m/s^2); angle: they are its integral (deg, m/s).
        Allowed: one of 'rate', 'angle'.
    noise : {'auto', 'quantization', 'white', 'bias_instability', 'random_walk'}, default 'auto'
        Power-law noise type behind the dof: auto identifies it from the local slope of the estimate.
        Allowed: one of 'auto', 'quantization', 'white', 'bias_instability', 'random_walk'.
    confidence : float, default 0.683
        Probability that the interval covers the true deviation at a given averaging time.
        Allowed: a float in the range (0, 1).
    """

    kind: ClassVar[str] = "AllanDeviation"
    title: ClassVar[str] = "Allan deviation"

    taus: Any = param(
        "octave",
        TauGrid(("octave", "decade")),
        label="Averaging times",
        group="estimator",
        help="octave: cluster sizes 1, 2, 4, ...; decade: 1, 2, 5, 10, ...; or a tuple of times in seconds.",
    )
    overlapping: bool = param(
        True,
        Boolean(),
        label="Overlapping",
        group="estimator",
        help="Average every difference (overlapping estimate, more dof) or only non-overlapping clusters.",
    )
    input: str = param(
        "rate",
        Options(("rate", "angle")),
        label="Input is",
        group="data",
        help="rate: the samples are a rate (deg/s, m/s^2); angle: they are its integral (deg, m/s).",
    )
    noise: str = param(
        "auto",
        Options(("auto",) + tuple(NOISE_TYPES)),
        label="Noise type for dof",
        group="band",
        help="Power-law noise type behind the dof: auto identifies it from the local slope of the estimate.",
    )
    confidence: float = param(
        0.683,
        Interval(float, 0, 1, closed="neither"),
        label="Confidence",
        group="band",
        help="Probability that the interval covers the true deviation at a given averaging time.",
    )

    # ---------------------------------------------------------------- cost
    def _cost(self, n: int, c: int, itemsize: int) -> dict:
        levels = max(1.0, math.log2(max(2.0, n / BLOCK)))
        # sample passes per sample (the count was missing its factor n: 0.001 s predicted for
        # 0.1 s measured at 1e6); weight 2 fitted on tests/benchmarks/bench_cost.py
        return dict(fft=0.0, passes=2.0 * c * n * (4.0 + 3.0 * levels + 0.3 * math.log2(max(2, n))), fixed=0.001)

    # ---------------------------------------------------------------- grid
    def cluster_sizes(self, n_points: int, fs: float) -> np.ndarray:
        """Cluster sizes for a record of ``n_points`` cumulative-sum points (N + 1 for rate data)."""
        mmax = (n_points - 1) // 2
        if mmax < 1:
            raise InputError(
                f"The record has {n_points - 1} sample intervals; an Allan deviation needs at least 2 "
                "(two clusters of one sample). Pass a longer record.", field="taus", owner="AllanDeviation")
        if self.taus == "octave":
            m = 2 ** np.arange(int(math.floor(math.log2(mmax))) + 1)
        elif self.taus == "decade":
            out, d = [], 1
            while d <= mmax:
                out += [v * d for v in (1, 2, 5) if v * d <= mmax]
                d *= 10
            m = np.asarray(out)
        else:
            taus = np.asarray(self.taus, dtype=float)
            m = np.rint(taus * fs).astype(np.int64)
            small = np.nonzero(m < 1)[0]
            if small.size:
                t = taus[small[0]]
                raise InputError(
                    f"The averaging time {t:g} s is shorter than the sample interval {1 / fs:g} s (fs = {fs:g} Hz). "
                    f"Use averaging times >= {1 / fs:g} s.", field="taus", owner="AllanDeviation")
            if np.any(np.diff(m) == 0):
                k = int(np.nonzero(np.diff(m) == 0)[0][0])
                raise InputError(
                    f"The averaging times {taus[k]:g} s and {taus[k + 1]:g} s map to the same cluster size "
                    f"{int(m[k])} samples at fs = {fs:g} Hz. Give averaging times at least one sample apart.",
                    field="taus", owner="AllanDeviation")
            long = np.nonzero(m > mmax)[0]
            if long.size:
                t = taus[long[0]]
                need = 2 * int(m[long[0]])
                raise InputError(
                    f"The averaging time {t:g} s needs a record of at least 2 tau = {need / fs:g} s "
                    f"({need} samples); the record is {(n_points - 1) / fs:g} s ({n_points - 1} samples). "
                    f"Use averaging times <= {mmax / fs:g} s or a longer record.", field="taus",
                    owner="AllanDeviation")
        return m.astype(np.int64)

    # ---------------------------------------------------------------- call
    def __call__(self, x: Any, fs: float | None = None) -> AllanResult:
        """Allan deviation of each channel of ``x`` (samples on the last axis)."""
        s = as_samples(x, fs, min_samples=3)
        if np.iscomplexobj(s.data):
            raise InputError("AllanDeviation supports real data only; pass the real and imaginary parts as channels.")
        if is_lazy(s.data):
            check_lazy(s.data)
        data = as_2d(s.data)
        c, n = data.shape
        points = n + 1 if self.input == "rate" else n
        ms = self.cluster_sizes(points, s.fs)
        tracker = _TRACKER.get()
        if tracker is not None:
            tracker.passes = max(1, c)
            tracker.completed = 0
        sums = np.zeros((c, ms.size))
        counts = np.zeros((c, ms.size), dtype=np.int64)
        gaps = np.zeros(c, dtype=np.int64)
        for ch in range(c):
            sums[ch], counts[ch], gaps[ch] = _allan_sums(data[ch], ms, self.overlapping, self.input, tracker)
        empty = np.argwhere(counts == 0)
        if empty.size:
            ch, k = empty[0]
            raise InputError(
                f"Every difference at the averaging time {ms[k] / s.fs:g} s of channel {ch} touches a gap "
                f"({int(gaps[ch])} non-finite samples): no cluster pair is complete. Use shorter averaging "
                "times, a span without gaps, or fill the gaps.", field="taus", owner="AllanDeviation")
        tau0 = 1.0 / s.fs
        scale = 1.0 if self.input == "rate" else s.fs  # angle: C = angle * fs
        avar = sums / counts * (scale**2) / (2.0 * ms.astype(float) ** 2)
        if self.input == "angle":
            avar = avar  # already in (angle unit / s)^2 after the fs scaling
        value = np.sqrt(avar)
        noise = np.empty((c, ms.size), dtype=object)
        dof = np.empty((c, ms.size))
        for ch in range(c):
            alphas = _identify(ms, avar[ch]) if self.noise == "auto" else np.full(ms.size, NOISE_TYPES[self.noise])
            for k, (m, alpha) in enumerate(zip(ms, alphas)):
                noise[ch, k] = _ALPHA_NAME[int(alpha)]
                if self.overlapping:
                    neff = float(counts[ch, k] + 2 * m)
                    d = edf_overlapping(int(alpha), neff, int(m)) if neff > 3 else 1.0
                else:
                    d = edf_nonoverlapping(int(alpha), int(counts[ch, k]))
                dof[ch, k] = float(min(max(d, 0.5), counts[ch, k]))
        p = self.confidence
        lo = np.sqrt(avar * dof / stats.chi2.ppf((1 + p) / 2, dof))
        hi = np.sqrt(avar * dof / stats.chi2.ppf((1 - p) / 2, dof))
        unit = s.unit
        if self.input == "angle":
            unit = tuple(f"{u}/s" for u in unit) if isinstance(unit, tuple) else (f"{unit}/s" if unit else "1/s")
        squeeze = s.data.ndim == 1
        pick = (lambda a: a[0]) if squeeze else (lambda a: a)
        return AllanResult(
            tau=ms * tau0, value=pick(value), lower=pick(lo), upper=pick(hi), dof=pick(dof),
            clusters=pick(counts), noise=pick(noise), m=ms, fs=s.fs, n=n, unit=unit,
            channels=s.channels, confidence=p, estimator=self,
            info={"gaps": pick(gaps), "points": points},
        )


def _identify(ms: np.ndarray, avar: np.ndarray) -> np.ndarray:
    """Power-law exponent alpha at each tau from the local log-log slope mu of the Allan
    variance (avar ~ tau^mu, alpha = -mu - 1; IEEE Std 952-1997 Annex C slopes), over the
    neighbouring averaging times; white phase (mu = -2) and flicker phase cannot be told
    apart by this slope, white phase is used."""
    if ms.size < 2:
        return np.zeros(ms.size, dtype=int)
    lt, lv = np.log(ms.astype(float)), np.log(np.maximum(avar, 1e-300))
    slope = np.gradient(lv, lt)
    # smooth over three neighbours (estimates at long tau are noisy)
    if ms.size >= 3:
        padded = np.concatenate([slope[:1], slope, slope[-1:]])
        slope = (padded[:-2] + padded[1:-1] + padded[2:]) / 3.0
    alpha = np.clip(np.rint(-slope - 1.0), -2, 2).astype(int)
    alpha[alpha == 1] = 2
    # phase-like noise (quantization) can only dominate the SHORTEST averaging times of a
    # rate record: a steep fall at long tau is the noise of the estimate (or the roll-off
    # of a Gauss-Markov term), which is white-rate-like there
    lead = 0
    while lead < alpha.size and alpha[lead] == 2:
        lead += 1
    alpha[lead:][alpha[lead:] == 2] = 0
    return alpha


# ------------------------------------------------------------------------------ engine
def _read(x: Any, a: int, b: int) -> np.ndarray:
    """Samples ``a:b`` of one channel as float64 (a view of NumPy input converted per block;
    one computed chunk of a dask array, never the whole record)."""
    return np.asarray(read_span(x, a, b), dtype=np.float64)


class _Cumulative:
    """Blocks of the cumulative sums ``C`` of one channel, rebuilt on demand from one
    checkpoint per block; an LRU cache bounds the memory.  A record of no more blocks than
    the cache holds keeps them end to end in one array (``full``), and spans are views of it."""

    def __init__(self, x: np.ndarray, kind: str, capacity: int) -> None:
        self.x, self.kind, self.capacity = x, kind, max(4, capacity)
        n = x.shape[-1]
        self.points = n + 1 if kind == "rate" else n
        self.nblocks = -(-self.points // BLOCK)
        self.cache: OrderedDict[int, tuple[np.ndarray, np.ndarray | None]] = OrderedDict()
        self.offset = 0.0
        self.gaps = 0
        if kind == "rate":
            first = _read(x, 0, min(n, BLOCK))
            fin = first[np.isfinite(first)]
            self.offset = float(fin.mean()) if fin.size else 0.0
            sums = np.zeros(self.nblocks + 1)
            nan = np.zeros(self.nblocks + 1, dtype=np.int64)
            for b in range(self.nblocks):
                blk = _read(x, b * BLOCK, (b + 1) * BLOCK)
                bad = ~np.isfinite(blk)
                nb = int(bad.sum())
                if nb:
                    blk = np.where(bad, self.offset, blk)
                sums[b + 1] = float(np.sum(blk - self.offset))
                nan[b + 1] = nb
            self.check = np.cumsum(sums)
            self.nan_check = np.cumsum(nan)
            self.gaps = int(self.nan_check[-1])
        else:
            cnt = 0
            for b in range(self.nblocks):
                blk = _read(x, b * BLOCK, (b + 1) * BLOCK)
                cnt += int((~np.isfinite(blk)).sum())
            self.gaps = cnt
        self.full = None
        if self.nblocks <= self.capacity:  # the blocks end to end: the same values, one array
            cv = np.empty(self.points)
            g = np.empty(self.points, dtype=np.int64) if self.kind == "rate" and self.gaps else None
            for b in range(self.nblocks):
                part, gp = self._make(b)
                cv[b * BLOCK : b * BLOCK + part.size] = part
                if g is not None:
                    g[b * BLOCK : b * BLOCK + part.size] = gp
            self.full = (cv, g)

    def block(self, b: int) -> tuple[np.ndarray, np.ndarray | None]:
        hit = self.cache.get(b)
        if hit is not None:
            self.cache.move_to_end(b)
            return hit
        out = self._make(b)
        self.cache[b] = out
        if len(self.cache) > self.capacity:
            self.cache.popitem(last=False)
        return out

    def _make(self, b: int) -> tuple[np.ndarray, np.ndarray | None]:
        """Block ``b`` of C (and the running gap counts), from its checkpoint."""
        a = b * BLOCK
        stop = min(self.points, a + BLOCK)
        if self.kind == "rate":
            # C[a + t] = check[b] + sum_{j=a}^{a+t-1} (y_j - offset), t = 0 .. stop-a-1
            y = _read(self.x, a, stop - 1) - self.offset
            cv = np.empty(stop - a)
            cv[0] = self.check[b]
            bad = None
            if self.gaps:
                badm = ~np.isfinite(y)
                g = np.empty(stop - a, dtype=np.int64)
                g[0] = self.nan_check[b]
                np.cumsum(badm, out=g[1:])
                g[1:] += self.nan_check[b]
                y[badm] = 0.0
                bad = g
            np.cumsum(y, out=cv[1:])
            cv[1:] += self.check[b]
        else:
            cv = _read(self.x, a, stop).copy()
            bad = None
        return cv, bad

    def span(self, a: int, length: int, out: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray | None]:
        """``C[a : a + length]`` (and the gap counts) from cached blocks: a view of one block,
        or the pieces copied into ``out`` (at least ``length`` long; a new array if None)."""
        if self.full is not None:  # the whole record's C fits the cache's bound: views, no copies
            cv, g = self.full
            return cv[a : a + length], (None if g is None else g[a : a + length])
        b0, b1 = a // BLOCK, (a + length - 1) // BLOCK
        if b0 == b1:
            cv, g = self.block(b0)
            s = a - b0 * BLOCK
            return cv[s : s + length], (None if g is None else g[s : s + length])
        cv = np.empty(length) if out is None else out[:length]
        g = None
        pos = 0
        for b in range(b0, b1 + 1):
            part, gp = self.block(b)
            s = max(a - b * BLOCK, 0)
            take = min(part.size - s, length - pos)
            cv[pos : pos + take] = part[s : s + take]
            if gp is not None:
                if g is None:
                    g = np.empty(length, dtype=np.int64)
                g[pos : pos + take] = gp[s : s + take]
            pos += take
        return cv, g


def _allan_sums(x: np.ndarray, ms: np.ndarray, overlapping: bool, kind: str, tracker: Any):
    """Per cluster size: sum of squared second differences of C over complete terms, and
    the number of terms.  Block-major: every cluster size advances through block j."""
    large = int(np.sum(ms >= BLOCK))
    cum = _Cumulative(x, kind, capacity=6 + 4 * large)
    p = cum.points
    sums = np.zeros(ms.size)
    counts = np.zeros(ms.size, dtype=np.int64)
    # work buffers reused over blocks and cluster sizes (spans that straddle blocks, the differences)
    bufs = np.empty((4, BLOCK))
    for j in range(cum.nblocks):
        a = j * BLOCK
        for k, m in enumerate(ms):
            m = int(m)
            stop = min(a + BLOCK, p - 2 * m)  # term start i < p - 2m
            if stop <= a:
                continue
            if overlapping:
                start, step = a, 1
            else:
                start = -(-a // m) * m
                step = m
                if start >= stop:
                    continue
            length = stop - start
            c0, g0 = cum.span(start, length, bufs[0])
            c1, g1 = cum.span(start + m, length, bufs[1])
            c2, g2 = cum.span(start + 2 * m, length, bufs[2])
            if step > 1:
                c0, c1, c2 = c0[::step], c1[::step], c2[::step]
                if g0 is not None:
                    g0, g2 = g0[::step], g2[::step]
            # d = c2 - 2 c1 + c0, in place: c2 + (-2 c1) is c2 - 2 c1 to the bit
            d = np.multiply(c1, -2.0, out=bufs[3, : c1.size])
            d += c2
            d += c0
            if g0 is not None:
                ok = (g2 - g0) == 0
                d = d[ok]
            elif kind == "angle":
                ok = np.isfinite(d)
                if not ok.all():
                    d = d[ok]
            sums[k] += float(np.einsum("i,i->", d, d))
            counts[k] += d.size
        if tracker is not None:
            tracker.block(j + 1, cum.nblocks)
    return sums, counts, cum.gaps
