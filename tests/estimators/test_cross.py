"""CrossSpectrum, the phase-slope and cross-correlation delays: checks against outside
references (scipy.signal, exact results, Monte Carlo coverage) and the bad inputs."""

import math
import warnings

import numpy as np
import pytest
import scipy.signal as ss
from scipy import stats

import specbench as sb

FS = 1.0


def _pair(rng, n, snr=1.0):
    x = rng.standard_normal(n)
    return x, x + rng.standard_normal(n) / np.sqrt(snr)


# ---------------------------------------------------------------- scipy.signal equality


@pytest.mark.parametrize("window", ["hann", "hamming", ("kaiser", 6.0), "boxcar"])
@pytest.mark.parametrize("nperseg, overlap, nfft", [(128, 0.0, None), (256, 0.5, None), (200, 0.75, 256),
                                                     (255, 0.5, None)])
@pytest.mark.parametrize("detrend", ["none", "constant", "linear"])
def test_csd_and_coherence_equal_scipy(window, nperseg, overlap, nfft, detrend):
    # Outside reference: scipy.signal.csd / scipy.signal.coherence (SciPy 1.x), same settings.
    rng = np.random.default_rng(11)
    x = rng.standard_normal(5000) + 0.3
    y = np.convolve(x, [0.5, 0.3, -0.2], mode="same") + rng.standard_normal(5000)
    est = sb.CrossSpectrum(window=window, segment_length=nperseg, overlap=overlap, nfft=nfft, detrend=detrend)
    res = est(x, y, fs=250.0)
    kw = dict(fs=250.0, window=window, nperseg=nperseg, noverlap=est.noverlap, nfft=nfft,
              detrend=False if detrend == "none" else detrend)
    f, pxy = ss.csd(x, y, **kw)
    _, cxy = ss.coherence(x, y, **kw)
    np.testing.assert_allclose(res.freq, f, rtol=0, atol=0)
    np.testing.assert_allclose(res.csd, pxy, rtol=1e-10, atol=1e-13 * np.abs(pxy).max())
    inner = slice(1, None) if detrend != "none" else slice(None)  # DC is 0/0 after detrending
    np.testing.assert_allclose(res.coherence[inner], cxy[inner], rtol=1e-9, atol=1e-12)
    _, pxx = ss.welch(x, **kw)
    np.testing.assert_allclose(res.psd[0], pxx, rtol=1e-10, atol=1e-13 * pxx.max())


def test_spectrum_scaling_and_matrix_equal_scipy():
    # Outside reference: scipy.signal.csd(scaling="spectrum") for every pair of a 4-channel record.
    rng = np.random.default_rng(2)
    x = rng.standard_normal((4, 6000))
    x[1] += 0.5 * x[0]
    res = sb.CrossSpectrum(segment_length=300, overlap=0.6, scaling="spectrum")(x, fs=10.0)
    assert res.is_matrix and res.csd.shape == (4, 4, 151)
    two = sb.CrossSpectrum(segment_length=300)(x[:2], fs=10.0, pair="all")
    assert two.is_matrix and np.array_equal(two.pair(1, 0).csd, np.conj(two.pair(0, 1).csd))
    for a in range(4):
        for b in range(4):
            _, p = ss.csd(x[a], x[b], fs=10.0, nperseg=300, noverlap=180, scaling="spectrum")
            np.testing.assert_allclose(res.csd[a, b], p, rtol=1e-10, atol=1e-14)
    one = res.pair(2, 1)
    _, c = ss.coherence(x[2], x[1], fs=10.0, nperseg=300, noverlap=180)
    np.testing.assert_allclose(one.coherence, c, rtol=1e-9)
    assert one.channels == ("2", "1")


def test_float32_stays_single_precision_and_close():
    rng = np.random.default_rng(3)
    x, y = _pair(rng, 50_000)
    r64 = sb.CrossSpectrum(segment_length=512)(x, y, fs=FS)
    r32 = sb.CrossSpectrum(segment_length=512)(x.astype(np.float32), y.astype(np.float32), fs=FS)
    np.testing.assert_allclose(r32.csd, r64.csd, rtol=2e-4, atol=1e-5 * np.abs(r64.csd).max())
    from specbench.estimators._cross_engine import work_dtype

    assert work_dtype([x.astype(np.float32)]) == np.float32


