"""Fixtures of the headless widget tests: signals with known content and workbenches."""

import numpy as np
import pytest

import specbench as sb

FS = 1000.0


def _two_channels(n: int = 40_000, seed: int = 3) -> np.ndarray:
    """Two channels: a 50 Hz tone on red-ish noise, and a 120 Hz tone on white noise."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / FS
    red = np.cumsum(rng.standard_normal(n)) * 0.02
    red -= np.linspace(red[0], red[-1], n)
    a = np.sin(2 * np.pi * 50.0 * t) + red + 0.3 * rng.standard_normal(n)
    b = 0.5 * np.sin(2 * np.pi * 120.0 * t) + rng.standard_normal(n)
    return np.vstack([a, b])


@pytest.fixture
def sig():
    return sb.Signal(_two_channels(), fs=FS, channels=["left", "right"], unit="V")


@pytest.fixture
def bench(sig):
    return sb.Workbench(sig)


@pytest.fixture(scope="module")
def big_sig():
    """1e7 samples (the size the display budget is checked at)."""
    rng = np.random.default_rng(7)
    n = 10_000_000
    x = rng.standard_normal(n)
    x[5_000_000] = 80.0  # one spike the overview must keep
    return sb.Signal(x, fs=10_000.0, channels=["x"], unit="m/s^2")


def assert_same_spectrum(a, b):
    """Two spectra with identical bits (frequencies, estimate, band, dof)."""
    for name in ("freq", "value", "lower", "upper", "dof"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    assert a.estimator == b.estimator


def assert_same_correlation(a, b):
    for name in ("lag", "value", "lower", "upper"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    assert a.estimator == b.estimator
