"""Data fingerprints: what a frozen estimate was made on, to notice when it runs on other data.

A :class:`Fingerprint` holds the sample count, the sample rate, the channel names, the
time span (start and stop in seconds, in the signal's own time base) and a content hash
of the samples analysed.  The hash is BLAKE2b (128-bit digest) over the dtype name, the
shape and the raw little-endian bytes of the samples, channel after channel (the whole
first channel, then the next), fed in blocks of :data:`BLOCK_SAMPLES` samples, so a
memory-mapped record of 1e7 samples is hashed in about 0.1 s with a few MB of memory.

>>> import numpy as np, specbench as sb
>>> sig = sb.Signal(np.arange(1000.0), fs=100.0)
>>> fp = sb.fingerprint(sig)
>>> fp.samples, fp.fs, fp.channels
(1000, 100.0, ('ch0',))
>>> sb.fingerprint(sig.span(0.0, 5.0)).differences(fp)
['length 500 samples, made on 1,000', 'span 0 to 5 s, made on 0 to 10 s', 'content (the samples differ)']
"""

from __future__ import annotations

import hashlib
import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import SettingsError, SpecbenchWarning

__all__ = ["BLOCK_SAMPLES", "Fingerprint", "fingerprint", "check_data"]

#: samples per block fed to the hash (per channel): bounded memory on memory maps
BLOCK_SAMPLES = 1 << 18

_HASH = "blake2b-128"


