"""Physical scaling: white-noise level, Parseval, on-bin tone amplitude, views."""

import warnings

import numpy as np
import pytest

import specbench as sb

FS = 2000.0
N = 2**17
SIGMA = 0.3
WHITE = np.random.default_rng(7).standard_normal(N) * SIGMA  # one fixed record, read-only
WHITE.setflags(write=False)

ESTIMATORS = [
    sb.Welch(segment_length=1024),
    sb.Welch(segment_length=1024, window="blackmanharris", overlap=0.75),
    sb.Periodogram(window="hann"),
    sb.Multitaper(segment_length=4096),
    sb.Multitaper(segment_length=4096, adaptive=False),
    sb.Correlogram(max_lag=128),
]


@pytest.mark.parametrize("est", ESTIMATORS, ids=repr)
def test_white_noise_level_is_two_sigma2_over_fs(est):
    # Discrete white noise of variance sigma^2 at fs: one-sided density 2 sigma^2 / fs
    # (Percival & Walden 1993; from memory)
    spec = est(WHITE, fs=FS)
    inner = spec.value[5:-5]
    assert np.mean(inner) == pytest.approx(2 * SIGMA**2 / FS, rel=0.02)


@pytest.mark.parametrize("est", ESTIMATORS, ids=repr)
def test_parseval_integral_equals_variance(est):
    # integral of the one-sided density = variance of the detrended data (common practice)
    spec = est(WHITE + 5.0, fs=FS)
    assert spec.parseval_ratio() == pytest.approx(1.0, abs=0.02)
    assert spec.variance == pytest.approx(np.var(WHITE), rel=1e-9)


@pytest.mark.parametrize("window", ["boxcar", "hann", "flattop", ("kaiser", 12.0), "blackmanharris"])
def test_on_bin_sine_reads_a_squared_over_two(window):
    # a sine of amplitude A on a bin gives a power-spectrum peak of A^2/2 for any window
    # (common practice)
    nperseg, amp = 1024, 3.0
    f0 = 100 * FS / nperseg
    t = np.arange(N) / FS
    x = amp * np.sin(2 * np.pi * f0 * t)
    spec = sb.Welch(window=window, segment_length=nperseg, scaling="spectrum")(x, fs=FS)
    # (Kaiser beta=12 leaks ~1e-7 from the negative-frequency image: still A^2/2 to 1e-6)
    assert spec.value.max() == pytest.approx(amp**2 / 2, rel=1e-6)
    assert spec.freq[np.argmax(spec.value)] == pytest.approx(f0)
    dens = sb.Welch(window=window, segment_length=nperseg)(x, fs=FS)
    power = dens.view("power")[0]
    assert power.max() == pytest.approx(amp**2 / 2, rel=1e-6)


def test_views_transform_estimate_and_band_together():
    spec = sb.Welch(segment_length=256)(WHITE, fs=FS)
    v, lo, hi, unit = spec.view("asd")
    np.testing.assert_allclose(v**2, spec.value)
    np.testing.assert_allclose(lo**2, spec.lower)
    db, dlo, dhi, dunit = spec.view("db")
    np.testing.assert_allclose(10 ** (db / 10), spec.value)
    np.testing.assert_allclose(dhi - dlo, 10 * np.log10(spec.upper / spec.lower))
    assert unit == "1/√Hz" and dunit == "dB re 1 1/Hz"
    assert spec.band_db() == pytest.approx(float(np.median(dhi - dlo)), rel=1e-9)


def test_units_follow_the_signal():
    sig = type("S", (), dict(data=WHITE[None, :], fs=FS, channels=("ax",), unit="m/s^2"))()
    spec = sb.Welch()(sig)
    assert spec.unit == "(m/s^2)^2/Hz"
    assert spec.view("asd")[3] == "m/s^2/√Hz"
    assert sb.Welch(scaling="spectrum")(sig).unit == "(m/s^2)^2"
    assert spec.channels == ("ax",)
    sig_v = type("S", (), dict(data=WHITE[None, :], fs=FS, channels=("v",), unit="V"))()
    assert sb.Welch()(sig_v).unit == "V^2/Hz"


def test_with_confidence_equals_a_fresh_estimate():
    est = sb.Welch(segment_length=512)
    spec = est(WHITE, fs=FS)
    again = spec.with_confidence(0.8)
    fresh = est.replace(confidence=0.8)(WHITE, fs=FS)
    assert np.array_equal(again.lower, fresh.lower) and np.array_equal(again.upper, fresh.upper)
    assert again.estimator == fresh.estimator and spec.confidence == 0.95
    with pytest.raises(sb.SettingsError, match="'confidence' parameter of Welch"):
        spec.with_confidence(1.5)


def test_whole_record_multitaper_of_a_long_record_needs_no_warning():
    # tapers of long records are now built in O(N) (estimators/_dpss.py): no cost warning
    x = np.zeros(1 << 21)
    x[::7] = 1.0
    with warnings.catch_warnings():
        warnings.simplefilter("error", sb.SpecbenchWarning)
        spec = sb.Multitaper(bandwidth=1.0)(x, fs=1.0)
    assert spec.segments == 1 and np.all(np.isfinite(spec.value))



@pytest.mark.parametrize("lag_window", ["parzen", "bartlett", "hann", "hamming"])
@pytest.mark.parametrize("max_lag", [64, 400])
def test_correlogram_on_bin_sine_reads_a_squared_over_two(lag_window, max_lag):
    # a sine of amplitude A has line power A^2/2 (common practice); the Blackman-Tukey
    # estimate of it is (A^2/2) dt sum_k w_k (1 - |k|/N) at the line (Percival & Walden 1993,
    # sec. 6.7: the spectral window of the lag window), so the power spectrum divides by
    # that height, not by the bandwidth 1/(dt sum w_k^2) of the dof (which read 1.2-1.8 dB high)
    amp, n = 3.0, 2**16
    est = sb.Correlogram(max_lag=max_lag, lag_window=lag_window, scaling="spectrum")
    nfft = 1 << int(np.ceil(np.log2(2 * max_lag)))
    f0 = 40 * FS / nfft
    x = amp * np.sin(2 * np.pi * f0 * np.arange(n) / FS)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", sb.SpecbenchWarning)  # hann/hamming dip below zero
        spec = est(x, fs=FS)
        dens = est.replace(scaling="density")(x, fs=FS)
    k = int(np.argmax(spec.value))
    assert spec.freq[k] == pytest.approx(f0)
    # residual: the negative-frequency image's leakage, < 0.01 dB for these windows
    assert spec.value[k] == pytest.approx(amp**2 / 2, rel=2e-3)
    assert dens.view("power")[0][k] == pytest.approx(amp**2 / 2, rel=2e-3)
    # and the views agree with each other: density of the spectrum-scaled estimate = density
    np.testing.assert_allclose(spec.view("density")[0], dens.value, rtol=1e-12)
