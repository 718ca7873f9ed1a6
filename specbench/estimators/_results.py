"""Result objects: :class:`Spectrum` and :class:`Correlation`.

The measurements offered as their methods (``spec.band_power``, ``corr.delay``, ...) are
implemented above this module (:mod:`specbench.measure`, :mod:`.cross`), which register them
here with :func:`register_method` when they are imported (``import specbench`` imports both):
the results import nothing of the package above them.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

__all__ = ["Spectrum", "Correlation", "power_unit", "density_unit", "register_method"]

#: method name -> implementation ``fn(result, *args, **kwargs)``, registered from above
_METHODS: dict[str, Callable[..., Any]] = {}


def register_method(name: str, fn: Callable[..., Any]) -> None:
    """Make ``fn(result, ...)`` the implementation of the result method ``name``."""
    _METHODS[name] = fn


def _method(name: str) -> Callable[..., Any]:
    try:
        return _METHODS[name]
    except KeyError:  # only when the estimators are used without the package's __init__
        from .._errors import SpecbenchError

        raise SpecbenchError(f"{name}() is implemented in specbench.measure / specbench.estimators.cross; "
                             "import specbench first.") from None

VIEWS = ("density", "asd", "db", "power")


def _wrap(u: str) -> str:
    return u if u.replace("_", "").isalnum() else f"({u})"


def power_unit(u: str) -> str:
    """``"V" -> "V^2"``, ``"m/s^2" -> "(m/s^2)^2"``, ``"" -> ""``."""
    return f"{_wrap(u)}^2" if u else ""


def density_unit(u: str) -> str:
    return f"{power_unit(u)}/Hz" if u else "1/Hz"


def _per_channel(unit: Any, fn) -> Any:
    return tuple(fn(u) for u in unit) if isinstance(unit, tuple) else fn(unit)


@dataclass(frozen=True, eq=False)
class Spectrum:
    """A power spectral density (or power spectrum) estimate with its confidence band.

    Attributes
    ----------
    freq : ndarray, shape (nfreq,)
        Frequencies in Hz (ascending; two-sided spectra run from -fs/2).
    value, lower, upper : ndarray, shape (..., nfreq)
        The estimate and its confidence band, in ``unit`` (default ``data_unit^2/Hz``).
    dof : ndarray, shape (nfreq,) or (..., nfreq)
        Equivalent degrees of freedom per bin (DC and Nyquist carry half).
    resolution : float
        Frequency resolution in Hz: the equivalent noise bandwidth of the effective
        spectral window (Welch, periodogram), ``2W`` (multitaper) or the lag-window
        bandwidth (Blackman-Tukey).
    segments : int
        Segments averaged (1 for a periodogram; multitaper counts segments, not tapers).
    variance : ndarray, shape (...)
        Mean square of the analysed samples after the estimator's detrending, per
        channel: the target of :meth:`parseval_ratio`.
    """

    freq: np.ndarray
    value: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    dof: np.ndarray
    resolution: float
    segments: int
    fs: float
    data_unit: Any
    scaling: str
    confidence: float
    estimator: Any
    channels: tuple | None
    samples_used: int
    variance: np.ndarray
    onesided: bool
    info: dict = field(default_factory=dict)

    @property
    def unit(self) -> Any:
        """Unit of ``value``: ``u^2/Hz`` for density scaling, ``u^2`` for spectrum."""
        fn = density_unit if self.scaling == "density" else power_unit
        return _per_channel(self.data_unit, fn)

    @property
    def df(self) -> float:
        """Bin spacing in Hz."""
        return float(self.freq[1] - self.freq[0]) if self.freq.size > 1 else self.fs

    def view(self, kind: str = "density", index: Any = None) -> tuple[np.ndarray, np.ndarray, np.ndarray, Any]:
        """The estimate and band as ``(value, lower, upper, unit)`` in another form.

        ``index`` (an index along the frequency axis) converts only those bins, e.g. for a
        readout at one frequency.

        ``"density"`` as computed; ``"asd"`` the square root (``u/sqrt(Hz)``); ``"db"``
        ``10 log10`` of the density (dB re 1 u^2/Hz); ``"power"`` the power spectrum
        (density times the resolution ``resolution`` Hz, ``u^2``; for Blackman-Tukey the
        line factor ``info["line_bandwidth_hz"]``), which reads ``A^2/2`` for a sine of
        amplitude ``A`` on a bin.  The band transforms with the estimate: it is the
        same interval.
        """
        if kind not in VIEWS:
            raise ValueError(f"view must be one of {VIEWS}; got {kind!r}")
        v, lo, hi = self.value, self.lower, self.upper
        if index is not None:
            v, lo, hi = v[..., index], lo[..., index], hi[..., index]
        line = self.info.get("line_bandwidth_hz", self.resolution)
        if self.scaling == "spectrum" and kind != "power":
            v, lo, hi = (a / line for a in (v, lo, hi))
        if kind == "density":
            return v, lo, hi, _per_channel(self.data_unit, density_unit)
        if kind == "asd":
            unit = _per_channel(self.data_unit, lambda u: f"{u}/√Hz" if u else "1/√Hz")
            return np.sqrt(v), np.sqrt(lo), np.sqrt(hi), unit
        if kind == "db":
            with np.errstate(divide="ignore", invalid="ignore"):
                conv = [10 * np.log10(a) for a in (v, lo, hi)]
            unit = _per_channel(self.data_unit, lambda u: f"dB re 1 {density_unit(u)}")
            return conv[0], conv[1], conv[2], unit
        if self.scaling == "spectrum":
            return v, lo, hi, _per_channel(self.data_unit, power_unit)
        return v * line, lo * line, hi * line, _per_channel(self.data_unit, power_unit)

    def with_confidence(self, confidence: float) -> Spectrum:
        """The same estimate with its band at another confidence level.

        Equal, bit for bit, to estimating again with ``estimator.replace(confidence=...)``:
        the band depends on the estimate only through its degrees of freedom.
        """
        from ._dof import band_factors

        est = self.estimator.replace(confidence=confidence)  # validates the level
        lo, hi = band_factors(self.dof, est.confidence)
        return replace(self, lower=self.value * lo, upper=self.value * hi, confidence=est.confidence,
                       estimator=est, info=dict(self.info))

    def band_db(self) -> float:
        """Width of the confidence band in dB, ``10 log10(upper / lower)``, at interior bins."""
        dof = np.broadcast_to(self.dof, self.value.shape)
        inner = np.median(dof[..., 1:-1]) if dof.shape[-1] > 2 else np.median(dof)
        from ._dof import band_factors

        lo, hi = band_factors(np.array([inner]), self.confidence)
        return float(10 * np.log10(hi[0] / lo[0]))

    def parseval_ratio(self) -> np.ndarray:
        """Integral of the density over the data's mean square (1 within estimator bias)."""
        dens = self.view("density")[0]
        total = dens.sum(axis=-1) * self.df
        with np.errstate(divide="ignore", invalid="ignore"):
            return total / self.variance

    # ---- measurements with uncertainty (thin wrappers over specbench.measure)
    def band_power(self, f1: float, f2: float):
        """Power over ``[f1, f2]`` Hz with an interval: :func:`specbench.measure.band_power`."""
        return _method("band_power")(self, f1, f2)

    def band_rms(self, f1: float, f2: float):
        """RMS over ``[f1, f2]`` Hz with an interval: :func:`specbench.measure.band_rms`."""
        return _method("band_rms")(self, f1, f2)

    def noise_floor(self, f1: float | None = None, f2: float | None = None):
        """Robust floor of the density with an interval: :func:`specbench.measure.noise_floor`."""
        return _method("noise_floor")(self, f1, f2)

    def tones(self, max_count: int = 10, **options):
        """Tones above the local floor: :func:`specbench.measure.tones`."""
        return _method("tones")(self, max_count=max_count, **options)

    def octave_bands(self, fraction: int = 3, f_min: float | None = None, f_max: float | None = None):
        """IEC 61260-1 fractional-octave band powers: :func:`specbench.measure.octave_bands`."""
        return _method("octave_bands")(self, fraction, f_min=f_min, f_max=f_max)

    def integrate(self, order: int = 1) -> Spectrum:
        """Density of the integrated quantity, ``S (2 pi f)^-2`` per order: :func:`specbench.measure.integrate`."""
        return _method("integrate")(self, order)

    def differentiate(self, order: int = 1) -> Spectrum:
        """Density of the differentiated quantity, ``S (2 pi f)^2`` per order."""
        return _method("differentiate")(self, order)

    def channel(self, key: int | str) -> Spectrum:
        """The spectrum of one channel (by index or name)."""
        if self.value.ndim == 1:
            if key in (0, None) or (self.channels and key == self.channels[0]):
                return self
            raise KeyError(key)
        i = self.channels.index(key) if isinstance(key, str) else int(key)
        dof = self.dof[i] if self.dof.ndim == self.value.ndim else self.dof
        unit = self.data_unit[i] if isinstance(self.data_unit, tuple) else self.data_unit
        return replace(
            self,
            value=self.value[i],
            lower=self.lower[i],
            upper=self.upper[i],
            dof=dof,
            variance=self.variance[i],
            data_unit=unit,
            channels=(self.channels[i],) if self.channels else None,
        )

    def to_dataframe(self):
        """A pandas DataFrame indexed by frequency with value/lower/upper (per channel)."""
        import pandas as pd

        if self.value.ndim == 1:
            return pd.DataFrame(
                {"value": self.value, "lower": self.lower, "upper": self.upper,
                 "dof": np.broadcast_to(self.dof, self.value.shape)},
                index=pd.Index(self.freq, name="freq_hz"),
            )
        names = self.channels or tuple(f"ch{i}" for i in range(self.value.shape[0]))
        cols = {}
        for i, name in enumerate(names):
            for part in ("value", "lower", "upper"):
                cols[(name, part)] = getattr(self, part)[i]
        df = pd.DataFrame(cols, index=pd.Index(self.freq, name="freq_hz"))
        df.columns = pd.MultiIndex.from_tuples(df.columns, names=["channel", "quantity"])
        return df

    def __repr__(self) -> str:
        shape = "x".join(map(str, self.value.shape))
        return (
            f"<Spectrum {self.estimator!r}: {shape} bins, {self.freq[0]:g}..{self.freq[-1]:g} Hz, "
            f"resolution {self.resolution:.4g} Hz, {self.segments} segment(s), "
            f"{self.confidence:.0%} band {self.band_db():.2f} dB wide>"
        )


