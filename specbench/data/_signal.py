"""The :class:`Signal` container: samples on the last axis, a sample rate, names and units.

A Signal never copies the record it is given when it can avoid it: a 1-D array becomes a
``(1, n)`` view, a memory map stays a memory map, and :meth:`Signal.channel` and
:meth:`Signal.span` return views.  Its ``data`` is marked read-only, so no estimate can
change the record behind the user's back.

Provenance: :attr:`Signal.origin` says how the root record was made (``None`` for data
that was already in memory, a ``"load"`` or ``"demo"`` record otherwise) and
:attr:`Signal.selection` lists the steps (``channel``, ``span``, ``with_fs``) applied
since, so that repeating them rebuilds the same samples bit for bit.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from .._errors import InputError

__all__ = ["Signal", "register_reader"]

#: Signal.from_<kind> readers of other containers, registered by the modules that hold them
#: (``_frames`` registers "pandas" and "xarray" when specbench.data is imported): this module,
#: the bottom of data/, imports no other module of the package but the errors.
_READERS: dict[str, Callable[..., Signal]] = {}


def register_reader(kind: str, reader: Callable[..., Signal]) -> None:
    """Make ``reader(obj, **options)`` the implementation of ``Signal.from_<kind>``."""
    _READERS[kind] = reader


def _reader(kind: str) -> Callable[..., Signal]:
    try:
        return _READERS[kind]
    except KeyError:  # only when this module is used without its package's __init__
        raise InputError(f"Signal.from_{kind} needs specbench.data imported (import specbench).") from None

# The first few values shown in messages that list positions.
_SHOW = 5


class Signal:
    """A uniformly sampled recording of one or more channels.

    Parameters
    ----------
    data : array_like, shape (n_samples,) or (n_channels, n_samples)
        The samples, on the last axis.  Integer, float and complex data are accepted and
        stored as given (no copy where possible; a memory map stays a memory map).  A
        ``(n_samples, n_channels)`` array must be transposed first (``array.T``).
    fs : float
        Sample rate in Hz (samples per second); positive and finite.
    channels : sequence of str, optional
        One unique name per channel.  Default ``"ch0"``, ``"ch1"``, ...
    unit : str or sequence of str, optional
        Physical unit of the samples, shared (a string) or one per channel.  Spectra of
        the signal are in ``unit**2/Hz``.  Default ``""`` (no unit).
    t0 : float, optional
        Time of the first sample in seconds.  Default 0.
    source : str, optional
        A one-line description of where the data came from.
    origin, selection, truth, start
        Set by :func:`specbench.load` and :func:`specbench.demo` (see the attributes);
        leave them out for data built in memory.

    Attributes
    ----------
    data : numpy.ndarray, shape (n_channels, n_samples)
        Read-only view of the samples.
    fs : float
        Sample rate in Hz.
    channels : tuple of str
        Channel names.
    unit : str or tuple of str
        Shared unit, or one per channel.
    t0 : float
        Time of the first sample in seconds.
    source : str
        One line describing the data's origin and anything done while loading it.
    origin : dict or None
        ``None`` for in-memory data; ``{"kind": "load", "path": str, "kwargs": {...}}``
        or ``{"kind": "demo", "name": str, "kwargs": {...}}`` for loaded and demo data.
    selection : tuple of tuple
        Steps applied to the root record: ``("channel", name)``,
        ``("span", start_s, stop_s)`` and ``("with_fs", fs)``, in order.
    truth : object or None
        For demo data, the true spectral density of the simulated process
        (``truth.psd(freq)`` in unit**2/Hz, shape (n_channels, len(freq))).
    start : numpy.datetime64 or None
        Absolute time of the record start, when the data carried calendar timestamps.

    Examples
    --------
    >>> import numpy as np
    >>> from specbench.data import Signal
    >>> sig = Signal(np.zeros((2, 5000)), fs=1000.0, channels=["x", "y"], unit="m/s^2")
    >>> sig.duration, sig.n_channels
    (5.0, 2)
    >>> sig.span(1.0, 1.5).n_samples
    500
    """

    __slots__ = ("_data", "_fs", "_channels", "_unit", "_t0", "_source", "_origin",
                 "_selection", "_truth", "_start")

    def __init__(
        self,
        data: Any,
        fs: float,
        *,
        channels: Sequence[str] | None = None,
        unit: str | Sequence[str] = "",
        t0: float = 0.0,
        source: str = "",
        origin: dict | None = None,
        selection: tuple = (),
        truth: Any = None,
        start: Any = None,
    ) -> None:
        arr, masked = _as_2d(data)
        if not selection and origin is None and truth is None and arr.shape[0] > arr.shape[1]:
            raise InputError(
                f"Signal data of shape {arr.shape} has more channels ({arr.shape[0]:,}) than "
                f"samples ({arr.shape[1]:,}): samples go on the last axis, so this is probably a "
                f"(samples, channels) array. Pass data.T (shape {arr.shape[::-1]})."
            )
        if masked:
            source = (f"{source}; " if source else "") + (
                f"{masked:,} masked sample{'s' if masked != 1 else ''} of the masked array "
                "set to NaN (gaps)")
        self._data = arr
        self._fs = _check_rate(fs)
        self._channels = _check_channels(channels, arr.shape[0])
        self._unit = _check_unit(unit, self._channels)
        self._t0 = _check_t0(t0)
        self._source = " ".join(str(source).split())
        self._origin = origin
        self._selection = tuple(selection)
        self._truth = truth
        self._start = None if start is None else np.datetime64(start, "ns")

    # -- read-only attributes -------------------------------------------------------
    @property
    def data(self) -> np.ndarray:
        return self._data

    @property
    def fs(self) -> float:
        return self._fs

    @property
    def channels(self) -> tuple[str, ...]:
        return self._channels

    @property
    def unit(self) -> str | tuple[str, ...]:
        return self._unit

    @property
    def t0(self) -> float:
        return self._t0

    @property
    def source(self) -> str:
        return self._source

    @property
    def origin(self) -> dict | None:
        return self._origin

    @property
    def selection(self) -> tuple:
        return self._selection

    @property
    def truth(self) -> Any:
        return self._truth

    @property
    def start(self) -> np.datetime64 | None:
        return self._start

    @property
    def n_samples(self) -> int:
        """Number of samples per channel."""
        return int(self._data.shape[1])

    @property
    def n_channels(self) -> int:
        """Number of channels."""
        return int(self._data.shape[0])

    @property
    def duration(self) -> float:
        """Record length ``n_samples / fs`` in seconds."""
        return self.n_samples / self._fs

    @property
    def time(self) -> np.ndarray:
        """Sample times ``t0 + k / fs`` in seconds (computed on each access)."""
        return self._t0 + np.arange(self.n_samples) / self._fs

    def units(self) -> tuple[str, ...]:
        """The unit of every channel, one entry per channel."""
        if isinstance(self._unit, str):
            return (self._unit,) * self.n_channels
        return self._unit

    # -- other containers ------------------------------------------------------------
    @classmethod
    def from_pandas(cls, obj: Any, **options: Any) -> Signal:
        """A Signal from a pandas Series or DataFrame; see :func:`~specbench.data.from_pandas`.

        Options: ``fs``, ``time_column``, ``channels``, ``unit``, ``on_gap``,
        ``max_jitter``.  The time comes from a DatetimeIndex, a TimedeltaIndex, a float
        index (seconds) or a time column.
        """
        return _reader("pandas")(obj, **options)

    @classmethod
    def from_xarray(cls, obj: Any, **options: Any) -> Signal:
        """A Signal from an xarray DataArray; see :func:`~specbench.data.from_xarray`.

        Options: ``dim`` (the time dimension), ``fs``, ``channels``, ``unit``,
        ``on_gap``, ``max_jitter``.
        """
        return _reader("xarray")(obj, **options)

    # -- derived signals ------------------------------------------------------------
    def _derive(self, data: np.ndarray, step: tuple, **changes: Any) -> Signal:
        fields = dict(channels=self._channels, unit=self._unit, t0=self._t0,
                      source=self._source, origin=self._origin, truth=self._truth,
                      start=self._start, fs=self._fs)
        fields.update(changes)
        fs = fields.pop("fs")
        return Signal(data, fs, selection=self._selection + (step,), **fields)

    def channel(self, name_or_index: str | int) -> Signal:
        """Return one channel as a Signal (a view of the same samples).

        Parameters
        ----------
        name_or_index : str or int
            A channel name from :attr:`channels`, or its position (negative counts
            from the end).
        """
        i = self._channel_index(name_or_index)
        unit = self._unit if isinstance(self._unit, str) else self._unit[i]
        truth = self._truth.take([i]) if self._truth is not None else None
        name = self._channels[i]
        return self._derive(self._data[i:i + 1], ("channel", name), channels=(name,),
                            unit=unit, truth=truth)

    def _channel_index(self, key: str | int) -> int:
        if isinstance(key, (int, np.integer)) and not isinstance(key, bool):
            n = self.n_channels
            if not -n <= key < n:
                raise InputError(
                    f"Channel index {key} is out of range: the signal has {n} channel"
                    f"{'s' if n != 1 else ''} {list(self._channels)} (indices 0..{n - 1}). "
                    "Pass an index in that range or a channel name."
                )
            return int(key) % n
        if isinstance(key, str):
            if key in self._channels:
                return self._channels.index(key)
            raise InputError(
                f"No channel named {key!r}; the channels are {list(self._channels)}. "
                "Pass one of these names or an index."
            )
        raise InputError(
            f"A channel is chosen by name (str) or index (int); got {key!r} of type "
            f"{type(key).__name__}."
        )

    def span(self, start_s: float, stop_s: float) -> Signal:
        """Return the samples between two times as a Signal (a view, no copy).

        Parameters
        ----------
        start_s, stop_s : float
            Start and stop in seconds from the first sample of this signal (not
            absolute times: ``t0`` is not subtracted).  The span holds the samples
            ``k`` with ``start_s <= k / fs < stop_s``; it must lie within
            ``[0, duration]`` and hold at least one sample.  Nothing is clamped.
        """
        start_s, stop_s = _check_time(start_s, "start_s"), _check_time(stop_s, "stop_s")
        extent = (f"the record spans 0 to {self.duration:.9g} s ({self.n_samples} samples "
                  f"at {self._fs:.9g} Hz)")
        eps = 1e-9 / self._fs
        if start_s < -eps or stop_s > self.duration + eps:
            raise InputError(
                f"The span {start_s:.9g} to {stop_s:.9g} s reaches outside the record: "
                f"{extent}. Choose start_s >= 0 and stop_s <= {self.duration:.9g}."
            )
        i0, i1 = _sample_index(start_s, self._fs), _sample_index(stop_s, self._fs)
        i0, i1 = max(i0, 0), min(i1, self.n_samples)
        if i1 <= i0:
            raise InputError(
                f"The span {start_s:.9g} to {stop_s:.9g} s holds no sample: {extent}, one "
                f"sample every {1 / self._fs:.6g} s. Choose stop_s > start_s by at least "
                "one sample interval."
            )
        return self._derive(self._data[:, i0:i1], ("span", start_s, stop_s),
                            t0=self._t0 + i0 / self._fs)

    def with_fs(self, fs: float) -> Signal:
        """Return the same samples with another sample rate (Hz).

        Use it when the rate of a record is known better than the file states it.  ``t0``
        stays; the times of later samples follow the new rate, and so does the truth of a
        demo signal.
        """
        fs = _check_rate(fs)
        truth = self._truth
        if truth is not None and fs != self._fs:
            truth = truth.rescaled(fs / self._fs)
        return self._derive(self._data, ("with_fs", fs), fs=fs, truth=truth)

    # -- display --------------------------------------------------------------------
    def __repr__(self) -> str:
        n, c = self.n_samples, self.n_channels
        names = ", ".join(self._channels[:8]) + (", ..." if c > 8 else "")
        if isinstance(self._unit, str):
            unit = f"unit {self._unit!r}" if self._unit else "no unit"
        else:
            unit = "units " + ", ".join(repr(u) for u in self._unit[:8])
        kind = "memory map, " if isinstance(self._data, np.memmap) else ""
        text = (f"<Signal {c} channel{'s' if c != 1 else ''} [{names}] x {n:,} samples at "
                f"{self._fs:.9g} Hz ({_format_seconds(self.duration)}), {unit}, "
                f"{kind}{self._data.dtype}")
        if self._t0:
            text += f", t0={self._t0:.9g} s"
        if self._start is not None:
            text += f", starting {np.datetime_as_string(self._start, unit='auto')}"
        if self._source:
            text += f"; {self._source}"
        return text + ">"

    def __len__(self) -> int:
        return self.n_samples


# -- validation (the one place) ---------------------------------------------------------
def _as_2d(data: Any) -> tuple[np.ndarray, int]:
    """The read-only 2-D view of ``data`` and the number of masked samples made NaN.

    A numpy masked array: its masked samples become gaps (NaN, in a float copy), as
    ``on_gap="fill"`` makes missing samples; estimators then refuse them unless told to
    skip them (``gaps="skip"``).  The mask is never ignored."""
    if isinstance(data, Signal):
        raise InputError("data is already a Signal; use signal.with_fs(...) or "
                         "signal.channel(...) to derive a new one.")
    masked = 0
    if isinstance(data, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(data)
        masked = int(mask.sum())
        if masked and data.dtype.kind in "biu":
            data = data.astype(np.float64)  # NaN needs a float
        data = data.filled(np.nan) if masked else np.asarray(data.data)
    lazy = type(data).__module__.split(".")[0] == "dask" and hasattr(data, "chunks")
    arr = data if isinstance(data, np.ndarray) or lazy else np.asarray(data)
    if arr.dtype.kind not in "biufc":
        raise InputError(
            f"Signal data must be numeric; got dtype {arr.dtype}. Convert it with "
            "np.asarray(data, dtype=float) (text cells: load the file with sb.load, "
            "which names the bad cell)."
        )
    if arr.ndim == 1:
        arr = arr[np.newaxis, :]
    elif arr.ndim != 2:
        raise InputError(
            f"Signal data must be 1-D (samples) or 2-D (channels, samples); got shape "
            f"{arr.shape}. Reshape it to (channels, samples)."
        )
    if arr.shape[1] == 0 or arr.shape[0] == 0:
        raise InputError(
            f"Signal data of shape {arr.shape} holds no samples. Pass at least one "
            "channel with at least one sample (samples on the last axis)."
        )
    if lazy:  # a dask array stays lazy: estimators read it block by block
        return arr, masked
    view = arr.view()  # keeps the memmap subclass; the caller's array stays writeable
    view.flags.writeable = False
    return view, masked


def _check_rate(fs: Any) -> float:
    if isinstance(fs, (bool, np.bool_)):
        raise InputError(f"The sample rate fs must be a number in Hz; got fs={bool(fs)} (a bool, "
                         "not a rate). Pass fs=<samples per second>, e.g. fs=1000.0.")
    try:
        value = float(fs)
    except (TypeError, ValueError):
        value = math.nan
    if not math.isfinite(value) or value <= 0:
        raise InputError(
            f"The sample rate fs must be a positive, finite number in Hz; got {fs!r}. "
            "Pass fs=<samples per second>."
        )
    return value


def _check_channels(channels: Sequence[str] | None, n: int) -> tuple[str, ...]:
    if channels is None:
        return tuple(f"ch{i}" for i in range(n))
    if isinstance(channels, str):
        channels = [channels]
    names = tuple(str(c) for c in channels)
    if len(names) != n:
        raise InputError(
            f"{len(names)} channel name{'s' if len(names) != 1 else ''} {list(names)} "
            f"given for data with {n} channel{'s' if n != 1 else ''} (shape (channels, "
            "samples)). Give one name per channel, or transpose a (samples, channels) "
            "array with .T."
        )
    seen: set[str] = set()
    dup = [c for c in names if c in seen or seen.add(c)]
    if dup:
        raise InputError(f"Channel names must be unique; {dup[0]!r} appears more than once "
                         f"in {list(names)}. Rename the duplicates.")
    return names


def _check_unit(unit: Any, channels: tuple[str, ...]) -> str | tuple[str, ...]:
    if unit is None:
        return ""
    if isinstance(unit, str):
        return unit
    units = tuple(str(u) for u in unit)
    if len(units) != len(channels):
        raise InputError(
            f"{len(units)} units {list(units)} given for {len(channels)} channels "
            f"{list(channels)}. Give one shared unit (a string) or one per channel."
        )
    if len(set(units)) == 1:
        return units[0]
    return units


def _check_t0(t0: Any) -> float:
    value = _check_time(t0, "t0")
    return value


def _check_time(value: Any, name: str) -> float:
    try:
        out = float(value)
    except (TypeError, ValueError):
        out = math.nan
    if not math.isfinite(out):
        raise InputError(f"{name} must be a finite number of seconds; got {value!r}.")
    return out


def _sample_index(t: float, fs: float) -> int:
    """Index of the first sample at or after time ``t`` (s), robust to float rounding."""
    x = t * fs
    r = round(x)
    if abs(x - r) <= 1e-9 * max(1.0, abs(x)):
        return int(r)
    return int(math.ceil(x))


def _format_seconds(seconds: float) -> str:
    if seconds >= 3600:
        return f"{seconds / 3600:.4g} h"
    if seconds >= 60:
        return f"{seconds / 60:.4g} min"
    if seconds >= 1:
        return f"{seconds:.4g} s"
    return f"{seconds * 1e3:.4g} ms"


def format_positions(positions: Sequence[Any]) -> str:
    """``'a, b, c, ...'`` with at most a few entries (for messages)."""
    shown = ", ".join(str(p) for p in positions[:_SHOW])
    return shown + (", ..." if len(positions) > _SHOW else "")
