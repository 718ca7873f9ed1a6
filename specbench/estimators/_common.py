"""Shared field declarations and call plumbing of the spectral and correlation estimators."""

from __future__ import annotations

import math
import time
from typing import Any

import numpy as np

from .._errors import InputError
from ._engine import as_2d, read_span
from ._input import Samples, as_samples
from ._params import Interval, Optional, Options, param
from .windows import Window

DETREND = ("none", "constant", "linear")

#: largest FFT length a setting may ask for (2**24; a record longer than that needs no padding)
NFFT_MAX = 1 << 24


def window_field(default: str) -> Any:
    return param(
        default,
        Window(),
        label="Window",
        group="window",
        help="Taper applied to each segment: a name, or (name, parameter) for windows that take one.",
    )


def detrend_field(default: str = "constant") -> Any:
    return param(
        default,
        Options(DETREND),
        label="Detrend",
        group="data",
        help="Removed from each segment before windowing: nothing, its mean, or its least-squares line.",
    )


def scaling_field() -> Any:
    return param(
        "density",
        Options(("density", "spectrum")),
        label="Scaling",
        group="display",
        help="density: unit^2/Hz (noise levels); spectrum: unit^2 (a sine of amplitude A reads A^2/2).",
    )


def sides_field() -> Any:
    return param(
        "auto",
        Options(("auto", "onesided", "twosided")),
        label="Sides",
        group="display",
        help="auto: one-sided for real data, two-sided for complex data.",
    )


def nfft_field(help_text: str) -> Any:
    return param(
        None,
        Optional(Interval(int, 2, NFFT_MAX), "no zero padding"),
        label="FFT length",
        unit="samples",
        scale="log2",
        group="window",
        help=help_text,
        fix=f"Zero padding beyond 2**24 = {NFFT_MAX:,} bins only interpolates and needs gigabytes per segment.",
    )


def segment_length_field(default: int = 1024) -> Any:
    return param(
        default,
        Interval(int, 4, None),
        label="Segment length",
        unit="samples",
        scale="log2",
        group="window",
        help="Samples per segment: longer gives finer resolution and fewer averages.",
    )


def overlap_field(default: float = 0.5) -> Any:
    return param(
        default,
        Interval(float, 0, 1, closed="left"),
        label="Overlap",
        group="window",
        help="Fraction of each segment shared with the next.",
    )


def gaps_skip_field() -> Any:
    """``gaps="error" | "skip"`` of the segment-averaging estimators (one data-strip control)."""
    return param(
        "error",
        Options(("error", "skip")),
        label="Gaps",
        group="data",
        help="error: non-finite samples are an error; skip: leave out segments that touch them.",
    )


def confidence_field() -> Any:
    return param(
        0.95,
        Interval(float, 0, 1, closed="neither"),
        label="Confidence",
        group="band",
        help="Probability that the band covers the true spectrum at a given frequency.",
    )


def samples_of(x: Any, fs: Any, min_samples: int = 2) -> tuple[Samples, np.ndarray]:
    s = as_samples(x, fs, min_samples=min_samples)
    return s, as_2d(s.data)


def onesided_for(sides: str, x: np.ndarray, owner: str) -> bool:
    cplx = np.iscomplexobj(x)
    if sides == "onesided" and cplx:
        raise InputError(
            f"{owner}(sides='onesided') cannot be used on complex data: its negative "
            "frequencies differ from the positive ones. Use sides='twosided' or 'auto'."
        )
    return sides == "onesided" or (sides == "auto" and not cplx)


def finite_failure(x: np.ndarray, owner: str) -> InputError:
    """Error for finite data whose estimate is not finite: power overflow or constant data."""
    n = x.shape[-1]
    peak = 0.0
    chunk = 1 << 20
    for t0 in range(0, n, chunk):
        part = np.abs(x[:, t0 : t0 + chunk])
        if part.size:
            peak = max(peak, float(np.max(part)))
    kind = x.dtype if x.dtype.kind in "fc" else np.dtype(np.float64)
    big = float(np.finfo(kind).max)
    if peak * peak * max(n, 1) >= big or not np.isfinite(peak * peak * max(n, 1)):
        single = kind in (np.dtype(np.float32), np.dtype(np.complex64))
        fix = (f"Convert to double precision (x.astype(np.float64)) or scale the data, e.g. x / {peak:.0e}"
               if single else
               f"Scale the data before estimating, e.g. x / {peak:.0e}, and multiply the PSD by the square")
        return InputError(
            f"The data are finite, but their power overflows: the largest |sample| is {peak:.3g}, and its square "
            f"summed over {n:,} samples exceeds the largest {kind.name} number ({big:.3g}). {owner} cannot "
            f"estimate it as given. {fix}."
        )
    spread = np.array([float(np.ptp(x[c])) if n else 0.0 for c in range(x.shape[0])])
    if np.any(spread == 0):
        c = int(np.nonzero(spread == 0)[0][0])
        where = f"Channel {c} is" if x.shape[0] > 1 else "The data are"
        return InputError(
            f"{where} constant (every sample equals {complex(x[c, 0]) if np.iscomplexobj(x) else float(x[c, 0]):g}): "
            f"a constant has no spectrum to estimate, and {owner} divides by the data's variance, which is zero. "
            "Check the channel (a disconnected sensor reads constant) or leave it out."
        )
    return InputError(
        f"The data are finite (largest |sample| {peak:.3g}), but {owner} produced a non-finite estimate. "
        f"Scale the data (e.g. x / {max(peak, 1e-300):.0e}) or check the settings."
    )


