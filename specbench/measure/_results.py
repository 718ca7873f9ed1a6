"""Result objects of the measurements: numbers with an interval, a unit and the band they cover."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._errors import SpecbenchError

__all__ = ["MeasurementError", "Measurement", "Tone", "Tones", "OctaveBands"]


class MeasurementError(SpecbenchError, ValueError):
    """A measurement cannot be made as asked (band, fraction, scaling); the message says how to fix it."""


def _fmt(v: Any) -> str:
    a = np.asarray(v)
    if a.ndim == 0:
        return f"{float(a):.6g}"
    return "[" + ", ".join(f"{float(x):.6g}" for x in a.ravel()) + "]"


@dataclass(frozen=True)
class Measurement:
    """A number read from a spectrum with its confidence interval.

    Attributes
    ----------
    value, lower, upper : float or ndarray (one per channel)
        The estimate and its interval at ``confidence``.
    dof : float or ndarray
        Equivalent degrees of freedom of the estimate (chi-square intervals), or the
        effective number of independent bins (noise floor).
    unit : str
    band : tuple (f1, f2)
        The band actually covered, Hz.
    kind : str
        ``"band power"``, ``"band RMS"`` or ``"noise floor"``.
    method : str
        How the value and its interval were computed, in words.
    """

    value: Any
    lower: Any
    upper: Any
    dof: Any
    unit: Any
    band: tuple
    confidence: float
    kind: str
    bins: int
    method: str = ""
    channels: tuple | None = None
    code: str = ""

    def __float__(self) -> float:
        return float(self.value)

    @property
    def band_db(self) -> Any:
        """Width of the interval in dB (power-like quantities: ``10 log10(upper/lower)``)."""
        factor = 20 if self.kind == "band RMS" else 10
        with np.errstate(divide="ignore", invalid="ignore"):
            return factor * np.log10(np.asarray(self.upper) / np.asarray(self.lower))

    def __repr__(self) -> str:
        f1, f2 = self.band
        return (
            f"<{self.kind} {f1:g}..{f2:g} Hz: {_fmt(self.value)} {self.unit} "
            f"[{_fmt(self.lower)}, {_fmt(self.upper)}] at {self.confidence:.0%}, "
            f"dof {_fmt(self.dof)}, {self.bins} bins>"
        )


@dataclass(frozen=True)
class Tone:
    """One tone found in a spectrum.

    Attributes
    ----------
    freq, freq_stderr, freq_lower, freq_upper : float
        Interpolated frequency (Hz), its standard error and interval at the spectrum's
        confidence (normal approximation).
    freq_crb : float
        Cramer-Rao lower bound on the standard deviation of any unbiased frequency
        estimate from the analysed samples (Rife & Boorstyn 1974), Hz: a floor for comparison.
    amplitude, amplitude_stderr, amplitude_lower, amplitude_upper : float
        RMS amplitude in the data unit, corrected for the window's coherent gain and the
        scalloping at the fitted offset (a sine of peak amplitude A reads A / sqrt(2)).
    level_db : float
        ``20 log10(amplitude)``, dB re 1 data unit RMS.
    snr_db : float
        Tone power over the noise power in one resolution bandwidth at the local floor.
    floor : float
        Local noise floor density under the tone.
    bin : int
        Index of the local maximum; ``offset`` is the fitted offset from it, in bins.
    """

    freq: float
    freq_stderr: float
    freq_lower: float
    freq_upper: float
    freq_crb: float
    amplitude: float
    amplitude_stderr: float
    amplitude_lower: float
    amplitude_upper: float
    level_db: float
    snr_db: float
    floor: float
    bin: int
    offset: float
    unit: str = ""

    def __repr__(self) -> str:
        return (
            f"<Tone {self.freq:.6g} Hz +- {self.freq_stderr:.2g} Hz, {self.amplitude:.4g} {self.unit} RMS "
            f"({self.level_db:.2f} dB), SNR {self.snr_db:.1f} dB>"
        )


@dataclass(frozen=True)
class Tones:
    """The tones found above the local floor, strongest first; may be empty (``note`` says why)."""

    items: tuple
    threshold_db: float
    false_alarm: float
    confidence: float
    rule: str
    note: str = ""
    unit: str = ""
    code: str = ""

    def __len__(self) -> int:
        return len(self.items)

    def __iter__(self):
        return iter(self.items)

    def __getitem__(self, i):
        return self.items[i]

    def __bool__(self) -> bool:
        return bool(self.items)

    @property
    def freq(self) -> np.ndarray:
        return np.array([t.freq for t in self.items])

    @property
    def amplitude(self) -> np.ndarray:
        return np.array([t.amplitude for t in self.items])

    def to_dataframe(self):
        import pandas as pd

        cols = ["freq", "freq_stderr", "amplitude", "amplitude_stderr", "level_db", "snr_db", "freq_crb"]
        return pd.DataFrame([{c: getattr(t, c) for c in cols} for t in self.items], columns=cols)

    def __repr__(self) -> str:
        if not self.items:
            return f"<Tones: none. {self.note}>"
        lines = [f"<Tones: {len(self.items)} above the floor by {self.threshold_db:.1f} dB "
                 f"(false-alarm probability {self.false_alarm:g} per spectrum)"]
        lines += [f"  {t!r}" for t in self.items]
        return "\n".join(lines) + ">"


@dataclass(frozen=True)
class OctaveBands:
    """Fractional-octave band powers (IEC 61260-1:2014 base-10 bands).

    Attributes
    ----------
    fraction : int
        ``b`` in 1/b-octave.
    index : ndarray of int
        Band number ``x`` of the standard's formula.
    center, lower_edge, upper_edge : ndarray
        Exact mid-band frequency and band edges, Hz.
    value, lower, upper : ndarray, shape (..., nbands)
        Band power and its interval.
    dof : ndarray
    partial : ndarray of bool
        The band extends beyond the spectrum (at Nyquist) and only the covered part is summed.
    below : float or ndarray
        Power from the spectrum's first bin edge up to the first band's lower edge (bands
        there are narrower than the resolution); ``value.sum(-1) + below + above`` is the
        total power of the spectrum.
    """

    fraction: int
    index: np.ndarray
    center: np.ndarray
    lower_edge: np.ndarray
    upper_edge: np.ndarray
    value: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    dof: np.ndarray
    partial: np.ndarray
    below: Any
    above: Any
    unit: Any
    confidence: float
    code: str = ""
    notes: tuple = field(default_factory=tuple)

    def level_db(self, reference: float = 1.0) -> np.ndarray:
        """Band levels ``10 log10(value / reference)``, dB."""
        with np.errstate(divide="ignore"):
            return 10 * np.log10(self.value / reference)

    def to_dataframe(self):
        import pandas as pd

        if np.ndim(self.value) != 1:
            raise MeasurementError("to_dataframe() needs one channel: use spec.channel(name).octave_bands(...)")
        return pd.DataFrame(
            {"lower_edge": self.lower_edge, "upper_edge": self.upper_edge, "value": self.value,
             "lower": self.lower, "upper": self.upper, "dof": self.dof, "partial": self.partial},
            index=pd.Index(self.center, name="center_hz"),
        )

    def __len__(self) -> int:
        return int(self.center.size)

    def __repr__(self) -> str:
        return (
            f"<OctaveBands 1/{self.fraction}-octave: {self.center.size} bands "
            f"{self.center[0]:.4g}..{self.center[-1]:.4g} Hz, {int(self.partial.sum())} partial, "
            f"{self.unit} at {self.confidence:.0%}>"
        )
