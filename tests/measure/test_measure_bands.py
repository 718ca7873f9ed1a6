"""Band power / RMS with intervals: truth, Monte Carlo coverage, and the failure of bins-as-independent."""

import numpy as np
import pytest
from scipy import stats

import specbench as sb

FS = 1000.0
R = 2000  # Monte Carlo records, one estimator call on a (R, n) array


def _coverage(m, truth):
    return float(np.mean((m.lower <= truth) & (truth <= m.upper)))


def _independent_interval(spec, f1, f2, confidence=0.95):
    """The alternative that treats bins as independent chi-squares (each with its own dof).

    Satterthwaite (1946) for a sum of independent chi-squares; the edge rule of DC/Nyquist is
    irrelevant here (bands away from them)."""
    dens = spec.view("density")[0]
    lo = spec.freq - spec.df / 2
    hi = spec.freq + spec.df / 2
    c = np.clip(np.minimum(hi, f2) - np.maximum(lo, f1), 0, None)
    p = (dens * c).sum(-1)
    g = 2 / spec.dof
    # same unbiased plug-in as specbench (E S^2 = S^2 (1 + g)), only the correlation is left out
    var = (c * c * dens * dens * g / (1 + g)).sum(-1)
    nu = 2 * p * p / var - 2
    a = 1 - confidence
    return nu * p / stats.chi2.ppf(1 - a / 2, nu), nu * p / stats.chi2.ppf(a / 2, nu)


CASES = [
    ("welch-hann-50", sb.Welch(segment_length=256, detrend="none"), 2048),
    ("welch-blackman-75", sb.Welch(segment_length=256, window="blackman", overlap=0.75, detrend="none"), 2048),
    ("periodogram-hann", sb.Periodogram(window="hann", detrend="none"), 512),
    ("periodogram-boxcar", sb.Periodogram(detrend="none"), 512),
    ("multitaper-nw3", sb.Multitaper(bandwidth=3.0, detrend="none"), 512),
    ("multitaper-fixed", sb.Multitaper(bandwidth=2.0, adaptive=False, detrend="none"), 256),
    ("correlogram-parzen", sb.Correlogram(max_lag=32, detrend="none"), 2048),
]


@pytest.mark.slow
@pytest.mark.parametrize("name,est,n", CASES, ids=[c[0] for c in CASES])
def test_band_power_of_white_noise_and_coverage(name, est, n):
    # white noise of variance sigma^2: one-sided density 2 sigma^2 / fs, so the band power is
    # 2 sigma^2 (f2 - f1) / fs (Percival & Walden 1993, from memory; common practice)
    rng = np.random.default_rng(11)
    sigma = 1.7
    x = sigma * rng.standard_normal((R, n))
    spec = est(x, fs=FS)
    for f1, f2 in [(100.0, 140.0), (101.3, 131.9), (470.0, 500.0), (0.0, 40.0)]:
        truth = 2 * sigma**2 * (f2 - f1) / FS
        m = spec.band_power(f1, f2)
        assert np.mean(m.value) == pytest.approx(truth, rel=4 * np.std(m.value) / np.sqrt(R) / truth + 1e-3)
        cov = _coverage(m, truth)
        # 95 % nominal; binomial sd at R = 2000 is 0.5 %
        assert 0.93 <= cov <= 0.97, (name, f1, f2, cov)
        # the Satterthwaite dof agree with the dof seen across the records: 2 mean^2 / var
        nu_emp = 2 * np.mean(m.value) ** 2 / np.var(m.value)
        assert np.median(m.dof) == pytest.approx(nu_emp, rel=0.15)


@pytest.mark.slow
@pytest.mark.parametrize("name,est,n", [c for c in CASES if c[0] != "periodogram-boxcar"],
                         ids=[c[0] for c in CASES if c[0] != "periodogram-boxcar"])
def test_bins_as_independent_interval_fails_coverage(name, est, n):
    # tapers, overlap and multitaper correlate adjacent bins: an interval that ignores it is too narrow
    rng = np.random.default_rng(12)
    x = rng.standard_normal((R, n))
    spec = est(x, fs=FS)
    f1, f2 = 100.0, 160.0
    truth = 2 * (f2 - f1) / FS
    lo, hi = _independent_interval(spec, f1, f2)
    naive = float(np.mean((lo <= truth) & (truth <= hi)))
    assert naive < 0.91, (name, naive)
    assert 0.93 <= _coverage(spec.band_power(f1, f2), truth) <= 0.97


