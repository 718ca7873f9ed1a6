"""pandas and xarray objects into Signals, and the converter the estimators use.

pandas and xarray are imported only when an object of theirs is converted, so importing
specbench never imports them.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from .._errors import InputError
from ._assemble import Record, assemble, select_columns
from ._load import INTERVAL_ATTRIBUTES, RATE_ATTRIBUTES, UNIT_ATTRIBUTES
from ._signal import Signal, register_reader
from ._timebase import DEFAULT_MAX_JITTER, find_time_column, time_axis

__all__ = ["from_pandas", "from_xarray", "convert"]


def from_pandas(
    obj: Any,
    *,
    fs: float | None = None,
    time_column: str | bool | None = None,
    channels: Sequence[str] | None = None,
    unit: str | Sequence[str] | None = None,
    on_gap: str = "error",
    max_jitter: float = DEFAULT_MAX_JITTER,
) -> Signal:
    """Make a Signal from a pandas Series or DataFrame (one channel per numeric column).

    The time comes from, in this order: ``time_column`` (a column name); a
    ``DatetimeIndex``, ``TimedeltaIndex`` or float index (seconds); a column named like
    ``t``, ``time`` or ``timestamp``.  A default ``RangeIndex`` or another integer index
    carries no time (it may be row labels): pass ``fs=`` then.  Timestamps are checked as
    in :func:`specbench.load` (rate inference, jitter, gaps, ``on_gap``).  The units
    come from ``unit=`` or the frame's ``attrs["unit"]``.

    Examples
    --------
    >>> import pandas as pd, numpy as np
    >>> idx = pd.date_range("2024-05-01", periods=1000, freq="4ms")
    >>> Signal.from_pandas(pd.Series(np.zeros(1000), index=idx, name="p")).fs
    250.0
    """
    import pandas as pd

    if isinstance(obj, pd.Series):
        frame = obj.to_frame(name=obj.name if obj.name is not None else "ch0")
    elif isinstance(obj, pd.DataFrame):
        frame = obj
    else:
        raise InputError(f"Cannot make a Signal from a pandas {type(obj).__name__}; pass a "
                         "Series or a DataFrame.")
    label = f"the {type(obj).__name__}"
    if frame.shape[0] == 0 or frame.shape[1] == 0:
        raise InputError(f"{label} is empty (shape {frame.shape}); it holds no samples.")
    names = [str(c) for c in frame.columns]
    if len(set(names)) != len(names):
        raise InputError(f"{label} has repeated column names {names}; rename them so that "
                         "every channel has its own name.")
    index = frame.index

    def where(i: int) -> str:
        return f"row {i} (index {index[i]}) of {label}"

    tj, tunit, tvalues, tlabel = None, "", None, ""
    if isinstance(time_column, str):
        tj, tunit = find_time_column(names, time_column, label)
    elif time_column is None and _index_is_time(index):
        tvalues, tlabel = index.to_numpy(), f"index of {label}"
        tunit = find_time_column([str(index.name or "time")], None, label)[1]
    elif time_column is None:
        tj, tunit = find_time_column(names, None, label)
    elif time_column is not False:
        raise InputError(f"time_column takes a column name or False; got {time_column!r}.")
    if tj is not None:
        tvalues, tlabel = frame.iloc[:, tj].to_numpy(), f"time column {names[tj]!r} of {label}"
    data_cols = [j for j in range(len(names)) if j != tj]
    reserved = {names[tj]: "the time column"} if tj is not None else None
    pick = [data_cols[i] for i in select_columns([names[j] for j in data_cols], channels,
                                                 label, reserved)]
    for j in pick:
        kind = frame.dtypes.iloc[j].kind
        if kind not in "biufc":
            raise InputError(f"Column {names[j]!r} of {label} has dtype {frame.dtypes.iloc[j]}, "
                             "which is not numeric. Choose the numeric columns with "
                             "channels=[...], or convert it (pd.to_numeric).")
    block = frame.iloc[:, pick]
    data = block.to_numpy(dtype=np.result_type(*block.dtypes.map(_numpy_kind)),
                          na_value=np.nan).T
    rec = Record(data, label, names=[names[j] for j in pick], where=where,
                 rate_hint="fs= or a time index (DatetimeIndex or float seconds)")
    if unit is None:
        unit = obj.attrs.get("unit")
    if tvalues is not None:
        rec.time, rec.start, rec.t0 = time_axis(tvalues, label=tlabel, row=where, unit=tunit)
    return assemble(rec, fs=fs, unit=unit, on_gap=on_gap, max_jitter=max_jitter)


def _index_is_time(index: Any) -> bool:
    kind = index.dtype.kind
    if kind in "Mm":
        return True
    if kind == "f":
        return True
    if kind in "iu" and index.name is not None:
        return find_time_column([str(index.name)], None, "index")[0] is not None and not (
            _is_default_range(index))
    return False


def _is_default_range(index: Any) -> bool:
    import pandas as pd

    return isinstance(index, pd.RangeIndex) and index.start == 0 and index.step == 1


def _numpy_kind(dtype: Any) -> np.dtype:
    """A plain NumPy dtype for a (possibly nullable) pandas column dtype."""
    kind = getattr(dtype, "kind", "f")
    if kind == "c":
        return np.dtype(np.complex128)
    if isinstance(dtype, np.dtype) and kind == "f":
        return dtype
    return np.dtype(np.float64)


def from_xarray(
    obj: Any,
    *,
    dim: str | None = None,
    fs: float | None = None,
    channels: Sequence[str] | None = None,
    unit: str | Sequence[str] | None = None,
    on_gap: str = "error",
    max_jitter: float = DEFAULT_MAX_JITTER,
) -> Signal:
    """Make a Signal from an xarray DataArray with a time dimension.

    ``dim`` is the time dimension (default: a dimension named like ``time`` or ``t``,
    else the one whose coordinate holds datetimes, else the only dimension).  A 2-D
    array's other dimension gives the channels, named by its coordinate.  The time
    coordinate is checked as in :func:`specbench.load`; without one, the rate comes
    from ``fs=`` or an attribute such as ``fs`` or ``sample_rate``.  The unit comes
    from ``unit=`` or the ``units`` attribute.
    """
    import xarray as xr

    if isinstance(obj, xr.Dataset):
        raise InputError(f"Got an xarray Dataset with variables {list(obj.data_vars)}; pass "
                         "one DataArray, e.g. ds['accel'].")
    if not isinstance(obj, xr.DataArray):
        raise InputError(f"Cannot make a Signal from an xarray {type(obj).__name__}.")
    label = f"the DataArray {obj.name!r}" if obj.name is not None else "the DataArray"
    if obj.ndim not in (1, 2):
        raise InputError(f"{label} has dims {obj.dims}; a Signal is 1-D (time) or 2-D "
                         "(channel, time). Select or stack the other dimensions first.")
    dims = [str(d) for d in obj.dims]
    if dim is None:
        dim = _time_dim(obj, dims, label)
    if dim not in dims:
        raise InputError(f"{label} has no dimension {dim!r}; its dims are {dims}.")
    other = [d for d in dims if d != dim]
    arr = obj.transpose(*other, dim)
    if other:
        names = ([str(v) for v in arr.coords[other[0]].values] if other[0] in arr.coords
                 else [f"ch{i}" for i in range(arr.shape[0])])
    else:
        names = [str(obj.name) if obj.name is not None else "ch0"]
    pick = select_columns(names, channels, label)
    lazy = type(arr.data).__module__.split(".")[0] == "dask"  # dask-backed: stays lazy
    data = (arr.data if lazy else np.asarray(arr.values)).reshape(len(names), -1)[pick]

    def where(i: int) -> str:
        return f"{dim}[{i}] of {label}"

    rec = Record(data, label, names=[names[i] for i in pick], where=where,
                 rate_hint=f"fs= or a {dim!r} coordinate")
    if lazy:  # not read now; the estimators name any non-finite samples they meet
        rec.scan = False
        rec.notes.append("dask-backed, read lazily")
    attrs = dict(obj.attrs)
    for name in RATE_ATTRIBUTES + INTERVAL_ATTRIBUTES:
        if name in attrs:
            value = float(attrs[name])
            rec.fs = 1.0 / value if name in INTERVAL_ATTRIBUTES else value
            rec.fs_note = f"the attribute {name!r} of {label}"
            break
    if unit is None:
        unit = next((attrs[a] for a in UNIT_ATTRIBUTES if a in attrs), None)
    if dim in arr.coords:
        tunit = str(arr.coords[dim].attrs.get("units", arr.coords[dim].attrs.get("unit", "")))
        rec.time, rec.start, rec.t0 = time_axis(arr.coords[dim].values,
                                                label=f"{dim!r} coordinate of {label}",
                                                row=where, unit=tunit)
    return assemble(rec, fs=fs, unit=unit, on_gap=on_gap, max_jitter=max_jitter)


def _time_dim(obj: Any, dims: list[str], label: str) -> str:
    j, _ = find_time_column(dims, None, label)
    if j is not None:
        return dims[j]
    dated = [d for d in dims if d in obj.coords and obj.coords[d].dtype.kind in "Mm"]
    if len(dated) == 1:
        return dated[0]
    if len(dims) == 1:
        return dims[0]
    raise InputError(f"{label} has dims {dims} and none is recognisably time. Pass dim= "
                     "naming the time dimension.")


def convert(obj: Any, fs: float | None = None) -> Signal | None:
    """Converter for :func:`specbench.estimators._input.register_converter`.

    ``fs`` is the rate passed to the estimator, if any: it lets an object without a time
    index (a RangeIndex Series) be estimated, and is checked against a time index.
    """
    module = type(obj).__module__.split(".", 1)[0]
    if module == "pandas":
        return from_pandas(obj, fs=fs)
    if module == "xarray":
        return from_xarray(obj, fs=fs)
    return None


register_reader("pandas", from_pandas)
register_reader("xarray", from_xarray)