def zero_variance_error(x: np.ndarray, r0: np.ndarray, owner: str, names: Any = None) -> InputError | None:
    """Error for channels whose variance after detrending is zero (constant data), else None."""
    bad = np.nonzero(~(np.asarray(r0, dtype=float).ravel() > 0))[0]
    if bad.size == 0:
        return None
    c = int(bad[0])
    label = f"channel {names[c]!r}" if names else (f"channel {c}" if x.shape[0] > 1 else "the data")
    return InputError(
        f"{owner}: {label} has zero variance after detrending (constant data), so its correlation "
        "is undefined (0/0) and its bands would be NaN. Check the channel (a disconnected sensor "
        "reads constant) or leave it out."
    )


def memory_budget() -> int:
    """Bytes one estimate may allocate beyond its input: a quarter of the machine's memory."""
    import os

    try:
        total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        total = 16 << 30
    return int(total // 4)


def nonfinite_error(x: np.ndarray, owner: str, limit: int | None = None) -> InputError:
    """Error naming the count and first positions of non-finite samples in ``x[:, :limit]``.

    Finite data whose estimate is not finite (overflow, constant data) get
    :func:`finite_failure` instead.
    """
    x = x[:, :limit] if limit is not None else x
    bad_pos = []
    count = 0
    chunk = 1 << 20
    for t0 in range(0, x.shape[-1], chunk):
        bad = ~np.isfinite(read_span(x, t0, t0 + chunk))  # dask: one chunk at a time
        count += int(bad.sum())
        if len(bad_pos) < 5:
            ch, idx = np.nonzero(bad)
            order = np.argsort(idx, kind="stable")[: 5 - len(bad_pos)]
            bad_pos.extend((int(c), int(i) + t0) for c, i in zip(ch[order], idx[order]))
    if count == 0:
        return finite_failure(x, owner)
    where = ", ".join(f"sample {i}" + (f" of channel {c}" if x.shape[0] > 1 else "") for c, i in bad_pos)
    fix = "Choose a span without them, or fill or interpolate them yourself"
    if owner in ("Welch", "CrossSpectrum"):
        fix += f", or use sb.{owner}(gaps='skip') to leave out the segments that touch them."
    elif owner in ("Autocorrelation", "CrossCorrelation", "Covariance"):
        fix += f", or use sb.{owner}(gaps='pairs') to use only the pairs of samples both present."
    else:
        fix += "; sb.Welch(gaps='skip') can estimate the PSD around them."
    return InputError(
        f"The data has {count} non-finite sample{'s' if count != 1 else ''} (NaN or inf), "
        f"first at {where}. {owner} cannot estimate through them. {fix}"
    )


def check_finite_result(value: np.ndarray, x: np.ndarray, owner: str, limit: int) -> None:
    """Non-finite input shows up as a non-finite result; then find and name the samples."""
    if not np.all(np.isfinite(value)):
        raise nonfinite_error(x, owner, limit)


def restore_shape(arr: np.ndarray, lead: tuple[int, ...]) -> np.ndarray:
    """(C, m) -> lead + (m,) ; 1-D input gives 1-D output."""
    return arr.reshape(lead + arr.shape[-1:])


def too_short(owner: str, what: str, need: int, n: int, fix: str) -> InputError:
    return InputError(
        f"The {what} of {owner} is {need} samples, but the data has only {n}. {fix}", field=what, owner=owner
    )


class Timer:
    def __enter__(self):
        self.t0 = time.perf_counter()
        return self

    def __exit__(self, *exc):
        self.seconds = time.perf_counter() - self.t0


def next_pow2(n: int) -> int:
    return 1 << max(0, math.ceil(math.log2(max(1, n))))