@dataclass(frozen=True)
class Fingerprint:
    """What identifies the samples an estimate was made on.

    Attributes
    ----------
    samples : int
        Samples per channel.
    fs : float
        Sample rate in Hz.
    channels : tuple of str
        Channel names, in order.
    span : (float, float)
        Time of the first sample and the end of the record (first + samples / fs), in
        seconds, in the signal's own time base (``Signal.t0``).
    content : str
        ``"blake2b-128:<32 hex digits>"`` of the dtype, shape and samples.
    """

    samples: int
    fs: float
    channels: tuple[str, ...]
    span: tuple[float, float]
    content: str

    def __post_init__(self) -> None:
        object.__setattr__(self, "channels", tuple(self.channels))
        object.__setattr__(self, "span", (float(self.span[0]), float(self.span[1])))
        object.__setattr__(self, "fs", float(self.fs))
        object.__setattr__(self, "samples", int(self.samples))

    def differences(self, made_on: Fingerprint) -> list[str]:
        """What differs from ``made_on`` (the fingerprint recorded at freeze time), one phrase
        each, naming this value and the recorded one; empty when the data are the same."""
        out = []
        if self.samples != made_on.samples:
            out.append(f"length {self.samples:,} samples, made on {made_on.samples:,}")
        if not _same(self.fs, made_on.fs):
            out.append(f"rate {self.fs:.9g} Hz, made on {made_on.fs:.9g} Hz")
        if self.channels != made_on.channels:
            out.append(f"channel {_names(self.channels)}, made on {_names(made_on.channels)}")
        if not (_same(self.span[0], made_on.span[0]) and _same(self.span[1], made_on.span[1])):
            out.append(f"span {_span(self.span)}, made on {_span(made_on.span)}")
        if self.content != made_on.content:
            out.append("content (the samples differ)")
        return out

    def describe(self) -> str:
        """One line: ``60,000 samples at 1000 Hz, channel 'y', 10 to 70 s, blake2b-128:1a2b…``."""
        return (f"{self.samples:,} samples at {self.fs:.9g} Hz, channel {_names(self.channels)}, "
                f"{_span(self.span)}, {self.content[:24]}…")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form, as the settings file stores it."""
        return {"samples": self.samples, "fs": self.fs, "channels": list(self.channels),
                "span": list(self.span), "content": self.content}

    @classmethod
    def from_dict(cls, d: Any) -> Fingerprint:
        """Rebuild from :meth:`to_dict`; raises :class:`SettingsError` naming a bad entry."""
        keys = ("samples", "fs", "channels", "span", "content")
        if not isinstance(d, dict) or set(d) != set(keys):
            got = sorted(d) if isinstance(d, dict) else type(d).__name__
            raise SettingsError(f"fingerprint must be an object with exactly {', '.join(keys)}; got {got}.")
        ok = (
            isinstance(d["samples"], int) and not isinstance(d["samples"], bool) and d["samples"] > 0
            and _finite(d["fs"]) and d["fs"] > 0
            and isinstance(d["channels"], list) and all(isinstance(c, str) for c in d["channels"])
            and isinstance(d["span"], list) and len(d["span"]) == 2 and all(map(_finite, d["span"]))
            and isinstance(d["content"], str) and d["content"].startswith(_HASH + ":")
        )
        if not ok:
            raise SettingsError(
                "fingerprint entries must be samples (positive integer), fs (Hz), channels (names), "
                f"span ([start_s, stop_s]) and content ('{_HASH}:...'); got {d!r}."
            )
        return cls(samples=d["samples"], fs=d["fs"], channels=tuple(d["channels"]), span=tuple(d["span"]),
                   content=d["content"])


def _finite(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _same(a: float, b: float) -> bool:
    return a == b or math.isclose(a, b, rel_tol=1e-12, abs_tol=1e-12)


def _names(channels: tuple[str, ...]) -> str:
    return repr(channels[0]) if len(channels) == 1 else "[" + ", ".join(map(repr, channels)) + "]"


def _span(span: tuple[float, float]) -> str:
    return f"{span[0]:.9g} to {span[1]:.9g} s"


def _content_hash(data: Any) -> str:
    arr = data if hasattr(data, "shape") and hasattr(data, "dtype") else np.asarray(data)
    if arr.ndim == 1:
        arr = arr[np.newaxis, :]
    h = hashlib.blake2b(digest_size=16)
    dtype = np.dtype(arr.dtype)
    h.update(f"{dtype.str.lstrip('<>|=')}|{tuple(arr.shape)}|".encode())
    little = dtype.newbyteorder("<")
    for row in range(arr.shape[0]):  # channel by channel, so the digest never depends on the block size
        for i in range(0, arr.shape[-1], BLOCK_SAMPLES):
            block = np.ascontiguousarray(np.asarray(arr[row, i:i + BLOCK_SAMPLES]), dtype=little)
            h.update(memoryview(block).cast("B"))
    return f"{_HASH}:{h.hexdigest()}"


def fingerprint(signal: Any) -> Fingerprint:
    """The :class:`Fingerprint` of a :class:`~specbench.Signal` (the samples it holds).

    Parameters
    ----------
    signal : Signal
        The data as analysed (after any channel, span and sample-rate choices).

    Returns
    -------
    Fingerprint
        Sample count, rate, channels, span and content hash.  The hash streams over the
        samples in blocks: no copy of the record, memory maps stay on disk.
    """
    from ..data import Signal

    if not isinstance(signal, Signal):
        raise SettingsError(
            f"sb.fingerprint takes a specbench Signal; got {type(signal).__name__}. "
            "Wrap an array first: sb.Signal(array, fs=...)."
        )
    n = int(signal.n_samples)
    t0 = float(signal.t0)
    return Fingerprint(samples=n, fs=signal.fs, channels=tuple(signal.channels), span=(t0, t0 + n / signal.fs),
                       content=_content_hash(signal.data))


def check_data(signal: Any, made_on: Fingerprint, *, check: bool = True) -> list[str]:
    """Warn when ``signal`` is not the data ``made_on`` was taken from.

    A frozen code cell calls it right before estimating, so a cell pasted into a pipeline
    never analyses other data than the data inspected in the workbench without saying so.

    Parameters
    ----------
    signal : Signal
        The data about to be estimated.
    made_on : Fingerprint
        The fingerprint recorded when the cell was frozen.
    check : bool, default True
        False skips the check (no hashing, no warning): for a cell reused on purpose on
        new runs of the same kind.

    Returns
    -------
    list of str
        What differs (length, rate, channel, span, content); empty when the data match or
        ``check`` is False.

    Warns
    -----
    SpecbenchWarning
        When anything differs; the message names each difference and how to silence it.
    """
    if not isinstance(made_on, Fingerprint):
        raise SettingsError(f"made_on must be an sb.Fingerprint; got {type(made_on).__name__}.")
    if not check:
        return []
    diffs = fingerprint(signal).differences(made_on)
    if diffs:
        warnings.warn(
            "The data differ from the data this cell was frozen on: " + "; ".join(diffs) + ". "
            "The estimate is of these data, not of the ones inspected in the workbench. "
            "If that is intended (a new run of the same kind), pass check=False to sb.check_data.",
            SpecbenchWarning,
            stacklevel=2,
        )
    return diffs