def test_pair_by_name_and_index_and_signal():
    sig = sb.demo("delay-pair", duration=20.0)
    xs = sb.CrossSpectrum(segment_length=512)
    a = xs(sig, pair=("upstream", "downstream"))
    b = xs(sig, pair=(0, 1))
    c = xs(sig.data[0], sig.data[1], fs=sig.fs)
    d = xs(sig)  # two channels: the pair (0, 1)
    for r in (b, c, d):
        np.testing.assert_array_equal(r.csd, a.csd)
    assert a.channels == ("upstream", "downstream") and a.unit == "kPa^2/Hz"
    rev = xs(sig, pair=("downstream", "upstream"))
    np.testing.assert_allclose(rev.csd, np.conj(a.csd))
    np.testing.assert_allclose(rev.transfer_h2, 1 / a.transfer, rtol=1e-9)  # H2(y->x) = 1 / H1(x->y)


# ---------------------------------------------------------------- exact coherence


@pytest.mark.parametrize("snr", [0.25, 1.0, 4.0])
def test_coherence_of_signal_plus_noise_is_snr_over_one_plus_snr(snr):
    # Exact: y = x + n, independent white x and n, var n = 1/s -> gamma^2 = s / (1 + s)
    # (common practice; Bendat & Piersol 2010 sec. 9.1).  The estimate's bias
    # E[g] ~ gamma^2 + (1 - gamma^2)^2 / n_d is removed before comparing.
    rng = np.random.default_rng(4)
    x, y = _pair(rng, 400_000, snr)
    res = sb.CrossSpectrum(segment_length=256, overlap=0.5)(x, y, fs=FS)
    g2 = snr / (1 + snr)
    est = np.mean(res.coherence[1:-1]) - (1 - g2) ** 2 / res.independent_segments
    assert est == pytest.approx(g2, abs=0.004)


# ---------------------------------------------------------------- Monte Carlo coverage


def _filter_records(rng, records, n, b, a, noise):
    x = rng.standard_normal((records, n))
    y = ss.lfilter(b, a, x, axis=-1) + noise * rng.standard_normal((records, n))
    return x, y


@pytest.mark.slow
@pytest.mark.parametrize("overlap", [0.0, 0.5])
def test_threshold_exceeded_by_independent_series_in_alpha_of_bins(overlap):
    # Monte Carlo: independent white series exceed Carter's (1987) threshold
    # 1 - alpha^(1/(n_d - 1)) in a fraction alpha of the bins.
    rng = np.random.default_rng(5)
    xs = sb.CrossSpectrum(segment_length=128, overlap=overlap, confidence=0.95)
    hits = []
    for _ in range(150):
        r = xs(rng.standard_normal(4096), rng.standard_normal(4096), fs=FS)
        hits.append(r.coherence[1:-1] > r.coherence_threshold[1:-1])
    rate = np.mean(hits)
    # bins of one record are nearly independent (Hann: |c_1|^4 ~ 0.2); 9500 bins -> sd ~ 0.0025
    assert rate == pytest.approx(0.05, abs=0.01), rate


@pytest.mark.slow
def test_coherence_phase_gain_bands_cover_at_nominal_for_a_known_filter():
    # Monte Carlo over 250 records: y = lfilter(butter(2, 0.3)) x + noise; the true H and
    # coherence from scipy.signal.freqz (outside reference).  Bands: Fisher z of |gamma|
    # (Enochson & Goodman 1965), phase and gain from the normalised random error
    # sqrt(1 - g^2) / (|g| sqrt(2 n_d)) (Bendat & Piersol 2010 Table 9.6).
    rng = np.random.default_rng(6)
    b, a = ss.butter(2, 0.3)
    xs = sb.CrossSpectrum(segment_length=256, overlap=0.5, confidence=0.9)
    cover = {"coherence": [], "phase": [], "gain": []}
    x, y = _filter_records(rng, 250, 8192, b, a, 0.5)
    for k in range(x.shape[0]):
        r = xs(x[k], y[k], fs=FS)
        if k == 0:
            _, h = ss.freqz(b, a, worN=r.freq, fs=FS)
            g2 = np.abs(h) ** 2 / (np.abs(h) ** 2 + 0.25)
            inner = (g2 > 0.05) & (np.arange(r.freq.size) > 0) & (np.arange(r.freq.size) < r.freq.size - 1)
        dphi = np.angle(np.exp(1j * (r.phase - np.angle(h))))
        cover["coherence"].append((r.coherence_lower <= g2) & (g2 <= r.coherence_upper))
        cover["phase"].append(np.abs(dphi) <= (r.phase_upper - r.phase_lower) / 2)
        cover["gain"].append((r.gain_lower <= np.abs(h)) & (np.abs(h) <= r.gain_upper))
    for name, hits in cover.items():
        rate = np.mean(np.array(hits)[:, inner])
        if name == "gain":  # Goodman's circle at low coherence: at least nominal
            assert 0.9 - 0.01 <= rate <= 0.95, (name, rate)
        else:
            assert rate == pytest.approx(0.9, abs=0.025), (name, rate)


