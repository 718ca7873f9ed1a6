"""What the freeze layer needs to know about a workbench session (the contract with widgets/)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = ["FreezeState", "Selection", "apply_steps"]


@dataclass(frozen=True)
class Selection:
    """The part of a signal the workbench analyses, as choices on top of the signal it was given.

    Applied in a fixed order, always the same one: first the sample rate (``fs``, with
    ``Signal.with_fs``), then the channel (``Signal.channel``), then the span in seconds at
    that rate (``Signal.span``).  The workbench, the frozen code, the settings file and the
    batch command all use :meth:`apply`, so they analyse the same samples, bit for bit.

    Attributes
    ----------
    channel : str or None
        Channel name, or None for every channel of the signal.
    span : (float, float) or None
        Start and stop in seconds from the first sample, or None for the whole record.
    fs : float or None
        Sample rate in Hz that replaces the signal's own, or None to keep it.
    """

    channel: str | None = None
    span: tuple[float, float] | None = None
    fs: float | None = None

    def __post_init__(self) -> None:
        if self.span is not None:
            object.__setattr__(self, "span", (float(self.span[0]), float(self.span[1])))
        if self.fs is not None:
            object.__setattr__(self, "fs", float(self.fs))

    @property
    def empty(self) -> bool:
        return self.channel is None and self.span is None and self.fs is None

    def apply(self, signal: Any) -> Any:
        """``signal.with_fs(fs).channel(channel).span(*span)``, each step only when set."""
        out = signal
        if self.fs is not None:
            out = out.with_fs(self.fs)
        if self.channel is not None:
            out = out.channel(self.channel)
        if self.span is not None:
            out = out.span(*self.span)
        return out

    def steps(self) -> list[tuple]:
        """The steps :meth:`apply` takes, as ``Signal.selection`` records them."""
        out: list[tuple] = []
        if self.fs is not None:
            out.append(("with_fs", self.fs))
        if self.channel is not None:
            out.append(("channel", self.channel))
        if self.span is not None:
            out.append(("span", *self.span))
        return out


def apply_steps(signal: Any, steps: Any) -> Any:
    """Replay ``Signal.selection``-style steps (``("channel", name)``, ``("span", a, b)``,
    ``("with_fs", fs)``) on ``signal``, in order."""
    out = signal
    for step in steps:
        kind, *args = step
        if kind == "channel":
            out = out.channel(*args)
        elif kind == "span":
            out = out.span(*args)
        elif kind == "with_fs":
            out = out.with_fs(*args)
        else:
            raise ValueError(f"unknown selection step {step!r}")
    return out


@dataclass(frozen=True)
class FreezeState:
    """Everything a frozen code cell depends on.

    Attributes
    ----------
    signal : Signal
        The source the workbench was given (before channel / span / fs choices).  Its
        ``origin`` (None for in-memory data, or the ``sb.load`` / ``sb.demo`` call) and
        ``selection`` say how to rebuild it.
    data_name : str
        Variable name the cell uses for in-memory data (``sb.Workbench(..., data_name=)``).
    channel : str or None
        Channel analysed (a name of ``signal.channels``), None when the signal has one channel.
    span : (float, float) or None
        Analysis span in seconds from the record start, None for the whole record.
    fs_override : float or None
        Sample rate set in the workbench in place of ``signal.fs``.
    estimator : SpectralEstimator
        The PSD estimator (the single source of truth of the PSD settings).
    correlation_estimator : Autocorrelation
        The autocorrelation estimator.
    spectrum, correlation : Spectrum, Correlation, optional
        The current results, for the figures of merit written in the cell's header.

    The samples analysed are :meth:`analysed_signal`: ``signal.with_fs(fs_override)``,
    then ``.channel(channel)``, then ``.span(*span)`` (each only when set), and the results
    are ``estimator(analysed_signal())`` and ``correlation_estimator(analysed_signal())``.
    The frozen code recreates exactly that, so the workbench must compute it the same way.
    """

    signal: Any
    data_name: str
    channel: str | None
    span: tuple[float, float] | None
    fs_override: float | None
    estimator: Any
    correlation_estimator: Any
    spectrum: Any = None
    correlation: Any = None
    #: named analyses beyond psd/acf (name -> estimator), in the workbench's order
    analyses: dict = field(default_factory=dict)
    #: per-analysis options written to the settings file (name -> dict)
    options: dict = field(default_factory=dict)
    #: name -> specbench-form lines of an extra analysis; ``{sig}`` stands for the signal variable
    code_lines: dict = field(default_factory=dict)

    @property
    def selection(self) -> Selection:
        """The workbench's channel / span / sample-rate choices as a :class:`Selection`."""
        return Selection(channel=self.channel, span=self.span, fs=self.fs_override)

    def analysed_signal(self) -> Any:
        """The samples the estimators run on (see the class docstring for the order)."""
        return self.selection.apply(self.signal)
