"""Demo scenarios: catalogue, reproducibility, and the honesty of every demo's truth.

The truth is checked three ways: against outside formulas (statsmodels ``arma_acovf``
after Brockwell & Davis 2009, "Time Series: Theory and Methods", sec. 3.3, for the
autocovariance; ``scipy.signal.freqz`` for the transfer function), for internal
consistency (the integral of the one-sided density equals the variance, Parseval), and
against estimates from the generated samples (the Welch band covers the truth at about
its nominal rate).
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import signal
from statsmodels.tsa.arima_process import arma_acovf

from specbench._errors import InputError
from specbench.data import demo, demos
from specbench.data._demos import _gauss_markov, _resonance
from specbench.data._truth import Component, Source, Truth

NAMES = list(demos())


class TestCatalogue:
    def test_lists_every_scenario_with_one_line(self):
        cat = demos()
        assert {"test-stand", "test-stand-nan", "imu-static", "delay-pair"} <= set(cat)
        text = repr(cat)
        assert len(text.splitlines()) == len(cat)
        for name, line in cat.items():
            assert "\n" not in line and line.endswith(".") and name in text

    @pytest.mark.parametrize("name", NAMES)
    def test_default_size_keeps_a_widget_snappy(self, name):
        sig = demo(name)
        assert 1e5 <= sig.n_samples * sig.n_channels <= 1.2e6
        assert sig.origin == {"kind": "demo", "name": name, "kwargs": {}}
        assert sig.truth is not None and sig.truth.description
        assert sig.source.startswith(f"demo {name!r} (seed 0)")

    def test_same_seed_same_samples(self):
        a = demo("test-stand", duration=2.0)
        b = demo("test-stand", duration=2.0)
        c = demo("test-stand", duration=2.0, seed=1)
        assert np.array_equal(a.data, b.data)
        assert not np.array_equal(a.data, c.data)
        assert c.origin["kwargs"] == {"duration": 2.0, "seed": 1}

    def test_other_rate(self):
        sig = demo("delay-pair", fs=4000.0, duration=5.0)
        assert sig.fs == 4000.0 and sig.n_samples == 20000
        assert sig.truth.extras["delay_s"] == 0.025

    def test_errors(self):
        with pytest.raises(InputError, match=r"No demo named 'bench'\. The demos are: "
                                             r"test-stand, .*sb\.demos\(\)"):
            demo("bench")
        with pytest.raises(InputError, match=r"fs=1000 Hz is too low for the demo "
                                             r"'test-stand'.*at least 3400 Hz"):
            demo("test-stand", fs=1000)
        with pytest.raises(InputError, match=r"gives 10 samples; a demo needs at least 256"):
            demo("white-noise", duration=0.01)
        with pytest.raises(InputError, match=r"duration must be a positive number; got -1"):
            demo("white-noise", duration=-1)

    def test_test_stand_dropout_variants(self):
        zeros = demo("test-stand", duration=5.0)
        lost = demo("test-stand-nan", duration=5.0)
        assert np.isfinite(zeros.data).all()
        gap = np.isnan(lost.data[0])
        assert gap.sum() == round(0.040 * 5120)
        assert np.all(zeros.data[:, gap] == 0.0)
        assert np.array_equal(zeros.data[:, ~gap], lost.data[:, ~gap])


class TestTruthAgainstOutsideFormulas:
    fs = 1000.0

    def test_ar1_acovf_matches_statsmodels(self):
        # statsmodels.tsa.arima_process.arma_acovf (Brockwell & Davis 2009)
        src = _gauss_markov(0.3, 0.01, self.fs)
        ref = arma_acovf(np.asarray(src.a), [1.0], nobs=50, sigma2=src.q)
        assert_allclose(src.acf(np.arange(50)), ref, rtol=1e-12)
        assert src.acf(np.zeros(1))[0] == pytest.approx(0.09, rel=1e-12)

    def test_ar2_resonance_acovf_matches_statsmodels(self):
        src = _resonance(120.0, 0.05, self.fs, 2.0)
        ref = arma_acovf(np.asarray(src.a), [1.0], nobs=300, sigma2=src.q)
        assert_allclose(src.acf(np.arange(300)), ref, rtol=1e-9, atol=1e-12)
        assert ref[0] == pytest.approx(2.0, rel=1e-12)

    def test_filtered_and_delayed_ar1_acovf_matches_statsmodels(self):
        src = _gauss_markov(1.0, 0.005, self.fs)
        b = np.concatenate([np.zeros(7), signal.firwin(11, 100.0, fs=self.fs)])
        truth = Truth(self.fs, (src,), ((Component(0, tuple(b)),),), ((),))
        ref = arma_acovf(np.asarray(src.a), b, nobs=80, sigma2=src.q)
        assert_allclose(truth.acf(np.arange(80) / self.fs)[0], ref, rtol=1e-10, atol=1e-14)

    def test_density_matches_freqz(self):
        # scipy.signal.freqz gives B/A on the unit circle; S = 2 q/fs |B/A|^2 one-sided
        src = _resonance(200.0, 0.1, self.fs, 1.0)
        b = (0.5, 0.25)
        truth = Truth(self.fs, (src,), ((Component(0, b),),), ((),))
        f = np.linspace(1.0, 499.0, 300)
        _, h = signal.freqz(b, src.a, worN=f, fs=self.fs)
        assert_allclose(truth.psd(f)[0], 2 * src.q / self.fs * np.abs(h) ** 2, rtol=1e-12)

    def test_dc_and_nyquist_are_not_doubled_like_a_one_sided_welch(self):
        truth = Truth(self.fs, (Source(1.0),), ((Component(0),),), ((),))
        assert_allclose(truth.psd([0.0, 100.0, 500.0])[0], [1e-3, 2e-3, 1e-3])
        assert np.isnan(truth.psd([-1.0, 501.0])).all()


class TestTruthConsistency:
    @pytest.mark.parametrize("name", ["test-stand", "delay-pair", "white-noise"])
    def test_parseval_density_integrates_to_variance(self, name):
        truth = demo(name, duration=1.0).truth
        f = np.linspace(0, truth.fs / 2, 400_001)
        dens = truth.psd(f)
        var_random = truth.variance() - np.array([sum(ms for _, ms in ch) for ch in truth.lines])
        below = f < truth.unknown_below  # NaN there: add the (flat) density it hides
        filled = np.where(below, dens[:, ~below][:, :1], dens)
        assert_allclose(np.trapezoid(filled, f, axis=1), var_random, rtol=2e-4)

    def test_delay_pair_cross_correlation_peaks_at_the_stated_delay(self):
        sig = demo("delay-pair")
        delay = sig.truth.extras["delay_s"]
        lags = np.arange(-200, 201) / sig.fs
        assert lags[np.argmax(sig.truth.ccf(lags, 0, 1))] == pytest.approx(delay)
        # the samples agree (scipy.signal.correlate, biased estimate)
        x, y = sig.data[0] - sig.data[0].mean(), sig.data[1] - sig.data[1].mean()
        c = signal.correlate(y, x, mode="full", method="fft")
        k = signal.correlation_lags(len(y), len(x))
        assert k[np.argmax(c)] / sig.fs == pytest.approx(delay)
        assert "25 ms" in sig.source

    def test_delay_pair_coherence(self):
        truth = demo("delay-pair").truth
        coh = truth.coherence(np.array([5.0, 400.0, 900.0]))
        assert 0.8 < coh[0] <= 1.0 and coh[2] < 0.05  # the low-pass cuts the shared part

    @pytest.mark.parametrize("name", ["test-stand", "delay-pair", "white-noise"])
    def test_sample_variance_near_truth(self, name):
        sig = demo(name)
        x = sig.data - 0.0
        if name == "test-stand":  # leave out the drift and the dropout
            x = signal.detrend(x[:, : int(0.6 * sig.n_samples)], type="linear")
        assert_allclose(x.var(axis=1), sig.truth.variance(), rtol=0.05)

    def test_imu_parameters_are_stated(self):
        sig = demo("imu-static")
        params = sig.truth.extras["parameters"]
        assert set(params) == set(sig.channels)
        arw = params["gyro_x"][0]
        # white rate noise of two-sided density N^2: one-sided 2 N^2 at high frequency
        assert sig.truth.psd([49.0])[0, 0] == pytest.approx(2 * arw**2, rel=0.01)
        assert np.isnan(sig.truth.psd([0.0])).all()
        assert np.isnan(sig.truth.acf([0.0])).all()


def _coverage(spec, truth, *, skip_bins=1, line_bins=6):
    freq = spec.freq
    want = truth.psd(freq)
    df = freq[1] - freq[0]
    use = np.isfinite(want) & ~truth.near_lines(freq, line_bins * df)
    use[:, :skip_bins] = False
    use[:, -1] = False
    inside = (spec.lower <= want) & (want <= spec.upper)
    return np.array([inside[c][use[c]].mean() for c in range(want.shape[0])])


@pytest.fixture(scope="module")
def welch():
    from specbench import estimators

    return estimators.Welch


class TestBandCoversTruth:
    """The 95 % band of the estimate from each demo covers its stated truth in about 95 %
    of the bins (at the nominal rate).  A wrong truth (a factor, a mis-placed resonance,
    an undoubled one-sided level) drives the fraction far below 0.9."""

    @pytest.mark.parametrize("name", ["test-stand", "delay-pair", "white-noise"])
    def test_welch_1024(self, welch, name):
        sig = demo(name)
        spec = welch(segment_length=1024, overlap=0.5, confidence=0.95)(sig)
        cover = _coverage(spec, sig.truth)
        assert np.all((cover > 0.9) & (cover < 0.995)), cover

    def test_imu_long_segments_where_bias_and_walk_matter(self, welch):
        sig = demo("imu-static")
        spec = welch(segment_length=16384, overlap=0.5, confidence=0.95)(sig)
        cover = _coverage(spec, sig.truth, skip_bins=4)
        assert np.all((cover > 0.9) & (cover < 0.995)), cover

    def test_nan_dropout_with_gap_skipping(self, welch):
        sig = demo("test-stand-nan")
        with pytest.raises(InputError, match="non-finite"):
            welch(segment_length=1024)(sig)
        spec = welch(segment_length=1024, overlap=0.5, confidence=0.95, gaps="skip")(sig)
        assert spec.info["segments_skipped"] >= 1
        cover = _coverage(spec, sig.truth)
        assert np.all((cover > 0.9) & (cover < 0.995)), cover
