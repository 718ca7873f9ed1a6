"""The one place where a parsed record becomes a :class:`Signal`.

Every source (files, DataFrames, DataArrays) hands over a :class:`Record`: the sample
columns, their names and units, an optional time axis and an optional sample rate found
in the file.  :func:`assemble` applies the user's choices and all the checks: channel
selection, sample rate (given, from the file, or inferred from timestamps), gaps,
non-finite samples and the minimum length.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._errors import InputError
from ._signal import Signal, _check_rate, format_positions
from ._timebase import DEFAULT_MAX_JITTER, GAP_POLICIES, TimeAxis, fit_timebase

__all__ = ["Record", "assemble", "select_columns", "MIN_SAMPLES"]

#: Fewest samples a loaded record may have.  Two points give one interval and no check
#: of the rate; a record that short is nearly always a file cut off or misread.
MIN_SAMPLES = 3


@dataclass
class Record:
    """What a reader found, before the user's choices and the checks are applied."""

    data: np.ndarray  # (channels, rows), no copy of a memory map
    label: str  # "run.csv", "DataFrame": names the source in messages
    names: Sequence[str] | None = None
    units: Sequence[str] | None = None
    time: TimeAxis | None = None
    start: np.datetime64 | None = None
    t0: float = 0.0
    fs: float | None = None  # a rate stated by the file (header, attribute)
    fs_note: str = ""  # where that rate is stated
    notes: list[str] = field(default_factory=list)
    where: Callable[[int], str] | None = None  # row -> "line 12 of run.csv"
    scan: bool = True  # check non-finite values now (False for memory maps)
    rate_hint: str = "fs="  # what to pass when no rate is known


def select_columns(available: Sequence[str], channels: Sequence[str | int] | str | int | None,
                   label: str, reserved: dict[str, str] | None = None) -> list[int]:
    """Indices of the requested ``channels`` among ``available`` column names."""
    if channels is None:
        return list(range(len(available)))
    if isinstance(channels, (str, int, float, bool, np.generic)) or not hasattr(channels, "__iter__"):
        channels = [channels]
    picked = []
    for c in channels:
        if isinstance(c, str):
            if reserved and c in reserved:
                raise InputError(f"{c!r} in {label} is {reserved[c]}, not a channel. Pass "
                                 "time_column=False to load it as a channel.")
            if c not in available:
                raise InputError(f"{label} has no channel {c!r}; its channels are "
                                 f"{list(available)}. Pass names (or indices) from that list.")
            picked.append(list(available).index(c))
        elif isinstance(c, (int, np.integer)) and not isinstance(c, bool):
            if not -len(available) <= c < len(available):
                raise InputError(f"Channel index {c} is out of range: {label} has "
                                 f"{len(available)} channels {list(available)}.")
            picked.append(int(c) % len(available))
        else:
            kind = type(c).__name__
            raise InputError(f"channels= takes names (str) or whole-number indices (int); got {c!r} "
                             f"(a {kind}). A fractional or boolean index is never rounded: pass "
                             f"an index such as 0 or a name from {list(available)}.")
    if len(set(picked)) != len(picked):
        raise InputError(f"channels={list(channels)} names a channel twice. Name each once.")
    if not picked:
        raise InputError(f"channels=[] selects no channel of {label}. Name at least one of "
                         f"{list(available)}, or leave channels out to load them all.")
    return picked


