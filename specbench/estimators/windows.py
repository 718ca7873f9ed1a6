"""Data windows (tapers): a name table, cached arrays and figures of merit.

A window is a plain value, as in :func:`scipy.signal.get_window`: a name such as
``"hann"`` or a tuple ``(name, param, ...)`` such as ``("kaiser", 8.6)``.  Windows are
periodic (DFT-even), the right choice for spectral estimation with the DFT [1]_.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform," Proc. IEEE 66(1), 51-83, 1978.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.fft
import scipy.optimize
import scipy.signal

from ._params import Constraint, Interval

__all__ = ["WINDOWS", "WindowKind", "WindowInfo", "Window", "window_info", "get_window"]

WindowSpec = str | tuple


@dataclass(frozen=True)
class WindowParam:
    name: str
    default: Any
    constraint: Constraint
    unit: str = ""
    help: str = ""


@dataclass(frozen=True)
class WindowKind:
    """One entry of the window table."""

    label: str
    params: tuple[WindowParam, ...] = ()
    #: parameters may be left out (scipy then uses its defaults)
    optional: bool = False
    #: offered in the widget's window menu
    interactive: bool = True

    @property
    def default_spec_params(self) -> tuple:
        return tuple(p.default for p in self.params)


_POS = Interval(float, 0, None, closed="neither")

#: name -> WindowKind; names are scipy's, so a spec passes straight to scipy.signal.
WINDOWS: dict[str, WindowKind] = {
    "boxcar": WindowKind("Rectangular"),
    "hann": WindowKind("Hann"),
    "hamming": WindowKind("Hamming"),
    "blackman": WindowKind("Blackman"),
    "blackmanharris": WindowKind("Blackman-Harris (4-term)"),
    "nuttall": WindowKind("Nuttall (4-term)"),
    "flattop": WindowKind("Flat top"),
    "bartlett": WindowKind("Bartlett"),
    "triang": WindowKind("Triangular"),
    "parzen": WindowKind("Parzen"),
    "bohman": WindowKind("Bohman"),
    "barthann": WindowKind("Bartlett-Hann"),
    "cosine": WindowKind("Cosine"),
    "lanczos": WindowKind("Lanczos"),
    "kaiser": WindowKind(
        "Kaiser",
        (WindowParam("beta", 8.6, Interval(float, 0, None), "", "shape: 0 is rectangular, larger is lower sidelobes"),),
    ),
    "tukey": WindowKind(
        "Tukey (tapered cosine)",
        (WindowParam("alpha", 0.5, Interval(float, 0, 1), "", "tapered fraction: 0 rectangular, 1 Hann"),),
        optional=True,
    ),
    "gaussian": WindowKind(
        "Gaussian", (WindowParam("std", 128.0, _POS, "samples", "standard deviation in samples"),)
    ),
    "general_gaussian": WindowKind(
        "Generalised Gaussian",
        (
            WindowParam("p", 1.5, _POS, "", "shape: 1 Gaussian, 0.5 Laplace-like"),
            WindowParam("sig", 128.0, _POS, "samples", "standard deviation in samples"),
        ),
    ),
    "general_hamming": WindowKind(
        "Generalised Hamming", (WindowParam("alpha", 0.54, Interval(float, 0, 1), "", "0.54 Hamming, 0.5 Hann"),)
    ),
    "chebwin": WindowKind(
        "Dolph-Chebyshev", (WindowParam("at", 100.0, _POS, "dB", "sidelobe attenuation"),)
    ),
    "dpss": WindowKind(
        "DPSS (Slepian)", (WindowParam("NW", 3.0, _POS, "", "time-half-bandwidth product"),)
    ),
    "taylor": WindowKind(
        "Taylor",
        (
            WindowParam("nbar", 4, Interval(int, 1, None), "", "number of nearly constant sidelobes"),
            WindowParam("sll", 30.0, _POS, "dB", "sidelobe suppression"),
        ),
        optional=True,
    ),
    "general_cosine": WindowKind("General cosine (coefficients)", interactive=False),
}

_ALIASES = {
    "rectangular": "boxcar",
    "rect": "boxcar",
    "hanning": "hann",
    "triangle": "triang",
    "blackman-harris": "blackmanharris",
    "flat-top": "flattop",
}

#: scipy windows deliberately left out, with the reason given to the user.
_EXCLUDED = {
    "kaiser_bessel_derived": "it is defined only as a symmetric window, and spectral "
    "estimation needs the periodic (DFT-even) form",
    "exponential": "with scipy's default decay of one sample it is no usable spectral window",
}


def _window_fix(name: str, kind: WindowKind) -> str:
    if not kind.params:
        return f"Write window={name!r}."
    example = (name, *kind.default_spec_params)
    names = ", ".join(p.name for p in kind.params)
    return f"Write window={example!r} (parameters: {names})."


def split_window(value: Any) -> tuple[str, tuple] | None:
    """``"hann" -> ("hann", ())``, ``("kaiser", 8.6) -> ("kaiser", (8.6,))``; None if neither form."""
    if isinstance(value, list):
        value = tuple(value)
    if isinstance(value, str):
        return value, ()
    if isinstance(value, tuple) and value and isinstance(value[0], str):
        return value[0], tuple(value[1:])
    return None


class Window(Constraint):
    """Constraint for a window value: a table name or ``(name, params...)``."""

    def doc_type(self) -> str:
        return "str or tuple"

    def check(self, value: Any) -> Any:
        parts = split_window(value)
        if parts is None:
            raise ValueError("Give a window name such as 'hann', or a tuple such as ('kaiser', 8.6).")
        name, args = parts
        key = _ALIASES.get(name.strip().lower(), name.strip().lower())
        if key in _EXCLUDED:
            raise ValueError(f"The window {name!r} is not offered because {_EXCLUDED[key]}.")
        if key not in WINDOWS:
            raise ValueError("Known windows: " + ", ".join(WINDOWS) + ".")
        kind = WINDOWS[key]
        if key == "general_cosine":
            if len(args) != 1 or not _is_coefficients(args[0]):
                raise ValueError("Write window=('general_cosine', (a0, a1, ...)) with real coefficients.")
            if not any(float(c) != 0 for c in args[0]):
                raise ValueError("All its coefficients are zero, so the window passes nothing. "
                                 "Write e.g. ('general_cosine', (0.5, 0.5)), which is Hann.")
            coeffs = tuple(float(c) for c in args[0])
            return (key, coeffs)
        if not args:
            if kind.params and not kind.optional:
                raise ValueError(f"The {kind.label} window needs its parameter. " + _window_fix(key, kind))
            return key
        if len(args) > len(kind.params):
            raise ValueError(
                f"The {kind.label} window takes {len(kind.params)} parameter(s). " + _window_fix(key, kind)
            )
        checked = []
        for p, a in zip(kind.params, args):
            try:
                checked.append(p.constraint.check(a))
            except ValueError:
                raise ValueError(
                    f"Its parameter {p.name!r} must be {p.constraint.describe()}. " + _window_fix(key, kind)
                ) from None
        return (key, *checked)

    def describe(self) -> str:
        return "a window name such as 'hann' or a tuple (name, parameter) such as ('kaiser', 8.6)"

    def invalid_values(self) -> list[Any]:
        return ["no-such-window", 3, ("kaiser",), ("kaiser", -1.0), ("hann", 2.0), "kaiser_bessel_derived", ()]


def _is_coefficients(v: Any) -> bool:
    try:
        arr = np.asarray(v, dtype=float)
    except (TypeError, ValueError):
        return False
    return arr.ndim == 1 and arr.size >= 1 and bool(np.all(np.isfinite(arr)))


def window_name(spec: WindowSpec) -> str:
    return spec if isinstance(spec, str) else spec[0]


def window_label(spec: WindowSpec) -> str:
    """Short human label, e.g. ``Kaiser beta=8.6``."""
    name = window_name(spec)
    kind = WINDOWS[name]
    if isinstance(spec, str) or name == "general_cosine":
        return kind.label
    return kind.label + " " + " ".join(f"{p.name}={v:g}" for p, v in zip(kind.params, spec[1:]))


def _scipy_spec(spec: WindowSpec) -> Any:
    if isinstance(spec, tuple) and spec[0] == "general_cosine":
        return ("general_cosine", list(spec[1]))
    return spec


@functools.lru_cache(maxsize=64)
def _cached_window(spec: WindowSpec, n: int, dtype: str) -> np.ndarray:
    from .._errors import SettingsError

    if window_name(spec) == "dpss" and not isinstance(spec, str) and spec[1] >= n / 2:
        raise SettingsError(
            f"The window {spec!r} needs NW < n/2, but it is applied to {n} samples (NW < {n / 2:g}). "
            f"Choose NW below {n / 2:g}, or a longer segment.", field="window",
        )
    w = scipy.signal.get_window(_scipy_spec(spec), n, fftbins=True).astype(dtype)
    if not np.any(w):
        raise SettingsError(
            f"The window {spec!r} of length {n} is zero everywhere, so it passes nothing. Give coefficients "
            "that are not all zero, e.g. ('general_cosine', (0.5, 0.5)), which is Hann.", field="window",
        )
    w.setflags(write=False)
    return w


def get_window(spec: WindowSpec, n: int, dtype: Any = np.float64) -> np.ndarray:
    """Periodic window of length ``n`` (read-only, cached), as ``scipy.signal.get_window``."""
    return _cached_window(spec, int(n), np.dtype(dtype).str)


# ---------------------------------------------------------------- figures of merit

#: frequency-domain figures are computed on at most this many samples; in bins they have
#: converged long before (parameters given in samples are rescaled to keep the shape)
_SHAPE_N = 8192


def _shape_spec(spec: WindowSpec, n: int, n_eff: int) -> WindowSpec:
    if n_eff == n or isinstance(spec, str):
        return spec
    name = spec[0]
    kind = WINDOWS[name]
    scaled = [
        v * n_eff / n if p.unit == "samples" else v for p, v in zip(kind.params, spec[1:])
    ]
    return (name, *scaled)


@dataclass(frozen=True)
class WindowInfo:
    """Figures of merit of a window of length ``n`` (Harris 1978, Table I quantities).

    Attributes
    ----------
    enbw_bins : float
        Equivalent noise bandwidth in DFT bins, ``n * sum(w**2) / sum(w)**2``.
    bandwidth_3db_bins, bandwidth_6db_bins : float
        Full width of the main lobe where the power response is 3 dB (6 dB) down, in bins.
    highest_sidelobe_db : float
        Level of the highest sidelobe relative to the main-lobe peak, dB (negative).
    scalloping_loss_db : float
        Amplitude loss of a tone half a bin from a bin centre, dB (positive).
    worst_case_loss_db : float
        Scalloping loss plus ``10 log10(enbw_bins)``, dB.
    coherent_gain : float
        ``sum(w) / n``; a tone of amplitude A reads ``A * coherent_gain`` before scaling.
    """

    window: WindowSpec
    n: int
    enbw_bins: float
    bandwidth_3db_bins: float
    bandwidth_6db_bins: float
    highest_sidelobe_db: float
    scalloping_loss_db: float
    coherent_gain: float
    _w: np.ndarray = field(repr=False, compare=False)

    @property
    def worst_case_loss_db(self) -> float:
        return self.scalloping_loss_db + 10 * math.log10(self.enbw_bins)

    @property
    def label(self) -> str:
        return window_label(self.window)

    def overlap_correlation(self, overlap: float) -> float:
        """Correlation of two windows shifted by one Welch step, Harris (1978) eq. (80).

        ``c = sum(w[t] w[t + D]) / sum(w**2)`` with ``D = n - floor(overlap * n)``, the same
        integer overlap the Welch estimator uses.  Rectangular at 50 % gives 0.5.
        """
        overlap = float(overlap)
        if not 0 <= overlap < 1:
            raise ValueError(f"overlap must be in [0, 1); got {overlap!r}")
        return _lag_correlation(self._w, self.n - int(math.floor(overlap * self.n)))

    def dof_rate(self, overlap: float) -> float:
        """Equivalent degrees of freedom per segment-length of record, for a long record.

        ``2 / ((1 - r) (1 + 2 sum_m c(m D)^2))``: Percival & Walden (1993) eq. (292b) in
        the limit of many segments, per ``n`` samples of data.
        """
        step = self.n - int(math.floor(overlap * self.n))
        s = 0.0
        m = 1
        while m * step < self.n:
            s += _lag_correlation(self._w, m * step) ** 2
            m += 1
        return 2.0 * self.n / (step * (1 + 2 * s))

    @property
    def recommended_overlap(self) -> float:
        """Smallest overlap giving 95 % of the degrees of freedom any overlap can give.

        Our own criterion (not a published one): the long-record degrees of freedom per
        sample, :meth:`dof_rate`, rises with overlap and saturates; more overlap past this
        point costs computation and buys less than 5 % more stability.  Searched on a
        grid of 1/64; the result is a multiple of 1/64.
        """
        grid = np.arange(0, 61) / 64.0
        rates = np.array([self.dof_rate(r) for r in grid])
        return float(grid[np.argmax(rates >= 0.95 * rates.max())])


def _lag_correlation(w: np.ndarray, shift: int) -> float:
    if shift >= w.size:
        return 0.0
    return float(np.dot(w[: w.size - shift], w[shift:]) / np.dot(w, w))


def _dtft_mag(w: np.ndarray, f_bins: float) -> float:
    n = w.size
    ph = np.exp(-2j * np.pi * f_bins * np.arange(n) / n)
    return float(abs(np.dot(w, ph)))


@functools.lru_cache(maxsize=128)
def _window_info_cached(spec: WindowSpec, n: int) -> WindowInfo:
    w_full = get_window(spec, n)
    s1 = float(w_full.sum())
    s2 = float(np.dot(w_full, w_full))
    if s1 <= 0:
        raise ValueError(f"The window {spec!r} of length {n} sums to {s1:g}; it cannot be used.")
    n_eff = min(n, _SHAPE_N)
    w = get_window(_shape_spec(spec, n, n_eff), n_eff) if n_eff != n else w_full
    pad = 32
    mag = np.abs(scipy.fft.rfft(w, pad * n_eff))
    peak = mag[0]
    # main lobe: up to the first local minimum of |W|
    # (below -6 dB, so that the ripple of a flat-top main lobe is not taken for its edge)
    d = np.diff(mag)
    rising = np.nonzero((d > 0) & (mag[:-1] < 0.5 * peak))[0]
    edge = int(rising[0]) if rising.size else mag.size - 1
    if edge + 1 < mag.size:
        k = edge + 1 + int(np.argmax(mag[edge + 1 :]))
        f0 = k / pad
        res = scipy.optimize.minimize_scalar(
            lambda f: -_dtft_mag(w, f), bounds=(max(f0 - 1 / pad, edge / pad), f0 + 1 / pad), method="bounded",
            options={"xatol": 1e-6},
        )
        side = max(-res.fun, mag[k])
        sidelobe = 20 * math.log10(side / peak) if side > 0 else -math.inf
    else:
        sidelobe = -math.inf
    w0 = _dtft_mag(w, 0.0)
    lobe = edge / pad

    def width(level_db: float) -> float:
        target = 10 ** (level_db / 20)
        g = lambda f: _dtft_mag(w, f) / w0 - target  # noqa: E731
        if g(lobe) > 0:
            return math.nan
        return 2 * scipy.optimize.brentq(g, 0.0, lobe, xtol=1e-10)

    scallop = -20 * math.log10(_dtft_mag(w, 0.5) / w0)
    return WindowInfo(
        window=spec,
        n=n,
        enbw_bins=n * s2 / s1**2,
        bandwidth_3db_bins=width(-10 * math.log10(2)),
        bandwidth_6db_bins=width(-20 * math.log10(2)),
        highest_sidelobe_db=sidelobe,
        scalloping_loss_db=scallop,
        coherent_gain=s1 / n,
        _w=w_full,
    )


def window_info(window: WindowSpec, n: int) -> WindowInfo:
    """Figures of merit of the periodic window ``window`` of length ``n``.

    Parameters
    ----------
    window : str or tuple
        A window name or ``(name, param, ...)``, as for the estimators.
    n : int
        Window length in samples (at least 2; the estimators accept segments that short).

    Examples
    --------
    >>> import specbench as sb
    >>> info = sb.window_info("hann", 1024)
    >>> round(info.enbw_bins, 3), round(info.highest_sidelobe_db, 1)
    (1.5, -31.5)
    >>> round(info.overlap_correlation(0.5), 3)
    0.167
    """
    from .._errors import SettingsError
    from ._params import settings_error

    try:
        spec = Window().check(window)
    except ValueError as e:
        raise settings_error("window_info", "window", Window().describe(), window, str(e)) from None
    try:
        n = Interval(int, 2, None).check(n)
    except ValueError:
        raise settings_error("window_info", "n", "an integer in the range [2, inf)", n) from None
    try:
        return _window_info_cached(spec, n)
    except ValueError as e:
        raise SettingsError(str(e)) from None
