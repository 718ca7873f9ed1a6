"""Which channels a cross-channel estimate works on: ``x, y=None, fs=, pair=`` resolved once,
with one set of messages, for every cross estimator (CrossSpectrum, CrossCorrelation)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import InputError
from ._engine import as_2d
from ._input import _is_signal_like, as_samples

__all__ = ["Channels", "select_channels"]


@dataclass(frozen=True)
class Channels:
    """The channels one cross estimate works on (1-D views of the caller's data)."""

    data: list
    names: tuple
    units: tuple
    fs: float
    matrix: bool  # all channels (no pair chosen)


def _channel_index(key: Any, names: tuple, count: int) -> int:
    if isinstance(key, str):
        if key not in names:
            raise InputError(
                f"No channel named {key!r}; the channels are {list(names)}. "
                "Name one of them in pair=(a, b), or give channel indices."
            )
        return names.index(key)
    if isinstance(key, (int, np.integer)) and not isinstance(key, bool):
        if not -count <= int(key) < count:
            raise InputError(
                f"Channel index {key} is out of range for data with {count} channels; "
                f"use 0 to {count - 1} (or the names {list(names)})."
            )
        return int(key) % count
    raise InputError(f"A channel in pair= must be a name or an index; got {key!r}.")


def _unit_list(unit: Any, count: int) -> tuple:
    return tuple(unit) if isinstance(unit, tuple) else (unit,) * count


def select_channels(owner: str, x: Any, y: Any, fs: Any, pair: Any, *, allow_matrix: bool) -> Channels:
    """Resolve ``x, y=None, fs=, pair=`` into channels, with the errors of the trade."""
    sx = as_samples(x, fs)
    if y is not None:
        if pair is not None:
            raise InputError(f"{owner}: give either y= or pair=, not both.")
        sy = as_samples(y, fs if fs is not None or _is_signal_like(y) else sx.fs)
        if sy.fs != sx.fs:
            raise InputError(
                f"x is sampled at {sx.fs:g} Hz and y at {sy.fs:g} Hz; {owner} needs simultaneous "
                "samples at one rate. Resample one of them first."
            )
        a, b = as_2d(sx.data), as_2d(sy.data)
        if a.shape[0] != 1 or b.shape[0] != 1:
            raise InputError(
                f"{owner}(x, y): x has {a.shape[0]} and y has {b.shape[0]} channels; pass one "
                "channel each, or one multichannel signal with pair=(a, b)."
            )
        if a.shape[-1] != b.shape[-1]:
            raise InputError(
                f"x has {a.shape[-1]} samples and y has {b.shape[-1]}; {owner} needs "
                "simultaneous records of equal length. Cut both to the same span."
            )
        names = ((sx.channels or ("x",))[0], (sy.channels or ("y",))[0])
        units = (_unit_list(sx.unit, 1)[0], _unit_list(sy.unit, 1)[0])
        return Channels([a[0], b[0]], names, units, sx.fs, False)
    data = as_2d(sx.data)
    count = data.shape[0]
    names = sx.channels or tuple(str(i) for i in range(count))
    units = _unit_list(sx.unit, count)
    if isinstance(pair, str) and pair == "all" and allow_matrix:
        if count < 2:
            raise InputError(
                f"{owner} needs two channels, but the data has {count}. Pass a second signal "
                "as y=, or a multichannel signal (channels on the leading axis).", field="channel"
            )
        return Channels([data[i] for i in range(count)], tuple(names), units, sx.fs, True)
    if pair is None:
        if count < 2:
            raise InputError(
                f"{owner} needs two channels, but the data has {count}. Pass a second signal "
                "as y=, or a multichannel signal (channels on the leading axis)."
            )
        if not allow_matrix and count != 2:
            raise InputError(
                f"The data has {count} channels; say which two to use with pair=(a, b) "
                f"(names {list(names)} or indices)."
            )
        return Channels([data[i] for i in range(count)], tuple(names), units, sx.fs, count > 2)
    if not isinstance(pair, (tuple, list)) or len(pair) != 2:
        raise InputError(f"pair= must name two channels, like pair=({names[0]!r}, {names[-1]!r}); got {pair!r}.")
    if count < 2:
        raise InputError(
            f"{owner} needs two channels, but the data has only {count} ({list(names)}). Pass a "
            "second signal as y=."
        )
    i, j = (_channel_index(p, tuple(names), count) for p in pair)
    if i == j:
        raise InputError(
            f"pair={tuple(pair)!r} names channel {names[i]!r} twice; choose two different channels."
        )
    return Channels([data[i], data[j]], (names[i], names[j]), (units[i], units[j]), sx.fs, False)