@pytest.mark.slow
@pytest.mark.parametrize("overlap, confidence", [(0.0, 0.95), (0.5, 0.9)])
def test_gain_band_covers_at_least_nominal_at_every_coherence_level(overlap, confidence):
    # Monte Carlo, 200 records at each of three noise levels: y = lfilter(butter(2, 0.3)) x + noise,
    # true |H| and coherence from scipy.signal.freqz (outside reference), bins grouped by true
    # coherence.  The log band alone covered 0.90-0.92 at a nominal 0.95 below coherence 0.2
    # (Bendat & Piersol's error is first order); with Goodman's (1965) circle there it covers
    # 0.97-0.99, and within 0.01 of nominal above coherence 0.3.
    rng = np.random.default_rng(6)
    b, a = ss.butter(2, 0.3)
    xs = sb.CrossSpectrum(segment_length=256, overlap=overlap, confidence=confidence)
    edges = np.array([0.0, 0.05, 0.1, 0.2, 0.3, 0.5, 0.7, 0.9])
    hits = np.zeros(edges.size - 1)
    count = np.zeros(edges.size - 1)
    circle_hits = np.zeros(edges.size - 1)
    for noise in (0.5, 2.0, 5.0):
        for k in range(200):
            x = rng.standard_normal(8192)
            y = ss.lfilter(b, a, x) + noise * rng.standard_normal(8192)
            r = xs(x, y, fs=FS)
            if k == 0:
                _, h = ss.freqz(b, a, worN=r.freq, fs=FS)
                g2 = np.abs(h) ** 2 / (np.abs(h) ** 2 + noise**2)
                group = np.digitize(g2, edges)[1:-1] - 1
                nd = r.independent_bins
                fq = stats.f.ppf(confidence, 2, 2 * nd - 2)
            np.add.at(hits, group, ((r.gain_lower <= np.abs(h)) & (np.abs(h) <= r.gain_upper))[1:-1])
            radius = np.sqrt(fq / (nd - 1) * (1 - r.coherence) * r.psd[1] / r.psd[0])
            np.add.at(circle_hits, group, (np.abs(r.transfer - h) <= radius)[1:-1])
            np.add.at(count, group, 1)
    rate, circle = hits / count, circle_hits / count
    # the circle itself (Goodman 1965) covers H at the nominal level at every coherence
    np.testing.assert_allclose(circle, confidence, atol=0.012)
    assert np.all(rate >= confidence - 0.012), rate
    assert np.all(np.abs(rate[edges[:-1] >= 0.3] - confidence) <= 0.012), rate


def test_phase_variance_matches_the_sample_phase_density():
    # The phase-slope weights use (1 - g^2) / (2 (n_d - 1) g^2).  Against the density of the
    # phase of an n-look sample cross spectrum (Lee, Hoppel, Mango & Miller 1994, IEEE TGRS
    # 32(5), eq. for pdf(phi); memory), integrated numerically: within 5 % for g^2 >= 0.5
    # (with n - 1; the form with n is low).
    from scipy import integrate, special

    def density(phi, n, g):
        b = g * np.cos(phi)
        lead = np.exp(special.gammaln(n + 0.5) - special.gammaln(n) + n * np.log1p(-g * g)
                      - (n + 0.5) * np.log1p(-b * b)) * b / (2 * np.sqrt(np.pi))
        return lead + (1 - g * g) ** n / (2 * np.pi) * special.hyp2f1(n, 1, 0.5, b * b)

    for n in (14, 30, 60):
        for g2 in (0.5, 0.8, 0.95):
            g = math.sqrt(g2)
            total = integrate.quad(density, -np.pi, np.pi, args=(n, g))[0]
            var = integrate.quad(lambda p, n, g: p * p * density(p, n, g), -np.pi, np.pi, args=(n, g))[0]
            assert total == pytest.approx(1.0, abs=1e-6)
            assert var == pytest.approx((1 - g2) / (2 * (n - 1) * g2), rel=0.05), (n, g2)
            assert var > (1 - g2) / (2 * n * g2)


