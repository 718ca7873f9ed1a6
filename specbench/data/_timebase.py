"""Sample rate from timestamps: fit a uniform grid, measure the jitter, find the gaps.

Method (common practice for logger files):

1. The timestamps must increase strictly; a decrease or a repeat is an error.
2. A first interval is the median of the differences (robust to gaps); every difference
   is rounded to a whole number of intervals, which places each row on a sample grid
   ``k`` (a gap of ``m`` missing samples is a step of ``m + 1``).
3. The interval is refined by a least-squares fit of the timestamps against ``k`` (all
   rows, so timestamps quantised to a coarse resolution still give the mean rate), and
   the rounding of step 2 is repeated with it.
4. The jitter is the deviation of each timestamp from the fitted grid, in sample
   intervals; beyond ``max_jitter`` it is an error naming the worst row.
5. The rate is reported as the shortest decimal number that agrees with the fit within
   its uncertainty (three standard errors of the fitted interval, and never finer than
   the floating-point resolution of the timestamps), so a 250 Hz record gives 250.0 and
   not 249.99999999999997.  The fitted value, jitter and the grid are stated in the
   summary that goes into ``Signal.source``.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .._errors import InputError
from ._signal import format_positions
from ._text import split_unit

__all__ = ["GAP_POLICIES", "TimeAxis", "Timebase", "fit_timebase", "DEFAULT_MAX_JITTER",
           "TIME_UNITS", "time_axis", "find_time_column"]

GAP_POLICIES = ("error", "fill")

#: Largest accepted deviation of a timestamp from the fitted uniform grid, as a fraction
#: of the sample interval.  Beyond 0.5 a row could not be told from its neighbour's slot.
DEFAULT_MAX_JITTER = 0.25


@dataclass(frozen=True)
class TimeAxis:
    """Timestamps of the rows of a record, with what is needed to talk about them.

    ``values`` are numbers (float or int64) in units of ``tick`` seconds; ``label``
    names the column (``"time column 't'"``); ``row(i)`` says where row ``i`` is in the
    user's terms (``"line 12 of run.csv"``); ``stamp(i)`` renders its timestamp.
    """

    values: np.ndarray
    tick: float
    label: str
    row: Callable[[int], str]
    stamp: Callable[[int], str]


@dataclass(frozen=True)
class Timebase:
    """Result of :func:`fit_timebase`."""

    fs: float
    positions: np.ndarray | None  # grid index of every row, None when there is no gap
    n_grid: int  # number of grid samples from the first to the last row
    n_missing: int
    n_gaps: int
    jitter_rms: float  # fraction of the interval
    jitter_max: float
    summary: str


def fit_timebase(
    axis: TimeAxis,
    *,
    fs: float | None = None,
    on_gap: str = "error",
    max_jitter: float = DEFAULT_MAX_JITTER,
) -> Timebase:
    """Fit a uniform sample grid to the timestamps of ``axis``.

    Parameters
    ----------
    axis : TimeAxis
        The timestamps and how to name their rows.
    fs : float, optional
        A sample rate given by the user (Hz).  The timestamps are then checked against
        it instead of being used to infer it.
    on_gap : {"error", "fill"}
        ``"error"`` raises :class:`InputError` naming the largest gap; ``"fill"`` returns
        the grid position of every row so that the caller can put NaN in the missing
        places.
    max_jitter : float
        Largest accepted deviation of a timestamp from the fitted grid, as a fraction of
        the sample interval (0 < max_jitter < 0.5).
    """
    if on_gap not in GAP_POLICIES:
        raise InputError(f"on_gap must be one of {GAP_POLICIES}; got {on_gap!r}.")
    if not 0 < max_jitter < 0.5:
        raise InputError(
            f"max_jitter must lie in (0, 0.5) sample intervals; got {max_jitter!r}. Beyond "
            "half an interval a timestamp cannot be assigned to one sample."
        )
    t = np.asarray(axis.values)
    n = t.size
    if n < 3:
        raise InputError(
            f"The {axis.label} has {n} timestamp{'s' if n != 1 else ''}; inferring a sample "
            "rate and checking its jitter needs at least 3. Pass fs=<samples per second> "
            "for so short a record."
        )
    if t.dtype.kind == "f":
        bad = np.flatnonzero(~np.isfinite(t))
        if bad.size:
            raise InputError(
                f"The {axis.label} has {bad.size} missing or non-finite value"
                f"{'s' if bad.size != 1 else ''}, first at {axis.row(int(bad[0]))}. "
                "Every row needs a timestamp: repair those rows, or drop the time column "
                "(time_column=False) and pass fs=."
            )
    t_abs = float(np.max(np.abs(t))) if t.dtype.kind == "f" else 0.0
    t = t - t[0]  # exact for integer ticks; keeps float precision near the start
    d = np.diff(t)
    _check_order(d, axis)
    tick = axis.tick
    given = fs is not None
    if given:
        step = 1.0 / (fs * tick)
        k = _grid(d, step)
        fit_step, _, _ = _fit(t, k)
        resid = _residuals(t, k, step)
    else:
        k = _grid(d, float(np.median(d)))
        step, se, resid = _fit(t, k)
        k2 = _grid(d, step)  # refine: a quantised median can be off by a fraction
        if not np.array_equal(k2, k):
            k = k2
            step, se, resid = _fit(t, k)
        fit_step = step
    resid /= step  # in sample intervals
    worst = int(np.argmax(np.abs(resid)))
    jitter_max = float(abs(resid[worst]))
    jitter_rms = float(np.sqrt(np.dot(resid, resid) / resid.size))
    if jitter_max > max_jitter:
        _raise_jitter(axis, fs, fit_step, tick, resid, worst, max_jitter)
    if not given:
        fs = _round_rate(step, se, t_abs, int(k[-1]), tick)
    steps = np.diff(k)
    gaps = np.flatnonzero(steps > 1)
    n_missing = int(np.sum(steps[gaps] - 1)) if gaps.size else 0
    if gaps.size and on_gap == "error":
        _raise_gap(axis, fs, steps, gaps, n_missing)
    if n_missing > max(10 * n, 10_000_000):
        big = int(gaps[np.argmax(steps[gaps])])
        raise InputError(
            f"Filling the gaps of the {axis.label} would add {n_missing:,} NaN samples to "
            f"{n:,} real ones; the largest gap follows {axis.stamp(big)} at {axis.row(big)}. "
            "A timestamp that far off is more likely an error than a pause: check that row, "
            "or load the parts before and after it separately."
        )
    how = "as given, consistent with" if given else "from"
    summary = (f"fs {fs:.10g} Hz {how} the {axis.label} (interval {1 / fs:.6g} s, jitter "
               f"rms {jitter_rms:.2g} max {jitter_max:.2g} of an interval)")
    if gaps.size:
        summary += (f"; {gaps.size} gap{'s' if gaps.size != 1 else ''} filled with "
                    f"{n_missing} NaN sample{'s' if n_missing != 1 else ''}")
    return Timebase(
        fs=float(fs),
        positions=k if gaps.size else None,
        n_grid=int(k[-1]) + 1,
        n_missing=n_missing,
        n_gaps=int(gaps.size),
        jitter_rms=jitter_rms,
        jitter_max=jitter_max,
        summary=summary,
    )


def _check_order(d: np.ndarray, axis: TimeAxis) -> None:
    down = np.flatnonzero(d < 0)
    if down.size:
        i = int(down[0])
        raise InputError(
            f"The {axis.label} decreases: {axis.stamp(i)} at {axis.row(i)} is followed by "
            f"{axis.stamp(i + 1)} at {axis.row(i + 1)} ({down.size} decrease"
            f"{'s' if down.size != 1 else ''} in all). Sort the rows by time if they were "
            "shuffled; if the file joins several records, load them separately."
        )
    same = np.flatnonzero(d == 0)
    if same.size:
        i = int(same[0])
        raise InputError(
            f"The {axis.label} repeats {axis.stamp(i)} at {axis.row(i)} and "
            f"{axis.row(i + 1)} ({same.size} duplicate timestamp"
            f"{'s' if same.size != 1 else ''} in all). Remove duplicated rows; if the "
            "timestamps are too coarse for the rate, pass time_column=False with fs=."
        )


def _grid(d: np.ndarray, step: float) -> np.ndarray:
    steps = np.rint(d / step).astype(np.int64)
    k = np.empty(d.size + 1, dtype=np.int64)
    k[0] = 0
    np.cumsum(steps, out=k[1:])
    return k


def _fit(t: np.ndarray, k: np.ndarray) -> tuple[float, float, np.ndarray]:
    """Least-squares slope of ``t`` against ``k``, its standard error and the residuals.

    Written with few temporaries: on this kind of machine fresh memory costs more time
    than the arithmetic.
    """
    kc = k.astype(np.float64)
    kc -= kc.mean()
    resid = t.astype(np.float64)  # a copy
    resid -= resid.mean()
    sxx = float(np.dot(kc, kc))
    slope = float(np.dot(kc, resid)) / sxx
    kc *= slope
    resid -= kc
    se = float(np.sqrt(np.dot(resid, resid) / max(k.size - 2, 1) / sxx))
    return slope, se, resid


def _residuals(t: np.ndarray, k: np.ndarray, step: float) -> np.ndarray:
    """Deviations of ``t`` from the grid ``offset + step * k`` with the best offset."""
    resid = k.astype(np.float64)
    resid *= -step
    resid += t
    resid -= resid.mean()
    return resid


def _round_rate(step: float, se: float, t_abs: float, k_max: int, tick: float) -> float:
    """Shortest decimal rate (or interval) within the uncertainty of the fitted step."""
    eps = np.finfo(np.float64).eps
    u = max(3.0 * se, 8.0 * eps * max(t_abs, 1.0) / max(k_max, 1), 4.0 * eps * step)
    fs_hat = 1.0 / (step * tick)
    dt_hat = step * tick
    rel = u / step
    for digits in range(1, 17):
        for candidate in (float(f"{fs_hat:.{digits - 1}e}"),
                          1.0 / float(f"{dt_hat:.{digits - 1}e}")):
            if abs(candidate - fs_hat) <= rel * fs_hat:
                return candidate
    return fs_hat


def _raise_jitter(axis: TimeAxis, fs: float | None, fit_step: float, tick: float,
                  resid: np.ndarray, worst: int, max_jitter: float) -> None:
    where = f"{axis.stamp(worst)} at {axis.row(worst)}"
    dev = resid[worst]
    if fs is not None:
        rate = 1.0 / (fit_step * tick)
        if abs(rate - fs) > 1e-6 * fs:
            raise InputError(
                f"fs={fs:.10g} Hz was given, but the {axis.label} advances at {rate:.10g} Hz: "
                f"against the given rate the timestamps drift by {dev:+.3g} sample intervals "
                f"by {where}, beyond the tolerance max_jitter={max_jitter:g}. Leave fs out "
                "to use the rate of the timestamps; if fs is right and the timestamps are "
                "wrong, ignore them with time_column=False (and channels=[...])."
            )
    raise InputError(
        f"The {axis.label} is not uniform: {where} lies {dev:+.3g} sample intervals off the "
        f"fitted grid (rms over all rows {np.sqrt(np.mean(resid**2)):.3g}), beyond the "
        f"tolerance max_jitter={max_jitter:g} (a fraction of the sample interval). If the "
        "samples are uniform and only the timestamps are noisy, raise max_jitter (below "
        "0.5) or ignore the timestamps with time_column=False and pass fs=; otherwise "
        "resample the record onto a uniform grid first."
    )


def _raise_gap(axis: TimeAxis, fs: float, steps: np.ndarray, gaps: np.ndarray,
               n_missing: int) -> None:
    big = int(gaps[np.argmax(steps[gaps])])
    missing = int(steps[big] - 1)
    others = (f" Gaps follow {format_positions([axis.row(int(g)) for g in gaps[:6]])}."
              if gaps.size > 1 else "")
    raise InputError(
        f"The {axis.label} has {gaps.size} gap{'s' if gaps.size != 1 else ''} "
        f"({n_missing} missing sample{'s' if n_missing != 1 else ''} at {fs:.10g} Hz). The "
        f"largest follows {axis.stamp(big)} at {axis.row(big)}: {missing} sample"
        f"{'s' if missing != 1 else ''} ({missing / fs:.6g} s) missing before "
        f"{axis.stamp(big + 1)}.{others} Pass on_gap='fill' to put NaN at "
        "the missing sample positions (then estimate with sb.Welch(gaps='skip'), which "
        "leaves out the segments that touch them), or pass fs= explicitly if the median "
        "interval is not the sample interval."
    )


# -- building a time axis from a column, an index or a coordinate ------------------------
#: Time units accepted in a header ("time [ms]") and their length in seconds.
TIME_UNITS = {"s": 1.0, "sec": 1.0, "secs": 1.0, "second": 1.0, "seconds": 1.0,
              "ms": 1e-3, "msec": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "usec": 1e-6,
              "ns": 1e-9, "min": 60.0, "h": 3600.0}


def time_axis(values, *, label: str, row: Callable[[int], str],
              unit: str = "") -> tuple[TimeAxis, np.datetime64 | None, float]:
    """Make a :class:`TimeAxis` from timestamps of any common kind.

    ``values`` may be numbers (seconds, or ``unit`` from :data:`TIME_UNITS`),
    ``datetime64``/``timedelta64`` values, or ISO 8601 date strings.  Returns the axis,
    the absolute start (for calendar times, else None) and the start in seconds (0 for
    calendar times, whose absolute start goes into ``Signal.start``).
    """
    arr = np.asarray(values)
    if arr.dtype.kind == "O" or arr.dtype.kind in "US":
        arr = _parse_dates(arr, label, row)
    if arr.dtype.kind == "M":
        ns = arr.astype("datetime64[ns]")
        ticks = ns.view(np.int64)
        if (ns != ns).any():  # NaT
            i = int(np.flatnonzero(ns != ns)[0])
            raise InputError(f"The {label} has a missing timestamp (NaT) at {row(i)}. Every "
                             "row needs a timestamp: repair it, or pass time_column=False "
                             "with fs=.")

        def stamp(i: int) -> str:
            return f"time {np.datetime_as_string(ns[i], unit='auto')}"

        return TimeAxis(ticks, 1e-9, label, row, stamp), ns[0], 0.0
    if arr.dtype.kind == "m":
        ticks = arr.astype("timedelta64[ns]").view(np.int64)
        axis = TimeAxis(ticks, 1e-9, label, row, lambda i: f"t = {ticks[i] * 1e-9:.9g} s")
        return axis, None, float(ticks[0]) * 1e-9
    if arr.dtype.kind not in "iuf":
        raise InputError(f"The {label} has values of type {arr.dtype}, which are not times. "
                         "Pass time_column= naming a column of numbers or dates, or "
                         "time_column=False with fs=.")
    if unit and unit not in TIME_UNITS:
        raise InputError(
            f"The {label} has the unit {unit!r}, which is not a time unit "
            f"({', '.join(sorted(TIME_UNITS))}). Rename the unit in the header, or pass "
            "time_column=False with fs= to ignore it."
        )
    tick = TIME_UNITS.get(unit, 1.0)
    vals = arr if arr.dtype.kind == "f" else arr.astype(np.int64)
    suffix = unit or "s"

    def stamp_num(i: int) -> str:
        return f"t = {vals[i]:.9g} {suffix}"

    return TimeAxis(vals, tick, label, row, stamp_num), None, float(vals[0]) * tick


def _parse_dates(arr: np.ndarray, label: str, row: Callable[[int], str]) -> np.ndarray:
    try:
        import pandas as pd
    except ImportError:
        pd = None
    try:
        if pd is not None:
            return pd.to_datetime(arr, format="ISO8601").to_numpy(dtype="datetime64[ns]")
        return arr.astype("datetime64[ns]")
    except (ValueError, TypeError):
        pass
    for i, cell in enumerate(arr):  # find the cell to name
        try:
            np.datetime64(str(cell).strip().replace(" ", "T", 1), "ns")
        except ValueError:
            raise InputError(
                f"The {label} holds {cell!r} at {row(i)}, which is neither a number nor an "
                "ISO 8601 date-time (2024-05-01T12:00:00.000). Repair the cell, or pass "
                "time_column=False with fs= to ignore the column."
            ) from None
    raise InputError(f"The {label} could not be read as ISO 8601 date-times. Pass "
                     "time_column=False with fs= to ignore it.")


#: Column names taken for a time column when time_column is not given (any case; an
#: optional unit suffix such as ``_ms`` or a bracketed unit such as ``"Time [s]"``).
_TIME_NAME = re.compile(r"^(?:t|time|times|timestamps?|datetime|date_?time|elapsed(?:_?time)?)"
                        r"(?:[ _-]?(?:s|ms|us|ns|sec|secs|seconds))?$", re.IGNORECASE)


def find_time_column(names, time_column, label: str) -> tuple[int | None, str]:
    """Index of the time column among ``names`` and its unit (from the name or header).

    ``time_column`` is a name, an index, ``False`` (none) or ``None`` (look for one name
    such as ``t``, ``time`` or ``timestamp``, alone or with a unit suffix such as ``time_ms`` or
    ``"Time [s]"``).  Returns ``(None, "")`` when there is no time column.
    """
    names = list(names)
    if time_column is False:
        return None, ""
    if isinstance(time_column, (int, np.integer)) and not isinstance(time_column, bool):
        if not -len(names) <= time_column < len(names):
            raise InputError(f"time_column={time_column} is out of range: {label} has "
                             f"{len(names)} columns {names}.")
        j = int(time_column) % len(names)
        return j, _time_unit(names[j])
    if isinstance(time_column, str):
        bare = [split_unit(n)[0] for n in names]
        for j, name in enumerate(names):
            if time_column in (name, bare[j]):
                return j, _time_unit(name)
        raise InputError(f"{label} has no column {time_column!r} for time_column; its "
                         f"columns are {names}. Pass one of those names, or "
                         "time_column=False with fs=.")
    if time_column is not None:
        raise InputError(f"time_column takes a name, an index or False; got {time_column!r}.")
    found = [j for j, n in enumerate(names) if _TIME_NAME.match(split_unit(n)[0].strip())]
    if len(found) > 1:
        raise InputError(f"Several columns of {label} look like time: "
                         f"{[names[j] for j in found]}. Choose one with time_column=.")
    if not found:
        return None, ""
    return found[0], _time_unit(names[found[0]])


def _time_unit(name: str) -> str:
    bare, unit = split_unit(name)
    if unit:
        return unit
    low = bare.lower()
    for suffix in ("ms", "us", "ns"):
        if low.endswith(("_" + suffix, "-" + suffix, " " + suffix)) or (
                low == "t" + suffix):
            return suffix
    return ""
