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
        Optional(Interval(int, 2, None), "no zero padding"),
        label="FFT length",
        unit="samples",
        scale="log2",
        group="window",
        help=help_text,
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


def nonfinite_error(x: np.ndarray, owner: str, limit: int | None = None) -> InputError:
    """Error naming the count and first positions of non-finite samples in ``x[:, :limit]``."""
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
    where = ", ".join(f"sample {i}" + (f" of channel {c}" if x.shape[0] > 1 else "") for c, i in bad_pos)
    fix = "Choose a span without them, or fill or interpolate them yourself"
    fix += (", or use sb.Welch(gaps='skip') to leave out the segments that touch them." if owner == "Welch"
            else "; sb.Welch(gaps='skip') can estimate the PSD around them.")
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