def _delayed_records(rng, records, n, d, noise):
    b, a = ss.butter(4, 0.25)
    x = ss.lfilter(b, a, rng.standard_normal((records, n)), axis=-1)
    f = np.fft.rfftfreq(n)
    y = np.fft.irfft(np.fft.rfft(x, axis=-1) * np.exp(-2j * np.pi * f * d), n=n, axis=-1)
    return x + noise * rng.standard_normal(x.shape), y + noise * rng.standard_normal(x.shape)


def test_known_fractional_delay_is_recovered():
    # A band-limited record delayed by 3.37 samples (exact, by a frequency-domain shift).
    rng = np.random.default_rng(7)
    x, y = _delayed_records(rng, 1, 200_000, 3.37, 0.1)
    d1 = sb.CrossSpectrum(segment_length=512)(x[0], y[0], fs=FS).delay(band=(0.0, 0.2))
    d2 = sb.CrossCorrelation(max_lag=50)(x[0], y[0], fs=FS).delay()
    for d in (d1, d2):
        assert d.value == pytest.approx(3.37, abs=0.02), d
        assert d.lower < 3.37 < d.upper
        assert 0 < d.stderr < 0.02
    assert d1.samples == pytest.approx(d1.value)


def _binomial_tolerance(p: float, records: int, sigmas: float = 3.0) -> float:
    """sigmas standard deviations of a coverage rate over independent records (binomial)."""
    return sigmas * math.sqrt(p * (1 - p) / records)


@pytest.mark.slow
def test_delay_intervals_cover_at_nominal():
    # Monte Carlo over 1000 records: both delay estimators' 90 % intervals cover 3.37 samples
    # within 3 binomial standard deviations (0.028).  Measured (seed 8): phase slope 0.898
    # (0.873 before the misalignment correction), cross-correlation peak 0.921.
    records = 1000
    rng = np.random.default_rng(8)
    x, y = _delayed_records(rng, records, 16384, 3.37, 0.3)
    xs = sb.CrossSpectrum(segment_length=256, confidence=0.9)
    cc = sb.CrossCorrelation(max_lag=40, confidence=0.9)
    hit1, hit2, e1, e2 = [], [], [], []
    for k in range(x.shape[0]):
        d1 = xs(x[k], y[k], fs=FS).delay(band=(0.0, 0.2))
        d2 = cc(x[k], y[k], fs=FS).delay()
        hit1.append(d1.lower <= 3.37 <= d1.upper)
        hit2.append(d2.lower <= 3.37 <= d2.upper)
        e1.append(d1.value)
        e2.append(d2.value)
    tol = _binomial_tolerance(0.9, records)
    assert np.mean(hit1) == pytest.approx(0.9, abs=tol)
    assert np.mean(hit2) == pytest.approx(0.9, abs=tol)
    assert abs(np.mean(e1) - 3.37) < 0.01 and abs(np.mean(e2) - 3.37) < 0.01


@pytest.mark.slow
@pytest.mark.parametrize("segment_length, noise", [(128, 0.3), (2048, 0.3), (256, 1.0)])
def test_phase_delay_interval_covers_across_segment_lengths(segment_length, noise):
    # 600 records each: short segments (delay 2.6 % of the segment: the misalignment tilt of the
    # phase, 0.67 coverage without its correction), few segments (n_d ~ 14: the model variance
    # is inflated by the residual scatter, 0.82 without), low coherence (~0.25 in the pass band).
    # Tolerance: 3 binomial standard deviations (0.037).
    records = 600
    rng = np.random.default_rng(8)
    x, y = _delayed_records(rng, records, 16384, 3.37, noise)
    xs = sb.CrossSpectrum(segment_length=segment_length, confidence=0.9)
    hits = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", sb.SpecbenchWarning)
        for k in range(records):
            d = xs(x[k], y[k], fs=FS).delay(band=(0.0, 0.2))
            hits.append(d.lower <= 3.37 <= d.upper)
    assert np.mean(hits) == pytest.approx(0.9, abs=_binomial_tolerance(0.9, records))


