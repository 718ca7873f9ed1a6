"""Shared data and helpers of the freeze tests: invented test records, states, cell execution."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

import specbench as sb
from specbench.freeze import FreezeState

FS = 1000.0


def ar2_record(n: int = 24_000, seed: int = 7) -> np.ndarray:
    """Two channels: a resonant AR(2) process plus a 120 Hz tone, and a slowly drifting one.

    Invented test data (no recording): an offset and a drift so that detrending matters,
    a tone so that windows and leakage matter.
    """
    rng = np.random.default_rng(seed)
    e = rng.standard_normal((2, n + 200))
    a1, a2 = 2 * 0.95 * np.cos(2 * np.pi * 80 / FS), -(0.95**2)
    y = np.zeros_like(e)
    for t in range(2, e.shape[1]):
        y[:, t] = a1 * y[:, t - 1] + a2 * y[:, t - 2] + e[:, t]
    y = y[:, 200:]
    t = np.arange(n) / FS
    y[0] += 3.0 * np.sin(2 * np.pi * 120.0 * t) + 5.0
    y[1] = 0.3 * y[1] + 0.02 * t - 1.5 + np.cumsum(rng.standard_normal(n)) * 0.01
    return y


@pytest.fixture(scope="session")
def record() -> np.ndarray:
    return ar2_record()


@pytest.fixture(scope="session")
def signal(record) -> sb.Signal:
    return sb.Signal(record, fs=FS, channels=["shaker", "frame"], unit="m/s^2")


def make_state(signal, estimator, acf=None, *, data_name="x", channel=None, span=None, fs=None,
               compute=True) -> FreezeState:
    """A FreezeState with the results computed the way the workbench computes them."""
    state = FreezeState(
        signal=signal,
        data_name=data_name,
        channel=channel,
        span=span,
        fs_override=fs,
        estimator=estimator,
        correlation_estimator=acf if acf is not None else sb.Autocorrelation(),
    )
    if not compute:
        return state
    data = state.analysed_signal()
    return dataclasses.replace(
        state, spectrum=state.estimator(data), correlation=state.correlation_estimator(data)
    )


def run_cell(code: str, **names) -> dict:
    """Execute a generated cell in a fresh namespace holding only ``names``."""
    ns = dict(names)
    exec(compile(code, "<frozen>", "exec"), ns)
    return ns


def assert_close(actual, expected, rtol=1e-10, what=""):
    """Equal to floating-point precision: relative 1e-10, and 1e-12 of the largest value absolute
    (for entries that are zero up to rounding, such as correlations at large lags)."""
    actual, expected = np.asarray(actual), np.asarray(expected)
    assert actual.shape == expected.shape, f"{what}: shape {actual.shape} != {expected.shape}"
    scale = float(np.nanmax(np.abs(expected))) if expected.size else 0.0
    np.testing.assert_allclose(actual, expected, rtol=rtol, atol=1e-12 * scale, err_msg=what)
