"""What the PSD view measures: a band the user drags, the tones, the floor and harmonic cursors.

Pure Python (no ipywidgets): :class:`MeasureState` holds the user's choices and turns a
one-channel :class:`~specbench.Spectrum` into :class:`Readings` (each a result of
``specbench.measure`` with its interval and its ``.code`` line).  The frozen cell gets one
line per reading on screen (:meth:`Readings.code_lines`), written with the cell's variable
for the spectrum, so that running the cell gives the same numbers as the table.

A reading that cannot be made (a band narrower than a bin, outside the spectrum, ...) keeps
its message in place of the value; the other readings are made regardless.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from .._errors import SpecbenchError

__all__ = ["MeasureState", "Readings", "Reading", "harmonic_band"]

#: the default number of tones listed
TONES = 5
#: half width of a harmonic cursor's band, in resolution bandwidths
HARMONIC_HALF_WIDTH = 2.0


@dataclass(frozen=True)
class Reading:
    """One line of the measurements table: ``key``, a label, the result (or the message why not)."""

    key: str
    label: str
    result: Any = None
    message: str | None = None
    #: the variable the frozen cell assigns it to
    var: str = ""

    @property
    def ok(self) -> bool:
        return self.result is not None and self.message is None


@dataclass(frozen=True)
class Readings:
    band_power: Reading
    band_rms: Reading
    floor: Reading
    tones: Reading
    harmonics: tuple = ()
    #: frequency of the harmonic cursors' fundamental (None: no cursors)
    fundamental: float | None = None

    def rows(self) -> list[Reading]:
        return [self.band_rms, self.band_power, self.floor, self.tones, *self.harmonics]

    def code_lines(self, spectrum_var: str = "spectrum") -> list[str]:
        """One line per reading on screen: ``name = <spectrum_var>.<method>(...)``."""
        out = []
        for r in (self.band_rms, self.band_power, self.floor, self.tones):
            if r.ok:
                out.append(f"{r.var} = {_on(r.result.code, spectrum_var)}")
        good = [h for h in self.harmonics if h.ok]
        if good:
            out.append(f"# harmonic cursors of {self.fundamental!r} Hz: the power within "
                       f"+-{HARMONIC_HALF_WIDTH:g} resolution bandwidths of each multiple")
            out.append("harmonics = [")
            out += [f"    {_on(h.result.code, spectrum_var)},  # {h.label}" for h in good]
            out.append("]")
        if out:
            out.insert(0, "# measurements read in the workbench (value, interval and dof in each result)")
        return out


def _on(code: str, var: str) -> str:
    """A result's ``.code`` (written on ``spec``) on the variable ``var``."""
    return var + code[len("spec"):] if code.startswith("spec.") else code


def harmonic_band(spec: Any, f: float) -> tuple[float, float] | None:
    """The band of a harmonic cursor at ``f``: ``f -+ 2`` resolution bandwidths, inside the spectrum."""
    half = max(HARMONIC_HALF_WIDTH * float(spec.resolution), float(spec.df))
    top = float(spec.freq[-1])
    lo, hi = max(float(spec.freq[0]), f - half), min(top, f + half)
    if hi - lo < spec.df or f > top:
        return None
    return lo, hi


@dataclass
class MeasureState:
    """The user's measurement choices (band, tone count, harmonic cursors) and the last readings."""

    band: tuple[float, float] | None = None
    max_tones: int = TONES
    fundamental: float | None = None
    harmonic_count: int = 0
    last: Readings | None = field(default=None, repr=False)

    def set_band(self, f1: float, f2: float) -> None:
        """The band of the band cursor, Hz (in either order: it is sorted)."""
        a, b = float(f1), float(f2)
        if not (math.isfinite(a) and math.isfinite(b)):
            raise SpecbenchError(f"The band edges must be finite frequencies in Hz; got {f1!r}, {f2!r}.")
        self.band = (min(a, b), max(a, b))

    def clear_band(self) -> None:
        self.band = None

    def set_harmonics(self, fundamental: float | None, count: int) -> None:
        """Harmonic cursors at ``n * fundamental``, ``n = 1..count`` (count 0: none)."""
        if isinstance(count, bool) or int(count) != count or not 0 <= int(count) <= 20:
            raise SpecbenchError(f"The number of harmonic cursors must be an integer 0..20; got {count!r}.")
        if fundamental is not None and not (math.isfinite(fundamental) and fundamental > 0):
            raise SpecbenchError(f"The fundamental must be a positive frequency in Hz; got {fundamental!r}.")
        self.fundamental = None if fundamental is None else float(fundamental)
        self.harmonic_count = int(count)

    def read(self, spec: Any) -> Readings:
        """Every reading of ``spec`` (one channel); never raises a SpecbenchError."""
        band_power = band_rms = None
        if self.band is None:
            msg = "no band yet: drag one on the plot with the band tool, or type its edges"
            band_power = Reading("band_power", "Band power", message=msg, var="band_power")
            band_rms = Reading("band_rms", "Band RMS", message=msg, var="band_rms")
        else:
            f1, f2 = self.band
            for key, label, fn in (("band_power", "Band power", spec.band_power), ("band_rms", "Band RMS",
                                                                                    spec.band_rms)):
                try:
                    r = Reading(key, label, fn(f1, f2), var=key)
                except SpecbenchError as e:
                    r = Reading(key, label, message=str(e), var=key)
                if key == "band_power":
                    band_power = r
                else:
                    band_rms = r
        try:
            floor = Reading("floor", "Noise floor", spec.noise_floor(), var="noise_floor")
        except SpecbenchError as e:
            floor = Reading("floor", "Noise floor", message=str(e), var="noise_floor")
        try:
            tones = Reading("tones", "Tones", spec.tones(max_count=self.max_tones), var="tones")
        except SpecbenchError as e:
            tones = Reading("tones", "Tones", message=str(e), var="tones")
        harmonics = []
        f0 = self.fundamental
        if f0 is None and tones.ok and len(tones.result):
            f0 = tones.result[0].freq
        if self.harmonic_count and f0 is not None:
            for n in range(1, self.harmonic_count + 1):
                f = n * f0
                band = harmonic_band(spec, f)
                label = f"{n}× {f:.6g} Hz"
                if band is None:
                    harmonics.append(Reading(f"h{n}", label, message=f"{f:.6g} Hz is beyond the spectrum "
                                                                     f"(top {float(spec.freq[-1]):g} Hz)"))
                    continue
                try:
                    harmonics.append(Reading(f"h{n}", label, spec.band_power(*band)))
                except SpecbenchError as e:
                    harmonics.append(Reading(f"h{n}", label, message=str(e)))
        self.last = Readings(band_power, band_rms, floor, tones, tuple(harmonics),
                             f0 if self.harmonic_count else None)
        return self.last

    def code_lines(self, spectrum_var: str = "spectrum") -> list[str]:
        return [] if self.last is None else self.last.code_lines(spectrum_var)
