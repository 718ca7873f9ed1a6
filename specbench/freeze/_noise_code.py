"""Code cells of a noise-model analysis: the specbench form (reproduces the Allan deviation,
the fitted terms and the filter's Q and R bit for bit) and a plain-numpy form of the Allan
deviation (explicit cumulative sums; equal to floating-point rounding, not bit for bit, since
the streamed engine sums per block)."""

from __future__ import annotations

from typing import Any

from ..models import AllanDeviation
from ._cross_form import _signal_lines
from ._describe import py, wrap_comment

__all__ = ["noise_code"]


def noise_code(signal: Any, estimator: AllanDeviation, *, terms: tuple | None = None, dt: float | None = None,
               channel: int = 0, confidence: float = 0.683, replicates: int = 48, seed: int = 0,
               style: str = "specbench", data_name: str = "data") -> str:
    """The code cell of a noise-model analysis of ``signal`` (a Signal): the Allan deviation
    with ``estimator``, the terms fitted (``terms``) and, with ``dt``, the filter's Q and R."""
    if style not in ("specbench", "scipy", "numpy"):
        raise ValueError(f"style must be 'specbench' or 'numpy'; got {style!r}")
    lines = ["import numpy as np", "import specbench as sb", ""] + _signal_lines(signal, data_name)
    if style == "specbench":
        lines += [f"allan = sb.{estimator!r}(signal)"]
        if terms:
            lines += [f"model = sb.fit_noise(allan, terms={py(tuple(terms))}, channel={channel!r}, "
                      f"confidence={confidence!r}, replicates={replicates!r}, seed={seed!r})"]
            if dt is not None:
                lines += [f"kalman = model.kalman(dt={float(dt)!r})",
                          "Q, R = kalman.Q, kalman.R   # per step; R = N^2 / dt (two-sided N, IEEE 952)"]
        lines += wrap_comment("A noise model from one static recording does not capture temperature, vibration "
                              "or aging effects: validate a filter tuned from it on the target system.")
        return "\n".join(lines) + "\n"
    if estimator.input != "rate" or not estimator.overlapping:
        lines += wrap_comment("The plain form below covers the overlapping Allan deviation of rate data only; "
                              "use the specbench form for these settings.")
    grid = estimator.taus
    lines += [
        "x = np.asarray(signal.data, dtype=float).reshape(-1, signal.n_samples)[" + repr(channel) + "]",
        "fs = signal.fs",
        "c = np.concatenate([[0.0], np.cumsum(x - x[:65536][np.isfinite(x[:65536])].mean())])  # C_k = sum_{j<k} y_j",
        "p = c.size",
    ]
    if grid == "octave":
        lines += ["m = 2 ** np.arange(int(np.log2((p - 1) // 2)) + 1)"]
    elif grid == "decade":
        lines += ["m = np.array([v * d for d in 10 ** np.arange(18) for v in (1, 2, 5) if v * d <= (p - 1) // 2])"]
    else:
        lines += [f"m = np.rint(np.array({py(tuple(grid))}) * fs).astype(int)"]
    lines += [
        "tau = m / fs",
        "# overlapping Allan variance: half the mean square difference of successive cluster averages",
        "avar = np.array([np.mean(((c[2 * k:] - 2 * c[k:p - k] + c[:p - 2 * k]) / k) ** 2) / 2 for k in m])",
        "adev = np.sqrt(avar)",
    ]
    lines += wrap_comment("No plain form of the intervals, the term fit or Q and R here: they need the edf table "
                          "and the term fit of fit_noise; use the specbench form for them.")
    return "\n".join(lines) + "\n"