def assemble(
    rec: Record,
    *,
    fs: float | None,
    unit: str | Sequence[str] | None,
    on_gap: str,
    max_jitter: float = DEFAULT_MAX_JITTER,
    origin: dict | None = None,
    check_shape: bool = False,
) -> Signal:
    """Apply the checks and build the Signal (see the module docstring)."""
    if on_gap not in GAP_POLICIES:
        raise InputError(f"on_gap must be one of {GAP_POLICIES}; got {on_gap!r}. 'error' "
                         "stops at gaps and non-finite samples, 'fill' keeps them as NaN.")
    data = rec.data
    n_ch, n = data.shape
    notes = list(rec.notes)
    if fs is not None:
        fs = _check_rate(fs)
    if check_shape and n_ch > n:
        raise InputError(
            f"{rec.label} holds an array of {n_ch} channels x {n} samples: more channels "
            "than samples, so the axes are probably swapped. Pass axis=0 if the samples "
            "run down the rows (shape (samples, channels))."
        )
    if n < MIN_SAMPLES:
        raise InputError(
            f"{rec.label} holds {n} sample{'s' if n != 1 else ''} per channel; at least "
            f"{MIN_SAMPLES} are needed to load a record (a spectrum needs many more). "
            "Check that the file is complete and that its layout was read right."
        )
    if rec.fs is not None and fs is not None and not np.isclose(rec.fs, fs, rtol=1e-9):
        raise InputError(
            f"fs={fs:.10g} Hz was given, but {rec.fs_note} says {rec.fs:.10g} Hz. Leave fs "
            f"out to use the file's rate; if the file is wrong, load it without fs and call "
            f".with_fs({fs:.10g}) on the result."
        )
    positions = None
    if rec.time is not None:
        tb = fit_timebase(rec.time, fs=fs, on_gap=on_gap, max_jitter=max_jitter)
        rate = tb.fs
        notes.append(tb.summary)
        positions = tb.positions
    elif fs is not None:
        rate = fs
        notes.append(f"fs {fs:.10g} Hz as given")
    elif rec.fs is not None:
        rate = rec.fs
        notes.append(f"fs {rate:.10g} Hz from {rec.fs_note}")
    else:
        raise InputError(
            f"{rec.label} states no sample rate. Pass "
            + rec.rate_hint.replace("fs=", "fs=<samples per second>", 1).replace(
                "time_column=", "time_column=<name of the time column>", 1)
            + "."
        )
    names = list(rec.names) if rec.names is not None else [f"ch{i}" for i in range(n_ch)]
    if rec.scan:
        _check_finite(data, rec, names, on_gap, notes)
    if positions is not None:
        full = np.full((n_ch, int(positions[-1]) + 1), np.nan,
                       dtype=np.result_type(data.dtype, np.float32))
        full[:, positions] = data
        data = full
    if unit is None:
        units = list(rec.units) if rec.units is not None else [""] * n_ch
        unit = units[0] if len(set(units)) <= 1 else tuple(units)
    source = f"{rec.label}: " + "; ".join(notes)
    return Signal(data, rate, channels=names, unit=unit, t0=rec.t0, source=source,
                  origin=origin, start=rec.start)


def _check_finite(data: np.ndarray, rec: Record, names: list[str], on_gap: str,
                  notes: list[str]) -> None:
    if data.dtype.kind not in "fc":
        return
    bad = ~np.isfinite(data)
    count = int(np.count_nonzero(bad))
    if not count:
        return
    if on_gap == "fill":
        notes.append(f"{count} non-finite sample{'s' if count != 1 else ''} kept as gaps")
        return
    rows = np.flatnonzero(bad.any(axis=0))[:6]
    where = rec.where or (lambda r: f"sample {r}")
    places = []
    for r in rows:
        for c in np.flatnonzero(bad[:, r]):
            places.append(f"{where(int(r))} channel {names[c]!r} ({_value(data[c, r])})")
    raise InputError(
        f"{rec.label} has {count} non-finite value{'s' if count != 1 else ''} (NaN, inf or "
        f"empty cells), first at {format_positions(places)}. Non-finite samples cannot be "
        "estimated. Repair them, or pass on_gap='fill' to keep them as gaps and estimate "
        "with sb.Welch(gaps='skip'), which leaves out the segments that touch them."
    )


def _value(x: Any) -> str:
    return "NaN" if np.isnan(x) else ("+inf" if x > 0 else "-inf")