def test_phase_delay_not_thrown_by_chance_coherent_bins():
    # Below 0.2 cycles/sample y is x delayed by 7.3 samples; above, independent noise: the
    # ~5 % of incoherent bins above the threshold (random phase) must not shift the fit
    # (the residual phase is wrapped, never unwrapped across them).
    rng = np.random.default_rng(16)
    n = 400_000
    x = rng.standard_normal(n)
    f = np.fft.rfftfreq(n)
    spec = np.fft.rfft(x) * np.exp(-2j * np.pi * f * 7.3)
    noise = np.fft.rfft(rng.standard_normal(n))
    y = np.fft.irfft(np.where(f < 0.2, spec, noise), n=n) + 0.1 * rng.standard_normal(n)
    d = sb.CrossSpectrum(segment_length=1024)(x, y, fs=FS).delay()
    assert d.value == pytest.approx(7.3, abs=0.02) and d.info["bins_used"] < 0.5 * d.info["bins_in_band"]


def test_delay_pair_demo_both_methods():
    sig = sb.demo("delay-pair")
    truth = sig.truth.extras["delay_s"]
    res = sb.CrossSpectrum(segment_length=2048)(sig, pair=("upstream", "downstream"))
    d1 = res.delay(band=(1.0, 150.0))
    with pytest.warns(sb.SpecbenchWarning, match=r"4.9% of the segment length .* at least 1667 samples"):
        sb.CrossSpectrum(segment_length=1024)(sig).delay(band=(1.0, 150.0))
    d2 = sb.CrossCorrelation(max_lag=0.1)(sig, pair=("upstream", "downstream")).delay()
    for d in (d1, d2):
        assert abs(d.value - truth) < 0.05 / sig.fs  # a twentieth of a sample
        assert d.lower <= truth <= d.upper
    assert "ms" in repr(d1)


# ---------------------------------------------------------------- gaps


def test_gaps_skip_leaves_out_segments_and_dof_follow():
    rng = np.random.default_rng(9)
    x, y = _pair(rng, 20_000)
    y[5000:5300] = np.nan
    est = sb.CrossSpectrum(segment_length=512, gaps="skip")
    res = est(x, y, fs=FS)
    ref = sb.Welch(segment_length=512, gaps="skip")(np.vstack([x, y]), fs=FS)
    assert res.segments == ref.segments and res.info["segments_skipped"] == ref.info["segments_skipped"] > 0
    assert res.independent_segments == pytest.approx(ref.dof[5] / 2)
    # the same as averaging the clean segments by hand (scipy.signal.csd per clean stretch)
    np.testing.assert_allclose(res.psd[0], ref.value[0], rtol=1e-10)
    with pytest.raises(sb.InputError, match=r"non-finite sample.*gaps='skip'"):
        sb.CrossSpectrum(segment_length=512)(x, y, fs=FS)


def test_phase_delay_with_gaps():
    rng = np.random.default_rng(10)
    x, y = _delayed_records(rng, 1, 100_000, 3.37, 0.1)
    sig = sb.Signal(np.vstack([x[0], y[0]]), fs=1.0, channels=["a", "b"])
    d_full = sb.CrossSpectrum(segment_length=512)(sig).delay(band=(0.0, 0.2))
    data = sig.data.copy()
    data[1, 40_000:41_000] = np.nan
    gappy = sb.Signal(data, fs=1.0, channels=["a", "b"])
    d = sb.CrossSpectrum(segment_length=512, gaps="skip")(gappy).delay(band=(0.0, 0.2))
    assert d.value == pytest.approx(3.37, abs=0.03) and d.stderr >= d_full.stderr * 0.98