@dataclass(frozen=True, eq=False)
class Correlation:
    """An auto- or cross-correlation estimate with its band.

    Attributes
    ----------
    lag : ndarray
        Lags in seconds (``0..max_lag`` for auto-, ``-max_lag..max_lag`` for
        cross-correlation; a positive lag means the second signal lags the first).
    value, lower, upper : ndarray, shape (..., nlag)
        The estimate and its band.  ``band == "white"``: the region a white (or, for
        cross-correlation, independent) process stays in, centred on zero; ``"bartlett"``:
        an interval around the estimate from Bartlett's large-lag variance.
    unit : str
        ``""`` when normalised (correlation coefficient), else the data unit squared.
    """

    lag: np.ndarray
    value: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    fs: float
    n: int
    estimator: Any
    channels: tuple | None
    unit: Any
    kind: str
    band: str
    confidence: float
    info: dict = field(default_factory=dict)

    def peak_lag(self) -> np.ndarray | float:
        """Lag (s) of the largest ``|value|``; for cross-correlation, the delay estimate."""
        k = np.argmax(np.abs(self.value), axis=-1)
        return self.lag[k] if np.ndim(k) else float(self.lag[int(k)])

    def delay(self):
        """Delay of the second channel behind the first from the cross-correlation peak,
        refined between samples, with its standard error and interval (a
        :class:`~specbench.estimators.cross.Delay`; see
        :func:`~specbench.estimators.cross.correlation_delay`)."""
        return _method("delay")(self)

    def channel(self, key: int | str) -> Correlation:
        if self.value.ndim == 1:
            return self
        i = self.channels.index(key) if isinstance(key, str) else int(key)
        unit = self.unit[i] if isinstance(self.unit, tuple) else self.unit
        return replace(
            self, value=self.value[i], lower=self.lower[i], upper=self.upper[i],
            unit=unit, channels=(self.channels[i],) if self.channels else None,
        )

    def to_dataframe(self):
        import pandas as pd

        if self.value.ndim == 1:
            return pd.DataFrame(
                {"value": self.value, "lower": self.lower, "upper": self.upper},
                index=pd.Index(self.lag, name="lag_s"),
            )
        names = self.channels or tuple(f"ch{i}" for i in range(self.value.shape[0]))
        cols = {(nm, part): getattr(self, part)[i] for i, nm in enumerate(names)
                for part in ("value", "lower", "upper")}
        df = pd.DataFrame(cols, index=pd.Index(self.lag, name="lag_s"))
        df.columns = pd.MultiIndex.from_tuples(df.columns, names=["channel", "quantity"])
        return df

    def __repr__(self) -> str:
        return (
            f"<Correlation ({self.kind}) {self.estimator!r}: {self.value.shape[-1]} lags to "
            f"{self.lag[-1]:g} s, {self.band} band at {self.confidence:.0%}>"
        )