def test_boxcar_periodogram_bins_are_independent():
    # with a rectangular window and no zero padding the periodogram bins are independent
    # (Percival & Walden 1993, section 6.6, from memory): the correlation structure is a delta
    from specbench.measure import structure_of

    spec = sb.Periodogram()(np.random.default_rng(0).standard_normal(1024), fs=FS)
    assert structure_of(spec).r.tolist() == [1.0]


def test_hann_adjacent_bin_correlation_is_four_ninths():
    # |sum h^2 e^{-i 2 pi t/N}|^2 / (sum h^2)^2 for Hann = (1/4 / 3/8)^2 = 4/9 (computed from the
    # window's cosine series; Percival & Walden 1993 eq. for the spectral window, common practice)
    from specbench.measure import structure_of

    spec = sb.Periodogram(window="hann")(np.random.default_rng(0).standard_normal(1024), fs=FS)
    r = structure_of(spec).r
    assert r[1] == pytest.approx(4 / 9, abs=1e-9)
    assert r[2] == pytest.approx(1 / 36, abs=1e-9)


def test_full_band_equals_parseval_sum_and_rms():
    rng = np.random.default_rng(3)
    x = rng.standard_normal(50_000)
    for est in (sb.Welch(), sb.Welch(nfft=2048), sb.Periodogram(), sb.Multitaper(segment_length=4096),
                sb.Correlogram(max_lag=128)):
        spec = est(x, fs=FS)
        total = float(spec.view("density")[0].sum() * spec.df)
        m = spec.band_power(0.0, FS / 2)
        assert m.value == pytest.approx(total, rel=1e-12)
        r = spec.band_rms(0.0, FS / 2)
        assert r.value == pytest.approx(np.sqrt(total), rel=1e-12)
        assert r.lower == pytest.approx(np.sqrt(m.lower)) and r.upper == pytest.approx(np.sqrt(m.upper))
        # adjacent bands add up exactly (partial bins split by their fraction)
        a, b = spec.band_power(0.0, 123.4), spec.band_power(123.4, FS / 2)
        assert a.value + b.value == pytest.approx(total, rel=1e-12)


def test_partial_bins_are_weighted_and_band_reported():
    spec = sb.Welch(segment_length=100, window="boxcar", overlap=0.0)(
        np.random.default_rng(1).standard_normal(10_000), fs=FS)  # bins every 10 Hz
    m = spec.band_power(102.5, 117.5)
    d = spec.value
    k = int(np.argmin(abs(spec.freq - 110)))
    expected = d[k - 1] * 2.5 + d[k] * 10 + d[k + 1] * 2.5  # cells [95,105], [105,115], [115,125]
    assert m.value == pytest.approx(expected, rel=1e-12)
    assert m.band == (102.5, 117.5) and m.bins == 3
    assert "partial bins weighted" in m.method


def test_multichannel_band_power_per_channel():
    rng = np.random.default_rng(2)
    x = rng.standard_normal((3, 20_000)) * np.array([[1.0], [2.0], [3.0]])
    spec = sb.Welch()(sb.Signal(x, fs=FS, channels=["a", "b", "c"], unit="V"))
    m = spec.band_power(50, 150)
    assert np.shape(m.value) == (3,)
    assert m.value == pytest.approx(2 * np.array([1, 4, 9]) * 100 / FS, rel=0.1)
    assert spec.channel("b").band_power(50, 150).value == pytest.approx(m.value[1])
    assert m.unit == "V^2"


@pytest.mark.slow
def test_noise_floor_value_and_coverage():
    # robust floor: median / chi-square median bias; white noise floor is 2 sigma^2 / fs
    rng = np.random.default_rng(21)
    for est, n in [(sb.Welch(segment_length=256), 4096), (sb.Periodogram(window="hann"), 1024),
                   (sb.Multitaper(bandwidth=3.0), 1024)]:
        x = rng.standard_normal((1000, n))
        t = np.arange(n) / FS
        x = x + 0.5 * np.sin(2 * np.pi * 237.1 * t)  # a tone inside the band barely moves the median
        spec = est(x, fs=FS)
        fl = spec.noise_floor(100.0, 400.0)
        truth = 2 / FS
        assert np.mean(fl.value) == pytest.approx(truth, rel=0.03), est
        cov = float(np.mean((fl.lower <= truth) & (truth <= fl.upper)))
        assert 0.92 <= cov <= 0.995, (est, cov)
