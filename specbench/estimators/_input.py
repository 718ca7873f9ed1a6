"""Turn whatever the user passes into a (channels..., samples) array with a sample rate.

The estimators accept plain arrays (with ``fs=``) and any *signal-like* object: an
object with ``data`` (samples on the last axis), ``fs`` (Hz), ``channels`` (names) and
``unit``.  Richer containers (pandas, xarray) are handled by converters that the data
layer registers at import time, so this layer never imports the data layer.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import InputError

__all__ = ["Samples", "as_samples", "register_converter"]

_CONVERTERS: list[Callable[[Any], Any]] = []


def register_converter(func: Callable[..., Any]) -> None:
    """Register ``func(obj, fs=None) -> signal-like or None`` for containers this layer does not know."""
    if func not in _CONVERTERS:
        _CONVERTERS.append(func)


@dataclass(frozen=True)
class Samples:
    """Validated input of one estimator call."""

    data: np.ndarray  # (..., n) float32/float64/complex
    fs: float
    channels: tuple[str, ...] | None
    unit: str | tuple[str, ...]
    source: Any = None  # the signal-like object, when one was given

    @property
    def n(self) -> int:
        return self.data.shape[-1]


def _is_signal_like(obj: Any) -> bool:
    return all(hasattr(obj, a) for a in ("data", "fs", "channels", "unit"))


#: a plain 2-D array whose last axis is at most this long, and shorter than its first, is
#: taken for a (samples, channels) array passed the wrong way round
TRANSPOSED_MAX = 64


def _check_fs(fs: Any) -> float:
    if isinstance(fs, (bool, np.bool_)):
        raise InputError(
            f"The sample rate fs must be a positive number in Hz, not a bool (fs={fs!r} would mean "
            f"{int(fs)} Hz). Pass fs=<samples per second>.", field="fs",
        )
    try:
        value = float(fs)
    except (TypeError, ValueError):
        raise InputError(
            f"The sample rate fs must be a positive number in Hz. Got {fs!r} instead. "
            "Pass fs=<samples per second>."
        ) from None
    if not np.isfinite(value) or value <= 0:
        raise InputError(
            f"The sample rate fs must be a positive, finite number in Hz. Got {fs!r} instead. "
            "Pass fs=<samples per second>."
        )
    return value


def as_samples(x: Any, fs: Any = None, *, min_samples: int = 2) -> Samples:
    """Validate ``x`` (array or signal-like) and return :class:`Samples`.

    Float32 stays float32 so that the engines can work in single precision, and integer
    arrays (an int16 memory map, say) stay integer: the engines convert block by block,
    so the record is never copied whole.  Booleans become float64.
    """
    obj = x
    if not _is_signal_like(obj) and not isinstance(obj, np.ndarray) and not _is_dask(obj):
        for conv in _CONVERTERS:
            converted = conv(obj, fs=fs)
            if converted is not None:
                obj = converted
                break
    if _is_signal_like(obj):
        sig_fs = _check_fs(obj.fs)
        if fs is not None and _check_fs(fs) != sig_fs:
            raise InputError(
                f"fs={fs!r} was passed for a signal whose sample rate is {sig_fs!r} Hz. "
                "Leave fs out, or change the signal's rate with signal.with_fs(...)."
            )
        data = obj.data
        channels = tuple(obj.channels) if obj.channels is not None else None
        unit = obj.unit
        source = obj
        fs_value = sig_fs
    else:
        if isinstance(obj, (list, tuple, np.generic, int, float, complex)):
            obj = np.asarray(obj)
        if not isinstance(obj, np.ndarray) and not _is_dask(obj):
            raise InputError(
                f"Cannot estimate from an object of type {type(obj).__name__}. "
                "Pass a NumPy array with fs=..., a specbench Signal, a pandas Series/DataFrame "
                "or an xarray DataArray."
            )
        if fs is None:
            raise InputError(
                "A plain array carries no sample rate. Pass fs=<samples per second>, "
                "or wrap the data as sb.Signal(array, fs=...)."
            )
        fs_value = _check_fs(fs)
        data, channels, unit, source = obj, None, "", None
        if data.ndim == 2 and data.shape[1] < data.shape[0] and min_samples <= data.shape[1] <= TRANSPOSED_MAX:
            c, n = data.shape
            raise InputError(
                f"The array has shape {data.shape}: {c:,} channels of {n} samples each, which looks like "
                f"a (samples, channels) array passed the wrong way round. Samples go on the last axis: "
                f"pass x.T (shape ({n}, {c})). If it really holds {c:,} channels of {n} samples, wrap it "
                "as sb.Signal(x, fs=...).", field="data",
            )
    data = _masked_as_gaps(data)
    data = _as_numeric(data)
    if data.ndim == 0:
        raise InputError("The data is a scalar; pass at least a 1-D array of samples.")
    n = data.shape[-1]
    if n < min_samples:
        raise InputError(
            f"The data has {n} sample{'s' if n != 1 else ''} on its last axis; at least "
            f"{min_samples} are needed. Samples go on the last axis: check the shape "
            f"{data.shape} (transpose a (samples, channels) array with .T)."
        )
    return Samples(data=data, fs=fs_value, channels=channels, unit=unit, source=source)


def _is_dask(obj: Any) -> bool:
    return type(obj).__module__.split(".")[0] == "dask" and hasattr(obj, "chunks") and hasattr(obj, "dask")


def _masked_as_gaps(data: Any) -> Any:
    """A numpy masked array: masked samples become NaN, i.e. gaps (the estimator's gap policy
    applies: ``Welch(gaps="skip")`` leaves out the segments that touch them, the others
    refuse them and name the first).  The mask is never ignored."""
    if not isinstance(data, np.ma.MaskedArray):
        return data
    mask = np.ma.getmaskarray(data)
    if not mask.any():
        return np.ma.getdata(data)
    kind = data.dtype.kind
    if kind not in "fciub":
        return np.ma.getdata(data)  # non-numeric: _as_numeric names the dtype
    out_dtype = data.dtype if kind in "fc" and data.dtype.itemsize >= 4 else np.float64
    return np.ma.filled(data.astype(out_dtype), np.nan)


def _as_numeric(data: Any) -> np.ndarray:
    if _is_dask(data):  # stays lazy: the engines read it block by block (no compute here)
        if any(c != c for dim in data.chunks for c in dim):
            raise InputError(
                f"The dask array has unknown chunk sizes (shape {data.shape}, chunks with NaN), "
                "so its samples cannot be cut into blocks. Call x = x.compute_chunk_sizes() "
                "first (or build the array with known chunk sizes)."
            )
    arr = data if isinstance(data, np.ndarray) or _is_dask(data) else np.asarray(data)
    if arr.dtype.kind == "b":
        return arr.astype(np.float64)
    if arr.dtype.kind in "iu":
        return arr
    if arr.dtype.kind == "f":
        if arr.dtype.itemsize < 4:
            return arr.astype(np.float32)
        if arr.dtype.itemsize > 8:
            return arr.astype(np.float64)
        return arr
    if arr.dtype.kind == "c":
        if arr.dtype.itemsize > 16:
            return arr.astype(np.complex128)
        return arr
    raise InputError(
        f"The data has dtype {arr.dtype}, which is not numeric. Convert it to float "
        "(for text cells, load the file with sb.load, which reports the bad cell)."
    )
