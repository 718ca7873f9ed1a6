"""Welch and periodogram against scipy.signal (reference library) and its own test vectors."""

import itertools

import numpy as np
import pytest
import scipy.signal

import specbench as sb


def imp(n, idx):
    x = np.zeros(n)
    x[idx] = 1.0
    return x


class TestScipyTestVectors:
    """Expected arrays from scipy/signal/tests/test_spectral.py (scipy's own test suite)."""

    def test_welch_real_onesided(self):
        spec = sb.Welch(segment_length=8)(imp(16, [0, 8]), fs=1.0)
        np.testing.assert_allclose(
            spec.value, [0.08333333, 0.15277778, 0.22222222, 0.22222222, 0.11111111], atol=1e-7
        )

    def test_welch_spectrum_scaling(self):
        spec = sb.Welch(segment_length=8, scaling="spectrum")(imp(16, [0, 8]), fs=1.0)
        np.testing.assert_allclose(
            spec.value, [0.015625, 0.02864583, 0.04166667, 0.04166667, 0.02083333], atol=1e-7
        )

    def test_periodogram_real_onesided(self):
        spec = sb.Periodogram()(imp(16, [0]), fs=1.0)
        np.testing.assert_allclose(spec.value, [0] + [1 / 8] * 7 + [1 / 16], atol=1e-15)

    def test_periodogram_real_twosided(self):
        spec = sb.Periodogram(sides="twosided")(imp(16, [0]), fs=1.0)
        np.testing.assert_allclose(np.fft.ifftshift(spec.value), [0] + [1 / 16] * 15, atol=1e-15)


X = np.random.default_rng(20261201).standard_normal(20_011) * 3.0 + 1.5 + np.linspace(0, 2, 20_011)
X.setflags(write=False)  # one fixed record shared read-only by the tests

WELCH_GRID = list(
    itertools.product(
        ["hann", "boxcar", ("kaiser", 7.0), ("tukey", 0.25), "flattop", ("dpss", 2.5)],
        [64, 250, 1024],
        [0.0, 0.5, 0.75, 0.9],
        ["none", "constant", "linear"],
    )
)


@pytest.mark.parametrize("window, nperseg, overlap, detrend", WELCH_GRID)
def test_welch_equals_scipy(window, nperseg, overlap, detrend):
    est = sb.Welch(window=window, segment_length=nperseg, overlap=overlap, detrend=detrend)
    spec = est(X, fs=500.0)
    f, p = scipy.signal.welch(
        X, fs=500.0, window=window, nperseg=nperseg, noverlap=est.noverlap,
        detrend=False if detrend == "none" else detrend,
    )
    np.testing.assert_allclose(spec.freq, f, rtol=0, atol=0)
    np.testing.assert_allclose(spec.value, p, rtol=1e-10, atol=1e-14 * p.max())


@pytest.mark.parametrize(
    "kw",
    [
        dict(scaling="spectrum"),
        dict(average="median"),
        dict(average="median", overlap=0.0),
        dict(nfft=3000, segment_length=1000),
        dict(nfft=1001, segment_length=1001),
        dict(sides="twosided"),
        dict(sides="twosided", nfft=1025),
    ],
)
def test_welch_options_equal_scipy(kw):
    est = sb.Welch(**kw)
    spec = est(X, fs=2.0)
    f, p = scipy.signal.welch(
        X, fs=2.0, nperseg=est.segment_length, noverlap=est.noverlap, nfft=est.nfft,
        scaling=est.scaling, average=est.average, return_onesided=est.sides != "twosided",
    )
    if est.sides == "twosided":
        f, p = np.fft.fftshift(f), np.fft.fftshift(p)
    np.testing.assert_allclose(spec.freq, f, rtol=1e-15)
    np.testing.assert_allclose(spec.value, p, rtol=1e-10, atol=1e-14 * p.max())


def test_median_of_many_segments_threaded_by_bins_equals_scipy():
    """Enough segments x bins (2047 x 513, over 2**20) that the median runs in pieces of bins on
    the engine threads: equal to scipy.signal.welch(average='median') (scipy's own median and
    bias correction, an outside reference), and to the plain one-piece median bit for bit."""
    from specbench.estimators import spectral

    x = np.random.default_rng(7).standard_normal(1 << 20)
    est = sb.Welch(segment_length=1024, average="median")
    spec = est(x, fs=4.0)
    f, p = scipy.signal.welch(x, fs=4.0, nperseg=1024, average="median")
    np.testing.assert_allclose(spec.value, p, rtol=1e-12)
    power = np.random.default_rng(8).random((2, 2047, 513))
    assert power.size >= 1 << 20
    np.testing.assert_array_equal(spectral._segment_median(power), np.median(power, axis=1))


def test_welch_complex_data_equals_scipy():
    z = X[:10_000] + 1j * X[10_000:20_000]
    spec = sb.Welch(segment_length=256)(z, fs=10.0)
    f, p = scipy.signal.welch(z, fs=10.0, nperseg=256)
    np.testing.assert_allclose(spec.value, np.fft.fftshift(p), rtol=1e-10)
    assert not spec.onesided and spec.freq[0] == pytest.approx(-5.0)


def test_welch_float32_stays_close_to_scipy_float64():
    x32 = X.astype(np.float32)
    spec = sb.Welch(segment_length=512)(x32, fs=1.0)
    _, p = scipy.signal.welch(X, fs=1.0, nperseg=512)
    np.testing.assert_allclose(spec.value[1:], p[1:], rtol=2e-4)


def test_welch_multichannel_matches_per_channel():
    data = np.stack([X, X[::-1], 2 * X])
    spec = sb.Welch(segment_length=512)(data, fs=8.0)
    assert spec.value.shape == (3, 257)
    for i in range(3):
        _, p = scipy.signal.welch(data[i], fs=8.0, nperseg=512)
        np.testing.assert_allclose(spec.value[i], p, rtol=1e-10)
    # leading axes are kept
    spec3 = sb.Welch(segment_length=512)(data.reshape(3, 1, -1), fs=8.0)
    assert spec3.value.shape == (3, 1, 257)


@pytest.mark.parametrize("window", ["boxcar", "hann", ("kaiser", 10.0)])
@pytest.mark.parametrize("detrend", ["none", "constant", "linear"])
def test_periodogram_equals_scipy(window, detrend):
    spec = sb.Periodogram(window=window, detrend=detrend)(X, fs=3.0)
    f, p = scipy.signal.periodogram(X, fs=3.0, window=window, detrend=False if detrend == "none" else detrend)
    np.testing.assert_allclose(spec.freq, f)
    np.testing.assert_allclose(spec.value, p, rtol=1e-10, atol=1e-14 * p.max())


def test_periodogram_zero_padding_equals_scipy():
    spec = sb.Periodogram(nfft=32768, scaling="spectrum")(X, fs=3.0)
    _, p = scipy.signal.periodogram(X, fs=3.0, nfft=32768, scaling="spectrum")
    np.testing.assert_allclose(spec.value, p, rtol=1e-10, atol=1e-14 * p.max())


def test_results_are_bit_for_bit_repeatable():
    est = sb.Welch(segment_length=128, overlap=0.75)
    a, b = est(X, fs=1.0), est(X.copy(), fs=1.0)
    assert np.array_equal(a.value, b.value) and np.array_equal(a.upper, b.upper)
