"""What the freeze layer needs to know about a workbench session (the contract with widgets/)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


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