def test_cross_correlation_delay_on_the_demo_with_gaps():
    # the delay-pair demo with two stretches lost (NaN, as sb.load(on_gap="fill") gives them)
    sig = sb.demo("delay-pair")
    truth = sig.truth.extras["delay_s"]
    data = sig.data.copy()
    data[0, 30_000:32_000] = np.nan
    data[1, 90_000:90_500] = np.nan
    gappy = sb.Signal(data, fs=sig.fs, channels=list(sig.channels))
    full = sb.CrossCorrelation(max_lag=0.1)(sig).delay()
    corr = sb.CrossCorrelation(max_lag=0.1, gaps="pairs")(gappy)
    d = corr.delay()
    assert abs(d.value - truth) < 0.05 / sig.fs and d.lower <= truth <= d.upper
    assert d.stderr > full.stderr  # fewer pairs behind it
    assert corr.info["pairs"][corr.info["max_lag_samples"]] == sig.n_samples - 2000 - 500
    # without gaps the present-pair estimate is the usual one (divisor N)
    same = sb.CrossCorrelation(max_lag=0.1, gaps="pairs")(sig)
    np.testing.assert_array_equal(same.value, sb.CrossCorrelation(max_lag=0.1)(sig).value)
    from specbench.estimators.correlation import _present_pair_correlations

    r, raa, _, _ = _present_pair_correlations(sig.data[0], sig.data[1], 20, "constant")
    ref = sb.CrossCorrelation(max_lag=20 / sig.fs, normalize=False)(sig)
    np.testing.assert_allclose(r, ref.value, rtol=1e-9, atol=1e-12 * np.abs(ref.value).max())
    with pytest.raises(sb.InputError, match="non-finite"):
        sb.CrossCorrelation(max_lag=0.1)(gappy)
    with pytest.raises(sb.InputError, match="detrend='constant' or 'none'"):
        sb.CrossCorrelation(max_lag=0.1, gaps="pairs", detrend="linear")(gappy)


# ---------------------------------------------------------------- bad input


def test_bad_inputs_name_value_and_fix():
    rng = np.random.default_rng(12)
    sig = sb.Signal(rng.standard_normal((2, 4096)), fs=100.0, channels=["a", "b"])
    xs = sb.CrossSpectrum(segment_length=256)
    with pytest.raises(sb.InputError, match=r"No channel named 'c'; the channels are \['a', 'b'\]"):
        xs(sig, pair=("a", "c"))
    with pytest.raises(sb.InputError, match=r"Channel index 5 is out of range for data with 2 channels"):
        xs(sig, pair=(0, 5))
    with pytest.raises(sb.InputError, match=r"names channel 'a' twice"):
        xs(sig, pair=("a", "a"))
    with pytest.raises(sb.InputError, match=r"needs two channels, but the data has 1"):
        xs(rng.standard_normal(4096), fs=100.0)
    with pytest.raises(sb.InputError, match=r"x has 4096 samples and y has 4000.*Cut both"):
        xs(rng.standard_normal(4096), rng.standard_normal(4000), fs=100.0)
    other = sb.Signal(rng.standard_normal(4096), fs=50.0)
    with pytest.raises(sb.InputError, match=r"sampled at 100 Hz and y at 50 Hz.*Resample"):
        xs(sb.Signal(sig.data[0], fs=100.0), other)
    with pytest.raises(sb.InputError, match=r"average 1 segment .*coherence is identically 1.*shorter segment_length"):
        sb.CrossSpectrum(segment_length=4096)(sig)
    res = xs(sig)
    with pytest.raises(sb.InputError, match=r"band=\(10, 80\) Hz lies outside the data's range 0 to 50 Hz"):
        res.delay(band=(10, 80))
    with pytest.raises(sb.InputError, match=r"f1 < f2"):
        res.delay(band=(20, 10))
    with pytest.raises(sb.InputError, match=r"have coherence above the threshold.*Choose a band where"):
        res.delay(band=(10.0, 10.5))
    with pytest.raises(sb.SettingsError, match=r"'nfft' parameter of CrossSpectrum"):
        sb.CrossSpectrum(segment_length=512, nfft=256)
    mat = xs(rng.standard_normal((3, 4096)), fs=1.0)
    with pytest.raises(sb.InputError, match=r"res.pair\(a, b\).delay"):
        mat.delay()


def test_cross_correlation_delay_refuses_edge_peak():
    rng = np.random.default_rng(13)
    x = ss.lfilter(*ss.butter(2, 0.02), rng.standard_normal(20_000))
    y = np.roll(x, 12)
    with pytest.raises(sb.InputError, match="edge of its lag range.*larger max_lag"):
        sb.CrossCorrelation(max_lag=10)(x, y, fs=FS).delay()


def test_result_table_and_repr():
    rng = np.random.default_rng(14)
    x, y = _pair(rng, 10_000)
    r = sb.CrossSpectrum(segment_length=256)(x, y, fs=100.0)
    df = r.to_dataframe()
    assert list(df.columns[:3]) == ["csd_real", "csd_imag", "coherence"] and len(df) == r.freq.size
    assert "K = 77 segments" in repr(r)
    # threshold values of Carter (1987) at alpha = 0.05 (Carter 1987, Proc. IEEE 75(2); memory): n_d = 8 -> 0.3482
    assert 1 - 0.05 ** (1 / 7) == pytest.approx(0.3482, abs=1e-4)
    nd = r.independent_segments
    assert r.coherence_threshold[5] == pytest.approx(1 - 0.05 ** (1 / (nd - 1)))


def test_streams_without_copying_the_record():
    # 2 channels x 2e6 float64 samples = 32 MB; the engine's extra memory is a few blocks
    # (blocks of 2**18 samples since 2026-12-03: 14.4 MB measured, 11 MB with 2**17), so a
    # copy of the record (32 MB) fails the bound.
    import tracemalloc

    rng = np.random.default_rng(15)
    x = rng.standard_normal((2, 2_000_000))
    est = sb.CrossSpectrum(segment_length=4096)
    est(x[0], x[1], fs=FS)  # warm the per-thread buffers
    tracemalloc.start()
    est(x[0], x[1], fs=FS)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 18 * 2**20, peak / 2**20
    mm32 = x.astype(np.float32)
    tracemalloc.start()
    est(mm32, fs=FS)
    _, peak32 = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak32 < 18 * 2**20, peak32 / 2**20


@pytest.mark.parametrize("estimator", [sb.CrossSpectrum(segment_length=256), sb.CrossCorrelation(max_lag=10)],
                         ids=["CrossSpectrum", "CrossCorrelation"])
def test_both_cross_estimators_resolve_channels_with_one_set_of_messages(estimator):
    # one function (estimators/_channels.select_channels) resolves x, y, fs and pair for both
    rng = np.random.default_rng(21)
    sig = sb.Signal(rng.standard_normal((2, 4096)), fs=100.0, channels=["a", "b"])
    three = sb.Signal(rng.standard_normal((3, 4096)), fs=100.0, channels=["a", "b", "c"])
    owner = type(estimator).__name__
    cases = [
        (lambda: estimator(sig, pair=("a", "c")),
         r"No channel named 'c'; the channels are \['a', 'b'\]\. Name one of them in pair=\(a, b\)"),
        (lambda: estimator(sig, pair=(0, 5)), r"Channel index 5 is out of range for data with 2 channels; use 0 to 1"),
        (lambda: estimator(sig, pair=("a", "a")), r"names channel 'a' twice; choose two different channels"),
        (lambda: estimator(sig, pair="a"), r"pair= must name two channels, like pair=\('a', 'b'\)"),
        (lambda: estimator(rng.standard_normal(4096), fs=100.0), rf"{owner} needs two channels, but the data has 1"),
        (lambda: estimator(rng.standard_normal(4096), rng.standard_normal(4000), fs=100.0),
         rf"x has 4096 samples and y has 4000; {owner} needs simultaneous records of equal length"),
        (lambda: estimator(sb.Signal(sig.data[0], fs=100.0), sb.Signal(sig.data[1], fs=50.0)),
         rf"x is sampled at 100 Hz and y at 50 Hz; {owner} needs simultaneous samples at one rate"),
        (lambda: estimator(sig, sig.data[0], fs=100.0), rf"{owner}\(x, y\): x has 2 and y has 1 channels"),
        (lambda: estimator(sig.data[0], sig.data[1], fs=100.0, pair=(0, 1)), rf"{owner}: give either y= or pair="),
    ]
    if owner == "CrossCorrelation":  # one pair only: three channels need pair=
        cases.append((lambda: estimator(three), r"The data has 3 channels; say which two to use with pair=\(a, b\)"))
    for call, message in cases:
        with pytest.raises(sb.InputError, match=message):
            call()
    got = estimator(three, pair=("c", 0))
    assert got.channels == ("c", "a")


def test_phase_delay_over_many_bins_needs_no_bins_squared_memory():
    # 8191 coherent bins: a bins x bins matrix would take 0.5 GB; the banded sums take a few MB
    import tracemalloc

    rng = np.random.default_rng(22)
    x = rng.standard_normal(200_000)
    y = np.roll(x, 3) + 0.5 * rng.standard_normal(x.size)
    res = sb.CrossSpectrum(segment_length=16384)(x, y, fs=FS)
    tracemalloc.start()
    try:
        d = res.delay()
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert d.info["bins_used"] > 8000 and d.value == pytest.approx(3.0, abs=0.01)
    assert peak < 40e6, peak
